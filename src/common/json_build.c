/* The JSON building and writing helpers of json_build.h. */
#include "json_build.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "output.h"

void rt_json_set(json_t *o, const char *key, json_t *v, bool *ok)
{
    /* jansson releases v when it cannot store it (a NULL o included) */
    if (!v || json_object_set_new(o, key, v) != 0)
        *ok = false;
}

void rt_json_push(json_t *a, json_t *v, bool *ok)
{
    if (!v || json_array_append_new(a, v) != 0)
        *ok = false;
}

json_t *rt_json_done(json_t *v, bool ok)
{
    if (ok)
        return v;
    json_decref(v);
    return NULL;
}

rt_status rt_json_write(json_t *root, const char *path, size_t flags, rt_error *err)
{
    /* Composed in memory first: jansson then fails only for memory, and the
     * file only for the disk, so each failure gets its own status. */
    char *text = root ? json_dumps(root, flags) : NULL;
    if (!text)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory composing the JSON", path);
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st == RT_OK) {
        size_t len = strlen(text);
        if (fwrite(text, 1, len, out.file) != len || fputc('\n', out.file) == EOF) {
            int saved = errno;
            rt_output_abort(&out);
            st = rt_fail(err, RT_ERR_IO, "%s: cannot write JSON: %s", path,
                         strerror(saved ? saved : EIO));
        } else {
            st = rt_output_commit(&out, err);
        }
    }
    free(text);
    return st;
}
