/* Replays saved fuzz inputs without a fuzzing engine: feeds every regular
 * file named on the command line, or found directly inside a folder named
 * there, to the target's LLVMFuzzerTestOneInput. Built with the ordinary
 * compiler and run by CTest (label "fuzz"), so each finding stays a
 * regression test; under REMTONE_SANITIZE the replays run with ASan+UBSan.
 * Exits 1 when no input was found (an empty corpus checks nothing) or a
 * file cannot be read; a bad input shows as a crash or sanitizer report. */
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "fuzz_support.h"

enum { REPLAY_MAX_BYTES = 64 << 20 };

static int replay_file(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        perror(path);
        return -1;
    }
    size_t cap = 4096, n = 0;
    unsigned char *buf = malloc(cap);
    while (buf) {
        size_t got = fread(buf + n, 1, cap - n, f);
        n += got;
        if (n < cap || cap >= REPLAY_MAX_BYTES)
            break;
        unsigned char *bigger = realloc(buf, cap * 2);
        if (!bigger) {
            free(buf);
            buf = NULL;
            break;
        }
        buf = bigger;
        cap *= 2;
    }
    int bad = ferror(f) || !buf;
    fclose(f);
    if (bad) {
        fprintf(stderr, "%s: cannot read\n", path);
        free(buf);
        return -1;
    }
    /* a copy of exactly n bytes, so ASan sees reads past the end */
    unsigned char *exact = malloc(n ? n : 1);
    if (!exact) {
        free(buf);
        return -1;
    }
    memcpy(exact, buf, n);
    free(buf);
    LLVMFuzzerTestOneInput(exact, n);
    free(exact);
    return 0;
}

static int compare_names(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Files of a folder in name order, so a failure is reproducible. */
static int replay_dir(const char *dir, long *count)
{
    DIR *d = opendir(dir);
    if (!d) {
        perror(dir);
        return -1;
    }
    char **names = NULL;
    size_t n = 0, cap = 0;
    struct dirent *e;
    int status = 0;
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.')
            continue;
        if (n == cap) {
            cap = cap ? cap * 2 : 64;
            char **bigger = realloc(names, cap * sizeof *names);
            if (!bigger) {
                status = -1;
                break;
            }
            names = bigger;
        }
        names[n] = strdup(e->d_name);
        if (!names[n]) {
            status = -1;
            break;
        }
        n++;
    }
    closedir(d);
    if (n > 1)
        qsort(names, n, sizeof *names, compare_names);
    for (size_t i = 0; i < n; i++) {
        char path[4096];
        struct stat st;
        snprintf(path, sizeof path, "%s/%s", dir, names[i]);
        if (status == 0 && stat(path, &st) == 0 && S_ISREG(st.st_mode)) {
            if (replay_file(path) != 0)
                status = -1;
            else
                (*count)++;
        }
        free(names[i]);
    }
    free(names);
    return status;
}

int main(int argc, char **argv)
{
    long count = 0;
    int status = 0;
    for (int i = 1; i < argc && status == 0; i++) {
        struct stat st;
        if (stat(argv[i], &st) != 0) {
            perror(argv[i]);
            status = -1;
        } else if (S_ISDIR(st.st_mode)) {
            status = replay_dir(argv[i], &count);
        } else if (replay_file(argv[i]) == 0) {
            count++;
        } else {
            status = -1;
        }
    }
    printf("replayed %ld inputs\n", count);
    if (status != 0 || count == 0) {
        fprintf(stderr, "replay: %s\n", count == 0 ? "no input found" : "an input could not be read");
        return 1;
    }
    return 0;
}
