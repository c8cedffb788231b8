/* A lab's own normative values (docs/scoring.md, "Norms"): a CSV of one row
 * per index, sex, age band and percentile, read with the shared table
 * reader and checked with the cutoff file's index and unit checks
 * (lab_rows.h). remtone holds no age- and sex-specific table of its own: the
 * published one could not be read, and no number is recalled into it, so a
 * lab that has such values supplies them here, each row with its source.
 *
 * The choice of a row is common practice for normative tables: the band that
 * holds the person's age, the person's own sex before a row for either sex,
 * and the outermost percentile the stratum gives. */
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "lab_rows.h"
#include "remtone/score.h"
#include "table.h"

typedef struct norm_row {
    rt_index_id index;
    char sex;                 /* 'F', 'M', 0: any */
    double age_from, age_to;  /* [from, to) years */
    double percentile;
    double value;
    long line;
    char source[sizeof ((rt_norm_stratum *)0)->source];
    char method[sizeof ((rt_norm_stratum *)0)->method];
} norm_row;

struct rt_norms {
    char path[512];
    size_t n, cap;
    norm_row *rows;
};

enum { C_INDEX = 0, C_SEX, C_FROM, C_TO, C_PCT, C_VALUE, C_UNIT, C_SOURCE, C_METHOD, C_COUNT };

static bool fail_row(rt_table *t, const char *fmt, ...) RT_PRINTF(2, 3);
static bool fail_row(rt_table *t, const char *fmt, ...)
{
    char what[300];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING, "%s line %ld: %s", t->path, t->row_line,
                             what));
    return false;
}

/* A free-text field: one line of at most cap - 1 bytes (the reader has made
 * sure it is UTF-8). */
static bool copy_text(rt_table *t, char *dst, size_t cap, const char *src, const char *name)
{
    if (strlen(src) >= cap)
        return fail_row(t, "%s is longer than %zu bytes", name, cap - 1);
    for (const char *c = src; *c; c++)
        if ((unsigned char)*c < 0x20 || *c == 0x7f)
            return fail_row(t, "%s must be one line of text without control characters", name);
    rt_copy_string(dst, cap, src);
    return true;
}

static bool parse_sex(rt_table *t, const char *v, char *sex)
{
    if (rt_equal_nocase(v, "any"))
        *sex = 0;
    else if (rt_equal_nocase(v, "F"))
        *sex = 'F';
    else if (rt_equal_nocase(v, "M"))
        *sex = 'M';
    else {
        char q[RT_TABLE_QUOTE_MAX];
        rt_table_quote(q, sizeof q, v);
        return fail_row(t, "sex \"%s\" is not F, M or any", q);
    }
    return true;
}

static const char *sex_name(char sex)
{
    return sex == 'F' ? "F" : sex == 'M' ? "M" : "any";
}

static void on_norm_row(rt_table *t, char **v)
{
    rt_norms *norms = t->user;
    if (t->status != RT_OK)
        return;
    norm_row r;
    memset(&r, 0, sizeof r);
    r.line = t->row_line;
    const rt_index_rule *rule =
        rt_lab_row_check(t, v[C_INDEX], C_UNIT, v[C_UNIT], v[C_VALUE], "value",
                         "\"index,sex,age_from,age_to,percentile,value,unit,source\"", &r.index,
                         &r.value);
    if (!rule || !parse_sex(t, v[C_SEX], &r.sex) ||
        !rt_table_number(t, v[C_FROM], "age_from", &r.age_from) ||
        !rt_table_number(t, v[C_TO], "age_to", &r.age_to) ||
        !rt_table_number(t, v[C_PCT], "percentile", &r.percentile))
        return;
    if (!(r.age_from >= 0 && r.age_from < r.age_to && r.age_to <= 150)) {
        fail_row(t, "the age band must hold 0 <= age_from < age_to <= 150 years (age_to is "
                    "the first age outside the band)");
        return;
    }
    /* a normal limit lies on the side of the index that is further from atonia */
    if (rule->lower_is_worse ? !(r.percentile > 0 && r.percentile < 50)
                             : !(r.percentile > 50 && r.percentile < 100)) {
        fail_row(t, rule->lower_is_worse
                        ? "percentile must be between 0 and 50 for %s, where lower is further "
                          "from atonia (a low limit such as the 5th)"
                        : "percentile must be between 50 and 100 for %s (an upper limit such as "
                          "the 95th)", v[C_INDEX]);
        return;
    }
    if (!v[C_SOURCE][0]) {
        fail_row(t, "the source is empty: say where the values come from (a publication, or "
                    "the lab's own reference group)");
        return;
    }
    if (!copy_text(t, r.source, sizeof r.source, v[C_SOURCE], "source") ||
        !copy_text(t, r.method, sizeof r.method, v[C_METHOD], "method"))
        return;
    for (size_t k = 0; k < norms->n; k++) {
        const norm_row *o = &norms->rows[k];
        if (o->index == r.index && o->sex == r.sex && o->percentile == r.percentile &&
            r.age_from < o->age_to && o->age_from < r.age_to) {
            fail_row(t, "%s, sex %s, percentile %g: ages %g to under %g overlap ages %g to "
                     "under %g of line %ld", v[C_INDEX], sex_name(r.sex), r.percentile,
                     r.age_from, r.age_to, o->age_from, o->age_to, o->line);
            return;
        }
    }
    if (norms->n == norms->cap) {
        size_t cap = norms->cap ? 2 * norms->cap : 16;
        norm_row *grown = realloc(norms->rows, cap * sizeof *grown);
        if (!grown) {
            rt_table_fail(t, rt_fail(&t->error, RT_ERR_NOMEM, "%s: out of memory", t->path));
            return;
        }
        norms->rows = grown;
        norms->cap = cap;
    }
    norms->rows[norms->n++] = r;
}

rt_status rt_norms_load(const char *path, rt_norms **out, rt_error *err)
{
    if (!out || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_norms_load: a path and a place for the result are "
                                          "needed");
    *out = NULL;
    rt_norms *norms = rt_calloc(1, sizeof *norms);
    if (!norms)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    rt_copy_string(norms->path, sizeof norms->path, path);
    static const char *const COLUMNS[C_COUNT] = {"index", "sex", "age_from", "age_to",
                                                 "percentile", "value", "unit", "source",
                                                 "method"};
    rt_table t;
    memset(&t, 0, sizeof t);
    t.path = path;
    t.what = "norms file";
    t.leading_comments = true; /* "# invented numbers for the demo only" */
    for (int k = 0; k < C_COUNT; k++)
        t.columns[k] = COLUMNS[k];
    t.optional[C_UNIT] = true; /* absent: refused with its own message (rt_lab_row_check) */
    t.optional[C_METHOD] = true;
    t.n_columns = C_COUNT;
    t.on_row = on_norm_row;
    t.user = norms;
    rt_status st = rt_table_read(&t, err);
    if (st == RT_OK && norms->n == 0)
        st = rt_fail(err, RT_ERR_STAGING, "%s: the norms file lists no index", path);
    if (st != RT_OK) {
        rt_norms_free(norms);
        return st;
    }
    *out = norms;
    return RT_OK;
}

void rt_norms_free(rt_norms *norms)
{
    if (!norms)
        return;
    free(norms->rows);
    free(norms);
}

const char *rt_norms_path(const rt_norms *norms)
{
    return norms ? norms->path : "";
}

/* "women aged 60-69" for a band of whole years, "men aged 60.5 to under 70" otherwise. */
static void who_words(const norm_row *r, char *buf, size_t cap)
{
    const char *who = r->sex == 'F' ? "women" : r->sex == 'M' ? "men" : "women and men";
    if (r->age_from == floor(r->age_from) && r->age_to == floor(r->age_to))
        snprintf(buf, cap, "%s aged %g-%g", who, r->age_from, r->age_to - 1);
    else
        snprintf(buf, cap, "%s aged %g to under %g", who, r->age_from, r->age_to);
}

/* "95th", "97.5th", "1st", "2nd", "3rd", "12th". */
static void ordinal(double p, char *buf, size_t cap)
{
    long whole = (long)p;
    const char *suffix = "th";
    if ((double)whole == p && (whole % 100 < 11 || whole % 100 > 13))
        suffix = whole % 10 == 1 ? "st" : whole % 10 == 2 ? "nd" : whole % 10 == 3 ? "rd" : "th";
    snprintf(buf, cap, "%g%s", p, suffix);
}

static void fill(const rt_norms *norms, const norm_row *r, rt_norm_stratum *out)
{
    memset(out, 0, sizeof *out);
    out->line = r->line;
    out->sex = r->sex;
    out->age_from = r->age_from;
    out->age_to = r->age_to;
    out->percentile = r->percentile;
    out->value = r->value;
    who_words(r, out->who, sizeof out->who);
    char pct[16], value[24];
    ordinal(r->percentile, pct, sizeof pct);
    const char *unit = rt_index_rules()[r->index].unit;
    snprintf(value, sizeof value, strcmp(unit, "%") == 0 ? "%g %%" : strcmp(unit, "ratio") == 0
                                                                     ? "%g" : "%g/h", r->value);
    const char *slash = strrchr(norms->path, '/');
    snprintf(out->label, sizeof out->label, "%s percentile (%s) of %s, lab file %.60s line %ld", pct,
             value, out->who, slash ? slash + 1 : norms->path, r->line);
    rt_copy_string(out->source, sizeof out->source, r->source);
    rt_copy_string(out->method, sizeof out->method, r->method);
}

size_t rt_norms_count(const rt_norms *norms)
{
    return norms ? norms->n : 0;
}

bool rt_norms_row(const rt_norms *norms, size_t k, rt_index_id *index, rt_norm_stratum *out)
{
    if (!norms || k >= norms->n)
        return false;
    if (index)
        *index = norms->rows[k].index;
    fill(norms, &norms->rows[k], out);
    return true;
}

int rt_norms_choose(const rt_norms *norms, rt_index_id i, double age_years, char sex,
                    rt_norm_stratum *out, char *why, size_t why_cap)
{
    if (why_cap)
        why[0] = '\0';
    const norm_row *best = NULL;
    bool listed = false, sex_listed = false;
    double lo = INFINITY, hi = -INFINITY; /* the ages the rows of this sex cover */
    bool lower_worse = rt_index_rules()[i].lower_is_worse;
    for (size_t k = 0; norms && k < norms->n; k++) {
        const norm_row *r = &norms->rows[k];
        if (r->index != i)
            continue;
        listed = true;
        if (r->sex != 0 && r->sex != sex)
            continue;
        sex_listed = true;
        lo = fmin(lo, r->age_from);
        hi = fmax(hi, r->age_to);
        if (isnan(age_years) || age_years < r->age_from || age_years >= r->age_to)
            continue;
        /* the person's own sex first; then the outermost percentile */
        if (!best || (r->sex != 0 && best->sex == 0) ||
            (r->sex == best->sex && (lower_worse ? r->percentile < best->percentile
                                                 : r->percentile > best->percentile)))
            best = r;
    }
    if (!listed)
        return -1;
    if (best) {
        fill(norms, best, out);
        return 1;
    }
    const char *who = sex == 'F' ? "women" : sex == 'M' ? "men" : "a person whose sex is not given";
    if (!sex_listed)
        snprintf(why, why_cap, "no row of the norms file is for %s%s", who,
                 sex ? "" : " (its rows are for women or men only)");
    else if (isnan(age_years))
        snprintf(why, why_cap, "no age given; the norms file's rows are by age");
    else
        snprintf(why, why_cap, "age %g is outside every band of the norms file for %s (%g to "
                 "under %g)", age_years, sex ? who : "either sex", lo, hi);
    return 0;
}
