/* File digests with XXH3 (Debian's libxxhash). */
#include "digest.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <xxhash.h>

#include "input.h"
#include "internal.h"

rt_status rt_file_digest(const char *path, long long *size_bytes, char hex[17], rt_error *err)
{
    /* a regular file only, as every reader opens it (input.h): the digest of a
     * pipe would describe bytes nobody read */
    FILE *f = NULL;
    long long size = 0;
    rt_status st = rt_input_open(path, "input", &f, &size, err);
    if (st != RT_OK)
        return st;
    XXH3_state_t *state = XXH3_createState();
    enum { CHUNK = 1 << 20 };
    unsigned char *buf = malloc(CHUNK);
    if (!state || !buf) {
        XXH3_freeState(state);
        free(buf);
        fclose(f);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    }
    XXH3_64bits_reset(state);
    long long total = 0;
    size_t got;
    while ((got = fread(buf, 1, CHUNK, f)) > 0) {
        XXH3_64bits_update(state, buf, got);
        total += (long long)got;
    }
    int failed = ferror(f);
    fclose(f);
    snprintf(hex, 17, "%016llx", (unsigned long long)XXH3_64bits_digest(state));
    XXH3_freeState(state);
    free(buf);
    if (failed)
        return rt_fail(err, RT_ERR_IO, "%s: read error after %lld bytes", path, total);
    *size_bytes = total;
    return RT_OK;
}
