/* remtone synth: write a synthetic night with known truth. */
#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cli.h"

enum {
    KEY_PROFILE = 1, KEY_HOURS, KEY_SEED, KEY_OUT, KEY_PATIENT, KEY_TEXT, KEY_START,
    KEY_MAINS, KEY_ECG_BLEED, KEY_HEART_RATE, KEY_CLIP, KEY_DETACH, KEY_POPS,
    KEY_TONIC_RUNS, KEY_TONIC_WHOLE_BOUT, KEY_TONIC_RATIO, KEY_DRIFT, KEY_SHORT_BURSTS, KEY_BURST_RATIO,
    KEY_SINGLE_EPOCH_BOUTS, KEY_EMG_RATE, KEY_MIXED_RATES, KEY_SPIKY
};

static const cli_option OPTIONS[] = {
    {"profile", 1, KEY_PROFILE, "NAME", "typical-older, rbd, borderline or apnea"},
    {"hours", 1, KEY_HOURS, "H", "recording length in hours, 1 to 24 (default 8)"},
    {"seed", 1, KEY_SEED, "N", "random seed; equal seeds give equal files (default 1)"},
    {"out", 1, KEY_OUT, "DIR", "output folder, created when missing (required)"},
    {"patient", 1, KEY_PATIENT, "TEXT", "fictional EDF+ patient name"},
    {"recording-text", 1, KEY_TEXT, "TEXT", "EDF+ recording free text"},
    {"start", 1, KEY_START, "HH:MM", "clock time of the recording start (default 22:30)"},
    {"mains", 1, KEY_MAINS, "HZ:UV[:H]", "add mains interference (50 or 60 Hz, amplitude 0-200 uV, H harmonics 0-4)"},
    {"ecg-bleed", 1, KEY_ECG_BLEED, "UV[:LIMB_UV]", "add ECG bleed to the chin (and the limbs)"},
    {"heart-rate", 1, KEY_HEART_RATE, "BPM", "mean heart rate, 30 to 120 (default 62)"},
    {"clip", 1, KEY_CLIP, "START:SECONDS", "saturate the chin amplifier for a stretch"},
    {"detach", 1, KEY_DETACH, "SECONDS", "detach the chin lead from this time on"},
    {"pops", 1, KEY_POPS, "N", "add N electrode pops to the chin during REM"},
    {"tonic-runs", 1, KEY_TONIC_RUNS, "EPOCHS", "chin tonic: one run of 1-40 epochs in each REM bout"},
    {"tonic-whole-bout", 1, KEY_TONIC_WHOLE_BOUT, "N", "make REM bout N (1 = first) chin-tonic throughout"},
    {"tonic-ratio", 1, KEY_TONIC_RATIO, "R", "tonic level = R x the bout's atonic chin level, 3-20"},
    {"drift", 1, KEY_DRIFT, "GAIN", "EMG gain drifting from 1 to GAIN (0.5-2) over the night"},
    {"short-bursts", 0, KEY_SHORT_BURSTS, NULL, "bursts of 0.1-0.3 s starting anywhere, some across mini-epochs"},
    {"burst-ratio", 1, KEY_BURST_RATIO, "LO:HI", "burst level = LO..HI x background, 0.5-20 (default 8:15)"},
    {"single-epoch-bouts", 1, KEY_SINGLE_EPOCH_BOUTS, "N", "add N REM bouts of one 30-s epoch inside N2, 1-20"},
    {"emg-rate", 1, KEY_EMG_RATE, "HZ", "EMG sampling rate: 200, 256, 500, 512, 1000, 2000 or 4096 (default 512)"},
    {"mixed-rates", 0, KEY_MIXED_RATES, NULL, "chin, arms and legs at three different EMG rates"},
    {"spiky", 0, KEY_SPIKY, NULL, "EMG as motor-unit spike trains instead of Gaussian noise"},
    {0},
};

typedef struct synth_config {
    rt_synth_options o;
    const char *out;
    int bad;
} synth_config;

static int on_option(void *ctx, int key, const char *arg)
{
    synth_config *c = ctx;
    char *end = NULL;
    switch (key) {
    case KEY_PROFILE:
        if (rt_synth_profile_from_name(arg, &c->o.profile) != 0) {
            fprintf(stderr, "remtone synth: unknown profile '%s' "
                            "(typical-older, rbd, borderline, apnea)\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_HOURS:
        c->o.hours = strtod(arg, &end);
        if (*end || !(c->o.hours >= 1.0 && c->o.hours <= 24.0)) {
            fprintf(stderr, "remtone synth: --hours must be 1 to 24, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_SEED:
        errno = 0;
        c->o.seed = strtoull(arg, &end, 10);
        if (*end || errno || arg[0] == '-') {
            fprintf(stderr, "remtone synth: --seed must be a whole number, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_MAINS:
        c->o.mains_harmonics = 0;
        if (sscanf(arg, "%lf:%lf:%d", &c->o.mains_hz, &c->o.mains_uv, &c->o.mains_harmonics) < 2) {
            fprintf(stderr, "remtone synth: --mains must be HZ:UV[:HARMONICS], got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_ECG_BLEED:
        if (sscanf(arg, "%lf:%lf", &c->o.ecg_bleed_uv, &c->o.ecg_bleed_limb_uv) < 1) {
            fprintf(stderr, "remtone synth: --ecg-bleed must be UV[:LIMB_UV], got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_HEART_RATE: c->o.heart_rate_bpm = strtod(arg, &end); c->bad |= *end != '\0'; break;
    case KEY_CLIP:
        if (sscanf(arg, "%lf:%lf", &c->o.clip_start_s, &c->o.clip_duration_s) != 2) {
            fprintf(stderr, "remtone synth: --clip must be START:SECONDS, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_DETACH: c->o.detach_s = strtod(arg, &end); c->bad |= *end != '\0'; break;
    case KEY_POPS: c->o.pops = (int)strtol(arg, &end, 10); c->bad |= *end != '\0'; break;
    case KEY_TONIC_RUNS: c->o.tonic_run_epochs = (int)strtol(arg, &end, 10); c->bad |= *end != '\0'; break;
    case KEY_TONIC_WHOLE_BOUT: c->o.tonic_whole_bout = (int)strtol(arg, &end, 10); c->bad |= *end != '\0'; break;
    case KEY_TONIC_RATIO: c->o.tonic_ratio = strtod(arg, &end); c->bad |= *end != '\0'; break;
    case KEY_DRIFT: c->o.drift_end = strtod(arg, &end); c->bad |= *end != '\0'; break;
    case KEY_SHORT_BURSTS: c->o.short_bursts = 1; break;
    case KEY_BURST_RATIO:
        if (sscanf(arg, "%lf:%lf", &c->o.burst_ratio_lo, &c->o.burst_ratio_hi) != 2) {
            fprintf(stderr, "remtone synth: --burst-ratio must be LO:HI, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    case KEY_SINGLE_EPOCH_BOUTS: c->o.single_epoch_bouts = (int)strtol(arg, &end, 10); c->bad |= *end != '\0'; break;
    case KEY_EMG_RATE: c->o.emg_rate_hz = (int)strtol(arg, &end, 10); c->bad |= *end != '\0'; break;
    case KEY_MIXED_RATES: c->o.mixed_rates = 1; break;
    case KEY_SPIKY: c->o.spiky = 1; break;
    case KEY_OUT: c->out = arg; break;
    case KEY_PATIENT: c->o.patient = arg; break;
    case KEY_TEXT: c->o.recording = arg; break;
    case KEY_START:
        if (sscanf(arg, "%d:%d", &c->o.start_hour, &c->o.start_minute) != 2 ||
            c->o.start_hour < 0 || c->o.start_hour > 23 || c->o.start_minute < 0 ||
            c->o.start_minute > 59) {
            fprintf(stderr, "remtone synth: --start must be HH:MM, got '%s'\n", arg);
            return EXIT_USAGE;
        }
        break;
    }
    return EXIT_OK;
}

static int run(int argc, char **argv)
{
    synth_config c;
    memset(&c, 0, sizeof c);
    rt_synth_options_default(&c.o);
    char *pos[1];
    int npos = 0;
    int rc = cli_parse(&CLI_SYNTH, argc, argv, on_option, &c, pos, 0, &npos);
    if (rc != EXIT_OK)
        return rc < 0 ? EXIT_OK : rc;
    if (c.bad) {
        fprintf(stderr, "remtone synth: a number option has a value that is not a number\n");
        return EXIT_USAGE;
    }
    if (!c.out) {
        fprintf(stderr, "remtone synth: --out DIR is required\n");
        return EXIT_USAGE;
    }
    if (mkdir(c.out, 0777) != 0 && errno != EEXIST) {
        fprintf(stderr, "remtone: %s: cannot create folder: %s\n", c.out, strerror(errno));
        return EXIT_OUTPUT;
    }
    rt_error err;
    rt_error_clear(&err);
    rt_status st = rt_synth_write(&c.o, c.out, &err);
    if (st != RT_OK)
        return cli_report(st, &err, 1);
    printf("wrote %s/night.edf, stages.csv, events.csv, truth.json (%s, %g h, seed %llu)\n", c.out,
           rt_synth_profile_name(c.o.profile), c.o.hours, (unsigned long long)c.o.seed);
    return EXIT_OK;
}

const cli_command CLI_SYNTH = {"synth", "--profile NAME --out DIR [options]",
                               "Write a synthetic night (EDF+, stages, events, truth).", OPTIONS, run, NULL};
