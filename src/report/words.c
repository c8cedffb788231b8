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
    char means[600];
    rt_report_level_means(night, means, sizeof means);
    snprintf(buf, cap, "%s%s: %s", rt_report_level_plain(night->level),
             night->n_reservations ? ", with reservations" : "", means);
}

/* A value in its index's unit: "70.0 %", "0.603", "193.3/h". */
static void value_words(int i, double v, char *buf, size_t cap)
{
    const char *unit = rt_index_rules()[i].unit;
    if (strcmp(unit, "%") == 0)
        snprintf(buf, cap, "%.1f %%", v);
    else if (strcmp(unit, "/h") == 0)
        snprintf(buf, cap, "%.1f/h", v);
    else
        snprintf(buf, cap, "%.3f", v);
}

const char *rt_report_plural(size_t n) { return n == 1 ? "" : "s"; }

int rt_report_cutoff_reached(const rt_night *night, int i)
{
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED || v->status == RT_STATUS_NO_CUTOFF ||
        !night->cutoffs.has[i])
        return -1;
    return rt_index_rules()[i].lower_is_worse ? v->status == RT_STATUS_BELOW
                                              : v->status == RT_STATUS_ABOVE;
}

void rt_report_level_means(const rt_night *night, char *buf, size_t cap)
{
    bool published = false, lab = false;
    for (int i = 0; i < RT_IX_COUNT; i++)
        if (rt_report_cutoff_reached(night, i) == 1 && rt_night_cutoff_verified(night, i)) {
            if (rt_cutoff_is_lab(&night->cutoffs, i))
                lab = true;
            else
                published = true;
        }
    switch (night->level) {
    case RT_REVIEW_FLAGGED:
        if (published && lab)
            snprintf(buf, cap, "published cutoffs and the lab's own (%s) are reached",
                     rt_report_basename(night->cutoffs.origin));
        else if (lab)
            snprintf(buf, cap, "a lab's own cutoff is reached (%s)",
                     rt_report_basename(night->cutoffs.origin));
        else
            snprintf(buf, cap, "a published cutoff is reached");
        return;
    case RT_REVIEW_NEAR:
        snprintf(buf, cap, "no verified cutoff is reached; one is near");
        return;
    case RT_REVIEW_CLEAR:
        snprintf(buf, cap, "no verified cutoff is reached or near");
        return;
    case RT_REVIEW_NOT_ASSESSABLE:
        snprintf(buf, cap, "whether a cutoff is reached cannot be told: too little usable REM "
                           "or no usable chin channel");
        return;
    }
    snprintf(buf, cap, "unknown level");
}

void rt_report_status_words(const rt_night *night, int i, char *buf, size_t cap)
{
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED) {
        snprintf(buf, cap, "not computed");
        return;
    }
    if (v->status == RT_STATUS_NO_CUTOFF || !night->cutoffs.has[i]) {
        snprintf(buf, cap, "no cutoff");
        return;
    }
    if (v->status == RT_STATUS_INTERMEDIATE) {
        char lo[32], hi[32];
        value_words(i, night->cutoffs.value[i], lo, sizeof lo);
        value_words(i, night->cutoffs.normal_from[i], hi, sizeof hi);
        snprintf(buf, cap, "not reached; intermediate (%s to %s)", lo, hi);
        return;
    }
    snprintf(buf, cap, "%s", rt_report_cutoff_reached(night, i) == 1 ? "reached" : "not reached");
}

/* "the published cutoff 31.9 %" or "the lab's cutoff 25.0 % (lab.csv line 2)",
 * with "below" for the REM Atonia Index, and "recalled, not verified" marks. */
static void cutoff_words(const rt_night *night, int i, char *buf, size_t cap)
{
    char cut[32], src[600];
    value_words(i, night->cutoffs.value[i], cut, sizeof cut);
    bool lab = rt_cutoff_is_lab(&night->cutoffs, i);
    rt_cutoff_source(&night->cutoffs, i, src, sizeof src);
    snprintf(buf, cap, "the %s cutoff %s%s%s%s%s", lab ? "lab's" : "published",
             rt_index_rules()[i].lower_is_worse ? "below " : "", cut,
             lab ? " (" : "", lab ? src : "", lab ? ")" : "");
}

void rt_report_headline(const rt_night *night, char *buf, size_t cap)
{
    const rt_index_rule *rules = rt_index_rules();
    const int want = RT_IX_SINBAR_COMBINED_3S, shown = (int)night->headline;
    const rt_index_value *hv = &night->index[shown];
    char lead[400] = "";
    if (shown != want && hv->status != RT_STATUS_NOT_COMPUTED)
        snprintf(lead, sizeof lead, "%s cannot be computed (%s); shown instead: %s. ",
                 rules[want].id, night->index[want].reason, rules[shown].id);
    if (hv->status == RT_STATUS_NOT_COMPUTED) {
        /* the level's first reason says what made the night unscorable */
        const char *why = night->level == RT_REVIEW_NOT_ASSESSABLE && night->n_reasons
                              ? night->reasons[0] : "";
        snprintf(buf, cap, "%sREM with preserved muscle activity cannot be computed: %s%s%s%s; "
                           "no index is shown in its place.", lead, hv->reason,
                 why[0] ? " (" : "", why, why[0] ? ")" : "");
        return;
    }
    char v[32], cut[800] = "", tail[200] = "";
    value_words(shown, hv->value, v, sizeof v);
    int reached = rt_report_cutoff_reached(night, shown);
    if (reached >= 0) {
        char words[680];
        cutoff_words(night, shown, words, sizeof words);
        snprintf(cut, sizeof cut, "; %s is %s%s", words, reached ? "reached" : "not reached",
                 rt_night_cutoff_verified(night, shown) ? ""
                 : " (a value recalled, not verified: context only)");
    } else {
        snprintf(cut, sizeof cut, "; no cutoff");
    }
    if (night->level == RT_REVIEW_FLAGGED && reached != 1)
        snprintf(tail, sizeof tail, " The review level rests on other indices (the reasons "
                                    "below).");
    snprintf(buf, cap, "%sREM with preserved muscle activity: %s (%s)%s.%s", lead, v,
             rules[shown].id, cut, tail);
}

/* The units each index counts, in rt_index_id order. */
static const char *const COUNTS[RT_IX_COUNT][2] = {
    [RT_IX_AASM_TONIC_CHIN] = {"epochs", "30-s REM epochs"},
    [RT_IX_AASM_PHASIC_CHIN] = {"epochs", "30-s REM epochs"},
    [RT_IX_AASM_PHASIC_ANY] = {"epochs", "30-s REM epochs"},
    [RT_IX_AASM_RSWA] = {"epochs", "30-s REM epochs"},
    [RT_IX_SINBAR_CHIN_ANY_3S] = {"mini-epochs", "3-s REM mini-epochs"},
    [RT_IX_SINBAR_CHIN_PHASIC_3S] = {"mini-epochs", "3-s REM mini-epochs"},
    [RT_IX_SINBAR_CHIN_TONIC_30S] = {"epochs", "30-s REM epochs"},
    [RT_IX_SINBAR_FDS_PHASIC_3S] = {"mini-epochs", "3-s REM mini-epochs"},
    [RT_IX_SINBAR_COMBINED_3S] = {"mini-epochs", "3-s REM mini-epochs"},
    [RT_IX_SINBAR_COMBINED_30S] = {"epochs", "30-s REM epochs"},
    [RT_IX_MONTREAL_TONIC_CHIN] = {"windows", "20-s REM windows"},
    [RT_IX_MONTREAL_PHASIC_CHIN] = {"mini-epochs", "2-s REM mini-epochs"},
    [RT_IX_RAI] = {"seconds at most 1 uV", "seconds of REM"},
    [RT_IX_MONTREAL_LM_PER_H] = {"leg movements", "3-s REM mini-epochs"},
};

const char *rt_report_numerator_unit(int i)
{
    return i >= 0 && i < RT_IX_COUNT ? COUNTS[i][0] : "";
}

const char *rt_report_denominator_unit(int i)
{
    return i >= 0 && i < RT_IX_COUNT ? COUNTS[i][1] : "";
}

void rt_report_counted(const rt_night *night, int i, char *buf, size_t cap)
{
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED && v->denominator == 0) {
        snprintf(buf, cap, "-");
        return;
    }
    if (i == RT_IX_MONTREAL_LM_PER_H) /* a rate: its denominator is time */
        snprintf(buf, cap, "%zu leg movement%s in %.1f min of REM", v->numerator,
                 rt_report_plural(v->numerator), (double)v->denominator * 3.0 / 60.0);
    else if (i == RT_IX_RAI)
        snprintf(buf, cap, "%zu of %zu s at most 1 uV", v->numerator, v->denominator);
    else
        snprintf(buf, cap, "%zu of %zu %s", v->numerator, v->denominator, COUNTS[i][1]);
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
