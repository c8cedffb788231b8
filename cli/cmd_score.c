/* remtone score REC --stages FILE: the night result. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "exclusion_opts.h"
#include "roles_opts.h"

enum {
    KEY_STAGES = 1, KEY_EVENTS, KEY_JSON, KEY_CUTOFFS, KEY_MIN_REM, KEY_QUIET,
    KEY_HTML, KEY_MINIS, KEY_ANNOTATIONS, KEY_SHOW_IDENTITY, KEY_RECORDING_ID, KEY_THREADS,
    KEY_PERIODS, KEY_AGE, KEY_SEX, KEY_CORRECTIONS,
    KEY_EVIDENCE, KEY_VIDEO_OFFSET, KEY_VIDEO_START, KEY_ANNOTATE_BURSTS, KEY_BLOCK_S, KEY_NORMS
};

static const cli_option OPTIONS[] = {
    {"stages", 1, KEY_STAGES, "FILE", "staging: stage table CSV (start_s,duration_s,stage), an EDF+ file with stage annotations (and its events), or remtone's XML scoring file (staging, events, manual RSWA scoring); told by content (default: the recording's own EDF+ annotations, stages and events)"},
    {"events", 1, KEY_EVENTS, "FILE", "event table CSV (start_s,duration_s,type: arousals, respiratory events, limb movements, ...); events in an EDF+ or XML staging file are read with it"},
    {"json", 1, KEY_JSON, "PATH", "write the night result as JSON ('-' for standard output)"},
    {"cutoffs", 1, KEY_CUTOFFS, "FILE", "a lab's own cutoffs (CSV index,cutoff,unit) instead of the published ones"},
    {"min-rem", 1, KEY_MIN_REM, "MIN", "least scorable REM minutes for an assessable night (default 5)"},
    {"quiet", 0, KEY_QUIET, NULL, "do not print the text summary"},
    CLI_EXCLUSION_OPTIONS,
    {"html", 1, KEY_HTML, "PATH", "write the review report, one self-contained HTML page ('-' for standard output)"},
    {"minis", 1, KEY_MINIS, "PATH", "write the audit table: one CSV row per REM 3-s mini-epoch and channel"},
    {"annotations", 1, KEY_ANNOTATIONS, "PATH", "write the detected activity as an EDF+ annotation file"},
    {"periods", 1, KEY_PERIODS, "PATH", "write every index per REM period and per half of the night as CSV"},
    {"age", 1, KEY_AGE, "YEARS", "the person's age: place the indices against published norms (context only)"},
    {"sex", 1, KEY_SEX, "F|M", "the person's sex, for the norms (context only)"},
    {"norms", 1, KEY_NORMS, "FILE", "a lab's normative values by sex and age band (CSV index,sex,age_from,age_to,percentile,value,unit,source[,method]; docs/scoring.md, \"Norms\"): the indices it lists are placed against its row for --age and --sex instead of the built-in overall values (context only)"},
    {"annotate-bursts", 1, KEY_ANNOTATE_BURSTS, "RULES", "bursts in the --annotations file: sinbar (default), aasm, montreal, or several joined by commas"},
    {"evidence", 1, KEY_EVIDENCE, "PATH", "write every flagged REM epoch in time order as CSV ('-' for standard output)"},
    {"video-offset", 1, KEY_VIDEO_OFFSET, "S", "the video started S seconds after the recording (negative: before); adds a video time to every evidence row"},
    {"video-start", 1, KEY_VIDEO_START, "HH:MM:SS", "the clock time the video started; adds a video time to every evidence row"},
    {"show-identity", 0, KEY_SHOW_IDENTITY, NULL, "show the recording header's patient fields and date in the report"},
    {"recording-id", 1, KEY_RECORDING_ID, "ID", "name the recording in the report (default: its file name)"},
    {"corrections", 1, KEY_CORRECTIONS, "FILE", "rescore with a reviewer's decisions: the mini-epoch "
     "table CSV with its decision columns filled, an EDF+ annotation file or an XML scoring "
     "file with <corrections> (told by content; docs/corrections.md)"},
    {"threads", 1, KEY_THREADS, "N", "score with N threads, 1 to 256 (default: the processor cores "
                                     "available; the result is the same for any N)"},
    {"block-s", 1, KEY_BLOCK_S, "S", "condition REM bouts longer than S seconds (whole minutes, at "
                                     "least 60) in blocks, for memory (default: 262144 samples of the "
                                     "fastest channel; docs/scoring.md, \"Long bouts\")"},
    CLI_ROLE_OPTIONS,
    {0},
};

typedef struct score_config {
    const char *stages, *events, *json, *cutoffs, *labels, *norms;
    const char *html, *minis, *annotations, *periods, *corrections, *evidence;
    const char *video_start;     /* HH:MM:SS, turned into an offset once the recording is open */
    rt_report_options report;
    double age;              /* NaN: not given */
    char sex;                /* 0: not given */
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
    int rc = EXIT_OK;
    if (cli_exclusion_option("score", &c->params, &c->labels, key, arg, &rc))
        return rc;
    char *end = NULL;
    switch (key) {
    case KEY_STAGES: c->stages = arg; break;
    case KEY_EVENTS: c->events = arg; break;
    case KEY_JSON: c->json = arg; break;
    case KEY_CUTOFFS: c->cutoffs = arg; break;
    case KEY_NORMS: c->norms = arg; break;
    case KEY_QUIET: c->quiet = 1; break;
    case KEY_HTML: c->html = arg; break;
    case KEY_MINIS: c->minis = arg; break;
    case KEY_ANNOTATIONS: c->annotations = arg; break;
    case KEY_EVIDENCE: c->evidence = arg; break;
    case KEY_ANNOTATE_BURSTS: {
        static const struct { const char *name; unsigned label; } RULES[] = {
            {"sinbar", RT_LABEL_SINBAR_PHASIC}, {"aasm", RT_LABEL_AASM_PHASIC},
            {"montreal", RT_LABEL_MONTREAL_PHASIC}};
        c->report.annotate_rules = 0;
        for (const char *p = arg; *p;) {
            size_t len = strcspn(p, ","), k = 0;
            while (k < 3 && !(strlen(RULES[k].name) == len && strncmp(p, RULES[k].name, len) == 0))
                k++;
            if (k == 3) {
                fprintf(stderr, "remtone score: --annotate-bursts takes sinbar, aasm, montreal or "
                                "several joined by commas, got '%s'\n", arg);
                return EXIT_USAGE;
            }
            c->report.annotate_rules |= RULES[k].label;
            p += len + (p[len] == ',');
        }
        if (!c->report.annotate_rules) {
            fprintf(stderr, "remtone score: --annotate-bursts needs a rule set, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    }
    case KEY_VIDEO_START: {
        int h, m, s, used = 0;
        if (c->report.video_given ||
            sscanf(arg, "%2d:%2d:%2d%n", &h, &m, &s, &used) != 3 || arg[used] || h < 0 ||
            h > 23 || m < 0 || m > 59 || s < 0 || s > 59) {
            fprintf(stderr, "remtone score: --video-start must be a clock time HH:MM:SS, given "
                            "once and not with --video-offset, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        c->video_start = arg;
        c->report.video_given = true;
        break;
    }
    case KEY_VIDEO_OFFSET:
        c->report.video_offset_s = strtod(arg, &end);
        if (end == arg || *end || c->report.video_given ||
            !(fabs(c->report.video_offset_s) <= 86400.0)) {
            fprintf(stderr, "remtone score: --video-offset must be seconds within one day, given "
                            "once and not with --video-start, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        c->report.video_given = true;
        break;
    case KEY_CORRECTIONS: c->corrections = arg; break;
    case KEY_PERIODS: c->periods = arg; break;
    case KEY_AGE:
        c->age = strtod(arg, &end);
        if (end == arg || *end || !(c->age >= 0 && c->age <= 130)) {
            fprintf(stderr, "remtone score: --age must be 0 to 130 years, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_SEX:
        if ((arg[0] != 'F' && arg[0] != 'M' && arg[0] != 'f' && arg[0] != 'm') || arg[1]) {
            fprintf(stderr, "remtone score: --sex must be F or M, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        c->sex = (char)(arg[0] == 'f' || arg[0] == 'F' ? 'F' : 'M');
        break;
    case KEY_SHOW_IDENTITY: c->report.show_identity = true; break;
    case KEY_RECORDING_ID: c->report.recording_id = arg; break;
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
    rt_corrections *corrections;
    rt_norms *norms;
} loaded;

static rt_status load_inputs(const score_config *c, const char *rec_path, loaded *l, rt_error *err)
{
    rt_cutoffs_published(&l->cutoffs);
    rt_status st = RT_OK;
    if (c->cutoffs)
        st = rt_cutoffs_load(&l->cutoffs, c->cutoffs, err);
    if (st == RT_OK && c->norms)
        st = rt_norms_load(c->norms, &l->norms, err);
    if (st == RT_OK && c->labels)
        st = rt_labelmap_load(c->labels, &l->labels, err);
    if (st == RT_OK)
        st = rt_recording_open(rec_path, &l->rec, err);
    /* an annotation-only EDF+ (a hypnogram or activity file) is valid, but
     * holds no EMG: it belongs after --stages, not in the recording's place */
    if (st == RT_OK && rt_recording_channel_count(l->rec) == 0) {
        st = err->status = RT_ERR_RECORDING;
        snprintf(err->message, sizeof err->message,
                 "%s: an EDF+ file with annotations only (no signals), so no EMG to score; give "
                 "the recording first and this file as --stages", rec_path);
    }
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
    if (st == RT_OK && c->corrections)
        st = rt_corrections_load(c->corrections, &l->corrections, err);
    return st;
}


static int run(int argc, char **argv)
{
    score_config c;
    memset(&c, 0, sizeof c);
    c.min_rem = -1;
    c.age = NAN;
    rt_score_params_default(&c.params);
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_SCORE, argc, argv, on_option, &c, pos, 1, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    const char *inputs[] = {pos[0], c.stages, c.events, c.cutoffs, c.labels, c.corrections,
                            c.norms};
    size_t n_inputs = sizeof inputs / sizeof inputs[0];
    const cli_output outputs[] = {{"json", c.json}, {"html", c.html}, {"minis", c.minis},
                                  {"annotations", c.annotations}, {"periods", c.periods},
                                  {"evidence", c.evidence}};
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
    if (st == RT_OK && c.video_start) {
        int h = 0, m = 0, s = 0;
        sscanf(c.video_start, "%d:%d:%d", &h, &m, &s); /* checked in on_option */
        c.report.video_offset_s = rt_video_offset_from_clock(l.rec, h, m, s);
    }
    if (st == RT_OK) {
        if (c.min_rem >= 0)
            c.params.min_scorable_min = c.min_rem;
        st = rt_night_score_blocks(l.rec, &l.roles, l.tl, &c.params, &l.cutoffs, c.threads,
                                   c.block_s, &night, &err);
    }
    /* the norms place the indices the night ends with: the corrected ones */
    if (st == RT_OK && l.corrections)
        st = rt_night_correct(night, l.tl, l.corrections, &err);
    if (st == RT_OK && (!isnan(c.age) || c.sex || l.norms))
        st = rt_night_place_norms_from(night, l.norms, c.age, c.sex, &err);
    if (st == RT_OK && !c.quiet && !(c.json && strcmp(c.json, "-") == 0) &&
        !(c.html && strcmp(c.html, "-") == 0) && !(c.minis && strcmp(c.minis, "-") == 0) &&
        !(c.periods && strcmp(c.periods, "-") == 0) && !(c.evidence && strcmp(c.evidence, "-") == 0))
        st = rt_night_write_text(night, stdout, &err);
    if (st == RT_OK && c.json) {
        rt_run_inputs in = {pos[0], c.stages, c.events, c.cutoffs, c.labels, c.corrections,
                            &c.report};
        st = rt_night_write_json(night, &in, c.json, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.html) {
        st = rt_night_write_html(night, l.rec, l.tl, &c.report, c.html, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.minis) {
        st = rt_night_write_minis_csv(night, l.rec, &c.report, c.minis, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.evidence) {
        st = rt_night_write_evidence_csv(night, l.rec, &c.report, c.evidence, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.annotations) {
        st = rt_night_write_annotations(night, l.rec, &c.report, c.annotations, &err);
        output_error = 1;
    }
    if (st == RT_OK && c.periods) {
        st = rt_night_write_periods_csv(night, l.rec, c.periods, &err);
        output_error = 1;
    }
    rt_night_free(night);
    rt_corrections_free(l.corrections);
    rt_norms_free(l.norms);
    rt_timeline_free(l.tl);
    rt_labelmap_free(l.labels);
    rt_recording_close(l.rec);
    if (st == RT_OK)
        return EXIT_OK;
    return cli_report(st, &err, output_error && st == RT_ERR_IO);
}

const cli_command CLI_SCORE = {"score", "REC [--stages FILE] [--events FILE] [--json PATH] [options]",
                               "Score a night: RSWA indices, review flag and cautions.", OPTIONS, run, "one recording"};
