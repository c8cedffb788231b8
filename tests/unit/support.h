/* Shared helpers for the cmocka unit tests. */
#ifndef REMTONE_TEST_SUPPORT_H
#define REMTONE_TEST_SUPPORT_H

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdbool.h>
#include <stdint.h>
#include <cmocka.h>

/* A fresh, empty folder for one test's files (under the build tree); the
 * returned path is static to the test process and valid until the next call. */
const char *rt_test_dir(const char *name);

/* Writes len bytes to path, failing the test on error. */
void rt_test_write_file(const char *path, const void *data, size_t len);

/* Writes a NUL-terminated text to dir/name and returns the full path
 * (static buffer, valid until the next call). */
const char *rt_test_text_file(const char *dir, const char *name, const char *text);

/* Seed for randomised tests: REMTONE_SEED from the environment, or a fixed
 * default; printed so a failing run can be repeated. */
uint64_t rt_test_seed(void);

/* ---- EDF/BDF files byte by byte (EDF specification, Kemp et al. 1992) ---- */

/* Writes text into a header field of width bytes, padded with spaces (cut
 * when longer). */
void rt_test_edf_put(unsigned char *at, int width, const char *text);

/* Byte offset of field (0 label, 1 transducer, 2 physical dimension,
 * 3 physical minimum, 4 physical maximum, 5 digital minimum, 6 digital
 * maximum, 7 prefilter, 8 samples per record, 9 reserved) of signal k
 * (0-based) in the header of a file of ns signals. */
long long rt_test_edf_signal_offset(int ns, int field, int k);

/* Writes text into that field of signal k of the header h. */
void rt_test_edf_put_signal(unsigned char *h, int ns, int field, int k, const char *text);

/* The fields of the 256-byte main header, as text where the file holds text. */
typedef struct rt_test_edf_main {
    bool bdf;              /* version "\xffBIOSEMI" (BDF) instead of "0" */
    const char *patient, *recording;
    const char *date, *time; /* "dd.mm.yy", "hh.mm.ss" */
    const char *reserved;  /* "", "EDF+C", "24BIT", ... */
    int n_records;
    const char *record_s;  /* data record duration */
    int ns;                /* signals; the header byte count follows */
} rt_test_edf_main;

/* Writes the main header (the first 256 bytes of h). */
void rt_test_edf_put_main(unsigned char *h, const rt_test_edf_main *m);

/* ---- shared fixtures (one copy for every test file) ---- */

#include <stdbool.h>
#include <jansson.h>

#include "remtone/remtone.h"
#include "dsp/bandpass.h"

/* An empty timeline and an empty label map (the test fails when they cannot
 * be made); the caller frees them. */
rt_timeline *rt_test_timeline(void);
rt_labelmap *rt_test_labelmap(void);

/* A seeded xorshift64* stream (Vigna 2016, constants from memory) with
 * uniform (0, 1) and Box-Muller Gaussian draws; seed it with rt_test_seed(). */
void rt_test_rng_seed(uint64_t seed);
double rt_test_uniform(void);
double rt_test_gauss(void);

/* Filters x in place with the scorer's band-pass as spec says, failing the
 * test on any error. */
void rt_test_bandpass(double *x, size_t n, const rt_bandpass_spec *spec);

/* Filters x in place with the scorer's band-pass (lo-hi Hz, order 4). */
void rt_test_filter(double *x, size_t n, double rate_hz, double lo_hz, double hi_hz);

/* n samples of Gaussian noise band-limited to lo-hi Hz by the scorer's own
 * band-pass, scaled to a mean rectified value of rect_uv. Caller frees. */
double *rt_test_band_noise(size_t n, double rate_hz, double lo_hz, double hi_hz, double rect_uv);

/* The whole file, NUL-terminated; *len without the NUL. Caller frees. */
char *rt_test_read_all(const char *path, size_t *len);

/* dir/truth.json of a synthetic night. Caller json_decref()s. */
json_t *rt_test_load_truth(const char *dir);

/* Writes the synthetic night o into dir, opens it, resolves its roles, loads
 * stages.csv (and events.csv when with_events) and scores it with default
 * parameters; fails the test on any error. Caller closes and frees. */
/* Scores dir/night.edf with the stage table `stages` (NULL: dir/stages.csv),
 * `threads` threads and blocks of block_s seconds (rt_night_score_blocks; 0:
 * the default); fails the test on any error. The caller frees the night. */
rt_night *rt_test_score_dir(const char *dir, const char *stages, int threads, double block_s);

void rt_test_score_synthetic(const rt_synth_options *o, const char *dir, bool with_events,
                             rt_recording **rec, rt_night **night);

/* A night made by hand (free it with free()): default parameters, the
 * published cutoffs, every index not computed; a test sets the values it
 * needs (value and status). */
rt_night *rt_test_blank_night(void);

/* ---- synthetic nights: files, channels and an independent truth recount ---- */

#include "remtone/recording.h"

/* The five EMG roles of a synthetic night as truth.json names them, and the
 * labels of their channels in night.edf (docs/synthetic-nights.md). */
extern const char *const rt_test_role_names[5];
extern const char *const rt_test_role_labels[5];

/* The four files rt_synth_write writes into its folder. */
extern const char *const rt_test_synth_files[4];

/* The default options of rt_synth_options_default for a night of hours
 * (1-12) from seed. */
rt_synth_options rt_test_synth_options(double hours, uint64_t seed);

/* Writes the synthetic night o into dir; fails the test on any error. */
void rt_test_synth_write(const rt_synth_options *o, const char *dir);

/* Checks that rt_synth_write refuses o as a usage error that names the
 * synthetic night (dir: where it would write). */
void rt_test_synth_refused(const rt_synth_options *o, const char *dir);

/* True when dir_a/name and dir_b/name hold the same bytes. */
bool rt_test_files_equal(const char *dir_a, const char *dir_b, const char *name);

/* Reads [t0_s, t0_s + dur_s) of the channel labelled label in dir/night.edf,
 * in uV (dur_s < 0: to the end); *n gets the sample count and *info, when
 * info is not NULL, the channel's header. Caller frees. */
double *rt_test_read_channel(const char *dir, const char *label, double t0_s, double dur_s, size_t *n,
                             rt_channel_info *info);

/* Least-squares (DFT) amplitude of a sinusoid of f_hz in the n samples x at
 * rate_hz, x[0] taken at t0_s seconds. */
double rt_test_sine_amplitude(const double *x, size_t n, double rate_hz, double f_hz, double t0_s);

/* Index of a role name in rt_test_role_names; fails the test on another. */
int rt_test_role_index(const char *name);

/* Length of the overlap of [a0, a1) and [b0, b1) (0 when apart). */
double rt_test_overlap(double a0, double a1, double b0, double b1);

/* One placed burst of truth.json: role index, onset and duration (s),
 * designed rectified level (uV), ratio to the background under it, mean
 * drift gain over it, and whether truth.json says each rule counts it. */
typedef struct rt_test_burst {
    int role;
    double on, dur, rect, ratio, gain;
    int aasm, sinbar, montreal;
} rt_test_burst;

/* A stretch of truth.json: onset and duration (s), and a tonic stretch's
 * designed rectified level (uV) or a respiratory event's type. */
typedef struct rt_test_span {
    double on, dur, uv;
    char type[32];
} rt_test_span;

/* The lists of a synthetic night's truth.json, as plain arrays: REM bouts
 * (first epoch, epochs, chin atonia in uV), bursts, tonic stretches,
 * respiratory events, and the drift law gain(t) = drift_end ^ (t / night_s). */
typedef struct rt_test_truth {
    int n_bouts, bout_first[64], bout_epochs[64];
    double bout_bg[64];
    size_t n_bursts, n_tonic, n_events;
    rt_test_burst *b;
    rt_test_span *tonic, *events;
    double drift_end, night_s;
} rt_test_truth;

/* Fills v from the parsed truth.json t; free with rt_test_truth_free. */
void rt_test_truth_load(json_t *t, rt_test_truth *v);
void rt_test_truth_free(rt_test_truth *v);

/* A scoring rule's burst: at least k times the background, 0.1 to max_s s. */
typedef struct rt_test_rule {
    double k, max_s;
} rt_test_rule;
extern const rt_test_rule rt_test_rule_aasm, rt_test_rule_sinbar, rt_test_rule_montreal;

/* Bit r set when a burst of role r overlaps [t0, t1) (s): a burst the rule
 * counts, or with rule NULL every placed burst. */
int rt_test_roles_in(const rt_test_truth *v, double t0, double t1, const rt_test_rule *rule);

/* 1 when one tonic stretch covers all of [t0, t1) (s). */
int rt_test_tonic_covers(const rt_test_truth *v, double t0, double t1);

/* 1 when a respiratory event overlaps [t0, t1) (s). */
int rt_test_event_touches(const rt_test_truth *v, double t0, double t1);

/* A quiet second [s, s + 1) of role r: no burst of the role within 1 s and
 * (chin) no tonic stretch; its planned level is the bout's atonia. */
int rt_test_quiet_second(const rt_test_truth *v, int r, long s);

/* Integral of the drift gain over [a, b] (s). */
double rt_test_gain_integral(const rt_test_truth *v, double a, double b);

/* Compares one index of ix (group NULL: a top-level key) with want; NAN
 * wants JSON null. */
void rt_test_check_index(json_t *ix, const char *group, const char *key, double want);

/* Recounts every index of truth.json t from its bout, burst, tonic and event
 * lists (each rule with its own k and longest burst; the RAI on the designed
 * levels times the drift gain) and compares them with "indices", or with
 * "indices_events_excluded" when exclude. */
void rt_test_truth_recount(json_t *t, int exclude);

#endif
