/* Stages and events from the EDF+ annotations of a recording. EDF+ files carry
 * many annotations that are neither (montage notes, "Lights off", technician
 * remarks), so unreadable texts are passed over, except that a text naming a
 * "stage" that we cannot read is an error: silently dropping it would leave
 * epochs unscored that the scorer did score. Stage annotations often have no
 * duration (each holds until the next one), so runs are built here and then
 * go through rt_timeline_add_stage_run like every other loader's. Onsets are
 * allowed 1 ms off the epoch grid because exporters write onsets as decimal
 * text from clock arithmetic; anything further off is a different epoch
 * alignment that we refuse to guess at. Only the public recording API is used. */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "remtone/timeline.h"
#include "staging_internal.h"

/* Largest distance of a stage onset or duration from the epoch grid (seconds). */
#define ANNOTATION_GRID_TOL_S 1e-3
enum { UNKNOWN_LISTED = 8, TEXT_QUOTE = 48 };

typedef struct stage_mark {
    double onset_s;
    double duration_s; /* <= 0: until the next stage annotation */
    rt_stage stage;
    size_t number;     /* 1-based among all annotations, in onset order */
} stage_mark;

static bool contains_nocase(const char *text, const char *word)
{
    size_t n = strlen(word);
    for (; *text; text++) {
        size_t k = 0;
        while (k < n && text[k] &&
               tolower((unsigned char)text[k]) == tolower((unsigned char)word[k]))
            k++;
        if (k == n)
            return true;
    }
    return false;
}

/* A copy fit for quoting in a message: control bytes become '?', cut short. */
static void quote_text(char out[TEXT_QUOTE], const char *text)
{
    size_t n = 0;
    for (; text[n] && n + 4 < TEXT_QUOTE; n++) {
        unsigned char c = (unsigned char)text[n];
        out[n] = c < 0x20 || c == 0x7F ? '?' : (char)c;
    }
    if (text[n]) {
        while (n > 0 && ((unsigned char)out[n - 1] & 0xC0) == 0x80)
            n--;
        if (n > 0 && ((unsigned char)out[n - 1] & 0xC0) == 0xC0)
            n--;
        memcpy(out + n, "...", 3);
        n += 3;
    }
    out[n] = '\0';
}

typedef struct unknown_stage_texts {
    char text[UNKNOWN_LISTED][TEXT_QUOTE];
    size_t number[UNKNOWN_LISTED];
    size_t n_listed;
    size_t n_total; /* annotations, not distinct texts, beyond the listed ones */
} unknown_stage_texts;

static void unknown_note(unknown_stage_texts *u, const char *text, size_t number)
{
    char q[TEXT_QUOTE];
    quote_text(q, text);
    for (size_t i = 0; i < u->n_listed; i++)
        if (strcmp(u->text[i], q) == 0)
            return;
    u->n_total++;
    if (u->n_listed < UNKNOWN_LISTED) {
        memcpy(u->text[u->n_listed], q, sizeof q);
        u->number[u->n_listed] = number;
        u->n_listed++;
    }
}

static rt_status unknown_fail(const unknown_stage_texts *u, const char *path, rt_error *err)
{
    char list[600] = "";
    size_t used = 0;
    for (size_t i = 0; i < u->n_listed; i++) {
        int w = snprintf(list + used, sizeof list - used, "%s\"%s\" (annotation %zu)",
                         i ? ", " : "", u->text[i], u->number[i]);
        if (w < 0 || (size_t)w >= sizeof list - used)
            break;
        used += (size_t)w;
    }
    return rt_fail(err, RT_ERR_STAGING,
                   "%s: sleep-stage annotation text%s not understood: %s%s; give a label map "
                   "(CSV label,meaning) that says what %s mean%s, or `ignore`",
                   path, u->n_total == 1 ? "" : "s", list,
                   u->n_total > u->n_listed ? " and more" : "", u->n_total == 1 ? "it" : "they",
                   u->n_total == 1 ? "s" : "");
}

/* Turns the stage marks into runs on the scratch timeline. */
static rt_status add_stage_marks(rt_timeline *scratch, const stage_mark *m, size_t n,
                                 const char *path, rt_error *err)
{
    const double ep = scratch->epoch_s;
    for (size_t j = 0; j < n; j++) {
        char where[600];
        snprintf(where, sizeof where, "%s: annotation %zu", path, m[j].number);
        if (m[j].onset_s < 0.0)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: stage onset %.10g s is before the recording start", where,
                           m[j].onset_s);
        double k = nearbyint(m[j].onset_s / ep);
        double off_s = fabs(m[j].onset_s - k * ep);
        if (off_s > ANNOTATION_GRID_TOL_S) {
            char away[48];
            if (off_s < 1.0)
                snprintf(away, sizeof away, "%.3g ms", off_s * 1000.0);
            else
                snprintf(away, sizeof away, "%.6g s", off_s);
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: stage onset %.10g s is not on the %g-s epoch grid (the nearest "
                           "epoch start, %.10g s, is %s away; at most 1 ms is allowed)",
                           where, m[j].onset_s, ep, k * ep, away);
        }
        double start_s = k * ep;
        bool has_next = j + 1 < n;
        double next_s = has_next ? nearbyint(m[j + 1].onset_s / ep) * ep : 0.0;
        if (has_next && next_s < start_s)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: stage annotations are not in onset order (annotation %zu starts "
                           "at %.10g s)", where, m[j + 1].number, m[j + 1].onset_s);
        double end_s;
        if (m[j].duration_s > 0.0) {
            double kd = nearbyint(m[j].duration_s / ep);
            if (kd < 1.0 || fabs(m[j].duration_s - kd * ep) > ANNOTATION_GRID_TOL_S)
                return rt_fail(err, RT_ERR_STAGING,
                               "%s: stage duration %.10g s is not a whole number of %g-s epochs",
                               where, m[j].duration_s, ep);
            end_s = start_s + kd * ep;
            if (has_next && next_s < end_s)
                return rt_fail(err, RT_ERR_STAGING,
                               "%s: stage at %.10g-%.10g s overlaps annotation %zu (stage from "
                               "%.10g s)", where, start_s, end_s, m[j + 1].number, next_s);
        } else {
            end_s = has_next ? next_s : start_s + ep;
            if (end_s <= start_s)
                return rt_fail(err, RT_ERR_STAGING,
                               "%s: annotations %zu and %zu both give the stage of the epoch at "
                               "%.10g s", where, m[j].number, m[j + 1].number, start_s);
        }
        rt_status st = rt_timeline_add_stage_run(scratch, start_s, end_s - start_s, m[j].stage,
                                                 where, 0, err);
        if (st != RT_OK)
            return st;
    }
    return RT_OK;
}

rt_status rt_timeline_load_annotations(rt_timeline *tl, const rt_recording *rec,
                                       const rt_labelmap *map, bool want_stages,
                                       bool want_events, rt_error *err)
{
    if (!tl || !rec)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_annotations: NULL argument");
    const char *path = rt_recording_path(rec);
    if (!path)
        path = "recording";
    if (want_stages && rt_timeline_has_stage_runs(tl))
        return rt_fail(err, RT_ERR_STAGING, "%s: stages are already loaded from another source",
                       path);
    if (!want_stages && !want_events)
        return RT_OK;
    size_t n = rt_recording_annotation_count(rec);
    rt_timeline *scratch = NULL;
    rt_status st = rt_timeline_new(&scratch, err);
    stage_mark *marks = rt_calloc(n, sizeof *marks);
    unknown_stage_texts *unknown = rt_calloc(1, sizeof *unknown);
    if (st == RT_OK && (!marks || !unknown))
        st = rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %zu annotations", path, n);
    if (st != RT_OK)
        goto done;
    scratch->epoch_s = tl->epoch_s;
    size_t n_marks = 0;
    for (size_t i = 0; i < n && st == RT_OK; i++) {
        const rt_annotation *a = rt_recording_annotation(rec, i);
        if (!a)
            continue;
        char text[sizeof a->text];
        rt_copy_string(text, sizeof text, a->text);
        rt_trim(text);
        if (text[0] == '\0' || rt_label_is_ignored(text, map))
            continue;
        rt_stage stage;
        rt_event_type type;
        if (want_stages && rt_stage_parse(text, map, &stage)) {
            marks[n_marks++] = (stage_mark){a->onset_s, a->duration_s, stage, i + 1};
        } else if (want_stages && rt_equal_nocase(text, "Lights off")) {
            if (scratch->lights_off_s <= 0.0 && a->onset_s > 0.0)
                scratch->lights_off_s = a->onset_s; /* the first one: analysis starts there */
        } else if (want_stages && rt_equal_nocase(text, "Lights on")) {
            if (a->onset_s >= 0.0)
                scratch->lights_on_s = a->onset_s; /* the last one: analysis ends there */
        } else if (want_events && rt_event_parse(text, map, &type)) {
            /* EDF+ allows onsets before the file start. Such an event only
             * matters where it overlaps the recording, so it is clipped to
             * start at 0 s, and dropped when it ends before any sample. */
            double onset_s = a->onset_s;
            double duration_s = a->duration_s > 0.0 ? a->duration_s : 0.0;
            if (onset_s < 0.0) {
                duration_s += onset_s;
                onset_s = 0.0;
                if (duration_s <= 0.0)
                    continue;
            }
            char where[600];
            snprintf(where, sizeof where, "%s: annotation %zu", path, i + 1);
            st = rt_timeline_add_event(scratch, onset_s, duration_s, type, where, 0, err);
        } else if (want_stages && contains_nocase(text, "stage")) {
            unknown_note(unknown, text, i + 1);
        }
    }
    if (st != RT_OK)
        goto done;
    if (unknown->n_total > 0) {
        st = unknown_fail(unknown, path, err);
        goto done;
    }
    if (want_stages) {
        if (n_marks == 0) {
            st = rt_fail(err, RT_ERR_STAGING,
                         "%s: the staging is empty: no sleep-stage annotation among the file's %zu "
                         "annotation%s", path, n, n == 1 ? "" : "s");
            goto done;
        }
        st = add_stage_marks(scratch, marks, n_marks, path, err);
        if (st != RT_OK)
            goto done;
    }
    st = rt_timeline_merge(tl, scratch, err);
done:
    free(unknown);
    free(marks);
    rt_timeline_free(scratch);
    return st;
}
