/* remtone score REC --stages FILE: the night result. */
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "roles_opts.h"

enum {
    KEY_STAGES = 1, KEY_EVENTS, KEY_JSON, KEY_CUTOFFS, KEY_LABELS, KEY_MIN_REM, KEY_QUIET,
    KEY_KEEP_ARTIFACTS, KEY_KEEP_SNORING, KEY_KEEP_RESPIRATORY, KEY_EVENT_MARGIN,
    KEY_HTML, KEY_MINIS, KEY_ANNOTATIONS, KEY_SHOW_IDENTITY, KEY_RECORDING_ID, KEY_THREADS,
    KEY_BLOCK_S
};

static const cli_option OPTIONS[] = {
    {"stages", 1, KEY_STAGES, "FILE", "staging: stage table CSV or EDF+ (default: the recording's own annotations)"},
    {"events", 1, KEY_EVENTS, "FILE", "event table CSV (arousals, respiratory events, ...)"},
    {"json", 1, KEY_JSON, "PATH", "write the night result as JSON ('-' for standard output)"},
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "a lab's own cutoffs (CSV index,cutoff) instead of the published ones"},
    {"label-map", 1, KEY_LABELS, "FILE", "map local stage or event labels (CSV label,meaning)"},
    {"min-rem", 1, KEY_MIN_REM, "MIN", "least scorable REM minutes for an assessable night (default 5)"},
    {"quiet", 0, KEY_QUIET, NULL, "do not print the text summary"},
    {"keep-artifacts", 0, KEY_KEEP_ARTIFACTS, NULL, "score mini-epochs under artifact events too"},
    {"keep-snoring", 0, KEY_KEEP_SNORING, NULL, "score mini-epochs under snoring events too"},
    {"keep-respiratory", 0, KEY_KEEP_RESPIRATORY, NULL,
     "score mini-epochs under respiratory events and their arousals too"},
    {"event-margin", 1, KEY_EVENT_MARGIN, "S", "widen every excluding event by S seconds each side (default 0)"},
    {"html", 1, KEY_HTML, "PATH", "write the review report, one self-contained HTML page ('-' for standard output)"},
    {"minis", 1, KEY_MINIS, "PATH", "write the audit table: one CSV row per REM 3-s mini-epoch and channel"},
    {"annotations", 1, KEY_ANNOTATIONS, "PATH", "write the detected activity as an EDF+ annotation file"},
    {"show-identity", 0, KEY_SHOW_IDENTITY, NULL, "show the recording header's patient fields and date in the report"},
    {"recording-id", 1, KEY_RECORDING_ID, "ID", "name the recording in the report (default: its file name)"},
    {"threads", 1, KEY_THREADS, "N", "score with N threads, 1 to 256 (default: the processor cores "
                                     "available; the result is the same for any N)"},
    {"block-s", 1, KEY_BLOCK_S, "S", "condition REM bouts longer than S seconds (whole minutes, at "
                                     "least 60) in blocks, for memory (default: 262144 samples of the "
                                     "fastest channel; docs/scoring.md, \"Long bouts\")"},
    CLI_ROLE_OPTIONS,
    {0},
};

typedef struct score_config {
    const char *stages, *events, *json, *cutoffs, *labels;
    const char *html, *minis, *annotations;
    rt_report_options report;
    double min_rem;
    int quiet;
    int threads;             /* 0: the cores available */
    double block_s;          /* 0: the default block */
    rt_role_options roles;
    rt_score_params params;
} score_config;

static int on_option(void *ctx, int key, const char *arg)
{
    score_config *c = ctx;
    if (cli_role_option(&c->roles, key, arg))
        return EXIT_OK;
    char *end = NULL;
    switch (key) {
    case KEY_STAGES: c->stages = arg; break;
    case KEY_EVENTS: c->events = arg; break;
    case KEY_JSON: c->json = arg; break;
    case KEY_CUTOFFS: c->cutoffs = arg; break;
    case KEY_LABELS: c->labels = arg; break;
    case KEY_QUIET: c->quiet = 1; break;
    case KEY_HTML: c->html = arg; break;
    case KEY_MINIS: c->minis = arg; break;
    case KEY_ANNOTATIONS: c->annotations = arg; break;
    case KEY_SHOW_IDENTITY: c->report.show_identity = true; break;
    case KEY_RECORDING_ID: c->report.recording_id = arg; break;
    case KEY_KEEP_ARTIFACTS: c->params.exclude_artifacts = false; break;
    case KEY_KEEP_SNORING: c->params.exclude_snoring = false; break;
    case KEY_KEEP_RESPIRATORY: c->params.exclude_respiratory = false; break;
    case KEY_EVENT_MARGIN:
        c->params.event_margin_s = strtod(arg, &end);
        if (*end || !(c->params.event_margin_s >= 0 && c->params.event_margin_s <= 60)) {
            fprintf(stderr, "remtone score: --event-margin must be 0 to 60 seconds, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_THREADS: {
        long n = strtol(arg, &end, 10);
        if (end == arg || *end || n < 1 || n > 256) {
            fprintf(stderr, "remtone score: --threads must be 1 to 256, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        c->threads = (int)n;
        break;
    }
    case KEY_BLOCK_S:
        c->block_s = strtod(arg, &end);
        if (end == arg || *end || !(c->block_s >= 60 && c->block_s <= 1e7)) {
            fprintf(stderr, "remtone score: --block-s must be 60 to 10000000 seconds, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_MIN_REM:
        c->min_rem = strtod(arg, &end);
        if (*end || !(c->min_rem >= 0 && c->min_rem <= 600)) {
            fprintf(stderr, "remtone score: --min-rem must be 0 to 600 minutes, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    }
    return EXIT_OK;
}

/* Everything the night needs, loaded in order; the first failure stops. */
typedef struct loaded {
    rt_recording *rec;
    rt_labelmap *labels;
    rt_timeline *tl;
    rt_role_map roles;
    rt_cutoffs cutoffs;
} loaded;

static rt_status load_inputs(const score_config *c, const char *rec_path, loaded *l, rt_error *err)
{
    rt_cutoffs_published(&l->cutoffs);
    rt_status st = RT_OK;
    if (c->cutoffs)
        st = rt_cutoffs_load(&l->cutoffs, c->cutoffs, err);
    if (st == RT_OK && c->labels)
        st = rt_labelmap_load(c->labels, &l->labels, err);
    if (st == RT_OK)
        st = rt_recording_open(rec_path, &l->rec, err);
    if (st == RT_OK)
        st = rt_timeline_new(&l->tl, err);
    if (st == RT_OK)
        st = c->stages ? rt_timeline_load_staging(l->tl, c->stages, l->labels, err)
                       : rt_timeline_load_annotations(l->tl, l->rec, l->labels, true, true, err);
    if (st == RT_OK && c->events)
        st = rt_timeline_load_events_csv(l->tl, c->events, l->labels, err);
    if (st == RT_OK)
        st = rt_timeline_check(l->tl, rt_recording_duration_s(l->rec), err);
    if (st == RT_OK)
        st = rt_roles_resolve(l->rec, &c->roles, &l->roles, err);
    return st;
}


static int run(int argc, char **argv)
{
    score_config c;
    memset(&c, 0, sizeof c);
    c.min_rem = -1;
    rt_score_params_default(&c.params);
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_SCORE, argc, argv, on_option, &c, pos, 1, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    const char *inputs[] = {pos[0], c.stages, c.events, c.cutoffs, c.labels};
    size_t n_inputs = sizeof inputs / sizeof inputs[0];
    const cli_output outputs[] = {{"json", c.json}, {"html", c.html}, {"minis", c.minis},
                                  {"annotations", c.annotations}};
    if ((rc = cli_check_outputs("score", outputs, sizeof outputs / sizeof outputs[0], inputs,
                                n_inputs)) != EXIT_OK)
        return rc;
    rt_error err;
    rt_error_clear(&err);
    loaded l;
    memset(&l, 0, sizeof l);
    rt_night *night = NULL;
    int output_error = 0;
    rt_status st = load_inputs(&c, pos[0], &l, &err);
    if (st == RT_OK) {
        if (c.min_rem >= 0)
            c.params.min_scorable_min = c.min_rem;
        st = rt_night_score_blocks(l.rec, &l.roles, l.tl, &c.params, &l.cutoffs, c.threads,
                                   c.block_s, &night, &err);
    }
    if (st == RT_OK && !c.quiet && !(c.json && strcmp(c.json, "-") == 0) &&
        !(c.html && strcmp(c.html, "-") == 0) && !(c.minis && strcmp(c.minis, "-") == 0))
        st = rt_night_write_text(night, stdout, &err);
    if (st == RT_OK && c.json) {
        rt_run_inputs in = {pos[0], c.stages, c.events, c.cutoffs, c.labels};
        st = rt_night_write_json(night, &in, c.json, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.html) {
        st = rt_night_write_html(night, l.rec, l.tl, &c.report, c.html, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.minis) {
        st = rt_night_write_minis_csv(night, l.rec, c.minis, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.annotations) {
        st = rt_night_write_annotations(night, l.rec, c.annotations, &err);
        output_error = 1;
    }
    rt_night_free(night);
    rt_timeline_free(l.tl);
    rt_labelmap_free(l.labels);
    rt_recording_close(l.rec);
    if (st == RT_OK)
        return EXIT_OK;
    return cli_report(st, &err, output_error && st == RT_ERR_IO);
}

const cli_command CLI_SCORE = {"score", "REC [--stages FILE] [--events FILE] [--json PATH] [options]",
                               "Score a night: RSWA indices, review flag and cautions.", OPTIONS, run, "one recording"};
