/* remtone command-line program: parses options into a configuration and makes
 * one library call per step. It holds no science; it uses the public API only. */
#include <stdio.h>
#include <string.h>

#include "cli.h"

static const cli_command *const COMMANDS[] = {&CLI_SCORE, &CLI_SCAN, &CLI_SYNTH, &CLI_RULES, &CLI_COHORT, &CLI_COHORT_MERGE};
enum { N_COMMANDS = sizeof COMMANDS / sizeof COMMANDS[0] };

static void usage(FILE *out)
{
    fprintf(out, "remtone %s: REM sleep without atonia from scored polysomnography\n\n"
                 "usage: remtone COMMAND [options]\n\ncommands:\n", rt_version());
    for (int i = 0; i < N_COMMANDS; i++)
        fprintf(out, "  %-13s %s\n", COMMANDS[i]->name, COMMANDS[i]->summary);
    fprintf(out, "\n'remtone COMMAND --help' lists a command's options. "
                 "Exit codes: README.md.\n");
}

/* Standard output is an output like any other: a write that failed (a full
 * disk, a closed pipe) is exit 7, never a silent 0. */
static int finish(int rc)
{
    if (fflush(stdout) != 0 || ferror(stdout)) {
        fprintf(stderr, "remtone: standard output: cannot write\n");
        return rc == EXIT_OK ? EXIT_OUTPUT : rc;
    }
    return rc;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return EXIT_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "help") == 0) {
        usage(stdout);
        return finish(EXIT_OK);
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("remtone %s\n", rt_version());
        return finish(EXIT_OK);
    }
    for (int i = 0; i < N_COMMANDS; i++)
        if (strcmp(argv[1], COMMANDS[i]->name) == 0)
            return finish(COMMANDS[i]->run(argc - 1, argv + 1));
    fprintf(stderr, "remtone: unknown command '%s'\n", argv[1]);
    usage(stderr);
    return EXIT_USAGE;
}
