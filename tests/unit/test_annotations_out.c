/* The activity annotation file (--annotations): written with EDFlib, read back
 * with remtone's reader (EDFlib underneath, after remtone's own header
 * checks). The file must be EDF+ (EDF+ specification, Kemp & Olivan 2003),
 * start at the recording's start, and hold one annotation at the onset of
 * every burst, every tonic run and every evidence epoch. The evidence ranks
 * are checked against the JSON result, which ranks in its own code. */
#include "support.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

/* EDFlib writes annotation onsets in units of 100 us; remtone reads them
 * back as seconds. */
#define ONSET_TOL_S 1e-4

typedef struct fixture {
    char dir[4096];
    rt_recording *rec;
    rt_night *night;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->dir, sizeof f->dir, "%s", rt_test_dir("annotations_out"));
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_RBD;
    o.hours = 1.5;
    o.seed = rt_test_seed();
    o.start_hour = 23;
    o.start_minute = 47;
    rt_test_score_synthetic(&o, f->dir, false, &f->rec, &f->night);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    rt_night_free(f->night);
    rt_recording_close(f->rec);
    free(f);
    return 0;
}

/* Index of an annotation with this text at this onset (and duration, when
 * duration_s >= 0), or -1. Annotations are ordered by onset, so a binary
 * search finds the first candidate. */
static long find(const rt_recording *a, double onset_s, double duration_s, const char *text)
{
    size_t lo = 0, hi = rt_recording_annotation_count(a);
    while (lo < hi) {
        size_t mid = (lo + hi) / 2;
        if (rt_recording_annotation(a, mid)->onset_s < onset_s - ONSET_TOL_S)
            lo = mid + 1;
        else
            hi = mid;
    }
    for (size_t i = lo; i < rt_recording_annotation_count(a); i++) {
        const rt_annotation *x = rt_recording_annotation(a, i);
        if (x->onset_s > onset_s + ONSET_TOL_S)
            break;
        if (strcmp(x->text, text) == 0 &&
            (duration_s < 0 || fabs(x->duration_s - duration_s) <= ONSET_TOL_S))
            return (long)i;
    }
    return -1;
}

static const char *rule_word(unsigned rules)
{
    return (rules & RT_LABEL_AASM_PHASIC) ? "aasm" : (rules & RT_LABEL_SINBAR_PHASIC) ? "sinbar"
                                                                                       : "montreal";
}

static void every_onset_is_in_the_file(void **state)
{
    fixture *f = *state;
    const rt_night *n = f->night;
    char path[4200];
    snprintf(path, sizeof path, "%s/activity.edf", f->dir);
    rt_error err;
    /* every rule set's bursts asked for, so every burst of the night is in */
    rt_report_options all = {.annotate_rules = RT_LABEL_AASM_PHASIC | RT_LABEL_SINBAR_PHASIC |
                                               RT_LABEL_MONTREAL_PHASIC};
    if (rt_night_write_annotations(n, f->rec, &all, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_recording *a = NULL;
    if (rt_recording_open(path, &a, &err) != RT_OK)
        fail_msg("%s", err.message);
    assert_int_equal(rt_recording_kind(a), RT_FILE_EDFPLUS);
    /* one 1-Hz signal marking REM, so the file lasts as long as the recording */
    assert_int_equal(rt_recording_channel_count(a), 1);
    assert_string_equal(rt_recording_channel(a, 0)->label, "remtone REM");
    print_message("# durations: recording %.3f s, activity file %.3f s\n",
                  rt_recording_duration_s(f->rec), rt_recording_duration_s(a));
    assert_true(fabs(rt_recording_duration_s(a) - rt_recording_duration_s(f->rec)) < 1e-9);
    /* the same start date and time as the recording */
    rt_clock_time s0 = rt_recording_start(f->rec), s1 = rt_recording_start(a);
    assert_int_equal(s1.year, s0.year);
    assert_int_equal(s1.month, s0.month);
    assert_int_equal(s1.day, s0.day);
    assert_int_equal(s1.hour, 23);
    assert_int_equal(s1.minute, 47);
    assert_int_equal(s1.second, s0.second);

    assert_true(n->n_bursts > 0);
    size_t expected = 0;
    for (size_t i = 0; i < n->n_bursts; i++) {
        const rt_burst *b = &n->bursts[i];
        char text[64];
        snprintf(text, sizeof text, "remtone phasic %s %s", rule_word(b->rules),
                 rt_role_name(b->role));
        if (find(a, b->onset_s, b->duration_s, text) < 0)
            fail_msg("burst %zu (%s at %.4f s) missing", i, text, b->onset_s);
        expected++;
    }
    /* tonic runs recounted from the mini-epoch labels, cut at epoch edges */
    size_t tonic_runs = 0;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (r == RT_ROLE_ECG || !n->channel[r].present)
            continue;
        char text[64];
        snprintf(text, sizeof text, "remtone tonic %s", rt_role_name((rt_role)r));
        for (size_t i = 0; i < n->n_minis3; i++) {
            const rt_mini *m = &n->minis3[i];
            bool on = (m->labels[r] & RT_LABEL_SINBAR_TONIC) && !(m->labels[r] & RT_LABEL_EXCLUDED);
            bool prev = i > 0 && n->minis3[i - 1].epoch == m->epoch &&
                        (n->minis3[i - 1].labels[r] & RT_LABEL_SINBAR_TONIC) &&
                        !(n->minis3[i - 1].labels[r] & RT_LABEL_EXCLUDED);
            if (on && !prev) {
                tonic_runs++;
                if (find(a, m->onset_s, -1, text) < 0)
                    fail_msg("tonic run at %.1f s (%s) missing", m->onset_s, text);
            }
        }
    }
    assert_true(tonic_runs > 0);
    expected += tonic_runs;

    /* evidence epochs: the ranks of the JSON result */
    snprintf(path, sizeof path, "%s/result.json", f->dir);
    assert_int_equal(rt_night_write_json(n, NULL, path, &err), RT_OK);
    json_error_t jerr;
    json_t *root = json_load_file(path, 0, &jerr);
    assert_non_null(root);
    json_t *ev = json_object_get(root, "evidence");
    assert_true(json_array_size(ev) > 0);
    for (size_t i = 0; i < json_array_size(ev); i++) {
        json_t *x = json_array_get(ev, i);
        char text[64];
        /* the rank and the epoch counted from 1, both as the JSON result gives them */
        snprintf(text, sizeof text, "remtone evidence %lld epoch %lld",
                 (long long)json_integer_value(json_object_get(x, "rank")),
                 (long long)json_integer_value(json_object_get(x, "epoch")));
        double onset = json_real_value(json_object_get(x, "onset_s"));
        if (find(a, onset, 30.0, text) < 0)
            fail_msg("%s at %.1f s missing", text, onset);
        expected++;
    }
    json_decref(root);
    /* and nothing else */
    assert_int_equal(rt_recording_annotation_count(a), expected);
    rt_recording_close(a);
}

/* By default each burst is written once, under one rule set (SINBAR): the
 * AASM and Montreal copies of the same burst stay out of a viewer. */
static void bursts_once_by_default(void **state)
{
    fixture *f = *state;
    const rt_night *n = f->night;
    char path[4200];
    snprintf(path, sizeof path, "%s/activity-default.edf", f->dir);
    rt_error err;
    if (rt_night_write_annotations(n, f->rec, NULL, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_recording *a = NULL;
    if (rt_recording_open(path, &a, &err) != RT_OK)
        fail_msg("%s", err.message);
    size_t sinbar = 0, other = 0, written = 0;
    for (size_t i = 0; i < n->n_bursts; i++) {
        sinbar += (n->bursts[i].rules & RT_LABEL_SINBAR_PHASIC) != 0;
        other += (n->bursts[i].rules & RT_LABEL_SINBAR_PHASIC) == 0;
    }
    for (size_t i = 0; i < rt_recording_annotation_count(a); i++) {
        const char *t = rt_recording_annotation(a, i)->text;
        assert_null(strstr(t, "remtone phasic aasm"));
        assert_null(strstr(t, "remtone phasic montreal"));
        written += strncmp(t, "remtone phasic sinbar ", 22) == 0;
    }
    print_message("# bursts: %zu SINBAR, %zu of other rule sets; %zu written\n", sinbar, other,
                  written);
    assert_true(sinbar > 0 && other > 0);
    assert_int_equal(written, sinbar);
    rt_recording_close(a);
}

static void standard_output_is_refused(void **state)
{
    fixture *f = *state;
    rt_error err;
    assert_int_equal(rt_night_write_annotations(f->night, f->rec, NULL, "-", &err), RT_ERR_USAGE);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(every_onset_is_in_the_file),
        cmocka_unit_test(bursts_once_by_default),
        cmocka_unit_test(standard_output_is_refused),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
