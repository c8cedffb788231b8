/* The sleep context of a night from its staging alone: time in bed, total
 * sleep time, efficiency, latencies, wake after sleep onset and the time in
 * each stage, as the AASM Manual for the Scoring of Sleep and Associated
 * Events (v2.x, "Parameters to be reported"; recalled, from memory) defines
 * them:
 *  - total recording time is lights-off to lights-on; we call it time in bed,
 *    so that it is not mistaken for the length of the recording file, which
 *    is reported beside it;
 *  - sleep latency: lights-off to the first epoch of any sleep stage;
 *  - REM latency: sleep onset to the first epoch of stage R;
 *  - wake after sleep onset: stage W in bed after sleep onset (the manual's
 *    "stage W during total recording time minus sleep latency");
 *  - sleep efficiency: total sleep time / time in bed x 100;
 *  - the time in each stage, and its percentage of total sleep time.
 * Without lights times the recording's start and end stand in for them
 * (night->staging.expect_from_s/expect_to_s, the same span the staging
 * coverage is checked against). An epoch counts by its overlap with the
 * time in bed, so a lights time inside an epoch counts part of it. */
#include <math.h>
#include <string.h>

#include "night_internal.h"

static bool is_sleep(unsigned char s)
{
    return s == RT_STAGE_N1 || s == RT_STAGE_N2 || s == RT_STAGE_N3 || s == RT_STAGE_R;
}

void rt_night_sleep_context(rt_night *night, const rt_timeline *tl)
{
    rt_sleep_context *c = &night->sleep;
    memset(c, 0, sizeof *c);
    const double from = night->staging.expect_from_s, to = night->staging.expect_to_s;
    c->recording_min = night->recording_s / 60.0;
    c->lights_off_given = night->staging.lights_off_given;
    c->lights_on_given = night->staging.lights_on_given;
    c->in_bed_from_s = from;
    c->in_bed_to_s = to;
    c->in_bed_min = fmax(0.0, to - from) / 60.0;
    c->sleep_onset_s = c->sleep_end_s = NAN;
    double first_rem_s = NAN, staged_min = 0.0;
    for (size_t i = 0; i < tl->n_epochs; i++) {
        double a = fmax((double)i * tl->epoch_s, from), b = fmin((double)(i + 1) * tl->epoch_s, to);
        if (b <= a)
            continue;
        unsigned char s = tl->stages[i] < RT_STAGE_COUNT ? tl->stages[i] : RT_STAGE_UNSCORED;
        double min = (b - a) / 60.0;
        c->stage_min[s] += min;
        staged_min += s != RT_STAGE_UNSCORED ? min : 0.0;
        if (is_sleep(s)) {
            if (isnan(c->sleep_onset_s))
                c->sleep_onset_s = a;
            c->sleep_end_s = b;
        }
        if (s == RT_STAGE_R && isnan(first_rem_s))
            first_rem_s = a;
        if (s == RT_STAGE_W && !isnan(c->sleep_onset_s))
            c->waso_min += min;
    }
    /* in bed but past the last staged epoch, or between runs: unstaged */
    c->stage_min[RT_STAGE_UNSCORED] = fmax(0.0, c->in_bed_min - staged_min);
    c->sleep_min = c->stage_min[RT_STAGE_N1] + c->stage_min[RT_STAGE_N2] +
                   c->stage_min[RT_STAGE_N3] + c->stage_min[RT_STAGE_R];
    c->efficiency_pct = c->in_bed_min > 0 ? 100.0 * c->sleep_min / c->in_bed_min : NAN;
    for (int s = 0; s < RT_STAGE_COUNT; s++)
        c->stage_pct[s] = is_sleep((unsigned char)s) && c->sleep_min > 0
                              ? 100.0 * c->stage_min[s] / c->sleep_min
                              : NAN;
    bool slept = !isnan(c->sleep_onset_s);
    c->sleep_latency_min = slept ? (c->sleep_onset_s - from) / 60.0 : NAN;
    c->rem_latency_min = slept && !isnan(first_rem_s) ? (first_rem_s - c->sleep_onset_s) / 60.0
                                                      : NAN;
    if (!slept)
        c->waso_min = NAN;
    c->half_split_s = slept ? 0.5 * (c->sleep_onset_s + c->sleep_end_s) : NAN;
}
