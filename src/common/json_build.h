/* Building JSON with jansson so that running out of memory is never a
 * silently shorter file. jansson's constructors answer NULL (and its setters
 * -1) only when out of memory, or for a string that is not UTF-8.
 * rt_json_set and rt_json_push store v (stolen; NULL is allowed) in an object
 * or an array and clear *ok at the first failure; rt_json_done(v, ok) gives
 * v while ok holds and otherwise releases it and gives NULL. A builder that
 * uses them returns a whole value or NULL (out of memory), never a value with
 * a member missing. Internal to the library. */
#ifndef REMTONE_JSON_BUILD_H
#define REMTONE_JSON_BUILD_H

#include <stdbool.h>

#include <jansson.h>

#include "remtone/status.h"

void rt_json_set(json_t *o, const char *key, json_t *v, bool *ok);
void rt_json_push(json_t *a, json_t *v, bool *ok);
json_t *rt_json_done(json_t *v, bool ok);

/* Writes root to path ("-": standard output) atomically (output.h), dumped
 * with the jansson flags given (JSON_INDENT(2) and the like). The text is
 * composed in memory first, so the status says which failed: RT_ERR_NOMEM
 * (jansson), RT_ERR_IO (the file). Does not take ownership of root; a NULL
 * root (a builder out of memory) is RT_ERR_NOMEM. */
rt_status rt_json_write(json_t *root, const char *path, size_t flags, rt_error *err);

#endif
