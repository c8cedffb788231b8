/* Shared between the scoring passes (night.c) and the index arithmetic
 * (indices.c). */
#ifndef REMTONE_NIGHT_INTERNAL_H
#define REMTONE_NIGHT_INTERNAL_H

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

/* Epoch aggregates, indices, statuses, headline and review level. */
rt_status rt_night_summarise(rt_night *night, const scoring_state *ss, rt_error *err);


#endif
