/* Subjects seen on several nights: the manifest's optional `subject` and
 * `visit` columns group a cohort's nights by person. Per subject: the nights
 * in visit order, each index's mean, range and largest change from one
 * night to the next, and whether the review flag agrees across the nights
 * (subjects.csv and a line each on the cohort page). For calibration on
 * subjects (--per-subject), each subject becomes one row holding its mean
 * values, so a person scored on three nights is counted once. */
#include "cohort_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "text.h"

/* Rows with a subject, by subject, then visit, then id. */
static int by_subject(const void *a, const void *b)
{
    const cohort_row *x = *(const cohort_row *const *)a, *y = *(const cohort_row *const *)b;
    int c = strcmp(x->subject, y->subject);
    if (c == 0)
        c = strcmp(x->visit, y->visit);
    return c ? c : strcmp(x->id, y->id);
}

static void summarise(cohort_subject *s, const cohort_row *rows, const size_t *order)
{
    const cohort_row *first = &rows[order[s->first]];
    rt_copy_string(s->name, sizeof s->name, first->subject);
    rt_copy_string(s->group, sizeof s->group, first->group);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        double sum = 0, prev = NAN, sum_automatic = 0;
        size_t n = 0, n_automatic = 0;
        s->min[i] = s->max[i] = s->mean[i] = s->change[i] = NAN;
        for (size_t k = 0; k < s->n; k++) {
            const cohort_row *r = &rows[order[s->first + k]];
            if (i == 0) {
                s->mixed_group |= strcmp(r->group, s->group) != 0;
                s->scored += !r->failed;
                s->flagged += !r->failed && r->flagged;
            }
            double a = r->failed ? NAN : r->automatic[i];
            if (isfinite(a)) {
                sum_automatic += a;
                n_automatic++;
            }
            double v = r->failed ? NAN : r->value[i];
            if (!isfinite(v))
                continue;
            sum += v;
            n++;
            s->min[i] = n == 1 ? v : fmin(s->min[i], v);
            s->max[i] = n == 1 ? v : fmax(s->max[i], v);
            if (isfinite(prev)) /* the next night with a value, in visit order */
                s->change[i] = isfinite(s->change[i]) ? fmax(s->change[i], fabs(v - prev))
                                                      : fabs(v - prev);
            prev = v;
        }
        s->mean[i] = n ? sum / (double)n : NAN;
        s->mean_automatic[i] = n_automatic ? sum_automatic / (double)n_automatic : NAN;
    }
}

rt_status cohort_subjects_build(const cohort_row *rows, size_t n_rows, cohort_subjects *out,
                                rt_error *err)
{
    memset(out, 0, sizeof *out);
    const cohort_row **sorted = rt_calloc(n_rows + 1, sizeof *sorted);
    out->order = rt_calloc(n_rows + 1, sizeof *out->order);
    out->v = rt_calloc(n_rows + 1, sizeof *out->v);
    if (!sorted || !out->order || !out->v) {
        free(sorted);
        cohort_subjects_free(out);
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu subjects", n_rows);
    }
    size_t m = 0;
    for (size_t i = 0; i < n_rows; i++)
        if (rows[i].subject[0])
            sorted[m++] = &rows[i];
    qsort(sorted, m, sizeof *sorted, by_subject);
    for (size_t k = 0; k < m; k++)
        out->order[k] = (size_t)(sorted[k] - rows);
    free(sorted);
    out->n_rows = m;
    for (size_t k = 0; k < m;) {
        cohort_subject *s = &out->v[out->n++];
        s->first = k;
        while (k < m && strcmp(rows[out->order[k]].subject, rows[out->order[s->first]].subject) == 0)
            k++;
        s->n = k - s->first;
        summarise(s, rows, out->order);
    }
    return RT_OK;
}

void cohort_subjects_free(cohort_subjects *s)
{
    free(s->order);
    free(s->v);
    memset(s, 0, sizeof *s);
}

const char *cohort_subject_agreement(const cohort_subject *s)
{
    if (s->scored < 2)
        return "one night";
    return s->flagged == 0 || s->flagged == s->scored ? "agrees" : "differs";
}

rt_status cohort_write_subjects(const char *path, const cohort_subjects *subjects, rt_error *err)
{
    rt_output o;
    rt_status st = rt_output_begin(&o, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = o.file;
    fputs("subject,group,nights,scored,flagged,flag", f);
    static const char *const stats[] = {"mean", "min", "max", "largest_change"};
    for (int i = 0; i < RT_IX_COUNT; i++)
        for (size_t k = 0; k < 4; k++)
            fprintf(f, ",%s_%s", rt_index_rules()[i].id, stats[k]);
    fputc('\n', f);
    int no_memory = 0;
    for (size_t j = 0; j < subjects->n && !no_memory; j++) {
        const cohort_subject *s = &subjects->v[j];
        no_memory |= rt_csv_put_field(f, s->name);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, s->mixed_group ? "(mixed)" : s->group);
        fprintf(f, ",%zu,%zu,%zu,%s", s->n, s->scored, s->flagged, cohort_subject_agreement(s));
        for (int i = 0; i < RT_IX_COUNT; i++) {
            const double v[4] = {s->mean[i], s->min[i], s->max[i], s->change[i]};
            for (size_t k = 0; k < 4; k++) {
                fputc(',', f);
                cohort_put_number(f, v[k]);
            }
        }
        fputc('\n', f);
    }
    return rt_output_finish(&o, no_memory, "the subjects table", err);
}

rt_status cohort_subject_rows(const cohort_row *rows, size_t n_rows,
                              const cohort_subjects *subjects, const char *out_dir,
                              cohort_row **out, size_t *n_out, rt_error *err)
{
    *out = NULL;
    *n_out = 0;
    for (size_t j = 0; j < subjects->n; j++)
        if (subjects->v[j].mixed_group)
            return rt_fail(err, RT_ERR_STAGING,
                           "%s: subject \"%s\" has nights in more than one group; a calibration "
                           "on subjects needs one group per subject (fix the manifest's group "
                           "or subject column)",
                           out_dir, subjects->v[j].name);
    cohort_row *v = rt_calloc(n_rows + 1, sizeof *v);
    if (!v)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for %zu subjects", n_rows);
    size_t n = 0;
    for (size_t j = 0; j < subjects->n; j++) {
        const cohort_subject *s = &subjects->v[j];
        cohort_row *r = &v[n++];
        rt_copy_string(r->id, sizeof r->id, s->name);
        rt_copy_string(r->group, sizeof r->group, s->group);
        rt_copy_string(r->subject, sizeof r->subject, s->name);
        r->failed = s->scored == 0;
        r->warnings = -1;
        for (int i = 0; i < RT_IX_COUNT; i++) {
            r->value[i] = s->mean[i];
            r->automatic[i] = s->mean_automatic[i];
        }
        /* strata: the age and the sex of the subject's first visit (in visit
         * order) that gives them, whatever later visits say */
        r->age = NAN;
        for (size_t k = 0; k < s->n; k++) {
            const cohort_row *night = &rows[subjects->order[s->first + k]];
            if (isnan(r->age) && isfinite(night->age))
                r->age = night->age;
            if (!r->sex && night->sex)
                r->sex = night->sex;
        }
    }
    /* a night without a subject is a person of its own */
    for (size_t i = 0; i < n_rows; i++)
        if (!rows[i].subject[0]) {
            v[n] = rows[i];
            v[n++].warning_texts = NULL; /* owned by the night rows */
        }
    *out = v;
    *n_out = n;
    return RT_OK;
}
