/* Writing JSON files and file identities, shared by every JSON writer. */
#include "digest.h"
#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "text.h"

#include <stdlib.h>

rt_status rt_json_write(json_t *root, const char *path, size_t flags, rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    if (json_dumpf(root, out.file, JSON_INDENT(2) | flags) != 0 || fputc('\n', out.file) == EOF) {
        rt_output_abort(&out);
        return rt_fail(err, RT_ERR_IO, "%s: cannot write JSON", path);
    }
    return rt_output_commit(&out, err);
}

json_t *rt_json_text(const char *text)
{
    char *clean = rt_utf8_clean(text, false);
    json_t *s = clean ? json_string(clean) : NULL;
    free(clean);
    return s;
}

json_t *rt_file_identity_json(const char *path, bool with_path, rt_error *err)
{
    long long size = 0;
    char hex[17];
    if (rt_file_digest(path, &size, hex, err) != RT_OK)
        return NULL;
    json_t *o = json_object();
    if (with_path)
        json_object_set_new(o, "path", rt_json_text(path));
    json_object_set_new(o, "bytes", json_integer((json_int_t)size));
    json_object_set_new(o, "xxh3", json_string(hex));
    return o;
}
