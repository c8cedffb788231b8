/* Scratch files for the fuzz targets (see fuzz_support.h). Failures to write
 * scratch files abort: they are faults of the machine, not of the input. */
#include "fuzz_support.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static char fuzz_dir[256];

static void remove_fuzz_dir(void)
{
    /* best effort: the folder holds only the few names the targets write */
    static const char *const names[] = {"input", "input.edf", "input.csv", "manifest.csv",
                                        "night.edf", "stages.csv", "events.csv", "roundtrip.xml"};
    char path[512];
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        snprintf(path, sizeof path, "%s/%s", fuzz_dir, names[i]);
        unlink(path);
    }
    rmdir(fuzz_dir);
}

const char *rt_fuzz_dir(void)
{
    if (fuzz_dir[0])
        return fuzz_dir;
    struct stat st;
    const char *base = stat("/dev/shm", &st) == 0 && S_ISDIR(st.st_mode) ? "/dev/shm" : "/tmp";
    snprintf(fuzz_dir, sizeof fuzz_dir, "%s/remtone-fuzz-%ld", base, (long)getpid());
    if (mkdir(fuzz_dir, 0700) != 0 && stat(fuzz_dir, &st) != 0) {
        perror(fuzz_dir);
        abort();
    }
    atexit(remove_fuzz_dir);
    return fuzz_dir;
}

const char *rt_fuzz_write_file(const char *name, const uint8_t *data, size_t size)
{
    static char path[512];
    snprintf(path, sizeof path, "%s/%s", rt_fuzz_dir(), name);
    FILE *f = fopen(path, "wb");
    if (!f || (size > 0 && fwrite(data, 1, size, f) != size) || fclose(f) != 0) {
        perror(path);
        abort();
    }
    return path;
}
