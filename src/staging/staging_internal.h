/* What the staging files share beyond the public timeline.h: the library's
 * side of a timeline. Every rt_timeline is made by rt_timeline_new inside an
 * rt_timeline_state, the public struct first (C11 6.7.2.1: a pointer to a
 * struct, suitably converted, points to its first member and back), so the
 * order check of rt_timeline_add_stage_run can keep its bookkeeping out of
 * the public layout. */
#ifndef REMTONE_STAGING_INTERNAL_H
#define REMTONE_STAGING_INTERNAL_H

#include <stdbool.h>

#include "remtone/timeline.h"

typedef struct rt_timeline_state {
    rt_timeline pub;
    /* Start and end in seconds of the latest stage run added, and its line
     * (0 = none), so that an out-of-order or overlapping entry can name both
     * places. */
    double last_run_start_s;
    double last_run_end_s;
    long last_run_line;
    char last_run_place[256]; /* the latest run's place ("stages.csv line 9"), as
                                 rt_event.place: messages about the staging name it */
} rt_timeline_state;

/* True once a stage run was added, even a run of unscored epochs only (it
 * leaves n_epochs at 0): the stages came from a source already. */
bool rt_timeline_has_stage_runs(const rt_timeline *tl);

#endif
