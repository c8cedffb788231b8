/* The timeline object: the checked path by which every loader adds stage runs
 * and events, the merge that makes a load all-or-nothing, the consistency
 * check against a recording, and the loader that tells a staging file's
 * format from its first bytes. Stage runs must arrive in time order without
 * overlap: a scorer's hypnogram is a sequence, and an entry out of order is far
 * more often an export bug than an intention, so it is reported, not sorted. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "input.h"
#include "internal.h"
#include "remtone/roles.h"
#include "remtone/timeline.h"

/* Times on the epoch grid are compared within this tolerance (seconds): far
 * below any sampling interval, far above the rounding of decimal text. */
#define GRID_TOL_S 1e-6
/* No staging reaches past 31 days; beyond that the start is a typing error
 * (and would ask for an absurd allocation). */
#define MAX_TIMELINE_S (31.0 * 86400.0)
#define DEFAULT_EPOCH_S 30.0

rt_status rt_timeline_new(rt_timeline **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_new: no place for the result");
    rt_timeline *tl = *out = rt_calloc(1, sizeof *tl);
    if (!tl)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for a timeline");
    tl->epoch_s = DEFAULT_EPOCH_S;
    tl->lights_off_s = 0.0;
    tl->lights_on_s = -1.0;
    return RT_OK;
}

void rt_timeline_free(rt_timeline *tl)
{
    if (!tl)
        return;
    free(tl->stages);
    free(tl->events);
    free(tl->manual);
    free(tl);
}

/* "file line 7" or just "file" (when line <= 0) into buf. */
static const char *place(char *buf, size_t cap, const char *source, long line)
{
    if (!source)
        source = "staging";
    if (line > 0)
        snprintf(buf, cap, "%s line %ld", source, line);
    else
        snprintf(buf, cap, "%s", source);
    return buf;
}

/* A place for a message kept in cap bytes: its end (the file name and line)
 * matters most, so a longer one keeps that, after "...". */
static void keep_place(char *dst, size_t cap, const char *at)
{
    size_t n = strlen(at);
    if (n < cap) {
        memcpy(dst, at, n + 1);
        return;
    }
    const char *tail = at + n - (cap - 4);
    while ((*tail & 0xC0) == 0x80) /* not inside a UTF-8 sequence */
        tail++;
    snprintf(dst, cap, "...%s", tail);
}

static bool has_stage_runs(const rt_timeline *tl)
{
    return tl->n_epochs > 0 || tl->last_run_end_s > 0.0;
}

rt_status rt_timeline_add_stage_run(rt_timeline *tl, double start_s, double duration_s,
                                    rt_stage stage, const char *source, long line,
                                    rt_error *err)
{
    char at[600];
    place(at, sizeof at, source, line);
    if (!tl)
        return rt_fail(err, RT_ERR_USAGE, "%s: no timeline", at);
    if ((int)stage < 0 || stage >= RT_STAGE_COUNT)
        return rt_fail(err, RT_ERR_INTERNAL, "%s: stage value %d out of range", at, (int)stage);
    const double ep = tl->epoch_s;
    if (!(ep > 0.0) || !isfinite(ep))
        return rt_fail(err, RT_ERR_INTERNAL, "%s: epoch length %g s is invalid", at, ep);
    if (!isfinite(start_s) || !isfinite(duration_s))
        return rt_fail(err, RT_ERR_STAGING, "%s: start or duration is not a finite number", at);
    if (start_s < 0.0)
        return rt_fail(err, RT_ERR_STAGING, "%s: start %.10g s is negative", at, start_s);
    if (duration_s <= 0.0)
        return rt_fail(err, RT_ERR_STAGING, "%s: duration %.10g s is not positive", at, duration_s);
    if (start_s + duration_s > MAX_TIMELINE_S)
        return rt_fail(err, RT_ERR_STAGING, "%s: entry ends at %.10g s, more than 31 days in", at,
                       start_s + duration_s);
    double k_start = nearbyint(start_s / ep);
    if (fabs(start_s - k_start * ep) > GRID_TOL_S)
        return rt_fail(err, RT_ERR_STAGING,
                       "%s: start %.10g s is not on the %g-s epoch grid (epochs start at "
                       "multiples of %g s from the recording start)",
                       at, start_s, ep, ep);
    double k_dur = nearbyint(duration_s / ep);
    if (k_dur < 1.0 || fabs(duration_s - k_dur * ep) > GRID_TOL_S)
        return rt_fail(err, RT_ERR_STAGING,
                       "%s: duration %.10g s is not a whole number of %g-s epochs", at,
                       duration_s, ep);
    if (has_stage_runs(tl)) {
        char prev[64];
        if (tl->last_run_line > 0)
            snprintf(prev, sizeof prev, "line %ld", tl->last_run_line);
        else
            snprintf(prev, sizeof prev, "the previous entry");
        if (start_s < tl->last_run_start_s - GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: entries are not in time order: this one starts at %.10g s, "
                           "before %s (which starts at %.10g s)",
                           at, start_s, prev, tl->last_run_start_s);
        if (start_s < tl->last_run_end_s - GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: entry at %.10g-%.10g s overlaps %s (%.10g-%.10g s)", at, start_s,
                           start_s + duration_s, prev, tl->last_run_start_s, tl->last_run_end_s);
    }
    size_t first = (size_t)k_start;
    size_t end = first + (size_t)k_dur;
    if (stage != RT_STAGE_UNSCORED) {
        if (end > tl->n_epochs) {
            unsigned char *grown = realloc(tl->stages, end);
            if (!grown)
                return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %zu epochs", at, end);
            /* Gaps between runs are unscored: never guessed from neighbours. */
            memset(grown + tl->n_epochs, RT_STAGE_UNSCORED, end - tl->n_epochs);
            tl->stages = grown;
            tl->n_epochs = end;
        }
        memset(tl->stages + first, (int)stage, end - first);
    }
    tl->last_run_start_s = k_start * ep;
    tl->last_run_end_s = (k_start + k_dur) * ep;
    tl->last_run_line = line > 0 ? line : 0;
    keep_place(tl->last_run_place, sizeof tl->last_run_place, at);
    return RT_OK;
}

/* Index at which an event of onset_s goes so that onsets stay ordered and
 * equal onsets keep their insertion order (after the last equal one). */
static size_t event_slot(const rt_timeline *tl, double onset_s)
{
    size_t lo = 0, hi = tl->n_events;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (tl->events[mid].onset_s <= onset_s)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo;
}

rt_status rt_timeline_add_event(rt_timeline *tl, double onset_s, double duration_s,
                                rt_event_type type, const char *source, long line,
                                rt_error *err)
{
    return rt_timeline_add_event_role(tl, onset_s, duration_s, type, -1, source, line, err);
}

rt_status rt_timeline_add_event_role(rt_timeline *tl, double onset_s, double duration_s,
                                     rt_event_type type, int role, const char *source,
                                     long line, rt_error *err)
{
    char at[600];
    place(at, sizeof at, source, line);
    if (role < -1 || role >= RT_ROLE_COUNT)
        return rt_fail(err, RT_ERR_STAGING, "%s: channel role %d out of range", at, role);
    if (!tl)
        return rt_fail(err, RT_ERR_USAGE, "%s: no timeline", at);
    if ((int)type < 0 || type >= RT_EVENT_TYPE_COUNT)
        return rt_fail(err, RT_ERR_INTERNAL, "%s: event type %d out of range", at, (int)type);
    if (!isfinite(onset_s) || !isfinite(duration_s))
        return rt_fail(err, RT_ERR_STAGING, "%s: onset or duration is not a finite number", at);
    if (onset_s < 0.0)
        return rt_fail(err, RT_ERR_STAGING, "%s: event onset %.10g s is before the recording start",
                       at, onset_s);
    if (duration_s < 0.0)
        return rt_fail(err, RT_ERR_STAGING, "%s: event duration %.10g s is negative", at,
                       duration_s);
    if (onset_s + duration_s > MAX_TIMELINE_S)
        return rt_fail(err, RT_ERR_STAGING, "%s: event ends at %.10g s, more than 31 days in", at,
                       onset_s + duration_s);
    if (tl->n_events >= ((size_t)-1) / sizeof(rt_event) - 1)
        return rt_fail(err, RT_ERR_NOMEM, "%s: too many events", at);
    rt_event *grown = realloc(tl->events, (tl->n_events + 1) * sizeof *grown);
    if (!grown)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for events", at);
    tl->events = grown;
    size_t slot = event_slot(tl, onset_s);
    memmove(tl->events + slot + 1, tl->events + slot, (tl->n_events - slot) * sizeof *grown);
    tl->events[slot] = (rt_event){onset_s, duration_s, type, (signed char)role, ""};
    keep_place(tl->events[slot].place, sizeof tl->events[slot].place, at);
    tl->n_events++;
    return RT_OK;
}

rt_status rt_timeline_merge(rt_timeline *tl, rt_timeline *src, rt_error *err)
{
    if (!tl || !src)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_merge: NULL timeline");
    bool take_stages = has_stage_runs(src);
    bool take_manual = src->n_manual > 0;
    if (take_stages && has_stage_runs(tl))
        return rt_fail(err, RT_ERR_STAGING,
                       "stages are already loaded: a timeline takes its stages from one source");
    if (take_manual && tl->n_manual > 0)
        return rt_fail(err, RT_ERR_STAGING,
                       "a manual RSWA scoring is already loaded: a timeline holds one");
    /* The epoch length belongs to whoever brings the grid (stages or manual
     * minis, both laid on it); a timeline with neither takes src's. */
    bool tl_has_grid = has_stage_runs(tl) || tl->n_manual > 0;
    if ((take_stages || take_manual) && tl_has_grid && tl->epoch_s != src->epoch_s)
        return rt_fail(err, RT_ERR_STAGING, "epoch lengths differ (%g s and %g s)", tl->epoch_s,
                       src->epoch_s);
    if (src->n_events > 0) {
        size_t n = tl->n_events + src->n_events;
        if (n < tl->n_events || n > ((size_t)-1) / sizeof(rt_event))
            return rt_fail(err, RT_ERR_NOMEM, "too many events");
        rt_event *merged = malloc(n * sizeof *merged);
        if (!merged)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory for events");
        size_t i = 0, j = 0, k = 0;
        while (i < tl->n_events || j < src->n_events) {
            /* Ties go to tl's events: they were there first. */
            if (j == src->n_events ||
                (i < tl->n_events && tl->events[i].onset_s <= src->events[j].onset_s))
                merged[k++] = tl->events[i++];
            else
                merged[k++] = src->events[j++];
        }
        free(tl->events);
        free(src->events);
        tl->events = merged;
        tl->n_events = n;
        src->events = NULL;
        src->n_events = 0;
    }
    if ((take_stages || take_manual) && !tl_has_grid)
        tl->epoch_s = src->epoch_s;
    if (take_manual) {
        free(tl->manual);
        tl->manual = src->manual;
        tl->n_manual = src->n_manual;
        src->manual = NULL;
        src->n_manual = 0;
    }
    if (src->scorer[0])
        rt_copy_string(tl->scorer, sizeof tl->scorer, src->scorer);
    if (src->scored_on[0])
        rt_copy_string(tl->scored_on, sizeof tl->scored_on, src->scored_on);
    if (take_stages) {
        free(tl->stages);
        tl->stages = src->stages;
        tl->n_epochs = src->n_epochs;
        tl->last_run_start_s = src->last_run_start_s;
        tl->last_run_end_s = src->last_run_end_s;
        tl->last_run_line = src->last_run_line;
        memcpy(tl->last_run_place, src->last_run_place, sizeof tl->last_run_place);
        src->stages = NULL;
        src->n_epochs = 0;
        src->last_run_start_s = src->last_run_end_s = 0.0;
        src->last_run_line = 0;
    }
    if (src->lights_off_s > 0.0)
        tl->lights_off_s = src->lights_off_s;
    if (src->lights_on_s >= 0.0)
        tl->lights_on_s = src->lights_on_s;
    return RT_OK;
}

rt_status rt_timeline_check(const rt_timeline *tl, double recording_s, rt_error *err)
{
    if (!tl)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_check: no timeline");
    if (!(recording_s > 0.0) || !isfinite(recording_s))
        return rt_fail(err, RT_ERR_USAGE, "recording duration %g s is not positive", recording_s);
    const double ep = tl->epoch_s;
    size_t scored = 0;
    for (size_t i = 0; i < tl->n_epochs; i++)
        scored += tl->stages[i] != RT_STAGE_UNSCORED;
    if (scored == 0)
        return rt_fail(err, RT_ERR_STAGING, "%s: staging is empty: no epoch has a stage",
                       tl->last_run_place[0] ? tl->last_run_place : "staging");
    double staged_end_s = (double)tl->n_epochs * ep;
    if (staged_end_s > recording_s + GRID_TOL_S) {
        /* Epochs that fit the recording whole; a partial last one is past the end,
         * because its EMG cannot be read for the full 30 s. */
        size_t inside = (size_t)floor((recording_s + GRID_TOL_S) / ep);
        size_t past = tl->n_epochs - inside;
        double over_s = staged_end_s - recording_s;
        double partial_s = recording_s - (double)inside * ep;
        const char *at = tl->last_run_place[0] ? tl->last_run_place : "staging";
        if (partial_s > GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: staging runs %.6g s (%zu epoch%s of %g s) past the end of the "
                           "recording (%.6g s): the epoch at %.6g-%.6g s is covered by the "
                           "recording for only %.6g s, and a partial epoch counts as past the end",
                           at, over_s, past, past == 1 ? "" : "s", ep, recording_s,
                           (double)inside * ep, (double)(inside + 1) * ep, partial_s);
        return rt_fail(err, RT_ERR_STAGING,
                       "%s: staging runs %.6g s (%zu epoch%s of %g s) past the end of the "
                       "recording (%.6g s)",
                       at, over_s, past, past == 1 ? "" : "s", ep, recording_s);
    }
    for (size_t i = 0; i < tl->n_events; i++) {
        const rt_event *e = &tl->events[i];
        double end_s = e->onset_s + e->duration_s;
        if (e->onset_s >= recording_s || end_s > recording_s + GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: event %zu (%s at %.6g s, %.6g s long) ends %.6g s past the end "
                           "of the recording (%.6g s)",
                           e->place[0] ? e->place : "events", i + 1, rt_event_type_name(e->type), e->onset_s, e->duration_s,
                           end_s - recording_s, recording_s);
    }
    return RT_OK;
}

/* Format of a staging file as told by its first bytes. */
typedef enum staging_format { FORMAT_CSV, FORMAT_EDF, FORMAT_XML } staging_format;

static rt_status sniff_format(const char *path, staging_format *format, rt_error *err)
{
    FILE *f = NULL;
    long long size = 0;
    rt_status st = rt_input_open(path, "staging file", &f, &size, err);
    if (st != RT_OK)
        return st;
    unsigned char head[256];
    size_t n = fread(head, 1, sizeof head, f);
    int read_error = ferror(f), code = errno;
    fclose(f);
    if (read_error)
        return rt_fail(err, rt_errno_status(code, RT_ERR_IO), "%s: cannot read: %s", path,
                       strerror(code));
    const char *foreign = rt_input_foreign_encoding(head, n);
    if (foreign)
        return rt_fail(err, RT_ERR_STAGING, RT_INPUT_FOREIGN_MESSAGE, path, foreign);
    if (n >= 8 && (memcmp(head, "0       ", 8) == 0 || memcmp(head, "\xff" "BIOSEMI", 8) == 0)) {
        *format = FORMAT_EDF;
        return RT_OK;
    }
    size_t i = 0;
    if (n >= 3 && memcmp(head, "\xef\xbb\xbf", 3) == 0)
        i = 3;
    while (i < n && (head[i] == ' ' || head[i] == '\t' || head[i] == '\r' || head[i] == '\n'))
        i++;
    *format = (i < n && head[i] == '<') ? FORMAT_XML : FORMAT_CSV;
    return RT_OK;
}

rt_status rt_timeline_load_staging(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                   rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_staging: NULL argument");
    staging_format format = FORMAT_CSV;
    rt_status st = sniff_format(path, &format, err);
    if (st != RT_OK)
        return st;
    switch (format) {
    case FORMAT_EDF: {
        rt_recording *rec = NULL;
        if ((st = rt_recording_open(path, &rec, err)) != RT_OK)
            return st;
        st = rt_timeline_load_annotations(tl, rec, map, true, true, err);
        rt_recording_close(rec);
        return st;
    }
    case FORMAT_XML:
        /* Only remtone's own scoring schema is read; a label map has nothing
         * to do there (the schema fixes the stage and event names). */
        return rt_timeline_load_xml(tl, path, err);
    case FORMAT_CSV:
        break;
    }
    return rt_timeline_load_stages_csv(tl, path, map, err);
}
