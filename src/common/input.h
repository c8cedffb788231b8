/* Opening the files remtone reads (recordings, staging, event tables, label
 * maps, cutoffs, manifests, scoring files): one place that tells a wrong path
 * from a usable input, so every reader gives the same answer. Inputs must be
 * regular files: remtone reads an input more than once (to tell its format, to
 * load it, to record its size and digest in the result's provenance), and a
 * pipe or device would give different bytes each time -- "empty" staging, or
 * the digest of nothing in the provenance. Internal to the library. */
#ifndef REMTONE_INPUT_H
#define REMTONE_INPUT_H

#include <stddef.h>
#include <stdio.h>

#include "remtone/status.h"

/* Text inputs are read whole, up to this size (no staging, table or scoring
 * file comes near; a wrong path to a recording fails fast). */
#define RT_INPUT_TEXT_MAX_BYTES (64LL * 1024 * 1024)

/* Opens path for reading after checking that it is a regular file (asked
 * before opening, so a FIFO with no writer cannot block). what names the
 * input in messages ("table", "scoring file", "recording"). RT_ERR_IO for a
 * missing, unreadable or non-regular file or a directory, RT_ERR_NOMEM when
 * the system lacks memory; *size gets the size in bytes. */
rt_status rt_input_open(const char *path, const char *what, FILE **out, long long *size,
                        rt_error *err);

/* The name of the encoding a text starts with when it is one remtone does not
 * read -- "UTF-16" or "UTF-32", told by the byte-order mark or, without one,
 * by the NUL bytes ASCII text has in them -- or NULL. */
const char *rt_input_foreign_encoding(const unsigned char *s, size_t n);

/* The message for such a text: path, then the encoding's name. */
#define RT_INPUT_FOREIGN_MESSAGE "%s: %s text (from byte offset 0): save it as UTF-8; remtone " \
                                 "reads text files as UTF-8 only"

/* Reads a text input whole into *out (NUL-terminated, caller frees), at most
 * RT_INPUT_TEXT_MAX_BYTES: refuses (RT_ERR_STAGING) a larger or empty file and
 * one in UTF-16 or UTF-32, naming the encoding. */
rt_status rt_input_read_text(const char *path, const char *what, unsigned char **out,
                             size_t *len, rt_error *err);

#endif
