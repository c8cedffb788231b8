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

/* A page being written. `failed` becomes true at the first writer error and
 * stays so; every helper does nothing once it is set, so callers check once
 * at the end. */
typedef struct rt_page {
    xmlTextWriterPtr w;
    bool failed;
} rt_page;

/* Copies text into a fresh buffer as valid XML 1.0 UTF-8: valid UTF-8
 * sequences are kept, invalid bytes become U+FFFD, control characters other
 * than tab and newline become spaces. NULL text gives "". The caller frees
 * the result; NULL when out of memory. */
char *rt_xml_clean_text(const char *text);

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

/* Times, evidence order and file names: report_internal.h. */

#endif
