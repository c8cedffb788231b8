/* The review page: one self-contained XHTML file (inline CSS and SVG, no
 * scripts, nothing fetched) that a physician can read in two minutes and
 * print. It is written with libxml2's xmlTextWriter, so every text from the
 * recording (identity fields, channel labels) is escaped and made valid UTF-8;
 * the output is well-formed XML that HTML parsers read the same way. The
 * envelopes of the most active epochs are recomputed from the recording with
 * the scorer's own conditioning (bandpass.h, detect.h) and parameters, so the
 * traces shown are the ones the labels came from. docs/review-report.md
 * describes the page. */
#include <ctype.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "internal.h"
#include "remtone/report.h"
#include "remtone/version.h"
#include "html_context.h"
#include "svg.h"

#define EVIDENCE_PLOTS 4
#define EVIDENCE_ROWS 20
#define PAGE_W 1060.0

/* Role groups of the overview strip: chin, both arms, both legs. */
enum { GROUP_CHIN = 0, GROUP_ARMS, GROUP_LEGS, GROUP_COUNT };
static const char *const GROUP_NAME[GROUP_COUNT] = {"chin", "arms", "legs"};
static const rt_role GROUP_ROLES[GROUP_COUNT][2] = {
    {RT_ROLE_CHIN, RT_ROLE_CHIN},
    {RT_ROLE_ARM_LEFT, RT_ROLE_ARM_RIGHT},
    {RT_ROLE_LEG_LEFT, RT_ROLE_LEG_RIGHT}};

/* No '<', '>' or '&' here: HTML reads a style element as raw text, XML does
 * not, and only text free of those three reads the same in both. */
static const char CSS[] =
    "body{font-family:'DejaVu Sans',Arial,sans-serif;color:#1b2430;margin:0;background:#eef1f4;"
    "font-size:14px;line-height:1.4}"
    "header.top{background:#24425e;color:#fff;padding:12px 28px}"
    "header.top h1{margin:0;font-size:21px;font-weight:600}"
    "header.top p{margin:2px 0 0 0;color:#d4dfe9}"
    "nav{background:#fff;border-bottom:1px solid #cfd6de;padding:6px 28px}"
    "nav a{color:#24425e;margin-right:16px;text-decoration:none;font-size:13px}"
    "main{max-width:1100px;margin:0 auto;padding:4px 20px 20px 20px}"
    "section{background:#fff;border:1px solid #d3dae2;border-radius:6px;padding:10px 18px;"
    "margin:14px 0}"
    "h2{font-size:17px;margin:4px 0 8px 0;color:#24425e}"
    "h3{font-size:14px;margin:12px 0 4px 0}"
    "table{border-collapse:collapse;font-size:13px;margin:4px 0}"
    "th,td{padding:3px 9px;border-bottom:1px solid #e2e7ed;text-align:left;vertical-align:top}"
    "th{background:#f3f5f8;font-weight:600}"
    "td.num{text-align:right;font-variant-numeric:tabular-nums}"
    ".headline{font-size:26px;font-weight:700;margin:4px 0}"
    ".headline span.unit{font-size:15px;font-weight:400;color:#4a5866}"
    ".level{display:inline-block;padding:4px 12px;border-radius:4px;font-weight:700;color:#fff}"
    ".level-review{background:#a8322d}.level-near-cutoff{background:#b86e00}"
    ".level-clear{background:#2f7350}.level-not-assessable{background:#5c6876}"
    /* a level with reservations is never the plain colour: clear turns ochre */
    ".level-review-with-reservations{background:#a8322d}"
    ".level-near-cutoff-with-reservations{background:#b86e00}"
    ".level-clear-with-reservations{background:#6f5a12}"
    ".level-not-assessable-with-reservations{background:#5c6876}"
    ".verdict{display:flex;flex-wrap:wrap;gap:14px;align-items:flex-start;margin:8px 0}"
    ".reservations{flex:1;min-width:320px;border:2px solid #b86e00;border-radius:6px;"
    "background:#fff7ea;padding:4px 14px}"
    ".reservations h3{margin:4px 0;color:#7a4300}"
    ".reservations li{margin:3px 0}"
    ".reservations span.code{font-family:monospace;font-size:12px;color:#5b6875}"
    ".facts td{border:none;padding:1px 14px 1px 0}"
    ".muted{color:#5b6875;font-size:12px}"
    ".caution li{margin:3px 0}"
    ".legend span.sw{display:inline-block;width:12px;height:12px;margin:0 4px -2px 10px;"
    "border:1px solid #9aa5b1}"
    "svg{display:block;margin:4px 0}"
    "svg text{font-family:'DejaVu Sans',Arial,sans-serif;font-size:11px;fill:#2a3540}"
    "svg text.small{font-size:9px;fill:#5b6875}"
    "svg text.bold{font-weight:700}"
    "footer{color:#5b6875;font-size:12px;padding:0 28px 24px 28px}"
    /* the night in context (html_context.c) */
    ".sentence{font-size:15px;border-left:5px solid #24425e;background:#f3f6fa;"
    "padding:6px 12px;margin:6px 0 10px 0}"
    "table.compact td,table.compact th{padding:2px 8px}"
    "td.nowrap,td.num{white-space:nowrap}td.beyond{font-weight:700;color:#a8322d}"
    "tr.half td{background:#f7f8fa}"
    /* Print (docs/review-report.md, "Printing"): one night in at most three
     * A4 or Letter pages. Sections run on without forced breaks; a heading
     * never ends a page, and table rows, list items, plots and small blocks
     * are never split. The long explanations and the evidence plots past the
     * first stay on screen. */
    ".print-only{display:none}"
    "@media print{@page{margin:9mm}"
    ".print-only{display:block}"
    /* on paper the first 10 flagged epochs in time order; the screen and --evidence list all */
    "#evidence-list{font-size:7.5px !important}#evidence-list tr:nth-child(n+12){display:none}"
    "nav{display:none}body{background:#fff;font-size:9px;line-height:1.2}"
    "main{max-width:none;padding:0}"
    "section{border:none;margin:0 0 4px 0;padding:2px 0;break-before:auto;"
    "page-break-before:auto}"
    "h2{font-size:12.5px;margin:4px 0 2px 0}h3{font-size:10.5px;margin:4px 0 2px 0}"
    "h2,h3{break-after:avoid;page-break-after:avoid}"
    "tr,li,svg,.keep,.verdict,.sentence,.facts{break-inside:avoid;page-break-inside:avoid}"
    "table{font-size:8px;margin:2px 0}th,td{padding:1px 4px}"
    "td.num,td.nowrap{white-space:nowrap}"
    ".headline{font-size:16px;margin:2px 0}.sentence{font-size:10.5px;padding:3px 8px}"
    "svg{max-width:100%;height:auto}"
    ".muted{font-size:8px}"
    /* on paper: the first evidence plot and ten ranked epochs; the chart smaller */
    "#evidence > svg:nth-of-type(n+2),#evidence > h3:nth-of-type(n+2):not(:last-of-type),"
    "#evidence table tr:nth-child(n+12){display:none}"
    "#evidence > svg{width:45%}#indices > svg{width:55%}#overview > svg{width:62%}"
    "#bouts > svg{width:50%}#indices table,#periods table{font-size:7px}"
    ".caution li{margin:1px 0;font-size:8px}footer{font-size:7.5px;padding:0}"
    "#indices table td:nth-child(2),#indices table td:nth-child(7){min-width:34mm}"
    "header.top{background:#fff;color:#000;border-bottom:2px solid #000;padding:2px 0}"
    "header.top h1{font-size:14px}header.top p{color:#000}"
    ".level{border:2px solid #000}}";

typedef struct html_ctx {
    rt_page p;
    const rt_night *night;
    rt_recording *rec;
    const rt_timeline *tl;
    const rt_report_options *opt;
    rt_clock_time start;
    double span_s;       /* time axis of the night plots */
    rt_error *err;
    rt_status status;    /* first failure of a recomputation */
} html_ctx;

/* ---- small formatting helpers ------------------------------------------ */

static bool is_pct(const rt_index_rule *rule) { return strcmp(rule->unit, "%") == 0; }

static void value_text(const rt_index_rule *rule, double v, char *buf, size_t cap)
{
    if (!isfinite(v))
        snprintf(buf, cap, "not computed");
    else if (is_pct(rule))
        snprintf(buf, cap, "%.1f %%", v);
    else if (strcmp(rule->unit, "ratio") == 0)
        snprintf(buf, cap, "%.3f", v);
    else
        snprintf(buf, cap, "%.1f %s", v, rule->unit);
}

/* abnormal 2, near 1, within 0, no judgement -1 (also for a cutoff recalled
 * but not verified against the published text: context only) */
static int severity(const rt_night *night, int i)
{
    const rt_index_rule *rule = &rt_index_rules()[i];
    const rt_index_value *v = &night->index[i];
    if (v->status == RT_STATUS_NOT_COMPUTED || v->status == RT_STATUS_NO_CUTOFF ||
        !night->cutoffs.has[i] || !rt_night_cutoff_verified(night, i))
        return -1;
    if (rule->lower_is_worse)
        return v->status == RT_STATUS_BELOW ? 2 : v->status == RT_STATUS_INTERMEDIATE ? 1 : 0;
    if (v->status == RT_STATUS_ABOVE)
        return 2;
    return v->value >= night->params.near_fraction * night->cutoffs.value[i] ? 1 : 0;
}

static const char *severity_colour(int s)
{
    return s == 2 ? "#a8322d" : s == 1 ? "#c98a1b" : s == 0 ? "#3f7fa8" : "#8a96a3";
}

/* Colour of a count of active 3-s minis (0..10) in an epoch. */
static const char *activity_colour(int active)
{
    if (active <= 0)
        return "#dfe6ec";
    if (active <= 2)
        return "#f3d27e";
    if (active <= 4)
        return "#eb9b45";
    if (active <= 7)
        return "#d25a2c";
    return "#8e1c1c";
}

static bool group_present(const rt_night *night, int g)
{
    return night->channel[GROUP_ROLES[g][0]].present || night->channel[GROUP_ROLES[g][1]].present;
}

static bool role_counts(const rt_mini *m, rt_role r, unsigned label)
{
    return !(m->labels[r] & (RT_LABEL_ABSENT | RT_LABEL_EXCLUDED)) && (m->labels[r] & label);
}

/* Active minis of a group in REM epoch k: chin "any" (SINBAR) on the chin,
 * SINBAR phasic on either limb of a pair; minis the scorer left out do not count. */
static int group_active(const rt_night *night, size_t k, int g, int *scorable)
{
    const rt_mini *m = &night->minis3[k * RT_MINIS3_PER_EPOCH];
    int n = 0, s = 0;
    for (int i = 0; i < RT_MINIS3_PER_EPOCH; i++) {
        if (m[i].labels[RT_ROLE_CHIN] & RT_LABEL_EXCLUDED)
            continue;
        s++;
        if (g == GROUP_CHIN)
            n += role_counts(&m[i], RT_ROLE_CHIN, RT_LABEL_SINBAR_ANY);
        else
            n += role_counts(&m[i], GROUP_ROLES[g][0], RT_LABEL_SINBAR_PHASIC) ||
                 role_counts(&m[i], GROUP_ROLES[g][1], RT_LABEL_SINBAR_PHASIC);
    }
    if (scorable)
        *scorable = s;
    return n;
}

static void cell(rt_page *p, const char *text, bool num)
{
    rt_page_element(p, "td", num ? "num" : NULL, text);
}

/* ---- header, identity and summary ---------------------------------------- */

static void write_head(html_ctx *c)
{
    rt_page *p = &c->p;
    rt_page_start(p, "head");
    rt_page_start(p, "meta");
    rt_page_attr(p, "charset", "utf-8");
    rt_page_end_svg(p); /* void element */
    rt_page_start(p, "title");
    rt_page_text(p, "remtone review report");
    rt_page_end_html(p);
    rt_page_start(p, "style");
    rt_page_raw(p, CSS);
    rt_page_end_html(p);
    rt_page_end_html(p);
}

static const char *display_id(const html_ctx *c)
{
    if (c->opt && c->opt->recording_id && c->opt->recording_id[0])
        return c->opt->recording_id;
    return rt_report_basename(rt_recording_path(c->rec));
}

/* The page's sections, id and title: the navigation links and the section
 * headings both come from here, so a link's name is its section's title. */
static const char *const SECTIONS[][2] = {
    {"summary", "Summary"}, {"overview", "The night"}, {"indices", "Indices and cutoffs"},
    {"periods", RT_HTML_PERIODS_TITLE}, {"bouts", "Activity in each REM bout"}, {"evidence", "Evidence: flagged REM epochs"},
    {"quality", "Channels, exclusions and warnings"}, {"cautions", "Cautions"}};

static void section_title(rt_page *p, const char *id)
{
    for (size_t i = 0; i < sizeof SECTIONS / sizeof SECTIONS[0]; i++)
        if (strcmp(SECTIONS[i][0], id) == 0)
            rt_page_element(p, "h2", NULL, SECTIONS[i][1]);
}

static void write_banner(html_ctx *c)
{
    rt_page *p = &c->p;
    char clock[16];
    rt_report_clock(&c->start, 0, clock, sizeof clock);
    rt_page_start(p, "header");
    rt_page_attr(p, "class", "top");
    rt_page_element(p, "h1", NULL, "REM sleep muscle activity: review report");
    rt_page_start(p, "p");
    rt_page_textf(p, "Recording %s, started %s, %.1f h", display_id(c), clock,
                  c->night->recording_s / 3600.0);
    rt_page_end_html(p);
    rt_page_end_html(p);
    rt_page_start(p, "nav");
    for (size_t i = 0; i < sizeof SECTIONS / sizeof SECTIONS[0]; i++) {
        rt_page_start(p, "a");
        rt_page_attrf(p, "href", "#%s", SECTIONS[i][0]);
        rt_page_text(p, SECTIONS[i][1]);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

static void fact_row(rt_page *p, const char *name, const char *value)
{
    rt_page_start(p, "tr");
    rt_page_element(p, "td", "muted", name);
    cell(p, value, false);
    rt_page_end_html(p);
}

static void write_identity(html_ctx *c)
{
    rt_page *p = &c->p;
    char buf[128];
    rt_page_start(p, "table");
    rt_page_attr(p, "class", "facts");
    fact_row(p, "Recording", display_id(c));
    if (c->opt && c->opt->show_identity) {
        fact_row(p, "Patient (EDF header)", rt_recording_patient_text(c->rec));
        fact_row(p, "Recording (EDF header)", rt_recording_recording_text(c->rec));
        snprintf(buf, sizeof buf, "%04d-%02d-%02d", c->start.year, c->start.month, c->start.day);
        fact_row(p, "Start date", buf);
    } else {
        fact_row(p, "Identity", "hidden (the header's patient fields and date are shown only "
                                "when asked for, --show-identity)");
    }
    rt_report_clock(&c->start, 0, buf, sizeof buf);
    fact_row(p, "Start time", buf);
    rt_page_end_html(p);
}

/* Gap rows shown on the page; the JSON result lists them all. */
#define PAGE_GAPS 20

/* What the staging covers, and its gaps with clock time, offset and length. */
static void write_staging(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_staging_summary *s = &n->staging;
    char line[400], buf[48];
    rt_report_staging_text(n, line, sizeof line);
    rt_page_start(p, "p");
    rt_page_attr(p, "id", "staging");
    rt_page_textf(p, "Staging: %s.", line);
    if (s->n_gaps == 0) {
        rt_page_text(p, " No gaps inside the staging.");
        rt_page_end_html(p);
        return;
    }
    rt_duration_text(s->gap_total_s, buf, sizeof buf);
    rt_page_textf(p, " %zu unstaged gap%s inside the staging, %s in all:", s->n_gaps,
                  s->n_gaps == 1 ? "" : "s", buf);
    rt_page_end_html(p);
    rt_page_start(p, "table");
    rt_page_attr(p, "id", "staging-gaps");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"gap starts", "seconds from the recording start", "length"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    for (size_t i = 0; i < s->n_gaps && i < PAGE_GAPS; i++) {
        rt_page_start(p, "tr");
        rt_report_clock(&c->start, s->gaps[i].start_s, buf, sizeof buf);
        cell(p, buf, false);
        snprintf(buf, sizeof buf, "%.0f", s->gaps[i].start_s);
        cell(p, buf, true);
        rt_duration_text(s->gaps[i].duration_s, buf, sizeof buf);
        cell(p, buf, true);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    if (s->n_gaps > PAGE_GAPS) {
        snprintf(line, sizeof line, "and %zu more gaps (all in the JSON result)",
                 s->n_gaps - PAGE_GAPS);
        rt_page_element(p, "p", "muted", line);
    }
}

/* The headline: the value large, and beside it the one sentence every report
 * gives (rt_report_headline): whether its cutoff is reached, or why it cannot
 * be computed and what is shown instead. */
static void write_headline(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_index_rule *hr = &rt_index_rules()[n->headline];
    char v[48], sentence[1600];
    value_text(hr, n->index[n->headline].value, v, sizeof v);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "headline");
    rt_page_attr(p, "id", "headline");
    if (n->index[n->headline].status == RT_STATUS_NOT_COMPUTED) {
        rt_page_text(p, "REM with preserved muscle activity: not computed");
    } else {
        rt_page_textf(p, "%s of REM with preserved muscle activity ", v);
        rt_page_start(p, "span");
        rt_page_attr(p, "class", "unit");
        rt_page_textf(p, "(%s)", hr->id);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_report_headline(n, sentence, sizeof sentence);
    rt_page_start(p, "p");
    rt_page_attr(p, "id", "headline-cutoff");
    rt_page_text(p, sentence);
    rt_page_end_html(p);
}

static void write_summary(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_index_rule *hr = &rt_index_rules()[n->headline];
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "summary");
    rt_page_attr(p, "class", "first");
    section_title(p, "summary");
    rt_html_sentence(p, n);
    write_identity(c);

    write_headline(c);
    rt_page_element(p, "p", "muted", hr->title);

    write_staging(c);
    rt_page_start(p, "p");
    rt_page_attr(p, "id", "rem-minutes");
    rt_page_textf(p, "REM sleep: %.1f min in %zu bout%s; %.1f min scorable", n->rem_minutes,
                  n->n_bouts, rt_report_plural(n->n_bouts), n->scorable_minutes);
    if (n->exclusions.total_minutes > 0)
        rt_page_textf(p, " (%.1f min left out, see Quality)", n->exclusions.total_minutes);
    rt_page_text(p, ".");
    rt_page_end_html(p);

    /* the level and, beside it, what limits it */
    char statement[700];
    rt_report_statement(n, statement, sizeof statement);
    rt_page_start(p, "div");
    rt_page_attr(p, "class", "verdict");
    rt_page_start(p, "span");
    rt_page_attr(p, "id", "level");
    rt_page_attrf(p, "class", "level level-%s%s", rt_review_level_name(n->level),
                  n->n_reservations ? "-with-reservations" : "");
    statement[0] = (char)toupper((unsigned char)statement[0]);
    rt_page_text(p, statement);
    rt_page_end_html(p);
    if (n->n_reservations) {
        rt_page_start(p, "div");
        rt_page_attr(p, "class", "reservations");
        rt_page_attr(p, "id", "reservations");
        rt_page_element(p, "h3", NULL, "Reservations: what limits this result");
        rt_page_start(p, "ul");
        for (size_t i = 0; i < n->n_reservations; i++) {
            rt_page_start(p, "li");
            rt_page_attr(p, "data-code", rt_reservation_code_name(n->reservations[i].code));
            rt_page_text(p, n->reservations[i].text);
            rt_page_text(p, " ");
            rt_page_element(p, "span", "code", rt_reservation_code_name(n->reservations[i].code));
            rt_page_end_html(p);
        }
        rt_page_end_html(p);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_start(p, "ul");
    for (size_t i = 0; i < n->n_reasons; i++)
        rt_page_element(p, "li", NULL, n->reasons[i]);
    rt_page_end_html(p);
    rt_page_element(p, "p", "muted", rt_visual_scoring_note());
    rt_page_end_html(p);
}

/* ---- night overview: hypnogram and activity strip ------------------------ */

#define PLOT_X 80.0
#define PLOT_W (PAGE_W - PLOT_X - 10.0)

static double time_x(const html_ctx *c, double t_s)
{
    return PLOT_X + PLOT_W * (c->span_s > 0 ? t_s / c->span_s : 0);
}

static void time_axis(html_ctx *c, double y_top, double y_axis)
{
    rt_page *p = &c->p;
    double start = c->start.hour * 3600.0 + c->start.minute * 60.0 + c->start.second +
                   c->start.subsecond;
    /* first whole clock hour after the start, then every hour (every 2 h past 12 h) */
    double first = 3600.0 * ceil(start / 3600.0) - start;
    double step = c->span_s > 12 * 3600.0 ? 7200.0 : 3600.0;
    for (double t = first; t <= c->span_s; t += step) {
        double x = time_x(c, t);
        char clock[16];
        rt_report_clock(&c->start, t, clock, sizeof clock);
        clock[5] = '\0'; /* HH:MM */
        rt_svg_line(p, x, y_top, x, y_axis, "#c7cfd8", 0.6, "2,3");
        if (x < PAGE_W - 18) /* a label cut by the page edge helps nobody */
            rt_svg_text(p, x, y_axis + 12, "middle", "small", clock);
    }
    rt_svg_line(p, PLOT_X, y_axis, PLOT_X + PLOT_W, y_axis, "#7a8794", 0.8, NULL);
}

static int stage_row(unsigned char s)
{
    switch (s) {
    case RT_STAGE_W: return 0;
    case RT_STAGE_R: return 1;
    case RT_STAGE_N1: return 2;
    case RT_STAGE_N2: return 3;
    case RT_STAGE_N3: return 4;
    default: return -1;
    }
}

/* A grey band over time nobody staged, from a to b seconds. */
static void unstaged_band(html_ctx *c, double a, double b, double y0, double h)
{
    if (!(b > a))
        return;
    char tip[96], t0[16], len[32];
    rt_report_clock(&c->start, a, t0, sizeof t0);
    rt_duration_text(b - a, len, sizeof len);
    snprintf(tip, sizeof tip, "not staged: %s from %s (never scored)", len, t0);
    double x = time_x(c, a);
    rt_svg_rect(&c->p, x, y0, fmax(time_x(c, b) - x, 1.0), h, "#d5dbe1", tip);
}

static void hypnogram(html_ctx *c, double y0, double row_h)
{
    rt_page *p = &c->p;
    static const char *const ROWS[] = {"Wake", "REM", "N1", "N2", "N3"};
    const rt_night *n = c->night;
    const rt_staging_summary *st = &n->staging;
    if (isfinite(st->first_staged_s)) {
        unstaged_band(c, st->expect_from_s, st->first_staged_s, y0, 5 * row_h);
        unstaged_band(c, st->staged_end_s, st->expect_to_s, y0, 5 * row_h);
    } else {
        unstaged_band(c, st->expect_from_s, st->expect_to_s, y0, 5 * row_h);
    }
    for (size_t g = 0; g < st->n_gaps; g++)
        unstaged_band(c, st->gaps[g].start_s, st->gaps[g].start_s + st->gaps[g].duration_s, y0,
                      5 * row_h);
    /* REM shading first, under everything */
    for (size_t k = 0; k < n->n_epochs; k++) {
        double x = time_x(c, n->epochs[k].onset_s), w = time_x(c, n->epochs[k].onset_s + RT_EPOCH_WHOLE_S) - x;
        rt_svg_rect(p, x, y0, w, 5 * row_h, "#f6dede", NULL);
    }
    for (int r = 0; r < 5; r++)
        rt_svg_text(p, PLOT_X - 8, y0 + (r + 0.5) * row_h + 4, "end", r == 1 ? "bold" : NULL,
                    ROWS[r]);
    if (c->tl) {
        const rt_timeline *tl = c->tl;
        double *xs = rt_calloc(2 * tl->n_epochs + 2, sizeof *xs);
        double *ys = rt_calloc(2 * tl->n_epochs + 2, sizeof *ys);
        if (!xs || !ys) {
            free(xs);
            free(ys);
            rt_page_fail(&c->p, RT_ERR_NOMEM);
            return;
        }
        size_t m = 0;
        for (size_t e = 0; e <= tl->n_epochs; e++) {
            int row = e < tl->n_epochs ? stage_row(tl->stages[e]) : -1;
            if (row < 0) { /* unscored epochs break the line: nothing is guessed */
                rt_svg_polyline(p, xs, ys, m, "#24425e", 1.2);
                m = 0;
                continue;
            }
            double y = y0 + (row + 0.5) * row_h;
            xs[m] = time_x(c, (double)e * tl->epoch_s);
            ys[m++] = y;
            xs[m] = time_x(c, (double)(e + 1) * tl->epoch_s);
            ys[m++] = y;
        }
        free(xs);
        free(ys);
    }
    /* REM itself drawn as a thick bar on its row */
    for (size_t k = 0; k < n->n_epochs; k++) {
        double x = time_x(c, n->epochs[k].onset_s), w = time_x(c, n->epochs[k].onset_s + RT_EPOCH_WHOLE_S) - x;
        rt_svg_rect(p, x, y0 + 1.1 * row_h, w, 0.8 * row_h, "#c0392b", NULL);
    }
}

static void activity_strip(html_ctx *c, double y0, double row_h)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    char tip[160], clock[16];
    for (int g = 0; g < GROUP_COUNT; g++) {
        double y = y0 + g * (row_h + 3);
        rt_svg_text(p, PLOT_X - 8, y + row_h - 3, "end", NULL, GROUP_NAME[g]);
        rt_svg_rect(p, PLOT_X, y, PLOT_W, row_h, "#f7f9fb", NULL);
        if (!group_present(n, g)) {
            rt_svg_text(p, PLOT_X + 6, y + row_h - 3, "start", "small", "not recorded");
            continue;
        }
        for (size_t k = 0; k < n->n_epochs; k++) {
            int scorable = 0;
            int active = group_active(n, k, g, &scorable);
            double x = time_x(c, n->epochs[k].onset_s);
            double w = fmax(time_x(c, n->epochs[k].onset_s + RT_EPOCH_WHOLE_S) - x, 1.0);
            rt_report_clock(&c->start, n->epochs[k].onset_s, clock, sizeof clock);
            snprintf(tip, sizeof tip, "%s epoch %zu: %s %d of %d scorable 3-s mini-epochs active",
                     clock, n->epochs[k].epoch + 1, GROUP_NAME[g], active, scorable);
            rt_svg_rect(p, x, y, w, row_h, scorable ? activity_colour(active) : "#9aa5b1", tip);
        }
    }
}

static void legend_item(rt_page *p, const char *colour, const char *text)
{
    rt_page_start(p, "span");
    rt_page_attr(p, "class", "sw");
    rt_page_attrf(p, "style", "background:%s", colour);
    rt_page_end_html(p);
    rt_page_text(p, text);
}

static void write_overview(html_ctx *c)
{
    rt_page *p = &c->p;
    const double row_h = 16, strip_h = 14;
    double hyp_y = 8, strip_y = hyp_y + 5 * row_h + 14, axis_y = strip_y + 3 * (strip_h + 3) + 4;
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "overview");
    section_title(p, "overview");
    rt_page_element(p, "p", "muted",
                    "Top: the staging given to remtone, REM shaded; grey bands: time nobody "
                    "staged, never scored. Below: each REM epoch coloured by how many of its ten "
                    "3-s mini-epochs hold activity (chin: any SINBAR activity; arms and legs: "
                    "SINBAR phasic bursts on either side).");
    rt_svg_begin(p, PAGE_W, axis_y + 20, "Hypnogram with REM activity per channel group");
    hypnogram(c, hyp_y, row_h);
    activity_strip(c, strip_y, strip_h);
    time_axis(c, hyp_y, axis_y);
    rt_svg_end(p);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "legend muted");
    rt_page_text(p, "Active 3-s mini-epochs per REM epoch:");
    legend_item(p, activity_colour(0), "0");
    legend_item(p, activity_colour(1), "1-2");
    legend_item(p, activity_colour(3), "3-4");
    legend_item(p, activity_colour(5), "5-7");
    legend_item(p, activity_colour(8), "8-10");
    legend_item(p, "#9aa5b1", "not scorable");
    rt_page_end_html(p);
    rt_html_sleep(p, c->night);
    rt_page_end_html(p);
}

/* ---- indices against their cutoffs --------------------------------------- */

static double index_scale(const rt_night *n, int i)
{
    const rt_index_rule *rule = &rt_index_rules()[i];
    if (is_pct(rule))
        return 100.0;
    if (strcmp(rule->unit, "ratio") == 0)
        return 1.0;
    double m = fmax(n->index[i].value, n->cutoffs.has[i] ? n->cutoffs.value[i] : 0);
    return isfinite(m) && m > 0 ? 1.25 * m : 1.0;
}

/* Where value v of index i falls along its bar, 0..1, with the abnormal side
 * to the right for every index: the REM Atonia Index (lower is worse) runs
 * from 1 at the left to 0 at the right, so its bar too grows past its tick
 * when the cutoff is reached. */
static double bar_at(const rt_night *n, int i, double v)
{
    double scale = index_scale(n, i), f = v / scale;
    if (rt_index_rules()[i].lower_is_worse)
        f = 1.0 - f;
    return fmin(fmax(f, 0.0), 1.0);
}

/* The bar's scale in words, for the rows not on 0-100 %. */
static void scale_words(const rt_night *n, int i, char *buf, size_t cap)
{
    const rt_index_rule *rule = &rt_index_rules()[i];
    double scale = index_scale(n, i);
    if (is_pct(rule))
        buf[0] = '\0';
    else if (rule->lower_is_worse)
        snprintf(buf, cap, "; scale %g at the left to 0 at the right", scale);
    else
        snprintf(buf, cap, "; scale 0 to %.1f %s", scale, rule->unit);
}

static void write_index_chart(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_index_rule *rules = rt_index_rules();
    const double label_w = 250, bar_x = label_w + 10, bar_w = 560, row_h = 26;
    char v[48], buf[320];
    rt_svg_begin(p, PAGE_W, RT_IX_COUNT * row_h + 24, "Each index against its cutoff");
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_value *x = &n->index[i];
        double y = 6 + i * row_h;
        rt_svg_text(p, label_w, y + 14, "end", i == (int)n->headline ? "bold" : NULL, rules[i].id);
        rt_svg_rect(p, bar_x, y + 3, bar_w, row_h - 8, "#f0f3f6", NULL);
        if (x->status == RT_STATUS_NOT_COMPUTED) {
            char note[sizeof "not computed: " + sizeof x->reason]; /* the whole reason fits */
            snprintf(note, sizeof note, "not computed: %s", x->reason);
            rt_svg_text(p, bar_x + 6, y + 14, "start", "small", note);
            continue;
        }
        double w = bar_w * bar_at(n, i, x->value);
        value_text(&rules[i], x->value, v, sizeof v);
        char counted[160];
        rt_report_counted(n, i, counted, sizeof counted);
        snprintf(buf, sizeof buf, "%s: %s (%s)", rules[i].id, v, counted);
        rt_svg_rect(p, bar_x, y + 5, w, row_h - 12, severity_colour(severity(n, i)), buf);
        if (isfinite(rules[i].context_value)) {
            double cx = bar_x + bar_w * bar_at(n, i, rules[i].context_value);
            rt_svg_line(p, cx, y + 3, cx, y + row_h - 5, "#2f7350", 1.5, "2,2");
        }
        if (n->cutoffs.has[i]) {
            double cx = bar_x + bar_w * bar_at(n, i, n->cutoffs.value[i]);
            rt_svg_line(p, cx, y + 1, cx, y + row_h - 3, "#1b2430", 2.0, NULL);
        }
        char sc[80];
        scale_words(n, i, sc, sizeof sc);
        if (n->cutoffs.has[i]) {
            char cv[48];
            value_text(&rules[i], n->cutoffs.value[i], cv, sizeof cv);
            snprintf(buf, sizeof buf, "%s  (cutoff %s%s%s)", v, rules[i].lower_is_worse ? "below " : "",
                     cv, sc);
        } else {
            snprintf(buf, sizeof buf, "%s  (no published cutoff%s)", v, sc);
        }
        rt_svg_text(p, bar_x + bar_w + 8, y + 14, "start", severity(n, i) == 2 ? "bold" : NULL, buf);
    }
    double ly = 6 + RT_IX_COUNT * row_h + 10;
    rt_svg_line(p, bar_x, ly - 4, bar_x + 14, ly - 4, "#1b2430", 2.0, NULL);
    rt_svg_text(p, bar_x + 18, ly, "start", "small", "published cutoff (or the lab's own)");
    rt_svg_line(p, bar_x + 230, ly - 4, bar_x + 244, ly - 4, "#2f7350", 1.5, "2,2");
    rt_svg_text(p, bar_x + 248, ly, "start", "small", "normative value, for context only");
    rt_svg_end(p);
}

static void write_index_table(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_index_rule *rules = rt_index_rules();
    char v[48], counted[160], src[600];
    rt_page_start(p, "table");
    rt_page_attr(p, "id", "index-table");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"index", "what it counts", "value", "counted", "cutoff",
                                       "cutoff reached?", "source of the cutoff"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    for (int i = 0; i < RT_IX_COUNT; i++) {
        const rt_index_value *x = &n->index[i];
        rt_page_start(p, "tr");
        rt_page_attr(p, "data-index", rules[i].id);
        cell(p, rules[i].id, false);
        cell(p, rules[i].title, false);
        value_text(&rules[i], x->value, v, sizeof v);
        cell(p, v, true);
        rt_report_counted(n, i, counted, sizeof counted);
        cell(p, counted, true);
        if (n->cutoffs.has[i])
            value_text(&rules[i], n->cutoffs.value[i], v, sizeof v);
        else
            snprintf(v, sizeof v, "none");
        cell(p, v, true);
        /* The reason and the source are written whole, with no buffer of our own to cut them. */
        char words[96];
        rt_report_status_words(n, i, words, sizeof words);
        rt_page_start(p, "td");
        rt_page_textf(p, "%s%s%s", words, x->reason[0] ? ": " : "", x->reason);
        rt_page_end_html(p);
        rt_page_start(p, "td");
        bool lab = rt_cutoff_is_lab(&n->cutoffs, i);
        rt_cutoff_source(&n->cutoffs, i, src, sizeof src);
        rt_page_textf(p, "%s%s", lab ? "the lab's own: " : "", src);
        if (rules[i].from_memory && !lab)
            rt_page_text(p, " (value from memory, not verified: context only, never a reason for "
                            "review)");
        rt_page_end_html(p);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_start(p, "p");
    rt_page_attr(p, "class", "muted");
    rt_page_textf(p, "Cutoffs in force: %s. ", n->cutoffs.origin);
    rt_page_text(p, rt_visual_scoring_note());
    rt_page_end_html(p);
}

static void write_indices(html_ctx *c)
{
    rt_page *p = &c->p;
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "indices");
    section_title(p, "indices");
    rt_page_element(p, "p", "muted",
                    "Bars: percentages on a 0-100 % scale, rates on the scale written beside "
                    "them, the REM Atonia Index reversed, from 1 at the left to 0 at the right "
                    "(lower means less atonia), so that on every row a longer bar is further "
                    "toward abnormal and a bar past its black tick has reached its cutoff. Red: "
                    "cutoff reached; amber: not reached, but near; blue: not reached; grey: no "
                    "published cutoff, or one not verified against the published text (context "
                    "only).");
    write_index_chart(c);
    write_index_table(c);
    rt_html_norms(p, c->night);
    rt_page_end_html(p);
}

/* ---- REM bouts through the night ------------------------------------------ */

typedef struct bout_stats {
    double onset_s;
    size_t epochs;
    double pct[GROUP_COUNT]; /* % of scorable 3-s minis active; NaN when none */
} bout_stats;

static void bout_summary(const rt_night *n, size_t first, size_t count, bout_stats *b)
{
    b->onset_s = n->epochs[first].onset_s;
    b->epochs = count;
    for (int g = 0; g < GROUP_COUNT; g++) {
        int act = 0, sc = 0;
        for (size_t k = first; k < first + count; k++) {
            int s = 0;
            act += group_active(n, k, g, &s);
            sc += s;
        }
        b->pct[g] = group_present(n, g) && sc > 0 ? 100.0 * act / sc : NAN;
    }
}

static void write_bouts(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    static const char *const COLOUR[GROUP_COUNT] = {"#6b3fa0", "#2a78b5", "#3a9a4a"};
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "bouts");
    section_title(p, "bouts");
    rt_page_element(p, "p", "muted",
                    "Share of each bout's scorable 3-s mini-epochs with activity (chin: any SINBAR "
                    "activity; arms, legs: SINBAR phasic). The dashed line is the cutoff of "
                    "sinbar.chin_any_3s, for orientation.");
    size_t nb = 0;
    bout_stats *bs = rt_calloc(n->n_bouts ? n->n_bouts : 1, sizeof *bs);
    if (!bs) {
        rt_page_fail(p, RT_ERR_NOMEM);
        return;
    }
    for (size_t k = 0; k < n->n_epochs && nb < n->n_bouts;) {
        size_t j = k;
        while (j < n->n_epochs && n->epochs[j].bout == n->epochs[k].bout)
            j++;
        bout_summary(n, k, j - k, &bs[nb++]);
        k = j;
    }
    const double top = 10, h = 150, base = top + h;
    double group_w = fmin(90.0, PLOT_W / (double)(nb ? nb : 1));
    rt_svg_begin(p, PAGE_W, base + 46, "Activity per REM bout");
    for (int t = 0; t <= 100; t += 25) {
        char lab[16];
        double y = base - h * t / 100.0;
        snprintf(lab, sizeof lab, "%d %%", t);
        rt_svg_line(p, PLOT_X, y, PLOT_X + group_w * (double)nb, y, "#e1e6ec", 0.8, NULL);
        rt_svg_text(p, PLOT_X - 6, y + 4, "end", "small", lab);
    }
    char tip[160], clock[16];
    for (size_t b = 0; b < nb; b++) {
        double gx = PLOT_X + group_w * (double)b;
        double bw = (group_w - 8) / GROUP_COUNT;
        rt_report_clock(&c->start, bs[b].onset_s, clock, sizeof clock);
        for (int g = 0; g < GROUP_COUNT; g++) {
            if (!isfinite(bs[b].pct[g]))
                continue;
            double bh = h * bs[b].pct[g] / 100.0;
            snprintf(tip, sizeof tip, "bout %zu at %s, %zu epochs: %s %.1f %%", b + 1, clock,
                     bs[b].epochs, GROUP_NAME[g], bs[b].pct[g]);
            rt_svg_rect(p, gx + 4 + g * bw, base - bh, bw - 1, bh, COLOUR[g], tip);
        }
        clock[5] = '\0';
        rt_svg_text(p, gx + group_w / 2, base + 13, "middle", "small", clock);
        char dur[24];
        snprintf(dur, sizeof dur, "%.1f min", bs[b].epochs * 0.5);
        rt_svg_text(p, gx + group_w / 2, base + 24, "middle", "small", dur);
    }
    if (n->cutoffs.has[RT_IX_SINBAR_CHIN_ANY_3S] && nb > 0) {
        double y = base - h * n->cutoffs.value[RT_IX_SINBAR_CHIN_ANY_3S] / 100.0;
        rt_svg_line(p, PLOT_X, y, PLOT_X + group_w * (double)nb, y, "#1b2430", 1.2, "5,3");
    }
    rt_svg_line(p, PLOT_X, base, PLOT_X + group_w * (double)(nb ? nb : 1), base, "#7a8794", 0.8,
                NULL);
    for (int g = 0; g < GROUP_COUNT; g++) {
        rt_svg_rect(p, PLOT_X + g * 90.0, base + 32, 10, 10, COLOUR[g], NULL);
        rt_svg_text(p, PLOT_X + g * 90.0 + 14, base + 41, "start", "small",
                    group_present(n, g) ? GROUP_NAME[g] : "(not recorded)");
    }
    rt_svg_end(p);
    free(bs);
    rt_page_end_html(p);
}

/* ---- evidence epochs: envelopes recomputed with the scorer's conditioning -- */

typedef struct trace {
    double *env;        /* envelope of the shown epoch, samples */
    size_t n;
    double rate_hz;
    double background[RT_EPOCH_WHOLE_S]; /* per second of the epoch */
} trace;

/* The envelope and background of one role over the epoch at epoch_t0, from
 * the scorer's own conditioning path and background (rt_night_tracer,
 * rt_night_background_uv): the trace is the one the labels came from. */
static rt_status recompute(html_ctx *c, rt_night_tracer *tracer, rt_role role, double epoch_t0,
                           trace *tr)
{
    rt_status st = rt_night_tracer_envelope(tracer, role, epoch_t0, RT_EPOCH_WHOLE_S, &tr->env, &tr->n,
                                            &tr->rate_hz, c->err);
    for (int j = 0; j < RT_EPOCH_WHOLE_S && st == RT_OK; j++)
        tr->background[j] = rt_night_background_uv(c->night, role, epoch_t0 + j + 0.5);
    return st;
}

static void trace_row(html_ctx *c, const trace *tr, rt_role role, size_t k, double y0,
                      double row_h, double px, double pw)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_epoch_result *er = &n->epochs[k];
    double peak = 5.0;
    for (size_t i = 0; i < tr->n; i++)
        peak = fmax(peak, tr->env[i]);
    for (int s = 0; s < RT_EPOCH_WHOLE_S; s++)
        peak = fmax(peak, 2.2 * tr->background[s]);
    peak *= 1.05;
    double base = y0 + row_h;
#define YV(v) (base - row_h * fmin((v) / peak, 1.0))
    rt_svg_rect(p, px, y0, pw, row_h, "#fbfcfd", NULL);
    /* tonic and excluded 3-s minis shaded behind the trace */
    const rt_mini *m = &n->minis3[k * RT_MINIS3_PER_EPOCH];
    for (int i = 0; i < RT_MINIS3_PER_EPOCH; i++) {
        double x = px + pw * i / 10.0;
        if (m[i].labels[role] & RT_LABEL_EXCLUDED)
            rt_svg_rect(p, x, y0, pw / 10.0, row_h, "#d5dbe1", "not scorable (event)");
        else if (m[i].labels[role] & RT_LABEL_SINBAR_TONIC)
            rt_svg_rect(p, x, y0, pw / 10.0, row_h, "#e7dcf3", "tonic mini-epoch (SINBAR)");
    }
    /* bursts the scorer found, as bands along the top: SINBAR (2x) light, AASM (4x) dark */
    for (size_t b = 0; b < n->n_bursts; b++) {
        const rt_burst *bu = &n->bursts[b];
        if (bu->role != role || bu->onset_s + bu->duration_s <= er->onset_s ||
            bu->onset_s >= er->onset_s + RT_EPOCH_WHOLE_S || (bu->rules & RT_LABEL_MONTREAL_PHASIC))
            continue;
        double a = fmax(bu->onset_s, er->onset_s) - er->onset_s;
        double e = fmin(bu->onset_s + bu->duration_s, er->onset_s + RT_EPOCH_WHOLE_S) - er->onset_s;
        bool aasm = bu->rules & RT_LABEL_AASM_PHASIC;
        char tip[120];
        snprintf(tip, sizeof tip, "%s burst %.2f s, %.1fx background", aasm ? "AASM" : "SINBAR",
                 bu->duration_s, bu->peak_ratio);
        rt_svg_rect(p, px + pw * a / RT_EPOCH_S, y0 + (aasm ? 5 : 0), fmax(pw * (e - a) / RT_EPOCH_S, 1.5), 5,
                    aasm ? "#b83b2e" : "#f0a35c", tip);
    }
    /* the envelope: the largest value in each pixel column, so no burst is lost */
    size_t cols = (size_t)pw;
    double *xs = rt_calloc(cols, sizeof *xs), *ys = rt_calloc(cols, sizeof *ys);
    if (xs && ys && tr->n > 0) {
        for (size_t col = 0; col < cols; col++) {
            size_t a = col * tr->n / cols, b = (col + 1) * tr->n / cols;
            double v = 0;
            for (size_t i = a; i < b || i == a; i++)
                v = fmax(v, tr->env[i < tr->n ? i : tr->n - 1]);
            xs[col] = px + (double)col;
            ys[col] = YV(v);
        }
        rt_svg_polyline(p, xs, ys, cols, "#1f3550", 0.9);
        /* background and twice it, second by second */
        for (int s = 0; s < RT_EPOCH_WHOLE_S; s++) {
            double x = px + pw * s / RT_EPOCH_S, w = pw / RT_EPOCH_S;
            rt_svg_line(p, x, YV(tr->background[s]), x + w, YV(tr->background[s]), "#2f7350", 1.0,
                        NULL);
            double tk = n->params.tonic_k;
            rt_svg_line(p, x, YV(tk * tr->background[s]), x + w, YV(tk * tr->background[s]),
                        "#2f7350", 0.8, "3,2");
        }
        /* the absolute tonic level as an envelope: peak-to-peak / pi (docs/scoring.md) */
        double abs_env = n->params.tonic_abs_p2p_uv / RT_PI;
        if (abs_env < peak)
            rt_svg_line(p, px, YV(abs_env), px + pw, YV(abs_env), "#6b3fa0", 0.8, "1,3");
    } else if (!(xs && ys)) {
        rt_page_fail(p, RT_ERR_NOMEM);
    }
    free(xs);
    free(ys);
#undef YV
    char lab[64];
    rt_svg_text(p, px - 8, y0 + row_h / 2, "end", "bold", rt_role_name(role));
    snprintf(lab, sizeof lab, "%.0f uV", peak);
    rt_svg_text(p, px - 8, y0 + row_h / 2 + 13, "end", "small", lab);
}

static void evidence_plot(html_ctx *c, size_t rank, size_t k, const trace *traces)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_epoch_result *er = &n->epochs[k];
    char clock[16];
    rt_report_clock(&c->start, er->onset_s, clock, sizeof clock);
    rt_page_start(p, "h3");
    char video[32];
    bool has_video = rt_report_video_time(c->opt, er->onset_s, video, sizeof video);
    rt_page_textf(p, "#%zu: epoch %zu at %s (%.0f s into the recording%s%s), REM bout %zu: %d of "
                     "10 mini-epochs active%s", rank + 1, er->epoch + 1, clock, er->onset_s,
                  has_video ? "; video " : "", video, er->bout + 1,
                  er->sinbar_any_minis, er->sinbar_tonic ? ", tonic chin" : "");

    rt_page_end_html(p);
    int rows = 0;
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        rows += r != RT_ROLE_ECG && n->channel[r].present;
    const double px = 90, pw = PAGE_W - px - 10, row_h = 58, gap = 8, top = 16;
    rt_svg_begin(p, PAGE_W, top + rows * (row_h + gap) + 16, "Envelope of an evidence epoch");
    for (int i = 0; i <= 10; i++) {
        double x = px + pw * i / 10.0;
        rt_svg_line(p, x, top - 2, x, top + rows * (row_h + gap) - gap, "#d9dfe6", 0.6, NULL);
        if (i < 10) {
            char lab[8];
            snprintf(lab, sizeof lab, "%d", i + 1);
            rt_svg_text(p, x + pw / 20.0, top - 5, "middle", "small", lab);
        }
    }
    int row = 0;
    for (int r = 0; r < RT_ROLE_COUNT && p->status == RT_OK; r++) {
        if (r == RT_ROLE_ECG || !n->channel[r].present)
            continue;
        double y0 = top + row * (row_h + gap);
        row++;
        trace_row(c, &traces[r], (rt_role)r, k, y0, row_h, px, pw);
    }
    char t0[16], t1[16];
    rt_report_clock(&c->start, er->onset_s, t0, sizeof t0);
    rt_report_clock(&c->start, er->onset_s + RT_EPOCH_WHOLE_S, t1, sizeof t1);
    double yb = top + rows * (row_h + gap) + 6;
    rt_svg_text(p, px, yb, "start", "small", t0);
    rt_svg_text(p, px + pw, yb, "end", "small", t1);
    rt_svg_end(p);
}

/* The recording's own annotations that overlap [t0, t1): technologists'
 * notes ("talking", "arm jerk") are what a reviewer looks for next. The texts
 * are untrusted; they go through the escaping writer like every other text. */
static void recording_notes(html_ctx *c, double t0, double t1)
{
    rt_page *p = &c->p;
    size_t shown = 0;
    rt_page_start(p, "td");
    for (size_t i = 0; i < rt_recording_annotation_count(c->rec) && shown < 4; i++) {
        const rt_annotation *a = rt_recording_annotation(c->rec, i);
        double end = a->onset_s + (a->duration_s > 0 ? a->duration_s : 0);
        bool overlaps = a->onset_s < t1 && (end > t0 || (a->onset_s >= t0 && a->onset_s < t1));
        if (!overlaps || !a->text[0])
            continue;
        if (shown++)
            rt_page_text(p, "; ");
        rt_page_text(p, a->text);
    }
    rt_page_end_html(p);
}

/* Where an epoch is, as every evidence row gives it: its number from 1, clock
 * time, seconds from the recording start and, when given, the video time. */
static void epoch_place_cells(html_ctx *c, const rt_epoch_result *er)
{
    char buf[32];
    snprintf(buf, sizeof buf, "%zu", er->epoch + 1);
    cell(&c->p, buf, true);
    rt_report_clock(&c->start, er->onset_s, buf, sizeof buf);
    cell(&c->p, buf, false);
    snprintf(buf, sizeof buf, "%.0f", er->onset_s);
    cell(&c->p, buf, true);
    if (rt_report_video_time(c->opt, er->onset_s, buf, sizeof buf))
        cell(&c->p, buf, false);
}

static void evidence_table(html_ctx *c, const size_t *order, size_t count)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    static const char *const HEAD[] = {"rank", "epoch", "clock time", "seconds from start",
                                       "video time", "bout", "active 3-s minis",
                                       "AASM-phasic minis", "tonic chin", "strength",
                                       "notes in the recording"};
    bool video = c->opt && c->opt->video_given;
    rt_page_start(p, "table");
    rt_page_attr(p, "id", "evidence-ranked");
    rt_page_start(p, "tr");
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        if (h != 4 || video)
            rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    char buf[64];
    for (size_t i = 0; i < count; i++) {
        const rt_epoch_result *er = &n->epochs[order[i]];
        rt_page_start(p, "tr");
        snprintf(buf, sizeof buf, "%zu", i + 1);
        cell(p, buf, true);
        epoch_place_cells(c, er);
        snprintf(buf, sizeof buf, "%zu", er->bout + 1);
        cell(p, buf, true);
        snprintf(buf, sizeof buf, "%d / 10", er->sinbar_any_minis);
        cell(p, buf, true);
        snprintf(buf, sizeof buf, "%d", er->aasm_any_minis);
        cell(p, buf, true);
        snprintf(buf, sizeof buf, "%s (%.0f %%)", er->sinbar_tonic ? "yes" : "no",
                 100.0 * er->tonic_share);
        cell(p, buf, false);
        snprintf(buf, sizeof buf, "%.1f", er->activity);
        cell(p, buf, true);
        recording_notes(c, er->onset_s, er->onset_s + RT_EPOCH_S);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
}

/* The traces of the plotted epochs, taken in time order so that each REM bout
 * is conditioned once per role (the tracer keeps the last bout). */
static rt_status compute_traces(html_ctx *c, const size_t *order, size_t plots,
                                trace traces[][RT_ROLE_COUNT])
{
    size_t by_time[EVIDENCE_PLOTS];
    for (size_t i = 0; i < plots; i++) {
        size_t j = i;
        for (; j > 0 && order[by_time[j - 1]] > order[i]; j--)
            by_time[j] = by_time[j - 1];
        by_time[j] = i;
    }
    rt_night_tracer *tracer = NULL;
    rt_status st = rt_night_tracer_open(c->rec, c->night, &tracer, c->err);
    for (int r = 0; r < RT_ROLE_COUNT && st == RT_OK; r++) {
        if (r == RT_ROLE_ECG || !c->night->channel[r].present)
            continue;
        for (size_t i = 0; i < plots && st == RT_OK; i++) {
            size_t k = by_time[i];
            st = recompute(c, tracer, (rt_role)r, c->night->epochs[order[k]].onset_s, &traces[k][r]);
        }
    }
    rt_night_tracer_close(tracer);
    if (st != RT_OK && c->status == RT_OK)
        c->status = st;
    return st;
}

/* Every flagged epoch in time order, compact: the rows of `--evidence`
 * (evidence.c, rt_report_evidence_words), so the page and the CSV agree. */
static void evidence_list(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    bool video = c->opt && c->opt->video_given;
    size_t flagged = 0;
    for (size_t k = 0; k < n->n_epochs; k++)
        flagged += n->epochs[k].activity > 0;
    char buf[96], channels[96], rules[96];
    snprintf(buf, sizeof buf, "All %zu flagged epoch%s, in time order", flagged,
             rt_report_plural(flagged));
    rt_page_element(p, "h3", NULL, buf);
    static const char *const HEAD[] = {"epoch", "clock time", "seconds from start", "video time",
                                       "channels", "rule sets", "strength"};
    rt_page_start(p, "table");
    rt_page_attr(p, "id", "evidence-list");
    rt_page_attr(p, "style", "font-size:11px");
    rt_page_start(p, "tr");
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        if (h != 3 || video)
            rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    for (size_t k = 0; k < n->n_epochs && p->status == RT_OK; k++) {
        if (!rt_report_evidence_words(n, k, channels, sizeof channels, rules, sizeof rules))
            continue;
        const rt_epoch_result *er = &n->epochs[k];
        rt_page_start(p, "tr");
        epoch_place_cells(c, er);
        cell(p, channels, false);
        cell(p, rules, false);
        snprintf(buf, sizeof buf, "%.1f", er->activity);
        cell(p, buf, true);
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    if (flagged > 10) {
        char note[160];
        snprintf(note, sizeof note, "On paper the first 10 of the %zu flagged epochs; the page on "
                                  "screen and the --evidence file list them all.", flagged);
        rt_page_element(p, "p", "print-only muted", note);
    }
}

static void write_evidence(html_ctx *c)
{
    rt_page *p = &c->p;
    size_t order[EVIDENCE_ROWS];
    size_t count = rt_report_rank_evidence(c->night, order, EVIDENCE_ROWS);
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "evidence");
    section_title(p, "evidence");
    if (count == 0) {
        rt_page_element(p, "p", NULL, "No REM epoch holds detected activity.");
        rt_page_end_html(p);
        return;
    }
    rt_page_element(p, "p", "muted",
                    "Go to these epochs on the raw signals and the video. Traces: the rectified "
                    "envelope the scorer used (dark line), its background (green) and twice the "
                    "background (green dashes), the absolute tonic level (purple dots). Bands on "
                    "top: bursts at twice background (SINBAR, light) and four times (AASM, dark). "
                    "Shaded columns: tonic 3-s mini-epochs (violet) and mini-epochs left out "
                    "(grey). Numbers above: the 3-s mini-epochs, 1 to 10. Epochs count from 1 "
                    "at the recording start (epoch 1 starts at 0 s), as in the JSON, CSV and "
                    "annotation files.");
    trace traces[EVIDENCE_PLOTS][RT_ROLE_COUNT];
    memset(traces, 0, sizeof traces);
    size_t plots = count < EVIDENCE_PLOTS ? count : EVIDENCE_PLOTS;
    if (compute_traces(c, order, plots, traces) == RT_OK)
        for (size_t i = 0; i < plots && p->status == RT_OK; i++)
            evidence_plot(c, i, order[i], traces[i]);
    for (size_t i = 0; i < plots; i++)
        for (int r = 0; r < RT_ROLE_COUNT; r++)
            free(traces[i][r].env);
    rt_page_element(p, "h3", NULL, "Ranked list");
    rt_page_element(p, "p", "muted",
                    "Strength: the epoch's active 3-s mini-epochs (0-10), plus 10 when its chin is "
                    "tonic, plus half its mini-epochs with an AASM-phasic burst; it orders this "
                    "list.");
    evidence_table(c, order, count);
    evidence_list(c);
    rt_page_end_html(p);
}

/* ---- quality, exclusions, warnings, cautions ------------------------------ */

static void write_quality(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_night *n = c->night;
    const rt_exclusion_summary *ex = &n->exclusions;
    char buf[160];
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "quality");
    section_title(p, "quality");
    rt_page_start(p, "table");
    rt_page_start(p, "tr");
    static const char *const HEAD[] = {"role", "channel", "rate", "band used", "REM level",
                                       "note"};
    for (size_t h = 0; h < sizeof HEAD / sizeof HEAD[0]; h++)
        rt_page_element(p, "th", NULL, HEAD[h]);
    rt_page_end_html(p);
    for (int r = 0; r < RT_ROLE_COUNT; r++) {
        if (r == RT_ROLE_ECG)
            continue;
        const rt_channel_result *cr = &n->channel[r];
        rt_page_start(p, "tr");
        cell(p, rt_role_name((rt_role)r), false);
        if (!cr->present) {
            cell(p, "not recorded", false);
            cell(p, "", false);
            cell(p, "", false);
            cell(p, "", false);
            cell(p, "", false);
        } else {
            cell(p, cr->label, false);
            snprintf(buf, sizeof buf, "%g Hz", cr->rate_hz);
            cell(p, buf, true);
            snprintf(buf, sizeof buf, "%g-%g Hz", n->params.band_low_hz, cr->band_high_hz);
            cell(p, buf, false);
            double level = cr->rem_median_uv; /* NaN when nothing was scored */
            if (isfinite(level))
                snprintf(buf, sizeof buf, "%.2f uV", level);
            else
                snprintf(buf, sizeof buf, "-");
            cell(p, buf, true);
            const rt_channel_quality *q = &cr->quality;
            snprintf(buf, sizeof buf, "%s%sECG artifact in this channel: %s",
                     cr->low_rate ? "sampled below the AASM minimum" : "", cr->low_rate ? "; " : "",
                     q->ecg_removed ? "found and removed" : q->ecg_found ? "found" : "none");
            cell(p, buf, false);
        }
        rt_page_end_html(p);
    }
    rt_page_end_html(p);
    rt_page_element(p, "p", "muted",
                    "REM level: the median of the channel's rectified, band-passed EMG envelope "
                    "over its scorable 3-s REM mini-epochs, in uV (the band is in the column before).");

    rt_page_element(p, "h3", NULL, "REM left out of the indices");
    rt_page_start(p, "ul");
    bool any = false;
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++) {
        if (!(ex->minutes[t] > 0))
            continue;
        any = true;
        snprintf(buf, sizeof buf, "%s: %.1f min", rt_event_type_name((rt_event_type)t),
                 ex->minutes[t]);
        rt_page_element(p, "li", NULL, buf);
    }
    if (ex->outside_lights_minutes > 0) {
        any = true;
        snprintf(buf, sizeof buf, "outside lights-off to lights-on: %.1f min",
                 ex->outside_lights_minutes);
        rt_page_element(p, "li", NULL, buf);
    }
    snprintf(buf, sizeof buf, "%s: %.1f of %.1f min of REM left out", any ? "in all" : "none",
             ex->total_minutes, n->rem_minutes);
    rt_page_element(p, "li", NULL, buf);
    if (isfinite(ex->rem_ahi)) {
        snprintf(buf, sizeof buf, "REM apnea-hypopnea index: %.1f per hour%s", ex->rem_ahi,
                 ex->rem_ahi >= 15 ? " (15 or more: indices are less reliable)" : "");
        rt_page_element(p, "li", NULL, buf);
    } else {
        rt_page_element(p, "li", NULL, "No respiratory events were given: confounding by sleep "
                                       "apnea cannot be judged from this report.");
    }
    if (isfinite(ex->rem_leg_movements_per_h)) {
        snprintf(buf, sizeof buf, "Limb-movement events given, in REM: %.1f per hour",
                 ex->rem_leg_movements_per_h);
        rt_page_element(p, "li", NULL, buf);
    }
    rt_page_end_html(p);

    rt_page_element(p, "h3", NULL, "Warnings");
    rt_page_start(p, "ul");
    for (size_t i = 0; i < n->n_warnings; i++)
        rt_page_element(p, "li", NULL, n->warnings[i]);
    if (n->n_warnings == 0)
        rt_page_element(p, "li", NULL, "none");
    rt_page_end_html(p);
    rt_page_end_html(p);
}

static void write_cautions(html_ctx *c)
{
    rt_page *p = &c->p;
    rt_page_start(p, "section");
    rt_page_attr(p, "id", "cautions");
    rt_page_attr(p, "class", "caution");
    section_title(p, "cautions");
    rt_page_start(p, "ol");
    for (size_t i = 0; i < rt_caution_count(); i++)
        rt_page_element(p, "li", NULL, rt_caution(i));
    rt_page_end_html(p);
    rt_page_element(p, "p", NULL, rt_visual_scoring_note());
    rt_page_end_html(p);
}

static void write_footer(html_ctx *c)
{
    rt_page *p = &c->p;
    const rt_score_params *prm = &c->night->params;
    char when[32];
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(when, sizeof when, "%Y-%m-%d %H:%M UTC", &tm);
    rt_page_start(p, "footer");
    rt_page_textf(p, "remtone %s, %s. Band %g-%g Hz (order %d), envelope %g s, background: "
                     "the atonic REM level fitted over the night (%g quantile of REM minute "
                     "levels, drift followed); tonic absolute level %g uV peak-to-peak. "
                     "Cutoffs: %s. Definitions: docs/scoring.md; this page: "
                     "docs/review-report.md.", rt_version(), when, prm->band_low_hz,
                  prm->band_high_hz, prm->band_order, prm->envelope_window_s,
                  prm->background_quantile, prm->tonic_abs_p2p_uv, c->night->cutoffs.origin);
    rt_page_end_html(p);
}

static void write_page(html_ctx *c)
{
    rt_page *p = &c->p;
    rt_page_raw(p, "<!DOCTYPE html>\n");
    rt_page_start(p, "html");
    rt_page_attr(p, "xmlns", "http://www.w3.org/1999/xhtml");
    rt_page_attr(p, "lang", "en");
    write_head(c);
    rt_page_start(p, "body");
    write_banner(c);
    rt_page_start(p, "main");
    write_summary(c);
    write_overview(c);
    write_indices(c);
    rt_html_periods(p, c->night);
    rt_corrections_write_html(p, c->night);
    write_bouts(c);
    write_evidence(c);
    write_quality(c);
    write_cautions(c);
    rt_page_end_html(p);
    write_footer(c);
    rt_page_end_html(p);
    rt_page_end_html(p);
}

rt_status rt_night_write_html(const rt_night *night, rt_recording *rec, const rt_timeline *tl,
                              const rt_report_options *options, const char *path, rt_error *err)
{
    if (!night || !rec || !path)
        return rt_fail(err, RT_ERR_USAGE, "review report: night, recording and path are needed");
    html_ctx c;
    memset(&c, 0, sizeof c);
    c.night = night;
    c.rec = rec;
    c.tl = tl;
    c.opt = options;
    c.err = err;
    c.start = rt_recording_start(rec);
    c.span_s = night->recording_s;
    if (tl && tl->n_epochs * tl->epoch_s > c.span_s)
        c.span_s = (double)tl->n_epochs * tl->epoch_s;

    rt_status st = rt_page_open(&c.p, err);
    if (st != RT_OK)
        return st;
    write_page(&c);
    if (c.status != RT_OK) { /* a recomputation failed: its message is in err */
        rt_page_close(&c.p);
        return c.status;
    }
    return rt_page_save(&c.p, path, true, err);
}
