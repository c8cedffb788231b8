/* Text from files on its way out: every byte string read from a recording, a
 * table, a path or an error message is made valid UTF-8 here before it
 * reaches a JSON, CSV or HTML output, so one bad byte can neither make a
 * writer refuse its output nor drop a field. Internal to the library. */
#ifndef REMTONE_TEXT_H
#define REMTONE_TEXT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

/* Length of the valid UTF-8 sequence at s (1..4 bytes, at most avail), its
 * code point in *code; 0 when the bytes there are not one (overlong forms,
 * surrogates, values past U+10FFFF, a sequence cut by avail). */
size_t rt_utf8_sequence(const unsigned char *s, size_t avail, unsigned *code);

/* A fresh copy of text as valid UTF-8: valid sequences are kept, each byte
 * that does not start one becomes U+FFFD. With xml, U+FFFE and U+FFFF become
 * U+FFFD too and control characters other than tab and newline become spaces
 * (XML 1.0 allows neither). NULL text gives "". The caller frees the result;
 * NULL when out of memory. */
char *rt_utf8_clean(const char *text, bool xml);

/* Writes one CSV field (RFC 4180): made valid UTF-8, quoted when it holds a
 * comma, quote or line break, and prefixed with ' when it starts like a
 * spreadsheet formula (=, +, -, @, tab, CR), so a label cannot run as one.
 * Returns 0, or -1 when out of memory (nothing written). */
int rt_csv_put_field(FILE *f, const char *s);

#endif
