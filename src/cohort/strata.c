/* Calibration per stratum: the nights (or subjects) of each sex, or of each
 * age band, calibrated apart besides the whole cohort, so that a cutoff
 * fitted on a mixed cohort can be compared with one fitted on a single sex
 * or age band. Rows without the
 * manifest's sex or age form an "unknown" stratum: counted, never
 * calibrated. Each stratum gets the whole-cohort rule: no cutoff when a
 * group has no scored row in it. */
#include "cohort_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "text.h"

bool cohort_in_stratum(const cohort_stratum *s, const cohort_row *row)
{
    if (strcmp(s->sum.by, "sex") == 0)
        return s->sum.unknown ? row->sex == 0 : row->sex == s->sex;
    if (!isfinite(row->age))
        return s->sum.unknown;
    return !s->sum.unknown && row->age >= s->age_lo && row->age < s->age_hi;
}

rt_status cohort_check_age_edges(const rt_cohort_options *o, rt_error *err)
{
    if (o->n_age_edges > RT_COHORT_AGE_EDGES_MAX)
        return rt_fail(err, RT_ERR_USAGE, "cohort: %zu age band edges, at most %d",
                       o->n_age_edges, RT_COHORT_AGE_EDGES_MAX);
    for (size_t k = 0; k < o->n_age_edges; k++) {
        int e = o->age_edges[k];
        if (e < 1 || e > 130)
            return rt_fail(err, RT_ERR_USAGE, "cohort: age band edge %d (number %zu) is not "
                           "1 to 130 years", e, k + 1);
        if (k > 0 && e <= o->age_edges[k - 1])
            return rt_fail(err, RT_ERR_USAGE, "cohort: age band edges must ascend: %d after %d",
                           e, o->age_edges[k - 1]);
    }
    return RT_OK;
}

static cohort_stratum *add(cohort_strata *out, const char *by, bool unknown)
{
    cohort_stratum *s = &out->v[out->n++];
    memset(s, 0, sizeof *s);
    rt_copy_string(s->sum.by, sizeof s->sum.by, by);
    rt_copy_string(s->sum.name, sizeof s->sum.name, "unknown");
    s->sum.unknown = unknown;
    s->age_lo = -INFINITY;
    s->age_hi = INFINITY;
    return s;
}

/* The age bands of the edges: "<50" (file part age-under-50), "50-64"
 * (age-50-64), ">=65" (age-65-plus); whole years, so band [50, 65) holds
 * 64.9 and reads 50-64. */
static void age_bands(const rt_cohort_options *o, cohort_strata *out)
{
    size_t n = o->n_age_edges;
    for (size_t k = 0; k <= n; k++) {
        cohort_stratum *s = add(out, "age", false);
        if (k > 0)
            s->age_lo = o->age_edges[k - 1];
        if (k < n)
            s->age_hi = o->age_edges[k];
        if (k == 0) {
            snprintf(s->sum.name, sizeof s->sum.name, "<%d", o->age_edges[0]);
            snprintf(s->tag, sizeof s->tag, "age-under-%d", o->age_edges[0]);
        } else if (k == n) {
            snprintf(s->sum.name, sizeof s->sum.name, ">=%d", o->age_edges[n - 1]);
            snprintf(s->tag, sizeof s->tag, "age-%d-plus", o->age_edges[n - 1]);
        } else {
            snprintf(s->sum.name, sizeof s->sum.name, "%d-%d", o->age_edges[k - 1],
                     o->age_edges[k] - 1);
            snprintf(s->tag, sizeof s->tag, "age-%d-%d", o->age_edges[k - 1], o->age_edges[k] - 1);
        }
    }
    add(out, "age", true);
}

rt_status cohort_stratify(const cohort_row *rows, size_t n_rows, const rt_cohort_options *o,
                          const cohort_calibration *overall, cohort_strata *out, rt_error *err)
{
    memset(out, 0, sizeof *out);
    if (!overall->computed || (!o->by_sex && o->n_age_edges == 0))
        return RT_OK;
    out->v = rt_calloc(RT_COHORT_STRATA_MAX, sizeof *out->v);
    if (!out->v)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the strata");
    if (o->by_sex) {
        static const char SEXES[2] = {'F', 'M'};
        for (int k = 0; k < 2; k++) {
            cohort_stratum *s = add(out, "sex", false);
            s->sex = SEXES[k];
            snprintf(s->sum.name, sizeof s->sum.name, "%c", SEXES[k]);
            snprintf(s->tag, sizeof s->tag, "sex-%c", SEXES[k]);
        }
        add(out, "sex", true);
    }
    if (o->n_age_edges > 0)
        age_bands(o, out);
    rt_status st = RT_OK;
    for (size_t k = 0; k < out->n && st == RT_OK; k++) {
        cohort_stratum *s = &out->v[k];
        memcpy(s->cal.published, overall->published, sizeof s->cal.published);
        memcpy(s->cal.in_force, overall->in_force, sizeof s->cal.in_force);
        s->cal.computed = true;
        st = cohort_calibrate(rows, n_rows, o, s, &s->cal, err);
        s->sum.positives = s->cal.positives;
        s->sum.negatives = s->cal.negatives;
        if (s->sum.unknown) /* counted, not calibrated */
            for (int i = 0; i < RT_IX_COUNT; i++) {
                rt_roc *c = &s->cal.roc[i];
                rt_roc_free(c);
                c->auc = c->auc_var = c->auc_low = c->auc_high = NAN;
                c->youden_cutoff = c->youden_j = c->youden_sens = c->youden_spec = NAN;
                s->cal.sens_published[i] = s->cal.spec_published[i] = NAN;
                s->cal.sens_in_force[i] = s->cal.spec_in_force[i] = NAN;
            }
    }
    if (st != RT_OK)
        cohort_strata_free(out);
    return st;
}

void cohort_strata_free(cohort_strata *s)
{
    for (size_t k = 0; s->v && k < s->n; k++)
        for (int i = 0; i < RT_IX_COUNT; i++)
            rt_roc_free(&s->v[k].cal.roc[i]);
    free(s->v);
    memset(s, 0, sizeof *s);
}

void cohort_stratum_note(const cohort_stratum *s, int ix, const rt_cohort_options *o, char *dst,
                         size_t cap)
{
    const rt_roc *c = &s->cal.roc[ix];
    const char *unit = o->per_subject ? "subject" : "night";
    if (s->sum.unknown)
        snprintf(dst, cap, "left out: no %s given", s->sum.by);
    else if (c->n_pos == 0 && c->n_neg == 0)
        snprintf(dst, cap, "no cutoff: no \"%s\" or \"%s\" %s with a value", o->positive,
                 o->negative, unit);
    else if (c->n_pos == 0 || c->n_neg == 0)
        snprintf(dst, cap, "no cutoff: no \"%s\" %s with a value",
                 c->n_pos == 0 ? o->positive : o->negative, unit);
    else if (!isfinite(c->youden_cutoff))
        snprintf(dst, cap, "no cutoff: no threshold better than chance");
    else
        dst[0] = '\0';
}

/* One index row of calibration-strata.csv. */
static void strata_row(FILE *f, const char *by, const char *name, const cohort_calibration *cal,
                       int i, const char *file)
{
    const rt_roc *c = &cal->roc[i];
    fprintf(f, "%s,%s,%s,%zu,%zu", by, name, rt_index_rules()[i].id, c->n_pos, c->n_neg);
    const double cols[] = {c->auc,         c->auc_low,         c->auc_high,
                           c->youden_cutoff, c->youden_j,      c->youden_sens,
                           c->youden_spec, cal->sens_published[i], cal->spec_published[i]};
    for (size_t k = 0; k < sizeof cols / sizeof cols[0]; k++) {
        fputc(',', f);
        cohort_put_number(f, cols[k]);
    }
    fprintf(f, ",%s,", isfinite(c->youden_cutoff) ? file : "");
}

rt_status cohort_write_strata(const char *path, const cohort_calibration *overall,
                              const cohort_strata *strata, const rt_cohort_options *o,
                              rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = out.file;
    fputs("by,stratum,index,n_positive,n_negative,auc,auc_low,auc_high,youden_cutoff,youden_j,"
          "sensitivity_at_youden,specificity_at_youden,sensitivity_at_published,"
          "specificity_at_published,cutoff_file,note\n", f);
    int no_memory = 0;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        strata_row(f, "all", "all", overall, i, "calibrated-cutoffs.csv");
        fputc('\n', f);
    }
    for (size_t k = 0; k < strata->n && !no_memory; k++) {
        const cohort_stratum *s = &strata->v[k];
        for (int i = 0; i < RT_IX_COUNT && !no_memory; i++) {
            char note[200];
            cohort_stratum_note(s, i, o, note, sizeof note);
            strata_row(f, s->sum.by, s->sum.name, &s->cal, i, s->sum.cutoffs_file);
            /* the group names come from the manifest */
            no_memory |= rt_csv_put_field(f, note);
            fputc('\n', f);
        }
    }
    return rt_output_finish(&out, no_memory, "the strata table", err);
}
