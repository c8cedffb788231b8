/* Zero-phase band-pass (with optional notches) for conditioning EMG before
 * envelopes are taken, computed in the frequency domain with FFTW.
 *
 * The response G(f) is real and non-negative, so the filter shifts no phase:
 * a burst stays where it was. It is the squared magnitude of a digital
 * Butterworth high-pass times a digital Butterworth low-pass (the steady state
 * of running both forward and backward, as scipy.signal.sosfiltfilt does),
 * times Gaussian notches. Long signals are processed in fixed-size blocks by
 * overlap-save, so one FFTW plan per block size serves every REM bout of every
 * night, and the result does not depend on where the blocks fall (to 1e-9 of
 * the signal's peak). Signal edges are extended by mirror reflection. FFTW
 * stays out of public headers. docs/conditioning.md explains the choices. */
#ifndef REMTONE_BANDPASS_H
#define REMTONE_BANDPASS_H

#include <stddef.h>

#include "remtone/status.h"

typedef struct rt_bandpass rt_bandpass;

enum { RT_BANDPASS_MAX_ORDER = 8, RT_BANDPASS_MAX_NOTCHES = 8 };

typedef struct rt_bandpass_spec {
    double rate_hz;        /* sampling rate, finite and > 0 */
    double low_hz;         /* high-pass corner: the zero-phase gain is exactly 0.5
                              (-6 dB, i.e. -3 dB per pass) here; 0 < low_hz < the
                              low-pass corner after clipping */
    double high_hz;        /* low-pass corner, gain 0.5 as above; > 0; a value above
                              0.45 * rate_hz is clipped to 0.45 * rate_hz (the caller
                              compares with rt_bandpass_high_hz to report it) */
    int order;             /* Butterworth order n of each of the two sections, 1..8 */
    int n_notches;         /* number of notch centres used, 0..8 */
    double notch_hz[RT_BANDPASS_MAX_NOTCHES]; /* centres, each 0 < fc < rate_hz / 2
                                                 (mains 50 or 60 Hz and harmonics) */
    double notch_width_hz; /* full width of each notch at gain 0.5 (-6 dB); the -3 dB
                              full width is 1.331 times this, the -40 dB full width
                              0.120 times it; > 0 when n_notches > 0, else ignored */
} rt_bandpass_spec;

/* The scorer's defaults for a channel sampled at rate_hz: 10 Hz and 100 Hz
 * corners, order 4, no notches, notch width 2 Hz should notches be added.
 * Why these values: docs/conditioning.md. */
rt_bandpass_spec rt_bandpass_spec_defaults(double rate_hz);

/* Creates a filter in *out; on failure *out is NULL and the status (also in
 * err, which may be NULL) is RT_ERR_USAGE on an invalid spec (the message
 * names the field), RT_ERR_NOMEM when memory runs out. The block size is
 * chosen from the response (docs/conditioning.md); FFTW plans come from the
 * shared cache in fft_plans.h, made under its lock. The caller frees the
 * filter with rt_bandpass_free. */
rt_status rt_bandpass_new(const rt_bandpass_spec *spec, rt_bandpass **out, rt_error *err);

/* As rt_bandpass_new, with the block size forced to block_samples (a power of
 * two, at least 4 times the margin and at most 2^22); 0 chooses it as
 * rt_bandpass_new does. For tests that compare block sizes. */
rt_status rt_bandpass_new_with_block(const rt_bandpass_spec *spec, size_t block_samples,
                                     rt_bandpass **out, rt_error *err);

/* A second filter with bp's response, margin and block size, and its own
 * buffers, for another thread, in *out: it filters exactly as bp does.
 * RT_ERR_NOMEM (and *out NULL) when memory runs out. Thread-safe while bp is
 * not being freed (the copy only reads bp). */
rt_status rt_bandpass_clone(const rt_bandpass *bp, rt_bandpass **out, rt_error *err);

/* Frees the filter, its buffers and its hold on the plan cache; bp may be NULL. */
void rt_bandpass_free(rt_bandpass *bp);

/* Zero-phase gain at f_hz, in [0, 1]:
 *   G(f) = 1 / (1 + (tan(pi fl/fs) / tan(pi f/fs))^(2n))
 *        * 1 / (1 + (tan(pi f/fs) / tan(pi fh/fs))^(2n))
 *        * prod over notches c and their images c' in {c, -c, fs - c} of
 *          (1 - 2^(-((f - c') / (w/2))^2))
 * with fs = rate_hz, fl, fh the corners (fh after clipping), n the order, w the
 * notch width. The first two factors are |H|^2 of scipy.signal.butter(n, fl,
 * 'highpass', fs=fs) and butter(n, fh, 'lowpass', fs=fs) (bilinear transform
 * with pre-warped corners), so G(fl) = G(fh) = 0.5 times the other factors,
 * G(0) = 0 and G(fs/2) = 0. Like every sampled response G is even and periodic
 * in fs: f_hz is folded into [0, fs/2] first. */
double rt_bandpass_gain(const rt_bandpass *bp, double f_hz);

/* The high-pass corner (never changed) and the low-pass corner after
 * clipping to 0.45 * rate_hz, in Hz. */
double rt_bandpass_low_hz(const rt_bandpass *bp);
double rt_bandpass_high_hz(const rt_bandpass *bp);

/* Block size N (a power of two) and margin M in samples: each block yields
 * N - 2M output samples; the impulse response's absolute values beyond M
 * samples from its centre sum to at most 1e-9 of its peak. */
size_t rt_bandpass_block_samples(const rt_bandpass *bp);
size_t rt_bandpass_margin_samples(const rt_bandpass *bp);

/* Filters x[0..n) in place; n may be any size (0 does nothing). Before
 * filtering, the signal is extended past each end by reflection about the end
 * sample without repeating it (numpy.pad mode 'reflect', repeated when the
 * margin exceeds the signal). Returns RT_ERR_USAGE when a sample is not
 * finite (blocks before the bad one are then already filtered in x). Not
 * thread-safe for one rt_bandpass (it owns scratch buffers): use one filter
 * per thread; different filters may run in parallel. */
rt_status rt_bandpass_apply(rt_bandpass *bp, double *x, size_t n, rt_error *err);

#endif
