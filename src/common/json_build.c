/* The JSON building and writing helpers of json_build.h. */
#include "json_build.h"

#include <stdint.h>
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

/* The text being dumped. jansson (2.14) ignores a failure to write an
 * object's key and goes on with its value, so a failed append is remembered
 * here rather than trusted to jansson's return value. */
typedef struct dump_text {
    char *text;
    size_t len, cap;
    bool failed;
} dump_text;

static int dump_append(const char *bytes, size_t n, void *data)
{
    dump_text *d = data;
    if (d->failed)
        return -1;
    if (n >= d->cap - d->len || !d->text) {
        size_t cap = d->cap ? d->cap : 4096;
        while (cap - d->len <= n && cap <= SIZE_MAX / 2)
            cap *= 2;
        char *grown = cap - d->len > n ? realloc(d->text, cap) : NULL;
        if (!grown) {
            d->failed = true;
            return -1;
        }
        d->text = grown;
        d->cap = cap;
    }
    memcpy(d->text + d->len, bytes, n);
    d->len += n;
    return 0;
}

rt_status rt_json_write(json_t *root, const char *path, size_t flags, rt_error *err)
{
    /* Composed in memory first: jansson then fails only for memory, and the
     * file only for the disk, so each failure gets its own status. */
    dump_text d = {NULL, 0, 0, false};
    if (!root || json_dump_callback(root, dump_append, &d, flags) != 0 || d.failed) {
        free(d.text);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory composing the JSON", path);
    }
    rt_status st = rt_output_write_all(path, d.text, d.len, 1, "JSON", err);
    free(d.text);
    return st;
}
