/* The plain words every report uses alike for the review level with its
 * reservations and for what the staging covers, so the text summary, the
 * JSON result and the review page cannot say it differently. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"
#include "report_internal.h"

const char *rt_report_level_plain(rt_review_level level)
{
    switch (level) {
    case RT_REVIEW_FLAGGED: return "review advised";
    case RT_REVIEW_NEAR: return "near a cutoff";
    case RT_REVIEW_CLEAR: return "clear";
    case RT_REVIEW_NOT_ASSESSABLE: return "not assessable";
    }
    return "";
}

void rt_report_statement(const rt_night *night, char *buf, size_t cap)
{
    snprintf(buf, cap, "%s%s", rt_report_level_plain(night->level),
             night->n_reservations ? ", with reservations" : "");
}

/* "12.0 min at the start" of one end, and whether it is within its allowance. */
static void end_text(double unstaged_s, double tolerance_s, const char *where, char *buf,
                     size_t cap)
{
    char d[32], t[32];
    rt_duration_text(unstaged_s, d, sizeof d);
    rt_duration_text(tolerance_s, t, sizeof t);
    snprintf(buf, cap, "%s %s (%s %s allowed)", d, where,
             unstaged_s > tolerance_s + 1e-6 ? "more than the" : "within the", t);
}

void rt_report_staging_text(const rt_night *night, char *buf, size_t cap)
{
    const rt_staging_summary *s = &night->staging;
    char lights[128] = "", a[128] = "", b[128] = "", off[16], on[16];
    if (s->lights_off_given || s->lights_on_given) {
        rt_report_clock(&night->start, s->expect_from_s, off, sizeof off);
        rt_report_clock(&night->start, s->expect_to_s, on, sizeof on);
        snprintf(lights, sizeof lights, "; to cover: %s %s to %s %s",
                 s->lights_off_given ? "lights-off" : "recording start", off,
                 s->lights_on_given ? "lights-on" : "recording end", on);
    }
    if (s->unstaged_start_s > 0.0)
        end_text(s->unstaged_start_s, s->tolerance_start_s, "at the start", a, sizeof a);
    if (s->unstaged_end_s > 0.0 && isfinite(s->first_staged_s))
        end_text(s->unstaged_end_s, s->tolerance_end_s, "at the end", b, sizeof b);
    snprintf(buf, cap, "%.1f h staged of the %.1f-h recording%s; %s%s%s%s%s",
             s->staged_s / 3600.0, night->recording_s / 3600.0, lights,
             s->partial ? "partial" : "complete", a[0] || b[0] ? ", unstaged " : "", a,
             a[0] && b[0] ? " and " : "", b);
}
