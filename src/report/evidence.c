/* The evidence list: every flagged REM epoch, that is every one with detected
 * activity, in time order, with what a reviewer needs to find it on the
 * signals and the video: the epoch counted from 1, its clock time, seconds
 * from the recording start, the video time when the video's start is given,
 * the channels with activity, the rule sets that fired and its strength (the
 * ranking score of rt_report_rank_evidence). The page shows the same rows
 * (html.c); `remtone score --evidence PATH` writes them as CSV, atomically,
 * every text field through rt_csv_put_field. docs/review-report.md. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "text.h"
#include "remtone/report.h"

#define MINIS3 10

bool rt_report_video_time(const rt_report_options *options, double t_s, char *buf, size_t cap)
{
    buf[0] = '\0';
    if (!options || !options->video_given)
        return false;
    double v = t_s - options->video_offset_s;
    char hms[24];
    rt_report_elapsed(fabs(v), hms, sizeof hms);
    snprintf(buf, cap, "%s%s", v < -1e-6 ? "-" : "", hms);
    return true;
}

double rt_video_offset_from_clock(const rt_recording *rec, int hour, int minute, double second)
{
    rt_clock_time s = rt_recording_start(rec);
    double start = s.hour * 3600.0 + s.minute * 60.0 + s.second + s.subsecond;
    double d = fmod(hour * 3600.0 + minute * 60.0 + second - start, 86400.0);
    if (d > 43200.0)
        d -= 86400.0;
    else if (d <= -43200.0)
        d += 86400.0;
    return d;
}

static void add_word(char *buf, size_t cap, const char *word)
{
    size_t len = strlen(buf);
    snprintf(buf + len, cap > len ? cap - len : 0, "%s%s", len ? " " : "", word);
}

bool rt_report_evidence_words(const rt_night *night, size_t k, char *channels, size_t ch_cap,
                              char *rules, size_t rules_cap)
{
    const rt_epoch_result *er = &night->epochs[k];
    channels[0] = rules[0] = '\0';
    if (!(er->activity > 0))
        return false;
    enum { AASM_P, AASM_T, SINBAR_P, SINBAR_T, MONTREAL_P, N_RULES };
    static const char *const RULE[N_RULES] = {"aasm-phasic", "aasm-tonic", "sinbar-phasic",
                                              "sinbar-tonic", "montreal-phasic"};
    bool fired[N_RULES] = {false};
    fired[AASM_T] = er->aasm_tonic;
    fired[SINBAR_T] = er->sinbar_tonic;
    size_t per2 = night->n_epochs ? night->n_minis2 / night->n_epochs : 0;
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (r == RT_ROLE_ECG || !night->channel[r].present)
            continue;
        bool active = r == RT_ROLE_CHIN && (er->aasm_tonic || er->sinbar_tonic);
        for (size_t i = k * MINIS3; i < (k + 1) * MINIS3 && i < night->n_minis3; i++) {
            unsigned l = night->minis3[i].labels[r];
            if (l & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT))
                continue;
            fired[AASM_P] |= (l & RT_LABEL_AASM_PHASIC) != 0;
            fired[SINBAR_P] |= (l & RT_LABEL_SINBAR_PHASIC) != 0;
            fired[SINBAR_T] |= (l & RT_LABEL_SINBAR_TONIC) != 0;
            active |= (l & (RT_LABEL_AASM_PHASIC | RT_LABEL_SINBAR_PHASIC |
                            RT_LABEL_SINBAR_TONIC)) != 0;
        }
        for (size_t i = k * per2; i < (k + 1) * per2 && i < night->n_minis2; i++) {
            unsigned l = night->minis2[i].labels[r];
            if (!(l & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT)) && (l & RT_LABEL_MONTREAL_PHASIC)) {
                fired[MONTREAL_P] = true;
                active = true;
            }
        }
        if (active)
            add_word(channels, ch_cap, rt_role_name((rt_role)r));
    }
    for (int i = 0; i < N_RULES; i++)
        if (fired[i])
            add_word(rules, rules_cap, RULE[i]);
    return true;
}

rt_status rt_night_write_evidence_csv(const rt_night *night, const rt_recording *rec,
                                      const rt_report_options *options, const char *path,
                                      rt_error *err)
{
    if (!night || !rec || !path)
        return rt_fail(err, RT_ERR_USAGE, "evidence list: a night, a recording and a path are needed");
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = out.file;
    int no_memory = 0;
    rt_clock_time start = rt_recording_start(rec);
    fprintf(f, "epoch,clock_time,elapsed_s,%schannels,rule_sets,active_minis,strength\n",
            options && options->video_given ? "video_time," : "");
    for (size_t k = 0; k < night->n_epochs && !ferror(f) && !no_memory; k++) {
        char channels[96], rules[96], clock[16], video[32];
        if (!rt_report_evidence_words(night, k, channels, sizeof channels, rules, sizeof rules))
            continue;
        const rt_epoch_result *er = &night->epochs[k];
        rt_report_clock(&start, er->onset_s, clock, sizeof clock);
        fprintf(f, "%zu,%s,%.3f,", er->epoch + 1, clock, er->onset_s);
        if (rt_report_video_time(options, er->onset_s, video, sizeof video)) {
            no_memory |= rt_csv_put_field(f, video);
            fputc(',', f);
        }
        no_memory |= rt_csv_put_field(f, channels);
        fputc(',', f);
        no_memory |= rt_csv_put_field(f, rules);
        fprintf(f, ",%d,%.1f\n", er->sinbar_any_minis, er->activity);
    }
    return rt_output_finish(&out, no_memory, "the evidence list", err);
}
