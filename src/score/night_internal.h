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

/* The counts of one REM bout that the labels alone do not hold (chin). */
typedef struct bout_counts {
    size_t montreal_windows;
    size_t montreal_tonic;
    rt_rai_counts rai;
} bout_counts;

typedef struct scoring_state {
    struct rt_exclusion_masks *masks; /* REM seconds left out, and why */
    size_t montreal_windows;
    size_t montreal_tonic;
    rt_rai_counts rai;
    size_t burst_cap;
    bout_counts *per_bout;            /* night->n_bouts; NULL in a view of one period */
} scoring_state;

/* Appends a warning (printf-style) to the night; drops it when full. */
void rt_night_warn(rt_night *night, const char *fmt, ...) RT_PRINTF(2, 3);

/* Epoch aggregates, indices, statuses, headline, review level and the
 * reservations (rt_night_reserve). */
rt_status rt_night_summarise(rt_night *night, const scoring_state *ss, rt_error *err);

/* The same with the night's mini-epoch and epoch labels changed (a
 * reviewer's decisions, corrections.c): every index counted from the labels
 * is counted again; the Montreal tonic index and the REM Atonia Index, which
 * the labels do not hold, keep their values; statuses, headline, level,
 * reasons and reservations are decided again. RT_ERR_NOMEM only. */
rt_status rt_night_resummarise(rt_night *night, rt_error *err);

/* Whether a unit counts in index i, the one definition the index counts and
 * the correction summary share: a 3-s mini-epoch for the SINBAR 3-s indices,
 * a 2-s mini-epoch for the Montreal phasic index (rt_index_mini_counts), a
 * REM epoch for the 30-s indices (rt_index_epoch_counts). *in_denominator
 * receives whether the unit is scored for i; both false for an index not
 * counted on such units. arms: both arm channels present. */
bool rt_index_mini_counts(int i, const rt_mini *m, bool arms, bool *in_denominator);
bool rt_index_epoch_counts(int i, const rt_epoch_result *e, bool arms, bool *in_denominator);

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

/* The indices of the epochs and mini-epochs `night` holds, with their
 * statuses against the cutoffs in force: the whole night, or a view of one
 * REM period (periods.c) whose arrays point into the night's. Sets
 * rem_minutes, scorable_minutes, the indices and the REM left out
 * (exclusions.minutes..., accumulated: start from zero); the epoch
 * aggregates must be in place. ss gives the Montreal tonic and RAI counts of
 * the same bouts. RT_ERR_NOMEM only. */
rt_status rt_night_indices(rt_night *night, const scoring_state *ss, rt_error *err);

/* The sleep context of the staging (night->sleep), periods not yet counted. */
void rt_night_sleep_context(rt_night *night, const rt_timeline *tl);

/* The REM periods and the halves of the night over the REM bouts (after
 * rt_night_sleep_context): boundaries and each one's REM event rates.
 * RT_ERR_NOMEM only. */
rt_status rt_night_periods_lay_out(rt_night *night, const rt_timeline *tl, const bout_span *bouts,
                                   rt_error *err);

/* Every index of each period and half, by rt_night_indices on a view of
 * its bouts (after the night's own indices). RT_ERR_NOMEM only. */
rt_status rt_night_periods_score(rt_night *night, const scoring_state *ss, rt_error *err);


/* Frees what rt_night_correct attached (corrections.c); NULL is accepted. */
void rt_night_corrections_free(struct rt_night_corrections *c);

#endif
