/* The REM Atonia Index (Ferri et al. 2008, J Sleep Res; Ferri et al. 2010,
 * Sleep Med 11:947-949): from the per-second mean rectified chin amplitude of
 * REM, after removing the minimum of a 60-value window centred on each second. */
#ifndef REMTONE_RAI_H
#define REMTONE_RAI_H

#include <stdbool.h>
#include <stddef.h>

/* out[j] = v[j] - min(v[k]) for k in [j - window/2, j + window - window/2 - 1]
 * clipped to [0, n). window = 60 for the published index. out may not alias v. */
void rt_rai_remove_floor(const double *v, size_t n, size_t window, double *out);

typedef struct rt_rai_counts {
    size_t at_most_1;      /* seconds with amplitude <= 1 uV */
    size_t from_1_to_2;    /* seconds with 1 uV < amplitude <= 2 uV */
    size_t total;          /* seconds counted */
} rt_rai_counts;

/* Adds the floor-removed values of one bout to the counts; seconds with
 * skip[j] true (may be NULL) are left out. */
void rt_rai_count(const double *floored, size_t n, const bool *skip, rt_rai_counts *counts);

/* RAI = (% of seconds <= 1 uV) / (100 - % of seconds in (1, 2] uV), 0..1;
 * NaN when no second was counted. */
double rt_rai_value(const rt_rai_counts *counts);

#endif
