/* Work arrays mapped from the system (pages.h). */
/* MAP_ANONYMOUS is outside strict POSIX 2008, mremap is Linux's */
#define _GNU_SOURCE 1
#include "pages.h"

#include <stdint.h>
#include <sys/mman.h>

#include "internal.h"

rt_status rt_pages_reserve(double **p, size_t *cap, size_t need, rt_error *err)
{
    if (need <= *cap && *p)
        return RT_OK;
    if (need == 0)
        need = 1;
    if (need > SIZE_MAX / sizeof **p)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu samples", need);
#if defined(MREMAP_MAYMOVE) && !defined(__SANITIZE_THREAD__)
    /* growing keeps the pages already touched: they need not fault again
     * (not under ThreadSanitizer, which does not follow mremap: a mapping
     * moved onto an address another thread unmapped would look like a race) */
    if (*p) {
        void *q = mremap(*p, *cap * sizeof **p, need * sizeof **p, MREMAP_MAYMOVE);
        if (q != MAP_FAILED) {
            *p = q;
            *cap = need;
            return RT_OK;
        }
    }
#endif
    rt_pages_free(*p, *cap);
    *p = NULL;
    *cap = 0;
    void *q = mmap(NULL, need * sizeof **p, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS,
                   -1, 0);
    if (q == MAP_FAILED)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu samples", need);
    *p = q;
    *cap = need;
    return RT_OK;
}

void rt_pages_free(double *p, size_t cap)
{
    if (p)
        munmap(p, (cap ? cap : 1) * sizeof *p);
}
