/* XHTML and SVG through xmlTextWriter, UTF-8 cleaning of untrusted text, and
 * the time and ranking helpers the review page and its companions share. */
#include "svg.h"
#include "text.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "output.h"

#define SVG_NS "http://www.w3.org/2000/svg"

static const xmlChar *X(const char *s) { return (const xmlChar *)s; }

rt_status rt_xml_clean_text(const char *text, char **result, rt_error *err)
{
    *result = rt_utf8_clean(text, true);
    if (!*result)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu bytes of text",
                       text ? strlen(text) : 0);
    return RT_OK;
}

/* Every writer call runs as WRITE(p, call): errno is cleared before it, so
 * afterwards ENOMEM (set by the allocator) or libxml2's last error of this
 * thread (reset by rt_page_open) tells a shortage of memory from a refused
 * call. libxml2 does not always say: a failed allocation in its list code
 * only prints, and one while escaping a text drops the text and still
 * succeeds, so ENOMEM after a call that succeeded is a failure too. */
#define WRITE(p, call) \
    do {               \
        errno = 0;     \
        check(p, call); \
    } while (0)

static void check(rt_page *p, int rc)
{
    const xmlError *e = xmlGetLastError();
    bool nomem = errno == ENOMEM || (e && e->code == XML_ERR_NO_MEMORY);
    if (nomem)
        rt_page_fail(p, RT_ERR_NOMEM);
    else if (rc < 0)
        rt_page_fail(p, RT_ERR_INTERNAL);
}

static void silent(void *ctx, const char *msg, ...)
{
    (void)ctx;
    (void)msg;
}

static void silent_structured(void *ctx, xmlErrorPtr error)
{
    (void)ctx;
    (void)error;
}

rt_status rt_page_open(rt_page *p, rt_error *err)
{
    memset(p, 0, sizeof *p);
    p->saved_generic = xmlGenericError;
    p->saved_generic_ctx = xmlGenericErrorContext;
    p->saved_structured = xmlStructuredError;
    p->saved_structured_ctx = xmlStructuredErrorContext;
    xmlSetGenericErrorFunc(NULL, silent);
    xmlSetStructuredErrorFunc(NULL, silent_structured);
    xmlResetLastError();
    p->buf = xmlBufferCreate();
    p->w = p->buf ? xmlNewTextWriterMemory(p->buf, 0) : NULL;
    if (!p->w) {
        rt_page_close(p);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for a page writer");
    }
    return RT_OK;
}

rt_status rt_page_finish(rt_page *p, const char *what, const char **bytes, size_t *len,
                         rt_error *err)
{
    *bytes = NULL;
    *len = 0;
    if (p->status == RT_OK)
        WRITE(p, xmlTextWriterEndDocument(p->w));
    if (p->w) {
        xmlFreeTextWriter(p->w); /* flushes into buf */
        p->w = NULL;
    }
    const xmlError *e = xmlGetLastError();
    if (p->status == RT_OK && e && e->code == XML_ERR_NO_MEMORY)
        p->status = RT_ERR_NOMEM; /* a text libxml2 dropped without failing the call */
    if (p->status == RT_ERR_NOMEM)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory composing the page", what);
    if (p->status != RT_OK)
        return rt_fail(err, p->status, "%s: the XML writer refused a call while composing the "
                                       "page (a bug in remtone)", what);
    *bytes = (const char *)xmlBufferContent(p->buf);
    *len = (size_t)xmlBufferLength(p->buf);
    return RT_OK;
}

void rt_page_close(rt_page *p)
{
    if (p->w)
        xmlFreeTextWriter(p->w);
    xmlBufferFree(p->buf);
    p->w = NULL;
    p->buf = NULL;
    xmlSetGenericErrorFunc(p->saved_generic_ctx, p->saved_generic);
    xmlSetStructuredErrorFunc(p->saved_structured_ctx, p->saved_structured);
}

rt_status rt_page_save(rt_page *p, const char *path, bool add_newline, rt_error *err)
{
    const char *bytes = NULL;
    size_t len = 0;
    rt_status st = rt_page_finish(p, path, &bytes, &len, err);
    if (st == RT_OK)
        st = rt_output_write_all(path, bytes, len, add_newline, "the page", err);
    rt_page_close(p);
    return st;
}

void rt_page_fail(rt_page *p, rt_status st)
{
    if (p->status == RT_OK)
        p->status = st;
}

void rt_page_raw(rt_page *p, const char *markup)
{
    if (p->status == RT_OK)
        WRITE(p, xmlTextWriterWriteRaw(p->w, X(markup)));
}

void rt_page_start(rt_page *p, const char *name)
{
    if (p->status == RT_OK)
        WRITE(p, xmlTextWriterStartElement(p->w, X(name)));
}

void rt_page_end_html(rt_page *p)
{
    if (p->status == RT_OK)
        WRITE(p, xmlTextWriterFullEndElement(p->w));
}

void rt_page_end_svg(rt_page *p)
{
    if (p->status == RT_OK)
        WRITE(p, xmlTextWriterEndElement(p->w));
}

void rt_page_attr(rt_page *p, const char *name, const char *value)
{
    if (p->status != RT_OK)
        return;
    char *clean = NULL;
    if (rt_xml_clean_text(value, &clean, NULL) != RT_OK) {
        rt_page_fail(p, RT_ERR_NOMEM);
        return;
    }
    WRITE(p, xmlTextWriterWriteAttribute(p->w, X(name), X(clean)));
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
    if (p->status != RT_OK)
        return;
    char *clean = NULL;
    if (rt_xml_clean_text(text, &clean, NULL) != RT_OK) {
        rt_page_fail(p, RT_ERR_NOMEM);
        return;
    }
    WRITE(p, xmlTextWriterWriteString(p->w, X(clean)));
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
    if (p->status != RT_OK || n == 0)
        return;
    /* up to 24 bytes per point */
    char *pts = rt_calloc(n, 24);
    if (!pts) {
        rt_page_fail(p, RT_ERR_NOMEM);
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

size_t rt_axis_ticks(double lo, double hi, int max_steps, double *ticks, size_t cap)
{
    if (!isfinite(lo) || !isfinite(hi) || hi < lo || cap == 0)
        return 0;
    if (max_steps < 1)
        max_steps = 1;
    double span = hi > lo ? hi - lo : fmax(fabs(hi), 1.0);
    double raw = span / max_steps, mag = pow(10.0, floor(log10(raw))), step = 10.0 * mag;
    static const double multiples[] = {1.0, 2.0, 5.0};
    for (size_t k = 0; k < 3; k++)
        if (multiples[k] * mag >= raw * (1.0 - 1e-9)) {
            step = multiples[k] * mag;
            break;
        }
    double first = floor(lo / step + 1e-9) * step;
    size_t n = 0;
    for (double t = first; n < cap; t = first + step * (double)n) {
        ticks[n++] = fabs(t) < 1e-12 * step ? 0.0 : t;
        if (t >= hi - 1e-9 * step)
            break;
    }
    return n;
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
