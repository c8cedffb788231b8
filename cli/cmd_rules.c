/* remtone rules: the indices, their cutoffs and sources. */
#include <string.h>

#include "cli.h"

enum { KEY_CUTOFFS = 1 };

static const cli_option OPTIONS[] = {
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "show the cutoffs of a lab's cutoff file instead"},
    {0},
};

static int on_option(void *ctx, int key, const char *arg)
{
    if (key == KEY_CUTOFFS)
        *(const char **)ctx = arg;
    return EXIT_OK;
}

static int run(int argc, char **argv)
{
    const char *file = NULL;
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_RULES, argc, argv, on_option, &file, pos, 0, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    rt_error err;
    rt_error_clear(&err);
    rt_cutoffs cutoffs;
    rt_cutoffs_published(&cutoffs);
    if (file && rt_cutoffs_load(&cutoffs, file, &err) != RT_OK)
        return cli_report(&err, 0);
    if (rt_rules_write_text(&cutoffs, stdout, &err) != RT_OK)
        return cli_report(&err, 1);
    return EXIT_OK;
}

const cli_command CLI_RULES = {"rules", "[--cutoffs FILE]",
                               "Print every index with its cutoff and source.", OPTIONS, run, NULL};
