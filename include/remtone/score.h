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

/* Cutoffs in force: the published ones, or a lab's own loaded from a file.
 * Each cutoff carries its own source: line[i] is 0 for a published cutoff
 * (its source is the rule's) and the line of the cutoff file that set it
 * otherwise (its source is origin, line line[i]). */
typedef struct rt_cutoffs {
    bool has[RT_IX_COUNT];
    double value[RT_IX_COUNT];
    double normal_from[RT_IX_COUNT]; /* lower_is_worse indices */
    long line[RT_IX_COUNT];          /* 0: published; else the cutoff file's line */
    char origin[512];                /* "published", or the cutoff file when any line[i] > 0 */
} rt_cutoffs;

void rt_cutoffs_published(rt_cutoffs *cutoffs);
/* Loads a cutoff file: CSV with header `index,cutoff,unit` (optional column
 * `normal_from` for the REM Atonia Index); each row states its unit, which
 * must be the index's own ("%", "ratio" or "/h": a share of 0.3 given for a
 * percentage is refused, not read as 0.3 %). A file without the unit column
 * (the format before it) is refused with a message saying what to add.
 * Indices not listed keep their published cutoff. Errors name the file and
 * line (RT_ERR_STAGING). */
rt_status rt_cutoffs_load(rt_cutoffs *cutoffs, const char *path, rt_error *err);
/* Whether index i's cutoff in force came from a lab's cutoff file. */
bool rt_cutoff_is_lab(const rt_cutoffs *cutoffs, int i);
/* The source of index i's cutoff in force: the published citation of the
 * rule, or "FILE line N" for a lab's own. i in 0..RT_IX_COUNT-1. */
void rt_cutoff_source(const rt_cutoffs *cutoffs, int i, char *buf, size_t cap);

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
    /* REM periods (docs/scoring.md, "REM periods"): REM epochs separated by
     * less than this many minutes of other stages belong to one period */
    double rem_period_gap_min;
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
    double value;             /* in the rule's unit: % (0..100), ratio (0..1) or per hour
                                 (>= 0); NaN when not computed */
    rt_index_status status;
    size_t numerator;         /* units counted: epochs, mini-epochs, 20-s windows, seconds
                                 (REM Atonia Index) or leg movements (per-hour index) */
    size_t denominator;       /* units scored (for the per-hour index: scorable 3-s minis) */
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

/* Activity labels of one mini-epoch on one channel (bit flags). The figures
 * are the defaults; the parameters in force are night->params (burst_min_s,
 * burst_max_s, montreal_burst_max_s, aasm_burst_k, sinbar_burst_k,
 * montreal_burst_k, tonic_k, tonic_abs_p2p_uv; docs/scoring.md). */
enum {
    RT_LABEL_AASM_PHASIC = 1u << 0,    /* burst 0.1-5 s at >= 4x background */
    RT_LABEL_SINBAR_PHASIC = 1u << 1,  /* burst 0.1-5 s at >= 2x background */
    RT_LABEL_SINBAR_TONIC = 1u << 2,   /* > 50 % of the mini-epoch at tonic level */
    RT_LABEL_SINBAR_ANY = 1u << 3,     /* phasic or tonic (SINBAR "any") */
    RT_LABEL_MONTREAL_PHASIC = 1u << 4,/* 2-s grid: burst 0.1-10 s at >= 4x background */
    RT_LABEL_ABSENT = 1u << 6,         /* the channel is not in the recording */
    RT_LABEL_EXCLUDED = 1u << 7        /* not scorable (event, quality mark, outside lights) */
};

/* Kinds of signal quality marks (docs/quality.md); the index of
 * rt_channel_quality.unscorable_min; names from rt_quality_kind_name. */
typedef enum rt_quality_kind {
    RT_QUALITY_KIND_CLIPPING = 0, /* at or near the amplifier's limits */
    RT_QUALITY_KIND_FLAT,         /* constant or near-zero activity: a detached lead */
    RT_QUALITY_KIND_POP,          /* electrode pop: a step or spike far above the activity */
    RT_QUALITY_KINDS
} rt_quality_kind;

/* The bits of rt_mini.excluded_by: why the chin was left out of a mini-epoch.
 * Several may be set; no bit is set when the chin was scored there. */
#define RT_EXCLUDED_BY_EVENT(type) (1u << (type))          /* an rt_event_type, bits 0-6 */
#define RT_EXCLUDED_BY_QUALITY(kind) (1u << (8 + (kind)))  /* an rt_quality_kind, bits 8-10 */
#define RT_EXCLUDED_BY_REVIEW (1u << 14)                   /* a reviewer's exclusion (corrections.h) */
#define RT_EXCLUDED_BY_LIGHTS (1u << 15)                   /* outside lights-off .. lights-on */

/* One mini-epoch of REM: 3 s (night->minis3, SINBAR) or 2 s (night->minis2,
 * Montreal), on a grid starting at its epoch's onset. */
typedef struct rt_mini {
    size_t epoch;                       /* epoch index in the timeline */
    int index;                          /* position in the epoch, 0-based: 0..9 (3 s), 0..14 (2 s) */
    double onset_s;                     /* seconds from the recording start */
    unsigned char labels[RT_ROLE_COUNT];/* RT_LABEL_* per role (the ECG role is always 0) */
    /* Levels of 3-s minis, per EMG role (0 for an absent role, and in minis2): */
    float envelope_uv[RT_ROLE_COUNT];   /* median of the rectified envelope over the mini, uV */
    float background_uv[RT_ROLE_COUNT]; /* atonic background at the mini's middle second, uV */
    unsigned excluded_by;               /* RT_EXCLUDED_BY_* bits for the chin (quality bits in
                                           minis3 only) */
} rt_mini;

struct rt_night_corrections;

typedef struct rt_epoch_result {
    size_t epoch;          /* epoch index in the timeline */
    double onset_s;        /* seconds from the recording start */
    size_t bout;           /* REM bout number, 0-based */
    bool aasm_tonic;       /* chin above aasm_nrem_margin x the NREM reference for >= 50 % of
                              the epoch (false when there is no NREM reference) */
    int aasm_chin_minis;   /* 3-s minis with an AASM chin burst (0..10) */
    int aasm_any_minis;    /* with an AASM burst on any EMG channel (0..10) */
    bool sinbar_tonic;     /* chin at tonic level > 50 % of the epoch */
    int sinbar_any_minis;  /* chin "any" or FDS phasic 3-s minis (0..10) */
    double tonic_share;    /* share of the epoch at the SINBAR tonic level, 0..1 */
    double activity;       /* ranking score for the evidence list, >= 0: sinbar_any_minis
                              + 10 when sinbar_tonic + aasm_any_minis / 2 */
    bool excluded;         /* at least one of its 3-s minis is left out on the chin; the
                              epoch then leaves the 30-s (epoch-level) counts */
} rt_epoch_result;

typedef struct rt_burst {
    rt_role role;
    double onset_s;        /* half-height onset, seconds from the recording start */
    double duration_s;     /* half-height duration, s */
    double peak_ratio;     /* amplitude / background: the mean envelope between the edges,
                              corrected for the window's ramps (docs/scoring.md), > 0 */
    unsigned rules;        /* the RT_LABEL_*_PHASIC bits of the rule sets it satisfies */
} rt_burst;

/* Signal quality of one EMG channel over the night's REM (docs/quality.md). */
typedef struct rt_channel_quality {
    double line_hz;            /* mains line found: 50 or 60; 0 when none */
    double line_db;            /* its power over the rest of the EMG band, dB (-99: none) */
    int notches;               /* notches added to the band-pass (fundamental, harmonics) */
    int ecg_source;            /* beats from: 0 none, 1 the ECG channel, 2 the chin itself */
    size_t beats;              /* R peaks found over REM */
    bool ecg_found;            /* ECG-locked activity found in this channel */
    bool ecg_removed;          /* and removed by template subtraction */
    size_t bursts_vetoed;      /* bursts refused because they coincide with QRS complexes */
    double unscorable_min[RT_QUALITY_KINDS]; /* REM minutes marked, by rt_quality_kind */
    double unscorable_total_min;
    bool hp_above_band;        /* header prefilter: high-pass above the scoring band */
    bool lp_below_band;        /* header prefilter: low-pass below the scoring band */
    bool notch_at_source;      /* header prefilter: a mains notch was applied when recording */
    double low_edge_db;        /* spectrum 10-15 Hz over 25-45 Hz, dB (NaN: not measured) */
    double high_edge_db;       /* spectrum 75-95 Hz over 25-45 Hz, dB (NaN: not measured) */
    bool spectrum_narrow;      /* either edge below -30 dB: band-limited when recorded */
} rt_channel_quality;

/* "clipping", "flat", "pop" for an rt_quality_kind; "unknown" out of range. */
const char *rt_quality_kind_name(int kind);

/* One role's channel; every field but present is 0 for an absent role. */
typedef struct rt_channel_result {
    bool present;
    char label[40];            /* as rt_role_source.label: the channel label or "A-B" */
    double rate_hz;            /* sampling rate, Hz */
    bool low_rate;             /* below params.min_rate_hz: scored with a warning */
    double band_high_hz;       /* low-pass corner actually used, Hz */
    double rem_median_uv;      /* median rectified envelope over REM, uV */
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
    double review_minutes;               /* REM minutes a reviewer's exclusions left out
                                            (corrections.h); counted in total_minutes */
    bool have_respiratory;               /* respiratory events were given */
    double rem_ahi;                      /* apneas + hypopneas per hour of REM; NaN if none given */
    double rem_leg_movements_per_h;      /* limb-movement events in REM per hour; NaN if none */
} rt_exclusion_summary;

/* ---- REM periods, halves of the night, sleep context, norms ----------- */

/* One REM period (docs/scoring.md, "REM periods"): REM epochs separated by
 * less than params.rem_period_gap_min of other stages (or unstaged epochs),
 * with every index of the rule table computed on its own mini-epochs and
 * epochs by the night's own index code, its statuses against the cutoffs in
 * force. The same struct holds a half of the night: the periods that start
 * in it. A period's or a half's indices never change the night's level. */
typedef struct rt_rem_period {
    size_t first_epoch;        /* timeline epoch of its first REM epoch, 0-based (reports add 1) */
    size_t last_epoch;         /* of its last REM epoch */
    double onset_s;            /* start of the first REM epoch, s from the recording start */
    double end_s;              /* end of the last REM epoch */
    size_t rem_epochs;         /* its REM epochs (other stages between bouts not counted) */
    double rem_minutes;
    double scorable_minutes;   /* REM minutes with a scorable chin */
    size_t bout_first;         /* its first REM bout (0-based) */
    size_t n_bouts;            /* its REM bouts; 0 for a half without REM */
    size_t result_first;       /* its first epoch in night->epochs */
    int half;                  /* 0: it starts in the first half of the night, 1: the second */
    rt_exclusion_summary exclusions; /* REM left out and the REM event rates, of this period */
    rt_index_value index[RT_IX_COUNT];
} rt_rem_period;

/* The night as the staging tells it, by the AASM Manual for the Scoring of
 * Sleep and Associated Events (v2.x, "Parameters to be reported"; docs/
 * scoring.md, "Sleep context"). Minutes are counted inside the time in bed
 * (lights-off to lights-on; the recording's start and end when not given),
 * an epoch by its overlap with it. NaN where a value does not exist (no
 * sleep, no REM). */
typedef struct rt_sleep_context {
    double recording_min;      /* the recording's length */
    bool lights_off_given, lights_on_given;
    double in_bed_from_s;      /* lights-off, or 0 */
    double in_bed_to_s;        /* lights-on, or the recording's end */
    double in_bed_min;         /* time in bed (the manual's "total recording time") */
    double stage_min[RT_STAGE_COUNT]; /* minutes of each rt_stage in bed (RT_STAGE_UNSCORED:
                                         unstaged) */
    double stage_pct[RT_STAGE_COUNT]; /* N1, N2, N3, R: % of total sleep time; NaN otherwise */
    double sleep_min;          /* total sleep time: N1 + N2 + N3 + R */
    double efficiency_pct;     /* total sleep time / time in bed x 100 */
    double sleep_onset_s;      /* start of the first sleep epoch in bed */
    double sleep_end_s;        /* end of the last sleep epoch in bed */
    double sleep_latency_min;  /* lights-off (or the start) to sleep onset */
    double rem_latency_min;    /* sleep onset to the first R epoch */
    double waso_min;           /* W in bed after sleep onset */
    size_t rem_periods;        /* night->n_periods */
    double half_split_s;       /* the middle of the sleep period: sleep onset to the end of the
                                  last sleep epoch (NaN without sleep) */
} rt_sleep_context;

/* Where an index stands against the published values of people without REM
 * sleep behavior disorder (rt_norm_table; docs/scoring.md, "Norms"). Norms
 * never decide the level: they are context for the reader. */
typedef enum rt_norm_band {
    RT_NORM_NOT_PLACED = 0,    /* no norm for this index, not computed, age outside the norms,
                                  or no row of a lab's norms file applies */
    RT_NORM_WITHIN,            /* within the normative limit (95th percentile; RAI: at or above
                                  the limit) */
    RT_NORM_BEYOND,            /* beyond the normative limit, short of the RBD cutoff */
    RT_NORM_BEYOND_RBD_CUTOFF  /* at or beyond the cutoff that separated RBD from controls */
} rt_norm_band;

/* "not-placed", "within", "beyond-normal-limit", "beyond-rbd-cutoff". */
const char *rt_norm_band_name(rt_norm_band band);

typedef struct rt_norm_row {
    rt_index_id index;         /* the remtone index compared */
    const char *measure;       /* the published measure it is compared with */
    double limit;              /* the normative limit (95th percentile; RAI: the low limit) */
    const char *limit_source;
    bool limit_from_memory;    /* recalled, not read in the published text */
    double rbd_cutoff;         /* a published cutoff separating RBD from controls; NaN: none */
    const char *rbd_cutoff_source;
    bool rbd_cutoff_from_memory;
    double age_from, age_to;   /* years the norms cover */
    const char *group;         /* who the norms are from, in words */
    const char *method;        /* how the published values were scored */
} rt_norm_row;

/* The norm table, one row per index that has a norm; *count its length. Static. */
const rt_norm_row *rt_norm_table(size_t *count);

/* The normative value one index was placed against: a row of a lab's norms
 * file (rt_norms_load; line > 0), or the built-in row (line 0). Texts are
 * valid UTF-8. */
typedef struct rt_norm_stratum {
    long line;                 /* the norms file's line; 0: the built-in table */
    char sex;                  /* 'F', 'M', or 0 for women and men together */
    double age_from, age_to;   /* years; a file's band holds age_from <= age < age_to, the
                                  built-in one age_from <= age <= age_to */
    double percentile;         /* e.g. 95; NaN when the limit is not a percentile */
    double value;              /* the normative value, in the index's unit */
    char who[64];              /* "women aged 60-69" */
    char label[240];           /* "95th percentile (7.2 %) of women aged 60-69, lab file
                                  norms.csv line 7" */
    char source[200];          /* where the value comes from (the file's `source`) */
    char method[120];          /* how those norms were scored; "" when not given */
} rt_norm_stratum;

typedef struct rt_norm_place {
    rt_norm_band band;
    int row;                   /* the built-in rt_norm_table row (its measure and RBD cutoff);
                                  -1 when none */
    bool lab;                  /* the lab's norms file lists this index: placed against its
                                  row, never the built-in value */
    bool applied;              /* stratum holds the value placed against (a row applied) */
    rt_norm_stratum stratum;
    char text[384];            /* "above the 95th percentile (9.1 %) of adults ..." or why it
                                  was not placed ("not placed: no age given") */
} rt_norm_place;

/* A lab's own normative values (docs/scoring.md, "Norms"), by index, sex and
 * age band; made by rt_norms_load, freed by rt_norms_free (NULL accepted). */
typedef struct rt_norms rt_norms;

/* Loads a norms file: CSV with header `index,sex,age_from,age_to,percentile,
 * value,unit,source` and an optional `method` column. index is an index id
 * (remtone rules), sex F, M or any, the band holds age_from <= age < age_to
 * (years, 0 .. 150), percentile is above 50 (below 50 for the REM Atonia
 * Index, where lower is further from atonia), value is in the index's unit,
 * which the unit column must state, and source (required) says where the
 * values come from. Two rows of one index, sex and percentile whose bands
 * overlap are refused with both lines. Errors name the file and line
 * (RT_ERR_STAGING, RT_ERR_IO, RT_ERR_NOMEM). */
rt_status rt_norms_load(const char *path, rt_norms **out, rt_error *err);
void rt_norms_free(rt_norms *norms);
/* The file the norms were read from. */
const char *rt_norms_path(const rt_norms *norms);
/* The rows of a norms file in file order (`remtone rules --norms`): how many
 * there are (0 for NULL), and row k with its index in *index (may be NULL)
 * and its line, stratum, value, label, source and method in *out, as
 * rt_norms_choose fills a chosen row. False when there is no row k. */
size_t rt_norms_count(const rt_norms *norms);
bool rt_norms_row(const rt_norms *norms, size_t k, rt_index_id *index, rt_norm_stratum *out);

/* The row of `norms` that applies to index i for a person (age_years NaN
 * or sex 0 when not known): among the rows whose band holds the age, one of
 * the person's sex before one for either sex; within it the highest
 * percentile (the lowest for an index where lower is worse). Returns 1 with
 * *out filled, 0 when the file lists the index but no row applies (why says
 * so: no age given, no row for this sex, the age outside every band), -1
 * when the file does not list the index. */
int rt_norms_choose(const rt_norms *norms, rt_index_id i, double age_years, char sex,
                    rt_norm_stratum *out, char *why, size_t why_cap);

/* The person the night belongs to, as far as given. */
typedef struct rt_person {
    double age_years;          /* NaN when not given */
    char sex;                  /* 'F', 'M', or 0 when not given */
} rt_person;


/* The result of one night. Made only by rt_night_score (never declare one:
 * it is a large struct, about 48 kB on x86_64, mostly fixed text arrays) and freed with
 * rt_night_free; the arrays it points to belong to it, so a struct copy
 * shares them and must not outlive it. Its layout is public for the reports
 * and may grow between versions. Texts are NUL-terminated UTF-8. */
typedef struct rt_night {
    char recording_path[4096];           /* as given to the scorer */
    double recording_s;                  /* recording length, s */
    size_t rem_epochs;                   /* 30-s epochs staged R */
    double rem_minutes;                  /* rem_epochs / 2 */
    double scorable_minutes;             /* REM minutes with a scorable chin */
    size_t n_bouts;                      /* REM bouts (runs of R epochs) */
    size_t block_s;                      /* REM bouts longer than block_s + 120 s were
                                            conditioned in blocks of block_s seconds
                                            (docs/scoring.md, "Long bouts") */
    double nrem_reference_uv;            /* AASM chin reference; NaN when no NREM */
    rt_role_map roles;                   /* the channels each role was read from */
    rt_channel_result channel[RT_ROLE_COUNT];
    rt_index_value index[RT_IX_COUNT];
    rt_cutoffs cutoffs;
    rt_score_params params;
    rt_review_level level;
    size_t n_reasons;                    /* at most RT_IX_COUNT + 4; more are dropped */
    char reasons[RT_IX_COUNT + 4][240];  /* plain-words reasons for the level */
    size_t n_warnings;                   /* at most 16; more are dropped */
    char warnings[16][240];              /* about channels and filters, in plain words */
    rt_index_id headline;                /* the "REM with preserved muscle activity" index */
    size_t n_epochs;  rt_epoch_result *epochs;  /* REM epochs, in time order (= rem_epochs) */
    size_t n_minis3;  rt_mini *minis3;          /* 3-s REM mini-epochs, 10 per epoch:
                                                   minis3[10 e + k] is mini k of epochs[e] */
    size_t n_minis2;  rt_mini *minis2;          /* 2-s REM mini-epochs (Montreal), 15 per epoch */
    size_t n_bursts;  rt_burst *bursts;         /* AASM/SINBAR/Montreal bursts in REM */
    double *bout_lift;   /* n_bouts x RT_ROLE_COUNT: each bout's atonic level over the floor
                            line (rt_night_background_uv); NaN for an absent role */
    rt_exclusion_summary exclusions;
    rt_agreement agreement;
    rt_clock_time start;                 /* the recording's start (clock times of gaps) */
    rt_staging_summary staging;
    size_t n_reservations;
    rt_reservation reservations[RT_RESERVE_COUNT]; /* in rt_reservation_code order */
    rt_sleep_context sleep;              /* the staging's sleep context */
    size_t n_periods;  rt_rem_period *periods;  /* REM periods, in time order */
    rt_rem_period halves[2];             /* the periods starting in each half of the night */
    rt_person person;                    /* rt_night_place_norms; not given by default */
    bool norms_placed;                   /* rt_night_place_norms was called */
    rt_norm_place norms[RT_IX_COUNT];    /* each index against its norm */
    char norms_file[512];                /* the lab's norms file placed against; "" when
                                            only the built-in table was */
    /* NULL, or a reviewer's decisions applied (rt_night_correct,
     * remtone/corrections.h): then index, level, reasons, reservations,
     * exclusions and scorable_minutes are the corrected ones, and this holds
     * the automatic values and what changed. minis3, minis2, epochs and
     * bursts stay remtone's own detections. */
    struct rt_night_corrections *corrections;
} rt_night;

/* Scores one night. rec, roles, tl and out are required; cutoffs may be NULL
 * (published); params may be NULL (defaults). Besides the indices and the
 * review level it fills what the staging covers (night->staging: staged
 * time, unstaged ends, gaps) and the reservations that limit the level
 * (night->reservations). Fails with RT_ERR_USAGE on a NULL argument or a
 * parameter out of range (rt_score_params_check), RT_ERR_STAGING when the
 * staging does not use 30-s epochs, RT_ERR_NOMEM, and with the reader's status
 * (RT_ERR_IO, RT_ERR_RECORDING) on a recording that cannot be read. A night
 * without REM, with too little scorable REM (params.min_scorable_min) or
 * without a chin channel is a result, not a failure: RT_OK, its level
 * RT_REVIEW_NOT_ASSESSABLE with the reason in night->reasons. The staging is
 * not checked against the recording's length here: call rt_timeline_check. */
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

/* Places every index of the night (not of its periods) against the norm
 * table for this person: age_years NaN or sex 0 when not known ('F' or 'M'
 * otherwise). An age outside a row's ages leaves that index not placed, with
 * the reason in its text. Sets night->person, night->norms_placed and
 * night->norms. RT_ERR_USAGE for an age outside 0..130 or another sex. */
rt_status rt_night_place_norms(rt_night *night, double age_years, char sex, rt_error *err);
/* The same with a lab's norms file (NULL: the built-in table alone): an
 * index the file lists is placed against its row for this person
 * (rt_norms_choose), or not placed when none applies, never against the
 * built-in value; an index it does not list keeps the built-in table. The
 * file's values are lab-supplied context and never decide the level.
 * night->norms_file receives its path. */
rt_status rt_night_place_norms_from(rt_night *night, const rt_norms *norms, double age_years,
                                    char sex, rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
