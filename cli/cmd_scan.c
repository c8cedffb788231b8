/* remtone scan REC: the channels, their roles and the recording's length. */
#include <string.h>

#include "cli.h"
#include "roles_opts.h"

enum { KEY_JSON = 1 };

static const cli_option OPTIONS[] = {
    {"json", 1, KEY_JSON, "PATH", "also write the scan as JSON to PATH ('-' for standard output)"},
    CLI_ROLE_OPTIONS,
    {0},
};

typedef struct scan_config {
    const char *json;
    rt_role_options roles;
} scan_config;

static int on_option(void *ctx, int key, const char *arg)
{
    scan_config *c = ctx;
    if (cli_role_option(&c->roles, key, arg))
        return EXIT_OK;
    if (key == KEY_JSON)
        c->json = arg;
    return EXIT_OK;
}


static int run(int argc, char **argv)
{
    scan_config c;
    memset(&c, 0, sizeof c);
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_SCAN, argc, argv, on_option, &c, pos, 1, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    const char *inputs[] = {pos[0]};
    const cli_output outputs[] = {{"json", c.json}};
    if ((rc = cli_check_outputs("scan", outputs, 1, inputs, 1)) != EXIT_OK)
        return rc;
    rt_error err;
    rt_error_clear(&err);
    rt_recording *rec = NULL;
    rt_status st = rt_recording_open(pos[0], &rec, &err);
    if (st != RT_OK)
        return cli_report(st, &err, 0);
    rt_role_map map;
    rt_channel_quality quality[RT_ROLE_COUNT];
    st = rt_roles_resolve(rec, &c.roles, &map, &err);
    if (st == RT_OK)
        st = rt_recording_quality(rec, &map, quality, &err);
    if (st == RT_OK && !(c.json && strcmp(c.json, "-") == 0))
        st = rt_scan_write_text(rec, &map, quality, stdout, &err);
    int out_err = 0;
    if (st == RT_OK && c.json) {
        st = rt_scan_write_json(rec, &map, quality, c.json, &err);
        out_err = 1;
    }
    rt_recording_close(rec);
    return st == RT_OK ? EXIT_OK : cli_report(st, &err, out_err && st == RT_ERR_IO);
}

const cli_command CLI_SCAN = {"scan", "REC [options]",
                              "List a recording's channels, rates, units and detected roles.",
                              OPTIONS, run, "one recording"};
