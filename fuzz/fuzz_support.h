/* Helpers shared by the fuzz targets: most remtone readers take a path (EDFlib
 * opens files by name), so the input bytes go to a scratch file first. The
 * scratch folder lives under /dev/shm when it exists (memory, fast), is made
 * once per process and named after the process id, so several fuzzers and
 * replays can run side by side. */
#ifndef REMTONE_FUZZ_SUPPORT_H
#define REMTONE_FUZZ_SUPPORT_H

#include <stddef.h>
#include <stdint.h>

/* The libFuzzer entry point every target defines (also called by replay.c). */
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* The per-process scratch folder (created on first use; never NULL: aborts
 * when no folder can be made, since a fuzz run without one means nothing). */
const char *rt_fuzz_dir(void);

/* Writes size bytes to rt_fuzz_dir()/name, replacing what was there, and
 * returns the full path in a static buffer (valid until the next call). */
const char *rt_fuzz_write_file(const char *name, const uint8_t *data, size_t size);

#endif
