/* The detected activity as an EDF+ file, so that a reviewer's own viewer can
 * lay it over the recording: the phasic bursts of one rule set (SINBAR unless
 * options choose others: each rule set finds its own copy of most bursts, and
 * three copies of every burst only clutter a viewer), every run of tonic 3-s
 * mini-epochs within an epoch, and the ranked evidence epochs. The file lasts
 * as long as the recording: one 1-Hz signal, "remtone REM" (1 in scored REM
 * seconds, 0 elsewhere), in 1-s data records, carries the annotations, so a
 * viewer aligns the two files end to end (an annotation-only file would
 * last one record per annotation). The file is written by EDFlib's writer
 * (through io/edf_writer.h, under the EDFlib lock), starts at the recording's
 * start date and time, and is written to a temporary name, checked and
 * renamed. The texts are listed in docs/review-report.md. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "io/edf_writer.h"
#include "remtone/report.h"
#include "svg.h"

/* The evidence epochs marked, as many as the JSON result lists. */
#define EVIDENCE_LIMIT 10

typedef struct note {
    double onset_s;
    double duration_s;
    char text[48];   /* EDFlib keeps at most 40 bytes of a written annotation */
} note;

typedef struct notes {
    note *v;
    size_t n, cap;
} notes;

static int add_note(notes *ns, double onset_s, double duration_s, const char *text)
{
    if (ns->n == ns->cap) {
        size_t cap = ns->cap ? 2 * ns->cap : 1024;
        note *v = realloc(ns->v, cap * sizeof *v);
        if (!v)
            return -1;
        ns->v = v;
        ns->cap = cap;
    }
    note *x = &ns->v[ns->n++];
    x->onset_s = onset_s;
    x->duration_s = duration_s;
    rt_copy_string(x->text, sizeof x->text, text);
    return 0;
}

static int by_onset(const void *a, const void *b)
{
    const note *x = a, *y = b;
    return (x->onset_s > y->onset_s) - (x->onset_s < y->onset_s);
}

static const char *rule_word(unsigned rules)
{
    if (rules & RT_LABEL_AASM_PHASIC)
        return "aasm";
    if (rules & RT_LABEL_SINBAR_PHASIC)
        return "sinbar";
    return "montreal";
}

static int collect_bursts(const rt_night *night, unsigned rules, notes *ns)
{
    for (size_t i = 0; i < night->n_bursts; i++) {
        const rt_burst *b = &night->bursts[i];
        if (!(b->rules & rules))
            continue;
        char text[48];
        snprintf(text, sizeof text, "remtone phasic %s %s", rule_word(b->rules),
                 rt_role_name(b->role));
        if (add_note(ns, b->onset_s, b->duration_s, text) != 0)
            return -1;
    }
    return 0;
}

/* Runs of SINBAR-tonic 3-s minis, cut at epoch boundaries, per channel. */
static int collect_tonic(const rt_night *night, notes *ns)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (r == RT_ROLE_ECG || !night->channel[r].present)
            continue;
        char text[48];
        snprintf(text, sizeof text, "remtone tonic %s", rt_role_name((rt_role)r));
        size_t i = 0;
        while (i < night->n_minis3) {
            const rt_mini *m = &night->minis3[i];
            if (!(m->labels[r] & RT_LABEL_SINBAR_TONIC) || (m->labels[r] & RT_LABEL_EXCLUDED)) {
                i++;
                continue;
            }
            size_t j = i + 1;
            while (j < night->n_minis3 && night->minis3[j].epoch == m->epoch &&
                   (night->minis3[j].labels[r] & RT_LABEL_SINBAR_TONIC) &&
                   !(night->minis3[j].labels[r] & RT_LABEL_EXCLUDED))
                j++;
            double end = night->minis3[j - 1].onset_s + 3.0;
            if (add_note(ns, m->onset_s, end - m->onset_s, text) != 0)
                return -1;
            i = j;
        }
    }
    return 0;
}

static int collect_evidence(const rt_night *night, notes *ns)
{
    size_t order[EVIDENCE_LIMIT];
    size_t n = rt_report_rank_evidence(night, order, EVIDENCE_LIMIT);
    for (size_t k = 0; k < n; k++) {
        char text[48];
        /* the rank, and the epoch counted from 1 as in every other output */
        snprintf(text, sizeof text, "remtone evidence %zu epoch %zu", k + 1,
                 night->epochs[order[k]].epoch + 1);
        if (add_note(ns, night->epochs[order[k]].onset_s, RT_EPOCH_S, text) != 0)
            return -1;
    }
    return 0;
}

/* Whether second s of the recording lies in a scored REM epoch. */
static double in_rem(const rt_night *night, long s)
{
    for (size_t k = 0; k < night->n_epochs; k++)
        if (s >= night->epochs[k].onset_s && s < night->epochs[k].onset_s + 30.0)
            return 1.0;
    return 0.0;
}

static rt_status write_file(const char *path, const rt_night *night, const rt_recording *rec,
                            const notes *ns, rt_error *err)
{
    rt_clock_time t = rt_recording_start(rec);
    /* whole seconds: EDF data records of 1 s; a recording of 30-s records is whole */
    long seconds = (long)ceil(rt_recording_duration_s(rec) - 1e-6);
    if (seconds < 1)
        seconds = 1;
    long per_record = ((long)ns->n + seconds - 1) / seconds;
    rt_edf_writer_header header = {.year = t.year, .month = t.month, .day = t.day, .hour = t.hour,
                                   .minute = t.minute, .second = t.second, .subsecond = t.subsecond,
                                   .equipment = "remtone",
                                   .recording_additional = "remtone detected activity",
                                   .annotation_signals = (int)(per_record < 64 ? per_record + 1
                                                                               : 64)};
    const rt_edf_writer_signal rem = {"remtone REM", "", "", "", 1, 0.0, 1.0, 0, 1};
    rt_edf_writer *w;
    rt_status st = rt_edf_writer_begin(&w, path, &header, &rem, 1, err);
    for (size_t i = 0; i < ns->n && st == RT_OK; i++)
        st = rt_edf_writer_annotation(w, ns->v[i].onset_s, ns->v[i].duration_s, ns->v[i].text, err);
    for (long s = 0; s < seconds && st == RT_OK; s++) {
        double v = in_rem(night, s);
        const double *samples[1] = {&v};
        st = rt_edf_writer_record(w, samples, err);
    }
    if (st != RT_OK) {
        rt_edf_writer_abort(w);
        return st;
    }
    return rt_edf_writer_finish(w, err);
}

rt_status rt_night_write_annotations(const rt_night *night, const rt_recording *rec,
                                     const rt_report_options *options, const char *path,
                                     rt_error *err)
{
    if (strcmp(path, "-") == 0)
        return rt_fail(err, RT_ERR_USAGE, "the annotation file needs a file name, not '-'");
    unsigned rules = options && options->annotate_rules ? options->annotate_rules
                                                        : RT_LABEL_SINBAR_PHASIC;
    notes ns = {NULL, 0, 0};
    if (collect_bursts(night, rules, &ns) != 0 || collect_tonic(night, &ns) != 0 ||
        collect_evidence(night, &ns) != 0) {
        free(ns.v);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for annotations", path);
    }
    /* A night without REM (or without activity) still gets a file remtone
     * and EDFlib can read back: an annotation-only EDF+ needs at least one
     * data record, and EDFlib writes records only to hold annotations. */
    if (ns.n == 0 && add_note(&ns, 0.0, -1.0, "remtone no activity detected") != 0)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for annotations", path);
    /* a stable sort is not needed: equal onsets carry different texts and any
     * order of them is valid EDF+ */
    if (ns.n > 1)
        qsort(ns.v, ns.n, sizeof *ns.v, by_onset);
    rt_status st = write_file(path, night, rec, &ns, err);
    free(ns.v);
    return st;
}
