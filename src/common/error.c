/* Status names and the error-report helper every module uses. */
#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "remtone/version.h"

const char *rt_version(void) { return RT_VERSION_STRING; }

const char *rt_status_name(rt_status status)
{
    switch (status) {
    case RT_OK: return "ok";
    case RT_ERR_USAGE: return "usage";
    case RT_ERR_IO: return "io";
    case RT_ERR_RECORDING: return "recording";
    case RT_ERR_STAGING: return "staging";
    case RT_ERR_CHANNEL: return "channel";
    case RT_ERR_NOMEM: return "out-of-memory";
    case RT_ERR_INTERNAL: return "internal";
    }
    return "unknown";
}

void rt_error_clear(rt_error *err)
{
    if (!err)
        return;
    err->status = RT_OK;
    err->message[0] = '\0';
}

rt_status rt_fail(rt_error *err, rt_status status, const char *fmt, ...)
{
    if (err) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(err->message, sizeof err->message, fmt, ap);
        va_end(ap);
        err->status = status;
    }
    return status;
}

void rt_copy_string(char *dst, size_t cap, const char *src)
{
    if (cap == 0)
        return;
    size_t n = strlen(src);
    if (n >= cap)
        n = cap - 1;
    memcpy(dst, src, n);
    dst[n] = '\0';
}

char *rt_trim(char *s)
{
    char *start = s;
    while (*start && isspace((unsigned char)*start))
        start++;
    size_t n = strlen(start);
    while (n > 0 && isspace((unsigned char)start[n - 1]))
        n--;
    memmove(s, start, n);
    s[n] = '\0';
    return s;
}

int rt_equal_nocase(const char *a, const char *b)
{
    for (; *a && *b; a++, b++)
        if (tolower((unsigned char)*a) != tolower((unsigned char)*b))
            return 0;
    return *a == *b;
}

rt_status rt_errno_status(int e, rt_status otherwise)
{
    return e == ENOMEM ? RT_ERR_NOMEM : otherwise;
}

void *rt_calloc(size_t n, size_t size)
{
    if (size != 0 && n > SIZE_MAX / size)
        return NULL;
    return calloc(n ? n : 1, size ? size : 1);
}

int rt_parse_double(const char *s, double *out)
{
    while (isspace((unsigned char)*s))
        s++;
    if (*s == '\0')
        return -1;
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (errno == ERANGE || end == s || !isfinite(v))
        return -1;
    while (isspace((unsigned char)*end))
        end++;
    if (*end != '\0')
        return -1;
    *out = v;
    return 0;
}

void rt_duration_text(double seconds, char *buf, size_t cap)
{
    if (seconds < 90.0 * 60.0)
        snprintf(buf, cap, "%.1f min", seconds / 60.0);
    else
        snprintf(buf, cap, "%.1f h", seconds / 3600.0);
}
