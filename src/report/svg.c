/* XHTML and SVG through xmlTextWriter, UTF-8 cleaning of untrusted text, and
 * the time and ranking helpers the review page and its companions share. */
#include "svg.h"
#include "text.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SVG_NS "http://www.w3.org/2000/svg"

static const xmlChar *X(const char *s) { return (const xmlChar *)s; }

char *rt_xml_clean_text(const char *text)
{
    return rt_utf8_clean(text, true);
}

static void check(rt_page *p, int rc)
{
    if (rc < 0)
        p->failed = true;
}

void rt_page_start(rt_page *p, const char *name)
{
    if (!p->failed)
        check(p, xmlTextWriterStartElement(p->w, X(name)));
}

void rt_page_end_html(rt_page *p)
{
    if (!p->failed)
        check(p, xmlTextWriterFullEndElement(p->w));
}

void rt_page_end_svg(rt_page *p)
{
    if (!p->failed)
        check(p, xmlTextWriterEndElement(p->w));
}

void rt_page_attr(rt_page *p, const char *name, const char *value)
{
    if (p->failed)
        return;
    char *clean = rt_xml_clean_text(value);
    if (!clean) {
        p->failed = true;
        return;
    }
    check(p, xmlTextWriterWriteAttribute(p->w, X(name), X(clean)));
    free(clean);
}

void rt_page_attrf(rt_page *p, const char *name, const char *fmt, ...)
{
    char buf[1024];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    rt_page_attr(p, name, buf);
}

void rt_page_text(rt_page *p, const char *text)
{
    if (p->failed)
        return;
    char *clean = rt_xml_clean_text(text);
    if (!clean) {
        p->failed = true;
        return;
    }
    check(p, xmlTextWriterWriteString(p->w, X(clean)));
    free(clean);
}

void rt_page_textf(rt_page *p, const char *fmt, ...)
{
    char buf[2048];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    rt_page_text(p, buf);
}

void rt_page_element(rt_page *p, const char *name, const char *cls, const char *text)
{
    rt_page_start(p, name);
    if (cls)
        rt_page_attr(p, "class", cls);
    rt_page_text(p, text);
    rt_page_end_html(p);
}

void rt_svg_begin(rt_page *p, double width, double height, const char *label)
{
    rt_page_start(p, "svg");
    rt_page_attr(p, "xmlns", SVG_NS);
    rt_page_attrf(p, "width", "%.0f", width);
    rt_page_attrf(p, "height", "%.0f", height);
    rt_page_attrf(p, "viewBox", "0 0 %.0f %.0f", width, height);
    rt_page_attr(p, "role", "img");
    rt_page_attr(p, "aria-label", label);
}

void rt_svg_end(rt_page *p) { rt_page_end_html(p); }

static void title_child(rt_page *p, const char *title)
{
    if (!title)
        return;
    rt_page_start(p, "title");
    rt_page_text(p, title);
    rt_page_end_svg(p);
}

void rt_svg_rect(rt_page *p, double x, double y, double w, double h, const char *fill,
                 const char *title)
{
    rt_page_start(p, "rect");
    rt_page_attrf(p, "x", "%.2f", x);
    rt_page_attrf(p, "y", "%.2f", y);
    rt_page_attrf(p, "width", "%.2f", w > 0 ? w : 0);
    rt_page_attrf(p, "height", "%.2f", h > 0 ? h : 0);
    rt_page_attr(p, "fill", fill);
    title_child(p, title);
    rt_page_end_svg(p);
}

void rt_svg_line(rt_page *p, double x1, double y1, double x2, double y2, const char *stroke,
                 double width, const char *dash)
{
    rt_page_start(p, "line");
    rt_page_attrf(p, "x1", "%.2f", x1);
    rt_page_attrf(p, "y1", "%.2f", y1);
    rt_page_attrf(p, "x2", "%.2f", x2);
    rt_page_attrf(p, "y2", "%.2f", y2);
    rt_page_attr(p, "stroke", stroke);
    rt_page_attrf(p, "stroke-width", "%.2f", width);
    if (dash)
        rt_page_attr(p, "stroke-dasharray", dash);
    rt_page_end_svg(p);
}

void rt_svg_polyline(rt_page *p, const double *xs, const double *ys, size_t n, const char *stroke,
                     double width)
{
    if (p->failed || n == 0)
        return;
    /* up to 24 bytes per point */
    char *pts = rt_calloc(n, 24);
    if (!pts) {
        p->failed = true;
        return;
    }
    size_t o = 0;
    for (size_t i = 0; i < n; i++)
        o += (size_t)snprintf(pts + o, 24 * n - o, "%s%.1f,%.1f", i ? " " : "", xs[i], ys[i]);
    rt_page_start(p, "polyline");
    rt_page_attr(p, "points", pts);
    rt_page_attr(p, "fill", "none");
    rt_page_attr(p, "stroke", stroke);
    rt_page_attrf(p, "stroke-width", "%.2f", width);
    rt_page_attr(p, "stroke-linejoin", "round");
    rt_page_end_svg(p);
    free(pts);
}

void rt_svg_text(rt_page *p, double x, double y, const char *anchor, const char *cls,
                 const char *text)
{
    rt_page_start(p, "text");
    rt_page_attrf(p, "x", "%.2f", x);
    rt_page_attrf(p, "y", "%.2f", y);
    if (anchor && strcmp(anchor, "start") != 0)
        rt_page_attr(p, "text-anchor", anchor);
    if (cls)
        rt_page_attr(p, "class", cls);
    rt_page_text(p, text);
    rt_page_end_html(p);
}

void rt_report_clock(const rt_clock_time *start, double onset_s, char *buf, size_t cap)
{
    double t = start->hour * 3600.0 + start->minute * 60.0 + start->second + start->subsecond +
               onset_s;
    long long s = (long long)floor(t + 1e-6);
    s %= 86400;
    if (s < 0)
        s += 86400;
    snprintf(buf, cap, "%02lld:%02lld:%02lld", s / 3600, (s / 60) % 60, s % 60);
}

void rt_report_elapsed(double seconds, char *buf, size_t cap)
{
    long long s = (long long)floor(seconds + 1e-6);
    if (s < 0)
        s = 0;
    snprintf(buf, cap, "%lld:%02lld:%02lld", s / 3600, (s / 60) % 60, s % 60);
}

size_t rt_report_rank_evidence(const rt_night *night, size_t *order, size_t limit)
{
    size_t found = 0;
    double prev = INFINITY;
    size_t prev_index = 0;
    /* selection by (activity descending, index ascending), without marks:
     * the next pick is the best one strictly after the previous in that order */
    while (found < limit) {
        size_t best = night->n_epochs;
        for (size_t e = 0; e < night->n_epochs; e++) {
            double a = night->epochs[e].activity;
            if (!(a > 0))
                continue;
            bool after = a < prev || (a == prev && e > prev_index);
            if (found > 0 && !after)
                continue;
            if (best == night->n_epochs || a > night->epochs[best].activity)
                best = e;
        }
        if (best == night->n_epochs)
            break;
        order[found++] = best;
        prev = night->epochs[best].activity;
        prev_index = best;
    }
    return found;
}

const char *rt_report_basename(const char *path)
{
    const char *slash = strrchr(path, '/');
    return slash ? slash + 1 : path;
}
