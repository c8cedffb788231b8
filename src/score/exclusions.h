/* Event-aware scoring: which REM seconds leave the count, and why
 * (docs/exclusions.md). Reasons are bit sets of rt_event_type, plus one bit
 * for time outside lights-off .. lights-on and one per quality mark kind. */
#ifndef REMTONE_EXCLUSIONS_H
#define REMTONE_EXCLUSIONS_H

#include <stddef.h>

#include "night_internal.h"

/* The reason bits are RT_EXCLUDED_BY_* (include/remtone/score.h): events,
 * quality marks and lights, as rt_mini.excluded_by reports them. They must
 * stay apart and fit the 16-bit masks below. */
_Static_assert(RT_EVENT_TYPE_COUNT <= 8 && 8 + RT_QUALITY_KINDS <= 15,
               "RT_EXCLUDED_BY_* bits overlap or do not fit unsigned short");

typedef struct rt_exclusion_masks {
    size_t n_seconds;                      /* REM seconds of the night, bouts in order */
    unsigned short *global;                /* reasons per REM second, all channels */
    unsigned short *role[RT_ROLE_COUNT];   /* reasons for one channel only; NULL when none */
} rt_exclusion_masks;

/* Builds the masks from the timeline's events and lights under the
 * parameters' policy. REM second j of bout b is index
 * bouts[b].epoch_first * epoch_s + j. */
rt_status rt_exclusions_build(const rt_timeline *tl, const rt_score_params *p,
                              const bout_span *bouts, size_t n_bouts, size_t rem_epochs,
                              rt_exclusion_masks *masks, rt_error *err);
void rt_exclusions_free(rt_exclusion_masks *masks);

/* Makes room for one role's own reasons ahead of time, so that threads
 * marking different seconds of the role never allocate it at once. */
rt_status rt_exclusions_reserve_role(rt_exclusion_masks *masks, rt_role role, rt_error *err);

/* Adds reasons for one role to REM seconds [first, first + n). */
rt_status rt_exclusions_mark_role(rt_exclusion_masks *masks, rt_role role, size_t first, size_t n,
                                  unsigned bits, rt_error *err);

/* Reasons of REM seconds [first, first + n) for a role (global | role). */
unsigned rt_exclusions_of(const rt_exclusion_masks *masks, rt_role role, size_t first, size_t n);

/* Respiratory-event counts for the summary: apneas + hypopneas starting in
 * REM per hour of REM, limb movements likewise; NaN when none were given. */
void rt_exclusions_rates(const rt_timeline *tl, const bout_span *bouts, size_t n_bouts,
                         double rem_hours, rt_exclusion_summary *summary);

#endif
