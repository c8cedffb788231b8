/* ROC analysis of one index against a cohort's labels: the empirical curve,
 * the Mann-Whitney area, its variance by the method of DeLong, DeLong and
 * Clarke-Pearson (1988, Biometrics 44:837-845), and the cutoff that maximises
 * Youden's J (Youden 1950, Cancer 3:32-35). Indices where lower is worse (the
 * REM Atonia Index) are analysed on the negated value, so "more abnormal" is
 * always "larger score" inside this file. */
#include "remtone/cohort.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"

typedef struct scored {
    double s;      /* larger = more abnormal */
    bool pos;
} scored;

static int by_score_desc(const void *a, const void *b)
{
    double x = ((const scored *)a)->s, y = ((const scored *)b)->s;
    return (x < y) - (x > y);
}

/* DeLong's structural components: V10(X_i) is the share of negatives a
 * positive outranks (ties count one half), V01(Y_j) the share of positives
 * that outrank a negative. Their means are the area; their sample variances
 * give var(AUC) = S10/m + S01/n (DeLong et al. 1988, section 2). */
static void delong(const scored *v, size_t n, size_t m_pos, size_t n_neg, double *auc,
                   double *var, double *v10, double *v01)
{
    size_t i_pos = 0;
    memset(v01, 0, n_neg * sizeof *v01);
    for (size_t a = 0; a < n; a++) {
        if (!v[a].pos)
            continue;
        double sum = 0;
        size_t j_neg = 0;
        for (size_t b = 0; b < n; b++) {
            if (v[b].pos)
                continue;
            double psi = v[a].s > v[b].s ? 1.0 : v[a].s == v[b].s ? 0.5 : 0.0;
            sum += psi;
            v01[j_neg++] += psi;
        }
        v10[i_pos++] = sum / (double)n_neg;
    }
    double area = 0;
    for (size_t i = 0; i < m_pos; i++)
        area += v10[i];
    area /= (double)m_pos;
    for (size_t j = 0; j < n_neg; j++)
        v01[j] /= (double)m_pos;
    *auc = area;
    *var = NAN;
    if (m_pos < 2 || n_neg < 2)
        return;
    double s10 = 0, s01 = 0;
    for (size_t i = 0; i < m_pos; i++)
        s10 += (v10[i] - area) * (v10[i] - area);
    for (size_t j = 0; j < n_neg; j++)
        s01 += (v01[j] - area) * (v01[j] - area);
    s10 /= (double)(m_pos - 1);
    s01 /= (double)(n_neg - 1);
    *var = s10 / (double)m_pos + s01 / (double)n_neg;
}

/* Walks the thresholds from strictest to loosest: after the q-th distinct
 * score every night scoring at least that much is called positive. */
static rt_status curve(const scored *v, size_t n, size_t m_pos, size_t n_neg, bool lower_is_worse,
                       rt_roc *out, rt_error *err)
{
    out->fpr = rt_calloc(n + 1, sizeof *out->fpr);
    out->tpr = rt_calloc(n + 1, sizeof *out->tpr);
    if (!out->fpr || !out->tpr)
        return rt_fail(err, RT_ERR_NOMEM, "ROC curve: out of memory");
    size_t tp = 0, fp = 0, k = 0;
    out->fpr[k] = 0;
    out->tpr[k++] = 0;
    for (size_t a = 0; a < n;) {
        size_t b = a;
        for (; b < n && v[b].s == v[a].s; b++) {
            tp += v[b].pos;
            fp += !v[b].pos;
        }
        double sens = (double)tp / (double)m_pos, spec = 1.0 - (double)fp / (double)n_neg;
        out->tpr[k] = sens;
        out->fpr[k++] = 1.0 - spec;
        /* a cutoff exists only between two distinct observed values; the
         * first of equal J wins, i.e. the most specific one; "equal" allows
         * for rounding, as 2/3 + 1 - 1 and 1 + 2/3 - 1 differ in the last bit */
        if (b < n && sens + spec - 1.0 > out->youden_j + 1e-12) {
            double mid = 0.5 * (v[a].s + v[b].s);
            out->youden_j = sens + spec - 1.0;
            out->youden_cutoff = lower_is_worse ? -mid : mid;
            out->youden_sens = sens;
            out->youden_spec = spec;
        }
        a = b;
    }
    out->n_points = k;
    return RT_OK;
}

rt_status rt_roc_compute(const double *values, const bool *positive, size_t n,
                         bool lower_is_worse, rt_roc *out, rt_error *err)
{
    memset(out, 0, sizeof *out);
    out->auc = out->auc_var = out->auc_low = out->auc_high = NAN;
    out->youden_cutoff = out->youden_sens = out->youden_spec = NAN;
    out->youden_j = -INFINITY;
    scored *v = rt_calloc(n ? n : 1, sizeof *v);
    if (!v)
        return rt_fail(err, RT_ERR_NOMEM, "ROC: out of memory");
    size_t k = 0;
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(values[i]))
            continue;
        v[k].s = lower_is_worse ? -values[i] : values[i];
        v[k].pos = positive[i];
        out->n_pos += positive[i];
        out->n_neg += !positive[i];
        k++;
    }
    rt_status st = RT_OK;
    if (out->n_pos > 0 && out->n_neg > 0) {
        qsort(v, k, sizeof *v, by_score_desc);
        double *v10 = rt_calloc(out->n_pos, sizeof *v10);
        double *v01 = rt_calloc(out->n_neg, sizeof *v01);
        if (!v10 || !v01) {
            st = rt_fail(err, RT_ERR_NOMEM, "ROC: out of memory");
        } else {
            delong(v, k, out->n_pos, out->n_neg, &out->auc, &out->auc_var, v10, v01);
            if (isfinite(out->auc_var)) {
                double half = 1.959963985 * sqrt(out->auc_var);
                out->auc_low = fmax(0.0, out->auc - half);
                out->auc_high = fmin(1.0, out->auc + half);
            }
            st = curve(v, k, out->n_pos, out->n_neg, lower_is_worse, out, err);
        }
        free(v10);
        free(v01);
    }
    if (!isfinite(out->youden_j))
        out->youden_j = NAN;
    /* a threshold no better than chance (J <= 0: the groups overlap, or the
     * positives score lower) is no cutoff to offer; J itself is kept */
    if (!(out->youden_j > 1e-12))
        out->youden_cutoff = out->youden_sens = out->youden_spec = NAN;
    free(v);
    if (st != RT_OK)
        rt_roc_free(out);
    return st;
}

void rt_roc_free(rt_roc *roc)
{
    if (!roc)
        return;
    free(roc->fpr);
    free(roc->tpr);
    roc->fpr = roc->tpr = NULL;
    roc->n_points = 0;
}

void rt_roc_at_cutoff(const double *values, const bool *positive, size_t n, bool lower_is_worse,
                      double cutoff, double *sensitivity, double *specificity)
{
    size_t tp = 0, np = 0, tn = 0, nn = 0;
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(values[i]))
            continue;
        bool called = lower_is_worse ? values[i] < cutoff : values[i] >= cutoff;
        if (positive[i]) {
            np++;
            tp += called;
        } else {
            nn++;
            tn += !called;
        }
    }
    *sensitivity = np && isfinite(cutoff) ? (double)tp / (double)np : NAN;
    *specificity = nn && isfinite(cutoff) ? (double)tn / (double)nn : NAN;
}
