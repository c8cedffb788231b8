/* The timeline object: the checked path by which every loader adds stage runs,
 * events and manual mini-epochs, the merge that makes a load all-or-nothing,
 * and the consistency check against a recording. It calls no loader: the
 * loaders (tables.c, annotations.c, xml.c) build through it, and load.c,
 * which tells a staging file's format, calls the loaders. Stage runs must
 * arrive in time order without overlap: a scorer's hypnogram is a sequence,
 * and an entry out of order is far more often an export bug than an
 * intention, so it is reported, not sorted. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "input.h"
#include "internal.h"
#include "remtone/roles.h"
#include "remtone/timeline.h"
#include "table.h"
#include "staging_internal.h"

/* Times on the epoch grid are compared within this tolerance (seconds): far
 * below any sampling interval, far above the rounding of decimal text. */
#define GRID_TOL_S 1e-6
/* No staging reaches past 31 days; beyond that the start is a typing error
 * (and would ask for an absurd allocation). */
#define MAX_TIMELINE_S (31.0 * 86400.0)

rt_status rt_timeline_new(rt_timeline **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_new: no place for the result");
    *out = NULL;
    rt_timeline_state *state = rt_calloc(1, sizeof *state);
    if (!state)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for a timeline");
    rt_timeline *tl = *out = &state->pub;
    tl->epoch_s = RT_EPOCH_S;
    tl->lights_off_s = 0.0;
    tl->lights_on_s = -1.0;
    return RT_OK;
}

static rt_timeline_state *state_of(rt_timeline *tl) { return (rt_timeline_state *)tl; }

void rt_timeline_free(rt_timeline *tl)
{
    if (!tl)
        return;
    free(tl->stages);
    free(tl->events);
    free(tl->manual);
    free(state_of(tl));
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

const char *rt_timeline_staging_place(const rt_timeline *tl)
{
    return tl ? ((const rt_timeline_state *)tl)->last_run_place : "";
}

bool rt_timeline_has_stage_runs(const rt_timeline *tl)
{
    return tl->n_epochs > 0 || ((const rt_timeline_state *)tl)->last_run_end_s > 0.0;
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
    rt_timeline_state *run = state_of(tl);
    if (rt_timeline_has_stage_runs(tl)) {
        char prev[64];
        if (run->last_run_line > 0)
            snprintf(prev, sizeof prev, "line %ld", run->last_run_line);
        else
            snprintf(prev, sizeof prev, "the previous entry");
        if (start_s < run->last_run_start_s - GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: entries are not in time order: this one starts at %.10g s, "
                           "before %s (which starts at %.10g s)",
                           at, start_s, prev, run->last_run_start_s);
        if (start_s < run->last_run_end_s - GRID_TOL_S)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: entry at %.10g-%.10g s overlaps %s (%.10g-%.10g s)", at, start_s,
                           start_s + duration_s, prev, run->last_run_start_s, run->last_run_end_s);
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
    run->last_run_start_s = k_start * ep;
    run->last_run_end_s = (k_start + k_dur) * ep;
    run->last_run_line = line > 0 ? line : 0;
    keep_place(run->last_run_place, sizeof run->last_run_place, at);
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
    bool take_stages = rt_timeline_has_stage_runs(src);
    bool take_manual = src->n_manual > 0;
    if (take_stages && rt_timeline_has_stage_runs(tl))
        return rt_fail(err, RT_ERR_STAGING,
                       "stages are already loaded: a timeline takes its stages from one source");
    if (take_manual && tl->n_manual > 0)
        return rt_fail(err, RT_ERR_STAGING,
                       "a manual RSWA scoring is already loaded: a timeline holds one");
    /* The epoch length belongs to whoever brings the grid (stages or manual
     * minis, both laid on it); a timeline with neither takes src's. */
    bool tl_has_grid = rt_timeline_has_stage_runs(tl) || tl->n_manual > 0;
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
        rt_timeline_state *to = state_of(tl), *from = state_of(src);
        to->last_run_start_s = from->last_run_start_s;
        to->last_run_end_s = from->last_run_end_s;
        to->last_run_line = from->last_run_line;
        memcpy(to->last_run_place, from->last_run_place, sizeof to->last_run_place);
        src->stages = NULL;
        src->n_epochs = 0;
        from->last_run_start_s = from->last_run_end_s = 0.0;
        from->last_run_line = 0;
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
                       rt_timeline_staging_place(tl)[0] ? rt_timeline_staging_place(tl) : "staging");
    double staged_end_s = (double)tl->n_epochs * ep;
    if (staged_end_s > recording_s + GRID_TOL_S) {
        /* Epochs that fit the recording whole; a partial last one is past the end,
         * because its EMG cannot be read for the full 30 s. */
        size_t inside = (size_t)floor((recording_s + GRID_TOL_S) / ep);
        size_t past = tl->n_epochs - inside;
        double over_s = staged_end_s - recording_s;
        double partial_s = recording_s - (double)inside * ep;
        const char *at = rt_timeline_staging_place(tl)[0] ? rt_timeline_staging_place(tl) : "staging";
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

/* Manual minis are kept ordered by onset (equal within GRID_TOL_S), then role. */
static int manual_cmp(double a_onset, int a_role, double b_onset, int b_role)
{
    if (fabs(a_onset - b_onset) > GRID_TOL_S)
        return a_onset < b_onset ? -1 : 1;
    return (a_role > b_role) - (a_role < b_role);
}

rt_status rt_timeline_add_manual(rt_timeline *tl, double onset_s, int role, bool phasic,
                                 bool tonic, const char *source, long line, rt_error *err)
{
    char buf[600];
    const char *at = place(buf, sizeof buf, source, line);
    if (!tl)
        return rt_fail(err, RT_ERR_USAGE, "%s: no timeline", at);
    if (role < 0 || role >= RT_ROLE_COUNT)
        return rt_fail(err, RT_ERR_STAGING, "%s: manual mini-epoch role %d out of range", at,
                       role);
    if (!isfinite(onset_s) || onset_s < 0.0 || onset_s > MAX_TIMELINE_S)
        return rt_fail(err, RT_ERR_STAGING,
                       "%s: manual mini-epoch onset %.10g s is not within 0 s .. 31 days", at,
                       onset_s);
    const double ep = tl->epoch_s;
    double epoch = floor((onset_s + GRID_TOL_S) / ep);
    double offset_s = onset_s - epoch * ep;
    double k = nearbyint(offset_s / RT_MANUAL_MINI_S);
    if (fabs(offset_s - k * RT_MANUAL_MINI_S) > GRID_TOL_S ||
        k * RT_MANUAL_MINI_S + RT_MANUAL_MINI_S > ep + GRID_TOL_S)
        return rt_fail(err, RT_ERR_STAGING,
                       "%s: manual mini-epoch onset %.10g s is not on the 3-s grid of its "
                       "%g-s epoch (minis start 0, 3, 6 ... s into an epoch)",
                       at, onset_s, ep);
    double snapped_s = epoch * ep + k * RT_MANUAL_MINI_S;
    /* Scorings arrive in time order almost always: look from the end. */
    size_t slot = tl->n_manual;
    while (slot > 0) {
        const rt_manual_mini *m = &tl->manual[slot - 1];
        int c = manual_cmp(m->onset_s, m->role, snapped_s, role);
        if (c == 0)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: the mini-epoch at %.10g s on %s is scored twice", at, snapped_s,
                           rt_role_name((rt_role)role));
        if (c < 0)
            break;
        slot--;
    }
    if (tl->n_manual >= ((size_t)-1) / sizeof(rt_manual_mini) - 1)
        return rt_fail(err, RT_ERR_NOMEM, "%s: too many manual mini-epochs", at);
    rt_manual_mini *grown = realloc(tl->manual, (tl->n_manual + 1) * sizeof *grown);
    if (!grown)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for manual mini-epochs", at);
    tl->manual = grown;
    memmove(grown + slot + 1, grown + slot, (tl->n_manual - slot) * sizeof *grown);
    grown[slot] = (rt_manual_mini){snapped_s, (signed char)role, phasic ? 1 : 0, tonic ? 1 : 0};
    tl->n_manual++;
    return RT_OK;
}
