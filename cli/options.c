/* Table-driven option parsing and help for every command. */
#include <getopt.h>
#include <libgen.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cli.h"

enum { MAX_OPTIONS = 48, KEY_OFFSET = 0x10000 }; /* keeps keys clear of getopt's own values */

void cli_print_help(FILE *out, const cli_command *cmd)
{
    fprintf(out, "usage: remtone %s %s\n\n%s\n\noptions:\n", cmd->name, cmd->usage, cmd->summary);
    for (const cli_option *o = cmd->options; o && o->name; o++) {
        char left[64];
        snprintf(left, sizeof left, "--%s%s%s", o->name, o->has_arg ? " " : "",
                 o->has_arg ? o->metavar : "");
        fprintf(out, "  %-28s %s\n", left, o->help);
    }
    fprintf(out, "  %-28s %s\n", "--help", "show this help");
}

/* getopt_long takes a unique prefix of a long option; a prefix of several is
 * refused. Names the candidates then, so the user sees what to type; returns
 * whether arg was such a prefix. */
static bool ambiguous(const cli_command *cmd, const char *arg)
{
    if (strncmp(arg, "--", 2) != 0)
        return false;
    const char *name = arg + 2;
    size_t len = strcspn(name, "=");
    int found = 0;
    for (const cli_option *o = cmd->options; o && o->name; o++)
        found += len > 0 && strncmp(o->name, name, len) == 0 && strlen(o->name) != len;
    if (found < 2)
        return false;
    fprintf(stderr, "remtone %s: --%.*s is ambiguous; it could be", cmd->name, (int)len, name);
    int k = 0;
    for (const cli_option *o = cmd->options; o && o->name; o++)
        if (strncmp(o->name, name, len) == 0)
            fprintf(stderr, "%s --%s", k++ ? "," : "", o->name);
    fprintf(stderr, "\n");
    return true;
}

int cli_parse(const cli_command *cmd, int argc, char **argv,
              int (*on_option)(void *ctx, int key, const char *arg), void *ctx,
              char **positional, int max_positional, int *n_positional)
{
    struct option longs[MAX_OPTIONS + 2];
    int n = 0;
    for (const cli_option *o = cmd->options; o && o->name && n < MAX_OPTIONS; o++, n++)
        longs[n] = (struct option){o->name, o->has_arg ? required_argument : no_argument, NULL,
                                   o->key + KEY_OFFSET};
    longs[n++] = (struct option){"help", no_argument, NULL, 'h'};
    longs[n] = (struct option){NULL, 0, NULL, 0};
    *n_positional = 0;
    optind = 1;
    opterr = 0;
    int c;
    /* "-" as the first char of optstring keeps positionals in order */
    while ((c = getopt_long(argc, argv, "-h", longs, NULL)) != -1) {
        if (c == 1) {
            if (*n_positional >= max_positional) {
                fprintf(stderr, "remtone %s: unexpected argument '%s'\n", cmd->name, optarg);
                return EXIT_USAGE;
            }
            positional[(*n_positional)++] = optarg;
        } else if (c == 'h') {
            cli_print_help(stdout, cmd);
            return -1;
        } else if (c == '?' || c == ':') {
            if (!ambiguous(cmd, argv[optind - 1]))
                fprintf(stderr, "remtone %s: unknown option or missing value: %s\n", cmd->name,
                        argv[optind - 1]);
            fprintf(stderr, "run 'remtone %s --help' for the options\n", cmd->name);
            return EXIT_USAGE;
        } else {
            int rc = on_option(ctx, c - KEY_OFFSET, optarg);
            if (rc != EXIT_OK)
                return rc;
        }
    }
    if (*n_positional != (cmd->operand ? 1 : 0)) {
        if (cmd->operand)
            fprintf(stderr, "remtone %s: give %s (remtone %s --help)\n", cmd->name, cmd->operand,
                    cmd->name);
        else
            fprintf(stderr, "remtone %s: unexpected argument '%s'\n", cmd->name, positional[0]);
        return EXIT_USAGE;
    }
    return EXIT_OK;
}

int cli_exit_code(rt_status status, int output)
{
    switch (status) {
    case RT_OK: return EXIT_OK;
    case RT_ERR_USAGE: return EXIT_USAGE;
    case RT_ERR_IO: return output ? EXIT_OUTPUT : EXIT_INPUT_IO;
    case RT_ERR_RECORDING: return EXIT_RECORDING;
    case RT_ERR_STAGING: return EXIT_STAGING;
    case RT_ERR_CHANNEL: return EXIT_CHANNEL;
    case RT_ERR_NOMEM: return EXIT_NOMEM;
    case RT_ERR_INTERNAL: return EXIT_INTERNAL;
    }
    return EXIT_INTERNAL;
}

int cli_report(rt_status status, const rt_error *err, int output)
{
    /* The status returned is the truth; the message explains it. Running out
     * of memory is always named in those words, whatever the place said (a
     * file that "cannot open: Cannot allocate memory"), and a message left
     * empty still names the failure. */
    const char *what = status == RT_ERR_NOMEM ? "out of memory" : rt_status_name(status);
    const char *msg = err && err->message[0] && err->status == status ? err->message : NULL;
    if (msg && (status != RT_ERR_NOMEM || strstr(msg, "out of memory")))
        fprintf(stderr, "remtone: %s\n", msg);
    else if (msg)
        fprintf(stderr, "remtone: out of memory: %s\n", msg);
    else if (err && err->message[0]) /* a message of another status: shown, not trusted */
        fprintf(stderr, "remtone: %s (%s)\n", what, err->message);
    else
        fprintf(stderr, "remtone: %s\n", what);
    return cli_exit_code(status, output);
}

int cli_refuse_output_over_input(const char *command, const char *option, const char *output,
                                 const char *const *inputs, size_t n_inputs)
{
    struct stat so, si;
    if (!output || strcmp(output, "-") == 0 || stat(output, &so) != 0 || !S_ISREG(so.st_mode))
        return EXIT_OK;
    for (size_t i = 0; i < n_inputs; i++)
        if (inputs[i] && stat(inputs[i], &si) == 0 && si.st_dev == so.st_dev &&
            si.st_ino == so.st_ino) {
            fprintf(stderr, "remtone %s: --%s %s is the input file %s; refusing to overwrite an "
                            "input\n", command, option, output, inputs[i]);
            return EXIT_USAGE;
        }
    return EXIT_OK;
}

/* The same regular file, or the same name in the same folder for files not
 * made yet; "-" only matches "-". Devices such as /dev/null may take any
 * number of outputs. */
static int same_destination(const char *a, const char *b)
{
    if (strcmp(a, "-") == 0 || strcmp(b, "-") == 0)
        return strcmp(a, b) == 0;
    struct stat sa, sb;
    int ea = stat(a, &sa) == 0, eb = stat(b, &sb) == 0;
    if (ea && eb)
        return S_ISREG(sa.st_mode) && sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
    if (strcmp(a, b) == 0)
        return 1;
    if (ea || eb)
        return 0;
    /* neither exists yet: compare folder identity and the last name */
    char ca[4096], cb[4096];
    snprintf(ca, sizeof ca, "%s", a);
    snprintf(cb, sizeof cb, "%s", b);
    char *na = basename(ca), *nb = basename(cb);
    if (strcmp(na, nb) != 0)
        return 0;
    snprintf(ca, sizeof ca, "%s", a);
    snprintf(cb, sizeof cb, "%s", b);
    const char *da = dirname(ca), *db = dirname(cb);
    return stat(da, &sa) == 0 && stat(db, &sb) == 0 && sa.st_dev == sb.st_dev &&
           sa.st_ino == sb.st_ino;
}

int cli_check_outputs(const char *command, const cli_output *outputs, size_t n_outputs,
                      const char *const *inputs, size_t n_inputs)
{
    for (size_t i = 0; i < n_outputs; i++) {
        if (!outputs[i].path)
            continue;
        int rc = cli_refuse_output_over_input(command, outputs[i].option, outputs[i].path, inputs,
                                              n_inputs);
        if (rc != EXIT_OK)
            return rc;
        for (size_t j = i + 1; j < n_outputs; j++)
            if (outputs[j].path && same_destination(outputs[i].path, outputs[j].path)) {
                fprintf(stderr, "remtone %s: --%s %s and --%s %s name the same %s; give each "
                                "output its own destination\n", command, outputs[i].option,
                        outputs[i].path, outputs[j].option, outputs[j].path,
                        strcmp(outputs[i].path, "-") == 0 ? "destination (standard output)"
                                                          : "file");
                return EXIT_USAGE;
            }
    }
    return EXIT_OK;
}
