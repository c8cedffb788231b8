/* The CSV tables remtone reads: stage tables (`start_s,duration_s,stage`),
 * event tables (`start_s,duration_s,type`) and label maps (`label,meaning`).
 * One reader serves all three: it takes the whole file into memory (bounded at
 * 64 MiB, so a wrong path to a recording fails fast), insists on UTF-8 text,
 * finds the delimiter (comma or tab) from the header line, and feeds libcsv
 * one physical line at a time so every row knows the line it started on; the
 * messages then point the user at that line. Columns are found by name in the
 * header, so exporters may add columns or reorder them. Stage and event rows go
 * through rt_timeline_add_stage_run / rt_timeline_add_event, the checks every
 * loader shares, into a scratch timeline merged into the caller's only when
 * the whole file is good. Unknown labels do not stop the reading: all distinct
 * ones are collected, so one run tells the user everything to map. */
#include <csv.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "internal.h"
#include "table.h"
#include "remtone/timeline.h"
#include "staging_internal.h"

enum {
    UNKNOWN_LISTED_MAX = 12, /* labels spelled out in the message; the rest are counted */
    UNKNOWN_KEPT_MAX = 1000, /* distinct labels remembered (for the count) */
};

/* ---- unknown labels, all listed ---- */

typedef struct unknown_labels {
    char label[UNKNOWN_KEPT_MAX][RT_TABLE_QUOTE_MAX];
    long line[UNKNOWN_KEPT_MAX];
    size_t n;        /* kept */
    size_t overflow; /* distinct labels beyond the kept ones are not tracked exactly */
} unknown_labels;

static void unknown_add(unknown_labels *u, const char *label, long line)
{
    char q[RT_TABLE_QUOTE_MAX];
    rt_table_quote(q, sizeof q, label);
    for (size_t i = 0; i < u->n; i++)
        if (strcmp(u->label[i], q) == 0)
            return;
    if (u->n == UNKNOWN_KEPT_MAX) {
        u->overflow++;
        return;
    }
    memcpy(u->label[u->n], q, sizeof q);
    u->line[u->n] = line;
    u->n++;
}

static rt_status unknown_report(const unknown_labels *u, const char *path, const char *kind,
                                rt_error *err)
{
    char list[700] = "";
    size_t used = 0;
    for (size_t i = 0; i < u->n && i < UNKNOWN_LISTED_MAX; i++) {
        int w = snprintf(list + used, sizeof list - used, "%s\"%s\" (line %ld)", i ? ", " : "",
                         u->label[i], u->line[i]);
        if (w < 0 || (size_t)w >= sizeof list - used) {
            used = strlen(list);
            break;
        }
        used += (size_t)w;
    }
    size_t more = u->n + u->overflow - (u->n < UNKNOWN_LISTED_MAX ? u->n : UNKNOWN_LISTED_MAX);
    char tail[64] = "";
    if (more)
        snprintf(tail, sizeof tail, " and %zu more", more);
    return rt_fail(err, RT_ERR_STAGING,
                   "%s: %zu unknown %s label%s: %s%s; give a label map (CSV label,meaning) that "
                   "says what they mean, or `ignore`", path, u->n + u->overflow, kind,
                   u->n + u->overflow == 1 ? "" : "s", list, tail);
}

/* ---- stage table ---- */

typedef struct stage_rows {
    rt_timeline *scratch;
    const rt_labelmap *map;
    unknown_labels *unknown;
    size_t used; /* rows not ignored */
} stage_rows;

static void on_stage_row(rt_table *r, char **v)
{
    stage_rows *s = r->user;
    double start_s, duration_s;
    if (!rt_table_number(r, v[0], "start_s", &start_s) || !rt_table_number(r, v[1], "duration_s", &duration_s))
        return;
    const char *label = v[2];
    if (label[0] == '\0') {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING, "%s line %ld: empty stage label",
                                      r->path, r->row_line));
        return;
    }
    if (rt_label_is_ignored(label, s->map))
        return;
    rt_stage stage = RT_STAGE_UNSCORED;
    if (!rt_stage_parse(label, s->map, &stage))
        unknown_add(s->unknown, label, r->row_line); /* still checked for time order below */
    s->used++;
    rt_table_fail(r, rt_timeline_add_stage_run(s->scratch, start_s, duration_s, stage,
                                                    r->path, r->row_line, &r->error));
}

/* ---- event table ---- */

static void on_event_row(rt_table *r, char **v)
{
    stage_rows *s = r->user;
    double start_s, duration_s;
    if (!rt_table_number(r, v[0], "start_s", &start_s) || !rt_table_number(r, v[1], "duration_s", &duration_s))
        return;
    const char *label = v[2];
    if (label[0] == '\0') {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING, "%s line %ld: empty event type",
                                      r->path, r->row_line));
        return;
    }
    if (duration_s <= 0.0) {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                      "%s line %ld: duration %.10g s is not positive", r->path,
                                      r->row_line, duration_s));
        return;
    }
    if (rt_label_is_ignored(label, s->map))
        return;
    rt_event_type type;
    if (!rt_event_parse(label, s->map, &type)) {
        unknown_add(s->unknown, label, r->row_line);
        if (start_s < 0.0)
            rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                          "%s line %ld: start %.10g s is negative", r->path,
                                          r->row_line, start_s));
        return;
    }
    s->used++;
    rt_table_fail(r, rt_timeline_add_event(s->scratch, start_s, duration_s, type, r->path,
                                                r->row_line, &r->error));
}

/* The shared path of both tables: rows into a scratch timeline, unknown
 * labels all listed, then an all-or-nothing merge. With is_staging, an
 * empty table (or one whose every label is ignored) is an error. */
static rt_status load_table(rt_timeline *tl, const char *path, const rt_labelmap *map,
                            bool is_staging, rt_error *err)
{
    rt_timeline *scratch = NULL;
    rt_status st = rt_timeline_new(&scratch, err);
    if (st != RT_OK)
        return st;
    unknown_labels *unknown = rt_calloc(1, sizeof *unknown);
    if (!unknown) {
        rt_timeline_free(scratch);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    }
    scratch->epoch_s = tl->epoch_s;
    stage_rows rows = {scratch, map, unknown, 0};
    rt_table r = {.path = path, .what = is_staging ? "stage table" : "event table",
                  .columns = {"start_s", "duration_s", is_staging ? "stage" : "type"},
                  .n_columns = 3, .on_row = is_staging ? on_stage_row : on_event_row,
                  .user = &rows};
    st = rt_table_read(&r, err);
    if (st == RT_OK && unknown->n > 0)
        st = unknown_report(unknown, path, is_staging ? "stage" : "event", err);
    if (st == RT_OK && is_staging && r.n_rows == 0)
        st = rt_fail(err, RT_ERR_STAGING, "%s: the staging is empty: no rows after the header",
                     path);
    if (st == RT_OK && is_staging && rows.used == 0)
        st = rt_fail(err, RT_ERR_STAGING,
                     "%s: the staging is empty: all %zu rows have labels the map says to ignore",
                     path, r.n_rows);
    if (st == RT_OK)
        st = rt_timeline_merge(tl, scratch, err);
    free(unknown);
    rt_timeline_free(scratch);
    return st;
}

rt_status rt_timeline_load_stages_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_stages_csv: NULL argument");
    if (rt_timeline_has_stage_runs(tl))
        return rt_fail(err, RT_ERR_STAGING, "%s: stages are already loaded from another source",
                       path);
    return load_table(tl, path, map, true, err);
}

rt_status rt_timeline_load_events_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_events_csv: NULL argument");
    return load_table(tl, path, map, false, err);
}

/* ---- label map ---- */

static void on_map_row(rt_table *r, char **v)
{
    rt_labelmap *map = r->user;
    rt_error local;
    rt_status st = rt_labelmap_add(map, v[0], v[1], &local);
    if (st != RT_OK)
        rt_table_fail(r, rt_fail(&r->error, st, "%s line %ld: %s", r->path, r->row_line,
                                      local.message));
}

rt_status rt_labelmap_load(const char *path, rt_labelmap **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_labelmap_load: no place for the result");
    *out = NULL;
    if (!path)
        return rt_fail(err, RT_ERR_USAGE, "rt_labelmap_load: NULL path");
    rt_labelmap *map = NULL;
    rt_status st = rt_labelmap_new(&map, err);
    if (st != RT_OK)
        return st;
    rt_table r = {.path = path, .what = "label map", .columns = {"label", "meaning"},
                      .n_columns = 2, .on_row = on_map_row, .user = map};
    st = rt_table_read(&r, err);
    if (st != RT_OK) {
        rt_labelmap_free(map);
        return st;
    }
    *out = map;
    return RT_OK;
}
