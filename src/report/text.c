/* Text for people: the night summary, the channel scan and the rule table. */
#include <jansson.h>
#include <math.h>
#include <string.h>

#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "remtone/corrections.h"
#include "remtone/report.h"

void rt_report_value_text(const rt_index_rule *rule, double v, char *buf, size_t cap)
{
    if (!isfinite(v))
        snprintf(buf, cap, "-");
    else if (strcmp(rule->unit, "%") == 0)
        snprintf(buf, cap, "%.1f %%", v);
    else if (strcmp(rule->unit, "/h") == 0)
        snprintf(buf, cap, "%.1f/h", v);
    else
        snprintf(buf, cap, "%.3f", v);
}

/* The level line: its name in capitals, ", WITH RESERVATIONS" when the night
 * has any, and what it rests on (rt_report_level_means, as every report says
 * it); then the reasons, each once (a reason the line already says is not
 * repeated under it). */
static void level_line(FILE *out, const rt_night *night)
{
    static const char *const NAME[] = {"CLEAR", "NEAR CUTOFF", "REVIEW", "NOT ASSESSABLE"};
    int l = (int)night->level;
    if (l < 0 || l > RT_REVIEW_NOT_ASSESSABLE)
        return;
    char means[600];
    rt_report_level_means(night, means, sizeof means);
    fprintf(out, "%s%s: %s%s%s\n", NAME[l], night->n_reservations ? ", WITH RESERVATIONS" : "",
            means, l == RT_REVIEW_FLAGGED ? "; physician review advised" : "",
            night->n_reservations ? "; the reservations below limit what this says" : "");
    for (size_t i = 0; i < night->n_reasons; i++)
        if (strcmp(night->reasons[i], means) != 0)
            fprintf(out, "  - %s\n", night->reasons[i]);
}

/* Gaps listed in the text; the JSON result lists them all. */
#define TEXT_GAPS 10

static void staging_lines(FILE *out, const rt_night *night)
{
    const rt_staging_summary *s = &night->staging;
    char line[400], clock[16], len[32];
    rt_report_staging_text(night, line, sizeof line);
    fprintf(out, "Staging: %s\n", line);
    if (s->n_gaps == 0) {
        fprintf(out, "Staging gaps: none\n");
        return;
    }
    rt_duration_text(s->gap_total_s, len, sizeof len);
    fprintf(out, "Staging gaps: %zu, %s in all (unstaged epochs inside the staging):\n", s->n_gaps,
            len);
    for (size_t i = 0; i < s->n_gaps && i < TEXT_GAPS; i++) {
        rt_report_clock(&night->start, s->gaps[i].start_s, clock, sizeof clock);
        rt_duration_text(s->gaps[i].duration_s, len, sizeof len);
        fprintf(out, "  - %s (%.0f s into the recording), %s\n", clock, s->gaps[i].start_s, len);
    }
    if (s->n_gaps > TEXT_GAPS)
        fprintf(out, "  - and %zu more (all in the JSON result)\n", s->n_gaps - TEXT_GAPS);
}

/* One line of a channel's quality: mains, ECG, minutes not scorable. */
static void quality_line(FILE *out, const char *name, const rt_channel_quality *q)
{
    fprintf(out, "  %-9s mains %s", name, q->line_hz > 0 ? "" : "none");
    if (q->line_hz > 0)
        fprintf(out, "%g Hz (%.1f dB, notched)", q->line_hz, q->line_db);
    /* "found" needs evidence of a heart (docs/quality.md), so "not found" on a
     * chin without cardiac signal; the beats' source says what the evidence rests on */
    static const char *const FROM[] = {"", " (beats from the ECG channel)",
                                       " (beats from the chin itself)"};
    fprintf(out, "; ECG artifact in this channel: %s%s",
            q->ecg_removed ? "found and removed" : q->ecg_found ? "found" : "none",
            q->ecg_found && q->ecg_source >= 1 && q->ecg_source <= 2 ? FROM[q->ecg_source] : "");
    if (q->bursts_vetoed)
        fprintf(out, ", %zu bursts refused at QRS", q->bursts_vetoed);
    fprintf(out, "; not scorable %.1f min", q->unscorable_total_min);
    if (q->unscorable_total_min > 0)
        fprintf(out, " (clipping %.1f, flat %.1f, pops %.1f)", q->unscorable_min[0],
                q->unscorable_min[1], q->unscorable_min[2]);
    if (q->hp_above_band || q->lp_below_band)
        fprintf(out, "; recorded filters narrow the band");
    if (q->spectrum_narrow)
        fprintf(out, "; spectrum band-limited (%.0f/%.0f dB at the edges)", q->low_edge_db,
                q->high_edge_db);
    fprintf(out, "\n");
}

rt_status rt_night_write_text(const rt_night *night, FILE *out, rt_error *err)
{
    const rt_index_rule *rules = rt_index_rules();
    char v[32], c[32];
    fprintf(out, "remtone night summary: %s\n\n", night->recording_path);
    char sentence[1600];
    rt_night_plain_sentence(night, sentence, sizeof sentence);
    fprintf(out, "In short: %s\n\n", sentence);
    staging_lines(out, night);
    fprintf(out, "REM: %.1f min in %zu bout%s, %.1f min scorable\n", night->rem_minutes,
            night->n_bouts, rt_report_plural(night->n_bouts), night->scorable_minutes);
    fprintf(out, "Channels:");
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (night->channel[r].present)
            fprintf(out, " %s=%s", rt_role_name((rt_role)r), night->channel[r].label);
    fprintf(out, "\n");
    char head[1600], status[96];
    rt_report_headline(night, head, sizeof head);
    fprintf(out, "%s\n\n", head);
    fprintf(out, "%-34s %10s %10s  %s\n", "index", "value", "cutoff", "cutoff reached?");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        rt_report_value_text(&rules[i], night->index[i].value, v, sizeof v);
        if (night->cutoffs.has[i] && rules[i].lower_is_worse) {
            rt_report_value_text(&rules[i], night->cutoffs.value[i], c + 1, sizeof c - 1);
            c[0] = '<'; /* the REM Atonia Index reaches its cutoff from above */
        } else if (night->cutoffs.has[i]) {
            rt_report_value_text(&rules[i], night->cutoffs.value[i], c, sizeof c);
        } else {
            snprintf(c, sizeof c, "none");
        }
        rt_report_status_words(night, i, status, sizeof status);
        fprintf(out, "%-34s %10s %10s  %s", rules[i].id, v, c, status);
        if (rt_cutoff_is_lab(&night->cutoffs, i))
            fprintf(out, " [lab's cutoff, line %ld]", night->cutoffs.line[i]);
        if (night->cutoffs.has[i] && !rt_night_cutoff_verified(night, i))
            fprintf(out, " [cutoff not verified: context only]");
        if (night->index[i].reason[0])
            fprintf(out, " (%s)", night->index[i].reason);
        fprintf(out, "\n");
    }
    fprintf(out, "Cutoffs: %s\n", night->cutoffs.origin);
    rt_context_write_text(night, out);
    const rt_exclusion_summary *x = &night->exclusions;
    if (x->total_minutes > 0) {
        /* the causes in brackets only when there are any: a channel's quality
         * marks leave minutes out without an event */
        fprintf(out, "Left out of REM: %.1f min", x->total_minutes);
        const char *sep = " (";
        for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
            if (x->minutes[t] > 0) {
                fprintf(out, "%s%s %.1f", sep, rt_event_type_name((rt_event_type)t), x->minutes[t]);
                sep = ", ";
            }
        if (x->outside_lights_minutes > 0) {
            fprintf(out, "%soutside lights %.1f", sep, x->outside_lights_minutes);
            sep = ", ";
        }
        if (x->review_minutes > 0) {
            fprintf(out, "%sby the reviewer %.1f", sep, x->review_minutes);
            sep = ", ";
        }
        fprintf(out, "%s\n", sep[0] == ',' ? ")" : "");
    }
    if (x->have_respiratory)
        fprintf(out, "REM apnea-hypopnea index: %.1f/h\n", x->rem_ahi);
    fprintf(out, "Signal quality:\n");
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_channel_result *ch = &night->channel[r];
        if (!ch->present)
            continue;
        quality_line(out, rt_role_name((rt_role)r), &ch->quality);
    }
    fprintf(out, "\n");
    level_line(out, night);
    if (night->n_reservations) {
        fprintf(out, "Reservations:\n");
        for (size_t i = 0; i < night->n_reservations; i++)
            fprintf(out, "  - [%s] %s\n", rt_reservation_code_name(night->reservations[i].code),
                    night->reservations[i].text);
    }
    if (night->agreement.present) {
        fprintf(out, "\n");
        rt_agreement_write_text(&night->agreement, out);
    }
    rt_corrections_write_text(night, out);
    if (night->n_warnings) {
        fprintf(out, "\nWarnings:\n");
        for (size_t i = 0; i < night->n_warnings; i++)
            fprintf(out, "  - %s\n", night->warnings[i]);
    }
    fprintf(out, "\nCautions (SAFETY.md):\n");
    for (size_t i = 0; i < rt_caution_count(); i++)
        fprintf(out, "  %zu. %s\n", i + 1, rt_caution(i));
    fprintf(out, "  %s\n", rt_visual_scoring_note());
    if (ferror(out))
        return rt_fail(err, RT_ERR_IO, "cannot write the summary");
    return RT_OK;
}

static const char *role_of(const rt_role_map *roles, int channel)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (roles->role[r].channel == channel || roles->role[r].reference == channel)
            return rt_role_name((rt_role)r);
    return "";
}

rt_status rt_scan_write_text(const rt_recording *rec, const rt_role_map *roles,
                             const rt_channel_quality *quality, FILE *out, rt_error *err)
{
    static const char *const KINDS[] = {"EDF", "EDF+", "BDF", "BDF+"};
    fprintf(out, "%s: %s, %.1f s (%.2f h), %d channels\n", rt_recording_path(rec),
            KINDS[rt_recording_kind(rec)], rt_recording_duration_s(rec),
            rt_recording_duration_s(rec) / 3600.0, rt_recording_channel_count(rec));
    fprintf(out, "%-4s %-16s %9s %-6s %24s  %s\n", "#", "label", "rate_hz", "unit",
            "physical range", "role");
    for (int i = 0; i < rt_recording_channel_count(rec); i++) {
        const rt_channel_info *ch = rt_recording_channel(rec, i);
        char range[40];
        snprintf(range, sizeof range, "%g .. %g", ch->phys_min, ch->phys_max);
        fprintf(out, "%-4d %-16s %9g %-6s %24s  %s\n", i, ch->label, ch->rate_hz, ch->unit, range,
                role_of(roles, i));
    }
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        if (roles->role[r].reference >= 0)
            fprintf(out, "%s: derived as %s\n", rt_role_name((rt_role)r), roles->role[r].label);
    if (quality) {
        fprintf(out, "Signal quality over the whole recording (docs/quality.md):\n");
        for (int r = 0; r < RT_ROLE_ECG; r++)
            if (roles->role[r].channel >= 0)
                quality_line(out, rt_role_name((rt_role)r), &quality[r]);
    }
    if (ferror(out))
        return rt_fail(err, RT_ERR_IO, "cannot write the scan");
    return RT_OK;
}

rt_status rt_scan_write_json(const rt_recording *rec, const rt_role_map *roles,
                             const rt_channel_quality *quality, const char *path, rt_error *err)
{
    if (!rec || !roles || !path)
        return rt_fail(err, RT_ERR_USAGE, "scan JSON: a recording, roles and a path are needed");
    bool ok = true;
    json_t *root = json_object();
    json_t *chans = json_array();
    for (int i = 0; i < rt_recording_channel_count(rec) && ok; i++) {
        const rt_channel_info *ch = rt_recording_channel(rec, i);
        const char *role = role_of(roles, i);
        json_t *x = json_object();
        rt_json_set(x, "label", rt_json_text(ch->label), &ok);
        rt_json_set(x, "rate_hz", json_real(ch->rate_hz), &ok);
        rt_json_set(x, "unit", rt_json_text(ch->unit), &ok);
        rt_json_set(x, "physical_min", json_real(ch->phys_min), &ok);
        rt_json_set(x, "physical_max", json_real(ch->phys_max), &ok);
        rt_json_set(x, "transducer", rt_json_text(ch->transducer), &ok);
        if (role[0])
            rt_json_set(x, "role", json_string(role), &ok);
        rt_json_push(chans, rt_json_done(x, ok), &ok);
    }
    rt_json_set(root, "channels", rt_json_done(chans, ok), &ok);
    rt_json_set(root, "duration_s", json_real(rt_recording_duration_s(rec)), &ok);
    json_t *map = json_object();
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        rt_json_set(map, rt_role_name((rt_role)r),
                    roles->role[r].channel >= 0 ? rt_json_text(roles->role[r].label) : json_null(),
                    &ok);
    rt_json_set(root, "roles", rt_json_done(map, ok), &ok);
    if (quality) {
        json_t *qo = json_object();
        for (int r = 0; r < RT_ROLE_ECG; r++)
            if (roles->role[r].channel >= 0)
                rt_json_set(qo, rt_role_name((rt_role)r), rt_quality_json(&quality[r]), &ok);
        rt_json_set(root, "quality", rt_json_done(qo, ok), &ok);
    }
    if (!(root = rt_json_done(root, ok)))
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory composing the scan", path);
    rt_status st = rt_json_write(root, path, JSON_INDENT(2), err);
    json_decref(root);
    return st;
}

rt_status rt_rules_write_text(const rt_cutoffs *cutoffs, FILE *out, rt_error *err)
{
    const rt_index_rule *rules = rt_index_rules();
    char c[32];
    char src[600];
    fprintf(out, "%-34s %-8s %-12s %s\n", "index", "unit", "cutoff", "source of the cutoff");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        if (cutoffs->has[i] && rules[i].lower_is_worse)
            snprintf(c, sizeof c, "<%g (<=%g)", cutoffs->value[i], cutoffs->normal_from[i]);
        else if (cutoffs->has[i])
            snprintf(c, sizeof c, ">=%g", cutoffs->value[i]);
        else
            snprintf(c, sizeof c, "none");
        bool lab = rt_cutoff_is_lab(cutoffs, i);
        rt_cutoff_source(cutoffs, i, src, sizeof src);
        fprintf(out, "%-34s %-8s %-12s %s%s%s\n", rules[i].id, rules[i].unit, c,
                lab ? "the lab's own: " : "", src,
                !lab && rules[i].from_memory ? " [value from memory, not verified: context only, "
                                               "never a reason for review]"
                                             : "");
        if (lab && rules[i].has_cutoff)
            fprintf(out, "%-34s published: %g%s, %s\n", "", rules[i].cutoff,
                    strcmp(rules[i].unit, "%") == 0 ? " %" : "", rules[i].source);
        fprintf(out, "%-34s %s\n", "", rules[i].title);
    }
    fprintf(out, "\nCutoffs in force: %s\n%s\n", cutoffs->origin, rt_visual_scoring_note());
    if (ferror(out))
        return rt_fail(err, RT_ERR_IO, "cannot write the rule table");
    return RT_OK;
}

rt_status rt_norms_write_text(const rt_norms *norms, FILE *out, rt_error *err)
{
    size_t n = rt_norms_count(norms);
    fprintf(out, "\nNorms of the lab's file %s (%zu row%s; context only: an index is placed "
            "against the row of the person's sex and age band, and the norms never decide the "
            "level):\n", rt_norms_path(norms), n, n == 1 ? "" : "s");
    for (size_t k = 0; k < n; k++) {
        rt_index_id i;
        rt_norm_stratum row;
        if (!rt_norms_row(norms, k, &i, &row))
            break;
        fprintf(out, "%-34s %s\n", rt_index_rules()[i].id, row.label);
        fprintf(out, "%-34s source: %s%s%s\n", "", row.source, row.method[0] ? "; scored: " : "",
                row.method);
    }
    fprintf(out, "An index the file does not list keeps the built-in overall value, where there "
            "is one (docs/scoring.md, \"Norms\").\n");
    if (ferror(out))
        return rt_fail(err, RT_ERR_IO, "cannot write the norms");
    return RT_OK;
}

rt_status rt_params_write_markdown(FILE *out, rt_error *err)
{
    size_t n = 0;
    const rt_param_desc *t = rt_score_param_table(&n);
    fprintf(out, "# Scoring parameters\n\n"
                 "Generated by `remtone rules --params` from the descriptor table in\n"
                 "src/score/params.c; do not edit by hand. Every parameter is recorded in the\n"
                 "provenance of each JSON result and in the cohort resume key.\n"
                 "docs/scoring.md explains how each is used.\n\n"
                 "| parameter | default | valid range | unit | source or reason |\n"
                 "|---|---|---|---|---|\n");
    for (size_t i = 0; i < n; i++) {
        if (t[i].kind == RT_PARAM_BOOL)
            fprintf(out, "| `%s` | %s | true, false | | %s |\n", t[i].name,
                    t[i].def != 0.0 ? "true" : "false", t[i].source);
        else
            fprintf(out, "| `%s` | %g | %g .. %g | %s | %s |\n", t[i].name, t[i].def, t[i].lo,
                    t[i].hi, t[i].unit, t[i].source);
    }
    if (ferror(out))
        return rt_fail(err, RT_ERR_IO, "cannot write the parameter table");
    return RT_OK;
}
