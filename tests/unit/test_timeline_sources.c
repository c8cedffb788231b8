/* One night, three ways in: the stage and event tables, the EDF+
 * annotations of the recording, and a remtone XML scoring file written from
 * the tables. A synthetic night writes the same plan into its tables and its
 * EDF+ annotations (docs/synthetic-nights.md), so every loader must produce
 * the same timeline: the same stage in every epoch, the same events (onset,
 * duration, type) in the same order. The EDF+ side rests on the annotation
 * format of Kemp & Olivan 2003 (Clin Neurophysiol 114:1755-1761) as EDFlib
 * writes and reads it. */
#include "support.h"

#include <stdio.h>
#include <string.h>

#include "remtone/recording.h"
#include "remtone/synth.h"
#include "remtone/timeline.h"

static char dir[4096];

static const char *in_dir(const char *name)
{
    static char path[4400];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    return path;
}

static void expect_same(const rt_timeline *a, const rt_timeline *b, const char *what)
{
    if (a->epoch_s != b->epoch_s || a->n_epochs != b->n_epochs)
        fail_msg("%s: %zu epochs of %g s against %zu of %g s", what, a->n_epochs, a->epoch_s,
                 b->n_epochs, b->epoch_s);
    for (size_t i = 0; i < a->n_epochs; i++)
        if (a->stages[i] != b->stages[i])
            fail_msg("%s: epoch %zu is %s against %s", what, i,
                     rt_stage_name((rt_stage)a->stages[i]), rt_stage_name((rt_stage)b->stages[i]));
    if (a->n_events != b->n_events)
        fail_msg("%s: %zu events against %zu", what, a->n_events, b->n_events);
    for (size_t i = 0; i < a->n_events; i++) {
        const rt_event *x = &a->events[i], *y = &b->events[i];
        if (x->onset_s != y->onset_s || x->duration_s != y->duration_s || x->type != y->type)
            fail_msg("%s: event %zu is %s %.17g+%.17g against %s %.17g+%.17g", what, i,
                     rt_event_type_name(x->type), x->onset_s, x->duration_s,
                     rt_event_type_name(y->type), y->onset_s, y->duration_s);
    }
}

static void three_sources_agree(void **state)
{
    (void)state;
    snprintf(dir, sizeof dir, "%s", rt_test_dir("tl_sources"));
    rt_error err;
    rt_synth_options opt;
    rt_synth_options_default(&opt);
    opt.profile = RT_SYNTH_APNEA; /* the profile with respiratory events and arousals */
    opt.hours = 1.0;
    opt.seed = rt_test_seed();
    if (rt_synth_write(&opt, dir, &err) != RT_OK)
        fail_msg("%s", err.message);

    rt_timeline *tables = rt_test_timeline();
    if (rt_timeline_load_stages_csv(tables, in_dir("stages.csv"), NULL, &err) != RT_OK ||
        rt_timeline_load_events_csv(tables, in_dir("events.csv"), NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    assert_true(tables->n_epochs > 0);
    assert_true(tables->n_events > 0); /* the apnea profile places events */

    rt_recording *rec = NULL;
    if (rt_recording_open(in_dir("night.edf"), &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_timeline *annotations = rt_test_timeline();
    if (rt_timeline_load_annotations(annotations, rec, NULL, true, true, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_recording_close(rec);
    expect_same(tables, annotations, "tables vs EDF+ annotations");

    char xml[4400];
    snprintf(xml, sizeof xml, "%s", in_dir("scoring.xml"));
    if (rt_timeline_write_xml(tables, xml, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_timeline *from_xml = rt_test_timeline();
    if (rt_timeline_load_staging(from_xml, xml, NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    expect_same(tables, from_xml, "tables vs XML");

    /* The recording given as a staging file reads as its annotations. */
    rt_timeline *sniffed = rt_test_timeline();
    if (rt_timeline_load_staging(sniffed, in_dir("night.edf"), NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    expect_same(annotations, sniffed, "EDF+ annotations vs staging sniffer");

    rt_timeline_free(tables);
    rt_timeline_free(annotations);
    rt_timeline_free(from_xml);
    rt_timeline_free(sniffed);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(three_sources_agree),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
