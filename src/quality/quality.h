/* Signal quality control for one EMG stretch, as pure functions the scorer
 * calls per REM bout: marks of stretches that cannot be scored (clipping,
 * flat line or detached lead, electrode pops), the mains line frequency and
 * its notch list, a QRS detector (Pan & Tompkins 1985) and ECG artifact
 * removal by template subtraction, plus channel-level checks of the header
 * (sampling rate, prefilter text). Internal header: the results reach users
 * through the night result. docs/quality.md gives the thresholds, their
 * sources and where each call goes in the pipeline.
 *
 * Time conventions: every time here is in seconds from the first sample of
 * the stretch handed in (sample i is at i / rate_hz). Signals are in
 * microvolts. Functions are thread-safe on distinct arrays. */
#ifndef REMTONE_QUALITY_H
#define REMTONE_QUALITY_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/recording.h"
#include "remtone/score.h"
#include "remtone/status.h"

#include "dsp/bandpass.h"

/* ---- marks of stretches that cannot be scored --------------------------- */

/* The public rt_quality_kind (include/remtone/score.h) under the detectors'
 * names: one list, so a mark's reason indexes unscorable_min directly. */
typedef enum rt_quality_reason {
    RT_QUALITY_CLIPPING = RT_QUALITY_KIND_CLIPPING, /* samples at or within 0.1 % of range of
                                                       the physical limits */
    RT_QUALITY_FLAT = RT_QUALITY_KIND_FLAT, /* constant samples, or near-zero activity:
                                               detached lead */
    RT_QUALITY_POP = RT_QUALITY_KIND_POP,   /* electrode pop: a step or spike far above the
                                               local activity */
    RT_QUALITY_REASON_COUNT = RT_QUALITY_KINDS
} rt_quality_reason;

/* "clipping", "flat", "pop"; "unknown" out of range. */
const char *rt_quality_reason_name(rt_quality_reason reason);

typedef struct rt_quality_mark {
    double start_s;           /* from the stretch start, >= 0 */
    double end_s;             /* exclusive, <= n / rate_hz */
    rt_quality_reason reason;
} rt_quality_mark;

/* Thresholds of the mark detectors (docs/quality.md gives the reasons). */
#define RT_QUALITY_CLIP_FRACTION 0.001 /* of (phys_max - phys_min): "within 0.1 %" */
#define RT_QUALITY_CLIP_PAD_S 0.25     /* each clipped run widened by this on each side */
#define RT_QUALITY_FLAT_RUN_S 1.0      /* identical consecutive samples for this long */
#define RT_QUALITY_FLAT_BLOCK_S 0.5    /* block of the near-zero test */
#define RT_QUALITY_FLAT_UV 0.05        /* mean |x - block mean| below this ... */
#define RT_QUALITY_FLAT_MIN_S 3.0      /* ... in consecutive blocks covering at least this */
#define RT_QUALITY_POP_BOX_S (1.0 / 256.0) /* steps between boxes of this length (at
                                            least one sample): fixed bandwidth */
#define RT_QUALITY_POP_RATIO 10.0      /* |step| over the larger one-sided mean |step| */
#define RT_QUALITY_POP_SIDE_S 0.25     /* length of each one-sided neighbourhood */
#define RT_QUALITY_POP_MIN_UV 10.0     /* smallest step called a pop, uV per box */
#define RT_QUALITY_POP_SHIFT_S 0.05      /* level before and after a step, each over this */
#define RT_QUALITY_POP_SHIFT_SHARE 0.5   /* ... must differ by this share of their range */
#define RT_QUALITY_POP_BEFORE_S 0.25   /* pop mark: from this before the step ... */
#define RT_QUALITY_POP_AFTER_S 0.75    /* ... to this after it */
#define RT_QUALITY_MERGE_S 1.0         /* marks of one reason closer than this are joined */

/* Finds the not-scorable stretches of raw_uv[0..n) (the channel as read, in
 * uV, before any filtering), sampled at rate_hz (> 0). ch gives the physical
 * limits (phys_min, phys_max in the header's unit, scaled by uv_per_unit);
 * ch may be NULL, and then clipping is not looked for. Marks come sorted by
 * reason, then start; marks of one reason never overlap, marks of different
 * reasons may. Writes at most cap marks (marks may be NULL when cap is 0);
 * returns how many were found (may exceed cap: call again with more room).
 * work is room for n doubles, overwritten (the pop detector's box steps).
 * Allocates nothing; never fails; non-finite samples count as clipped. */
size_t rt_quality_marks(const double *raw_uv, size_t n, double rate_hz, const rt_channel_info *ch,
                        double *work, rt_quality_mark *marks, size_t cap);

/* The pop detector's last test, on a candidate box step of size d (uV) into
 * sample boundary i of x[0..n), boxes of h samples: whether the step is an
 * electrode's (the level moves, or a lone box) rather than a muscle's
 * (marks.c). rt_quality_marks calls it on the steps its ratio test keeps. */
bool rt_quality_electrode_step(const double *x, size_t n, size_t i, size_t h, double rate, double d);

/* Seconds covered by the union of the marks with the given reason
 * (reason = RT_QUALITY_REASON_COUNT: of every reason), clipped to
 * [0, duration_s]. For the "minutes not scorable by reason" summary. */
double rt_quality_marked_s(const rt_quality_mark *marks, size_t n_marks, rt_quality_reason reason,
                           double duration_s);

/* ---- channel-level checks ------------------------------------------------ */

/* AASM minimum sampling rate for EMG (AASM Manual for the Scoring of Sleep, from memory). */
#define RT_QUALITY_MIN_RATE_HZ 200.0

typedef struct rt_prefilter {
    double hp_hz;    /* high-pass corner; 0 for "HP:DC"; NAN when the text gives none.
                        A time constant "HP:0.1s" is turned into 1 / (2 pi tau) */
    double lp_hz;    /* low-pass corner; NAN when none */
    double notch_hz; /* notch centre; NAN when none (also "N:off") */
} rt_prefilter;

/* Parses an EDF prefilter text ("HP:10Hz LP:100Hz N:50Hz", case-insensitive,
 * spaces optional, decimal point or comma, keys HP, LP, N, NOTCH; unknown
 * tokens are skipped). Returns how many of the three fields were found. */
int rt_prefilter_parse(const char *text, rt_prefilter *out);

typedef struct rt_channel_check {
    bool rate_below_min;    /* rate_hz < 200 Hz: the 10-100 Hz band cannot be kept */
    rt_prefilter prefilter; /* parsed header text */
    bool hp_above_band;     /* recorded high-pass above 10 Hz: low EMG removed at source */
    bool lp_below_band;     /* recorded low-pass below 100 Hz */
    bool notch_at_source;   /* the amplifier notched the mains: expect no line in the spectrum */
} rt_channel_check;

/* Header checks of one channel; band_low_hz and band_high_hz are the
 * scorer's band (10 and 100 Hz by default). */
void rt_quality_check_channel(const rt_channel_info *ch, double band_low_hz, double band_high_hz,
                              rt_channel_check *out);

/* ---- mains interference --------------------------------------------------- */

#define RT_MAINS_PROMINENCE_DB 6.0 /* line bin over the local spectral floor: "present" */
#define RT_MAINS_NOTCH_WIDTH_HZ 2.0 /* notch width handed to the band-pass (gain 0.5) */

typedef struct rt_mains {
    double line_hz;        /* 50 or 60 when present, else 0 */
    bool present;          /* prominence_db >= RT_MAINS_PROMINENCE_DB */
    double prominence_db;  /* of the stronger candidate: largest over its harmonics of
                              10 log10(PSD at the line / median PSD 3-8 Hz either side) */
    double line_db;        /* excess line power (fundamental and harmonics inside the
                              band) over the power of the rest of the band, dB; -99 when
                              no excess */
    double line_uv_rms;    /* rms of the excess line power, uV */
    double power_uv2[2];   /* excess line power of the 50-Hz and the 60-Hz family, uV^2 */
    int n_notches;         /* fundamental and harmonics to notch, 0 when not present */
    double low_edge_db;    /* mean PSD 10-15 Hz over mean PSD 25-45 Hz, dB; NaN if not measured */
    double high_edge_db;   /* mean PSD 75-95 Hz over mean PSD 25-45 Hz, dB (mains bins left
                              out); NaN when the rate cannot hold 95 Hz */
    double notch_hz[RT_BANDPASS_MAX_NOTCHES];
} rt_mains;

/* Estimates the mains line in raw_uv[0..n) at rate_hz by Welch's method:
 * Hann-windowed segments of N samples (the smallest power of two >= rate_hz,
 * so bins are at most 1 Hz apart), 50 % overlap, FFTW plans from the shared
 * cache (fft_plans.h). Needs at least 4 segments (about 2.5 s); shorter
 * stretches give present = false. Candidates are 50 and 60 Hz with their
 * harmonics below 0.45 x rate_hz; the band [band_low_hz, band_high_hz] is the
 * scorer's (10-100 Hz). Notches: harmonics k x line_hz below both 0.45 x
 * rate_hz and 2 x band_high_hz (beyond that the band-pass alone attenuates
 * by 48 dB or more), at most RT_BANDPASS_MAX_NOTCHES. Returns RT_ERR_USAGE on
 * bad arguments, RT_ERR_NOMEM, or an FFTW plan error. */
rt_status rt_mains_estimate(const double *raw_uv, size_t n, double rate_hz, double band_low_hz,
                            double band_high_hz, rt_mains *out, rt_error *err);

/* Copies the notch list of a present line into spec (n_notches, notch_hz,
 * notch_width_hz = RT_MAINS_NOTCH_WIDTH_HZ when spec has none); leaves spec
 * unchanged when the line is absent. */
void rt_mains_apply(const rt_mains *mains, rt_bandpass_spec *spec);

/* A channel whose spectrum falls this far below its 25-45 Hz level at 10-15 Hz
 * or at 75-95 Hz was filtered narrower than the scoring band when recorded
 * (our threshold: EMG and amplifier noise are within about 15 dB across
 * 10-100 Hz; an order-4 filter an octave away takes 24 dB more). */
#define RT_BAND_EDGE_DB (-30.0)

/* Copies the spectral edges of an estimate into a channel's quality summary
 * and decides spectrum_narrow. */
void rt_quality_band_edges(const rt_mains *mains, rt_channel_quality *q);

/* ---- ECG: QRS detection and removal ---------------------------------------- */

typedef struct rt_qrs_beats {
    double *r_s;       /* R-peak times, seconds from the stretch start, increasing */
    size_t n;          /* beats found */
    bool from_chin;    /* detected in the chin channel (no ECG channel) */
    double mean_rr_s;  /* mean R-R interval, NAN below 2 beats */
    /* The evidence that detections in the chin are heart beats (from_chin
     * only; docs/quality.md). Measured on the detections before the check,
     * NAN when not measured. When the evidence is lacking, n is 0. */
    size_t candidates;      /* detections before the evidence check */
    double rate_bpm;        /* 60 / median R-R of the candidates */
    double rr_irregularity; /* median |R-R(k+1) - R-R(k)| / median R-R */
    double locked_share;    /* share of the 10-100 Hz window energy the beat-locked
                               template explains (0..1) */
    double random_share;    /* the same share at pseudo-random times (chance) */
} rt_qrs_beats;

/* QRS detector after Pan & Tompkins 1985 (IEEE Trans Biomed Eng 32:230-236):
 * zero-phase band-pass 5-15 Hz, five-point derivative, squaring, moving-window
 * integration over 150 ms, adaptive signal and noise thresholds with
 * search-back, T-wave discrimination and a 200-ms refractory period. The R
 * time is the extreme of the band-passed signal within 75 ms of the
 * integrator peak, refined by parabolic interpolation. With from_chin (no
 * ECG channel: x_uv is the raw chin EMG) a detection is kept only when the
 * raw signal within 60 ms of it correlates (r >= 0.4) with the average of
 * all detections, which drops beats "found" in muscle bursts; and then all
 * detections are dropped (n = 0) unless they look like a heart: at least
 * RT_ECG_MIN_BEATS of them, a rate of RT_ECG_MIN_BPM-RT_ECG_MAX_BPM, a
 * template that explains RT_ECG_FOUND_RATIO^2 times the share of the window
 * energy it explains at random times, and either a regular rhythm
 * (RT_QRS_CHIN_MAX_IRREGULARITY) or a template explaining at least
 * RT_QRS_CHIN_STRONG_SHARE of the energy (docs/quality.md says why: the
 * detector picks its own times, so noise alone makes a template). x_uv is at
 * rate_hz (>= 100). Fills *beats (the
 * caller frees it with rt_qrs_beats_free). RT_ERR_USAGE on bad arguments or
 * non-finite samples, RT_ERR_NOMEM. */
rt_status rt_qrs_detect(const double *x_uv, size_t n, double rate_hz, bool from_chin,
                        rt_qrs_beats *beats, rt_error *err);

/* rt_qrs_detect with its working arrays in work (3 n doubles, the caller's,
 * reused from call to call; NULL: allocated and freed here). */
rt_status rt_qrs_detect_with(const double *x_uv, size_t n, double rate_hz, bool from_chin,
                             double *work, rt_qrs_beats *beats, rt_error *err);

/* Frees beats->r_s and clears *beats; accepts NULL. */
void rt_qrs_beats_free(rt_qrs_beats *beats);

/* Default template window around each R peak (docs/quality.md): */
#define RT_ECG_PRE_S 0.15
#define RT_ECG_POST_S 0.35
/* Evidence of ECG artifact in an EMG stretch (docs/quality.md gives the
 * reasons):
 * - at least RT_ECG_MIN_BEATS beats with whole windows: one 30-s REM epoch
 *   (the shortest stretch scored) at the slowest accepted rate;
 * - a rate (60 / median R-R) of 30-120 bpm: adult heart rates in sleep
 *   (common practice); outside it the "beats" are not taken for a heart;
 * - the beat-locked template explains at least RT_ECG_FOUND_RATIO^2 times the
 *   share of the window energy that a template at pseudo-random times
 *   explains (chance, about 1 / beats): the template rms stands 3 times above
 *   that of unrelated windows. */
#define RT_ECG_MIN_BEATS 15
#define RT_ECG_MIN_BPM 30.0
#define RT_ECG_MAX_BPM 120.0
#define RT_ECG_FOUND_RATIO 3.0
/* Beats found in the chin itself (from_chin) were picked where the chin looks
 * most like a QRS, so even noise gives them a template; they count as heart
 * beats only with a regular rhythm (median successive R-R change at most 20 %
 * of the median R-R; sinus rhythm changes by a few per cent from beat to beat,
 * detections in band-limited noise by 29 % or more, typically 50-90 %) or,
 * for irregular rhythms such as atrial fibrillation, a template explaining at
 * least 45 % of the energy around the beats (noise-picked detections explain
 * at most about 30 %). Figures: docs/quality.md. */
#define RT_QRS_CHIN_MAX_IRREGULARITY 0.20
#define RT_QRS_CHIN_STRONG_SHARE 0.45

typedef struct rt_ecg_removal {
    size_t beats_used;       /* beats whose whole window lies inside the stretch */
    bool found;              /* ECG artifact in this EMG: the evidence above holds */
    bool removed;            /* the template was subtracted (only when found) */
    double template_rms_uv;  /* rms of the average QRS-locked waveform */
    double template_p2p_uv;  /* its peak-to-peak amplitude */
    double noise_rms_uv;     /* rms of the EMG around the template, per sample */
    double locked_db;        /* template energy over the EMG energy in the windows, dB */
    double rate_bpm;         /* 60 / median R-R of the beats given; NAN below 2 beats */
    double locked_share;     /* share of the window energy the template explains, 0..1 */
    double random_share;     /* the same at pseudo-random times (chance); NAN if unmeasured */
} rt_ecg_removal;

/* Template subtraction: averages emg_uv over the windows [r - pre_s, r +
 * post_s] around every beat of r_s (times from the stretch start, on the same
 * clock as emg_uv), and when the evidence above holds (found)
 * subtracts it at each beat (partial windows at the stretch ends included).
 * pre_s, post_s >= 0 (RT_ECG_PRE_S, RT_ECG_POST_S by default). Meant for the
 * band-passed EMG (docs/quality.md says why). report may be NULL.
 * RT_ERR_USAGE on bad arguments, RT_ERR_NOMEM. */
rt_status rt_ecg_subtract(double *emg_uv, size_t n, double rate_hz, const double *r_s,
                          size_t n_beats, double pre_s, double post_s, rt_ecg_removal *report,
                          rt_error *err);

typedef struct rt_time_span {
    double start_s, end_s; /* seconds from the stretch start; end exclusive */
} rt_time_span;

/* Default QRS window for burst vetoes: QRS complexes last 60-100 ms (common
 * practice), widened for the envelope's smoothing. */
#define RT_QRS_VETO_PRE_S 0.08
#define RT_QRS_VETO_POST_S 0.08

/* QRS windows [r - pre_s, r + post_s] of each beat, overlapping ones joined,
 * in increasing order. Writes at most cap; returns how many there are. */
size_t rt_qrs_windows(const double *r_s, size_t n_beats, double pre_s, double post_s,
                      rt_time_span *out, size_t cap);

/* Share (0..1) of [start_s, end_s) covered by the windows (sorted, disjoint,
 * as rt_qrs_windows writes them). 0 for an empty interval. A burst with a
 * share of 0.5 or more is refused as an ECG artifact (docs/quality.md). */
double rt_qrs_overlap(const rt_time_span *windows, size_t n_windows, double start_s, double end_s);

#endif
