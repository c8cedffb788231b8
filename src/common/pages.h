/* Large work arrays (a conditioned stretch, a bout's beats) taken straight
 * from the system with mmap, not from malloc: freeing one returns its memory
 * at once, pages never written are never resident, and malloc's placement of
 * everything else is left alone. (glibc raises its mmap threshold to the size
 * of the largest block freed, after which blocks of that size come from the
 * heap and can stay resident after free: a scorer that frees a bout-sized
 * array would then keep its peak memory up.) Internal header. */
#ifndef REMTONE_PAGES_H
#define REMTONE_PAGES_H

#include <stddef.h>

#include "remtone/status.h"

/* Makes *p hold at least need doubles; *cap is its capacity in doubles (0
 * with *p NULL at first). The contents are not kept when it grows (where
 * the system can, pages already written are moved, not faulted in again). */
rt_status rt_pages_reserve(double **p, size_t *cap, size_t need, rt_error *err);

/* Returns an array of rt_pages_reserve with its capacity; p may be NULL. */
void rt_pages_free(double *p, size_t cap);

#endif
