/* The audit table: one CSV row per REM 3-s mini-epoch and EMG channel
 * present, with the levels and labels the indices are counted from, so that a
 * reviewer (or a spreadsheet) can recount every 3-s index of the night.
 * Columns and meanings: docs/review-report.md. Channel labels come from the
 * recording header, which is untrusted: fields go through rt_csv_put_field
 * (src/common/text.h: valid UTF-8, RFC 4180 quoting, formulas defused).
 * The last four columns (decision, reason, reviewer, decided_at) are a
 * reviewer's to fill in a spreadsheet and read back with --corrections
 * (docs/corrections.md): empty for a night not corrected; for a corrected
 * night they carry the decisions applied, while the label columns stay
 * remtone's own, so the table read back gives the same corrected night.
 * Written atomically. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "text.h"
#include "remtone/corrections.h"
#include "remtone/report.h"
#include "svg.h"

/* Event names that left this mini-epoch out, joined by '+'; "unscorable" when
 * the channel is marked excluded without a recorded event. Empty when scored. */
static void excluded_text(const rt_mini *m, rt_role role, char *buf, size_t cap)
{
    buf[0] = '\0';
    if (!(m->labels[role] & RT_LABEL_EXCLUDED))
        return;
    size_t len = 0;
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
        if (m->excluded_by & RT_EXCLUDED_BY_EVENT(t))
            len += (size_t)snprintf(buf + len, len < cap ? cap - len : 0, "%s%s", len ? "+" : "",
                                    rt_event_type_name((rt_event_type)t));
    if (len == 0)
        snprintf(buf, cap, "unscorable");
}

/* The decision applied to mini-epoch i on role r, or NULL: the channel's
 * own, else the mini-epoch's exclusion. *cursor walks the applied list
 * (ordered by mini-epoch, then role) along with the table. */
static const rt_decision *decision_for(const rt_night_corrections *c, size_t i, int r,
                                       size_t *cursor)
{
    if (!c)
        return NULL;
    while (*cursor < c->n_applied && c->applied[*cursor].mini < i)
        (*cursor)++;
    const rt_decision *own = NULL, *excluded = NULL;
    for (size_t k = *cursor; k < c->n_applied && c->applied[k].mini == i; k++) {
        if (c->applied[k].role == r)
            own = &c->decisions[c->applied[k].decision];
        else if (c->applied[k].role < 0)
            excluded = &c->decisions[c->applied[k].decision];
    }
    return excluded ? excluded : own;
}

static int put_decision(FILE *f, const rt_decision *d)
{
    int no_memory = 0;
    char word[32] = "";
    if (d && d->activity != RT_ACTIVITY_ANY)
        snprintf(word, sizeof word, "%s-%s", rt_decision_kind_name(d->kind),
                 rt_decision_activity_name(d->activity));
    else if (d)
        snprintf(word, sizeof word, "%s", rt_decision_kind_name(d->kind));
    fprintf(f, ",%s,%s,", word, d ? rt_decision_reason_name(d->reason) : "");
    no_memory |= rt_csv_put_field(f, d ? d->reviewer : "");
    fputc(',', f);
    no_memory |= rt_csv_put_field(f, d ? d->decided_at : "");
    return no_memory;
}

static int bit(unsigned char labels, unsigned flag) { return (labels & flag) ? 1 : 0; }

static void put_level(FILE *f, float v)
{
    if (isfinite(v))
        fprintf(f, "%.3f", (double)v);
}

rt_status rt_night_write_minis_csv(const rt_night *night, const rt_recording *rec,
                                   const rt_report_options *options, const char *path,
                                   rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    FILE *f = out.file;
    int no_memory = 0;
    rt_clock_time start = rt_recording_start(rec);
    bool video = options && options->video_given;
    fprintf(f, "epoch,mini,clock_time,elapsed_s,%sstage,role,label,envelope_uv,background_uv,"
               "aasm_phasic,sinbar_phasic,sinbar_tonic,sinbar_any,excluded_by,"
               "decision,reason,reviewer,decided_at\n",
            video ? "video_time," : "");
    size_t cursor = 0;
    for (size_t i = 0; i < night->n_minis3 && !ferror(f) && !no_memory; i++) {
        const rt_mini *m = &night->minis3[i];
        char clock[16], excl[160], vt[32];
        rt_report_clock(&start, m->onset_s, clock, sizeof clock);
        rt_report_video_time(options, m->onset_s, vt, sizeof vt);
        for (int r = 0; r < RT_ROLE_COUNT; r++) {
            if (r == RT_ROLE_ECG || !night->channel[r].present)
                continue;
            unsigned char l = m->labels[r];
            /* epochs and mini-epochs counted from 1, as users count them */
            fprintf(f, "%zu,%d,%s,%.3f,%s%sR,%s,", m->epoch + 1, m->index + 1, clock, m->onset_s,
                    vt, video ? "," : "", rt_role_name((rt_role)r));
            no_memory |= rt_csv_put_field(f, night->channel[r].label);
            fputc(',', f);
            put_level(f, m->envelope_uv[r]);
            fputc(',', f);
            put_level(f, m->background_uv[r]);
            excluded_text(m, (rt_role)r, excl, sizeof excl);
            fprintf(f, ",%d,%d,%d,%d,", bit(l, RT_LABEL_AASM_PHASIC), bit(l, RT_LABEL_SINBAR_PHASIC),
                    bit(l, RT_LABEL_SINBAR_TONIC), bit(l, RT_LABEL_SINBAR_ANY));
            no_memory |= rt_csv_put_field(f, excl);
            no_memory |= put_decision(f, decision_for(night->corrections, i, r, &cursor));
            fputc('\n', f);
        }
    }
    return rt_output_finish(&out, no_memory, "the mini-epoch table", err);
}
