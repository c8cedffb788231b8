/* Small helpers for the review page and its companion files: writing XHTML
 * and inline SVG through libxml2's xmlTextWriter (so every text is escaped and
 * every untrusted byte string becomes valid UTF-8 first), plus the few facts
 * the HTML page, the mini-epoch CSV and the annotation file must present the
 * same way: clock and elapsed times, and the ranking of evidence epochs.
 * Internal to the library; nothing here is public. */
#ifndef REMTONE_REPORT_SVG_H
#define REMTONE_REPORT_SVG_H

#include <stdbool.h>
#include <stddef.h>

#include <libxml/xmlwriter.h>

#include "internal.h"
#include "remtone/recording.h"
#include "remtone/score.h"
#include "report_internal.h"

/* A page being written into memory. `status` is RT_OK until the first
 * failure and then keeps its status; every helper does nothing once it is set,
 * so callers check once at the end. While a page is open, libxml2 prints
 * nothing (its error reports of this thread are silenced): the library never
 * prints, and what went wrong reaches the caller as a status. */
typedef struct rt_page {
    xmlTextWriterPtr w;
    xmlBufferPtr buf;
    rt_status status;
    xmlGenericErrorFunc saved_generic;
    void *saved_generic_ctx;
    xmlStructuredErrorFunc saved_structured;
    void *saved_structured_ctx;
} rt_page;

/* Opens an empty page; RT_ERR_NOMEM when the writer cannot be made (then
 * nothing is left to close). */
rt_status rt_page_open(rt_page *p, rt_error *err);
/* Ends the document and gives its bytes in *bytes and *len (they belong to
 * the page and live until rt_page_close). The page's status: RT_ERR_NOMEM
 * when memory ran out at any point -- libxml2 included, even where it carried
 * on and dropped a text -- and RT_ERR_INTERNAL when the writer refused a call
 * (an element closed that was not open: a bug in the page code, never a
 * shortage of memory). what names the page in the message. */
rt_status rt_page_finish(rt_page *p, const char *what, const char **bytes, size_t *len,
                         rt_error *err);
/* Frees the writer and the bytes and restores libxml2's error reports. */
void rt_page_close(rt_page *p);
/* Finishes the page (rt_page_finish), writes it to path atomically (output.h)
 * with a newline added when add_newline, and closes it (always). The page's
 * status, else the output's (RT_ERR_IO for the disk). */
rt_status rt_page_save(rt_page *p, const char *path, bool add_newline, rt_error *err);
/* Records a failure of the page code itself (st, such as RT_ERR_NOMEM for an
 * allocation) unless one is recorded already. */
void rt_page_fail(rt_page *p, rt_status st);
/* Raw markup (the style sheet), written as is. */
void rt_page_raw(rt_page *p, const char *markup);

/* rt_xml_clean_text, which makes any text valid UTF-8: report_internal.h. */

/* An element with the given name; end_html closes it with an explicit end
 * tag (HTML parsers read <div/> as an open tag), end_svg may self-close. */
void rt_page_start(rt_page *p, const char *name);
void rt_page_end_html(rt_page *p);
void rt_page_end_svg(rt_page *p);
void rt_page_attr(rt_page *p, const char *name, const char *value);
void rt_page_attrf(rt_page *p, const char *name, const char *fmt, ...) RT_PRINTF(3, 4);
/* Escaped, cleaned text content. */
void rt_page_text(rt_page *p, const char *text);
void rt_page_textf(rt_page *p, const char *fmt, ...) RT_PRINTF(2, 3);
/* <name class="cls">text</name>; cls may be NULL. */
void rt_page_element(rt_page *p, const char *name, const char *cls, const char *text);

/* An <svg> of width x height user units (also its pixel size), with an
 * accessible label; closed by rt_svg_end. */
void rt_svg_begin(rt_page *p, double width, double height, const char *label);
void rt_svg_end(rt_page *p);
/* Shapes in user units; colours are CSS colour texts; title (may be NULL)
 * becomes a tooltip. */
void rt_svg_rect(rt_page *p, double x, double y, double w, double h, const char *fill,
                 const char *title);
/* dash may be NULL (solid). */
void rt_svg_line(rt_page *p, double x1, double y1, double x2, double y2, const char *stroke,
                 double width, const char *dash);
void rt_svg_polyline(rt_page *p, const double *xs, const double *ys, size_t n, const char *stroke,
                     double width);
/* anchor: "start", "middle" or "end"; cls may be NULL. */
void rt_svg_text(rt_page *p, double x, double y, const char *anchor, const char *cls,
                 const char *text);

/* Round axis ticks over [lo, hi]: steps of 1, 2 or 5 times a power of ten,
 * at most max_steps of them (at least 1), the first tick at or below lo and
 * the last at or above hi, so the axis can end on a labelled tick. Writes up
 * to cap ticks and returns how many; 0 when lo or hi is not finite or
 * hi < lo. */
size_t rt_axis_ticks(double lo, double hi, int max_steps, double *ticks, size_t cap);

/* Times, evidence order and file names: report_internal.h. */

struct rt_night;
/* The page's "Corrections" section of a corrected night (corrections_html.c);
 * nothing for a night not corrected. */
void rt_corrections_write_html(rt_page *p, const struct rt_night *night);

#endif
