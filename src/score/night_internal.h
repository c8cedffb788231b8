/* Shared between the scoring passes (night.c) and the index arithmetic
 * (indices.c). */
#ifndef REMTONE_NIGHT_INTERNAL_H
#define REMTONE_NIGHT_INTERNAL_H

#include <stdbool.h>
#include <stddef.h>

#include "internal.h"
#include "rai.h"
#include "remtone/score.h"

typedef struct bout_span {
    double t0;            /* bout onset, seconds */
    size_t n_epochs;
    size_t epoch_first;   /* index into night->epochs */
    size_t mini3_first;   /* index into night->minis3 */
    size_t mini2_first;   /* index into night->minis2 */
} bout_span;

/* How a REM bout of len_s seconds is cut into blocks of core_s seconds
 * (docs/scoring.md, "Long bouts"): returns the number of pieces; piece j
 * (below that number) conditions view[0] .. view[1] and labels own[0] ..
 * own[1], seconds from the bout's start. */
size_t rt_bout_piece(size_t len_s, size_t core_s, size_t j, size_t view[2], size_t own[2]);

/* Counts gathered while scanning the bouts that the labels alone do not hold. */
struct rt_exclusion_masks;

typedef struct scoring_state {
    struct rt_exclusion_masks *masks; /* REM seconds left out, and why */
    size_t montreal_windows;
    size_t montreal_tonic;
    rt_rai_counts rai;
    size_t burst_cap;
} scoring_state;

/* Appends a warning (printf-style) to the night; drops it when full. */
void rt_night_warn(rt_night *night, const char *fmt, ...) RT_PRINTF(2, 3);

/* Epoch aggregates, indices, statuses, headline, review level and the
 * reservations (rt_night_reserve). */
rt_status rt_night_summarise(rt_night *night, const scoring_state *ss, rt_error *err);

/* Index i reaches its cutoff in force (RAI: below it); near it (at or above
 * near_fraction of it; RAI: intermediate). False when not computed or without
 * a cutoff. */
bool rt_night_index_abnormal(const rt_night *night, int i);
bool rt_night_index_near(const rt_night *night, int i);
/* Index i's value in its unit ("12.3 %", "0.812", "4.0/h"). */
void rt_night_value_text(const rt_night *night, int i, double value, char *buf, size_t cap);

/* What the staging covers against the recording and its lights times
 * (night->staging; night->recording_s must be set). RT_ERR_NOMEM only. */
rt_status rt_night_staging_summarise(rt_night *night, const rt_timeline *tl, rt_error *err);

/* The reservations that limit the night's level (night->reservations), from
 * the staging summary, the exclusions, the channels' quality, the indices'
 * denominators and the cutoffs that did not decide the level. Called last by
 * rt_night_summarise. */
void rt_night_reserve(rt_night *night);


#endif
