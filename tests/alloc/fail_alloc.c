/* Allocation failure injection for tests, linked only into remtone_failalloc
 * (not a test itself: its checks -- exit 8, the message, no file left, no
 * sanitizer report -- are made by tests/cli/test_alloc_failure.sh),
 * a test build of the command-line program (tests/CMakeLists.txt). It
 * defines the C allocator's entry points, so the dynamic linker binds every
 * allocation of the process to them -- remtone's own, the C library's
 * (fopen, strdup, stdio buffers) and the dependencies' (FFTW, libxml2,
 * jansson, EDFlib, libcsv) -- and forwards each to the next definition: the
 * C library's allocator, or AddressSanitizer's in the sanitizer build, so
 * LeakSanitizer still sees every block.
 *
 * Counting starts when the program's own constructors run (after the shared
 * libraries have started), so start-up allocations nobody could handle are
 * never failed. Environment:
 *   REMTONE_TEST_FAIL_ALLOC=N        the Nth counted allocation fails (once), with ENOMEM
 *   REMTONE_TEST_COUNT_ALLOC=PATH    at exit, PATH receives one letter per counted
 *                                    allocation, in order: 'f' when FFTW's planner or
 *                                    executor asked for it, 'o' otherwise (the file's
 *                                    length is the count)
 *   REMTONE_TEST_FAIL_ALLOC_TRACE=1  print the call stack of the failed allocation
 *                                    to standard error (for finding the caller) */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <link.h>
#include <errno.h>
#include <execinfo.h>
#include <fcntl.h>
#include <malloc.h>
#include <stdalign.h>
#include <stdatomic.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

typedef void *(*malloc_fn)(size_t);
typedef void *(*calloc_fn)(size_t, size_t);
typedef void *(*realloc_fn)(void *, size_t);
typedef void (*free_fn)(void *);
typedef int (*posix_memalign_fn)(void **, size_t, size_t);
typedef void *(*aligned_fn)(size_t, size_t);
typedef void *(*valloc_fn)(size_t);

static malloc_fn real_malloc;
static calloc_fn real_calloc;
static realloc_fn real_realloc;
static free_fn real_free;
static posix_memalign_fn real_posix_memalign;
static aligned_fn real_aligned_alloc, real_memalign;
static valloc_fn real_valloc, real_pvalloc;

static atomic_ulong counted;
enum { MAX_KINDS = 1 << 23 };
static char kinds[MAX_KINDS]; /* 'f' or 'o' per counted allocation */
static uintptr_t fftw_lo, fftw_hi; /* FFTW's loaded code, to tell its allocations */
static unsigned long fail_at; /* 0: never */
static int armed, trace;
static char count_path[4096];

/* dlsym may allocate while the real allocator is being looked up: those few
 * blocks come from here and are never freed. */
static alignas(max_align_t) char boot[1 << 16];
static size_t boot_used;
static int resolving;

static void *boot_alloc(size_t n)
{
    size_t a = alignof(max_align_t);
    size_t at = (boot_used + a - 1) / a * a;
    if (n > sizeof boot - at)
        return NULL;
    boot_used = at + n;
    return boot + at;
}

static int in_boot(const void *p)
{
    return (const char *)p >= boot && (const char *)p < boot + sizeof boot;
}

static void *next(const char *name)
{
    void *f = dlsym(RTLD_NEXT, name);
    if (!f) {
        static const char msg[] = "fail_alloc: the real allocator is not found\n";
        if (write(2, msg, sizeof msg - 1) < 0)
            _exit(127);
        _exit(127);
    }
    return f;
}

static void resolve(void)
{
    if (real_malloc || resolving)
        return;
    resolving = 1;
    real_calloc = (calloc_fn)next("calloc");
    real_realloc = (realloc_fn)next("realloc");
    real_free = (free_fn)next("free");
    real_posix_memalign = (posix_memalign_fn)next("posix_memalign");
    real_aligned_alloc = (aligned_fn)next("aligned_alloc");
    real_memalign = (aligned_fn)next("memalign");
    real_valloc = (valloc_fn)next("valloc");
    real_pvalloc = (valloc_fn)next("pvalloc");
    real_malloc = (malloc_fn)next("malloc");
    resolving = 0;
}

/* True when this allocation is the one to fail; caller is the address the
 * allocator was called from. */
static int fails(const void *caller)
{
    if (!armed)
        return 0;
    unsigned long n = atomic_fetch_add(&counted, 1) + 1;
    if (count_path[0] && n <= MAX_KINDS) {
        uintptr_t a = (uintptr_t)caller;
        kinds[n - 1] = a >= fftw_lo && a < fftw_hi ? 'f' : 'o';
    }
    if (n != fail_at)
        return 0;
    if (trace) {
        void *frames[32];
        int depth = backtrace(frames, 32);
        static const char head[] = "fail_alloc: this allocation fails:\n";
        if (write(2, head, sizeof head - 1) >= 0)
            backtrace_symbols_fd(frames, depth, 2);
    }
    errno = ENOMEM;
    return 1;
}

static void report_count(void)
{
    if (!count_path[0])
        return;
    size_t n = atomic_load(&counted);
    if (n > MAX_KINDS)
        n = MAX_KINDS;
    int fd = open(count_path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (fd < 0)
        return;
    for (size_t done = 0; done < n;) {
        ssize_t w = write(fd, kinds + done, n - done);
        if (w <= 0)
            break;
        done += (size_t)w;
    }
    close(fd);
}

static int find_fftw(struct dl_phdr_info *info, size_t size, void *data)
{
    (void)size;
    (void)data;
    if (!info->dlpi_name || !strstr(info->dlpi_name, "libfftw3"))
        return 0;
    for (int i = 0; i < info->dlpi_phnum; i++) {
        const ElfW(Phdr) *ph = &info->dlpi_phdr[i];
        if (ph->p_type != PT_LOAD || !(ph->p_flags & PF_X))
            continue;
        fftw_lo = info->dlpi_addr + ph->p_vaddr;
        fftw_hi = fftw_lo + ph->p_memsz;
    }
    return 1;
}

__attribute__((constructor)) static void arm(void)
{
    resolve();
    const char *n = getenv("REMTONE_TEST_FAIL_ALLOC");
    const char *path = getenv("REMTONE_TEST_COUNT_ALLOC");
    const char *t = getenv("REMTONE_TEST_FAIL_ALLOC_TRACE");
    fail_at = n ? strtoul(n, NULL, 10) : 0;
    trace = t && t[0] == '1';
    if (trace) { /* backtrace loads libgcc on first use: not inside a failure */
        void *frames[2];
        backtrace(frames, 2);
    }
    dl_iterate_phdr(find_fftw, NULL);
    if (path && strlen(path) < sizeof count_path) {
        memcpy(count_path, path, strlen(path) + 1);
        atexit(report_count);
    }
    armed = fail_at > 0 || count_path[0];
}

void *malloc(size_t n)
{
    if (!real_malloc) {
        if (resolving)
            return boot_alloc(n);
        resolve();
    }
    return fails(__builtin_return_address(0)) ? NULL : real_malloc(n);
}

void *calloc(size_t n, size_t size)
{
    if (!real_calloc) {
        if (resolving) {
            if (size && n > SIZE_MAX / size)
                return NULL;
            return boot_alloc(n * size); /* static storage: already zero */
        }
        resolve();
    }
    return fails(__builtin_return_address(0)) ? NULL : real_calloc(n, size);
}

void *realloc(void *p, size_t n)
{
    if (!real_realloc)
        resolve();
    if (in_boot(p)) { /* moves out of the start-up arena (its block sizes are not kept) */
        size_t room = (size_t)(boot + sizeof boot - (char *)p);
        void *q = malloc(n);
        if (q)
            memcpy(q, p, n < room ? n : room);
        return q;
    }
    if (n > 0 && fails(__builtin_return_address(0)))
        return NULL; /* p stays valid, as with a real failure */
    return real_realloc(p, n);
}

void free(void *p)
{
    if (!p || in_boot(p))
        return;
    if (!real_free)
        resolve();
    real_free(p);
}

int posix_memalign(void **out, size_t align, size_t n)
{
    if (!real_posix_memalign)
        resolve();
    if (fails(__builtin_return_address(0)))
        return ENOMEM;
    return real_posix_memalign(out, align, n);
}

void *aligned_alloc(size_t align, size_t n)
{
    if (!real_aligned_alloc)
        resolve();
    return fails(__builtin_return_address(0)) ? NULL : real_aligned_alloc(align, n);
}

void *memalign(size_t align, size_t n)
{
    if (!real_memalign)
        resolve();
    return fails(__builtin_return_address(0)) ? NULL : real_memalign(align, n);
}

void *valloc(size_t n)
{
    if (!real_valloc)
        resolve();
    return fails(__builtin_return_address(0)) ? NULL : real_valloc(n);
}

void *pvalloc(size_t n)
{
    if (!real_pvalloc)
        resolve();
    return fails(__builtin_return_address(0)) ? NULL : real_pvalloc(n);
}
