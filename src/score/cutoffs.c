/* A lab's own cutoffs: CSV `index,cutoff,unit[,normal_from]`, read with the
 * shared table reader; indices the file does not list keep their published
 * cutoff. Every row states its unit so that a share (0.3) cannot pass for a
 * percentage (30 %); each loaded cutoff remembers its line, which is its
 * source in every report (docs/scoring.md, "A lab's own cutoffs"). */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"
#include "remtone/score.h"
#include "lab_rows.h"
#include "table.h"

typedef struct cutoff_rows {
    rt_cutoffs next;
    bool seen[RT_IX_COUNT];
} cutoff_rows;

double rt_lab_unit_max(const char *unit)
{
    return strcmp(unit, "%") == 0 ? 100.0 : strcmp(unit, "ratio") == 0 ? 1.0 : 1e6;
}

const rt_index_rule *rt_lab_row_check(rt_table *t, const char *id_text, int unit_col,
                                      const char *unit_text, const char *value_text,
                                      const char *value_name, const char *example,
                                      rt_index_id *id, double *value)
{
    char q[RT_TABLE_QUOTE_MAX];
    const rt_index_rule *rule = rt_index_rule_find(id_text, id);
    if (!rule) {
        rt_table_quote(q, sizeof q, id_text);
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: \"%s\" is not an index id (remtone rules lists them)",
                                 t->path, t->row_line, q));
        return NULL;
    }
    if (t->column_index[unit_col] < 0) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: the %s has no \"unit\" column; each row must state "
                                 "its unit (%% for percentages, ratio for the REM Atonia Index, /h "
                                 "for rates): add it, for example %s", t->path, t->header_line,
                                 t->what, example));
        return NULL;
    }
    if (strcmp(unit_text, rule->unit) != 0) {
        rt_table_quote(q, sizeof q, unit_text);
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: unit \"%s\" does not fit %s, which is counted in "
                                 "\"%s\"%s", t->path, t->row_line, q, id_text, rule->unit,
                                 strcmp(rule->unit, "%") == 0
                                     ? " (a share of 0.3 is written 30 with unit %)" : ""));
        return NULL;
    }
    if (!rt_table_number(t, value_text, value_name, value))
        return NULL;
    double hi = rt_lab_unit_max(rule->unit);
    if (*value < 0.0 || *value > hi) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: %s %g for %s is outside 0 .. %g", t->path,
                                 t->row_line, value_name, *value, id_text, hi));
        return NULL;
    }
    return rule;
}

static void on_cutoff_row(rt_table *t, char **v)
{
    cutoff_rows *rows = t->user;
    rt_index_id id;
    double cutoff;
    const rt_index_rule *rule =
        rt_lab_row_check(t, v[0], 3, v[3], v[1], "cutoff",
                         "\"index,cutoff,unit\" and \"sinbar.chin_any_3s,18.2,%\"", &id, &cutoff);
    if (!rule)
        return;
    if (rows->seen[id]) {
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING, "%s line %ld: %s is listed twice",
                                 t->path, t->row_line, v[0]));
        return;
    }
    rows->seen[id] = true;
    double hi = rt_lab_unit_max(rule->unit);
    rows->next.has[id] = true;
    rows->next.value[id] = cutoff;
    rows->next.line[id] = t->row_line;
    if (v[2][0] != '\0') {
        double normal;
        if (!rt_table_number(t, v[2], "normal_from", &normal))
            return;
        if (!rule->lower_is_worse || normal < cutoff || normal > hi) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                     "%s line %ld: normal_from applies only to the REM Atonia "
                                     "Index and must lie between its cutoff and %g", t->path,
                                     t->row_line, hi));
            return;
        }
        rows->next.normal_from[id] = normal;
    } else if (rule->lower_is_worse && rows->next.normal_from[id] < cutoff) {
        rows->next.normal_from[id] = cutoff; /* no intermediate band below the new cutoff */
    }
}

rt_status rt_cutoffs_load(rt_cutoffs *cutoffs, const char *path, rt_error *err)
{
    cutoff_rows rows;
    memset(&rows, 0, sizeof rows);
    rows.next = *cutoffs;
    rt_table t;
    memset(&t, 0, sizeof t);
    t.path = path;
    t.what = "cutoff file";
    t.columns[0] = "index";
    t.columns[1] = "cutoff";
    t.columns[2] = "normal_from";
    t.optional[2] = true;
    t.columns[3] = "unit";
    t.optional[3] = true; /* absent: refused with its own message (on_cutoff_row) */
    t.n_columns = 4;
    t.on_row = on_cutoff_row;
    t.user = &rows;
    rt_status st = rt_table_read(&t, err);
    if (st != RT_OK)
        return st;
    if (t.n_rows == 0)
        return rt_fail(err, RT_ERR_STAGING, "%s: the cutoff file lists no index", path);
    snprintf(rows.next.origin, sizeof rows.next.origin, "%s", path);
    *cutoffs = rows.next;
    return RT_OK;
}

bool rt_cutoff_is_lab(const rt_cutoffs *cutoffs, int i)
{
    return i >= 0 && i < RT_IX_COUNT && cutoffs->line[i] > 0;
}

void rt_cutoff_source(const rt_cutoffs *cutoffs, int i, char *buf, size_t cap)
{
    if (rt_cutoff_is_lab(cutoffs, i))
        snprintf(buf, cap, "%s line %ld", cutoffs->origin, cutoffs->line[i]);
    else if (i >= 0 && i < RT_IX_COUNT)
        snprintf(buf, cap, "%s", rt_index_rules()[i].source);
    else
        snprintf(buf, cap, "unknown");
}
