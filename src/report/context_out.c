/* The night in context, for the text summary and the periods table: the
 * sleep context of the staging, the indices per REM period and per half of
 * the night, each index against the norms, and the one plain-language
 * sentence for the referring physician (docs/review-report.md). The JSON
 * result and the page take the same numbers from the night; the sentence is
 * composed here once for all three. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "text.h"
#include "remtone/report.h"

/* ---- the plain-language sentence --------------------------------------------- */

/* What each reservation means, in the fewest words (rt_reservation_code order). */
static const char *const RESERVE_WORDS[RT_RESERVE_COUNT] = {
    "the staging does not cover the whole night",
    "the staging has gaps",
    "REM sleep holds many breathing events",
    "much of REM was left out",
    "a channel was partly unusable",
    "an index rests on little REM",
    "a recalled cutoff was not verified"};

/* Appends printf-style text to buf (length *len), never past cap. */
static void put(char *buf, size_t cap, size_t *len, const char *fmt, ...) RT_PRINTF(4, 5);
static void put(char *buf, size_t cap, size_t *len, const char *fmt, ...)
{
    if (*len >= cap)
        return;
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(buf + *len, cap - *len, fmt, ap);
    va_end(ap);
    if (n > 0)
        *len = *len + (size_t)n < cap ? *len + (size_t)n : cap - 1;
}

/* How many indices reach (or, when !reach, near) a cutoff that decides the level. */
static int count_deciding(const rt_night *night, bool reach, int *first)
{
    int n = 0;
    *first = -1;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_value *v = &night->index[i];
        if (v->status == RT_STATUS_NOT_COMPUTED || v->status == RT_STATUS_NO_CUTOFF ||
            !rt_night_cutoff_verified(night, i))
            continue;
        bool lower = rt_index_rules()[i].lower_is_worse;
        bool hit = reach ? (lower ? v->status == RT_STATUS_BELOW : v->status == RT_STATUS_ABOVE)
                         : (lower ? v->status == RT_STATUS_INTERMEDIATE
                                  : v->status == RT_STATUS_BELOW &&
                                        v->value >= night->params.near_fraction *
                                                        night->cutoffs.value[i]);
        if (hit && n++ == 0)
            *first = i;
    }
    return n;
}

/* Where the compared measures lie against the norms, the built-in table's
 * (adults without RBD) and the lab file's strata counted apart, each stratum
 * named with its file and lines; or why the lab's norms did not apply. */
static void norms_words(const rt_night *night, char *buf, size_t cap, size_t *len)
{
    int placed[2] = {0, 0}, beyond[2] = {0, 0};
    const rt_norm_place *lab = NULL;
    const char *why = NULL, *prefix = "not placed: ";
    bool one_group = true;
    char lines[96] = "", strata[480] = ""; /* "3, 6"; "women aged 60-69, line 3; ..." */
    size_t used = 0, s_used = 0;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_norm_place *np = &night->norms[i];
        if (np->lab && !np->applied && !why && strncmp(np->text, prefix, strlen(prefix)) == 0)
            why = np->text + strlen(prefix);
        if (np->band == RT_NORM_NOT_PLACED)
            continue;
        placed[np->lab]++;
        beyond[np->lab] += np->band == RT_NORM_BEYOND || np->band == RT_NORM_BEYOND_RBD_CUTOFF;
        if (!np->lab)
            continue;
        if (lab && strcmp(lab->stratum.who, np->stratum.who) != 0)
            one_group = false;
        lab = lab ? lab : np;
        int w = snprintf(lines + used, sizeof lines - used, "%s%ld", used ? ", " : "",
                         np->stratum.line);
        used = w > 0 && (size_t)w < sizeof lines - used ? used + (size_t)w : used;
        w = snprintf(strata + s_used, sizeof strata - s_used, "%s%s, line %ld",
                     s_used ? "; " : "", np->stratum.who, np->stratum.line);
        s_used = w > 0 && (size_t)w < sizeof strata - s_used ? s_used + (size_t)w : s_used;
    }
    if (placed[0])
        put(buf, cap, len, "; against adults without RBD, %d of %d compared chin measures lie "
            "beyond the normal limit", beyond[0], placed[0]);
    const char *slash = strrchr(night->norms_file, '/');
    const char *file = slash ? slash + 1 : night->norms_file;
    if (placed[1] == 1)
        put(buf, cap, len, "; against the %s, the compared measure lies %s", lab->stratum.label,
            beyond[1] ? "beyond it" : "within it");
    else if (placed[1] && one_group)
        put(buf, cap, len, "; against the lab's norms for %s (lab file %s lines %s), %d of %d "
            "compared measures lie beyond the normal limit", lab->stratum.who, file, lines,
            beyond[1], placed[1]);
    else if (placed[1])
        put(buf, cap, len, "; against the lab's norms (lab file %s: %s), %d of %d compared "
            "measures lie beyond the normal limit", file, strata, beyond[1], placed[1]);
    else if (why)
        put(buf, cap, len, "; the lab's norms (%s) were not applied: %s", file, why);
}

void rt_night_plain_sentence(const rt_night *night, char *buf, size_t cap)
{
    size_t len = 0;
    buf[0] = '\0';
    if (night->level == RT_REVIEW_NOT_ASSESSABLE) {
        put(buf, cap, &len, "remtone could not measure muscle tone in REM sleep reliably in this "
            "recording (%s), so it says nothing about REM sleep without atonia here",
            night->n_reasons ? night->reasons[0] : "see the reasons");
    } else {
        const rt_index_rule *rules = rt_index_rules();
        rt_index_id h = night->headline;
        char v[32], c[32];
        rt_report_value_text(&rules[h], night->index[h].value, v, sizeof v);
        bool arms = h == RT_IX_SINBAR_COMBINED_3S;
        put(buf, cap, &len, "In %.0f min of REM sleep (%.0f min scorable), the %s EMG showed "
            "muscle activity in %s of 3-s mini-epochs", night->rem_minutes,
            night->scorable_minutes, arms ? "chin and arm" : "chin", v);
        if (night->cutoffs.has[h]) {
            rt_report_value_text(&rules[h], night->cutoffs.value[h], c, sizeof c);
            bool above = night->index[h].status == RT_STATUS_ABOVE;
            put(buf, cap, &len, ", %s the %s cutoff of %s", above ? "at or above" : "below",
                strcmp(night->cutoffs.origin, "published") == 0 ? "published" : "laboratory's", c);
        }
        int first = -1;
        int reach = count_deciding(night, true, &first);
        if (night->level == RT_REVIEW_FLAGGED)
            put(buf, cap, &len, "; %d %s a verified cutoff (%s), so a physician should review "
                "the recording", reach, reach == 1 ? "index reaches" : "indices reach",
                first >= 0 ? rules[first].title : "see the reasons");
        else if (night->level == RT_REVIEW_NEAR) {
            int nearing = count_deciding(night, false, &first);
            put(buf, cap, &len, "; no verified cutoff is reached, but %d %s close to one (%s)",
                nearing, nearing == 1 ? "index is" : "indices are",
                first >= 0 ? rules[first].title : "see the reasons");
        } else
            put(buf, cap, &len, "; no index reaches or nears a verified cutoff");
        if (night->norms_placed)
            norms_words(night, buf, cap, &len);
    }
    if (night->n_reservations) {
        put(buf, cap, &len, "; this is limited because ");
        for (size_t i = 0; i < night->n_reservations; i++) {
            int code = (int)night->reservations[i].code;
            put(buf, cap, &len, "%s%s", i == 0 ? "" : i + 1 == night->n_reservations ? " and " : ", ",
                code >= 0 && code < RT_RESERVE_COUNT ? RESERVE_WORDS[code] : "of a reservation");
        }
    }
    put(buf, cap, &len, "; this describes the EMG and is not a diagnosis.");
}

/* ---- text ------------------------------------------------------------------------ */

static void minutes_text(double min, char *buf, size_t cap)
{
    if (isfinite(min))
        snprintf(buf, cap, "%.1f min", min);
    else
        snprintf(buf, cap, "-");
}

/* A group's label: "1" .. "N" for the periods, "first half", "second half". */
static void group_name(const rt_night *night, size_t i, char *buf, size_t cap)
{
    if (i < night->n_periods)
        snprintf(buf, cap, "%zu", i + 1);
    else
        snprintf(buf, cap, "%s half", i == night->n_periods ? "first" : "second");
}

/* The periods, then the two halves. */
static const rt_rem_period *group(const rt_night *night, size_t i)
{
    return i < night->n_periods ? &night->periods[i] : &night->halves[i - night->n_periods];
}

static void sleep_text(const rt_night *night, FILE *out)
{
    const rt_sleep_context *s = &night->sleep;
    char a[32], b[32], c[32], off[16], on[16];
    rt_report_clock(&night->start, s->in_bed_from_s, off, sizeof off);
    rt_report_clock(&night->start, s->in_bed_to_s, on, sizeof on);
    fprintf(out, "Sleep (from the staging, AASM Manual definitions):\n");
    fprintf(out, "  recording %.1f min; in bed %.1f min, %s %s to %s %s\n", s->recording_min,
            s->in_bed_min, s->lights_off_given ? "lights-off" : "recording start", off,
            s->lights_on_given ? "lights-on" : "recording end", on);
    minutes_text(s->sleep_latency_min, a, sizeof a);
    minutes_text(s->rem_latency_min, b, sizeof b);
    minutes_text(s->waso_min, c, sizeof c);
    fprintf(out, "  total sleep %.1f min, efficiency ", s->sleep_min);
    if (isfinite(s->efficiency_pct))
        fprintf(out, "%.1f %%", s->efficiency_pct);
    else
        fprintf(out, "-");
    fprintf(out, "; sleep latency %s, REM latency %s, wake after sleep onset %s\n", a, b, c);
    fprintf(out, "  stages:");
    static const rt_stage SHOWN[] = {RT_STAGE_W, RT_STAGE_N1, RT_STAGE_N2, RT_STAGE_N3,
                                     RT_STAGE_R};
    for (size_t i = 0; i < sizeof SHOWN / sizeof SHOWN[0]; i++) {
        fprintf(out, "%s %s %.1f min", i ? "," : "", rt_stage_name(SHOWN[i]),
                s->stage_min[SHOWN[i]]);
        if (isfinite(s->stage_pct[SHOWN[i]]))
            fprintf(out, " (%.1f %% of sleep)", s->stage_pct[SHOWN[i]]);
    }
    if (s->stage_min[RT_STAGE_MOVEMENT] > 0)
        fprintf(out, ", MT %.1f min", s->stage_min[RT_STAGE_MOVEMENT]);
    if (s->stage_min[RT_STAGE_UNSCORED] > 0)
        fprintf(out, ", unstaged %.1f min", s->stage_min[RT_STAGE_UNSCORED]);
    fprintf(out, "; REM periods %zu\n", s->rem_periods);
}

/* Writes a line without its trailing spaces. */
static void line_out(FILE *out, char *line)
{
    size_t n = strlen(line);
    while (n > 0 && line[n - 1] == ' ')
        line[--n] = '\0';
    fprintf(out, "%s\n", line);
}

/* The periods and halves, one line each, then every index (rows) per period
 * and half (columns). */
static void periods_text(const rt_night *night, FILE *out)
{
    const rt_index_rule *rules = rt_index_rules();
    char line[2048];
    size_t len = 0, groups = night->n_periods + 2;
    fprintf(out, "REM periods (REM less than %g min apart is one period; epochs from 1):\n",
            night->params.rem_period_gap_min);
    put(line, sizeof line, &len, "  %-11s %-8s %-8s %-11s %6s %6s", "period", "start", "end",
        "epochs", "REM", "scored");
    line_out(out, line);
    for (size_t i = 0; i < groups; i++) {
        const rt_rem_period *g = group(night, i);
        char name[24], t0[16] = "-", t1[16] = "-", ep[32] = "-";
        group_name(night, i, name, sizeof name);
        if (g->n_bouts) {
            rt_report_clock(&night->start, g->onset_s, t0, sizeof t0);
            rt_report_clock(&night->start, g->end_s, t1, sizeof t1);
            snprintf(ep, sizeof ep, "%zu-%zu", g->first_epoch + 1, g->last_epoch + 1);
        }
        len = 0;
        put(line, sizeof line, &len, "  %-11s %-8s %-8s %-11s %6.1f %6.1f", name, t0, t1, ep,
            g->rem_minutes, g->scorable_minutes);
        line_out(out, line);
    }
    len = 0;
    put(line, sizeof line, &len, "  %-32s", "index");
    for (size_t i = 0; i < groups; i++) {
        char name[24];
        if (i < night->n_periods)
            snprintf(name, sizeof name, "%zu", i + 1);
        else
            snprintf(name, sizeof name, "%s half", i == night->n_periods ? "1st" : "2nd");
        put(line, sizeof line, &len, " %9s ", name);
    }
    line_out(out, line);
    for (int k = 0; k < RT_IX_COUNT; k++) {
        len = 0;
        put(line, sizeof line, &len, "  %-32s", rules[k].id);
        for (size_t i = 0; i < groups; i++) {
            const rt_index_value *x = &group(night, i)->index[k];
            char v[32];
            rt_report_value_text(&rules[k], x->value, v, sizeof v);
            bool beyond = rules[k].lower_is_worse ? x->status == RT_STATUS_BELOW
                                                  : x->status == RT_STATUS_ABOVE;
            put(line, sizeof line, &len, " %9s%s", v, beyond ? "*" : " ");
        }
        line_out(out, line);
    }
    fprintf(out, "  (* beyond the cutoff in force; a period's indices do not change the level)\n");
}

static void norms_text(const rt_night *night, FILE *out)
{
    if (!night->norms_placed)
        return;
    const rt_person *p = &night->person;
    size_t n = 0;
    const rt_norm_row *t = rt_norm_table(&n);
    fprintf(out, "Against norms (");
    if (isfinite(p->age_years))
        fprintf(out, "age %g", p->age_years);
    else
        fprintf(out, "age not given");
    fprintf(out, ", %s; ", p->sex == 'F' ? "woman" : p->sex == 'M' ? "man" : "sex not given");
    if (night->norms_file[0])
        fprintf(out, "the lab's norms file %s for the indices it lists (lab-supplied), else ",
                night->norms_file);
    fprintf(out, "norms of %s, one table for every age and both sexes; scored by eye, "
            "so context only):\n", n ? t[0].group : "");
    const rt_index_rule *rules = rt_index_rules();
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_norm_place *np = &night->norms[i];
        if (np->row < 0 && !np->lab)
            continue;
        char v[32];
        rt_report_value_text(&rules[i], night->index[i].value, v, sizeof v);
        fprintf(out, "  %-30s %10s  %s\n", rules[i].id, v, np->text);
        if (np->lab && np->applied)
            fprintf(out, "  %-30s %10s  source: %s%s%s\n", "", "", np->stratum.source,
                    np->stratum.method[0] ? "; scored: " : "", np->stratum.method);
    }
}

void rt_context_write_text(const rt_night *night, FILE *out)
{
    sleep_text(night, out);
    periods_text(night, out);
    norms_text(night, out);
}

/* ---- the periods table ----------------------------------------------------------- */

rt_status rt_night_write_periods_csv(const rt_night *night, const rt_recording *rec,
                                     const char *path, rt_error *err)
{
    if (!night || !path)
        return rt_fail(err, RT_ERR_USAGE, "periods table: a night and a path are needed");
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = out.file;
    const rt_index_rule *rules = rt_index_rules();
    rt_clock_time start = rec ? rt_recording_start(rec) : night->start;
    fprintf(f, "period,half,start_clock,end_clock,start_s,end_s,first_epoch,last_epoch,"
               "rem_minutes,scorable_minutes,index,value,unit,status,numerator,denominator,"
               "reason\n");
    int no_memory = 0;
    for (size_t i = 0; i < night->n_periods + 2 && !ferror(f) && !no_memory; i++) {
        const rt_rem_period *g = group(night, i);
        char name[24], t0[16] = "", t1[16] = "";
        if (i < night->n_periods)
            snprintf(name, sizeof name, "%zu", i + 1);
        else
            snprintf(name, sizeof name, "half-%zu", i - night->n_periods + 1);
        if (g->n_bouts) {
            rt_report_clock(&start, g->onset_s, t0, sizeof t0);
            rt_report_clock(&start, g->end_s, t1, sizeof t1);
        }
        for (int k = 0; k < RT_IX_COUNT; k++) {
            const rt_index_value *x = &g->index[k];
            fprintf(f, "%s,%s,%s,%s,", name, g->half ? "second" : "first", t0, t1);
            if (g->n_bouts)
                fprintf(f, "%.0f,%.0f,%zu,%zu,", g->onset_s, g->end_s, g->first_epoch + 1,
                        g->last_epoch + 1);
            else
                fprintf(f, ",,,,");
            fprintf(f, "%.1f,%.2f,%s,", g->rem_minutes, g->scorable_minutes, rules[k].id);
            if (isfinite(x->value))
                fprintf(f, "%.4f", x->value);
            fprintf(f, ",%s,%s,%zu,%zu,", rules[k].unit, rt_index_status_name(x->status),
                    x->numerator, x->denominator);
            no_memory |= rt_csv_put_field(f, x->reason);
            fputc('\n', f);
        }
    }
    return rt_output_finish(&out, no_memory, "the periods table", err);
}
