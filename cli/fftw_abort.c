/* FFTW has no way to report a failed allocation: its allocator checks the
 * result with an assertion (kernel/alloc.c, CK(p)) whose handler,
 * fftw_assertion_failed, prints and aborts. The program defines that handler
 * itself -- the dynamic linker binds FFTW's call to the program's definition
 * -- so running out of memory inside FFTW ends with the documented
 * out-of-memory exit code and a message instead of a core dump. Output files
 * are safe either way: each is written to a temporary file and renamed only
 * when complete, and no temporary file is open while FFTW plans or filters.
 * The process ends at once (_exit): FFTW's state is not usable any more, and
 * nothing half-made is worth flushing or freeing. */
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"

void fftw_assertion_failed(const char *s, int line, const char *file);

void fftw_assertion_failed(const char *s, int line, const char *file)
{
    /* CK(p) after an allocation is the only check FFTW makes on memory */
    int nomem = s && strcmp(s, "p") == 0 && file && strstr(file, "alloc.c");
    fflush(stdout);
    fprintf(stderr, "remtone: %s inside FFTW (%s:%d: %s)\n",
            nomem ? "out of memory" : "an internal error", file ? file : "?", line, s ? s : "?");
    _exit(nomem ? EXIT_NOMEM : EXIT_INTERNAL);
}
