/* REM Atonia Index arithmetic (Ferri et al. 2010, Sleep Med 11:947-949). */
#include "rai.h"

#include <math.h>

void rt_rai_remove_floor(const double *v, size_t n, size_t window, double *out)
{
    size_t half = window / 2;
    for (size_t j = 0; j < n; j++) {
        size_t lo = j >= half ? j - half : 0;
        size_t hi = j + (window - half); /* exclusive */
        if (hi > n)
            hi = n;
        double floor_uv = v[lo];
        for (size_t k = lo + 1; k < hi; k++)
            if (v[k] < floor_uv)
                floor_uv = v[k];
        out[j] = v[j] - floor_uv;
    }
}

void rt_rai_count(const double *floored, size_t n, const bool *skip, rt_rai_counts *counts)
{
    for (size_t j = 0; j < n; j++) {
        if (skip && skip[j])
            continue;
        counts->total++;
        if (floored[j] <= 1.0)
            counts->at_most_1++;
        else if (floored[j] <= 2.0)
            counts->from_1_to_2++;
    }
}

double rt_rai_value(const rt_rai_counts *counts)
{
    if (counts->total == 0)
        return NAN;
    double p1 = 100.0 * (double)counts->at_most_1 / (double)counts->total;
    double p2 = 100.0 * (double)counts->from_1_to_2 / (double)counts->total;
    if (p2 >= 100.0)
        return 0.0; /* every second in (1, 2]: no atonia at all */
    return p1 / (100.0 - p2);
}
