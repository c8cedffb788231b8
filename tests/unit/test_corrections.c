/* A reviewer's corrections (docs/corrections.md): the same decisions read
 * from the mini-epoch table CSV, an EDF+ annotation file and an XML scoring
 * file give the same corrected night; on a synthetic night whose truth is
 * known (src/synth/truth.c) the decisions are the truth of each mini-epoch
 * remtone got wrong, so the corrected 3-s indices must equal a recount of
 * remtone's labels with those mini-epochs set to the truth. Bad decisions are
 * refused with file and line (or annotation number); rescoring is
 * idempotent; the agreement's kappa is checked against a hand computation
 * (Cohen 1960). */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "night_internal.h"
#include "io/edf_writer.h"
#include "report/report_internal.h"
#include "remtone/corrections.h"
#include "remtone/remtone.h"

#define REVIEWER "Tech A"
#define WHEN "2026-12-01T09:30"
#define MAX_PLAN 4096

/* One planned decision, written into each of the three files. */
typedef struct plan {
    rt_decision_kind kind;
    rt_decision_activity activity;
    int role;
    double start_s, end_s;
    rt_decision_reason reason;
} plan;

typedef struct fixture {
    char dir[4096];
    rt_recording *rec;
    rt_role_map roles;
    rt_timeline *tl;
    json_t *truth;
    plan p[MAX_PLAN];
    size_t n;
    size_t excl_first, excl_last; /* minis [first, last) the exclusion covers */
} fixture;

static rt_night *score(const fixture *f)
{
    rt_error err;
    rt_night *night = NULL;
    if (rt_night_score(f->rec, &f->roles, f->tl, NULL, NULL, &night, &err) != RT_OK)
        fail_msg("%s", err.message);
    return night;
}

static bool has_role(json_t *list, const char *role)
{
    size_t i;
    json_t *v;
    json_array_foreach(list, i, v) if (strcmp(json_string_value(v), role) == 0) return true;
    return false;
}

/* truth.json's 3-s mini-epoch starting at onset_s, or NULL. */
static json_t *truth_mini(json_t *truth, double onset_s)
{
    size_t i;
    json_t *m;
    json_array_foreach(json_object_get(truth, "minis_3s"), i, m)
    {
        if (fabs(json_number_value(json_object_get(m, "onset_s")) - onset_s) < 1e-6)
            return m;
    }
    return NULL;
}

static const int SCORED_ROLES[] = {RT_ROLE_CHIN, RT_ROLE_ARM_LEFT, RT_ROLE_ARM_RIGHT};

/* The decisions a reviewer who knew the truth would make: add or reject the
 * phasic mark where remtone's differs from truth.json (phasic_sinbar),
 * confirm every ninth agreeing chin mini-epoch, and leave three mini-epochs
 * out with one exclusion. */
static void make_plan(fixture *f, const rt_night *night)
{
    f->n = 0;
    f->excl_first = 25;
    f->excl_last = 28;
    static const rt_decision_reason reasons[] = {RT_REASON_ARTIFACT, RT_REASON_AROUSAL,
                                                 RT_REASON_OTHER, RT_REASON_NOT_REM};
    size_t rejects = 0;
    for (size_t i = 0; i < night->n_minis3; i++) {
        if (i >= f->excl_first && i < f->excl_last)
            continue;
        const rt_mini *m = &night->minis3[i];
        json_t *t = truth_mini(f->truth, m->onset_s);
        assert_non_null(t);
        for (size_t k = 0; k < sizeof SCORED_ROLES / sizeof SCORED_ROLES[0]; k++) {
            int r = SCORED_ROLES[k];
            if (m->labels[r] & RT_LABEL_EXCLUDED)
                continue;
            bool truth_p = has_role(json_object_get(t, "phasic_sinbar"), rt_role_name((rt_role)r));
            bool auto_p = (m->labels[r] & RT_LABEL_SINBAR_PHASIC) != 0;
            plan p = {RT_DECISION_CONFIRM, RT_ACTIVITY_ANY, r, m->onset_s, m->onset_s,
                      RT_REASON_NONE};
            if (truth_p && !auto_p) {
                p.kind = RT_DECISION_ADD;
                p.activity = RT_ACTIVITY_PHASIC;
            } else if (!truth_p && auto_p) {
                p.kind = RT_DECISION_REJECT;
                p.activity = RT_ACTIVITY_PHASIC;
                p.reason = reasons[rejects++ % 4];
            } else if (r != RT_ROLE_CHIN || i % 9 != 0) {
                continue;
            }
            assert_true(f->n < MAX_PLAN);
            f->p[f->n++] = p;
        }
    }
    /* from inside the first mini-epoch to inside the third */
    double a = night->minis3[f->excl_first].onset_s + 1.0;
    double b = night->minis3[f->excl_last - 1].onset_s + 0.5;
    f->p[f->n++] = (plan){RT_DECISION_EXCLUDE, RT_ACTIVITY_ANY, -1, a, b, RT_REASON_ARTIFACT};
}

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->dir, sizeof f->dir, "%s", rt_test_dir("corrections"));
    /* weak bursts (1.5-4x the background), so that remtone misses and
     * mislabels some: the decisions have something to correct */
    rt_synth_options o = rt_test_synth_options(2, 7);
    o.profile = RT_SYNTH_RBD;
    o.burst_ratio_lo = 1.5;
    o.burst_ratio_hi = 4.0;
    rt_test_synth_write(&o, f->dir);
    rt_error err;
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", f->dir);
    assert_int_equal(rt_recording_open(path, &f->rec, &err), RT_OK);
    assert_int_equal(rt_roles_resolve(f->rec, NULL, &f->roles, &err), RT_OK);
    f->tl = rt_test_timeline();
    snprintf(path, sizeof path, "%s/stages.csv", f->dir);
    assert_int_equal(rt_timeline_load_stages_csv(f->tl, path, NULL, &err), RT_OK);
    f->truth = rt_test_load_truth(f->dir);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    rt_recording_close(f->rec);
    rt_timeline_free(f->tl);
    json_decref(f->truth);
    free(f);
    return 0;
}

/* ---- the three files --------------------------------------------------- */

static const char *csv_word(const plan *p, char *buf, size_t cap)
{
    if (p->activity == RT_ACTIVITY_ANY)
        snprintf(buf, cap, "%s", rt_decision_kind_name(p->kind));
    else
        snprintf(buf, cap, "%s-%s", rt_decision_kind_name(p->kind),
                 rt_decision_activity_name(p->activity));
    return buf;
}

static void write_csv(const fixture *f, const rt_night *night, const char *path)
{
    FILE *out = fopen(path, "w");
    assert_non_null(out);
    fprintf(out, "elapsed_s,role,decision,reason,reviewer,decided_at\n");
    char word[32];
    for (size_t i = 0; i < f->n; i++) {
        const plan *p = &f->p[i];
        if (p->kind == RT_DECISION_EXCLUDE) {
            /* the table has one row per mini-epoch: one per covered one */
            for (size_t k = f->excl_first; k < f->excl_last; k++)
                fprintf(out, "%.3f,chin,exclude,%s,%s,%s\n", night->minis3[k].onset_s,
                        rt_decision_reason_name(p->reason), REVIEWER, WHEN);
            continue;
        }
        fprintf(out, "%.3f,%s,%s,%s,%s,%s\n", p->start_s, rt_role_name((rt_role)p->role),
                csv_word(p, word, sizeof word), rt_decision_reason_name(p->reason), REVIEWER,
                WHEN);
    }
    assert_int_equal(fclose(out), 0);
}

/* An annotation-only EDF+ header starting with the recording, or shift_s
 * seconds later. */
static rt_edf_writer_header header_of(const fixture *f, int shift_s)
{
    rt_clock_time t = rt_recording_start(f->rec);
    return (rt_edf_writer_header){.year = t.year, .month = t.month, .day = t.day, .hour = t.hour,
                                  .minute = t.minute, .second = t.second + shift_s,
                                  .subsecond = t.subsecond};
}

static void write_edf(const fixture *f, const char *path, int shift_s)
{
    rt_error err;
    rt_edf_writer_header h = header_of(f, shift_s);
    rt_edf_writer *w = NULL;
    assert_int_equal(rt_edf_writer_begin(&w, path, &h, NULL, 0, &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 0, -1, "Review  BY " REVIEWER, &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 0, -1, "review at " WHEN, &err), RT_OK);
    /* remtone's own detection texts are passed over */
    assert_int_equal(rt_edf_writer_annotation(w, 5, 1, "remtone phasic aasm chin", &err), RT_OK);
    for (size_t i = 0; i < f->n; i++) {
        const plan *p = &f->p[i];
        char text[48];
        if (p->kind == RT_DECISION_EXCLUDE) {
            snprintf(text, sizeof text, "exclude %s", rt_decision_reason_name(p->reason));
            assert_int_equal(rt_edf_writer_annotation(w, p->start_s, p->end_s - p->start_s, text,
                                                      &err), RT_OK);
            continue;
        }
        snprintf(text, sizeof text, "%s%s%s %s%s%s", rt_decision_kind_name(p->kind),
                 p->activity ? " " : "", p->activity ? rt_decision_activity_name(p->activity) : "",
                 rt_role_name((rt_role)p->role), p->reason ? " " : "",
                 rt_decision_reason_name(p->reason));
        /* anywhere inside the mini-epoch: 1.5 s in */
        assert_int_equal(rt_edf_writer_annotation(w, p->start_s + 1.5, -1, text, &err), RT_OK);
    }
    assert_int_equal(rt_edf_writer_finish(w, &err), RT_OK);
}

static void write_xml(const fixture *f, const char *path)
{
    rt_error err;
    assert_int_equal(rt_timeline_write_xml(f->tl, path, &err), RT_OK);
    size_t len = 0;
    char *xml = rt_test_read_all(path, &len);
    char *end = strstr(xml, "</remtone-scoring>");
    assert_non_null(end);
    *end = '\0';
    FILE *out = fopen(path, "w");
    assert_non_null(out);
    fprintf(out, "%s<corrections>\n", xml);
    for (size_t i = 0; i < f->n; i++) {
        const plan *p = &f->p[i];
        fprintf(out, "<decision kind=\"%s\"", rt_decision_kind_name(p->kind));
        if (p->activity)
            fprintf(out, " activity=\"%s\"", rt_decision_activity_name(p->activity));
        if (p->role >= 0)
            fprintf(out, " role=\"%s\"", rt_role_name((rt_role)p->role));
        fprintf(out, " onset-s=\"%.3f\"", p->start_s);
        if (p->kind == RT_DECISION_EXCLUDE)
            fprintf(out, " end-s=\"%.3f\"", p->end_s);
        if (p->reason)
            fprintf(out, " reason=\"%s\"", rt_decision_reason_name(p->reason));
        fprintf(out, " reviewer=\"%s\" at=\"%s:00\"/>\n", REVIEWER, WHEN);
    }
    fprintf(out, "</corrections>\n</remtone-scoring>\n");
    assert_int_equal(fclose(out), 0);
    free(xml);
}

static rt_night *corrected_from(const fixture *f, const char *path)
{
    rt_error err;
    rt_corrections *c = NULL;
    if (rt_corrections_load(path, &c, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_night *night = score(f);
    if (rt_night_correct(night, f->tl, c, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_corrections_free(c);
    return night;
}

/* The SINBAR 3-s counts from remtone's labels with every decided
 * mini-epoch set to the truth and the excluded ones left out (Frauscher et
 * al. 2012, Sleep 35:835-847: chin "any", chin phasic, FDS phasic on either
 * arm, chin "any" or FDS phasic, over the scorable 3-s mini-epochs). */
static void recount(const fixture *f, const rt_night *night, size_t num[4], size_t *den)
{
    memset(num, 0, 4 * sizeof *num);
    *den = 0;
    for (size_t i = 0; i < night->n_minis3; i++) {
        const rt_mini *m = &night->minis3[i];
        if ((m->labels[RT_ROLE_CHIN] & RT_LABEL_EXCLUDED) || (i >= f->excl_first && i < f->excl_last))
            continue;
        bool phasic[RT_ROLE_COUNT], tonic[RT_ROLE_COUNT];
        for (int r = 0; r < RT_ROLE_COUNT; r++) {
            phasic[r] = !(m->labels[r] & RT_LABEL_EXCLUDED) && (m->labels[r] & RT_LABEL_SINBAR_PHASIC);
            tonic[r] = !(m->labels[r] & RT_LABEL_EXCLUDED) && (m->labels[r] & RT_LABEL_SINBAR_TONIC);
        }
        for (size_t k = 0; k < f->n; k++)
            if (f->p[k].role >= 0 && fabs(f->p[k].start_s - m->onset_s) < 1e-6 &&
                f->p[k].kind != RT_DECISION_CONFIRM)
                phasic[f->p[k].role] = f->p[k].kind == RT_DECISION_ADD;
        bool any = phasic[RT_ROLE_CHIN] || tonic[RT_ROLE_CHIN];
        bool fds = phasic[RT_ROLE_ARM_LEFT] || phasic[RT_ROLE_ARM_RIGHT];
        (*den)++;
        num[0] += any;
        num[1] += phasic[RT_ROLE_CHIN];
        num[2] += fds;
        num[3] += any || fds;
    }
}

static const rt_index_id SINBAR_3S[4] = {RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_CHIN_PHASIC_3S,
                                         RT_IX_SINBAR_FDS_PHASIC_3S, RT_IX_SINBAR_COMBINED_3S};

static void three_sources_give_the_truth(void **state)
{
    fixture *f = *state;
    rt_night *automatic = score(f);
    make_plan(f, automatic);
    size_t changes = 0;
    for (size_t i = 0; i < f->n; i++)
        changes += f->p[i].kind == RT_DECISION_ADD || f->p[i].kind == RT_DECISION_REJECT;
    print_message("%zu decisions, %zu of them add or reject\n", f->n, changes);
    assert_true(changes >= 5); /* the weak bursts leave remtone something to get wrong */
    char csv[4200], edf[4200], xml[4200];
    snprintf(csv, sizeof csv, "%s/decisions.csv", f->dir);
    snprintf(edf, sizeof edf, "%s/decisions.edf", f->dir);
    snprintf(xml, sizeof xml, "%s/scoring.xml", f->dir);
    write_csv(f, automatic, csv);
    write_edf(f, edf, 0);
    write_xml(f, xml);

    size_t num[4], den;
    recount(f, automatic, num, &den);
    const char *paths[3] = {csv, edf, xml};
    rt_night *nights[3];
    for (int s = 0; s < 3; s++) {
        rt_night *n = nights[s] = corrected_from(f, paths[s]);
        const rt_night_corrections *c = n->corrections;
        assert_non_null(c);
        assert_int_equal(c->counts[RT_DECISION_EXCLUDE], 1);
        assert_int_equal(c->n_decisions, f->n);
        assert_int_equal(c->minis_left_out, f->excl_last - f->excl_first);
        for (int k = 0; k < 4; k++) {
            const rt_index_value *v = &n->index[SINBAR_3S[k]];
            if (v->numerator != num[k] || v->denominator != den)
                fail_msg("%s: %s %zu/%zu, recount %zu/%zu", paths[s],
                         rt_index_rules()[SINBAR_3S[k]].id, v->numerator, v->denominator, num[k],
                         den);
            /* the automatic value is kept beside the corrected one */
            assert_int_equal(c->automatic[SINBAR_3S[k]].numerator,
                             automatic->index[SINBAR_3S[k]].numerator);
        }
        /* every decided mini-epoch now carries the truth */
        for (size_t k = 0; k < f->n; k++) {
            const plan *p = &f->p[k];
            if (p->role < 0)
                continue;
            size_t i = 0;
            while (fabs(n->minis3[i].onset_s - p->start_s) > 1e-6)
                i++;
            json_t *t = truth_mini(f->truth, p->start_s);
            bool truth_p = has_role(json_object_get(t, "phasic_sinbar"), rt_role_name((rt_role)p->role));
            unsigned char l = c->labels[i * RT_ROLE_COUNT + (size_t)p->role];
            assert_int_equal((l & RT_LABEL_SINBAR_PHASIC) != 0, truth_p);
        }
        /* remtone's own labels are kept: the corrected ones are beside them */
        assert_memory_equal(n->minis3, automatic->minis3, automatic->n_minis3 * sizeof *n->minis3);
    }
    for (int s = 1; s < 3; s++) {
        for (int i = 0; i < RT_IX_COUNT; i++) {
            const rt_index_value *a = &nights[0]->index[i], *b = &nights[s]->index[i];
            assert_int_equal(a->numerator, b->numerator);
            assert_int_equal(a->denominator, b->denominator);
            assert_true(a->value == b->value || (isnan(a->value) && isnan(b->value)));
        }
        assert_int_equal(nights[0]->level, nights[s]->level);
        assert_memory_equal(nights[0]->corrections->change, nights[s]->corrections->change,
                            sizeof nights[0]->corrections->change);
    }
    for (int s = 0; s < 3; s++)
        rt_night_free(nights[s]);
    rt_night_free(automatic);
}

/* Writing the audit table of a corrected night and reading it back as the
 * corrections gives the same night and the same table; the same file twice
 * gives the same result; a night is corrected once. */
static void rescoring_is_idempotent(void **state)
{
    fixture *f = *state;
    rt_night *automatic = score(f);
    make_plan(f, automatic);
    char csv[4200], m1[4200], m2[4200];
    snprintf(csv, sizeof csv, "%s/decisions.csv", f->dir);
    snprintf(m1, sizeof m1, "%s/minis1.csv", f->dir);
    snprintf(m2, sizeof m2, "%s/minis2.csv", f->dir);
    write_csv(f, automatic, csv);
    rt_error err;
    rt_night *a = corrected_from(f, csv);
    assert_int_equal(rt_night_write_minis_csv(a, f->rec, NULL, m1, &err), RT_OK);
    rt_night *b = corrected_from(f, m1);
    assert_int_equal(rt_night_write_minis_csv(b, f->rec, NULL, m2, &err), RT_OK);
    size_t l1, l2;
    char *t1 = rt_test_read_all(m1, &l1), *t2 = rt_test_read_all(m2, &l2);
    assert_int_equal(l1, l2);
    assert_memory_equal(t1, t2, l1);
    assert_memory_equal(a->index, b->index, sizeof a->index);
    assert_int_equal(a->level, b->level);
    rt_night *c = corrected_from(f, csv);
    assert_memory_equal(a->index, c->index, sizeof a->index);
    /* the page shows both (its "Corrections" section), and none without */
    char page[4200];
    snprintf(page, sizeof page, "%s/page.html", f->dir);
    rt_report_options ro = {0};
    assert_int_equal(rt_night_write_html(a, f->rec, f->tl, &ro, page, &err), RT_OK);
    char *html = rt_test_read_all(page, &l1);
    assert_non_null(strstr(html, "<section id=\"corrections\"><h2>Corrections</h2>"));
    assert_non_null(strstr(html, "Reviewed by " REVIEWER));
    free(html);
    assert_int_equal(rt_night_write_html(automatic, f->rec, f->tl, &ro, page, &err), RT_OK);
    html = rt_test_read_all(page, &l1);
    assert_null(strstr(html, "id=\"corrections\""));
    free(html);
    assert_memory_equal(a->corrections->labels, c->corrections->labels, a->n_minis3 * RT_ROLE_COUNT);
    /* once only: a second correction is a usage error and changes nothing */
    rt_corrections *again = NULL;
    assert_int_equal(rt_corrections_load(csv, &again, &err), RT_OK);
    rt_index_value before[RT_IX_COUNT];
    memcpy(before, a->index, sizeof before);
    assert_int_equal(rt_night_correct(a, f->tl, again, &err), RT_ERR_USAGE);
    assert_memory_equal(before, a->index, sizeof before);
    rt_corrections_free(again);
    free(t1);
    free(t2);
    rt_night_free(a);
    rt_night_free(b);
    rt_night_free(c);
    rt_night_free(automatic);
}

/* ---- refusals ------------------------------------------------------------ */

/* Loads text as a CSV corrections file and applies it to night; expects
 * status, and every fragment in the message. */
static void refused_csv(const fixture *f, const char *name, const char *text, rt_status status,
                        const char *const *fragments)
{
    const char *path = rt_test_text_file(f->dir, name, text);
    rt_error err;
    rt_error_clear(&err);
    rt_corrections *c = NULL;
    rt_status st = rt_corrections_load(path, &c, &err);
    if (st == RT_OK) {
        rt_night *night = score(f);
        rt_index_value before[RT_IX_COUNT];
        memcpy(before, night->index, sizeof before);
        st = rt_night_correct(night, f->tl, c, &err);
        /* refused: the night is left as it was */
        assert_null(night->corrections);
        assert_memory_equal(before, night->index, sizeof before);
        rt_night_free(night);
        rt_corrections_free(c);
    }
    if (st != status)
        fail_msg("%s: status %d, want %d (%s)", name, st, status, err.message);
    assert_non_null(strstr(err.message, name));
    for (; *fragments; fragments++)
        if (!strstr(err.message, *fragments))
            fail_msg("%s: \"%s\" lacks \"%s\"", name, err.message, *fragments);
}

static void bad_decisions_are_refused(void **state)
{
    fixture *f = *state;
    rt_night *night = score(f);
    double rem = night->minis3[0].onset_s;
    double end = night->recording_s;
    /* a scored chin mini-epoch remtone left quiet, and one it marked phasic */
    double quiet = -1, active = -1;
    for (size_t i = 0; i < night->n_minis3; i++) {
        unsigned l = night->minis3[i].labels[RT_ROLE_CHIN];
        if (l & RT_LABEL_EXCLUDED)
            continue;
        if (quiet < 0 && !(l & RT_LABEL_SINBAR_ANY))
            quiet = night->minis3[i].onset_s;
        if (active < 0 && (l & RT_LABEL_SINBAR_PHASIC))
            active = night->minis3[i].onset_s;
    }
    assert_true(quiet >= 0 && active >= 0);
    rt_night_free(night);
    const char *head = "elapsed_s,role,decision,reason,reviewer,decided_at\n";
    char text[1024];
#define ROW(t, rest) snprintf(text, sizeof text, "%s%.3f,%s\n", head, (double)(t), rest)
    /* epoch 3 of the synthetic night is wake (stages.csv) */
    ROW(60, "chin,confirm,,Tech A,2026-12-01");
    refused_csv(f, "not-rem.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "staged W", "not a scored REM epoch", NULL});
    ROW(end + 30, "chin,confirm,,Tech A,2026-12-01");
    refused_csv(f, "past-end.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "past the end of the recording", NULL});
    ROW(rem, "chin2,confirm,,Tech A,2026-12-01");
    refused_csv(f, "unknown-role.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "unknown channel role \"chin2\"", NULL});
    ROW(rem, "ecg,confirm,,Tech A,2026-12-01");
    refused_csv(f, "ecg.csv", text, RT_ERR_STAGING, (const char *[]){"line 2", "EMG", NULL});
    ROW(quiet, "chin,reject,artifact,Tech A,2026-12-01");
    refused_csv(f, "nothing-to-reject.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "marked no", NULL});
    ROW(active, "chin,add-phasic,,Tech A,2026-12-01");
    refused_csv(f, "already-marked.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "already marked phasic", NULL});
    ROW(rem, "chin,reject,,Tech A,2026-12-01");
    refused_csv(f, "no-reason.csv", text, RT_ERR_STAGING, (const char *[]){"line 2", "reason", NULL});
    ROW(rem, "chin,confirm,,,2026-12-01");
    refused_csv(f, "no-reviewer.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "no reviewer", NULL});
    ROW(rem, "chin,confirm,,Tech A,yesterday");
    refused_csv(f, "bad-time.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "\"yesterday\"", NULL});
    ROW(rem, "chin,remove,,Tech A,2026-12-01");
    refused_csv(f, "bad-word.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "\"remove\"", NULL});
    snprintf(text, sizeof text, "%s%.3f,chin,confirm,,A,2026-12-01\n%.3f,chin,confirm,,B,2026-12-02\n",
             head, rem, rem + 1.0);
    refused_csv(f, "twice.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 3", "second decision", "line 2", NULL});
    snprintf(text, sizeof text, "%s%.3f,chin,exclude,artifact,A,2026-12-01\n", head, 30.0);
    refused_csv(f, "exclude-no-rem.csv", text, RT_ERR_STAGING,
                (const char *[]){"line 2", "covers no scored REM", NULL});
    refused_csv(f, "empty.csv", head, RT_ERR_STAGING, (const char *[]){"no decision", NULL});
    refused_csv(f, "no-column.csv", "elapsed_s,role\n1,chin\n", RT_ERR_STAGING,
                (const char *[]){"decision", NULL});
#undef ROW

    /* EDF+: the annotation number */
    rt_error err;
    char edf[4200];
    snprintf(edf, sizeof edf, "%s/bad.edf", f->dir);
    rt_edf_writer_header h = header_of(f, 0);
    rt_edf_writer *w = NULL;
    assert_int_equal(rt_edf_writer_begin(&w, edf, &h, NULL, 0, &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 0, -1, "review by A", &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 1, -1, "review at 2026-12-01", &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 2, -1, "reject phasic chin", &err), RT_OK);
    assert_int_equal(rt_edf_writer_finish(w, &err), RT_OK);
    rt_corrections *c = NULL;
    assert_int_equal(rt_corrections_load(edf, &c, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "annotation 3"));
    assert_null(c);
    /* a decision without a reviewer's annotation */
    assert_int_equal(rt_edf_writer_begin(&w, edf, &h, NULL, 0, &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, rem, -1, "confirm chin", &err), RT_OK);
    assert_int_equal(rt_edf_writer_annotation(w, 1, -1, "Lights off", &err), RT_OK);
    assert_int_equal(rt_edf_writer_finish(w, &err), RT_OK);
    assert_int_equal(rt_corrections_load(edf, &c, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "is not a decision"));
    /* a file starting 2 s after the recording: its onsets would land on
     * other mini-epochs */
    rt_night *night2 = score(f);
    make_plan(f, night2);
    write_edf(f, edf, 2);
    assert_int_equal(rt_corrections_load(edf, &c, &err), RT_OK);
    assert_int_equal(rt_night_correct(night2, f->tl, c, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "the recording at"));
    assert_null(night2->corrections);
    rt_corrections_free(c);
    c = NULL;
    rt_night_free(night2);

    /* XML: the schema's line */
    char xml[4200];
    snprintf(xml, sizeof xml, "%s/bad.xml", f->dir);
    assert_int_equal(rt_timeline_write_xml(f->tl, xml, &err), RT_OK);
    size_t len;
    char *doc = rt_test_read_all(xml, &len);
    *strstr(doc, "</remtone-scoring>") = '\0';
    FILE *out = fopen(xml, "w");
    fprintf(out, "%s<corrections>\n<decision kind=\"undo\" role=\"chin\" onset-s=\"%.3f\" "
                 "reviewer=\"A\" at=\"2026-12-01\"/>\n</corrections>\n</remtone-scoring>\n",
            doc, rem);
    fclose(out);
    free(doc);
    assert_int_equal(rt_corrections_load(xml, &c, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "line "));
    assert_non_null(strstr(err.message, "schema"));
}

/* ---- agreement and tonic, on a hand-built night ---------------------------- */

static rt_night *hand_night(void)
{
    rt_night *n = rt_calloc(1, sizeof *n);
    rt_score_params_default(&n->params);
    rt_cutoffs_published(&n->cutoffs);
    n->recording_s = 1200;
    n->nrem_reference_uv = 1.0;
    n->channel[RT_ROLE_CHIN].present = true;
    n->n_epochs = 1;
    n->rem_epochs = 1;
    n->epochs = rt_calloc(1, sizeof *n->epochs);
    n->epochs[0] = (rt_epoch_result){.epoch = 20, .onset_s = 600, .sinbar_tonic = true,
                                     .aasm_tonic = true};
    n->n_minis3 = 10;
    n->minis3 = rt_calloc(10, sizeof *n->minis3);
    n->n_minis2 = 15;
    n->minis2 = rt_calloc(15, sizeof *n->minis2);
    for (int k = 0; k < 15; k++) {
        n->minis2[k].epoch = 20;
        n->minis2[k].onset_s = 600.0 + 2.0 * k;
        for (int r = 1; r < RT_ROLE_COUNT; r++)
            n->minis2[k].labels[r] = RT_LABEL_ABSENT;
    }
    for (int k = 0; k < 10; k++) {
        n->minis3[k].epoch = 20;
        n->minis3[k].index = k;
        n->minis3[k].onset_s = 600.0 + 3.0 * k;
        for (int r = 1; r < RT_ROLE_COUNT; r++)
            n->minis3[k].labels[r] = RT_LABEL_ABSENT;
    }
    /* remtone: chin phasic on minis 0-2, tonic on 3 */
    for (int k = 0; k < 3; k++)
        n->minis3[k].labels[RT_ROLE_CHIN] =
            RT_LABEL_SINBAR_PHASIC | RT_LABEL_AASM_PHASIC | RT_LABEL_SINBAR_ANY;
    n->minis3[3].labels[RT_ROLE_CHIN] = RT_LABEL_SINBAR_TONIC | RT_LABEL_SINBAR_ANY;
    /* the automatic indices, counted as the scorer counts them */
    rt_error err;
    assert_int_equal(rt_night_resummarise(n, &err), RT_OK);
    return n;
}

static void kappa_by_hand(void **state)
{
    (void)state;
    rt_night *night = hand_night();
    rt_error err;
    const char *dir = rt_test_dir("corrections-hand");
    /* confirm 0 and 3 and 5, reject phasic 1, reject all of 2, add phasic 4,
     * add tonic 6 */
    const char *path = rt_test_text_file(dir, "hand.csv",
        "elapsed_s,role,decision,reason,reviewer,decided_at\n"
        "600,chin,confirm,,R,2026-12-01\n"
        "603,chin,reject-phasic,artifact,R,2026-12-01\n"
        "606,chin,reject,arousal,R,2026-12-01\n"
        "609,chin,confirm,,R,2026-12-01\n"
        "612,chin,add-phasic,,R,2026-12-01\n"
        "615,chin,confirm,,R,2026-12-01\n"
        "618,chin,add-tonic,,R,2026-12-01\n");
    rt_corrections *c = NULL;
    assert_int_equal(rt_corrections_load(path, &c, &err), RT_OK);
    assert_int_equal(rt_night_correct(night, NULL, c, &err), RT_OK);
    const rt_agreement *ag = &night->corrections->agreement;
    assert_true(ag->present);
    /* Cohen 1960, kappa = (n (a + d) - S) / (n^2 - S), S = (a+b)(a+c) + (c+d)(b+d),
     * computed by hand over the 7 decided minis.
     * Phasic: remtone {0,1,2}, reviewer {0,4}: a 1, reviewer only 1, remtone
     * only 2, neither 3; S = 2*3 + 5*4 = 26; kappa = (28 - 26) / (49 - 26) = 2/23. */
    const rt_agreement_cell *p = &ag->cell[RT_ROLE_CHIN][RT_AGREE_PHASIC];
    assert_int_equal(p->n, 7);
    assert_int_equal(p->both, 1);
    assert_int_equal(p->manual_only, 1);
    assert_int_equal(p->auto_only, 2);
    assert_int_equal(p->neither, 3);
    assert_true(fabs(p->kappa - 2.0 / 23.0) < 1e-12);
    /* Tonic: remtone {3}, reviewer {3,6}: 1, 1, 0, 5; S = 2*1 + 5*6 = 32;
     * kappa = (42 - 32) / (49 - 32) = 10/17. */
    const rt_agreement_cell *t = &ag->cell[RT_ROLE_CHIN][RT_AGREE_TONIC];
    assert_true(fabs(t->kappa - 10.0 / 17.0) < 1e-12);
    /* Any: remtone {0,1,2,3}, reviewer {0,3,4,6}: 2, 2, 2, 1; S = 4*4 + 3*3 = 25;
     * kappa = (21 - 25) / (49 - 25) = -1/6 (worse than chance). */
    const rt_agreement_cell *a = &ag->cell[RT_ROLE_CHIN][RT_AGREE_ANY];
    assert_int_equal(a->both, 2);
    assert_true(fabs(a->kappa - -1.0 / 6.0) < 1e-12);
    /* The corrected chin "any" index: reviewer {0,3,4,6} on 10 minis = 40 %;
     * remtone's was {0,1,2,3} = 40 % too: two added, two removed. */
    assert_int_equal(night->index[RT_IX_SINBAR_CHIN_ANY_3S].numerator, 4);
    assert_int_equal(night->corrections->automatic[RT_IX_SINBAR_CHIN_ANY_3S].numerator, 4);
    assert_int_equal(night->corrections->change[RT_IX_SINBAR_CHIN_ANY_3S].added, 2);
    assert_int_equal(night->corrections->change[RT_IX_SINBAR_CHIN_ANY_3S].removed, 2);
    /* A tonic mark changed in the epoch: its tonic flags follow the corrected
     * marks, 2 of 10 tonic: neither SINBAR (more than half) nor AASM (at least
     * half) tonic any more (docs/corrections.md). */
    assert_int_equal(night->index[RT_IX_SINBAR_CHIN_TONIC_30S].numerator, 0);
    assert_int_equal(night->corrections->automatic[RT_IX_SINBAR_CHIN_TONIC_30S].numerator, 1);
    assert_int_equal(night->corrections->change[RT_IX_SINBAR_CHIN_TONIC_30S].removed, 1);
    /* AASM phasic marks follow the reviewer's phasic: 0 and 4 */
    assert_int_equal(night->index[RT_IX_SINBAR_CHIN_PHASIC_3S].numerator, 2);
    /* the JSON and text forms */
    json_t *j = rt_corrections_json(night);
    assert_non_null(j);
    assert_true(json_is_true(json_object_get(j, "present")));
    assert_int_equal(json_integer_value(json_object_get(json_object_get(j, "decisions"),
                                                        "confirm")), 3);
    json_decref(j);
    rt_corrections_free(c);
    rt_night_free(night);

    /* a channel the night does not have: refused with its line */
    night = hand_night();
    path = rt_test_text_file(dir, "absent.csv",
                             "elapsed_s,role,decision,reason,reviewer,decided_at\n"
                             "600,chin,confirm,,R,2026-12-01\n"
                             "603,arm-left,add-phasic,,R,2026-12-01\n");
    assert_int_equal(rt_corrections_load(path, &c, &err), RT_OK);
    assert_int_equal(rt_night_correct(night, NULL, c, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "absent.csv line 3"));
    assert_non_null(strstr(err.message, "the night has no arm-left channel"));
    assert_null(night->corrections);
    rt_corrections_free(c);
    rt_night_free(night);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(three_sources_give_the_truth),
        cmocka_unit_test(rescoring_is_idempotent),
        cmocka_unit_test(bad_decisions_are_refused),
        cmocka_unit_test(kappa_by_hand),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
