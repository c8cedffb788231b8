/* Whole-recording quality for `remtone scan`: the scorer's detectors
 * (marks.c, mains.c, qrs.c) run over each EMG channel without any staging. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "internal.h"
#include "quality/quality.h"
#include "remtone/quality.h"
#include "dsp/bandpass.h"

/* Channels are read in chunks of 5 minutes, and of at most 2^21 samples, so
 * the memory scan needs is bounded whatever the rate (two buffers of doubles:
 * 32 MiB): at 1 MHz, 5-minute chunks had taken 3.7 GB. */
enum { CHUNK_S = 300, CHUNK_MAX_SAMPLES = 1 << 21 };

static double chunk_s(double rate_hz)
{
    return fmin((double)CHUNK_S, floor((double)CHUNK_MAX_SAMPLES / rate_hz));
}

static rt_status read_chunk(rt_recording *rec, const rt_role_source *src, double t0, double dur,
                            double **buf, double **scratch, size_t *cap, size_t *n, rt_error *err)
{
    long long first = llround(t0 * src->rate_hz);
    *n = (size_t)(llround((t0 + dur) * src->rate_hz) - first);
    if (*n > *cap) {
        free(*buf);
        free(*scratch);
        *buf = rt_calloc(*n, sizeof **buf);
        *scratch = rt_calloc(*n, sizeof **scratch);
        *cap = (*buf && *scratch) ? *n : 0;
        if (!*cap)
            return rt_fail(err, RT_ERR_NOMEM, "out of memory");
    }
    return rt_role_read_uv(rec, src, first, *n, *buf, *scratch, err);
}

/* Marks over the whole channel, chunk by chunk. */
static rt_status channel_marks(rt_recording *rec, const rt_role_source *src, double total_s,
                               double **buf, double **scratch, size_t *cap, rt_channel_quality *q,
                               rt_error *err)
{
    const rt_channel_info *info = rt_recording_channel(rec, src->channel);
    rt_quality_mark marks[256];
    double step = chunk_s(src->rate_hz);
    for (double t0 = 0.0; t0 < total_s && t0 + 1.0 <= total_s; t0 += step) {
        double dur = fmin(step, total_s - t0);
        size_t n = 0;
        rt_status st = read_chunk(rec, src, t0, dur, buf, scratch, cap, &n, err);
        if (st != RT_OK)
            return st;
        size_t found = rt_quality_marks(*buf, n, src->rate_hz, info, *scratch, marks, 256);
        if (found > 256)
            found = 256; /* beyond 256 marks in 5 minutes the count is a floor */
        for (size_t k = 0; k < found; k++)
            q->unscorable_min[marks[k].reason] += (marks[k].end_s - marks[k].start_s) / 60.0;
    }
    for (int k = 0; k < RT_QUALITY_KINDS; k++)
        q->unscorable_total_min += q->unscorable_min[k];
    return RT_OK;
}

rt_status rt_recording_quality(rt_recording *rec, const rt_role_map *roles,
                               rt_channel_quality out[RT_ROLE_COUNT], rt_error *err)
{
    memset(out, 0, RT_ROLE_COUNT * sizeof *out);
    double total = rt_recording_duration_s(rec);
    double head = fmin((double)CHUNK_S, total); /* each channel's own: chunk_s(rate) at most */
    double *buf = NULL, *scratch = NULL;
    size_t cap = 0;
    rt_qrs_beats beats;
    memset(&beats, 0, sizeof beats);
    rt_status st = RT_OK;
    int source = 0;
    const rt_role_source *ecg = &roles->role[RT_ROLE_ECG];
    const rt_role_source *chin = &roles->role[RT_ROLE_CHIN];
    if (ecg->channel >= 0 || chin->channel >= 0) {
        const rt_role_source *from = ecg->channel >= 0 ? ecg : chin;
        size_t n = 0;
        st = read_chunk(rec, from, 0.0, fmin(head, chunk_s(from->rate_hz)), &buf, &scratch, &cap,
                        &n, err);
        if (st == RT_OK)
            st = rt_qrs_detect(buf, n, from->rate_hz, from == chin, &beats, err);
        source = from == ecg ? 1 : 2;
    }
    for (int r = 0; r < RT_ROLE_ECG && st == RT_OK; r++) {
        const rt_role_source *src = &roles->role[r];
        if (src->channel < 0)
            continue;
        rt_channel_quality *q = &out[r];
        q->line_db = -99.0;
        st = channel_marks(rec, src, total, &buf, &scratch, &cap, q, err);
        size_t n = 0;
        if (st == RT_OK)
            st = read_chunk(rec, src, 0.0, fmin(head, chunk_s(src->rate_hz)), &buf, &scratch,
                            &cap, &n, err);
        rt_bandpass_spec spec = rt_bandpass_spec_defaults(src->rate_hz);
        rt_mains mains;
        if (st == RT_OK)
            st = rt_mains_estimate(buf, n, src->rate_hz, spec.low_hz, spec.high_hz, &mains, err);
        if (st == RT_OK)
            rt_quality_band_edges(&mains, q);
        if (st == RT_OK && mains.present) {
            q->line_hz = mains.line_hz;
            q->line_db = mains.line_db;
            rt_mains_apply(&mains, &spec);
            q->notches = mains.n_notches;
        }
        rt_bandpass *bp = NULL;
        if (st == RT_OK)
            st = rt_bandpass_new(&spec, &bp, err);
        if (st == RT_OK)
            st = rt_bandpass_apply(bp, buf, n, err);
        rt_ecg_removal rep;
        memset(&rep, 0, sizeof rep);
        if (st == RT_OK && beats.n > 0)
            st = rt_ecg_subtract(buf, n, src->rate_hz, beats.r_s, beats.n, RT_ECG_PRE_S,
                                 RT_ECG_POST_S, &rep, err);
        rt_bandpass_free(bp);
        q->ecg_source = source;
        q->beats = beats.n;
        q->ecg_found = rep.found;
        rt_channel_check check;
        rt_quality_check_channel(rt_recording_channel(rec, src->channel), spec.low_hz,
                                 spec.high_hz, &check);
        q->hp_above_band = check.hp_above_band;
        q->lp_below_band = check.lp_below_band;
        q->notch_at_source = check.notch_at_source;
    }
    rt_qrs_beats_free(&beats);
    free(buf);
    free(scratch);
    return st;
}
