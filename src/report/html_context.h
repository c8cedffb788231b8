/* The review page's sections on the night in context (html_context.c),
 * written into the page html.c composes. Internal to the library. */
#ifndef REMTONE_REPORT_HTML_CONTEXT_H
#define REMTONE_REPORT_HTML_CONTEXT_H

#include "svg.h"

/* The plain-language sentence, a paragraph of class "sentence". */
void rt_html_sentence(rt_page *p, const rt_night *n);
/* The sleep context: two small tables and a note (a block, not a section). */
void rt_html_sleep(rt_page *p, const rt_night *n);
/* A section "periods": the REM periods and the halves with their indices. */
/* The periods section's title, also its name in the page's navigation. */
#define RT_HTML_PERIODS_TITLE "REM periods and halves of the night"
void rt_html_periods(rt_page *p, const rt_night *n);
/* The norms, when placed: one row per index with a small band (a block). */
void rt_html_norms(rt_page *p, const rt_night *n);

#endif
