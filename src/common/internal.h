/* Helpers shared inside the library; nothing here is public. */
#ifndef REMTONE_INTERNAL_H
#define REMTONE_INTERNAL_H

#include <stddef.h>
#include "remtone/status.h"

#if defined(__GNUC__)
#define RT_PRINTF(a, b) __attribute__((format(printf, a, b)))
#else
#define RT_PRINTF(a, b)
#endif

/* Fills err (may be NULL) and returns status, so callers can write
 * `return rt_fail(err, RT_ERR_IO, "%s: cannot open: %s", path, strerror(errno));` */
rt_status rt_fail(rt_error *err, rt_status status, const char *fmt, ...) RT_PRINTF(3, 4);

/* Copies at most cap-1 bytes of src into dst, always NUL-terminates. */
void rt_copy_string(char *dst, size_t cap, const char *src);

/* Removes leading and trailing ASCII white space in place; returns s. */
char *rt_trim(char *s);

/* ASCII case-insensitive equality. */
int rt_equal_nocase(const char *a, const char *b);

/* The status of a failed system or C library call from its errno: the C
 * library allocates inside fopen, fdopen and realpath, and the kernel may
 * lack memory for an open or mkdir, so ENOMEM is RT_ERR_NOMEM, whatever the
 * call; any other errno gives `otherwise` (RT_ERR_IO for file calls). */
rt_status rt_errno_status(int e, rt_status otherwise);

/* Overflow-checked allocation of n * size bytes, zeroed. NULL on failure. */
void *rt_calloc(size_t n, size_t size);

/* A length for people: "12.5 min" below 90 minutes, "3.5 h" from there on. */
void rt_duration_text(double seconds, char *buf, size_t cap);

/* Parses a finite decimal number filling the whole string (after trimming).
 * Returns 0 on success, -1 otherwise. */
int rt_parse_double(const char *s, double *out);

#endif
