/* Status codes and error reports shared by every remtone function.
 *
 * A function that can fail returns an rt_status and, when the caller passes
 * a non-NULL rt_error, fills it with the same status and a one-line message
 * that names the file and the place (byte offset, line, record) where the
 * problem was found. The library never prints and never exits.
 *
 * Functions that make an object (rt_x_new, rt_x_open, rt_x_load) have one
 * form: `rt_status rt_x_new(..., rt_x **out, rt_error *err)`. On success
 * *out holds the object and RT_OK is returned; on failure *out is NULL, err
 * (when not NULL) carries the same status as the return value, and nothing
 * is left to free. A violated precondition (a NULL argument, a value out of
 * its documented range) is RT_ERR_USAGE, never RT_ERR_NOMEM. */
#ifndef REMTONE_STATUS_H
#define REMTONE_STATUS_H

#ifdef __cplusplus
extern "C" {
#endif

/* Stable values: the command-line program maps each to a documented exit code. */
typedef enum rt_status {
    RT_OK = 0,
    RT_ERR_USAGE = 1,     /* an argument or option is invalid */
    RT_ERR_IO = 2,        /* a file cannot be opened, read or written */
    RT_ERR_RECORDING = 3, /* the recording is malformed or not supported */
    RT_ERR_STAGING = 4,   /* a staging, event or label-map file is malformed or inconsistent */
    RT_ERR_CHANNEL = 5,   /* a channel role is missing, ambiguous or has a wrong unit */
    RT_ERR_NOMEM = 6,     /* out of memory */
    RT_ERR_INTERNAL = 7   /* a bug in remtone: please report it */
} rt_status;

enum { RT_ERROR_MESSAGE_MAX = 1024 };

typedef struct rt_error {
    rt_status status;
    char message[RT_ERROR_MESSAGE_MAX]; /* NUL-terminated, no trailing newline */
} rt_error;

/* Short stable name of a status ("ok", "usage", "io", ...). Never NULL. */
const char *rt_status_name(rt_status status);

/* Resets *err to RT_OK with an empty message. err may be NULL. */
void rt_error_clear(rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
