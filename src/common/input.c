/* Opening and reading inputs (input.h). */
#include "input.h"

#include <errno.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "internal.h"

rt_status rt_input_open(const char *path, const char *what, FILE **out, long long *size,
                        rt_error *err)
{
    *out = NULL;
    struct stat st;
    if (stat(path, &st) != 0)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot open: %s", path,
                       strerror(errno));
    if (S_ISDIR(st.st_mode))
        return rt_fail(err, RT_ERR_IO, "%s: cannot open: Is a directory, not a %s", path, what);
    if (!S_ISREG(st.st_mode))
        return rt_fail(err, RT_ERR_IO,
                       "%s: cannot open: not a regular file (a pipe, process substitution or "
                       "device); remtone reads a %s more than once -- to load it and to record "
                       "its size and digest in the result -- so save it to a file first",
                       path, what);
    FILE *f = fopen(path, "rb");
    if (!f)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot open: %s", path,
                       strerror(errno));
    /* the name may have changed between the two looks: ask the open file */
    if (fstat(fileno(f), &st) != 0 || !S_ISREG(st.st_mode)) {
        fclose(f);
        return rt_fail(err, RT_ERR_IO, "%s: cannot open: not a regular file", path);
    }
    *out = f;
    *size = (long long)st.st_size;
    return RT_OK;
}

const char *rt_input_foreign_encoding(const unsigned char *s, size_t n)
{
    /* byte-order marks (The Unicode Standard, section 23.8); UTF-32LE's
     * starts with UTF-16LE's, so it is asked first */
    if (n >= 4 && ((s[0] == 0xFF && s[1] == 0xFE && s[2] == 0 && s[3] == 0) ||
                   (s[0] == 0 && s[1] == 0 && s[2] == 0xFE && s[3] == 0xFF)))
        return "UTF-32";
    if (n >= 2 && ((s[0] == 0xFF && s[1] == 0xFE) || (s[0] == 0xFE && s[1] == 0xFF)))
        return "UTF-16";
    /* no mark: ASCII text in UTF-16 or UTF-32 has NUL bytes beside each
     * letter; two letters of each (8 bytes) tell it from a file that merely
     * holds NUL bytes */
    if (n < 8)
        return NULL;
    bool le32 = true, be32 = true, le16 = true, be16 = true;
    for (size_t i = 0; i < 8; i++) {
        bool letter = s[i] != 0;
        le32 &= letter == (i % 4 == 0);
        be32 &= letter == (i % 4 == 3);
        le16 &= letter == (i % 2 == 0);
        be16 &= letter == (i % 2 == 1);
    }
    if (le32 || be32)
        return "UTF-32";
    if (le16 || be16)
        return "UTF-16";
    return NULL;
}

rt_status rt_input_read_text(const char *path, const char *what, unsigned char **out,
                             size_t *len, rt_error *err)
{
    *out = NULL;
    *len = 0;
    FILE *f = NULL;
    long long size = 0;
    rt_status st = rt_input_open(path, what, &f, &size, err);
    if (st != RT_OK)
        return st;
    if (size > RT_INPUT_TEXT_MAX_BYTES) {
        fclose(f);
        return rt_fail(err, RT_ERR_STAGING, "%s: %lld bytes is larger than the %lld MiB allowed "
                       "for a %s; is this the right file?", path, size,
                       RT_INPUT_TEXT_MAX_BYTES / (1024 * 1024), what);
    }
    unsigned char *buf = malloc((size_t)size + 1);
    if (!buf) {
        fclose(f);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %lld bytes", path, size);
    }
    size_t got = fread(buf, 1, (size_t)size, f);
    int read_error = ferror(f), code = errno;
    fclose(f);
    if (read_error || got != (size_t)size) {
        free(buf);
        return rt_fail(err, read_error ? rt_errno_status(code, RT_ERR_IO) : RT_ERR_IO,
                       "%s: cannot read: %s", path,
                       read_error ? strerror(code) : "the file became shorter while read");
    }
    if (got == 0) {
        free(buf);
        return rt_fail(err, RT_ERR_STAGING, "%s: the file is empty", path);
    }
    const char *foreign = rt_input_foreign_encoding(buf, got);
    if (foreign) {
        free(buf);
        return rt_fail(err, RT_ERR_STAGING, RT_INPUT_FOREIGN_MESSAGE, path, foreign);
    }
    buf[got] = '\0';
    *out = buf;
    *len = got;
    return RT_OK;
}
