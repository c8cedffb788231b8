/* remtone rules: the indices, their cutoffs and sources. */
#include <string.h>

#include "cli.h"

enum { KEY_CUTOFFS = 1, KEY_NORMS, KEY_PARAMS };

static const cli_option OPTIONS[] = {
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "show the cutoffs of a lab's cutoff file (CSV index,cutoff,unit), each with its line"},
    {"norms", 1, KEY_NORMS, "FILE", "also show the rows of a lab's norms file (CSV index,sex,age_from,age_to,percentile,value,unit,source[,method], as score --norms reads it), each with its line"},
    {"params", 0, KEY_PARAMS, NULL, "print the scoring parameters (Markdown) instead"},
    {0},
};

typedef struct rules_cfg {
    const char *cutoffs;
    const char *norms;
    bool params;
} rules_cfg;

static int on_option(void *ctx, int key, const char *arg)
{
    rules_cfg *c = ctx;
    if (key == KEY_CUTOFFS)
        c->cutoffs = arg;
    else if (key == KEY_NORMS)
        c->norms = arg;
    else if (key == KEY_PARAMS)
        c->params = true;
    return EXIT_OK;
}

static int run(int argc, char **argv)
{
    rules_cfg cfg = {NULL, NULL, false};
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_RULES, argc, argv, on_option, &cfg, pos, 0, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    const char *file = cfg.cutoffs;
    rt_error err;
    rt_error_clear(&err);
    rt_status st;
    if (cfg.params) {
        st = rt_params_write_markdown(stdout, &err);
        return st == RT_OK ? EXIT_OK : cli_report(st, &err, 1);
    }
    rt_cutoffs cutoffs;
    rt_cutoffs_published(&cutoffs);
    if (file && (st = rt_cutoffs_load(&cutoffs, file, &err)) != RT_OK)
        return cli_report(st, &err, 0);
    /* read before anything is printed: a refused file leaves no half listing */
    rt_norms *norms = NULL;
    if (cfg.norms && (st = rt_norms_load(cfg.norms, &norms, &err)) != RT_OK)
        return cli_report(st, &err, 0);
    st = rt_rules_write_text(&cutoffs, stdout, &err);
    if (st == RT_OK && norms)
        st = rt_norms_write_text(norms, stdout, &err);
    rt_norms_free(norms);
    return st == RT_OK ? EXIT_OK : cli_report(st, &err, 1);
}

const cli_command CLI_RULES = {"rules", "[--cutoffs FILE] [--norms FILE] [--params]",
                               "Print every index with its cutoff and source, and a lab's norms.", OPTIONS, run, NULL};
