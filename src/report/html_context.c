/* The review page's view of the night in context (docs/review-report.md):
 * the plain-language sentence at the top, the sleep context of the staging,
 * the indices per REM period and per half of the night, and each index
 * against the norms with a small band showing where the value lies. The
 * numbers are the night's; the sentence is rt_night_plain_sentence's. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "html_context.h"
#include "remtone/report.h"

void rt_html_sentence(rt_page *p, const rt_night *n)
{
    char sentence[1600];
    rt_night_plain_sentence(n, sentence, sizeof sentence);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "sentence");
    rt_page_attr(p, "id", "plain-sentence");
    rt_page_text(p, sentence);
    rt_page_end_html(p);
}

static void cell(rt_page *p, const char *text, const char *cls)
{
    rt_page_start(p, "td");
    if (cls)
        rt_page_attr(p, "class", cls);
    rt_page_text(p, text);
    rt_page_end_html(p);
}

/* A block kept whole on paper, with its id and heading. */
static void keep_block(rt_page *p, const char *id, const char *heading)
{
    rt_page_start(p, "div");
    rt_page_attr(p, "class", "keep");
    rt_page_attr(p, "id", id);
    rt_page_element(p, "h3", NULL, heading);
}

static void minutes_cell(rt_page *p, double min)
{
    char buf[32];
    if (isfinite(min))
        snprintf(buf, sizeof buf, "%.1f min", min);
    else
        snprintf(buf, sizeof buf, "-");
    cell(p, buf, "num");
}

void rt_html_sleep(rt_page *p, const rt_night *n)
{
    const rt_sleep_context *s = &n->sleep;
    char a[48], b[48];
    keep_block(p, "sleep", "Sleep from the staging");
    rt_page_start(p, "table");
    rt_page_attr(p, "class", "compact");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"in bed", "total sleep", "efficiency", "sleep latency",
                                       "REM latency", "wake after onset", "REM periods"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    rt_page_start(p, "tr");
    minutes_cell(p, s->in_bed_min);
    minutes_cell(p, s->sleep_min);
    if (isfinite(s->efficiency_pct))
        snprintf(a, sizeof a, "%.1f %%", s->efficiency_pct);
    else
        snprintf(a, sizeof a, "-");
    cell(p, a, "num");
    minutes_cell(p, s->sleep_latency_min);
    minutes_cell(p, s->rem_latency_min);
    minutes_cell(p, s->waso_min);
    snprintf(a, sizeof a, "%zu", s->rem_periods);
    cell(p, a, "num");
    rt_page_end_html(p);
    rt_page_end_html(p);

    rt_page_start(p, "table");
    rt_page_attr(p, "class", "compact");
    rt_page_start(p, "tr");
    static const rt_stage SHOWN[] = {RT_STAGE_W, RT_STAGE_N1, RT_STAGE_N2, RT_STAGE_N3,
                                     RT_STAGE_R};
    rt_page_element(p, "th", NULL, "stage");
    for (size_t i = 0; i < sizeof SHOWN / sizeof SHOWN[0]; i++)
        rt_page_element(p, "th", NULL, rt_stage_name(SHOWN[i]));
    rt_page_element(p, "th", NULL, "unstaged");
    rt_page_end_html(p);
    rt_page_start(p, "tr");
    rt_page_element(p, "th", NULL, "minutes (% of sleep)");
    for (size_t i = 0; i < sizeof SHOWN / sizeof SHOWN[0]; i++) {
        double pct = s->stage_pct[SHOWN[i]];
        if (isfinite(pct))
            snprintf(b, sizeof b, "%.1f (%.0f %%)", s->stage_min[SHOWN[i]], pct);
        else
            snprintf(b, sizeof b, "%.1f", s->stage_min[SHOWN[i]]);
        cell(p, b, "num");
    }
    snprintf(b, sizeof b, "%.1f", s->stage_min[RT_STAGE_UNSCORED]);
    cell(p, b, "num");
    rt_page_end_html(p);
    rt_page_end_html(p);
    char off[16], on[16];
    rt_report_clock(&n->start, s->in_bed_from_s, off, sizeof off);
    rt_report_clock(&n->start, s->in_bed_to_s, on, sizeof on);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "muted");
    rt_page_textf(p, "In bed %s %s to %s %s; recording %.1f min. Definitions of the AASM Manual "
                  "for the Scoring of Sleep and Associated Events (time in bed is its lights-off "
                  "to lights-on time).", s->lights_off_given ? "lights-off" : "recording start",
                  off, s->lights_on_given ? "lights-on" : "recording end", on, s->recording_min);
    rt_page_end_html(p);
    rt_page_end_html(p);
}

/* The indices in the periods table (all of them are in the JSON and the CSV). */
static const rt_index_id SHOWN[] = {RT_IX_SINBAR_CHIN_ANY_3S, RT_IX_SINBAR_COMBINED_3S,
                                    RT_IX_SINBAR_CHIN_TONIC_30S, RT_IX_AASM_RSWA, RT_IX_RAI};
static const char *const SHOWN_HEAD[] = {"chin any 3 s", "chin + arms 3 s", "chin tonic 30 s",
                                         "AASM RSWA epochs", "RAI"};

void rt_html_periods(rt_page *p, const rt_night *n)
{
    const rt_index_rule *rules = rt_index_rules();
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "periods");
    rt_page_start(p, "div");
    rt_page_attr(p, "class", "keep");
    rt_page_element(p, "h2", NULL, RT_HTML_PERIODS_TITLE);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "muted");
    rt_page_textf(p, "A REM period: REM less than %g min apart. A half holds the periods that "
                  "start in it (split at the middle of the sleep period). Bold: beyond the "
                  "cutoff in force; a period alone never changes the level. Epochs are counted "
                  "from 1.", n->params.rem_period_gap_min);
    rt_page_end_html(p);
    rt_page_start(p, "table");
    rt_page_attr(p, "class", "periods");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"period", "clock", "epochs", "REM", "scorable"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    for (size_t k = 0; k < sizeof SHOWN / sizeof SHOWN[0]; k++)
        rt_page_element(p, "th", NULL, SHOWN_HEAD[k]);
    rt_page_end_html(p);
    for (size_t i = 0; i < n->n_periods + 2; i++) {
        const rt_rem_period *g = i < n->n_periods ? &n->periods[i] : &n->halves[i - n->n_periods];
        char buf[64], t0[16], t1[16];
        rt_page_start(p, "tr");
        if (i >= n->n_periods)
            rt_page_attr(p, "class", "half");
        if (i < n->n_periods)
            snprintf(buf, sizeof buf, "%zu", i + 1);
        else
            snprintf(buf, sizeof buf, "%s half", i == n->n_periods ? "first" : "second");
        cell(p, buf, NULL);
        if (g->n_bouts) {
            rt_report_clock(&n->start, g->onset_s, t0, sizeof t0);
            rt_report_clock(&n->start, g->end_s, t1, sizeof t1);
            snprintf(buf, sizeof buf, "%s-%s", t0, t1);
            cell(p, buf, "nowrap");
            snprintf(buf, sizeof buf, "%zu-%zu", g->first_epoch + 1, g->last_epoch + 1);
            cell(p, buf, "nowrap");
        } else {
            cell(p, "no REM", NULL);
            cell(p, "-", NULL);
        }
        snprintf(buf, sizeof buf, "%.1f min", g->rem_minutes);
        cell(p, buf, "num");
        snprintf(buf, sizeof buf, "%.1f min", g->scorable_minutes);
        cell(p, buf, "num");
        for (size_t k = 0; k < sizeof SHOWN / sizeof SHOWN[0]; k++) {
            const rt_index_value *x = &g->index[SHOWN[k]];
            bool beyond = rules[SHOWN[k]].lower_is_worse ? x->status == RT_STATUS_BELOW
                                                         : x->status == RT_STATUS_ABOVE;
            rt_report_value_text(&rules[SHOWN[k]], x->value, buf, sizeof buf);
            cell(p, buf, beyond ? "num beyond" : "num");
        }
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_end_html(p);
    rt_page_end_html(p);
}

/* A band from 0 to twice the larger of the limit and the value: the normal
 * range green, beyond it amber (red from the RBD cutoff), the value a mark;
 * under it the stratum it was placed against (who, ages, the lab file's
 * line), and its full label and source as the drawing's title. */
static void norm_band(rt_page *p, const rt_norm_place *np, const rt_norm_row *r, double v,
                      bool lower_worse)
{
    const double w = 220, h = 14;
    const rt_norm_stratum *s = &np->stratum;
    double rbd = r && !r->rbd_cutoff_from_memory ? r->rbd_cutoff : NAN;
    double top = lower_worse ? 1.0 : fmax(2.0 * s->value, 1.25 * v);
    if (!lower_worse && isfinite(rbd))
        top = fmax(top, 1.25 * rbd);
    double lx = w * fmin(s->value / top, 1.0);
    char label[520];
    snprintf(label, sizeof label, "the value against the %s; source: %s", s->label, s->source);
    rt_svg_begin(p, w, h + 18, label);
    rt_page_start(p, "title");
    rt_page_text(p, label);
    rt_page_end_svg(p);
    if (lower_worse) {
        rt_svg_rect(p, 0, 2, lx, h, "#f3d9b0", "below the normative limit");
        rt_svg_rect(p, lx, 2, w - lx, h, "#cfe8d6", "within the normative range");
    } else {
        rt_svg_rect(p, 0, 2, lx, h, "#cfe8d6", "within the normative limit");
        double cx = isfinite(rbd) ? w * fmin(rbd / top, 1.0) : w;
        rt_svg_rect(p, lx, 2, cx - lx, h, "#f3d9b0", "above the normative limit");
        if (cx < w)
            rt_svg_rect(p, cx, 2, w - cx, h, "#e9b7b2", "at or above the RBD cutoff");
    }
    double vx = w * fmin(fmax(v / top, 0.0), 1.0);
    rt_svg_rect(p, fmax(0.0, fmin(vx - 1.5, w - 3.0)), 0, 3, h + 4, "#1b2430", "this night");
    char who[96];
    if (np->lab)
        snprintf(who, sizeof who, "%s, line %ld", s->who, s->line);
    else
        snprintf(who, sizeof who, "women and men aged %g-%g, published", s->age_from, s->age_to);
    rt_svg_text(p, 0, h + 15, "start", "small", who);
    rt_svg_end(p);
}

void rt_html_norms(rt_page *p, const rt_night *n)
{
    if (!n->norms_placed)
        return;
    size_t count = 0;
    const rt_norm_row *t = rt_norm_table(&count);
    const rt_index_rule *rules = rt_index_rules();
    keep_block(p, "norms", "Against norms (context only, never a reason for review)");
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "muted");
    if (isfinite(n->person.age_years))
        rt_page_textf(p, "Age %g", n->person.age_years);
    else
        rt_page_text(p, "Age not given");
    rt_page_textf(p, ", %s. ",
                  n->person.sex == 'F' ? "woman" : n->person.sex == 'M' ? "man" : "sex not given");
    if (n->norms_file[0])
        rt_page_textf(p, "The indices the lab's norms file %s lists are placed against its row "
                      "for this age and sex (lab-supplied values); the others against ",
                      n->norms_file);
    else
        rt_page_text(p, "Norms: ");
    rt_page_textf(p, "%s, one table for every age and both sexes (the paper's age and sex "
                  "percentiles are not in remtone); %s. remtone's automatic indices are close "
                  "to these visual measures, not identical.",
                  count ? t[0].group : "", count ? t[0].method : "");
    rt_page_end_html(p);
    rt_page_start(p, "table");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"index", "value", "where it lies", "band", "source"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_norm_place *np = &n->norms[i];
        if (np->row < 0 && !np->lab)
            continue;
        const rt_norm_row *r = np->row >= 0 && (size_t)np->row < count ? &t[np->row] : NULL;
        char v[48];
        rt_page_start(p, "tr");
        rt_page_attr(p, "data-band", rt_norm_band_name(np->band));
        rt_page_attr(p, "data-origin", np->lab ? "lab-supplied" : "published");
        cell(p, rules[i].id, "nowrap");
        rt_report_value_text(&rules[i], n->index[i].value, v, sizeof v);
        cell(p, v, "num");
        cell(p, np->text, NULL);
        rt_page_start(p, "td");
        if (np->band != RT_NORM_NOT_PLACED)
            norm_band(p, np, r, n->index[i].value, rules[i].lower_is_worse);
        rt_page_end_html(p);
        rt_page_start(p, "td");
        rt_page_attr(p, "class", "muted");
        if (np->lab && np->applied) {
            rt_page_textf(p, "lab-supplied, %s line %ld: %s", n->norms_file, np->stratum.line,
                          np->stratum.source);
            if (np->stratum.method[0])
                rt_page_textf(p, " (scored: %s)", np->stratum.method);
        } else if (np->lab)
            rt_page_textf(p, "lab file %s: no row applied", n->norms_file);
        else
            rt_page_text(p, r->limit_source);
        if (r && isfinite(r->rbd_cutoff)) {
            rt_page_text(p, "; RBD cutoff: ");
            rt_page_text(p, r->rbd_cutoff_source);
        }
        rt_page_end_html(p);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_end_html(p);
}
