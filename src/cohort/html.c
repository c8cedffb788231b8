/* The cohort overview page: every night with its level, reservations and a
 * link to its own page, the failed nights with their messages, then for
 * every index the values of each group against the cutoff in force and the
 * Youden cutoff (a strip plot on round ticks), and the ROC curve of the
 * positive against the negative group with labelled axes, as inline SVG in
 * one HTML file without scripts, through the review page's helpers
 * (report/svg.h). Written through libxml2's xmlTextWriter, so
 * every text -- group names come from the user's manifest -- is escaped,
 * after rt_utf8_clean (src/common/text.h) made it valid UTF-8. */
#include "cohort_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "remtone/report.h"
#include "report/svg.h"

enum { STRIP_W = 560, ROW_H = 26, ROC_SIZE = 220, MAX_TICKS = 12 };
static const char *const COLOR_POS = "#b03a2e", *const COLOR_NEG = "#1f618d",
                         *const COLOR_OTHER = "#7b7d7d";

/* Groups in display order: positive, negative, then the others as met. */
static size_t list_groups(const cohort_row *rows, size_t n, const rt_cohort_options *o,
                          const char **groups, size_t cap)
{
    size_t k = 0;
    groups[k++] = o->positive;
    groups[k++] = o->negative;
    for (size_t i = 0; i < n && k < cap; i++) {
        bool seen = false;
        for (size_t g = 0; g < k && !seen; g++)
            seen = strcmp(groups[g], rows[i].group) == 0;
        if (!seen && !rows[i].failed)
            groups[k++] = rows[i].group;
    }
    return k;
}

/* A horizontal value axis from 0 to the last round tick at or above the
 * largest value; returns that end. */
static double value_axis(rt_page *p, double left, double right, double y, double largest,
                         const char *unit)
{
    double ticks[MAX_TICKS];
    size_t n = rt_axis_ticks(0.0, largest, 5, ticks, MAX_TICKS);
    double hi = n ? ticks[n - 1] : largest;
    rt_svg_line(p, left, y, right, y, "#333", 1, NULL);
    for (size_t t = 0; t < n; t++) {
        double x = left + (right - left) * ticks[t] / hi;
        char label[32];
        snprintf(label, sizeof label, "%g", ticks[t]);
        rt_svg_line(p, x, y, x, y + 4, "#333", 1, NULL);
        rt_svg_text(p, x, y + 16, "middle", NULL, label);
    }
    rt_svg_text(p, (left + right) / 2, y + 32, "middle", NULL, unit);
    return hi;
}

static void strip_plot(rt_page *p, const cohort_row *rows, size_t n, int ix,
                       const cohort_calibration *cal, const char **groups, size_t n_groups)
{
    const rt_index_rule *rule = &rt_index_rules()[ix];
    double largest = strcmp(rule->unit, "%") == 0 ? 10.0 : 1.0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(rows[i].value[ix]) && rows[i].value[ix] > largest)
            largest = rows[i].value[ix];
    if (isfinite(cal->in_force[ix]) && cal->in_force[ix] > largest)
        largest = cal->in_force[ix];
    const double left = 130, right = STRIP_W - 20, top = 20;
    double height = top + ROW_H * (double)n_groups + 40;
    char label[160];
    snprintf(label, sizeof label, "%s of each night by group", rule->id);
    rt_svg_begin(p, STRIP_W, height, label);
    double axis_y = top + ROW_H * (double)n_groups;
    double hi = value_axis(p, left, right, axis_y, largest, rule->unit);
    for (size_t g = 0; g < n_groups; g++) {
        double cy = top + ROW_H * ((double)g + 0.5);
        const char *color = g == 0 ? COLOR_POS : g == 1 ? COLOR_NEG : COLOR_OTHER;
        rt_svg_text(p, left - 8, cy + 4, "end", NULL, groups[g][0] ? groups[g] : "(no group)");
        size_t k = 0;
        for (size_t i = 0; i < n; i++) {
            if (rows[i].failed || strcmp(rows[i].group, groups[g]) != 0 ||
                !isfinite(rows[i].value[ix]))
                continue;
            /* a fixed jitter, so the page is the same on every merge */
            double jitter = (double)((k++ * 7) % 11) - 5.0;
            rt_page_start(p, "circle");
            rt_page_attrf(p, "cx", "%.1f", left + (right - left) * rows[i].value[ix] / hi);
            rt_page_attrf(p, "cy", "%.1f", cy + jitter);
            rt_page_attr(p, "r", "3");
            rt_page_attr(p, "fill", color);
            rt_page_attr(p, "fill-opacity", "0.7");
            rt_page_start(p, "title");
            rt_page_textf(p, "%s: %.4g", rows[i].id, rows[i].value[ix]);
            rt_page_end_html(p);
            rt_page_end_svg(p);
        }
    }
    const double cuts[2] = {cal->in_force[ix], cal->roc[ix].youden_cutoff};
    const char *names[2] = {"cutoff", "Youden"}, *colors[2] = {"#000", "#1e8449"};
    for (int c = 0; c < 2; c++) {
        if (!isfinite(cuts[c]) || cuts[c] > hi)
            continue;
        double x = left + (right - left) * cuts[c] / hi;
        rt_svg_line(p, x, top - 6, x, axis_y, colors[c], 1, c ? "2,3" : "6,3");
        snprintf(label, sizeof label, "%s %.3g", names[c], cuts[c]);
        rt_svg_text(p, x, top - 9 + 10.0 * c, "middle", NULL, label);
    }
    rt_svg_end(p);
}

/* The ROC curve in a unit square with ticks every 0.2 on both axes. */
static void roc_plot(rt_page *p, const rt_roc *roc, const char *index_id)
{
    const double m = 48, s = ROC_SIZE, top = 10;
    char label[160];
    snprintf(label, sizeof label, "ROC curve of %s", index_id);
    rt_svg_begin(p, s + m + 14, s + m + 24, label);
    rt_svg_line(p, m, top, m + s, top, "#333", 1, NULL);
    rt_svg_line(p, m, top + s, m + s, top + s, "#333", 1, NULL);
    rt_svg_line(p, m, top, m, top + s, "#333", 1, NULL);
    rt_svg_line(p, m + s, top, m + s, top + s, "#333", 1, NULL);
    rt_svg_line(p, m, top + s, m + s, top, "#999", 1, "4,3"); /* chance */
    for (int t = 0; t <= 5; t++) {
        char tick[8];
        snprintf(tick, sizeof tick, "%.1f", t / 5.0);
        double x = m + s * t / 5.0, y = top + s * (1 - t / 5.0);
        rt_svg_line(p, x, top + s, x, top + s + 4, "#333", 1, NULL);
        rt_svg_text(p, x, top + s + 15, "middle", NULL, tick);
        rt_svg_line(p, m - 4, y, m, y, "#333", 1, NULL);
        rt_svg_text(p, m - 6, y + 4, "end", NULL, tick);
    }
    rt_svg_text(p, m + s / 2, top + s + 30, "middle", NULL, "1 - specificity (false-positive rate)");
    rt_page_start(p, "text");
    rt_page_attrf(p, "transform", "translate(12,%.0f) rotate(-90)", top + s / 2);
    rt_page_attr(p, "text-anchor", "middle");
    rt_page_text(p, "sensitivity (true-positive rate)");
    rt_page_end_html(p);
    if (roc->n_points > 1) {
        double *xs = rt_calloc(roc->n_points, sizeof *xs), *ys = rt_calloc(roc->n_points, sizeof *ys);
        if (xs && ys) {
            for (size_t k = 0; k < roc->n_points; k++) {
                xs[k] = m + s * roc->fpr[k];
                ys[k] = top + s * (1 - roc->tpr[k]);
            }
            rt_svg_polyline(p, xs, ys, roc->n_points, COLOR_POS, 2);
        } else {
            rt_page_fail(p, RT_ERR_NOMEM);
        }
        free(xs);
        free(ys);
    }
    rt_svg_end(p);
}

static void fmt_or_dash(char *dst, size_t cap, const char *fmt, double v)
{
    if (isfinite(v))
        snprintf(dst, cap, fmt, v);
    else
        rt_copy_string(dst, cap, "-");
}

static void row_of_cells(rt_page *p, const char *cell_name, const char *const *cells, size_t n)
{
    rt_page_start(p, "tr");
    for (size_t k = 0; k < n; k++)
        rt_page_element(p, cell_name, NULL, cells[k]);
    rt_page_end_html(p);
}

static void summary_table(rt_page *p, const cohort_calibration *cal)
{
    static const char *const heads[] = {"index", "AUC (95 % CI, DeLong)", "Youden cutoff",
                                        "published cutoff", "sensitivity", "specificity"};
    rt_page_start(p, "table");
    row_of_cells(p, "th", heads, 6);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_roc *c = &cal->roc[i];
        char cell[6][96];
        rt_copy_string(cell[0], sizeof cell[0], rt_index_rules()[i].id);
        if (isfinite(c->auc) && isfinite(c->auc_low))
            snprintf(cell[1], sizeof cell[1], "%.3f (%.3f-%.3f)", c->auc, c->auc_low, c->auc_high);
        else
            fmt_or_dash(cell[1], sizeof cell[1], "%.3f", c->auc);
        fmt_or_dash(cell[2], sizeof cell[2], "%.4g", c->youden_cutoff);
        fmt_or_dash(cell[3], sizeof cell[3], "%.4g", cal->published[i]);
        fmt_or_dash(cell[4], sizeof cell[4], "%.2f", cal->sens_published[i]);
        fmt_or_dash(cell[5], sizeof cell[5], "%.2f", cal->spec_published[i]);
        const char *cells[6] = {cell[0], cell[1], cell[2], cell[3], cell[4], cell[5]};
        row_of_cells(p, "td", cells, 6);
    }
    rt_page_end_html(p);
}

/* Per stratification (sex, age band): a table of every index against each
 * stratum, its counts in the header, each cell the AUC and the Youden
 * cutoff or why there is none; then the rows left out as unknown and the
 * stratum cutoff files. */
static void strata_tables(rt_page *p, const cohort_strata *strata, const rt_cohort_options *o)
{
    if (strata->n == 0)
        return;
    const char *unit = o->per_subject ? "subjects" : "nights";
    rt_page_element(p, "h2", NULL, "Calibration by stratum");
    rt_page_start(p, "p");
    rt_page_textf(p, "Each stratum is calibrated on its own %s as the whole cohort is; a stratum "
                     "without a scored \"%s\" or \"%s\" %s gets no cutoff. %s without the "
                     "manifest's column are counted as unknown and left out.%s Small strata "
                     "give wide intervals and unstable cutoffs.", unit, o->positive, o->negative,
                  o->per_subject ? "subject" : "night", o->per_subject ? "Subjects" : "Nights",
                  o->per_subject ? " A subject is placed by the age and the sex of its first "
                                   "visit that gives them." : "");
    rt_page_end_html(p);
    for (size_t first = 0; first < strata->n;) {
        size_t end = first;
        while (end < strata->n && strcmp(strata->v[end].sum.by, strata->v[first].sum.by) == 0)
            end++;
        const cohort_stratum *unknown = &strata->v[end - 1]; /* each stratification ends so */
        bool sex = strcmp(strata->v[first].sum.by, "sex") == 0;
        rt_page_element(p, "h3", NULL, sex ? "By sex" : "By age band (years)");
        rt_page_start(p, "table");
        rt_page_start(p, "tr");
        rt_page_element(p, "th", NULL, "index: AUC, Youden cutoff");
        for (size_t k = first; k + 1 < end; k++) {
            const cohort_stratum *t = &strata->v[k];
            rt_page_start(p, "th");
            rt_page_textf(p, "%s (%zu \"%s\", %zu \"%s\")", t->sum.name, t->sum.positives,
                          o->positive, t->sum.negatives, o->negative);
            rt_page_end_html(p);
        }
        rt_page_end_html(p);
        for (int i = 0; i < RT_IX_COUNT; i++) {
            rt_page_start(p, "tr");
            rt_page_element(p, "td", NULL, rt_index_rules()[i].id);
            for (size_t k = first; k + 1 < end; k++) {
                const cohort_stratum *t = &strata->v[k];
                const rt_roc *c = &t->cal.roc[i];
                char cell[240], note[200];
                cohort_stratum_note(t, i, o, note, sizeof note);
                if (isfinite(c->auc) && !note[0])
                    snprintf(cell, sizeof cell, "%.3f, %.4g", c->auc, c->youden_cutoff);
                else if (isfinite(c->auc))
                    snprintf(cell, sizeof cell, "%.3f, %s", c->auc, note);
                else
                    rt_copy_string(cell, sizeof cell, note);
                rt_page_element(p, "td", NULL, cell);
            }
            rt_page_end_html(p);
        }
        rt_page_end_html(p);
        rt_page_start(p, "p");
        rt_page_textf(p, "Unknown %s (left out): %zu \"%s\", %zu \"%s\" %s.", sex ? "sex" : "age",
                      unknown->sum.positives, o->positive, unknown->sum.negatives, o->negative,
                      unit);
        bool any = false;
        for (size_t k = first; k + 1 < end; k++)
            if (strata->v[k].sum.cutoffs_file[0]) {
                rt_page_textf(p, "%s%s", any ? ", " : " Cutoff files: ",
                              strata->v[k].sum.cutoffs_file);
                any = true;
            }
        rt_page_text(p, any ? "." : " No stratum has a cutoff file.");
        rt_page_end_html(p);
        first = end;
    }
}

/* Every night in id order: its level (a level with reservations says so),
 * the reservation codes, REM minutes, warnings, and a link to its own page
 * when the run wrote one (cohort --html). */
static void nights_table(rt_page *p, const cohort_row *rows, size_t n)
{
    static const char *const heads[] = {"night", "group", "level", "reservations",
                                        "REM min", "warnings"};
    rt_page_start(p, "table");
    row_of_cells(p, "th", heads, 6);
    for (size_t i = 0; i < n; i++) {
        const cohort_row *r = &rows[i];
        rt_page_start(p, "tr");
        rt_page_start(p, "td");
        if (r->page) {
            rt_page_start(p, "a");
            rt_page_attrf(p, "href", "nights/%s.html", r->id);
            rt_page_text(p, r->id);
            rt_page_end_html(p);
        } else {
            rt_page_text(p, r->id);
        }
        rt_page_end_html(p);
        char level[64], minutes[32], warnings[32];
        bool reserved = r->reservations[0] && strcmp(r->reservations, "unknown") != 0;
        snprintf(level, sizeof level, "%s%s", r->level, reserved && !r->failed ? ", with reservations" : "");
        fmt_or_dash(minutes, sizeof minutes, "%.1f", r->rem_minutes);
        if (r->warnings >= 0)
            snprintf(warnings, sizeof warnings, "%ld", r->warnings);
        else
            rt_copy_string(warnings, sizeof warnings, "-");
        const char *cells[5] = {r->group[0] ? r->group : "(no group)", level,
                                r->reservations[0] ? r->reservations : "none", minutes, warnings};
        for (size_t k = 0; k < 5; k++)
            rt_page_element(p, "td", NULL, cells[k]);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

static void failures_list(rt_page *p, const cohort_row *rows, size_t n, size_t failed)
{
    if (failed == 0)
        return;
    rt_page_element(p, "h2", NULL, "Failed nights");
    rt_page_element(p, "p", NULL, "Each is left out of the calibration; its message names the "
                                  "file and the place. Fix the input and run the cohort again: "
                                  "only these nights are retried.");
    rt_page_start(p, "ul");
    for (size_t i = 0; i < n; i++) {
        if (!rows[i].failed)
            continue;
        rt_page_start(p, "li");
        rt_page_element(p, "strong", NULL, rows[i].id);
        rt_page_textf(p, " (%s): %s", rows[i].group[0] ? rows[i].group : "no group",
                      rows[i].error);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

/* Each subject on one line: its nights in visit order with their levels,
 * and whether the flag agrees across them. */
static void subjects_list(rt_page *p, const cohort_row *rows, const cohort_subjects *subjects)
{
    if (subjects->n == 0)
        return;
    rt_page_element(p, "h2", NULL, "Subjects");
    rt_page_element(p, "p", NULL, "Nights of the same subject in visit order, with their review "
                                  "levels; the flag agrees when every scored night of the subject "
                                  "is flagged, or none is. subjects.csv holds each index's mean, "
                                  "range and largest change from one night to the next.");
    rt_page_start(p, "ul");
    for (size_t j = 0; j < subjects->n; j++) {
        const cohort_subject *s = &subjects->v[j];
        rt_page_start(p, "li");
        rt_page_element(p, "strong", NULL, s->name);
        rt_page_textf(p, " (%s): ", s->mixed_group ? "groups differ" : s->group[0] ? s->group
                                                                                  : "no group");
        for (size_t k = 0; k < s->n; k++) {
            const cohort_row *r = &rows[subjects->order[s->first + k]];
            rt_page_textf(p, "%s%s%s%s %s", k ? "; " : "", r->id, r->visit[0] ? " " : "", r->visit,
                          r->level);
        }
        rt_page_textf(p, " -- flag %s", cohort_subject_agreement(s));
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

static void page(rt_page *p, const cohort_row *rows, size_t n, const cohort_subjects *subjects,
                 const cohort_calibration *cal, const cohort_strata *strata,
                 const rt_cohort_options *o)
{
    const char *groups[64];
    size_t n_groups = list_groups(rows, n, o, groups, 64);
    size_t failed = 0;
    for (size_t i = 0; i < n; i++)
        failed += rows[i].failed;
    rt_page_raw(p, "<!DOCTYPE html>\n");
    rt_page_start(p, "html");
    rt_page_attr(p, "lang", "en");
    rt_page_start(p, "head");
    rt_page_start(p, "meta");
    rt_page_attr(p, "charset", "utf-8");
    rt_page_end_svg(p);
    rt_page_element(p, "title", NULL, "remtone cohort");
    rt_page_element(p, "style", NULL,
                    "body{font-family:sans-serif;max-width:980px;margin:1em auto;color:#222}"
                    "table{border-collapse:collapse}td,th{border:1px solid #bbb;padding:2px 6px;"
                    "text-align:right}td:first-child,th:first-child{text-align:left}"
                    "svg text{font-size:11px}section{margin:1.5em 0}");
    rt_page_end_html(p);
    rt_page_start(p, "body");
    rt_page_element(p, "h1", NULL, "Cohort overview");
    rt_page_start(p, "p");
    rt_page_textf(p, "%zu night%s: %zu scored, %zu failed. ", n, n == 1 ? "" : "s", n - failed,
                  failed);
    const char *unit = o->per_subject ? "subjects" : "nights";
    if (cal->computed)
        rt_page_textf(p, "Calibration on %s: positive group \"%s\" (%zu scored), negative group "
                         "\"%s\" (%zu scored); other groups are shown, not used.",
                      unit, o->positive, cal->roc[0].n_pos, o->negative, cal->roc[0].n_neg);
    else
        rt_page_textf(p, "No calibration: it needs scored nights in both groups \"%s\" and "
                         "\"%s\".", o->positive, o->negative);
    rt_page_end_html(p);
    rt_page_element(p, "p", NULL, rt_visual_scoring_note());
    rt_page_element(p, "h2", NULL, "Nights");
    nights_table(p, rows, n);
    failures_list(p, rows, n, failed);
    subjects_list(p, rows, subjects);
    if (cal->computed) {
        rt_page_element(p, "h2", NULL, "Calibration");
        rt_page_element(p, "p", NULL, "A cutoff fitted to one cohort (Youden) is optimistic for "
                                      "that cohort; check it on other nights before relying on it.");
        summary_table(p, cal);
        strata_tables(p, strata, o);
    }
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_rule *rule = &rt_index_rules()[i];
        rt_page_start(p, "section");
        rt_page_start(p, "h2");
        rt_page_textf(p, "%s (%s)", rule->title, rule->id);
        rt_page_end_html(p);
        rt_page_start(p, "p");
        if (isfinite(cal->roc[i].auc))
            rt_page_textf(p, "AUC %.3f; abnormal %s the cutoff; %zu positive, %zu negative nights.",
                          cal->roc[i].auc, rule->lower_is_worse ? "below" : "at or above",
                          cal->roc[i].n_pos, cal->roc[i].n_neg);
        else
            rt_page_text(p, "No ROC: both calibration groups need nights with a value.");
        rt_page_end_html(p);
        strip_plot(p, rows, n, i, cal, groups, n_groups);
        if (cal->computed)
            roc_plot(p, &cal->roc[i], rule->id);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_end_html(p);
}

rt_status cohort_write_html(const char *path, const cohort_row *rows, size_t n_rows,
                            const cohort_subjects *subjects, const cohort_calibration *cal,
                            const cohort_strata *strata, const rt_cohort_options *o,
                            rt_error *err)
{
    rt_page p;
    rt_status st = rt_page_open(&p, err);
    if (st != RT_OK)
        return st;
    page(&p, rows, n_rows, subjects, cal, strata, o);
    return rt_page_save(&p, path, false, err);
}
