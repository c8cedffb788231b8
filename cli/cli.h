/* The command-line layer: an option table per command drives getopt_long and
 * the help text, and statuses map to the exit codes documented in README.md. */
#ifndef REMTONE_CLI_H
#define REMTONE_CLI_H

#include <stdio.h>

#include "remtone/remtone.h"

/* Exit codes (README.md, "Exit codes"). */
enum {
    EXIT_OK = 0,
    EXIT_USAGE = 2,      /* bad command line */
    EXIT_INPUT_IO = 3,   /* an input file cannot be opened or read */
    EXIT_RECORDING = 4,  /* the recording is malformed or unsupported */
    EXIT_STAGING = 5,    /* staging, events, label map, cutoff or norms file malformed */
    EXIT_CHANNEL = 6,    /* a channel role is missing, ambiguous or has a wrong unit */
    EXIT_OUTPUT = 7,     /* an output file cannot be written */
    EXIT_NOMEM = 8,      /* out of memory */
    EXIT_INTERNAL = 9    /* an internal error (a bug in remtone) */
};

typedef struct cli_option {
    const char *name;    /* long option without "--" */
    int has_arg;         /* 0 or 1 */
    int key;             /* value passed to the handler */
    const char *metavar; /* shown in help when has_arg */
    const char *help;
} cli_option;

typedef struct cli_command {
    const char *name;
    const char *usage;     /* after "remtone NAME " */
    const char *summary;   /* one line */
    const cli_option *options; /* terminated by a zero entry */
    int (*run)(int argc, char **argv);
    const char *operand;   /* the one positional argument ("a recording"), NULL = none */
} cli_command;

/* Parses argv (argv[0] = command name) with the table; calls on_option for
 * each option and collects positionals into positional[0..*n_positional);
 * exactly one is required when cmd->operand is set, none otherwise.
 * Returns EXIT_OK, or EXIT_USAGE after printing the problem. --help prints
 * the help and returns -1 (the caller exits 0). */
int cli_parse(const cli_command *cmd, int argc, char **argv,
              int (*on_option)(void *ctx, int key, const char *arg), void *ctx,
              char **positional, int max_positional, int *n_positional);

void cli_print_help(FILE *out, const cli_command *cmd);

/* Maps a library status to an exit code; output = the failed call wrote output. */
int cli_exit_code(rt_status status, int output);

/* An output that is also an input would destroy it. Files are compared by
 * device and inode, so links and other spellings of a path are caught.
 * Returns EXIT_OK, or EXIT_USAGE after saying which option names which input. */
int cli_refuse_output_over_input(const char *command, const char *option, const char *output,
                                 const char *const *inputs, size_t n_inputs);

/* One output of a command: the option that names it (without "--") and its
 * path (NULL = not asked for, "-" = standard output). */
typedef struct cli_output {
    const char *option;
    const char *path;
} cli_output;

/* The one check every command makes on its outputs before reading anything:
 * no output is one of the inputs (cli_refuse_output_over_input), and no two
 * outputs are the same destination -- both standard output, or the same
 * file however spelled (device and inode when it exists, otherwise the same
 * folder and name) -- since one would replace or interleave the other.
 * Returns EXIT_OK, or EXIT_USAGE after naming both options. */
int cli_check_outputs(const char *command, const cli_output *outputs, size_t n_outputs,
                      const char *const *inputs, size_t n_inputs);

/* Prints "remtone: message" to stderr and returns the exit code of status,
 * the status the failed call returned (err may be NULL or hold no message:
 * the status is still named). */
int cli_report(rt_status status, const rt_error *err, int output);

extern const cli_command CLI_SCAN, CLI_SYNTH, CLI_SCORE, CLI_RULES;
extern const cli_command CLI_COHORT, CLI_COHORT_MERGE; /* cmd_cohort.c */

#endif
