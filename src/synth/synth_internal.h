/* Internal pieces of the synthetic night generator: the random source, the
 * night plan (hypnogram, placed activity, respiratory events) that both the
 * signal writer and the truth writer read, and the functions that build and
 * consume it. Nothing here is public; docs/synthetic-nights.md explains the
 * model. */
#ifndef REMTONE_SYNTH_INTERNAL_H
#define REMTONE_SYNTH_INTERNAL_H

#include <stddef.h>
#include <stdint.h>

#include "internal.h"
#include "remtone/status.h"
#include "remtone/synth.h"

enum {
    SYNTH_ROLES = 5, /* chin, arm-left, arm-right, leg-left, leg-right */
    SYNTH_EMG_RATE_HZ = 512, /* default EMG rate; the plan holds each role's own */
    SYNTH_EMG_RATE_MAX_HZ = 1000,
    SYNTH_ECG_RATE_HZ = 256,
    SYNTH_ECG_FIRST_BEAT = 40 /* ECG sample of the first R peak */
};

typedef enum synth_role {
    SYNTH_CHIN = 0,
    SYNTH_ARM_L,
    SYNTH_ARM_R,
    SYNTH_LEG_L,
    SYNTH_LEG_R
} synth_role;

typedef enum synth_stage { SYNTH_W = 0, SYNTH_N1, SYNTH_N2, SYNTH_N3, SYNTH_R } synth_stage;

typedef enum synth_event_type { SYNTH_APNEA = 0, SYNTH_HYPOPNEA, SYNTH_RESP_AROUSAL } synth_event_type;

enum { SYNTH_STAGES = SYNTH_R + 1, SYNTH_EVENT_TYPES = SYNTH_RESP_AROUSAL + 1 };

/* ---- Name tables: every list of names once, in enum order ---------------
 * Read them through the accessors below, which check the index. The EMG
 * channel labels live with the rest of each channel's header in signals.c
 * (rt_synth_emg_label). Static, so a file that does not read a table pays
 * nothing for it. */
/* rt_synth_profile (include/remtone/synth.h): the --profile names. */
static const char *const SYNTH_PROFILE_NAMES[RT_SYNTH_PROFILE_COUNT] = {
    "typical-older", "rbd", "borderline", "apnea"};
/* synth_role: the role names of truth.json. */
static const char *const SYNTH_ROLE_NAMES[SYNTH_ROLES] = {
    "chin", "arm-left", "arm-right", "leg-left", "leg-right"};
/* synth_stage: the AASM labels of the stage table ... */
static const char *const SYNTH_STAGE_LABELS[SYNTH_STAGES] = {"W", "N1", "N2", "N3", "R"};
/* ... and the EDF+ annotation texts (Kemp & Olivan 2003, EDF+ specification,
 * "Sleep stage ..."). */
static const char *const SYNTH_STAGE_EDF_TEXTS[SYNTH_STAGES] = {
    "Sleep stage W", "Sleep stage 1", "Sleep stage 2", "Sleep stage 3", "Sleep stage R"};
/* synth_event_type: the event table's type names ... */
static const char *const SYNTH_EVENT_NAMES[SYNTH_EVENT_TYPES] = {
    "apnea", "hypopnea", "resp-arousal"};
/* ... and the EDF+ annotation texts. */
static const char *const SYNTH_EVENT_EDF_TEXTS[SYNTH_EVENT_TYPES] = {
    "Obstructive apnea", "Hypopnea", "Respiratory arousal"};

/* Role names as in truth.json ("chin", "arm-left", ...); "unknown" out of range. */
const char *rt_synth_role_name(int role);
/* AASM label ("W", "N1", "N2", "N3", "R"; "?" out of range) and EDF+ annotation
 * text ("Sleep stage ?" out of range). */
const char *rt_synth_stage_label(int stage);
const char *rt_synth_stage_edf_text(int stage);
/* events.csv type and EDF+ annotation text ("artifact", "Artifact" out of range). */
const char *rt_synth_event_name(int type);
const char *rt_synth_event_edf_text(int type);
/* The EDF label of a role's EMG channel ("Chin1-Chin2", "FDS L", ...;
 * "unknown" out of range), from the channel table of signals.c. */
const char *rt_synth_emg_label(int role);

/* xoshiro256** (Blackman & Vigna 2018) seeded through splitmix64; written
 * here so that the output never depends on a platform's rand(). */
typedef struct synth_rng {
    uint64_t s[4];
    double spare; /* second value of the last polar-method pair */
    int has_spare;
} synth_rng;

/* Independent streams for one seed: stream ids keep the plan, each channel's
 * noise and the placeholders from consuming each other's numbers. */
void rt_synth_rng_seed(synth_rng *rng, uint64_t seed, uint64_t stream);
uint64_t rt_synth_rng_next(synth_rng *rng);
double rt_synth_rng_uniform(synth_rng *rng);                  /* [0, 1) */
double rt_synth_rng_range(synth_rng *rng, double lo, double hi); /* [lo, hi) */
int rt_synth_rng_int(synth_rng *rng, int lo, int hi);          /* lo..hi inclusive */
double rt_synth_rng_gauss(synth_rng *rng);                     /* N(0, 1), Marsaglia polar */

/* Random stream ids for rt_synth_rng_seed: the plan, and one per component
 * that a difficulty switch adds, so switching one leaves the others' numbers
 * alone; signals use 100 + channel index, pops 900. */
enum {
    SYNTH_STREAM_PLAN = 1,
    SYNTH_STREAM_SINGLE_BOUTS = 2,
    SYNTH_STREAM_TONIC_RUNS = 3,
    SYNTH_STREAM_SHORT_BURSTS = 4,
    SYNTH_STREAM_SPIKY_UNITS = 300,      /* + role: motor-unit parameters */
    SYNTH_STREAM_SPIKY_FIRING = 320,     /* + role: firing times in the recording */
    SYNTH_STREAM_SPIKY_CALIBRATION = 340 /* + role, with a fixed seed */
};

/* The phasic rules the truth counts, as coded in the scorer (include/remtone/
 * score.h, RT_LABEL_*): a burst counts for a rule when its ratio to the
 * background is at least k and its duration lies in [min_s, max_s]. */
enum { SYNTH_RULE_AASM = 0, SYNTH_RULE_SINBAR, SYNTH_RULE_MONTREAL, SYNTH_RULES };
typedef struct synth_rule {
    const char *name;
    double k, min_s, max_s;
} synth_rule;
const synth_rule *rt_synth_rule(int rule);

/* Bits of plan->sec_hold: a placed burst overlaps that second (any), and one
 * counting for each rule does. */
enum { SYNTH_HOLD_ANY = 1, SYNTH_HOLD_AASM = 2, SYNTH_HOLD_SINBAR = 4, SYNTH_HOLD_MONTREAL = 8 };

typedef struct synth_burst {
    int role;
    double onset_s;    /* from recording start; grid: whole second + [0.10, 0.20];
                          short bursts: anywhere on a 1-ms grid */
    double duration_s; /* grid: 0.30 .. 0.70; short bursts: 0.10 .. 0.30 */
    double rect_uv;    /* expected rectified amplitude during the burst (before drift) */
    double ratio;      /* rect_uv / the background it rides on */
    int arousal_bound;
} synth_burst;

/* Bit r set when rule r counts the burst (rt_synth_rule). */
unsigned rt_synth_burst_rules(const synth_burst *b);

enum { SYNTH_TONIC_PROFILE = 0, SYNTH_TONIC_RUN, SYNTH_TONIC_WHOLE_BOUT, SYNTH_TONIC_SOURCES };
/* SYNTH_TONIC_*: why a tonic stretch is there, as truth.json names it. */
static const char *const SYNTH_TONIC_SOURCE_NAMES[SYNTH_TONIC_SOURCES] = {"profile", "run",
                                                                        "whole-bout"};

typedef struct synth_tonic {
    double onset_s, duration_s, rect_uv; /* chin only; whole epochs */
    double ratio;                        /* rect_uv / the bout's atonic chin background */
    int bout;                            /* index in plan->bouts */
    int source;                          /* SYNTH_TONIC_* */
} synth_tonic;

typedef struct synth_bout {
    int first_epoch, epochs;
    double chin_bg_uv; /* atonia level of this bout (rectified) */
} synth_bout;

/* Spiky EMG (option spiky): a few motor units per channel, each firing
 * biphasic spikes (first derivative of a Gaussian) with jittered intervals,
 * plus a little band-limited Gaussian noise; scale makes the expected
 * rectified mean 1, found by a calibration run (emg_model.c). */
enum { SYNTH_SPIKY_UNITS = 3 };
typedef struct synth_spiky {
    double sigma_s[SYNTH_SPIKY_UNITS];  /* spike width: extrema at -+sigma from the centre */
    double amp[SYNTH_SPIKY_UNITS];      /* peak of each phase, before scale */
    double rate_hz[SYNTH_SPIKY_UNITS];  /* mean firing rate */
    double noise_sd;                    /* Gaussian part, before scale */
    double scale;                       /* 1 / expected rectified mean */
} synth_spiky;

typedef struct synth_event {
    long start_s, duration_s; /* whole seconds */
    int type;                 /* synth_event_type */
} synth_event;

/* Chin saturation: a swing of this amplitude and frequency added to the
 * chin, clipped by its +-500 uV range; pops decay with this time constant. */
#define SYNTH_CLIP_SWING_UV 1500.0
#define SYNTH_CLIP_SWING_HZ 1.0
#define SYNTH_POP_TAU_S 0.1

/* An electrode pop in the chin: a step of amplitude_uv at onset_s decaying
 * as exp(-(t - onset_s) / tau_s), cut 10 tau after onset. */
typedef struct synth_pop {
    double onset_s, amplitude_uv, tau_s;
} synth_pop;

/* Everything placed in one night. Arrays indexed by epoch have n_epochs
 * entries; arrays indexed by second have n_seconds. */
typedef struct synth_plan {
    rt_synth_options opt;
    int n_epochs;
    long n_seconds;
    unsigned char *stage;         /* synth_stage per epoch */
    double *bg_uv[SYNTH_ROLES];   /* background rectified level per epoch */
    unsigned char *tonic;         /* chin tonic flag per epoch */
    double *tonic_uv;             /* chin tonic level per epoch (when flagged) */
    synth_bout *bouts;
    int n_bouts;
    synth_burst *bursts; /* sorted by onset, then role */
    size_t n_bursts, cap_bursts;
    synth_tonic *tonics;
    size_t n_tonics;
    synth_event *events; /* sorted by start */
    size_t n_events, cap_events;
    int *sec_burst[SYNTH_ROLES]; /* burst index holding that second, or -1 */
    unsigned char *sec_excluded;  /* second overlaps a respiratory event or arousal */
    unsigned char *position;      /* body position code per epoch (1..4) */
    long *beats;                  /* R peaks of the ECG channel, as ECG sample indices
                                     (SYNTH_ECG_RATE_HZ), up to one past the night's end */
    size_t n_beats;
    synth_pop *pops;              /* sorted by onset; empty without the pops option */
    size_t n_pops;
    /* difficulty switches */
    int emg_rate_hz[SYNTH_ROLES];   /* samples per 1-s record of each EMG role */
    double drift_per_s;             /* ln(drift_end) / night length; 0 = no drift */
    double chin_rem_scale;          /* factor on the drawn REM chin background (< 1 only
                                       with drift_end > 1, docs: "Drift") */
    unsigned char *sec_hold[SYNTH_ROLES]; /* SYNTH_HOLD_* per second */
    int *single_epochs;             /* epochs made single-epoch REM bouts */
    int n_single;
    synth_spiky spiky[SYNTH_ROLES]; /* with the spiky option */
} synth_plan;

/* Difficulty parts of the plan (difficulty.c). */
/* Whether tonic runs or a whole tonic bout replace the profile's blocks. */
int rt_synth_tonic_runs_on(const rt_synth_options *opt);
/* Stages single-epoch REM bouts inside N2 (before the bouts are found). */
rt_status rt_synth_place_single_bouts(synth_plan *plan, rt_error *err);
/* Replaces the profile's tonic blocks by runs / a whole bout. */
rt_status rt_synth_place_tonic_runs(synth_plan *plan, rt_error *err);
/* Replaces every placed burst by short bursts (quota per role as the
 * profile's; arousal-bound ones inside REM arousals). */
rt_status rt_synth_place_short_bursts(synth_plan *plan, const double burst_minis[SYNTH_ROLES],
                                      double active_epochs, rt_error *err);
/* Fills plan->sec_hold from the burst list. */
void rt_synth_index_holds(synth_plan *plan);
/* Burst ratio range of the options (8..15 by default). */
void rt_synth_burst_ratio_range(const rt_synth_options *opt, double *lo, double *hi);
/* EMG rate of a role from the options. */
int rt_synth_role_rate_hz(const rt_synth_options *opt, int role);

/* Drift gain at t_s, and its integral over [a_s, b_s] (exactly b - a without
 * drift). */
double rt_synth_gain(const synth_plan *plan, double t_s);
double rt_synth_gain_integral(const synth_plan *plan, double a_s, double b_s);

/* Spiky EMG (emg_model.c). A generator of the unit-rectified-mean process
 * for one role at its rate; the Gaussian part is passed in by the caller
 * (the band-limited noise of the channel). */
typedef struct synth_spiky_state {
    const synth_spiky *model;
    synth_rng rng;
    double centre_s[SYNTH_SPIKY_UNITS]; /* current spike centre of each unit */
} synth_spiky_state;
/* Draws the unit parameters of every EMG role and calibrates their scale. */
rt_status rt_synth_spiky_build(synth_plan *plan, rt_error *err);
void rt_synth_spiky_start(synth_spiky_state *st, const synth_spiky *model, uint64_t seed, uint64_t stream);
/* Value at t_s (non-decreasing between calls) given unit-variance noise n. */
double rt_synth_spiky_sample(synth_spiky_state *st, double t_s, double n);

/* Band-limited Gaussian noise for the EMG: 4th-order Butterworth 20-60 Hz as
 * four biquads, scaled to unit variance (signals.c, emg_model.c). */
typedef struct synth_biquad {
    double b0, b1, b2, a1, a2; /* normalised so a0 = 1 */
} synth_biquad;
typedef struct synth_band {
    synth_biquad bq[4];
    double gain;    /* makes the output unit-variance */
    double z[4][2]; /* transposed direct form II state */
} synth_band;
/* Physical range of the EMG rows, +-uV (500 unless the plan needs more). */
double rt_synth_emg_range_uv(const synth_plan *plan);

void rt_synth_band_init(synth_band *band, double rate_hz);
double rt_synth_band_step(synth_band *band, double x);

/* Helpers of the placement (plan.c): a value on the 1-ms / 0.001-uV grid,
 * a Fisher-Yates shuffle, appending a burst, the bout holding an epoch (-1
 * outside REM). */
double rt_synth_round3(double x);
void rt_synth_shuffle(int *v, int n, synth_rng *rng);
rt_status rt_synth_push_burst(synth_plan *plan, const synth_burst *b, rt_error *err);
int rt_synth_bout_of_epoch(const synth_plan *plan, int e);

/* Builds the whole plan from options (already validated). */
rt_status rt_synth_plan_build(synth_plan *plan, const rt_synth_options *opt, rt_error *err);
void rt_synth_plan_free(synth_plan *plan);

/* Artifact part of the plan (artifacts.c): the beat list (always) and the
 * pops; called by rt_synth_plan_build, freed by rt_synth_plan_free. */
rt_status rt_synth_artifacts_build(synth_plan *plan, rt_error *err);
void rt_synth_artifacts_free(synth_plan *plan);
/* Mean heart rate in use (62 when the option is 0). */
double rt_synth_heart_rate_bpm(const rt_synth_options *opt);
/* ECG waveform in mV at t_s seconds from an R peak (0 outside -0.36..+0.66 s,
 * which holds the 256-sample beat of the ECG channel);
 * its value at 0 is rt_synth_ecg_wave(0). */
double rt_synth_ecg_wave(double t_s);
/* Artifacts added to an EMG role at time t_s (mains, bleed, pops) in uV,
 * beat_cursor an index into plan->beats kept by the caller (start at 0,
 * times must not decrease). */
double rt_synth_artifact_uv(const synth_plan *plan, int role, double t_s, size_t *beat_cursor,
                            size_t *pop_cursor);
/* Whether mains harmonic h (1 = the fundamental) is below half the role's rate. */
int rt_synth_mains_reaches(const synth_plan *plan, int role, int harmonic);
/* Chin after saturation and detachment: maps the summed chin sample at t_s. */
double rt_synth_chin_override(const synth_plan *plan, double t_s, double x_uv);

/* Designed background rectified level of a role at time t_s, including the
 * 0.5-s ramps at epoch boundaries outside REM (tonic and bursts excluded). */
double rt_synth_plan_background_uv(const synth_plan *plan, int role, double t_s);

/* Indices from the placed activity; exclude_events drops every unit that
 * overlaps an apnea, hypopnea or respiratory arousal. A value whose
 * denominator is empty is NaN (written as JSON null). */
typedef struct synth_indices {
    double aasm_tonic_chin_epochs, aasm_phasic_chin_epochs, aasm_phasic_any_epochs, aasm_rswa_epochs;
    double sinbar_chin_phasic_3s, sinbar_chin_any_3s, sinbar_chin_tonic_30s, sinbar_fds_phasic_3s,
        sinbar_chin_any_fds_phasic_3s, sinbar_chin_any_fds_phasic_30s;
    double montreal_tonic_chin, montreal_phasic_chin;
    double rai;
    /* AASM tonic epochs whose placed tone lies within SYNTH_AASM_UNSURE_LO..HI
     * of the NREM minimum: a measurement may fall either side of "greater
     * than", as a scorer's eye would; in percent of the counted epochs */
    double aasm_tonic_unsure_epochs;
} synth_indices;

/* The band of tone / NREM minimum where an AASM tonic epoch is unsure:
 * from 0.9 (the NREM epochs' own level varies) to 1.6 (remtone asks a
 * visible margin of 1.25 over a low quantile of the NREM epochs, each
 * measured to about 10 %; docs/scoring.md) */
#define SYNTH_AASM_UNSURE_LO 0.9
#define SYNTH_AASM_UNSURE_HI 1.6

void rt_synth_indices_compute(const synth_plan *plan, int exclude_events, synth_indices *out);

/* Writers; each writes one file atomically. */
rt_status rt_synth_write_truth(const synth_plan *plan, const char *path, rt_error *err);
rt_status rt_synth_write_edf(const synth_plan *plan, const char *path, rt_error *err);

#endif
