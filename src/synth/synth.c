/* Public entry of the synthetic night generator: option checks, the stage
 * and event tables, and the order in which the four files are written. */
#include "remtone/synth.h"

#include <errno.h>
#include <stdbool.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "internal.h"
#include "output.h"
#include "synth_internal.h"

const char *rt_synth_profile_name(rt_synth_profile profile)
{
    if ((int)profile < 0 || profile >= RT_SYNTH_PROFILE_COUNT)
        return "unknown";
    return SYNTH_PROFILE_NAMES[profile];
}

int rt_synth_profile_from_name(const char *name, rt_synth_profile *profile)
{
    for (int i = 0; name && i < RT_SYNTH_PROFILE_COUNT; i++)
        if (strcmp(name, SYNTH_PROFILE_NAMES[i]) == 0) {
            *profile = (rt_synth_profile)i;
            return 0;
        }
    return -1;
}

void rt_synth_options_default(rt_synth_options *options)
{
    memset(options, 0, sizeof *options);
    options->profile = RT_SYNTH_TYPICAL_OLDER;
    options->hours = 8.0;
    options->seed = 1;
    options->patient = NULL;
    options->recording = NULL;
    options->start_hour = 22;
    options->start_minute = 30;
    options->drift_end = 1.0;
}

const char *rt_synth_role_name(int role)
{
    return role >= 0 && role < SYNTH_ROLES ? SYNTH_ROLE_NAMES[role] : "unknown";
}

const char *rt_synth_stage_label(int stage)
{
    return stage >= 0 && stage < SYNTH_STAGES ? SYNTH_STAGE_LABELS[stage] : "?";
}

const char *rt_synth_stage_edf_text(int stage)
{
    return stage >= 0 && stage < SYNTH_STAGES ? SYNTH_STAGE_EDF_TEXTS[stage] : "Sleep stage ?";
}

const char *rt_synth_event_name(int type)
{
    return type >= 0 && type < SYNTH_EVENT_TYPES ? SYNTH_EVENT_NAMES[type] : "artifact";
}

const char *rt_synth_event_edf_text(int type)
{
    return type >= 0 && type < SYNTH_EVENT_TYPES ? SYNTH_EVENT_EDF_TEXTS[type] : "Artifact";
}

static bool in_range(double v, double lo, double hi)
{
    return isfinite(v) && v >= lo && v <= hi;
}

static rt_status check_artifacts(const rt_synth_options *o, rt_error *err)
{
    double night_s = floor(o->hours * 3600.0 / RT_EPOCH_S + 1e-9) * RT_EPOCH_S;
    if (!(o->mains_hz == 0.0 || o->mains_hz == 50.0 || o->mains_hz == 60.0))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: mains frequency must be 0, 50 or 60 Hz (got %g)",
                       o->mains_hz);
    if (!in_range(o->mains_uv, 0.0, 200.0) || o->mains_harmonics < 0 || o->mains_harmonics > 4)
        return rt_fail(err, RT_ERR_USAGE,
                       "synthetic night: mains amplitude must be 0..200 uV and harmonics 0..4 (got %g, %d)",
                       o->mains_uv, o->mains_harmonics);
    if (!in_range(o->ecg_bleed_uv, 0.0, 200.0) || !in_range(o->ecg_bleed_limb_uv, 0.0, 200.0))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: ECG bleed must be 0..200 uV (got %g, %g)",
                       o->ecg_bleed_uv, o->ecg_bleed_limb_uv);
    if (!(o->heart_rate_bpm == 0.0 || in_range(o->heart_rate_bpm, 30.0, 120.0)))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: heart rate must be 30..120 bpm (got %g)",
                       o->heart_rate_bpm);
    if (!in_range(o->clip_duration_s, 0.0, night_s) ||
        (o->clip_duration_s > 0.0 && !in_range(o->clip_start_s, 0.0, night_s - o->clip_duration_s)))
        return rt_fail(err, RT_ERR_USAGE,
                       "synthetic night: clipping %g s from %g s does not lie inside the %g-s night",
                       o->clip_duration_s, o->clip_start_s, night_s);
    if (!(o->detach_s == 0.0 || (isfinite(o->detach_s) && o->detach_s > 0.0 && o->detach_s < night_s)))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: detach time %g s is not inside the %g-s night",
                       o->detach_s, night_s);
    if (o->pops < 0 || o->pops > 1000)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: pops must be 0..1000 (got %d)", o->pops);
    return RT_OK;
}

static bool is_emg_rate(int hz)
{
    return hz == 200 || hz == 256 || hz == 500 || hz == 512 || hz == 1000 || hz == 2000 || hz == 4096;
}

static rt_status check_difficulty(const rt_synth_options *o, rt_error *err)
{
    if (o->tonic_run_epochs < 0 || o->tonic_run_epochs > 40)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: tonic runs must be 0 (off) or 1..40 epochs (got %d)",
                       o->tonic_run_epochs);
    if (o->tonic_whole_bout < 0 || o->tonic_whole_bout > 64)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: whole tonic bout must be 0 (off) or 1..64 (got %d)",
                       o->tonic_whole_bout);
    if (!(o->tonic_ratio == 0.0 || in_range(o->tonic_ratio, 3.0, 20.0)))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: tonic ratio must be 0 (off) or 3..20 (got %g)",
                       o->tonic_ratio);
    if (!(o->drift_end == 0.0 || in_range(o->drift_end, 0.5, 2.0)))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: drift end gain must be 0.5..2 (1 = off; got %g)",
                       o->drift_end);
    if (o->short_bursts < 0 || o->short_bursts > 1 || o->mixed_rates < 0 || o->mixed_rates > 1 || o->spiky < 0 ||
        o->spiky > 1)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: short_bursts, mixed_rates and spiky are 0 or 1");
    bool ratio_default = o->burst_ratio_lo == 0.0 && o->burst_ratio_hi == 0.0;
    if (!ratio_default && !(in_range(o->burst_ratio_lo, 0.5, 20.0) && in_range(o->burst_ratio_hi, 0.5, 20.0) &&
                            o->burst_ratio_lo <= o->burst_ratio_hi))
        return rt_fail(err, RT_ERR_USAGE,
                       "synthetic night: burst ratios must satisfy 0.5 <= lo <= hi <= 20 (got %g, %g)",
                       o->burst_ratio_lo, o->burst_ratio_hi);
    if (o->single_epoch_bouts < 0 || o->single_epoch_bouts > 20)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: single-epoch bouts must be 0..20 (got %d)",
                       o->single_epoch_bouts);
    /* 1-s data records hold a whole number of samples at every one of these */
    if (!(o->emg_rate_hz == 0 || is_emg_rate(o->emg_rate_hz)))
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: EMG rate must be 200, 256, 500, 512, 1000, 2000 or 4096 Hz (got %d)",
                       o->emg_rate_hz);
    return RT_OK;
}

static rt_status check_options(const rt_synth_options *o, const char *dir, rt_error *err)
{
    if ((int)o->profile < 0 || o->profile >= RT_SYNTH_PROFILE_COUNT)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: unknown profile %d", (int)o->profile);
    if (!isfinite(o->hours) || o->hours < 1.0 || o->hours > 24.0)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: hours must be 1..24 (got %g)", o->hours);
    if (o->start_hour > 23 || o->start_minute < 0 || o->start_minute > 59)
        return rt_fail(err, RT_ERR_USAGE, "synthetic night: start time %d:%d is not a clock time",
                       o->start_hour, o->start_minute);
    rt_status st = check_artifacts(o, err);
    if (st == RT_OK)
        st = check_difficulty(o, err);
    if (st != RT_OK)
        return st;
    struct stat sb;
    if (!dir || stat(dir, &sb) != 0 || !S_ISDIR(sb.st_mode))
        return rt_fail(err, RT_ERR_IO, "%s: output folder does not exist", dir ? dir : "(null)");
    return RT_OK;
}

static rt_status write_stages(const synth_plan *plan, const char *path, rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    fputs("start_s,duration_s,stage\n", out.file);
    for (int e = 0; e < plan->n_epochs;) {
        int end = e;
        while (end < plan->n_epochs && plan->stage[end] == plan->stage[e])
            end++;
        fprintf(out.file, "%d,%d,%s\n", e * RT_EPOCH_WHOLE_S, (end - e) * RT_EPOCH_WHOLE_S,
                rt_synth_stage_label(plan->stage[e]));
        e = end;
    }
    return rt_output_commit(&out, err);
}

static rt_status write_events(const synth_plan *plan, const char *path, rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    fputs("start_s,duration_s,type\n", out.file);
    for (size_t i = 0; i < plan->n_events; i++)
        fprintf(out.file, "%ld,%ld,%s\n", plan->events[i].start_s, plan->events[i].duration_s,
                rt_synth_event_name(plan->events[i].type));
    return rt_output_commit(&out, err);
}

static rt_status join_path(char *buf, size_t cap, const char *dir, const char *name, rt_error *err)
{
    int n = snprintf(buf, cap, "%s/%s", dir, name);
    if (n < 0 || (size_t)n >= cap)
        return rt_fail(err, RT_ERR_USAGE, "%s: output folder path too long", dir);
    return RT_OK;
}

rt_status rt_synth_write(const rt_synth_options *options, const char *dir, rt_error *err)
{
    rt_synth_options o;
    if (options)
        o = *options;
    else
        rt_synth_options_default(&o);
    if (o.start_hour < 0) {
        o.start_hour = 22;
        o.start_minute = 30;
    }
    rt_status st = check_options(&o, dir, err);
    if (st != RT_OK)
        return st;
    synth_plan plan;
    st = rt_synth_plan_build(&plan, &o, err);
    if (st != RT_OK)
        return st;
    char path[4096];
    /* The truth and tables go first: they are small, and a failed EDF write
     * leaves no recording without its truth. */
    if ((st = join_path(path, sizeof path, dir, "stages.csv", err)) == RT_OK)
        st = write_stages(&plan, path, err);
    if (st == RT_OK && (st = join_path(path, sizeof path, dir, "events.csv", err)) == RT_OK)
        st = write_events(&plan, path, err);
    if (st == RT_OK && (st = join_path(path, sizeof path, dir, "truth.json", err)) == RT_OK)
        st = rt_synth_write_truth(&plan, path, err);
    if (st == RT_OK && (st = join_path(path, sizeof path, dir, "night.edf", err)) == RT_OK)
        st = rt_synth_write_edf(&plan, path, err);
    rt_synth_plan_free(&plan);
    return st;
}
