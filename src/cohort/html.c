/* The cohort overview page: for every index, the values of each group
 * against the cutoff in force and the Youden cutoff (a strip plot), and the
 * ROC curve of the positive against the negative group, as inline SVG in one
 * HTML file without scripts. Written through libxml2's xmlTextWriter, so
 * every text -- group names come from the user's manifest -- is escaped,
 * after rt_utf8_clean (src/common/text.h) made it valid UTF-8. */
#include "cohort_internal.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "remtone/report.h"
#include "report/svg.h"

enum { STRIP_W = 560, ROW_H = 26, ROC_SIZE = 220 };
static const char *const COLOR_POS = "#b03a2e", *const COLOR_NEG = "#1f618d",
                         *const COLOR_OTHER = "#7b7d7d";

/* The page helpers of the review report (report/svg.h): texts made valid
 * UTF-8, and a shortage of memory told from a refused call. */
typedef struct writer {
    rt_page p;
} writer;

static void start(writer *h, const char *name) { rt_page_start(&h->p, name); }

static void end(writer *h) { rt_page_end_svg(&h->p); }

static void attr(writer *h, const char *name, const char *fmt, ...) RT_PRINTF(3, 4);
static void attr(writer *h, const char *name, const char *fmt, ...)
{
    char buf[8192];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    rt_page_attr(&h->p, name, buf);
}

static void text(writer *h, const char *fmt, ...) RT_PRINTF(2, 3);
static void text(writer *h, const char *fmt, ...)
{
    char buf[2048];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    rt_page_text(&h->p, buf);
}

static void element(writer *h, const char *name, const char *content)
{
    start(h, name);
    text(h, "%s", content);
    end(h);
}

static void svg_text(writer *h, double x, double y, const char *anchor, const char *content)
{
    start(h, "text");
    attr(h, "x", "%.1f", x);
    attr(h, "y", "%.1f", y);
    attr(h, "text-anchor", "%s", anchor);
    text(h, "%s", content);
    end(h);
}

static void line(writer *h, double x1, double y1, double x2, double y2, const char *stroke,
                 const char *dash)
{
    start(h, "line");
    attr(h, "x1", "%.1f", x1);
    attr(h, "y1", "%.1f", y1);
    attr(h, "x2", "%.1f", x2);
    attr(h, "y2", "%.1f", y2);
    attr(h, "stroke", "%s", stroke);
    if (dash)
        attr(h, "stroke-dasharray", "%s", dash);
    end(h);
}

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

static void strip_plot(writer *h, const cohort_row *rows, size_t n, int ix,
                       const cohort_calibration *cal, const char **groups, size_t n_groups)
{
    const rt_index_rule *rule = &rt_index_rules()[ix];
    double hi = strcmp(rule->unit, "%") == 0 ? 10.0 : 1.0;
    for (size_t i = 0; i < n; i++)
        if (isfinite(rows[i].value[ix]) && rows[i].value[ix] > hi)
            hi = rows[i].value[ix];
    if (isfinite(cal->in_force[ix]) && cal->in_force[ix] > hi)
        hi = cal->in_force[ix];
    hi *= 1.05;
    const double left = 130, right = STRIP_W - 20, top = 20;
    double height = top + ROW_H * (double)n_groups + 40;
    start(h, "svg");
    attr(h, "xmlns", "http://www.w3.org/2000/svg");
    attr(h, "width", "%d", STRIP_W);
    attr(h, "height", "%.0f", height);
    attr(h, "role", "img");
    double axis_y = top + ROW_H * (double)n_groups;
    line(h, left, axis_y, right, axis_y, "#333", NULL);
    for (int t = 0; t <= 4; t++) {
        double v = hi / 1.05 * t / 4.0, x = left + (right - left) * v / hi;
        char label[32];
        snprintf(label, sizeof label, "%.3g", v);
        line(h, x, axis_y, x, axis_y + 4, "#333", NULL);
        svg_text(h, x, axis_y + 16, "middle", label);
    }
    svg_text(h, (left + right) / 2, axis_y + 32, "middle", rule->unit);
    for (size_t g = 0; g < n_groups; g++) {
        double cy = top + ROW_H * ((double)g + 0.5);
        const char *color = g == 0 ? COLOR_POS : g == 1 ? COLOR_NEG : COLOR_OTHER;
        svg_text(h, left - 8, cy + 4, "end", groups[g][0] ? groups[g] : "(no group)");
        size_t k = 0;
        for (size_t i = 0; i < n; i++) {
            if (rows[i].failed || strcmp(rows[i].group, groups[g]) != 0 ||
                !isfinite(rows[i].value[ix]))
                continue;
            /* a fixed jitter, so the page is the same on every merge */
            double jitter = (double)((k++ * 7) % 11) - 5.0;
            start(h, "circle");
            attr(h, "cx", "%.1f", left + (right - left) * rows[i].value[ix] / hi);
            attr(h, "cy", "%.1f", cy + jitter);
            attr(h, "r", "3");
            attr(h, "fill", "%s", color);
            attr(h, "fill-opacity", "0.7");
            start(h, "title");
            text(h, "%s: %.4g", rows[i].id, rows[i].value[ix]);
            end(h);
            end(h);
        }
    }
    const double cuts[2] = {cal->in_force[ix], cal->roc[ix].youden_cutoff};
    const char *names[2] = {"cutoff", "Youden"}, *colors[2] = {"#000", "#1e8449"};
    for (int c = 0; c < 2; c++) {
        if (!isfinite(cuts[c]) || cuts[c] > hi)
            continue;
        double x = left + (right - left) * cuts[c] / hi;
        line(h, x, top - 6, x, axis_y, colors[c], c ? "2,3" : "6,3");
        char label[48];
        snprintf(label, sizeof label, "%s %.3g", names[c], cuts[c]);
        svg_text(h, x, top - 9 + 10.0 * c, "middle", label);
    }
    end(h);
}

static void roc_plot(writer *h, const rt_roc *roc)
{
    const double m = 34, s = ROC_SIZE;
    start(h, "svg");
    attr(h, "xmlns", "http://www.w3.org/2000/svg");
    attr(h, "width", "%.0f", s + m + 10);
    attr(h, "height", "%.0f", s + m + 10);
    attr(h, "role", "img");
    start(h, "rect");
    attr(h, "x", "%.0f", m);
    attr(h, "y", "10");
    attr(h, "width", "%.0f", s);
    attr(h, "height", "%.0f", s);
    attr(h, "fill", "none");
    attr(h, "stroke", "#333");
    end(h);
    line(h, m, 10 + s, m + s, 10, "#999", "4,3");
    svg_text(h, m + s / 2, s + m + 6, "middle", "1 - specificity");
    start(h, "text");
    attr(h, "transform", "translate(12,%.0f) rotate(-90)", 10 + s / 2);
    attr(h, "text-anchor", "middle");
    text(h, "sensitivity");
    end(h);
    if (roc->n_points > 1) {
        char pts[8192];
        size_t u = 0;
        for (size_t k = 0; k < roc->n_points && u + 32 < sizeof pts; k++)
            u += (size_t)snprintf(pts + u, sizeof pts - u, "%.1f,%.1f ", m + s * roc->fpr[k],
                                  10 + s * (1 - roc->tpr[k]));
        start(h, "polyline");
        attr(h, "points", "%s", pts);
        attr(h, "fill", "none");
        attr(h, "stroke", "%s", COLOR_POS);
        attr(h, "stroke-width", "2");
        end(h);
    }
    end(h);
}

static void fmt_or_dash(char *dst, size_t cap, const char *fmt, double v)
{
    if (isfinite(v))
        snprintf(dst, cap, fmt, v);
    else
        rt_copy_string(dst, cap, "-");
}

static void summary_table(writer *h, const cohort_calibration *cal)
{
    static const char *const heads[] = {"index", "AUC (95 % CI, DeLong)", "Youden cutoff",
                                        "published cutoff", "sensitivity", "specificity"};
    start(h, "table");
    start(h, "tr");
    for (size_t k = 0; k < 6; k++)
        element(h, "th", heads[k]);
    end(h);
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
        start(h, "tr");
        for (size_t k = 0; k < 6; k++)
            element(h, "td", cell[k]);
        end(h);
    }
    end(h);
}

static void page(writer *h, const cohort_row *rows, size_t n, const cohort_calibration *cal,
                 const rt_cohort_options *o)
{
    const char *groups[64];
    size_t n_groups = list_groups(rows, n, o, groups, 64);
    size_t failed = 0;
    for (size_t i = 0; i < n; i++)
        failed += rows[i].failed;
    rt_page_raw(&h->p, "<!DOCTYPE html>\n");
    start(h, "html");
    attr(h, "lang", "en");
    start(h, "head");
    start(h, "meta");
    attr(h, "charset", "utf-8");
    end(h);
    element(h, "title", "remtone cohort");
    element(h, "style", "body{font-family:sans-serif;max-width:980px;margin:1em auto;color:#222}"
                        "table{border-collapse:collapse}td,th{border:1px solid #bbb;padding:2px 6px;"
                        "text-align:right}svg text{font-size:11px}section{margin:1.5em 0}");
    end(h);
    start(h, "body");
    element(h, "h1", "Cohort overview");
    start(h, "p");
    text(h, "%zu nights: %zu scored, %zu failed. Calibration: positive group \"%s\" "
            "(%zu scored), negative group \"%s\" (%zu scored); other groups are shown, not used.",
         n, n - failed, failed, o->positive, cal->roc[0].n_pos, o->negative, cal->roc[0].n_neg);
    end(h);
    element(h, "p", rt_visual_scoring_note());
    element(h, "p", "A cutoff fitted to one cohort (Youden) is optimistic for that cohort; check "
                    "it on other nights before relying on it.");
    summary_table(h, cal);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_rule *rule = &rt_index_rules()[i];
        start(h, "section");
        start(h, "h2");
        text(h, "%s (%s)", rule->title, rule->id);
        end(h);
        start(h, "p");
        if (isfinite(cal->roc[i].auc))
            text(h, "AUC %.3f; abnormal %s the cutoff; %zu positive, %zu negative nights.",
                 cal->roc[i].auc, rule->lower_is_worse ? "below" : "at or above", cal->roc[i].n_pos,
                 cal->roc[i].n_neg);
        else
            text(h, "No ROC: both calibration groups need nights with a value.");
        end(h);
        strip_plot(h, rows, n, i, cal, groups, n_groups);
        roc_plot(h, &cal->roc[i]);
        end(h);
    }
    end(h);
    end(h);
}

rt_status cohort_write_html(const char *path, const cohort_row *rows, size_t n_rows,
                            const cohort_calibration *cal, const rt_cohort_options *o,
                            rt_error *err)
{
    writer h;
    rt_status st = rt_page_open(&h.p, err);
    if (st != RT_OK)
        return st;
    page(&h, rows, n_rows, cal, o);
    return rt_page_save(&h.p, path, false, err);
}
