/* Synthetic nights with exactly known RSWA content: the demo data and the
 * test oracle.
 *
 * A synthetic night is an EDF+ recording (EEG, EOG, chin, both arms, both
 * legs, ECG and respiratory placeholders), its stage table and event table,
 * and truth.json: the activity placed in every REM mini-epoch and the exact
 * value every index takes on that placed activity. The EMG is band-limited
 * Gaussian noise (or, as a switch, motor-unit spike trains) whose rectified
 * level follows the stage, with phasic bursts and tonic stretches placed so
 * that no index is ambiguous (docs/synthetic-nights.md gives the design).
 * Output is deterministic for given options. */
#ifndef REMTONE_SYNTH_H
#define REMTONE_SYNTH_H

#include <stdint.h>

#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum rt_synth_profile {
    RT_SYNTH_TYPICAL_OLDER = 0, /* atonia kept: few bursts, rare tonic */
    RT_SYNTH_RBD,               /* marked tonic and phasic activity */
    RT_SYNTH_BORDERLINE,        /* SINBAR chin "any" near its 18.2 % cutoff */
    RT_SYNTH_APNEA,             /* bursts bound to arousals after respiratory events */
    RT_SYNTH_PROFILE_COUNT
} rt_synth_profile;

/* "typical-older", "rbd", "borderline", "apnea". */
const char *rt_synth_profile_name(rt_synth_profile profile);
/* Returns 0 and sets *profile when name is a profile, -1 otherwise. */
int rt_synth_profile_from_name(const char *name, rt_synth_profile *profile);

typedef struct rt_synth_options {
    rt_synth_profile profile;
    double hours;            /* recording length, 1 .. 24 */
    uint64_t seed;           /* any value; equal seeds give equal files */
    const char *patient;     /* EDF+ patient name subfield (fictional); NULL = "X" */
    const char *recording;   /* EDF+ recording free text; NULL = profile name */
    int start_hour;          /* clock start, 0..23 (default 22 when negative) */
    int start_minute;        /* 0..59 */

    /* Artifacts, for testing quality control (docs/quality.md, "Synthetic
     * artifacts"); every one is off at 0. truth.json lists exactly what was
     * added under "artifacts". */
    double mains_hz;          /* line frequency on all five EMG channels: 0 (off), 50 or 60 */
    double mains_uv;          /* peak amplitude of the fundamental, uV, 0..200 */
    int mains_harmonics;      /* harmonics 2f, 3f, ... added, 0..4; each half the one before;
                                 a component at or above half a channel's rate is left out */
    double ecg_bleed_uv;      /* R-peak amplitude of ECG bleed in the chin, uV, 0..200 */
    double ecg_bleed_limb_uv; /* the same in the four limb channels, uV, 0..200 */
    double heart_rate_bpm;    /* mean heart rate of the ECG channel and the bleed,
                                 30..120; 0 = 62 (the rate without this option) */
    double clip_start_s;      /* chin saturation: a 1-Hz, 1500-uV swing that the +-500 uV
                                 range clips, from clip_start_s ... */
    double clip_duration_s;   /* ... for this many seconds; 0 = off */
    double detach_s;          /* chin lead detached (samples exactly 0) from this time to
                                 the end; 0 = off; must lie inside the night */
    int pops;                 /* electrode pops in the chin during REM, 0..1000 */

    /* Difficulty switches: nights that are hard for a scorer, each one off at
     * its default (docs/synthetic-nights.md, "Difficulty switches"). The truth
     * is always counted from what was placed; truth.json repeats the switches
     * under "difficulty". */
    int tonic_run_epochs;     /* 0 = off; 1..40: chin tonic is one run of this many
                                 consecutive epochs per REM bout (clipped to the bout),
                                 replacing the profile's tonic blocks */
    int tonic_whole_bout;     /* 0 = off; 1..64: this REM bout (1 = the first) is chin-tonic
                                 from its first to its last epoch; the night must have it */
    double tonic_ratio;       /* 0 = off (tonic level 15-25 uV); 3..20: every tonic stretch's
                                 rectified level is this multiple of its bout's atonic chin
                                 background */
    double drift_end;         /* 1 (or 0) = off; 0.5..2.0: the EMG of every EMG channel is
                                 multiplied by a gain going log-linearly from 1 at the start to
                                 drift_end at the end of the recording (artifacts are not) */
    int short_bursts;         /* 0 = off; 1: phasic bursts of 0.10-0.30 s with onsets anywhere
                                 (some crossing 2-s and 3-s mini-epoch boundaries) */
    double burst_ratio_lo;    /* burst rectified level as a multiple of the background: */
    double burst_ratio_hi;    /* drawn in [lo, hi], 0.5..20, lo <= hi; both 0 = 8..15 */
    int single_epoch_bouts;   /* 0 = off; 1..20: that many extra REM bouts of one 30-s epoch,
                                 each inside N2 */
    int emg_rate_hz;          /* 0 = 512; 200, 256, 500, 512, 1000, 2000 or 4096 Hz
                                 for the EMG channels */
    int mixed_rates;          /* 0 = off; 1: chin at emg_rate_hz, arms and legs at two other
                                 rates of that list */
    int spiky;                /* 0 = off (band-limited Gaussian EMG); 1: motor-unit action
                                 potential trains plus a little Gaussian noise */
} rt_synth_options;

/* Fills *options with defaults: typical-older, 8 hours, seed 1, 22:30 start,
 * no artifacts, no difficulty switch (drift_end 1, every other switch 0). */
void rt_synth_options_default(rt_synth_options *options);

/* Writes dir/stages.csv, dir/events.csv, dir/truth.json and then
 * dir/night.edf; dir must exist. Each file is written to a temporary name and
 * renamed. options may be NULL (the defaults); a negative start_hour means
 * the default start. RT_ERR_USAGE when an option is outside its range (the
 * message names it, or the folder's path is too long), RT_ERR_IO when dir is
 * not a folder or a file cannot be written (the files written before it
 * stay), RT_ERR_NOMEM. */
rt_status rt_synth_write(const rt_synth_options *options, const char *dir, rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
