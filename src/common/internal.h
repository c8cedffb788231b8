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

/* ---- Constants of the scoring grid, each named once ---------------------
 * The staging epoch: 30 s (AASM Manual for the Scoring of Sleep and
 * Associated Events, v2, scoring in 30-s epochs). RT_EPOCH_WHOLE_S is its
 * integer form for per-second arrays and size_t arithmetic; RT_EPOCH_S the
 * same length as a double, for times in seconds. */
#define RT_EPOCH_WHOLE_S 30
#define RT_EPOCH_S ((double)RT_EPOCH_WHOLE_S)
/* SINBAR's 3-s mini-epochs (Frauscher et al. 2012, Sleep) and the Montreal
 * method's 2-s mini-epochs (Montplaisir et al. 2010, Mov Disord): ten and
 * fifteen to a 30-s epoch. The 3-s length is public as RT_MANUAL_MINI_S. */
#define RT_MINI3_WHOLE_S 3
#define RT_MINI2_WHOLE_S 2
#define RT_MINIS3_PER_EPOCH (RT_EPOCH_WHOLE_S / RT_MINI3_WHOLE_S)
#define RT_MINIS2_PER_EPOCH (RT_EPOCH_WHOLE_S / RT_MINI2_WHOLE_S)
/* pi to more digits than a double holds (C11 does not define M_PI). */
#define RT_PI 3.14159265358979323846

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
