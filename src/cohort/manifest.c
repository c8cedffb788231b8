/* The cohort manifest: one row per night naming its recording, staging,
 * events, group, optionally its subject and visit, its own label map and
 * cutoff file and norms file (nights from several sites), and any per-night channel
 * overrides. Read with the shared
 * table reader, so quoting, tabs, a byte-order mark and CRLF behave as in
 * every other table; each row is checked here (safe id, no duplicate, input
 * files present) and every message names the manifest line. */
#include "remtone/cohort.h"

#include <errno.h>
#include <stdio.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <xxhash.h>

#include "internal.h"
#include "table.h"

enum {
    COL_ID = 0, COL_RECORDING, COL_STAGES, COL_EVENTS, COL_GROUP,
    COL_SUBJECT, COL_VISIT, COL_LABEL_MAP, COL_CUTOFFS, COL_AGE, COL_SEX, COL_CORRECTIONS, COL_NORMS,
    COL_ROLE0 /* the optional columns from COL_SUBJECT on */
};

typedef struct loader {
    rt_manifest *m;
    size_t cap;
    char dir[4096]; /* the manifest's folder, "" when it is the working one */
} loader;

bool rt_cohort_id_is_safe(const char *id)
{
    size_t n = strlen(id);
    if (n == 0 || n > RT_COHORT_ID_MAX || id[0] == '.' || id[0] == '-')
        return false;
    for (size_t i = 0; i < n; i++) {
        char c = id[i];
        if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
              c == '.' || c == '_' || c == '-'))
            return false;
    }
    /* nights/ID.json of "x.error" would be the failure record of "x" */
    static const char *const reserved[] = {".error", ".key"};
    for (size_t k = 0; k < 2; k++) {
        size_t r = strlen(reserved[k]);
        if (n >= r && rt_equal_nocase(id + n - r, reserved[k]))
            return false;
    }
    return true;
}

unsigned rt_cohort_part_of(const char *id, unsigned n_parts)
{
    if (n_parts <= 1)
        return 0;
    return (unsigned)(XXH3_64bits(id, strlen(id)) % n_parts);
}

/* Resolves a path from the manifest against the manifest's folder and checks
 * that it names a readable regular file: the path in *out (NULL on failure,
 * which is also recorded in the table). */
static rt_status resolve(rt_table *t, loader *l, const char *id, const char *what,
                         const char *value, char **out)
{
    *out = NULL;
    size_t need = strlen(l->dir) + strlen(value) + 2;
    char *path = malloc(need);
    if (!path) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_NOMEM, "%s: out of memory", t->path));
        return RT_ERR_NOMEM;
    }
    if (value[0] == '/' || !l->dir[0])
        snprintf(path, need, "%s", value);
    else
        snprintf(path, need, "%s/%s", l->dir, value);
    struct stat sb;
    const char *why = NULL;
    int code = 0; /* errno of a failed stat: ENOMEM is out of memory, not a missing file */
    if (stat(path, &sb) != 0)
        why = strerror(code = errno);
    else if (!S_ISREG(sb.st_mode))
        why = "not a regular file";
    if (why) {
        char q[RT_TABLE_QUOTE_MAX + 8];
        rt_table_quote(q, sizeof q, value);
        rt_status st = rt_fail(&t->error, rt_errno_status(code, RT_ERR_IO),
                               "%s line %ld (night %s): %s '%s' (%s): %s",
                               t->path, t->row_line, id, what, q, path, why);
        rt_table_fail(t, st);
        free(path);
        return st;
    }
    *out = path;
    return RT_OK;
}

static void entry_free(rt_manifest_entry *e)
{
    free(e->recording);
    free(e->stages);
    free(e->events);
    free(e->label_map);
    free(e->cutoffs);
    free(e->corrections);
    free(e->norms);
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        free(e->role_override[r]);
    memset(e, 0, sizeof *e);
}

static bool check_id(rt_table *t, loader *l, const char *id)
{
    char q[RT_TABLE_QUOTE_MAX + 8];
    rt_table_quote(q, sizeof q, id);
    if (!rt_cohort_id_is_safe(id)) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: id '%s' is not a safe file name (use 1-%d letters, "
                                 "digits, '.', '_' or '-', not starting with '.' or '-', not "
                                 "ending in .error or .key)",
                                 t->path, t->row_line, q, RT_COHORT_ID_MAX));
        return false;
    }
    for (size_t i = 0; i < l->m->n_entries; i++) {
        if (rt_equal_nocase(l->m->entries[i].id, id)) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                     "%s line %ld: duplicate id '%s' (first on line %ld; ids are "
                                     "compared ignoring case)",
                                     t->path, t->row_line, q, l->m->entries[i].line));
            return false;
        }
    }
    return true;
}

static void on_row(rt_table *t, char **v)
{
    loader *l = t->user;
    if (t->status != RT_OK)
        return;
    if (!check_id(t, l, v[COL_ID]))
        return;
    if (!v[COL_RECORDING][0]) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld (night %s): the recording is empty", t->path,
                                 t->row_line, v[COL_ID]));
        return;
    }
    static const struct {
        int col;
        const char *what;
    } names[] = {{COL_GROUP, "group"}, {COL_SUBJECT, "subject"}, {COL_VISIT, "visit"}};
    for (size_t k = 0; k < sizeof names / sizeof names[0]; k++)
        if (strlen(v[names[k].col]) > RT_COHORT_GROUP_MAX) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                     "%s line %ld (night %s): %s longer than %d bytes", t->path,
                                     t->row_line, v[COL_ID], names[k].what, RT_COHORT_GROUP_MAX));
            return;
        }
    if (l->m->n_entries == l->cap) {
        size_t cap = l->cap ? 2 * l->cap : 64;
        rt_manifest_entry *grown = realloc(l->m->entries, cap * sizeof *grown);
        if (!grown) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_NOMEM, "%s: out of memory", t->path));
            return;
        }
        l->m->entries = grown;
        l->cap = cap;
    }
    rt_manifest_entry e;
    memset(&e, 0, sizeof e);
    /* optional age and sex, for the norms (docs/cohort.md) */
    e.age_years = NAN;
    char *end = NULL;
    if (v[COL_AGE][0] && ((e.age_years = strtod(v[COL_AGE], &end)), *end || end == v[COL_AGE] ||
                          !(e.age_years >= 0 && e.age_years <= 130))) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld (night %s): age must be 0 to 130 years", t->path,
                                 t->row_line, v[COL_ID]));
        return;
    }
    if (v[COL_SEX][0]) {
        char c = v[COL_SEX][0];
        if (v[COL_SEX][1] || !strchr("FMfm", c)) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                     "%s line %ld (night %s): sex must be F or M", t->path,
                                     t->row_line, v[COL_ID]));
            return;
        }
        e.sex = (char)(c == 'f' || c == 'F' ? 'F' : 'M');
    }
    rt_copy_string(e.id, sizeof e.id, v[COL_ID]);
    rt_copy_string(e.group, sizeof e.group, v[COL_GROUP]);
    rt_copy_string(e.subject, sizeof e.subject, v[COL_SUBJECT]);
    rt_copy_string(e.visit, sizeof e.visit, v[COL_VISIT]);
    e.line = t->row_line;
    bool ok = resolve(t, l, e.id, "recording", v[COL_RECORDING], &e.recording) == RT_OK;
    if (ok && v[COL_STAGES][0])
        ok = resolve(t, l, e.id, "stages", v[COL_STAGES], &e.stages) == RT_OK;
    if (ok && v[COL_EVENTS][0])
        ok = resolve(t, l, e.id, "events", v[COL_EVENTS], &e.events) == RT_OK;
    if (ok && v[COL_LABEL_MAP][0])
        ok = resolve(t, l, e.id, "label map", v[COL_LABEL_MAP], &e.label_map) == RT_OK;
    if (ok && v[COL_CUTOFFS][0])
        ok = resolve(t, l, e.id, "cutoffs", v[COL_CUTOFFS], &e.cutoffs) == RT_OK;
    if (ok && v[COL_CORRECTIONS][0])
        ok = resolve(t, l, e.id, "corrections", v[COL_CORRECTIONS], &e.corrections) == RT_OK;
    if (ok && v[COL_NORMS][0])
        ok = resolve(t, l, e.id, "norms", v[COL_NORMS], &e.norms) == RT_OK;
    for (int r = 0; ok && r < RT_ROLE_COUNT; r++) {
        if (v[COL_ROLE0 + r][0] && !(e.role_override[r] = strdup(v[COL_ROLE0 + r]))) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_NOMEM, "%s: out of memory", t->path));
            ok = false;
        }
    }
    if (!ok) {
        entry_free(&e);
        return;
    }
    l->m->entries[l->m->n_entries++] = e;
}

rt_status rt_manifest_load(const char *path, rt_manifest **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_manifest_load: no place for the result");
    *out = NULL;
    if (!path)
        return rt_fail(err, RT_ERR_USAGE, "rt_manifest_load: NULL path");
    rt_manifest *m = rt_calloc(1, sizeof *m);
    if (!m)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    rt_copy_string(m->path, sizeof m->path, path);
    loader l;
    memset(&l, 0, sizeof l);
    l.m = m;
    const char *slash = strrchr(path, '/');
    if (slash) {
        size_t n = (size_t)(slash - path);
        if (n == 0)
            n = 1; /* a manifest in "/" */
        if (n >= sizeof l.dir) {
            free(m);
            return rt_fail(err, RT_ERR_USAGE, "%s: path too long", path);
        }
        memcpy(l.dir, path, n);
        l.dir[n] = '\0';
    }
    rt_table t;
    memset(&t, 0, sizeof t);
    t.path = path;
    t.what = "manifest";
    t.columns[COL_ID] = "id";
    t.columns[COL_RECORDING] = "recording";
    t.columns[COL_STAGES] = "stages";
    t.columns[COL_EVENTS] = "events";
    t.columns[COL_GROUP] = "group";
    static const char *const extra[] = {"subject", "visit",  "label_map",  "cutoffs",
                                        "age",     "sex",    "corrections", "norms"};
    for (int k = 0; k < COL_ROLE0 - COL_SUBJECT; k++) {
        t.columns[COL_SUBJECT + k] = extra[k];
        t.optional[COL_SUBJECT + k] = true;
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        t.columns[COL_ROLE0 + r] = rt_role_name((rt_role)r);
        t.optional[COL_ROLE0 + r] = true;
    }
    t.n_columns = COL_ROLE0 + RT_ROLE_COUNT;
    t.on_row = on_row;
    t.user = &l;
    rt_status st = rt_table_read(&t, err);
    if (st == RT_OK && m->n_entries == 0)
        st = rt_fail(err, RT_ERR_STAGING, "%s: the manifest lists no nights", path);
    if (st != RT_OK) {
        rt_manifest_free(m);
        return st;
    }
    *out = m;
    return RT_OK;
}

void rt_manifest_free(rt_manifest *manifest)
{
    if (!manifest)
        return;
    for (size_t i = 0; i < manifest->n_entries; i++)
        entry_free(&manifest->entries[i]);
    free(manifest->entries);
    free(manifest);
}
