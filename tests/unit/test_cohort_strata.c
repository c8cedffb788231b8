/* Calibration per stratum (src/cohort/strata.c): which rows each sex and age
 * band holds, the rows without age or sex counted as unknown and left out,
 * a stratum lacking a group getting no cutoff, subjects taking their first
 * visit's age, and each stratum's AUC against scipy's Mann-Whitney U. */
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cohort/cohort_internal.h"
#include "remtone/cohort.h"
#include "support.h"

enum { IX = RT_IX_SINBAR_COMBINED_3S };

static void set_row(cohort_row *r, const char *id, const char *group, double value, double age,
                    char sex)
{
    memset(r, 0, sizeof *r);
    snprintf(r->id, sizeof r->id, "%s", id);
    snprintf(r->group, sizeof r->group, "%s", group);
    for (int i = 0; i < RT_IX_COUNT; i++)
        r->value[i] = r->automatic[i] = NAN;
    r->value[IX] = r->automatic[IX] = value;
    r->age = age;
    r->sex = sex;
    r->warnings = 0;
}

static void options(rt_cohort_options *o, bool by_sex, int e1, int e2)
{
    rt_cohort_options_default(o);
    o->out_dir = "strata";
    o->by_sex = by_sex;
    o->n_age_edges = e1 ? (e2 ? 2 : 1) : 0;
    o->age_edges[0] = e1;
    o->age_edges[1] = e2;
}

static void overall_of(const cohort_row *rows, size_t n, const rt_cohort_options *o,
                       cohort_calibration *cal)
{
    memset(cal, 0, sizeof *cal);
    rt_cutoffs pub;
    rt_cutoffs_published(&pub);
    for (int i = 0; i < RT_IX_COUNT; i++)
        cal->published[i] = cal->in_force[i] = pub.has[i] ? pub.value[i] : NAN;
    cal->computed = true;
    assert_int_equal(cohort_calibrate(rows, n, o, NULL, cal, NULL), RT_OK);
}

static void free_cal(cohort_calibration *cal)
{
    for (int i = 0; i < RT_IX_COUNT; i++)
        rt_roc_free(&cal->roc[i]);
}

static const cohort_stratum *find(const cohort_strata *s, const char *by, const char *name)
{
    for (size_t k = 0; k < s->n; k++)
        if (strcmp(s->v[k].sum.by, by) == 0 && strcmp(s->v[k].sum.name, name) == 0)
            return &s->v[k];
    fail_msg("no stratum %s %s", by, name);
    return NULL;
}

/* Band edges are whole years, a band [lo, hi): 49.9 is under 50, 50 and
 * 64.9 are in 50-64, 65 is in >=65 (the convention of the option's help).
 * By hand: F holds c1, c2, k1 (2 cases, 1 control), M holds c3, k2, k3;
 * c4 has no sex and k4 no age: counted as unknown, in no other stratum.
 * In F the cases score 40 and 20 against the control's 10: AUC 1, and the
 * Youden cutoff (Youden 1950, Cancer 3:32-35) is the midpoint 15. The
 * 50-64 band has cases only: no AUC, no cutoff, and the note says why. */
static void test_strata_membership_and_hand_values(void **state)
{
    (void)state;
    cohort_row rows[8];
    set_row(&rows[0], "c1", "case", 40, 49.9, 'F');
    set_row(&rows[1], "c2", "case", 20, 50, 'F');
    set_row(&rows[2], "c3", "case", 35, 64.9, 'M');
    set_row(&rows[3], "c4", "case", 50, 70, 0);
    set_row(&rows[4], "k1", "control", 10, 65, 'F');
    set_row(&rows[5], "k2", "control", 30, 30, 'M');
    set_row(&rows[6], "k3", "control", 5, 80, 'M');
    set_row(&rows[7], "k4", "control", 12, NAN, 'M');
    rt_cohort_options o;
    options(&o, true, 50, 65);
    cohort_calibration overall;
    overall_of(rows, 8, &o, &overall);
    cohort_strata s;
    assert_int_equal(cohort_stratify(rows, 8, &o, &overall, &s, NULL), RT_OK);
    assert_int_equal(s.n, 3 + 4); /* F, M, unknown; <50, 50-64, >=65, unknown */
    const struct { const char *by, *name; size_t pos, neg; } want[] = {
        {"sex", "F", 2, 1},       {"sex", "M", 1, 3},       {"sex", "unknown", 1, 0},
        {"age", "<50", 1, 1},     {"age", "50-64", 2, 0},   {"age", ">=65", 1, 2},
        {"age", "unknown", 0, 1},
    };
    for (size_t k = 0; k < sizeof want / sizeof want[0]; k++) {
        const cohort_stratum *t = find(&s, want[k].by, want[k].name);
        assert_int_equal(t->sum.positives, want[k].pos);
        assert_int_equal(t->sum.negatives, want[k].neg);
        assert_int_equal(t->cal.roc[IX].n_pos, want[k].pos);
    }
    const cohort_stratum *f = find(&s, "sex", "F");
    assert_string_equal(f->tag, "sex-F");
    assert_true(f->cal.roc[IX].auc == 1.0);
    assert_true(fabs(f->cal.roc[IX].youden_cutoff - 15.0) < 1e-12);
    char note[200];
    cohort_stratum_note(f, IX, &o, note, sizeof note);
    assert_string_equal(note, "");
    const cohort_stratum *mid = find(&s, "age", "50-64");
    assert_string_equal(mid->tag, "age-50-64");
    assert_true(isnan(mid->cal.roc[IX].auc) && isnan(mid->cal.roc[IX].youden_cutoff));
    cohort_stratum_note(mid, IX, &o, note, sizeof note);
    assert_string_equal(note, "no cutoff: no \"control\" night with a value");
    assert_string_equal(find(&s, "age", "<50")->tag, "age-under-50");
    assert_string_equal(find(&s, "age", ">=65")->tag, "age-65-plus");
    /* the unknown rows are counted and never calibrated */
    const cohort_stratum *unknown = find(&s, "age", "unknown");
    assert_true(isnan(unknown->cal.roc[IX].auc) && isnan(unknown->cal.roc[IX].youden_cutoff));
    cohort_stratum_note(unknown, IX, &o, note, sizeof note);
    assert_string_equal(note, "left out: no age given");
    /* the whole cohort is untouched by the strata: 4 cases, 4 controls */
    assert_int_equal(overall.positives, 4);
    assert_int_equal(overall.negatives, 4);
    cohort_strata_free(&s);
    /* without a calibration of the whole cohort there are no strata */
    overall.computed = false;
    assert_int_equal(cohort_stratify(rows, 8, &o, &overall, &s, NULL), RT_OK);
    assert_int_equal(s.n, 0);
    free_cal(&overall);
}

/* Each stratum's AUC on seeded synthetic (value, group, age, sex) rows
 * against an independent reference: scipy.stats.mannwhitneyu's U statistic
 * of the cases divided by n_case * n_control, which is the area under the
 * empirical ROC curve with ties counting one half (Mann & Whitney 1947, Ann.
 * Math. Statist. 18:50-60; Hanley & McNeil 1982, Radiology 143:29-36).
 * Skipped without Debian's python3-scipy. */
static void test_strata_auc_against_scipy(void **state)
{
    (void)state;
    if (system("/usr/bin/python3 -c 'import scipy.stats' 2>/dev/null") != 0)
        skip();
    enum { N = 120 };
    cohort_row *rows = calloc(N, sizeof *rows);
    assert_non_null(rows);
    rt_test_rng_seed(rt_test_seed());
    const char *dir = rt_test_dir("cohort_strata_scipy");
    char data[512];
    snprintf(data, sizeof data, "%s/rows.txt", dir);
    FILE *f = fopen(data, "w");
    assert_non_null(f);
    for (int i = 0; i < N; i++) {
        bool pos = rt_test_uniform() < 0.45;
        double u = rt_test_uniform();
        char sex = u < 0.06 ? 0 : u < 0.53 ? 'F' : 'M';
        double age = rt_test_uniform() < 0.05 ? NAN : round(30 + 55 * rt_test_uniform());
        /* cases higher on average, whole numbers so that ties occur */
        double v = round(20 * rt_test_uniform() + (pos ? 8 : 0));
        char id[16];
        snprintf(id, sizeof id, "n%d", i);
        set_row(&rows[i], id, pos ? "case" : "control", v, age, sex);
        fprintf(f, "%g %d %g %c\n", v, pos, isnan(age) ? -1.0 : age, sex ? sex : 'U');
    }
    fclose(f);
    rt_cohort_options o;
    options(&o, true, 50, 65);
    cohort_calibration overall;
    overall_of(rows, N, &o, &overall);
    cohort_strata s;
    assert_int_equal(cohort_stratify(rows, N, &o, &overall, &s, NULL), RT_OK);
    char cmd[1024];
    snprintf(cmd, sizeof cmd,
             "/usr/bin/python3 -c \""
             "import sys\n"
             "from scipy.stats import mannwhitneyu\n"
             "rows=[l.split() for l in open(sys.argv[1])]\n"
             "strata=[('sex F',lambda a,s:s=='F'),('sex M',lambda a,s:s=='M'),"
             "('age <50',lambda a,s:0<=a<50),('age 50-64',lambda a,s:50<=a<65),"
             "('age >=65',lambda a,s:a>=65)]\n"
             "for name,keep in strata:\n"
             "  x=[float(v) for v,p,a,s in rows if p=='1' and keep(float(a),s)]\n"
             "  y=[float(v) for v,p,a,s in rows if p=='0' and keep(float(a),s)]\n"
             "  print(name, len(x), len(y), repr(mannwhitneyu(x,y).statistic/(len(x)*len(y))))"
             "\" %s", data);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    char by[8], name[16];
    size_t n_pos, n_neg, checked = 0;
    double ref;
    while (fscanf(p, "%7s %15s %zu %zu %lf", by, name, &n_pos, &n_neg, &ref) == 5) {
        const cohort_stratum *t = find(&s, by, name);
        printf("%s %s: %zu cases, %zu controls, AUC %.6f (scipy %.6f)\n", by, name, n_pos, n_neg,
               t->cal.roc[IX].auc, ref);
        assert_int_equal(t->cal.roc[IX].n_pos, n_pos);
        assert_int_equal(t->cal.roc[IX].n_neg, n_neg);
        /* the same pair count in another order: agreement to rounding */
        assert_true(fabs(t->cal.roc[IX].auc - ref) < 1e-12);
        checked++;
    }
    assert_int_equal(pclose(p), 0);
    assert_int_equal(checked, 5);
    /* the strata and the unknown ones partition the calibrated rows */
    size_t total = 0;
    for (size_t k = 0; k < s.n; k++)
        if (strcmp(s.v[k].sum.by, "age") == 0)
            total += s.v[k].sum.positives + s.v[k].sum.negatives;
    assert_int_equal(total, N);
    cohort_strata_free(&s);
    free_cal(&overall);
    free(rows);
}

/* With --per-subject a subject is one row of its mean values; its age and
 * sex are those of its first visit (in visit order) that gives them: S1 was
 * 64 at its first visit and 66 at its second, so it stays in 50-64. */
static void test_subject_takes_first_visit_age(void **state)
{
    (void)state;
    cohort_row rows[4];
    set_row(&rows[0], "s1-b", "case", 30, 66, 'F');
    set_row(&rows[1], "s1-a", "case", 20, 64, 'F');
    set_row(&rows[2], "s2-a", "control", 10, NAN, 0);
    set_row(&rows[3], "s2-b", "control", 14, 58, 'M');
    const char *visits[4] = {"2026-09", "2026-01", "2025-03", "2025-10"};
    for (int k = 0; k < 4; k++) {
        snprintf(rows[k].subject, sizeof rows[k].subject, "%s", k < 2 ? "S1" : "S2");
        snprintf(rows[k].visit, sizeof rows[k].visit, "%s", visits[k]);
    }
    cohort_subjects subjects;
    assert_int_equal(cohort_subjects_build(rows, 4, &subjects, NULL), RT_OK);
    cohort_row *by_subject = NULL;
    size_t n = 0;
    assert_int_equal(cohort_subject_rows(rows, 4, &subjects, "strata", &by_subject, &n, NULL),
                     RT_OK);
    assert_int_equal(n, 2);
    assert_string_equal(by_subject[0].id, "S1");
    assert_true(by_subject[0].age == 64 && by_subject[0].sex == 'F');
    /* S2's first visit gives neither: its second visit's are taken */
    assert_true(by_subject[1].age == 58 && by_subject[1].sex == 'M');
    /* the automatic means are what a calibration on subjects uses */
    assert_true(by_subject[0].automatic[IX] == 25 && by_subject[1].automatic[IX] == 12);
    rt_cohort_options o;
    options(&o, false, 65, 0);
    o.per_subject = true;
    cohort_calibration overall;
    overall_of(by_subject, n, &o, &overall);
    cohort_strata s;
    assert_int_equal(cohort_stratify(by_subject, n, &o, &overall, &s, NULL), RT_OK);
    assert_int_equal(find(&s, "age", "<65")->sum.positives, 1);
    assert_int_equal(find(&s, "age", "<65")->sum.negatives, 1);
    assert_int_equal(find(&s, "age", ">=65")->sum.positives, 0);
    char note[200];
    cohort_stratum_note(find(&s, "age", ">=65"), IX, &o, note, sizeof note);
    assert_string_equal(note, "no cutoff: no \"case\" or \"control\" subject with a value");
    cohort_strata_free(&s);
    free_cal(&overall);
    free(by_subject);
    cohort_subjects_free(&subjects);
}

static void test_age_edges_checked(void **state)
{
    (void)state;
    rt_cohort_options o;
    rt_error err;
    options(&o, false, 65, 50);
    assert_int_equal(cohort_check_age_edges(&o, &err), RT_ERR_USAGE);
    assert_non_null(strstr(err.message, "must ascend: 50 after 65"));
    options(&o, false, 0, 0);
    o.n_age_edges = 1;
    assert_int_equal(cohort_check_age_edges(&o, &err), RT_ERR_USAGE);
    options(&o, false, 50, 131);
    assert_int_equal(cohort_check_age_edges(&o, &err), RT_ERR_USAGE);
    options(&o, false, 50, 65);
    assert_int_equal(cohort_check_age_edges(&o, &err), RT_OK);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_strata_membership_and_hand_values),
        cmocka_unit_test(test_strata_auc_against_scipy),
        cmocka_unit_test(test_subject_takes_first_visit_age),
        cmocka_unit_test(test_age_edges_checked),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
