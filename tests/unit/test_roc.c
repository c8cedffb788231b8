/* ROC analysis (src/cohort/roc.c): the Mann-Whitney area against a published
 * worked example and hand computations, DeLong's variance against a hand
 * computation and a numpy re-implementation, and the Youden cutoff on cases
 * with a known answer. */
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/cohort.h"
#include "support.h"

/* Hanley & McNeil 1982, Radiology 143:29-36, Table 1 (from memory): 109 CT
 * images rated 1 (definitely normal) .. 5 (definitely abnormal); 58 truly
 * normal rated 33, 6, 6, 11, 2 and 51 truly abnormal rated 3, 2, 2, 11, 33.
 * Their Wilcoxon area is 0.893 with a standard error of 0.032 (their
 * exponential approximation, not DeLong's estimator). */
static void test_hanley_mcneil_rating_example(void **state)
{
    (void)state;
    static const int normal[5] = {33, 6, 6, 11, 2}, abnormal[5] = {3, 2, 2, 11, 33};
    double v[109];
    bool pos[109];
    size_t n = 0;
    for (int r = 0; r < 5; r++) {
        for (int k = 0; k < normal[r]; k++, n++) {
            v[n] = r + 1;
            pos[n] = false;
        }
        for (int k = 0; k < abnormal[r]; k++, n++) {
            v[n] = r + 1;
            pos[n] = true;
        }
    }
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, n, false, &roc, NULL), RT_OK);
    assert_int_equal(roc.n_pos, 51);
    assert_int_equal(roc.n_neg, 58);
    /* published to three decimals: tolerance half a unit of the last digit */
    assert_true(fabs(roc.auc - 0.893) < 0.0005);
    /* DeLong's SE and Hanley-McNeil's formula agree closely for a sample this
     * size (both estimate the same variance); 15 % covers the difference */
    assert_true(fabs(sqrt(roc.auc_var) - 0.032) < 0.15 * 0.032);
    assert_true(roc.auc_low < roc.auc && roc.auc < roc.auc_high && roc.auc_high <= 1.0);
    /* five rating levels give six ROC points from (0,0) to (1,1) */
    assert_int_equal(roc.n_points, 6);
    assert_true(roc.fpr[5] == 1.0 && roc.tpr[5] == 1.0);
    rt_roc_free(&roc);
}

/* Hand computation. Positives {3,4,5}, negatives {1,2,3}: of 9 pairs the
 * positive outranks in 8 and ties in 1, so AUC = 8.5/9 = 17/18. DeLong's
 * components (DeLong et al. 1988, Biometrics 44:837-845, eqs. for V10, V01):
 * V10 = {5/6, 1, 1}, V01 = {1, 1, 5/6}; each has sample variance
 * ((2/18)^2 + 2 (1/18)^2) / 2 = 1/108, so var = (1/108)/3 + (1/108)/3 = 1/162. */
static void test_hand_case_auc_and_delong(void **state)
{
    (void)state;
    const double v[6] = {3, 4, 5, 1, 2, 3};
    const bool pos[6] = {true, true, true, false, false, false};
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, 6, false, &roc, NULL), RT_OK);
    assert_true(fabs(roc.auc - 17.0 / 18.0) < 1e-12);
    assert_true(fabs(roc.auc_var - 1.0 / 162.0) < 1e-12);
    /* CI: 17/18 + 1.96 sqrt(1/162) > 1, so the upper end is clipped */
    assert_true(roc.auc_high == 1.0);
    assert_true(fabs(roc.auc_low - (17.0 / 18.0 - 1.959963985 * sqrt(1.0 / 162.0))) < 1e-9);
    /* ROC points by hand: thresholds 5, 4, 3, 2, 1 */
    const double fpr[6] = {0, 0, 0, 1.0 / 3, 2.0 / 3, 1}, tpr[6] = {0, 1.0 / 3, 2.0 / 3, 1, 1, 1};
    assert_int_equal(roc.n_points, 6);
    for (int k = 0; k < 6; k++) {
        assert_true(fabs(roc.fpr[k] - fpr[k]) < 1e-12);
        assert_true(fabs(roc.tpr[k] - tpr[k]) < 1e-12);
    }
    rt_roc_free(&roc);
}

/* Lower is worse (REM Atonia Index, Ferri et al. 2010: abnormal below the
 * cutoff): negating the values must give the same area as the mirrored data. */
static void test_lower_is_worse_mirrors(void **state)
{
    (void)state;
    const double v[6] = {-3, -4, -5, -1, -2, -3};
    const bool pos[6] = {true, true, true, false, false, false};
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, 6, true, &roc, NULL), RT_OK);
    assert_true(fabs(roc.auc - 17.0 / 18.0) < 1e-12);
    rt_roc_free(&roc);
}

/* Youden 1950 (Cancer 3:32-35): J = sensitivity + specificity - 1. By hand,
 * positives {4,5,6,7}, negatives {1,2,3,5}: calling >= 4 positive gives
 * sensitivity 1 and specificity 3/4, J = 0.75, the maximum; the cutoff is
 * the midpoint 3.5 between the observed 3 and 4. */
static void test_youden_known_answer(void **state)
{
    (void)state;
    const double v[8] = {4, 5, 6, 7, 1, 2, 3, 5};
    const bool pos[8] = {true, true, true, true, false, false, false, false};
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, 8, false, &roc, NULL), RT_OK);
    assert_true(fabs(roc.youden_j - 0.75) < 1e-12);
    assert_true(fabs(roc.youden_cutoff - 3.5) < 1e-12);
    assert_true(roc.youden_sens == 1.0 && roc.youden_spec == 0.75);
    rt_roc_free(&roc);
}

/* Lower is worse, with a tie in J. Positives {0.2,0.3,0.5}, negatives
 * {0.4,0.8,0.9}; "abnormal below c": c = 0.35 gives sens 2/3, spec 1 and
 * c = 0.65 gives sens 1, spec 2/3, both J = 2/3 (hand computation). The
 * documented rule keeps the most specific: 0.35. */
static void test_youden_lower_is_worse_tie(void **state)
{
    (void)state;
    const double v[6] = {0.2, 0.3, 0.5, 0.4, 0.8, 0.9};
    const bool pos[6] = {true, true, true, false, false, false};
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, 6, true, &roc, NULL), RT_OK);
    assert_true(fabs(roc.youden_j - 2.0 / 3.0) < 1e-12);
    assert_true(fabs(roc.youden_cutoff - 0.35) < 1e-12);
    assert_true(roc.youden_spec == 1.0);
    double sens, spec;
    rt_roc_at_cutoff(v, pos, 6, true, roc.youden_cutoff, &sens, &spec);
    assert_true(fabs(sens - 2.0 / 3.0) < 1e-12 && spec == 1.0);
    rt_roc_free(&roc);
}

/* Published cutoffs are "abnormal at or above" (Frauscher et al. 2012, Sleep
 * 35:835-847): a value equal to the cutoff is called positive. */
static void test_at_cutoff_boundary(void **state)
{
    (void)state;
    const double v[4] = {18.2, 30, 18.1, 5};
    const bool pos[4] = {true, true, false, false};
    double sens, spec;
    rt_roc_at_cutoff(v, pos, 4, false, 18.2, &sens, &spec);
    assert_true(sens == 1.0 && spec == 1.0);
    rt_roc_at_cutoff(v, pos, 4, false, NAN, &sens, &spec);
    assert_true(isnan(sens) && isnan(spec));
}

/* Degenerate inputs: one class only, one night per class, non-finite values. */
static void test_degenerate(void **state)
{
    (void)state;
    const double v[4] = {1, NAN, 2, INFINITY};
    const bool pos[4] = {true, true, false, false};
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, 4, false, &roc, NULL), RT_OK);
    assert_int_equal(roc.n_pos, 1);
    assert_int_equal(roc.n_neg, 1);
    assert_true(roc.auc == 0.0);        /* the positive scores lower */
    assert_true(isnan(roc.auc_var));    /* DeLong needs two of each class */
    rt_roc_free(&roc);
    assert_int_equal(rt_roc_compute(v, pos, 2, false, &roc, NULL), RT_OK);
    assert_true(isnan(roc.auc) && isnan(roc.youden_cutoff));
    rt_roc_free(&roc);
}

/* Against an independent numpy re-implementation of DeLong's estimator
 * (the placement-value form, written from the 1988 paper), on seeded random
 * data with ties. Skipped when Debian's numpy is not installed. */
static void test_delong_against_numpy(void **state)
{
    (void)state;
    if (system("/usr/bin/python3 -c 'import numpy' 2>/dev/null") != 0)
        skip();
    uint64_t seed = rt_test_seed();
    uint64_t x = seed * 6364136223846793005ULL + 1442695040888963407ULL;
    enum { N = 97 };
    double v[N];
    bool pos[N];
    const char *dir = rt_test_dir("roc_numpy");
    char data[512];
    snprintf(data, sizeof data, "%s/data.txt", dir);
    FILE *f = fopen(data, "w");
    assert_non_null(f);
    for (int i = 0; i < N; i++) {
        x = x * 6364136223846793005ULL + 1442695040888963407ULL;
        pos[i] = (x >> 33) % 5 < 2;
        x = x * 6364136223846793005ULL + 1442695040888963407ULL;
        /* rounded to one decimal so ties occur; positives shifted up */
        v[i] = round(((double)(x >> 11) / 9007199254740992.0 * 10 + (pos[i] ? 2 : 0)) * 10) / 10;
        fprintf(f, "%.1f %d\n", v[i], pos[i]);
    }
    fclose(f);
    char cmd[1024];
    snprintf(cmd, sizeof cmd,
             "/usr/bin/python3 -c \""
             "import numpy as np,sys\n"
             "d=np.loadtxt(sys.argv[1]); x=d[d[:,1]==1,0]; y=d[d[:,1]==0,0]\n"
             "psi=(x[:,None]>y[None,:])+0.5*(x[:,None]==y[None,:])\n"
             "a=psi.mean(); s10=psi.mean(1).var(ddof=1); s01=psi.mean(0).var(ddof=1)\n"
             "print(repr(a), repr(s10/len(x)+s01/len(y)))\" %s", data);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    double auc_ref = NAN, var_ref = NAN;
    int got = fscanf(p, "%lf %lf", &auc_ref, &var_ref);
    assert_int_equal(pclose(p), 0);
    assert_int_equal(got, 2);
    rt_roc roc;
    assert_int_equal(rt_roc_compute(v, pos, N, false, &roc, NULL), RT_OK);
    printf("seed %llu: auc %.6f (numpy %.6f), var %.3g (numpy %.3g)\n", (unsigned long long)seed,
           roc.auc, auc_ref, roc.auc_var, var_ref);
    /* same sums in a different order: agreement to rounding */
    assert_true(fabs(roc.auc - auc_ref) < 1e-12);
    assert_true(fabs(roc.auc_var - var_ref) < 1e-12);
    rt_roc_free(&roc);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_hanley_mcneil_rating_example),
        cmocka_unit_test(test_hand_case_auc_and_delong),
        cmocka_unit_test(test_lower_is_worse_mirrors),
        cmocka_unit_test(test_youden_known_answer),
        cmocka_unit_test(test_youden_lower_is_worse_tie),
        cmocka_unit_test(test_at_cutoff_boundary),
        cmocka_unit_test(test_degenerate),
        cmocka_unit_test(test_delong_against_numpy),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
