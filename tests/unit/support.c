/* Shared helpers for the cmocka unit tests. */
#include "support.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

static void remove_tree(const char *path)
{
    char cmd[4200];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", path);
    if (system(cmd) != 0)
        fail_msg("cannot clear %s", path);
}

const char *rt_test_dir(const char *name)
{
    static char path[4096];
    const char *base = getenv("REMTONE_TMP");
    snprintf(path, sizeof path, "%s/%s", base ? base : "/tmp", name);
    remove_tree(path);
    if (mkdir(path, 0755) != 0 && errno != EEXIST)
        fail_msg("cannot create %s: %s", path, strerror(errno));
    return path;
}

void rt_test_write_file(const char *path, const void *data, size_t len)
{
    FILE *f = fopen(path, "wb");
    if (!f)
        fail_msg("cannot write %s: %s", path, strerror(errno));
    if (len && fwrite(data, 1, len, f) != len)
        fail_msg("short write to %s", path);
    fclose(f);
}

const char *rt_test_text_file(const char *dir, const char *name, const char *text)
{
    static char path[4400];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    rt_test_write_file(path, text, strlen(text));
    return path;
}

uint64_t rt_test_seed(void)
{
    const char *s = getenv("REMTONE_SEED");
    uint64_t seed = s ? strtoull(s, NULL, 10) : 20261201u;
    printf("# seed %" PRIu64 " (set REMTONE_SEED to repeat)\n", seed);
    return seed;
}
