/* The audit table (--minis): read back with libcsv, an RFC 4180 parser that
 * is not remtone's, and recounted. Every 3-s index must come out of the rows
 * exactly as the night reports it, with the definitions of docs/scoring.md
 * section 8 (after Frauscher et al. 2012, Sleep 35:835-847, and the AASM
 * manual's 5-of-10 mini-epoch rule). Labels that a spreadsheet would run as
 * formulas must arrive defused. */
#include "support.h"

#include <csv.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

enum { COL_EPOCH, COL_MINI, COL_CLOCK, COL_ELAPSED, COL_STAGE, COL_ROLE, COL_LABEL, COL_ENV,
       COL_BG, COL_AASM, COL_SPHASIC, COL_STONIC, COL_SANY, COL_EXCL, COL_DECISION, COL_REASON,
       COL_REVIEWER, COL_DECIDED_AT, N_COLS };
static const char *const HEADER[N_COLS] = {
    "epoch", "mini", "clock_time", "elapsed_s", "stage", "role", "label", "envelope_uv",
    "background_uv", "aasm_phasic", "sinbar_phasic", "sinbar_tonic", "sinbar_any", "excluded_by",
    "decision", "reason", "reviewer", "decided_at"};

typedef struct row {
    char f[N_COLS][96];
} row;

typedef struct table {
    row *rows;
    size_t n, cap;
    int col;
    int bad_width;
} table;

static void on_field(void *s, size_t len, void *data)
{
    table *t = data;
    if (t->col == 0) {
        if (t->n == t->cap) {
            t->cap = t->cap ? 2 * t->cap : 4096;
            t->rows = realloc(t->rows, t->cap * sizeof *t->rows);
            assert_non_null(t->rows);
        }
        memset(&t->rows[t->n], 0, sizeof t->rows[t->n]);
    }
    if (t->col < N_COLS)
        snprintf(t->rows[t->n].f[t->col], 96, "%.*s", (int)len, (const char *)s);
    t->col++;
}

static void on_row(int c, void *data)
{
    (void)c;
    table *t = data;
    if (t->col != N_COLS)
        t->bad_width++;
    t->col = 0;
    t->n++;
}

static table read_csv(const char *path)
{
    table t = {0};
    struct csv_parser p;
    assert_int_equal(csv_init(&p, CSV_STRICT | CSV_APPEND_NULL), 0);
    FILE *in = fopen(path, "rb");
    assert_non_null(in);
    char buf[65536];
    size_t n;
    while ((n = fread(buf, 1, sizeof buf, in)) > 0)
        assert_int_equal(csv_parse(&p, buf, n, on_field, on_row, &t), n);
    fclose(in);
    assert_int_equal(csv_fini(&p, on_field, on_row, &t), 0);
    csv_free(&p);
    assert_int_equal(t.bad_width, 0);
    return t;
}

typedef struct fixture {
    char dir[4096];
    rt_recording *rec;
    rt_night *night;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->dir, sizeof f->dir, "%s", rt_test_dir("minis_csv"));
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_RBD;
    o.hours = 1.5;
    o.seed = rt_test_seed();
    rt_test_score_synthetic(&o, f->dir, true, &f->rec, &f->night);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    rt_night_free(f->night);
    rt_recording_close(f->rec);
    free(f);
    return 0;
}

static table write_and_read(fixture *f, const char *name)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/%s", f->dir, name);
    rt_error err;
    if (rt_night_write_minis_csv(f->night, f->rec, NULL, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    return read_csv(path);
}

static int present_channels(const rt_night *n)
{
    int k = 0;
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        k += r != RT_ROLE_ECG && n->channel[r].present;
    return k;
}

/* Row of mini i, role r: rows come mini by mini, roles in rt_role order. */
static const row *row_of(const table *t, int channels, size_t mini, int slot)
{
    return &t->rows[1 + mini * (size_t)channels + (size_t)slot];
}

static bool flag(const row *r, int col) { return strcmp(r->f[col], "1") == 0; }
static bool scored(const row *r) { return r->f[COL_EXCL][0] == '\0'; }

static void rows_recount_the_indices(void **state)
{
    fixture *f = *state;
    const rt_night *n = f->night;
    table t = write_and_read(f, "minis.csv");
    int ch = present_channels(n);
    assert_int_equal(ch, 5);
    for (int c = 0; c < N_COLS; c++)
        assert_string_equal(t.rows[0].f[c], HEADER[c]);
    assert_int_equal(t.n, 1 + n->n_minis3 * (size_t)ch);
    assert_true(n->index[RT_IX_SINBAR_CHIN_ANY_3S].numerator > 0);
    /* a night without corrections: the decision columns are there, empty,
     * for a reviewer to fill (docs/corrections.md) */
    for (size_t i = 1; i < t.n; i++)
        for (int c = COL_DECISION; c <= COL_DECIDED_AT; c++)
            assert_string_equal(t.rows[i].f[c], "");

    /* slots: chin 0, arm-left 1, arm-right 2, leg-left 3, leg-right 4 */
    size_t scorable = 0, chin_any = 0, chin_phasic = 0, fds = 0, combined = 0;
    size_t ep_scorable = 0, ep_aasm_chin = 0, ep_chin_minis = 0, ep_any = 0;
    long last_epoch = -1;
    for (size_t i = 0; i < n->n_minis3; i++) {
        const row *chin = row_of(&t, ch, i, 0);
        assert_string_equal(chin->f[COL_ROLE], "chin");
        assert_string_equal(chin->f[COL_STAGE], "R");
        long epoch = strtol(chin->f[COL_EPOCH], NULL, 10);
        if (epoch != last_epoch) {
            /* AASM: an epoch is phasic when >= 5 of its 10 3-s minis hold a burst */
            if (last_epoch >= 0) {
                ep_scorable += ep_any > 0;
                ep_aasm_chin += ep_chin_minis >= 5;
            }
            ep_chin_minis = ep_any = 0;
            last_epoch = epoch;
        }
        if (!scored(chin))
            continue;
        ep_any++;
        scorable++;
        ep_chin_minis += flag(chin, COL_AASM);
        bool any = flag(chin, COL_SANY);
        bool arm = false;
        for (int s = 1; s <= 2; s++) {
            const row *a = row_of(&t, ch, i, s);
            assert_string_equal(a->f[COL_ROLE], s == 1 ? "arm-left" : "arm-right");
            arm |= scored(a) && flag(a, COL_SPHASIC);
        }
        chin_any += any;
        chin_phasic += flag(chin, COL_SPHASIC);
        fds += arm;
        combined += any || arm;
        /* SINBAR "any" is phasic or tonic, on every row */
        for (int s = 0; s < ch; s++) {
            const row *r = row_of(&t, ch, i, s);
            assert_int_equal(flag(r, COL_SANY), flag(r, COL_SPHASIC) || flag(r, COL_STONIC));
        }
    }
    ep_scorable += ep_any > 0;
    ep_aasm_chin += ep_chin_minis >= 5;
    const rt_index_value *ix = n->index;
    assert_int_equal(chin_any, ix[RT_IX_SINBAR_CHIN_ANY_3S].numerator);
    assert_int_equal(scorable, ix[RT_IX_SINBAR_CHIN_ANY_3S].denominator);
    assert_int_equal(chin_phasic, ix[RT_IX_SINBAR_CHIN_PHASIC_3S].numerator);
    assert_int_equal(fds, ix[RT_IX_SINBAR_FDS_PHASIC_3S].numerator);
    assert_int_equal(combined, ix[RT_IX_SINBAR_COMBINED_3S].numerator);
    assert_int_equal(scorable, ix[RT_IX_SINBAR_COMBINED_3S].denominator);
    assert_int_equal(ep_aasm_chin, ix[RT_IX_AASM_PHASIC_CHIN].numerator);
    assert_int_equal(ep_scorable, ix[RT_IX_AASM_PHASIC_CHIN].denominator);
    /* scorable minutes: 3 s per scored chin mini */
    assert_true(fabs(scorable * 3.0 / 60.0 - n->scorable_minutes) < 1e-9);
    free(t.rows);
}

static void times_follow_the_header_clock(void **state)
{
    fixture *f = *state;
    const rt_night *n = f->night;
    table t = write_and_read(f, "minis_time.csv");
    int ch = present_channels(n);
    rt_clock_time st = rt_recording_start(f->rec);
    for (size_t i = 0; i < n->n_minis3; i += 97) {
        const row *r = row_of(&t, ch, i, 0);
        double elapsed = strtod(r->f[COL_ELAPSED], NULL);
        /* a mini-epoch starts on the 3-s grid of its 30-s epoch (AASM);
         * both are counted from 1 (epoch 1 starts at 0 s) */
        long epoch = strtol(r->f[COL_EPOCH], NULL, 10);
        long mini = strtol(r->f[COL_MINI], NULL, 10);
        assert_true(epoch >= 1 && mini >= 1 && mini <= 10);
        assert_true(fabs(elapsed - ((epoch - 1) * 30.0 + (mini - 1) * 3.0)) < 1e-9);
        long s = (long)(st.hour * 3600 + st.minute * 60 + st.second + elapsed) % 86400;
        char want[16];
        snprintf(want, sizeof want, "%02ld:%02ld:%02ld", s / 3600, s / 60 % 60, s % 60);
        assert_string_equal(r->f[COL_CLOCK], want);
    }
    free(t.rows);
}

/* Spreadsheet formula injection (OWASP "CSV Injection"): a cell starting with
 * =, +, -, @, tab or carriage return gets a leading apostrophe. */
static void formula_labels_are_defused(void **state)
{
    fixture *f = *state;
    rt_night *n = f->night;
    static const char *const LABELS[] = {"=HYPERLINK(\"x\")", "+1+1", "-2", "@SUM(A1)", "\tTab"};
    static const rt_role ROLES[] = {RT_ROLE_CHIN, RT_ROLE_ARM_LEFT, RT_ROLE_ARM_RIGHT,
                                    RT_ROLE_LEG_LEFT, RT_ROLE_LEG_RIGHT};
    char saved[5][40];
    for (int i = 0; i < 5; i++) {
        memcpy(saved[i], n->channel[ROLES[i]].label, 40);
        snprintf(n->channel[ROLES[i]].label, 40, "%s", LABELS[i]);
    }
    table t = write_and_read(f, "minis_formula.csv");
    for (int i = 0; i < 5; i++) {
        char want[48];
        snprintf(want, sizeof want, "'%s", LABELS[i]);
        assert_string_equal(row_of(&t, 5, 0, i)->f[COL_LABEL], want);
        memcpy(n->channel[ROLES[i]].label, saved[i], 40);
    }
    free(t.rows);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(rows_recount_the_indices),
        cmocka_unit_test(times_follow_the_header_clock),
        cmocka_unit_test(formula_labels_are_defused),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
