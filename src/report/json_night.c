/* The night result as JSON (schema "remtone-night/2", docs/night-json.md),
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


static json_t *indices_json(const rt_night *night)
{
    const rt_index_rule *rules = rt_index_rules();
    json_t *o = json_object();
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_value *v = &night->index[i];
        bool pct = strcmp(rules[i].unit, "%") == 0;
        json_t *x = json_object();
        json_object_set_new(x, "value", number(rounded(v->value, pct ? 2 : 4)));
        json_object_set_new(x, "unit", json_string(rules[i].unit));
        json_object_set_new(x, "cutoff", night->cutoffs.has[i] ? number(night->cutoffs.value[i])
                                                              : json_null());
        if (rules[i].lower_is_worse && night->cutoffs.has[i])
            json_object_set_new(x, "normal_from", number(night->cutoffs.normal_from[i]));
        json_object_set_new(x, "status", json_string(rt_index_status_name(v->status)));
        json_object_set_new(x, "source", json_string(rules[i].source));
        json_object_set_new(x, "numerator", json_integer((json_int_t)v->numerator));
        json_object_set_new(x, "denominator", json_integer((json_int_t)v->denominator));
        if (v->reason[0])
            json_object_set_new(x, "reason", rt_json_text(v->reason));
        json_object_set_new(o, rules[i].id, x);
    }
    return o;
}

json_t *rt_quality_json(const rt_channel_quality *q)
{
    static const char *const SOURCES[] = {"none", "ecg", "chin"};
    json_t *o = json_object();
    json_object_set_new(o, "mains_hz", q->line_hz > 0 ? json_real(q->line_hz) : json_null());
    json_object_set_new(o, "mains_db", q->line_hz > 0 ? json_real(rounded(q->line_db, 1)) : json_null());
    json_object_set_new(o, "notches", json_integer(q->notches));
    json_object_set_new(o, "ecg_source", json_string(SOURCES[q->ecg_source >= 0 && q->ecg_source < 3 ? q->ecg_source : 0]));
    json_object_set_new(o, "ecg_found", json_boolean(q->ecg_found));
    json_object_set_new(o, "ecg_removed", json_boolean(q->ecg_removed));
    json_object_set_new(o, "bursts_vetoed_by_qrs", json_integer((json_int_t)q->bursts_vetoed));
    json_t *un = json_object();
    for (int k = 0; k < RT_QUALITY_KINDS; k++)
        json_object_set_new(un, rt_quality_kind_name(k), json_real(rounded(q->unscorable_min[k], 2)));
    json_object_set_new(o, "unscorable_minutes", un);
    json_object_set_new(o, "unscorable_total_minutes", json_real(rounded(q->unscorable_total_min, 2)));
    json_object_set_new(o, "prefilter_narrows_band", json_boolean(q->hp_above_band || q->lp_below_band));
    json_object_set_new(o, "spectrum_low_edge_db", number(rounded(q->low_edge_db, 1)));
    json_object_set_new(o, "spectrum_high_edge_db", number(rounded(q->high_edge_db, 1)));
    json_object_set_new(o, "spectrum_narrows_band", json_boolean(q->spectrum_narrow));
    return o;
}

static json_t *channels_json(const rt_night *night)
{
    json_t *a = json_array();
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        const rt_channel_result *c = &night->channel[r];
        if (!c->present)
            continue;
        json_t *x = json_object();
        json_object_set_new(x, "role", json_string(rt_role_name((rt_role)r)));
        json_object_set_new(x, "label", rt_json_text(c->label));
        json_object_set_new(x, "rate_hz", json_real(c->rate_hz));
        json_object_set_new(x, "band_hz", json_pack("[ff]", night->params.band_low_hz,
                                                     c->band_high_hz));
        json_object_set_new(x, "low_rate", json_boolean(c->low_rate));
        json_object_set_new(x, "rem_median_uv", number(rounded(c->rem_median_uv, 3)));
        json_object_set_new(x, "atonic_uv", number(c->atonic_valid ? rounded(c->atonic_uv, 3) : NAN));
        json_object_set_new(x, "atonic_drift_per_h",
                            number(c->atonic_valid ? rounded(c->atonic_drift_per_h, 4) : NAN));
        json_t *lifts = json_array();
        for (size_t b = 0; night->bout_lift && b < night->n_bouts; b++)
            json_array_append_new(lifts, number(rounded(c->atonic_floor_uv *
                                  night->bout_lift[b * RT_ROLE_COUNT + (size_t)r], 3)));
        json_object_set_new(x, "atonic_bout_uv", lifts);
        json_object_set_new(x, "quality", rt_quality_json(&c->quality));
        json_array_append_new(a, x);
    }
    return a;
}

static json_t *strings_json(const char (*items)[240], size_t n)
{
    json_t *a = json_array();
    for (size_t i = 0; i < n; i++)
        json_array_append_new(a, rt_json_text(items[i]));
    return a;
}

static json_t *evidence_json(const rt_night *night, size_t limit)
{
    json_t *a = json_array();
    size_t *order = rt_calloc(limit, sizeof *order);
    if (!order)
        return a;
    size_t n = rt_report_rank_evidence(night, order, limit); /* shared with the page */
    for (size_t rank = 0; rank < n; rank++) {
        const rt_epoch_result *er = &night->epochs[order[rank]];
        json_t *x = json_object();
        json_object_set_new(x, "rank", json_integer((json_int_t)rank + 1));
        json_object_set_new(x, "epoch", json_integer((json_int_t)er->epoch));
        json_object_set_new(x, "onset_s", json_real(er->onset_s));
        json_object_set_new(x, "sinbar_active_minis", json_integer(er->sinbar_any_minis));
        json_object_set_new(x, "aasm_phasic_minis", json_integer(er->aasm_any_minis));
        json_object_set_new(x, "tonic", json_boolean(er->sinbar_tonic));
        json_object_set_new(x, "tonic_share", json_real(rounded(er->tonic_share, 3)));
        json_array_append_new(a, x);
    }
    free(order);
    return a;
}

/* Every parameter of the descriptor table, by name (remtone/score.h). */
static json_t *params_json(const rt_score_params *p)
{
    size_t n = 0;
    const rt_param_desc *t = rt_score_param_table(&n);
    json_t *o = json_object();
    for (size_t i = 0; o && i < n; i++) {
        double v = rt_score_param_get(p, &t[i]);
        json_t *x = t[i].kind == RT_PARAM_BOOL  ? json_boolean(v != 0.0)
                    : t[i].kind == RT_PARAM_INT ? json_integer((json_int_t)v)
                                                : json_real(v);
        if (!x || json_object_set_new(o, t[i].name, x) != 0) {
            json_decref(o);
            return NULL;
        }
    }
    return o;
}

static rt_status input_json(json_t *inputs, const char *role, const char *path, rt_error *err)
{
    if (!path)
        return RT_OK;
    json_t *id = rt_file_identity_json(path, true, err);
    if (!id)
        return err ? err->status : RT_ERR_IO;
    json_object_set_new(inputs, role, id);
    return RT_OK;
}

static rt_status provenance_json(const rt_night *night, const rt_run_inputs *in, json_t **out,
                                 rt_error *err)
{
    json_t *inputs = json_object();
    rt_status st = RT_OK;
    if (in) {
        st = input_json(inputs, "recording", in->recording, err);
        if (st == RT_OK)
            st = input_json(inputs, "stages", in->stages, err);
        if (st == RT_OK)
            st = input_json(inputs, "events", in->events, err);
        if (st == RT_OK)
            st = input_json(inputs, "cutoffs", in->cutoffs, err);
        if (st == RT_OK)
            st = input_json(inputs, "label_map", in->label_map, err);
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
    *out = json_pack("{s:s,s:s,s:o,s:o,s:o}", "tool", "remtone", "version", rt_version(),
                     "parameters", params_json(&night->params), "cutoffs",
                     rt_json_text(night->cutoffs.origin), "inputs", inputs);
    json_object_set_new(*out, "run_at", json_string(when));
    return RT_OK;
}

static json_t *exclusions_json(const rt_night *night)
{
    const rt_exclusion_summary *x = &night->exclusions;
    const rt_score_params *p = &night->params;
    json_t *by = json_object();
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++)
        if (x->minutes[t] > 0)
            json_object_set_new(by, rt_event_type_name((rt_event_type)t),
                                json_real(rounded(x->minutes[t], 2)));
    if (x->outside_lights_minutes > 0)
        json_object_set_new(by, "outside-lights", json_real(rounded(x->outside_lights_minutes, 2)));
    json_t *o = json_object();
    json_object_set_new(o, "minutes", json_real(rounded(x->total_minutes, 2)));
    json_object_set_new(o, "minutes_by_reason", by);
    json_object_set_new(o, "rem_ahi_per_h", number(rounded(x->rem_ahi, 2)));
    json_object_set_new(o, "policy", json_pack("{s:b,s:b,s:b,s:f,s:f}", "artifacts",
                                               p->exclude_artifacts, "snoring", p->exclude_snoring,
                                               "respiratory", p->exclude_respiratory, "margin_s",
                                               p->event_margin_s, "resp_arousal_gap_s",
                                               p->resp_arousal_gap_s));
    return o;
}

/* What the staging covers, with every gap (docs/night-json.md, `staging`). */
static json_t *staging_json(const rt_night *night)
{
    const rt_staging_summary *s = &night->staging;
    json_t *gaps = json_array();
    char clock[16];
    for (size_t i = 0; i < s->n_gaps; i++) {
        rt_report_clock(&night->start, s->gaps[i].start_s, clock, sizeof clock);
        json_array_append_new(gaps, json_pack("{s:f,s:s,s:f}", "start_s", s->gaps[i].start_s,
                                              "start_clock", clock, "duration_s",
                                              s->gaps[i].duration_s));
    }
    json_t *o = json_object();
    json_object_set_new(o, "recording_hours", json_real(rounded(night->recording_s / 3600.0, 3)));
    json_object_set_new(o, "staged_hours", json_real(rounded(s->staged_s / 3600.0, 3)));
    json_object_set_new(o, "complete", json_boolean(!s->partial && s->n_gaps == 0));
    json_object_set_new(o, "expected_from_s", json_real(s->expect_from_s));
    json_object_set_new(o, "expected_to_s", json_real(s->expect_to_s));
    json_object_set_new(o, "expected_from", json_string(s->lights_off_given ? "lights-off"
                                                                            : "recording-start"));
    json_object_set_new(o, "expected_to", json_string(s->lights_on_given ? "lights-on"
                                                                         : "recording-end"));
    json_object_set_new(o, "first_staged_s", number(s->first_staged_s));
    json_object_set_new(o, "staged_end_s", number(s->staged_end_s));
    json_object_set_new(o, "unstaged_start_s", json_real(s->unstaged_start_s));
    json_object_set_new(o, "unstaged_end_s", json_real(s->unstaged_end_s));
    json_object_set_new(o, "tolerance_start_s", json_real(s->tolerance_start_s));
    json_object_set_new(o, "tolerance_end_s", json_real(s->tolerance_end_s));
    json_object_set_new(o, "partial", json_boolean(s->partial));
    json_object_set_new(o, "gaps", gaps);
    json_object_set_new(o, "gap_total_s", json_real(s->gap_total_s));
    return o;
}

static json_t *reservations_json(const rt_night *night)
{
    json_t *a = json_array();
    for (size_t i = 0; i < night->n_reservations; i++)
        json_array_append_new(a, json_pack("{s:s,s:s}", "code",
                                           rt_reservation_code_name(night->reservations[i].code),
                                           "text", night->reservations[i].text));
    return a;
}

static json_t *cautions_json(void)
{
    json_t *a = json_array();
    for (size_t i = 0; i < rt_caution_count(); i++)
        json_array_append_new(a, json_string(rt_caution(i)));
    json_array_append_new(a, json_string(rt_visual_scoring_note()));
    return a;
}

rt_status rt_night_write_json(const rt_night *night, const rt_run_inputs *inputs,
                              const char *path, rt_error *err)
{
    json_t *prov = NULL;
    rt_status st = provenance_json(night, inputs, &prov, err);
    if (st != RT_OK)
        return st;
    json_t *root = json_object();
    json_object_set_new(root, "schema", json_string("remtone-night/2"));
    json_object_set_new(root, "rem", json_pack("{s:I,s:f,s:f,s:I}", "epochs",
                                               (json_int_t)night->rem_epochs, "minutes",
                                               night->rem_minutes, "scorable_minutes",
                                               night->scorable_minutes, "bouts",
                                               (json_int_t)night->n_bouts));
    json_object_set_new(root, "recording_s", json_real(night->recording_s));
    json_object_set_new(root, "staging", staging_json(night));
    json_object_set_new(root, "channels", channels_json(night));
    json_object_set_new(root, "aasm_nrem_reference_uv", number(rounded(night->nrem_reference_uv, 4)));
    json_object_set_new(root, "headline", json_pack("{s:s,s:o}", "index",
                                                    rt_index_rules()[night->headline].id, "value",
                                                    number(rounded(night->index[night->headline].value, 2))));
    json_object_set_new(root, "indices", indices_json(night));
    json_t *rev = json_object();
    json_object_set_new(rev, "flagged", json_boolean(night->level == RT_REVIEW_FLAGGED));
    json_object_set_new(rev, "level", json_string(rt_review_level_name(night->level)));
    json_object_set_new(rev, "reasons", strings_json(night->reasons, night->n_reasons));
    json_object_set_new(rev, "with_reservations", json_boolean(night->n_reservations > 0));
    char statement[64];
    rt_report_statement(night, statement, sizeof statement);
    json_object_set_new(rev, "statement", json_string(statement));
    json_object_set_new(root, "review", rev);
    json_object_set_new(root, "reservations", reservations_json(night));
    json_object_set_new(root, "exclusions", exclusions_json(night));
    json_object_set_new(root, "agreement", rt_agreement_json(&night->agreement));
    json_object_set_new(root, "evidence", evidence_json(night, 10));
    json_object_set_new(root, "warnings", strings_json(night->warnings, night->n_warnings));
    json_object_set_new(root, "cautions", cautions_json());
    json_object_set_new(root, "provenance", prov);

    st = rt_json_write(root, path, JSON_REAL_PRECISION(10), err);
    json_decref(root);
    return st;
}
