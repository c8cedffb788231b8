/* The one conditioning path of an EMG channel: every consumer that needs the
 * conditioned signal (the night scorer's two passes, the NREM reference, the
 * review page's traces) calls rt_condition_stretch, so they see the same
 * samples. A stretch is read with real neighbouring data as padding on both
 * sides (as far as the recording reaches), so the band-pass, the mains
 * notches and the ECG template subtraction settle before the stretch starts
 * and a REM bout's result does not depend on where the bout begins or ends
 * (docs/scoring.md, "Conditioning"). The steps, in order:
 *   read (uV, bipolar derivation) -> quality marks on the raw signal ->
 *   notch + band-pass (zero-phase, FFTW) -> ECG template subtraction ->
 *   rectified envelope -> per-second levels.
 * The atonic background is a property of the night, not of a stretch: it is
 * fitted from the per-second levels of every REM bout (background.c). */
#ifndef REMTONE_CONDITION_H
#define REMTONE_CONDITION_H

#include <stdbool.h>
#include <stddef.h>

#include "dsp/bandpass.h"
#include "quality/quality.h"
#include "remtone/recording.h"
#include "remtone/roles.h"
#include "remtone/score.h"

/* Padding read on each side of a stretch, seconds: far beyond the settling
 * time of the band-pass (its margin is well under a second at 10 Hz, order 4)
 * and of the 2-Hz mains notches (about 0.5 s), and long enough that an ECG
 * template has beats on both sides of the stretch edge. */
#define RT_CONDITION_PAD_S 10.0

/* How one channel is conditioned: the role's source, its band-pass with the
 * mains notches found for it, and the envelope window. Made once per role
 * and night by rt_conditioner_open; freed with rt_conditioner_close. */
typedef struct rt_conditioner {
    rt_recording *rec;             /* borrowed */
    rt_role_source src;
    const rt_channel_info *info;   /* the channel's header (physical limits) */
    rt_bandpass *bp;               /* owned */
    size_t envelope_window;        /* samples */
    double level_quantile;         /* a second's level: this quantile of its envelope */
    rt_mains mains;                /* the mains estimate behind the notches */
} rt_conditioner;

/* Opens the conditioner of a role: estimates the mains line on up to 5
 * minutes of the probe stretch [probe_t0_s, probe_t0_s + probe_s) (the first
 * REM bout; probe_s = 0 skips the estimate) and builds the band-pass with
 * params' corners and order plus the notches found. Fills c; on failure
 * nothing is left to free. */
rt_status rt_conditioner_open(rt_recording *rec, const rt_role_source *src,
                              const rt_score_params *params, double probe_t0_s, double probe_s,
                              rt_conditioner *c, rt_error *err);
void rt_conditioner_close(rt_conditioner *c);

/* A copy of an open conditioner for another thread: the same channel, mains
 * estimate and response, with a band-pass of its own (a filter keeps scratch
 * buffers), so both condition every stretch to the same samples. Close it
 * with rt_conditioner_close; on failure nothing is left to free. */
rt_status rt_conditioner_copy(const rt_conditioner *from, rt_conditioner *c, rt_error *err);

/* Heart beats for a stretch: R peaks from the ECG role when the recording has
 * one, otherwise from the raw chin (Pan & Tompkins 1985), detected over the
 * padded stretch. Times are seconds from the recording start. *source is 0
 * (none found), 1 (ECG channel) or 2 (chin). The caller frees beats with
 * rt_qrs_beats_free. */
rt_status rt_condition_beats(rt_recording *rec, const rt_role_map *roles, double t0_s,
                             size_t seconds, rt_qrs_beats *beats, int *source, rt_error *err);

/* Buffers for rt_condition_beats_with, kept from call to call (grown on
 * demand) so that a scorer reading bout after bout allocates them once.
 * Start from all zeros; free with rt_beats_work_free. */
typedef struct rt_beats_work {
    double *x, *scratch;     /* the padded stretch read, and the reader's scratch */
    double *detector;        /* the QRS detector's arrays: 3 per sample */
    size_t x_cap, scratch_cap, detector_cap;
    rt_record_keep *keep;    /* the caller's data records kept between reads, or NULL */
} rt_beats_work;

/* rt_condition_beats with the caller's buffers. */
rt_status rt_condition_beats_with(rt_recording *rec, const rt_role_map *roles, double t0_s,
                                  size_t seconds, rt_beats_work *work, rt_qrs_beats *beats,
                                  int *source, rt_error *err);
void rt_beats_work_free(rt_beats_work *work);

/* One conditioned stretch [t0, t0 + seconds) of a channel. Arrays are owned
 * by the struct and reused across calls (grown on demand); every position is
 * relative to t0, the padding is already trimmed. */
typedef struct rt_stretch {
    double t0_s;
    size_t seconds;
    double rate_hz;
    size_t n;                 /* samples of the stretch */
    double *env;              /* rectified envelope, uV, n samples */
    size_t *starts;           /* seconds + 1 sample boundaries of the seconds */
    double *level_uv;         /* per second: the background_level_quantile of the envelope */
    double *rect_mean_uv;     /* per second: mean rectified amplitude (REM Atonia Index) */
    double *rect_cum;         /* n + 1 prefix sums of the rectified signal, uV x samples */
    rt_quality_mark *marks;   /* quality marks clipped to [0, seconds], relative to t0 */
    size_t n_marks;
    rt_time_span *qrs;        /* QRS windows relative to t0 (only when ECG was found) */
    size_t n_qrs;
    rt_ecg_removal ecg;       /* what the template subtraction found */
    rt_record_keep *keep;     /* the caller's data records kept between reads, or NULL */
    /* private: buf, scratch and rect_cum are pages.h arrays */
    double *buf, *scratch;
    size_t cap, scratch_cap, sec_cap, marks_cap, qrs_cap, cum_cap;
} rt_stretch;

/* Conditions [t0_s, t0_s + seconds) of c's channel into *out, with the beats
 * of rt_condition_beats (may be NULL or empty: no ECG subtraction). The same
 * call with the same arguments gives the same samples, whoever calls it. */
rt_status rt_condition_stretch(const rt_conditioner *c, double t0_s, size_t seconds,
                               const rt_qrs_beats *beats, rt_stretch *out, rt_error *err);

/* What a caller needs of a stretch besides the envelope, the marks and the
 * QRS windows, which every stretch has. Leaving a part out leaves its arrays
 * unset; what is made is the same as rt_condition_stretch makes. */
enum {
    RT_STRETCH_LEVELS = 1u << 0, /* level_uv */
    RT_STRETCH_SUMS = 1u << 1,   /* rect_cum and rect_mean_uv */
    RT_STRETCH_ALL = RT_STRETCH_LEVELS | RT_STRETCH_SUMS
};

typedef struct rt_stretch_request {
    unsigned need;                /* RT_STRETCH_* bits */
    const rt_quality_mark *marks; /* the marks an earlier call on the same conditioner, t0_s and
                                     seconds found (its out->marks), or NULL: find them */
    size_t n_marks;
} rt_stretch_request;

/* rt_condition_stretch making only what req asks for (NULL: everything). */
rt_status rt_condition_stretch_for(const rt_conditioner *c, double t0_s, size_t seconds,
                                   const rt_qrs_beats *beats, const rt_stretch_request *req,
                                   rt_stretch *out, rt_error *err);
void rt_stretch_free(rt_stretch *s);

/* True when a quality mark of s overlaps [a_s, b_s) (relative to t0). */
bool rt_stretch_marked(const rt_stretch *s, double a_s, double b_s);

#endif
