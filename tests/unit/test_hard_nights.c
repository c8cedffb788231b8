/* The scorer on hard synthetic nights: sustained tonic activity of any length,
 * mains hum at REM bout edges, short bursts near the amplitude limits, an
 * NREM chin as quiet as REM atonia, and bouts whose result must not depend on
 * where they start. The generator computes its truth from what it placed
 * (docs/synthetic-nights.md); the scorer sees only the EDF+ and the stages.
 *
 * Targets (docs/validation.md): every percentage index within 2 points of the
 * truth and the REM Atonia Index within 0.03; hum moves no index by more than
 * 1 point; bursts at 1.5x a rule's k found at least 95 % of the time, at 0.7x k
 * at most 5 %, durations within 0.05 s. */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "exclusions.h"
#include "quality/quality.h"
#include "remtone/remtone.h"

typedef struct scored {
    rt_night *night;
    json_t *truth;
} scored;

/* Scores dir's night with its own stages.csv or with `stages` (a path). */
static rt_night *score_dir(const char *dir, const char *stages)
{
    return rt_test_score_dir(dir, stages, 1, 0.0);
}

/* Writes the synthetic night o into a fresh folder `name`; its path in d. */
static void write_night(const rt_synth_options *o, const char *name, char d[4096])
{
    snprintf(d, 4096, "%s", rt_test_dir(name));
    rt_error err;
    if (rt_synth_write(o, d, &err) != RT_OK)
        fail_msg("%s", err.message);
}

static scored make_and_score(const rt_synth_options *o, const char *name)
{
    char d[4096];
    write_night(o, name, d);
    scored s = {score_dir(d, NULL), rt_test_load_truth(d)};
    return s;
}

static void free_scored(scored *s)
{
    rt_night_free(s->night);
    json_decref(s->truth);
}

static double truth_index(const json_t *truth, const char *id)
{
    char group[32];
    const char *dot = strchr(id, '.');
    json_t *indices = json_object_get(truth, "indices"), *t;
    if (dot) {
        snprintf(group, sizeof group, "%.*s", (int)(dot - id), id);
        t = json_object_get(json_object_get(indices, group), dot + 1);
    } else {
        t = json_object_get(indices, id);
    }
    return t ? json_number_value(t) : NAN;
}

/* 20-s Montreal windows a tonic stretch covers by exactly half: truth says
 * not tonic (more than 50 % is needed), a measurement may fall either way. */
static size_t montreal_half_windows(const json_t *truth)
{
    size_t n = 0;
    json_t *tonic = json_object_get(truth, "tonic");
    for (size_t i = 0; i < json_array_size(tonic); i++)
        n += json_array_size(json_object_get(json_array_get(tonic, i), "montreal_half_windows"));
    return n;
}

/* The tolerance of index i against the truth (docs/validation.md): 2 points
 * for a percentage, 0.03 for the REM Atonia Index, widened where the truth
 * itself is unsure. */
static double index_tolerance(const scored *s, int i)
{
    const rt_index_rule *rules = rt_index_rules();
    double tol = strcmp(rules[i].unit, "%") == 0 ? 2.0 : 0.03;
    size_t windows = s->night->index[i].denominator;
    if (i == RT_IX_MONTREAL_TONIC_CHIN && windows)
        tol += 100.0 * (double)montreal_half_windows(s->truth) / (double)windows;
    /* AASM sustained activity must be greater than the NREM minimum (AASM
     * Manual v2, from memory): epochs whose placed tone is near that
     * minimum may fall either way (the truth counts them) */
    if (i == RT_IX_AASM_TONIC_CHIN || i == RT_IX_AASM_RSWA)
        tol += truth_index(s->truth, "aasm.tonic_unsure_epochs");
    return tol;
}

/* Every index of the truth table within tolerance; returns the failures.
 * with_rai = false leaves the REM Atonia Index out: its floor is the minimum
 * of 60 per-second values (Ferri et al. 2010), so on a long noisy tonic
 * stretch it depends on the noise of each second, which the plan does not
 * hold; it is checked against the plan on nights without sustained tonic
 * (test_night_synth) and against the definition applied to the recorded
 * signal with numpy, scipy and mne on tonic nights (tests/ref/test_rai_numpy.py). */
static int check_truth(const scored *s, const char *label, bool with_rai)
{
    const rt_index_rule *rules = rt_index_rules();
    int failures = 0;
    for (int i = 0; i <= RT_IX_RAI; i++) {
        double want = truth_index(s->truth, rules[i].id);
        double got = s->night->index[i].value;
        if (!isfinite(want) || (i == RT_IX_RAI && !with_rai))
            continue;
        double tol = index_tolerance(s, i);
        int ok = isfinite(got) && fabs(got - want) <= tol;
        print_message("# %-26s %-34s truth %8.3f scored %8.3f (+-%.2f)%s\n", label, rules[i].id,
                      want, got, tol, ok ? "" : "  <-- outside tolerance");
        failures += !ok;
    }
    return failures;
}

/* Whether the truth crosses a published, verified cutoff (lower_is_worse for
 * the REM Atonia Index), the same rule the review level applies. */
static bool truth_crosses(const json_t *truth)
{
    const rt_index_rule *rules = rt_index_rules();
    for (int i = 0; i <= RT_IX_RAI; i++) {
        if (!rules[i].has_cutoff || rules[i].from_memory)
            continue;
        double v = truth_index(truth, rules[i].id);
        if (isfinite(v) && (rules[i].lower_is_worse ? v < rules[i].cutoff : v >= rules[i].cutoff))
            return true;
    }
    return false;
}

static rt_synth_options hard_options(uint64_t seed)
{
    rt_synth_options o;
    rt_synth_options_default(&o);
    o.profile = RT_SYNTH_TYPICAL_OLDER;
    o.hours = 4.0;
    o.seed = seed;
    return o;
}

/* Tonic runs of 1, 6 and 20 epochs and a whole tonic REM period, at 3, 6, 10
 * and 20 times the atonic background: the background must stay at the atonic
 * level however long the activity lasts (a scorer compares with the quiet REM
 * around it; AASM Manual, SINBAR: Frauscher et al. 2012, Sleep 35:835). */
static void tonic_of_any_length_is_seen(void **state)
{
    (void)state;
    const int runs[4] = {1, 6, 20, 0};
    const double ratios[4] = {3.0, 6.0, 10.0, 20.0};
    int failures = 0;
    for (int r = 0; r < 4; r++) {
        for (int k = 0; k < 4; k++) {
            rt_synth_options o = hard_options(11 + (uint64_t)(4 * r + k));
            o.tonic_run_epochs = runs[r];
            o.tonic_whole_bout = runs[r] == 0 ? 2 : 0;
            o.tonic_ratio = ratios[k];
            /* electrode drift through the night, x2 or x0.5 (common practice) */
            o.drift_end = k % 2 ? 2.0 : 0.5;
            char name[64], label[96];
            snprintf(name, sizeof name, "tonic_%d_%g", runs[r], ratios[k]);
            snprintf(label, sizeof label, "%s x%g", runs[r] ? name : "whole-period", ratios[k]);
            scored s = make_and_score(&o, name);
            failures += check_truth(&s, label, false);
            /* flagged when the truth crosses a verified cutoff */
            if (truth_crosses(s.truth))
                failures += s.night->level != RT_REVIEW_FLAGGED;
            free_scored(&s);
        }
    }
    assert_int_equal(failures, 0);
}

/* Mains hum of 5-200 uV at 50 and 60 Hz on a control night: the notches and
 * the padded conditioning leave every index within 1 point of the clean
 * night, and the night is not flagged (common practice: a control night is
 * not made abnormal by interference). */
static void hum_moves_nothing(void **state)
{
    (void)state;
    rt_synth_options o = hard_options(5);
    scored clean = make_and_score(&o, "hum_clean");
    const double lines[2] = {50.0, 60.0}, amps[4] = {5.0, 15.0, 60.0, 200.0};
    int failures = 0;
    for (int l = 0; l < 2; l++) {
        for (int a = 0; a < 4; a++) {
            o.mains_hz = lines[l];
            o.mains_uv = amps[a];
            o.mains_harmonics = 2;
            char name[64];
            snprintf(name, sizeof name, "hum_%g_%g", lines[l], amps[a]);
            scored s = make_and_score(&o, name);
            for (int i = 0; i <= RT_IX_RAI; i++) {
                double want = clean.night->index[i].value, got = s.night->index[i].value;
                /* 1 point, or one unit where one unit is more (a single 30-s
                 * epoch of a 4-h night's REM is about 1.1 points) */
                size_t units = clean.night->index[i].denominator;
                double tol = strcmp(rt_index_rules()[i].unit, "%") == 0
                                 ? fmax(1.0, units ? 100.0 / (double)units + 1e-9 : 1.0)
                                 : 0.01;
                int ok = isfinite(want) == isfinite(got) && (!isfinite(want) || fabs(got - want) <= tol);
                if (!ok)
                    print_message("# %s %s: clean %.3f, with hum %.3f\n", name,
                                  rt_index_rules()[i].id, want, got);
                failures += !ok;
            }
            failures += s.night->level == RT_REVIEW_FLAGGED;
            free_scored(&s);
        }
    }
    free_scored(&clean);
    assert_int_equal(failures, 0);
}

/* Nights unlike the generator's default: motor-unit (spiky) EMG, EMG at 200
 * and 1000 Hz, three rates in one file, drift, REM bouts of one epoch with
 * hum: every index within 2 points of the truth (the REM Atonia Index within
 * 0.03), and flagged where the truth crosses a verified cutoff. */
static void odd_nights_match_truth(void **state)
{
    (void)state;
    int failures = 0;
    for (int c = 0; c < 5; c++) {
        rt_synth_options o = hard_options(41 + (uint64_t)c);
        o.profile = c == 3 ? RT_SYNTH_BORDERLINE : c == 4 ? RT_SYNTH_TYPICAL_OLDER : RT_SYNTH_RBD;
        const char *name = "";
        switch (c) {
        case 0: o.spiky = 1; name = "spiky"; break;
        case 1: o.spiky = 1; o.emg_rate_hz = 1000; name = "spiky-1000hz"; break;
        case 2: o.emg_rate_hz = 200; name = "200hz"; break;
        case 3: o.mixed_rates = 1; o.drift_end = 0.5; name = "mixed-rates-drift"; break;
        default:
            o.single_epoch_bouts = 10;
            o.mains_hz = 60.0;
            o.mains_uv = 100.0;
            o.mains_harmonics = 2;
            name = "single-epoch-bouts-hum";
            break;
        }
        scored s = make_and_score(&o, name);
        failures += check_truth(&s, name, true);
        if (truth_crosses(s.truth))
            failures += s.night->level != RT_REVIEW_FLAGGED;
        free_scored(&s);
    }
    assert_int_equal(failures, 0);
}

/* Pops placed by the generator that the scorer left out: a pop's chin
 * mini-epoch (3 s) must be excluded for a pop. */
static int pops_missed(const scored *s)
{
    json_t *pops = json_object_get(json_object_get(s->truth, "artifacts"), "pops");
    int missed = 0;
    for (size_t p = 0; p < json_array_size(pops); p++) {
        double t = json_number_value(json_object_get(json_array_get(pops, p), "onset_s"));
        bool found = false;
        for (size_t m = 0; m < s->night->n_minis3; m++) {
            const rt_mini *mi = &s->night->minis3[m];
            if (t >= mi->onset_s && t < mi->onset_s + 3.0)
                found = (mi->excluded_by & RT_EXCLUDED_BY_QUALITY(RT_QUALITY_POP)) != 0;
        }
        if (!found)
            print_message("# pop at %.3f s not left out\n", t);
        missed += !found;
    }
    return missed;
}

/* One night (the same plan, seed and pops) sampled at 200 to 4096 Hz: an
 * electrode pop is a step whatever the rate, and a burst's onset is not one
 * at any rate, so every index is within the truth's tolerance at each rate
 * and within the same tolerance of the 512-Hz night, AASM tonic is computed
 * at every rate, and every placed pop is left out at every rate (a pop is a
 * step with a slow decay: common practice; AASM minimum rate 200 Hz, from
 * memory). */
static void pops_do_not_depend_on_the_rate(void **state)
{
    (void)state;
    const int rates[6] = {512, 200, 256, 1000, 2000, 4096};
    rt_synth_options o = hard_options(61);
    o.hours = 3.0;
    o.pops = 8;
    int failures = 0;
    scored ref = {NULL, NULL};
    for (int r = 0; r < 6; r++) {
        o.emg_rate_hz = rates[r];
        char name[64];
        snprintf(name, sizeof name, "rate-%dhz", rates[r]);
        scored s = make_and_score(&o, name);
        rt_test_dir(name); /* the recording is large at 4096 Hz: remove it now */
        failures += check_truth(&s, name, true);
        int missed = pops_missed(&s);
        print_message("# %s: %zu pops placed, %d missed\n", name,
                      json_array_size(json_object_get(json_object_get(s.truth, "artifacts"), "pops")),
                      missed);
        failures += missed;
        if (r == 0) {
            ref = s;
            continue;
        }
        for (int i = 0; i <= RT_IX_RAI; i++) {
            double a = ref.night->index[i].value, b = s.night->index[i].value;
            double tol = fmax(index_tolerance(&ref, i), index_tolerance(&s, i));
            int ok = isfinite(a) == isfinite(b) && (!isfinite(a) || fabs(a - b) <= tol);
            if (!ok)
                print_message("# %s %s: 512 Hz %.3f, here %.3f (+-%.2f)\n", name,
                              rt_index_rules()[i].id, a, b, tol);
            failures += !ok;
        }
        free_scored(&s);
    }
    free_scored(&ref);
    assert_int_equal(failures, 0);
}

/* Detection rates of short bursts (0.1-0.3 s, onsets anywhere) placed at a
 * fixed multiple of the background. A placed burst is found when a detected
 * burst of the same role overlaps it and satisfies the rule. */
typedef struct rates {
    size_t placed, found, dur_ok;
} rates;

static rates burst_rates(const scored *s, unsigned rule)
{
    rates r = {0, 0, 0};
    json_t *bursts = json_object_get(s->truth, "bursts");
    for (size_t i = 0; i < json_array_size(bursts); i++) {
        json_t *b = json_array_get(bursts, i);
        const char *role = json_string_value(json_object_get(b, "role"));
        double on = json_number_value(json_object_get(b, "onset_s"));
        double dur = json_number_value(json_object_get(b, "duration_s"));
        if (json_is_true(json_object_get(b, "arousal_bound")))
            continue;
        r.placed++;
        for (size_t k = 0; k < s->night->n_bursts; k++) {
            const rt_burst *d = &s->night->bursts[k];
            if (!(d->rules & rule) || strcmp(rt_role_name(d->role), role) != 0 ||
                d->onset_s >= on + dur || d->onset_s + d->duration_s <= on)
                continue;
            r.found++;
            r.dur_ok += fabs(d->duration_s - dur) <= 0.05;
            break;
        }
    }
    return r;
}

static void short_bursts_are_found(void **state)
{
    (void)state;
    /* ratio: the burst level over the background; the rule, its k and whether
     * the ratio is at least 1.5 k (found) or at most 0.7 k (not found).
     * k: AASM Manual v2 4x, SINBAR 2x (Frauscher et al. 2012), from memory. */
    struct { double ratio; unsigned rule; const char *name; bool above; } cases[] = {
        {3.0, RT_LABEL_SINBAR_PHASIC, "sinbar 1.5k", true},
        {6.0, RT_LABEL_AASM_PHASIC, "aasm 1.5k", true},
        {6.0, RT_LABEL_MONTREAL_PHASIC, "montreal 1.5k", true},
        {1.4, RT_LABEL_SINBAR_PHASIC, "sinbar 0.7k", false},
        {2.8, RT_LABEL_AASM_PHASIC, "aasm 0.7k", false},
    };
    int failures = 0;
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        rates total = {0, 0, 0};
        for (uint64_t seed = 1; total.placed < 2000 && seed < 20; seed++) {
            rt_synth_options o = hard_options(100 + seed);
            o.profile = RT_SYNTH_RBD;
            o.hours = 6.0;
            o.short_bursts = 1;
            o.burst_ratio_lo = o.burst_ratio_hi = cases[c].ratio;
            char name[64];
            snprintf(name, sizeof name, "bursts_%g_%llu", cases[c].ratio,
                     (unsigned long long)seed);
            scored s = make_and_score(&o, name);
            rates r = burst_rates(&s, cases[c].rule);
            total.placed += r.placed;
            total.found += r.found;
            total.dur_ok += r.dur_ok;
            free_scored(&s);
        }
        double found = 100.0 * (double)total.found / (double)total.placed;
        double dur_ok = total.found ? 100.0 * (double)total.dur_ok / (double)total.found : 100.0;
        print_message("# %-14s placed %zu found %.1f %% durations within 0.05 s %.1f %%\n",
                      cases[c].name, total.placed, found, dur_ok);
        failures += total.placed < 2000;
        failures += cases[c].above ? found < 95.0 : found > 5.0;
        /* durations within 0.05 s of the placed ones for 95 % */
        failures += cases[c].above && dur_ok < 95.0;
    }
    assert_int_equal(failures, 0);
}

/* Writes a copy of dir/stages.csv in which REM epochs listed by pred become
 * N2; returns the path (static). */
static const char *restaged(const char *dir, const char *name, bool (*pred)(size_t, size_t))
{
    char in[4200];
    snprintf(in, sizeof in, "%s/stages.csv", dir);
    size_t len;
    char *text = rt_test_read_all(in, &len);
    size_t cap = len * 2 + 64, used = 0;
    char *out = calloc(cap, 1);
    assert_non_null(out);
    size_t rem_seen = 0;
    for (char *line = strtok(text, "\n"); line; line = strtok(NULL, "\n")) {
        double start, dur;
        char stage[16];
        if (sscanf(line, "%lf,%lf,%15s", &start, &dur, stage) == 3 && strcmp(stage, "R") == 0) {
            /* split the REM rows into 30-s epochs so each can be relabelled */
            for (double t = start; t < start + dur - 1e-9; t += 30.0)
                used += (size_t)snprintf(out + used, cap - used, "%g,30,%s\n", t,
                                         pred(rem_seen++, (size_t)(t / 30.0)) ? "N2" : "R");
        } else {
            used += (size_t)snprintf(out + used, cap - used, "%s\n", line);
        }
        if (used + 256 > cap) {
            cap *= 2;
            out = realloc(out, cap);
            assert_non_null(out);
        }
    }
    static char path[4200];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    rt_test_write_file(path, out, used);
    free(out);
    free(text);
    return path;
}

static bool every_other_rem(size_t k, size_t epoch) { (void)epoch; return k % 2 == 1; }

/* AASM sustained activity: "at least 50 % of the epoch with chin EMG amplitude
 * greater than the minimum amplitude in NREM" (AASM Manual v2, from memory).
 * When NREM holds epochs as quiet as REM atonia (here: atonic REM epochs
 * restaged as N2), atonic REM epochs are not "greater"; tonic REM epochs
 * still are. */
static void aasm_tonic_needs_a_visible_margin(void **state)
{
    (void)state;
    rt_synth_options o = hard_options(21);
    o.tonic_run_epochs = 6;
    o.tonic_ratio = 6.0;
    char d[4096];
    write_night(&o, "aasm_margin", d);
    json_t *truth = rt_test_load_truth(d);
    rt_night *n = score_dir(d, restaged(d, "quiet-nrem.csv", every_other_rem));
    /* every REM epoch left is either atonic or placed tonic: count both */
    size_t atonic = 0, atonic_flagged = 0, tonic = 0, tonic_flagged = 0;
    json_t *stretches = json_object_get(truth, "tonic");
    for (size_t e = 0; e < n->n_epochs; e++) {
        const rt_epoch_result *er = &n->epochs[e];
        bool placed = false;
        for (size_t i = 0; i < json_array_size(stretches); i++) {
            json_t *t = json_array_get(stretches, i);
            double on = json_number_value(json_object_get(t, "onset_s"));
            double dur = json_number_value(json_object_get(t, "duration_s"));
            placed |= er->onset_s >= on - 1e-6 && er->onset_s + 30.0 <= on + dur + 1e-6;
        }
        if (placed) {
            tonic++;
            tonic_flagged += er->aasm_tonic;
        } else {
            atonic++;
            atonic_flagged += er->aasm_tonic;
        }
    }
    print_message("# NREM as quiet as REM: atonic epochs sustained %zu of %zu, tonic %zu of %zu\n",
                  atonic_flagged, atonic, tonic_flagged, tonic);
    assert_true(atonic > 20 && tonic > 3);
    assert_true(atonic_flagged * 50 <= atonic); /* at most 2 % */
    assert_int_equal(tonic_flagged, tonic);
    rt_night_free(n);
    json_decref(truth);
}

/* True for the first epoch of each REM bout (rows come in time order). */
static bool first_rem_epoch_of_bouts(size_t k, size_t epoch)
{
    static size_t last = (size_t)-2;
    bool first = k == 0 || epoch != last + 1;
    last = epoch;
    return first;
}

/* A REM bout's conditioning must not depend on where the bout starts: the
 * same night (with 60 uV of hum) staged with each bout starting one epoch
 * later gives the same conditioned envelope on every epoch the two stagings
 * share (the conditioning reads real neighbouring signal as padding: no
 * filter or notch edge at a bout edge). The ECG template is the average of
 * the bout's own beats, so with ECG bleed it moves by a few per cent near the
 * QRS complexes when the bout does (docs/scoring.md, Conditioning). */
static void bout_edges_change_nothing(void **state)
{
    (void)state;
    rt_synth_options o = hard_options(31);
    o.mains_hz = 50.0;
    o.mains_uv = 60.0;
    char d[4096], path[4200];
    write_night(&o, "bout_edges", d);
    rt_night *a = score_dir(d, NULL);
    /* the first REM epoch of every bout restaged as N2: each bout then starts
     * 30 s later, and its other epochs are conditioned from a shorter stretch */
    rt_night *b = score_dir(d, restaged(d, "shifted.csv", first_rem_epoch_of_bouts));
    snprintf(path, sizeof path, "%s/night.edf", d);
    rt_error err;
    rt_recording *rec = NULL;
    assert_int_equal(rt_recording_open(path, &rec, &err), RT_OK);
    rt_night_tracer *ta = NULL, *tb = NULL;
    assert_int_equal(rt_night_tracer_open(rec, a, &ta, &err), RT_OK);
    assert_int_equal(rt_night_tracer_open(rec, b, &tb, &err), RT_OK);
    /* the conditioned signal of every shared epoch is the same to rounding
     * (the band-pass is block-independent to 1e-9 of the peak, bandpass.h) */
    size_t epochs = 0, samples_differ = 0;
    double worst = 0.0;
    for (size_t i = 0; i < b->n_epochs; i++) {
        for (int r = 0; r < RT_ROLE_COUNT; r++) {
            if (r == RT_ROLE_ECG || !b->channel[r].present)
                continue;
            double *ea = NULL, *eb = NULL, rate = 0;
            size_t na = 0, nb = 0;
            assert_int_equal(rt_night_tracer_envelope(ta, (rt_role)r, b->epochs[i].onset_s, 30, &ea,
                                                      &na, &rate, &err), RT_OK);
            assert_int_equal(rt_night_tracer_envelope(tb, (rt_role)r, b->epochs[i].onset_s, 30, &eb,
                                                      &nb, &rate, &err), RT_OK);
            assert_int_equal(na, nb);
            for (size_t k = 0; k < na; k++) {
                double rel = fabs(ea[k] - eb[k]) / (1e-3 + fabs(ea[k]));
                worst = fmax(worst, rel);
                samples_differ += rel > 1e-6;
            }
            free(ea);
            free(eb);
        }
        epochs++;
    }
    /* labels: the same but where a bout's own atonic level moved with the
     * seconds it holds (docs/scoring.md, Background): at most 1 % */
    size_t compared = 0, differ = 0;
    for (size_t i = 0; i < b->n_minis3; i++) {
        for (size_t j = 0; j < a->n_minis3; j++) {
            if (fabs(a->minis3[j].onset_s - b->minis3[i].onset_s) > 1e-6)
                continue;
            compared++;
            for (int r = 0; r < RT_ROLE_COUNT; r++)
                differ += (a->minis3[j].labels[r] & 0x1f) != (b->minis3[i].labels[r] & 0x1f);
            break;
        }
    }
    print_message("# shared epochs %zu, envelope samples differing %zu (worst %.2g); minis %zu, "
                  "labels differing %zu\n", epochs, samples_differ, worst, compared, differ);
    assert_true(epochs > 50 && compared > 500);
    assert_int_equal(samples_differ, 0);
    assert_true(differ * 100 <= compared * RT_ROLE_COUNT);
    rt_night_tracer_close(ta);
    rt_night_tracer_close(tb);
    rt_recording_close(rec);
    rt_night_free(a);
    rt_night_free(b);
}

/* The review page's traces are the scorer's: for every 3-s mini-epoch of
 * every REM bout and every EMG role, the tracer's envelope has the median the
 * scorer stored for that mini-epoch (every 4th sample, as the scorer takes
 * it), and the background it plots is the scorer's, on a night with hum and
 * ECG (construction: one conditioning path, src/score/condition.c). */
static double median_every_4th(const double *env, size_t a, size_t b, double *scratch)
{
    size_t len = 0;
    for (size_t i = a; i < b; i += 4)
        scratch[len++] = env[i];
    for (size_t x = 1; x < len; x++) /* insertion sort: a few hundred values */
        for (size_t y = x; y > 0 && scratch[y - 1] > scratch[y]; y--) {
            double t = scratch[y];
            scratch[y] = scratch[y - 1];
            scratch[y - 1] = t;
        }
    return len % 2 ? scratch[len / 2] : 0.5 * (scratch[len / 2 - 1] + scratch[len / 2]);
}

static void page_traces_are_the_scorers(void **state)
{
    (void)state;
    rt_synth_options o = hard_options(51);
    o.hours = 2.0;
    o.mains_hz = 50.0;
    o.mains_uv = 30.0;
    o.ecg_bleed_uv = 20.0;
    char d[4096], path[4200];
    write_night(&o, "page_traces", d);
    rt_night *n = score_dir(d, NULL);
    snprintf(path, sizeof path, "%s/night.edf", d);
    rt_error err;
    rt_recording *rec = NULL;
    assert_int_equal(rt_recording_open(path, &rec, &err), RT_OK);
    rt_night_tracer *t = NULL;
    assert_int_equal(rt_night_tracer_open(rec, n, &t, &err), RT_OK);
    size_t compared = 0, differ = 0;
    double scratch[1024];
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (r == RT_ROLE_ECG || !n->channel[r].present)
            continue;
        for (size_t e = 0; e < n->n_epochs; e++) {
            double *env = NULL, rate = 0;
            size_t len = 0;
            assert_int_equal(rt_night_tracer_envelope(t, (rt_role)r, n->epochs[e].onset_s, 30, &env,
                                                      &len, &rate, &err), RT_OK);
            for (int m = 0; m < 10; m++) {
                const rt_mini *mi = &n->minis3[e * 10 + (size_t)m];
                size_t a = (size_t)llround(3.0 * m * rate), b = (size_t)llround(3.0 * (m + 1) * rate);
                double med = median_every_4th(env, a, b, scratch);
                double bg = rt_night_background_uv(n, (rt_role)r, mi->onset_s + 1.5);
                compared++;
                /* the scorer stores floats: equal to float rounding */
                differ += fabs(med - mi->envelope_uv[r]) > 1e-5 * (1.0 + med) ||
                          fabs(bg - mi->background_uv[r]) > 1e-5 * (1.0 + bg);
            }
            free(env);
        }
    }
    print_message("# mini-epochs compared %zu, differing %zu\n", compared, differ);
    assert_true(compared > 500);
    assert_int_equal(differ, 0);
    rt_night_tracer_close(t);
    rt_recording_close(rec);
    rt_night_free(n);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(tonic_of_any_length_is_seen),
        cmocka_unit_test(hum_moves_nothing),
        cmocka_unit_test(odd_nights_match_truth),
        cmocka_unit_test(pops_do_not_depend_on_the_rate),
        cmocka_unit_test(short_bursts_are_found),
        cmocka_unit_test(aasm_tonic_needs_a_visible_margin),
        cmocka_unit_test(bout_edges_change_nothing),
        cmocka_unit_test(page_traces_are_the_scorers),
    };
    /* REMTONE_TEST_FILTER=name runs only the tests whose names match (development) */
    if (getenv("REMTONE_TEST_FILTER"))
        cmocka_set_test_filter(getenv("REMTONE_TEST_FILTER"));
    return cmocka_run_group_tests(tests, NULL, NULL);
}
