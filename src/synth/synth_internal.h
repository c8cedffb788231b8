/* Internal pieces of the synthetic night generator: the random source, the
 * night plan (hypnogram, placed activity, respiratory events) that both the
 * signal writer and the truth writer read, and the functions that build and
 * consume it. Nothing here is public; docs/synthetic-nights.md explains the
 * model. */
#ifndef REMTONE_SYNTH_INTERNAL_H
#define REMTONE_SYNTH_INTERNAL_H

#include <stddef.h>
#include <stdint.h>

#include "remtone/status.h"
#include "remtone/synth.h"

enum {
    SYNTH_EPOCH_S = 30,
    SYNTH_ROLES = 5, /* chin, arm-left, arm-right, leg-left, leg-right */
    SYNTH_EMG_RATE_HZ = 512,
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

/* Role names as in truth.json ("chin", "arm-left", ...). */
const char *rt_synth_role_name(int role);
/* AASM label ("W", "N1", "N2", "N3", "R") and EDF+ annotation text. */
const char *rt_synth_stage_label(int stage);
const char *rt_synth_stage_edf_text(int stage);
/* events.csv type and EDF+ annotation text. */
const char *rt_synth_event_name(int type);
const char *rt_synth_event_edf_text(int type);

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

typedef struct synth_burst {
    int role;
    double onset_s;    /* from recording start; onset = whole second + [0.10, 0.20] */
    double duration_s; /* 0.30 .. 0.70 */
    double rect_uv;    /* expected rectified amplitude during the burst */
    int arousal_bound;
} synth_burst;

typedef struct synth_tonic {
    double onset_s, duration_s, rect_uv; /* chin only; whole epochs */
} synth_tonic;

typedef struct synth_bout {
    int first_epoch, epochs;
    double chin_bg_uv; /* atonia level of this bout (rectified) */
} synth_bout;

typedef struct synth_event {
    long start_s, duration_s; /* whole seconds */
    int type;                 /* synth_event_type */
} synth_event;

/* Chin saturation: a swing of this amplitude and frequency added to the
 * chin, clipped by its +-500 uV range; pops decay with this time constant. */
#define SYNTH_CLIP_SWING_UV 1500.0
#define SYNTH_CLIP_SWING_HZ 1.0
#define SYNTH_POP_TAU_S 0.1
#define SYNTH_EMG_RANGE_UV 500.0

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
} synth_plan;

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
} synth_indices;

void rt_synth_indices_compute(const synth_plan *plan, int exclude_events, synth_indices *out);

/* Writers; each writes one file atomically. */
rt_status rt_synth_write_truth(const synth_plan *plan, const char *path, rt_error *err);
rt_status rt_synth_write_edf(const synth_plan *plan, const char *path, rt_error *err);

#endif
