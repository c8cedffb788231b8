/* Scoring a night: from a staged recording to the published RSWA indices.
 *
 * The scorer works REM bout by REM bout (a run of consecutive R epochs). For
 * every EMG role present it reads the bout, conditions it (zero-phase
 * band-pass), takes a rectified envelope and a robust local background, finds
 * phasic bursts and tonic stretches as each published rule set defines them,
 * labels every mini-epoch, and computes the indices of the rule table
 * (rt_index_rules) with their cutoffs. The exact signal definitions and why
 * they were chosen are in docs/scoring.md.
 *
 * Ownership: rt_night_score() returns an rt_night the caller frees with
 * rt_night_free(); every array inside belongs to it. Fields are read-only.
 * Thread safety: scoring different nights in different threads is safe;
 * rt_night_score_threads also shares one night among threads of its own. */
#ifndef REMTONE_SCORE_H
#define REMTONE_SCORE_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/recording.h"
#include "remtone/roles.h"
#include "remtone/status.h"
#include "remtone/timeline.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- The rule table ---------------------------------------------------- */

typedef enum rt_index_id {
    RT_IX_AASM_TONIC_CHIN = 0,  /* aasm.tonic_chin_epochs */
    RT_IX_AASM_PHASIC_CHIN,     /* aasm.phasic_chin_epochs */
    RT_IX_AASM_PHASIC_ANY,      /* aasm.phasic_any_epochs */
    RT_IX_AASM_RSWA,            /* aasm.rswa_epochs */
    RT_IX_SINBAR_CHIN_ANY_3S,   /* sinbar.chin_any_3s */
    RT_IX_SINBAR_CHIN_PHASIC_3S,/* sinbar.chin_phasic_3s */
    RT_IX_SINBAR_CHIN_TONIC_30S,/* sinbar.chin_tonic_30s */
    RT_IX_SINBAR_FDS_PHASIC_3S, /* sinbar.fds_phasic_3s */
    RT_IX_SINBAR_COMBINED_3S,   /* sinbar.chin_any_fds_phasic_3s */
    RT_IX_SINBAR_COMBINED_30S,  /* sinbar.chin_any_fds_phasic_30s */
    RT_IX_MONTREAL_TONIC_CHIN,  /* montreal.tonic_chin */
    RT_IX_MONTREAL_PHASIC_CHIN, /* montreal.phasic_chin */
    RT_IX_RAI,                  /* rai */
    RT_IX_MONTREAL_LM_PER_H,    /* montreal.rem_leg_movements_per_h */
    RT_IX_COUNT
} rt_index_id;

typedef struct rt_index_rule {
    const char *id;          /* stable id, part of the JSON contract */
    const char *title;       /* one line in plain words */
    const char *unit;        /* "%", "ratio" or "/h" */
    bool lower_is_worse;     /* true for the REM Atonia Index */
    bool has_cutoff;         /* a published cutoff exists */
    double cutoff;           /* abnormal at or above (or, lower_is_worse, below) */
    double normal_from;      /* lower_is_worse only: normal above this; between is intermediate */
    const char *source;      /* citation of the cutoff (or of the definition when none) */
    bool from_memory;        /* the value was recalled, not checked against the paper */
    double context_value;    /* a normative value for context, NaN when none */
    const char *context_source;
} rt_index_rule;

/* The RT_IX_COUNT rules, in rt_index_id order. Static; never NULL. */
const rt_index_rule *rt_index_rules(void);
/* The rule with this id, or NULL; *out_id receives its rt_index_id when not NULL. */
const rt_index_rule *rt_index_rule_find(const char *id, rt_index_id *out_id);

/* Cutoffs in force: the published ones, or a lab's own loaded from a file. */
typedef struct rt_cutoffs {
    bool has[RT_IX_COUNT];
    double value[RT_IX_COUNT];
    double normal_from[RT_IX_COUNT]; /* lower_is_worse indices */
    char origin[512];                /* "published" or the file they came from */
} rt_cutoffs;

void rt_cutoffs_published(rt_cutoffs *cutoffs);
/* Loads a cutoff file: CSV with header `index,cutoff` (optional column
 * `normal_from` for the REM Atonia Index); indices not listed keep their
 * published cutoff. Errors name the file and line. */
rt_status rt_cutoffs_load(rt_cutoffs *cutoffs, const char *path, rt_error *err);

/* ---- Parameters -------------------------------------------------------- */

/* Every scoring parameter is one row of the descriptor table
 * (rt_score_param_table): name, default, valid range, unit and its source or
 * reason. The table drives the defaults, the range checks, the JSON
 * provenance, the cohort resume key and docs/parameters.md, so a parameter
 * cannot be listed in one place and missed in another. */
typedef struct rt_score_params {
    /* conditioning */
    double band_low_hz;          /* band-pass high-pass corner, Hz */
    double band_high_hz;         /* low-pass corner, Hz (clipped below Nyquist) */
    int band_order;              /* Butterworth order of the zero-phase response */
    double envelope_window_s;    /* rectified moving-average window, s */
    /* the atonic background (docs/scoring.md, "Background") */
    double background_level_quantile; /* a second's level: this quantile of its envelope */
    double background_quantile;  /* low quantile of the night's REM minute levels fitted */
    double background_quiet_ratio; /* seconds at most this x the fitted floor are "quiet" */
    double background_drift_max; /* largest drift factor over 8 hours the fit follows */
    /* phasic bursts */
    double burst_merge_gap_s;    /* runs above threshold closer than this are one burst */
    double burst_duration_tolerance_s; /* a rule's duration limits are applied with this slack */
    double burst_min_s;          /* shortest burst, all rule sets */
    double burst_max_s;          /* longest burst, AASM and SINBAR */
    double montreal_burst_max_s; /* longest burst, Montreal */
    double aasm_burst_k;         /* AASM burst amplitude, x background */
    double sinbar_burst_k;       /* SINBAR burst amplitude, x background */
    double montreal_burst_k;     /* Montreal burst amplitude, x background */
    /* tonic activity */
    double tonic_k;              /* SINBAR/Montreal tonic level, x background */
    double tonic_abs_p2p_uv;     /* SINBAR/Montreal absolute tonic level, peak-to-peak uV */
    double aasm_nrem_quantile;   /* quantile of NREM epoch chin medians: "minimum NREM amplitude" */
    double aasm_nrem_margin;     /* "greater than" that minimum: this factor above it */
    double montreal_epoch_s;     /* Montreal tonic epoch, s */
    /* leg movements in REM from the leg EMG (AASM limb-movement rules) */
    double lm_min_s;             /* shortest movement */
    double lm_max_s;             /* longest movement */
    double lm_rise_uv;           /* rise above resting EMG at onset */
    double lm_offset_quiet_s;    /* a movement ends after this long near rest */
    double lm_bilateral_s;       /* movements of the two legs with onsets closer are one */
    /* the night */
    double min_rate_hz;          /* below this a channel is scored with a warning */
    double min_scorable_min;     /* less scorable REM is not assessable */
    double near_fraction;        /* "near the cutoff" from this share of it */
    /* Reservations (docs/scoring.md, "Reservations"): what limits a level */
    double staging_edge_tolerance_min; /* unstaged minutes allowed at either end of the
                                          recording when the staging gives no lights time */
    double index_min_epochs;     /* an index counted on less scorable REM than this many
                                    30-s epochs hold carries a reservation */
    double excluded_share_max;   /* more than this share of REM left out: a reservation */
    /* Event-aware scoring (docs/exclusions.md): mini-epochs overlapping these
     * events, widened by event_margin_s on each side, leave numerator and
     * denominator. */
    bool exclude_artifacts;      /* `artifact` events */
    bool exclude_snoring;        /* `snore` events */
    bool exclude_respiratory;    /* apneas, hypopneas, `resp-arousal` events and `arousal`
                                    events starting within resp_arousal_gap_s of the end of
                                    an apnea or hypopnea */
    double event_margin_s;
    double resp_arousal_gap_s;
} rt_score_params;

typedef enum rt_param_kind { RT_PARAM_REAL = 0, RT_PARAM_INT, RT_PARAM_BOOL } rt_param_kind;

typedef struct rt_param_desc {
    const char *name;        /* the field's name; JSON provenance key */
    rt_param_kind kind;
    size_t offset;           /* offsetof(rt_score_params, field) */
    double def, lo, hi;      /* default and inclusive valid range (bools: 0 .. 1) */
    const char *unit;        /* "Hz", "s", "uV", "x" (a factor), "" */
    const char *source;      /* published source, "common practice", "from memory" or our reason */
} rt_param_desc;

/* The descriptor table, in field order; *count receives its length. Static. */
const rt_param_desc *rt_score_param_table(size_t *count);
/* A parameter's value as a double (ints and bools converted). */
double rt_score_param_get(const rt_score_params *params, const rt_param_desc *d);

/* Fills every parameter with its default from the table. */
void rt_score_params_default(rt_score_params *params);
/* Checks every parameter against its range in the table, and the relations
 * between them; the message names the parameter. */
rt_status rt_score_params_check(const rt_score_params *params, rt_error *err);

/* ---- The night result -------------------------------------------------- */

typedef enum rt_index_status {
    RT_STATUS_ABOVE = 0,      /* at or above the cutoff */
    RT_STATUS_BELOW,          /* below the cutoff */
    RT_STATUS_INTERMEDIATE,   /* between abnormal and normal (REM Atonia Index) */
    RT_STATUS_NO_CUTOFF,      /* computed; no published cutoff */
    RT_STATUS_NOT_COMPUTED    /* a needed channel or reference is missing: see reason */
} rt_index_status;

/* "above", "below", "intermediate", "no-cutoff", "not-computed". */
const char *rt_index_status_name(rt_index_status status);

typedef struct rt_index_value {
    double value;             /* % (0..100) or ratio (0..1); NaN when not computed */
    rt_index_status status;
    size_t numerator;         /* units counted (mini-epochs, epochs or seconds) */
    size_t denominator;       /* units scored */
    char reason[200];         /* why not computed, or a note; empty otherwise */
} rt_index_value;

/* A level comes with the night's reservations (rt_night.reservations): a
 * level with any reservation reads "clear, with reservations" (and so on),
 * never as a plain level. */
typedef enum rt_review_level {
    RT_REVIEW_CLEAR = 0,       /* no index reaches or nears a cutoff */
    RT_REVIEW_NEAR,            /* an index is near a cutoff, none reaches one */
    RT_REVIEW_FLAGGED,         /* an index reaches a published cutoff: physician review */
    RT_REVIEW_NOT_ASSESSABLE   /* too little scorable REM, or no usable chin channel */
} rt_review_level;

/* "clear", "near-cutoff", "review", "not-assessable". */
const char *rt_review_level_name(rt_review_level level);

/* Activity labels of one mini-epoch on one channel (bit flags). */
enum {
    RT_LABEL_AASM_PHASIC = 1u << 0,    /* burst 0.1-5 s at >= 4x background */
    RT_LABEL_SINBAR_PHASIC = 1u << 1,  /* burst 0.1-5 s at >= 2x background */
    RT_LABEL_SINBAR_TONIC = 1u << 2,   /* > 50 % of the mini-epoch at tonic level */
    RT_LABEL_SINBAR_ANY = 1u << 3,     /* phasic or tonic (SINBAR "any") */
    RT_LABEL_MONTREAL_PHASIC = 1u << 4,/* 2-s grid: burst 0.1-10 s at >= 4x background */
    RT_LABEL_ABSENT = 1u << 6,         /* the channel is not in the recording */
    RT_LABEL_EXCLUDED = 1u << 7        /* not scorable (event, artifact); see excluded_by */
};

typedef struct rt_mini {
    size_t epoch;                       /* epoch index in the timeline */
    int index;                          /* position in the epoch, 0-based */
    double onset_s;                     /* seconds from the recording start */
    unsigned char labels[RT_ROLE_COUNT];/* RT_LABEL_* per role (ECG unused) */
    float envelope_uv[RT_ROLE_COUNT];   /* median rectified envelope, uV */
    float background_uv[RT_ROLE_COUNT]; /* median background, uV */
    unsigned excluded_by;               /* bit set of rt_event_type that excluded it */
} rt_mini;

typedef struct rt_epoch_result {
    size_t epoch;          /* epoch index in the timeline */
    double onset_s;
    size_t bout;           /* REM bout number, 0-based */
    bool aasm_tonic;       /* chin above the NREM reference >= 50 % of the epoch */
    int aasm_chin_minis;   /* 3-s minis with an AASM chin burst (0..10) */
    int aasm_any_minis;    /* with an AASM burst on any EMG channel */
    bool sinbar_tonic;     /* chin at tonic level > 50 % of the epoch */
    int sinbar_any_minis;  /* chin "any" or FDS phasic 3-s minis (0..10) */
    double tonic_share;    /* share of the epoch at the SINBAR tonic level, 0..1 */
    double activity;       /* ranking score for the evidence list */
    bool excluded;         /* wholly not scorable */
} rt_epoch_result;

typedef struct rt_burst {
    rt_role role;
    double onset_s;        /* half-height onset, seconds from the recording start */
    double duration_s;     /* half-height duration */
    double peak_ratio;     /* median envelope inside the burst / background */
    unsigned rules;        /* RT_LABEL_AASM_PHASIC | SINBAR | MONTREAL it satisfies */
} rt_burst;

/* Signal quality of one EMG channel over the night's REM (docs/quality.md). */
enum { RT_QUALITY_KINDS = 3 };          /* clipping, flat (detached lead), electrode pop */
typedef struct rt_channel_quality {
    double line_hz;            /* mains line found: 50 or 60; 0 when none */
    double line_db;            /* its power over the rest of the EMG band, dB (-99: none) */
    int notches;               /* notches added to the band-pass (fundamental, harmonics) */
    int ecg_source;            /* beats from: 0 none, 1 the ECG channel, 2 the chin itself */
    size_t beats;              /* R peaks found over REM */
    bool ecg_found;            /* ECG-locked activity found in this channel */
    bool ecg_removed;          /* and removed by template subtraction */
    size_t bursts_vetoed;      /* bursts refused because they coincide with QRS complexes */
    double unscorable_min[RT_QUALITY_KINDS]; /* REM minutes marked, by kind */
    double unscorable_total_min;
    bool hp_above_band;        /* header prefilter: high-pass above the scoring band */
    bool lp_below_band;        /* header prefilter: low-pass below the scoring band */
    bool notch_at_source;      /* header prefilter: a mains notch was applied when recording */
    double low_edge_db;        /* spectrum 10-15 Hz over 25-45 Hz, dB (NaN: not measured) */
    double high_edge_db;       /* spectrum 75-95 Hz over 25-45 Hz, dB (NaN: not measured) */
    bool spectrum_narrow;      /* either edge below -30 dB: band-limited when recorded */
} rt_channel_quality;

/* "clipping", "flat", "pop". */
const char *rt_quality_kind_name(int kind);

typedef struct rt_channel_result {
    bool present;
    char label[40];
    double rate_hz;
    bool low_rate;             /* below params.min_rate_hz: scored with a warning */
    double band_high_hz;       /* low-pass corner actually used */
    double rem_median_uv;      /* median rectified envelope over REM */
    /* The atonic REM background (docs/scoring.md, "Background"), a rectified
     * envelope level in uV: in REM bout b at time t,
     * atonic_floor_uv * night->bout_lift[b][role] * exp(atonic_drift_per_h * (t - atonic_ref_s) / 3600);
     * read it with rt_night_background_uv. */
    bool atonic_valid;         /* false: too few scorable REM seconds to fit it */
    double atonic_uv;          /* the night's typical atonic level at atonic_ref_s */
    double atonic_floor_uv;    /* the floor line at atonic_ref_s */
    double atonic_ref_s;
    double atonic_drift_per_h; /* log-level slope per hour; 0 when no drift was fitted */
    size_t atonic_minutes;     /* REM minute levels the fit used */
    rt_channel_quality quality;
} rt_channel_result;

/* Agreement between a manual RSWA scoring and remtone's labels, per role and
 * activity type, on the 3-s mini-epochs both scored (docs/agreement.md). */
enum { RT_AGREE_PHASIC = 0, RT_AGREE_TONIC, RT_AGREE_ANY, RT_AGREE_TYPES };

typedef struct rt_agreement_cell {
    size_t n;              /* mini-epochs compared */
    size_t both;           /* marked by both */
    size_t manual_only;
    size_t auto_only;
    size_t neither;
    double percent;        /* observed agreement, % (NaN when n = 0) */
    double kappa;          /* Cohen's kappa (NaN when undefined) */
    double manual_pct;     /* % of compared minis the scorer marked */
    double auto_pct;       /* % remtone marked; auto_pct - manual_pct is the index difference */
} rt_agreement_cell;

typedef struct rt_agreement {
    bool present;          /* the scoring file held a manual scoring */
    char scorer[128];
    rt_agreement_cell cell[RT_ROLE_COUNT][RT_AGREE_TYPES];
} rt_agreement;

/* What the staging covers (docs/scoring.md, "Reservations"). Epochs with a
 * stage (W, N1, N2, N3, R, MT) are staged; unscored epochs ("?" or no row)
 * are not. The staging should cover lights-off to lights-on when the scoring
 * gives them, else the whole recording; an unstaged stretch at either end is
 * allowed up to the tolerance of that end (one epoch at a lights time, since
 * the epoch grid cannot follow it exactly; params.staging_edge_tolerance_min
 * at a recording edge). Unstaged runs between the first and the last staged
 * epoch are gaps. */
typedef struct rt_staging_gap {
    double start_s;            /* seconds from the recording start */
    double duration_s;
} rt_staging_gap;

typedef struct rt_staging_summary {
    double staged_s;           /* staged epochs x epoch length, inside the expected span */
    double expect_from_s;      /* the span the staging should cover: lights-off or 0 ... */
    double expect_to_s;        /* ... to lights-on or the recording's end */
    bool lights_off_given;
    bool lights_on_given;
    double first_staged_s;     /* start of the first staged epoch (NaN when none) */
    double staged_end_s;       /* end of the last staged epoch (NaN when none) */
    double unstaged_start_s;   /* unstaged at the start of the expected span */
    double unstaged_end_s;     /* unstaged at its end */
    double tolerance_start_s;  /* allowed at the start */
    double tolerance_end_s;    /* allowed at the end */
    bool partial;              /* an end is unstaged beyond its tolerance, or nothing is staged */
    size_t n_gaps;             /* unstaged runs inside the staged span (within the expected span) */
    rt_staging_gap *gaps;      /* n_gaps, in time order; owned by the night */
    double gap_total_s;
} rt_staging_summary;

/* What limits a review level: each kind at most once per night, in this
 * order. The codes are part of the JSON contract (docs/night-json.md). */
typedef enum rt_reservation_code {
    RT_RESERVE_PARTIAL_STAGING = 0, /* "partial-staging": staging ends short of the night */
    RT_RESERVE_STAGING_GAPS,        /* "staging-gaps": unstaged stretches inside the staging */
    RT_RESERVE_REM_AHI,             /* "rem-ahi-15": REM apnea-hypopnea index >= 15/h */
    RT_RESERVE_REM_EXCLUDED,        /* "rem-excluded": more than excluded_share_max of REM
                                       left out */
    RT_RESERVE_CHANNEL_MARKED,      /* "channel-partly-unusable": quality marks on a channel */
    RT_RESERVE_FEW_UNITS,           /* "few-units": an index counted on little REM */
    RT_RESERVE_CUTOFF_UNVERIFIED,   /* "cutoff-not-verified": a recalled cutoff is reached or
                                       neared and did not decide the level */
    RT_RESERVE_COUNT
} rt_reservation_code;

/* The stable code ("partial-staging", ...); "unknown" out of range. */
const char *rt_reservation_code_name(rt_reservation_code code);

typedef struct rt_reservation {
    rt_reservation_code code;
    char text[800];            /* a sentence or two in plain words, with the numbers */
} rt_reservation;

typedef struct rt_exclusion_summary {
    double minutes[RT_EVENT_TYPE_COUNT]; /* REM minutes left out, by the event that caused it
                                            (a mini-epoch counts once, for its first cause) */
    double total_minutes;                /* REM minutes left out by any event */
    double outside_lights_minutes;       /* REM minutes outside lights-off .. lights-on */
    bool have_respiratory;               /* respiratory events were given */
    double rem_ahi;                      /* apneas + hypopneas per hour of REM; NaN if none given */
    double rem_leg_movements_per_h;      /* limb-movement events in REM per hour; NaN if none */
} rt_exclusion_summary;

typedef struct rt_night {
    char recording_path[4096];
    double recording_s;
    size_t rem_epochs;
    double rem_minutes;
    double scorable_minutes;
    size_t n_bouts;
    size_t block_s;             /* REM bouts longer than block_s + 120 s were conditioned in
                                   blocks of block_s seconds (docs/scoring.md, "Long bouts") */
    double nrem_reference_uv;            /* AASM chin reference; NaN when no NREM */
    rt_role_map roles;                   /* the channels each role was read from */
    rt_channel_result channel[RT_ROLE_COUNT];
    rt_index_value index[RT_IX_COUNT];
    rt_cutoffs cutoffs;
    rt_score_params params;
    rt_review_level level;
    size_t n_reasons;
    char reasons[RT_IX_COUNT + 4][240];  /* plain-words reasons for the level */
    size_t n_warnings;
    char warnings[16][240];
    rt_index_id headline;                /* the "REM with preserved muscle activity" index */
    size_t n_epochs;  rt_epoch_result *epochs;  /* REM epochs, in time order */
    size_t n_minis3;  rt_mini *minis3;          /* 3-s REM mini-epochs */
    size_t n_minis2;  rt_mini *minis2;          /* 2-s REM mini-epochs (Montreal) */
    size_t n_bursts;  rt_burst *bursts;         /* AASM/SINBAR/Montreal bursts in REM */
    double *bout_lift;   /* n_bouts x RT_ROLE_COUNT: each bout's atonic level over the floor
                            line (rt_night_background_uv); NaN for an absent role */
    rt_exclusion_summary exclusions;
    rt_agreement agreement;
    rt_clock_time start;                 /* the recording's start (clock times of gaps) */
    rt_staging_summary staging;
    size_t n_reservations;
    rt_reservation reservations[RT_RESERVE_COUNT]; /* in rt_reservation_code order */
} rt_night;

/* Scores one night. cutoffs may be NULL (published); params may be NULL
 * (defaults). Besides the indices and the review level it fills what the
 * staging covers (night->staging: staged time, unstaged ends, gaps) and the
 * reservations that limit the level (night->reservations). Fails with RT_ERR_STAGING when the staging does not use 30-s
 * epochs, RT_ERR_USAGE on a parameter out of range, RT_ERR_NOMEM, and with
 * the reader's status on a recording that cannot be read. A night without REM
 * or without a chin channel is a result, not a failure: its level is "not
 * assessable" with the reason. */
rt_status rt_night_score(rt_recording *rec, const rt_role_map *roles, const rt_timeline *tl,
                         const rt_score_params *params, const rt_cutoffs *cutoffs,
                         rt_night **out, rt_error *err);
/* As rt_night_score (which scores on the calling thread alone), with the EMG
 * roles' stretches shared among up to `threads` threads: 0 = the processor
 * cores available to the process, 1 = the calling thread alone. The result is
 * the same, byte for byte, for every thread count. A REM bout longer than a
 * block is conditioned in blocks of whole minutes, each with a minute of the
 * bout on either side, so memory does not grow with bout length: each thread
 * holds one block of about 24 bytes per sample (RT_NIGHT_BLOCK_SAMPLES
 * samples of the fastest EMG or ECG channel by default, docs/scoring.md,
 * "Long bouts"). RT_ERR_USAGE when threads < 0. */
rt_status rt_night_score_threads(rt_recording *rec, const rt_role_map *roles,
                                 const rt_timeline *tl, const rt_score_params *params,
                                 const rt_cutoffs *cutoffs, int threads, rt_night **out,
                                 rt_error *err);

/* Samples of the fastest channel in one block of a long REM bout, by default
 * (512 s at 512 Hz, rounded down to whole minutes). */
#define RT_NIGHT_BLOCK_SAMPLES 262144

/* rt_night_score_threads with the block length chosen: block_s seconds
 * (rounded down to whole minutes, at least 60), or 0 for the default. A bout
 * no longer than a block and two minutes is conditioned whole. The result
 * does not depend on the blocks beyond the rounding of the band-pass (about
 * 1e-9 of the signal's peak) and an ECG template averaged over a block's
 * beats instead of the bout's (docs/scoring.md, "Long bouts"). RT_ERR_USAGE
 * when threads < 0 or block_s is negative or not finite. */
rt_status rt_night_score_blocks(rt_recording *rec, const rt_role_map *roles,
                                const rt_timeline *tl, const rt_score_params *params,
                                const rt_cutoffs *cutoffs, int threads, double block_s,
                                rt_night **out, rt_error *err);
void rt_night_free(rt_night *night);

/* The conditioned envelope a reviewer is shown, exactly as the scorer
 * labelled it: a tracer conditions REM bouts (or the scorer's blocks of a long bout) on the scorer's path (same
 * padding, notches, beats and ECG removal) and keeps the last bout of each
 * role, so several epochs of one bout cost one conditioning. rec and night
 * are borrowed and must outlive the tracer; close it with
 * rt_night_tracer_close (NULL is accepted). */
typedef struct rt_night_tracer rt_night_tracer;
rt_status rt_night_tracer_open(rt_recording *rec, const rt_night *night, rt_night_tracer **out,
                               rt_error *err);
/* The envelope (uV) of a role over [t0_s, t0_s + seconds), a stretch inside
 * one REM bout on whole seconds from the bout's start: *env_out (the caller
 * frees it) holds *n_out samples at *rate_hz. RT_ERR_USAGE when the role is
 * absent or the stretch is not inside one REM bout; the reader's status
 * otherwise. */
rt_status rt_night_tracer_envelope(rt_night_tracer *t, rt_role role, double t0_s, size_t seconds,
                                   double **env_out, size_t *n_out, double *rate_hz,
                                   rt_error *err);
void rt_night_tracer_close(rt_night_tracer *t);

/* Whether index i's cutoff in force decides the review level: true when the
 * published value was checked against the published text (rule not
 * from_memory), when the index has no published cutoff, or when a lab's
 * cutoff file set its own value; false for a recalled, unverified published
 * cutoff, which reports show as context only. i in 0..RT_IX_COUNT-1. */
bool rt_night_cutoff_verified(const rt_night *night, int i);

/* The atonic background of a role at t_s (seconds from the recording start,
 * inside scored REM), uV of rectified envelope; NaN when the role is absent or
 * not fitted, or t_s is outside scored REM. The
 * relative rules compare the envelope with k times this value. */
double rt_night_background_uv(const rt_night *night, rt_role role, double t_s);

/* Fills night->agreement from the manual RSWA scoring in tl (tl->manual; may
 * be absent, then agreement.present is false and every cell has n = 0).
 * Each manual 3-s mini-epoch is matched to the REM mini-epoch of
 * night->minis3 with the same onset (within 1 ms) and compared on its role:
 * phasic with RT_LABEL_SINBAR_PHASIC, tonic with RT_LABEL_SINBAR_TONIC,
 * phasic-or-tonic with RT_LABEL_SINBAR_ANY. Minis remtone left out
 * (RT_LABEL_EXCLUDED, RT_LABEL_ABSENT), manual minis outside scored REM and
 * the ECG role are skipped. Definitions in docs/agreement.md. */
void rt_night_agreement(rt_night *night, const rt_timeline *tl);

#ifdef __cplusplus
}
#endif
#endif
