/* The night result as JSON (schema "remtone-night/4", docs/night-json.md),
 * built with jansson and written atomically. */
#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "digest.h"
#include "internal.h"
#include "output.h"
#include "report_internal.h"
#include "remtone/report.h"
#include "remtone/version.h"

/* jansson refuses NaN and infinities; JSON has null for "no value". */
static json_t *number(double v) { return isfinite(v) ? json_real(v) : json_null(); }

/* Two decimals for percentages, four for ratios: stable text, honest precision. */
static double rounded(double v, int decimals)
{
    double s = pow(10.0, decimals);
    return isfinite(v) ? round(v * s) / s : v;
}


json_t *rt_indices_json(const rt_night *night_in, const rt_index_value *index)
{
    /* the words and counts below read the night's own index array: for other
     * values (a corrected night's automatic ones) they read a copy holding them */
    rt_night *copy = NULL;
    const rt_night *night = night_in;
    if (index != night_in->index) {
        if (!(copy = rt_calloc(1, sizeof *copy)))
            return NULL;
        *copy = *night_in;
        memcpy(copy->index, index, sizeof copy->index);
        night = copy;
    }
    const rt_index_rule *rules = rt_index_rules();
    bool ok = true;
    json_t *o = json_object();
    for (int i = 0; i < RT_IX_COUNT && ok; i++) {
        const rt_index_value *v = &index[i];
        bool pct = strcmp(rules[i].unit, "%") == 0;
        json_t *x = json_object();
        rt_json_set(x, "value", number(rounded(v->value, pct ? 2 : 4)), &ok);
        rt_json_set(x, "unit", json_string(rules[i].unit), &ok);
        rt_json_set(x, "cutoff", night->cutoffs.has[i] ? number(night->cutoffs.value[i])
                                                       : json_null(), &ok);
        if (rules[i].lower_is_worse && night->cutoffs.has[i])
            rt_json_set(x, "normal_from", number(night->cutoffs.normal_from[i]), &ok);
        rt_json_set(x, "status", json_string(rt_index_status_name(v->status)), &ok);
        int reached = rt_report_cutoff_reached(night, i);
        rt_json_set(x, "cutoff_reached", reached < 0 ? json_null() : json_boolean(reached), &ok);
        char words[96], src[600], counted[160];
        rt_report_status_words(night, i, words, sizeof words);
        rt_json_set(x, "cutoff_words", json_string(words), &ok);
        rt_json_set(x, "cutoff_verified",
                    night->cutoffs.has[i] ? json_boolean(rt_night_cutoff_verified(night, i))
                                          : json_null(), &ok);
        rt_cutoff_source(&night->cutoffs, i, src, sizeof src);
        rt_json_set(x, "source", rt_json_text(src), &ok);
        rt_json_set(x, "cutoff_origin",
                    json_string(!night->cutoffs.has[i] ? "none"
                                : rt_cutoff_is_lab(&night->cutoffs, i) ? "lab" : "published"), &ok);
        rt_json_set(x, "definition_source", json_string(rules[i].source), &ok);
        rt_json_set(x, "numerator", json_integer((json_int_t)v->numerator), &ok);
        rt_json_set(x, "denominator", json_integer((json_int_t)v->denominator), &ok);
        rt_json_set(x, "numerator_unit", json_string(rt_report_numerator_unit(i)), &ok);
        rt_json_set(x, "denominator_unit", json_string(rt_report_denominator_unit(i)), &ok);
        rt_report_counted(night, i, counted, sizeof counted);
        rt_json_set(x, "counted", json_string(counted), &ok);
        if (v->reason[0])
            rt_json_set(x, "reason", rt_json_text(v->reason), &ok);
        rt_json_set(o, rules[i].id, rt_json_done(x, ok), &ok);
    }
    free(copy);
    return rt_json_done(o, ok);
}

json_t *rt_quality_json(const rt_channel_quality *q)
{
    static const char *const SOURCES[] = {"none", "ecg", "chin"};
    bool ok = true;
    json_t *o = json_object();
    rt_json_set(o, "mains_hz", q->line_hz > 0 ? number(q->line_hz) : json_null(), &ok);
    rt_json_set(o, "mains_db", q->line_hz > 0 ? number(rounded(q->line_db, 1)) : json_null(), &ok);
    rt_json_set(o, "notches", json_integer(q->notches), &ok);
    int source = q->ecg_source >= 0 && q->ecg_source < 3 ? q->ecg_source : 0;
    rt_json_set(o, "ecg_source", json_string(SOURCES[source]), &ok);
    rt_json_set(o, "ecg_found", json_boolean(q->ecg_found), &ok);
    rt_json_set(o, "ecg_removed", json_boolean(q->ecg_removed), &ok);
    rt_json_set(o, "bursts_vetoed_by_qrs", json_integer((json_int_t)q->bursts_vetoed), &ok);
    json_t *un = json_object();
    for (int k = 0; k < RT_QUALITY_KINDS; k++)
        rt_json_set(un, rt_quality_kind_name(k), number(rounded(q->unscorable_min[k], 2)), &ok);
    rt_json_set(o, "unscorable_minutes", rt_json_done(un, ok), &ok);
    rt_json_set(o, "unscorable_total_minutes", number(rounded(q->unscorable_total_min, 2)), &ok);
    rt_json_set(o, "prefilter_narrows_band", json_boolean(q->hp_above_band || q->lp_below_band),
                &ok);
    rt_json_set(o, "spectrum_low_edge_db", number(rounded(q->low_edge_db, 1)), &ok);
    rt_json_set(o, "spectrum_high_edge_db", number(rounded(q->high_edge_db, 1)), &ok);
    rt_json_set(o, "spectrum_narrows_band", json_boolean(q->spectrum_narrow), &ok);
    return rt_json_done(o, ok);
}

static json_t *channels_json(const rt_night *night)
{
    bool ok = true;
    json_t *a = json_array();
    for (int r = 0; r < RT_ROLE_COUNT && ok; r++) {
        const rt_channel_result *c = &night->channel[r];
        if (!c->present)
            continue;
        json_t *x = json_object();
        rt_json_set(x, "role", json_string(rt_role_name((rt_role)r)), &ok);
        rt_json_set(x, "label", rt_json_text(c->label), &ok);
        rt_json_set(x, "rate_hz", number(c->rate_hz), &ok);
        json_t *band = json_array();
        rt_json_push(band, number(night->params.band_low_hz), &ok);
        rt_json_push(band, number(c->band_high_hz), &ok);
        rt_json_set(x, "band_hz", rt_json_done(band, ok), &ok);
        rt_json_set(x, "low_rate", json_boolean(c->low_rate), &ok);
        rt_json_set(x, "rem_median_uv", number(rounded(c->rem_median_uv, 3)), &ok);
        rt_json_set(x, "atonic_uv", number(c->atonic_valid ? rounded(c->atonic_uv, 3) : NAN), &ok);
        rt_json_set(x, "atonic_drift_per_h",
                    number(c->atonic_valid ? rounded(c->atonic_drift_per_h, 4) : NAN), &ok);
        json_t *lifts = json_array();
        for (size_t b = 0; night->bout_lift && b < night->n_bouts && ok; b++)
            rt_json_push(lifts, number(rounded(c->atonic_floor_uv *
                         night->bout_lift[b * RT_ROLE_COUNT + (size_t)r], 3)), &ok);
        rt_json_set(x, "atonic_bout_uv", rt_json_done(lifts, ok), &ok);
        rt_json_set(x, "quality", rt_quality_json(&c->quality), &ok);
        rt_json_push(a, rt_json_done(x, ok), &ok);
    }
    return rt_json_done(a, ok);
}

static json_t *strings_json(const char (*items)[240], size_t n)
{
    bool ok = true;
    json_t *a = json_array();
    for (size_t i = 0; i < n && ok; i++)
        rt_json_push(a, rt_json_text(items[i]), &ok);
    return rt_json_done(a, ok);
}

static json_t *evidence_json(const rt_night *night, const rt_report_options *opt, size_t limit)
{
    size_t *order = rt_calloc(limit, sizeof *order);
    if (!order)
        return NULL;
    bool ok = true;
    json_t *a = json_array();
    size_t n = rt_report_rank_evidence(night, order, limit); /* shared with the page */
    for (size_t rank = 0; rank < n && ok; rank++) {
        const rt_epoch_result *er = &night->epochs[order[rank]];
        json_t *x = json_object();
        rt_json_set(x, "rank", json_integer((json_int_t)rank + 1), &ok);
        char clock[16], video[32];
        rt_report_clock(&night->start, er->onset_s, clock, sizeof clock);
        rt_json_set(x, "epoch", json_integer((json_int_t)er->epoch + 1), &ok);
        rt_json_set(x, "clock_time", json_string(clock), &ok);
        rt_json_set(x, "onset_s", number(er->onset_s), &ok);
        if (rt_report_video_time(opt, er->onset_s, video, sizeof video))
            rt_json_set(x, "video_time", json_string(video), &ok);
        rt_json_set(x, "sinbar_active_minis", json_integer(er->sinbar_any_minis), &ok);
        rt_json_set(x, "aasm_phasic_minis", json_integer(er->aasm_any_minis), &ok);
        rt_json_set(x, "tonic", json_boolean(er->sinbar_tonic), &ok);
        rt_json_set(x, "tonic_share", number(rounded(er->tonic_share, 3)), &ok);
        rt_json_push(a, rt_json_done(x, ok), &ok);
    }
    free(order);
    return rt_json_done(a, ok);
}

/* Every parameter of the descriptor table, by name (remtone/score.h). */
static json_t *params_json(const rt_score_params *p)
{
    size_t n = 0;
    const rt_param_desc *t = rt_score_param_table(&n);
    bool ok = true;
    json_t *o = json_object();
    for (size_t i = 0; i < n && ok; i++) {
        double v = rt_score_param_get(p, &t[i]);
        rt_json_set(o, t[i].name, t[i].kind == RT_PARAM_BOOL  ? json_boolean(v != 0.0)
                                  : t[i].kind == RT_PARAM_INT ? json_integer((json_int_t)v)
                                                              : number(v), &ok);
    }
    return rt_json_done(o, ok);
}

static rt_status provenance_json(const rt_night *night, const rt_run_inputs *in, json_t **out,
                                 rt_error *err)
{
    *out = NULL;
    json_t *inputs = json_object();
    if (!inputs)
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the provenance");
    rt_status st = RT_OK;
    if (in) {
        st = rt_file_identity_add(inputs, "recording", in->recording, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "stages", in->stages, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "events", in->events, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "cutoffs", in->cutoffs, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "label_map", in->label_map, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "corrections", in->corrections, true, err);
        if (st == RT_OK)
            st = rt_file_identity_add(inputs, "norms",
                                      night->norms_file[0] ? night->norms_file : NULL, true, err);
    }
    if (st != RT_OK) {
        json_decref(inputs);
        return st;
    }
    char when[32];
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(when, sizeof when, "%Y-%m-%dT%H:%M:%SZ", &tm);
    bool ok = true;
    json_t *p = json_object();
    rt_json_set(p, "tool", json_string("remtone"), &ok);
    rt_json_set(p, "version", json_string(rt_version()), &ok);
    rt_json_set(p, "parameters", params_json(&night->params), &ok);
    rt_json_set(p, "cutoffs", rt_json_text(night->cutoffs.origin), &ok);
    rt_json_set(p, "inputs", inputs, &ok);
    rt_json_set(p, "run_at", json_string(when), &ok);
    if (!(*out = rt_json_done(p, ok)))
        return rt_fail(err, RT_ERR_NOMEM, "out of memory for the provenance");
    return RT_OK;
}

static json_t *exclusions_json(const rt_night *night)
{
    const rt_exclusion_summary *x = &night->exclusions;
    const rt_score_params *p = &night->params;
    bool ok = true;
    json_t *by = json_object();
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
        if (x->minutes[t] > 0)
            rt_json_set(by, rt_event_type_name((rt_event_type)t),
                        number(rounded(x->minutes[t], 2)), &ok);
    if (x->outside_lights_minutes > 0)
        rt_json_set(by, "outside-lights", number(rounded(x->outside_lights_minutes, 2)), &ok);
    if (x->review_minutes > 0)
        rt_json_set(by, "review", number(rounded(x->review_minutes, 2)), &ok);
    json_t *o = json_object();
    rt_json_set(o, "minutes", number(rounded(x->total_minutes, 2)), &ok);
    rt_json_set(o, "minutes_by_reason", rt_json_done(by, ok), &ok);
    rt_json_set(o, "rem_ahi_per_h", number(rounded(x->rem_ahi, 2)), &ok);
    rt_json_set(o, "policy", json_pack("{s:b,s:b,s:b,s:f,s:f}", "artifacts",
                                       p->exclude_artifacts, "snoring", p->exclude_snoring,
                                       "respiratory", p->exclude_respiratory, "margin_s",
                                       p->event_margin_s, "resp_arousal_gap_s",
                                       p->resp_arousal_gap_s), &ok);
    return rt_json_done(o, ok);
}

/* What the staging covers, with every gap (docs/night-json.md, `staging`). */
static json_t *staging_json(const rt_night *night)
{
    const rt_staging_summary *s = &night->staging;
    bool ok = true;
    json_t *gaps = json_array();
    char clock[16];
    for (size_t i = 0; i < s->n_gaps && ok; i++) {
        rt_report_clock(&night->start, s->gaps[i].start_s, clock, sizeof clock);
        json_t *g = json_object();
        rt_json_set(g, "start_s", number(s->gaps[i].start_s), &ok);
        rt_json_set(g, "start_clock", json_string(clock), &ok);
        rt_json_set(g, "duration_s", number(s->gaps[i].duration_s), &ok);
        rt_json_push(gaps, rt_json_done(g, ok), &ok);
    }
    json_t *o = json_object();
    rt_json_set(o, "recording_hours", number(rounded(night->recording_s / 3600.0, 3)), &ok);
    rt_json_set(o, "staged_hours", number(rounded(s->staged_s / 3600.0, 3)), &ok);
    rt_json_set(o, "complete", json_boolean(!s->partial && s->n_gaps == 0), &ok);
    rt_json_set(o, "expected_from_s", number(s->expect_from_s), &ok);
    rt_json_set(o, "expected_to_s", number(s->expect_to_s), &ok);
    rt_json_set(o, "expected_from",
                json_string(s->lights_off_given ? "lights-off" : "recording-start"), &ok);
    rt_json_set(o, "expected_to", json_string(s->lights_on_given ? "lights-on" : "recording-end"),
                &ok);
    rt_json_set(o, "first_staged_s", number(s->first_staged_s), &ok);
    rt_json_set(o, "staged_end_s", number(s->staged_end_s), &ok);
    rt_json_set(o, "unstaged_start_s", number(s->unstaged_start_s), &ok);
    rt_json_set(o, "unstaged_end_s", number(s->unstaged_end_s), &ok);
    rt_json_set(o, "tolerance_start_s", number(s->tolerance_start_s), &ok);
    rt_json_set(o, "tolerance_end_s", number(s->tolerance_end_s), &ok);
    rt_json_set(o, "partial", json_boolean(s->partial), &ok);
    rt_json_set(o, "gaps", rt_json_done(gaps, ok), &ok);
    rt_json_set(o, "gap_total_s", number(s->gap_total_s), &ok);
    return rt_json_done(o, ok);
}

static json_t *reservations_json(const rt_night *night)
{
    bool ok = true;
    json_t *a = json_array();
    for (size_t i = 0; i < night->n_reservations && ok; i++) {
        json_t *r = json_object();
        rt_json_set(r, "code", json_string(rt_reservation_code_name(night->reservations[i].code)),
                    &ok);
        rt_json_set(r, "text", rt_json_text(night->reservations[i].text), &ok);
        rt_json_push(a, rt_json_done(r, ok), &ok);
    }
    return rt_json_done(a, ok);
}

static json_t *cautions_json(void)
{
    bool ok = true;
    json_t *a = json_array();
    for (size_t i = 0; i < rt_caution_count(); i++)
        rt_json_push(a, json_string(rt_caution(i)), &ok);
    rt_json_push(a, json_string(rt_visual_scoring_note()), &ok);
    return rt_json_done(a, ok);
}

/* ---- the night in context (docs/night-json.md: sleep, rem_periods, halves,
 * norms, plain_sentence) ---- */

static json_t *sleep_json(const rt_night *night)
{
    const rt_sleep_context *c = &night->sleep;
    bool ok = true;
    char clock[16];
    json_t *o = json_object();
    rt_json_set(o, "recording_minutes", number(rounded(c->recording_min, 2)), &ok);
    rt_json_set(o, "lights_off_given", json_boolean(c->lights_off_given), &ok);
    rt_json_set(o, "lights_on_given", json_boolean(c->lights_on_given), &ok);
    rt_report_clock(&night->start, c->in_bed_from_s, clock, sizeof clock);
    rt_json_set(o, "in_bed_from_s", number(c->in_bed_from_s), &ok);
    rt_json_set(o, "in_bed_from_clock", json_string(clock), &ok);
    rt_report_clock(&night->start, c->in_bed_to_s, clock, sizeof clock);
    rt_json_set(o, "in_bed_to_s", number(c->in_bed_to_s), &ok);
    rt_json_set(o, "in_bed_to_clock", json_string(clock), &ok);
    rt_json_set(o, "time_in_bed_minutes", number(rounded(c->in_bed_min, 2)), &ok);
    rt_json_set(o, "total_sleep_minutes", number(rounded(c->sleep_min, 2)), &ok);
    rt_json_set(o, "sleep_efficiency_pct", number(rounded(c->efficiency_pct, 2)), &ok);
    rt_json_set(o, "sleep_onset_s", number(c->sleep_onset_s), &ok);
    rt_json_set(o, "sleep_latency_minutes", number(rounded(c->sleep_latency_min, 2)), &ok);
    rt_json_set(o, "rem_latency_minutes", number(rounded(c->rem_latency_min, 2)), &ok);
    rt_json_set(o, "wake_after_sleep_onset_minutes", number(rounded(c->waso_min, 2)), &ok);
    json_t *st = json_object();
    static const rt_stage STAGES[] = {RT_STAGE_W, RT_STAGE_N1, RT_STAGE_N2, RT_STAGE_N3,
                                      RT_STAGE_R, RT_STAGE_MOVEMENT, RT_STAGE_UNSCORED};
    for (size_t i = 0; i < sizeof STAGES / sizeof STAGES[0]; i++) {
        json_t *x = json_object();
        rt_json_set(x, "minutes", number(rounded(c->stage_min[STAGES[i]], 2)), &ok);
        rt_json_set(x, "pct_of_sleep", number(rounded(c->stage_pct[STAGES[i]], 2)), &ok);
        rt_json_set(st, STAGES[i] == RT_STAGE_UNSCORED ? "unstaged" : rt_stage_name(STAGES[i]),
                    rt_json_done(x, ok), &ok);
    }
    rt_json_set(o, "stages", rt_json_done(st, ok), &ok);
    rt_json_set(o, "rem_periods", json_integer((json_int_t)c->rem_periods), &ok);
    rt_json_set(o, "half_split_s", number(c->half_split_s), &ok);
    return rt_json_done(o, ok);
}

/* A period or a half: span, minutes and every index (value, status, counts). */
static json_t *period_json(const rt_night *night, const rt_rem_period *g, size_t number_1)
{
    const rt_index_rule *rules = rt_index_rules();
    bool ok = true;
    char clock[16];
    json_t *o = json_object();
    if (number_1)
        rt_json_set(o, "period", json_integer((json_int_t)number_1), &ok);
    rt_json_set(o, "half", json_string(g->half ? "second" : "first"), &ok);
    rt_json_set(o, "bouts", json_integer((json_int_t)g->n_bouts), &ok);
    if (g->n_bouts) {
        rt_json_set(o, "first_epoch", json_integer((json_int_t)g->first_epoch + 1), &ok);
        rt_json_set(o, "last_epoch", json_integer((json_int_t)g->last_epoch + 1), &ok);
        rt_json_set(o, "start_s", number(g->onset_s), &ok);
        rt_report_clock(&night->start, g->onset_s, clock, sizeof clock);
        rt_json_set(o, "start_clock", json_string(clock), &ok);
        rt_json_set(o, "end_s", number(g->end_s), &ok);
        rt_report_clock(&night->start, g->end_s, clock, sizeof clock);
        rt_json_set(o, "end_clock", json_string(clock), &ok);
    }
    rt_json_set(o, "rem_minutes", number(rounded(g->rem_minutes, 2)), &ok);
    rt_json_set(o, "scorable_minutes", number(rounded(g->scorable_minutes, 2)), &ok);
    rt_json_set(o, "excluded_minutes", number(rounded(g->exclusions.total_minutes, 2)), &ok);
    rt_json_set(o, "rem_ahi_per_h", number(rounded(g->exclusions.rem_ahi, 2)), &ok);
    json_t *ix = json_object();
    for (int i = 0; i < RT_IX_COUNT && ok; i++) {
        const rt_index_value *v = &g->index[i];
        json_t *x = json_object();
        rt_json_set(x, "value", number(rounded(v->value, strcmp(rules[i].unit, "%") == 0 ? 2 : 4)),
                    &ok);
        rt_json_set(x, "status", json_string(rt_index_status_name(v->status)), &ok);
        rt_json_set(x, "numerator", json_integer((json_int_t)v->numerator), &ok);
        rt_json_set(x, "denominator", json_integer((json_int_t)v->denominator), &ok);
        if (v->reason[0])
            rt_json_set(x, "reason", rt_json_text(v->reason), &ok);
        rt_json_set(ix, rules[i].id, rt_json_done(x, ok), &ok);
    }
    rt_json_set(o, "indices", rt_json_done(ix, ok), &ok);
    return rt_json_done(o, ok);
}

static json_t *periods_json(const rt_night *night)
{
    bool ok = true;
    json_t *a = json_array();
    for (size_t i = 0; i < night->n_periods && ok; i++)
        rt_json_push(a, period_json(night, &night->periods[i], i + 1), &ok);
    return rt_json_done(a, ok);
}

static json_t *halves_json(const rt_night *night)
{
    bool ok = true;
    json_t *a = json_array();
    for (int h = 0; h < 2 && ok; h++)
        rt_json_push(a, period_json(night, &night->halves[h], 0), &ok);
    return rt_json_done(a, ok);
}

/* The stratum an index was placed against: who, ages, percentile, and the
 * lab file's line (null for the built-in table). */
static json_t *stratum_json(const rt_night *night, const rt_norm_place *np)
{
    const rt_norm_stratum *s = &np->stratum;
    bool ok = true;
    json_t *o = json_object();
    rt_json_set(o, "sex", json_string(s->sex == 'F' ? "F" : s->sex == 'M' ? "M" : "any"), &ok);
    rt_json_set(o, "age_from", number(s->age_from), &ok);
    rt_json_set(o, "age_to", number(s->age_to), &ok);
    rt_json_set(o, "age_to_included", json_boolean(!np->lab), &ok);
    rt_json_set(o, "percentile", number(s->percentile), &ok);
    rt_json_set(o, "label", rt_json_text(s->label), &ok);
    rt_json_set(o, "file", np->lab ? rt_json_text(night->norms_file) : json_null(), &ok);
    rt_json_set(o, "line", np->lab ? json_integer(s->line) : json_null(), &ok);
    return rt_json_done(o, ok);
}

/* One index against its norm (docs/night-json.md, "norms"). */
static json_t *norm_index_json(const rt_night *night, int i)
{
    const rt_norm_place *np = &night->norms[i];
    const rt_index_rule *rule = &rt_index_rules()[i];
    size_t n = 0;
    const rt_norm_row *t = rt_norm_table(&n);
    const rt_norm_row *r = np->row >= 0 && (size_t)np->row < n ? &t[np->row] : NULL;
    const rt_norm_stratum *s = &np->stratum;
    bool shown = np->applied || !np->lab; /* a built-in row is shown even outside its ages */
    bool ok = true;
    json_t *x = json_object();
    rt_json_set(x, "value", number(rounded(night->index[i].value,
                                           strcmp(rule->unit, "%") == 0 ? 2 : 4)), &ok);
    rt_json_set(x, "band", json_string(rt_norm_band_name(np->band)), &ok);
    rt_json_set(x, "text", rt_json_text(np->text), &ok);
    rt_json_set(x, "measure", json_string(!np->lab && r ? r->measure : rule->title), &ok);
    rt_json_set(x, "normal_limit", shown ? number(s->value) : json_null(), &ok);
    rt_json_set(x, "normal_limit_source", shown ? rt_json_text(s->source) : json_null(), &ok);
    rt_json_set(x, "normal_limit_origin", json_string(np->lab ? "lab-supplied" : "published"), &ok);
    rt_json_set(x, "normal_limit_from_memory", json_boolean(!np->lab && r && r->limit_from_memory),
                &ok);
    bool cut = r && isfinite(r->rbd_cutoff);
    rt_json_set(x, "rbd_cutoff", cut ? number(r->rbd_cutoff) : json_null(), &ok);
    rt_json_set(x, "rbd_cutoff_source", cut ? json_string(r->rbd_cutoff_source) : json_null(), &ok);
    rt_json_set(x, "ages", shown ? json_pack("[f,f]", s->age_from, s->age_to) : json_null(), &ok);
    rt_json_set(x, "group", shown ? rt_json_text(s->who) : json_null(), &ok);
    rt_json_set(x, "method", shown && s->method[0] ? rt_json_text(s->method) : json_null(), &ok);
    rt_json_set(x, "stratum", shown ? stratum_json(night, np) : json_null(), &ok);
    const char *prefix = "not placed: ";
    rt_json_set(x, "not_placed_reason",
                np->band == RT_NORM_NOT_PLACED && strncmp(np->text, prefix, strlen(prefix)) == 0
                    ? rt_json_text(np->text + strlen(prefix)) : json_null(), &ok);
    return rt_json_done(x, ok);
}

/* null when no age, sex or norms file was given; else the person and each
 * index placed. */
static json_t *norms_json(const rt_night *night)
{
    if (!night->norms_placed)
        return json_null();
    const rt_index_rule *rules = rt_index_rules();
    bool ok = true;
    json_t *o = json_object();
    char sex[2] = {night->person.sex, '\0'};
    rt_json_set(o, "age_years", number(night->person.age_years), &ok);
    rt_json_set(o, "sex", sex[0] ? json_string(sex) : json_null(), &ok);
    rt_json_set(o, "file", night->norms_file[0] ? rt_json_text(night->norms_file) : json_null(),
                &ok);
    json_t *ix = json_object();
    for (int i = 0; i < RT_IX_COUNT && ok; i++)
        if (night->norms[i].row >= 0 || night->norms[i].lab)
            rt_json_set(ix, rules[i].id, norm_index_json(night, i), &ok);
    rt_json_set(o, "indices", rt_json_done(ix, ok), &ok);
    rt_json_set(o, "decides_level", json_false(), &ok);
    return rt_json_done(o, ok);
}

rt_status rt_night_write_json(const rt_night *night, const rt_run_inputs *inputs,
                              const char *path, rt_error *err)
{
    if (!night || !path)
        return rt_fail(err, RT_ERR_USAGE, "night JSON: a night and a path are needed");
    json_t *prov = NULL;
    rt_status st = provenance_json(night, inputs, &prov, err);
    if (st != RT_OK)
        return st;
    bool ok = true;
    json_t *root = json_object();
    rt_json_set(root, "schema", json_string("remtone-night/4"), &ok);
    rt_json_set(root, "rem", json_pack("{s:I,s:f,s:f,s:I}", "epochs",
                                       (json_int_t)night->rem_epochs, "minutes",
                                       night->rem_minutes, "scorable_minutes",
                                       night->scorable_minutes, "bouts",
                                       (json_int_t)night->n_bouts), &ok);
    char sentence[1600];
    rt_night_plain_sentence(night, sentence, sizeof sentence);
    rt_json_set(root, "plain_sentence", rt_json_text(sentence), &ok);
    rt_json_set(root, "recording_s", number(night->recording_s), &ok);
    rt_json_set(root, "staging", staging_json(night), &ok);
    rt_json_set(root, "channels", channels_json(night), &ok);
    rt_json_set(root, "aasm_nrem_reference_uv", number(rounded(night->nrem_reference_uv, 4)), &ok);
    json_t *head = json_object();
    rt_json_set(head, "index", json_string(rt_index_rules()[night->headline].id), &ok);
    rt_json_set(head, "value", number(rounded(night->index[night->headline].value, 2)), &ok);
    rt_json_set(head, "preferred", json_string(rt_index_rules()[RT_IX_SINBAR_COMBINED_3S].id), &ok);
    int head_reached = rt_report_cutoff_reached(night, (int)night->headline);
    rt_json_set(head, "cutoff_reached", head_reached < 0 ? json_null() : json_boolean(head_reached),
                &ok);
    char head_text[1600];
    rt_report_headline(night, head_text, sizeof head_text);
    rt_json_set(head, "text", rt_json_text(head_text), &ok);
    rt_json_set(root, "headline", rt_json_done(head, ok), &ok);
    rt_json_set(root, "indices", rt_indices_json(night, night->index), &ok);
    json_t *rev = json_object();
    rt_json_set(rev, "flagged", json_boolean(night->level == RT_REVIEW_FLAGGED), &ok);
    rt_json_set(rev, "level", json_string(rt_review_level_name(night->level)), &ok);
    rt_json_set(rev, "reasons", strings_json(night->reasons, night->n_reasons), &ok);
    rt_json_set(rev, "with_reservations", json_boolean(night->n_reservations > 0), &ok);
    char statement[700];
    rt_report_statement(night, statement, sizeof statement);
    rt_json_set(rev, "statement", rt_json_text(statement), &ok);
    rt_json_set(root, "review", rt_json_done(rev, ok), &ok);
    rt_json_set(root, "reservations", reservations_json(night), &ok);
    rt_json_set(root, "sleep", sleep_json(night), &ok);
    rt_json_set(root, "rem_periods", periods_json(night), &ok);
    rt_json_set(root, "halves", halves_json(night), &ok);
    rt_json_set(root, "norms", norms_json(night), &ok);
    rt_json_set(root, "exclusions", exclusions_json(night), &ok);
    rt_json_set(root, "agreement", rt_agreement_json(&night->agreement), &ok);
    rt_json_set(root, "corrections", rt_corrections_json(night), &ok);
    rt_json_set(root, "evidence", evidence_json(night, inputs ? inputs->report : NULL, 10), &ok);
    rt_json_set(root, "warnings", strings_json(night->warnings, night->n_warnings), &ok);
    rt_json_set(root, "cautions", cautions_json(), &ok);
    rt_json_set(root, "provenance", prov, &ok);
    root = rt_json_done(root, ok);
    if (!root)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory composing the night result", path);
    st = rt_json_write(root, path, JSON_INDENT(2) | JSON_REAL_PRECISION(10), err);
    json_decref(root);
    return st;
}
