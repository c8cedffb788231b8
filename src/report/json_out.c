/* File identities and untrusted text for the JSON writers. */
#include <stdlib.h>

#include "digest.h"
#include "internal.h"
#include "report_internal.h"
#include "text.h"

rt_status rt_file_identity_json(const char *path, bool with_path, json_t **out, rt_error *err)
{
    *out = NULL;
    long long size = 0;
    char hex[17];
    rt_status st = rt_file_digest(path, &size, hex, err);
    if (st != RT_OK)
        return st;
    bool ok = true;
    json_t *o = json_object();
    if (with_path)
        rt_json_set(o, "path", rt_json_text(path), &ok);
    rt_json_set(o, "bytes", json_integer((json_int_t)size), &ok);
    rt_json_set(o, "xxh3", json_string(hex), &ok);
    if (!(*out = rt_json_done(o, ok)))
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for its identity", path);
    return RT_OK;
}

rt_status rt_file_identity_add(json_t *o, const char *key, const char *path, bool with_path,
                               rt_error *err)
{
    if (!path)
        return RT_OK;
    json_t *id = NULL;
    rt_status st = rt_file_identity_json(path, with_path, &id, err);
    if (st != RT_OK)
        return st;
    bool ok = true;
    rt_json_set(o, key, id, &ok);
    return ok ? RT_OK : rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for its identity", path);
}

json_t *rt_json_text(const char *text)
{
    char *clean = rt_utf8_clean(text, false);
    json_t *s = clean ? json_string(clean) : NULL;
    free(clean);
    return s;
}
