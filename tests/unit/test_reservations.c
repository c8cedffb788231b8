/* What limits a review level is said beside it (docs/scoring.md,
 * "Reservations"). Each reservation is made to happen on a synthetic night
 * (rt_synth_write; its stages.csv cut, holed or its events rewritten here),
 * and each is checked where a reader meets it: the JSON result (parsed with
 * jansson), the text summary and the review page (parsed as XML with libxml2
 * and searched with XPath). The thresholds are the parameter table's
 * (src/score/params.c): 30 min of unstaged time at a recording edge, one
 * epoch at a lights time, a third of REM left out and 10 REM epochs per index
 * are our choice; the REM apnea-hypopnea index of 15/h is Cesari et al. 2023
 * (Sleep), quoted in SAFETY.md. */
#include "support.h"

#include <libxml/parser.h>
#include <libxml/xpath.h>
#include <libxml/xpathInternals.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"

/* ---- the staging of a synthetic night, one label per 30-s epoch ------------ */

typedef struct staging {
    size_t n;
    char (*label)[8]; /* "" = no row for this epoch */
} staging;

static staging read_staging(const char *dir)
{
    char path[4200];
    snprintf(path, sizeof path, "%s/stages.csv", dir);
    size_t len;
    char *text = rt_test_read_all(path, &len);
    staging s = {0, calloc(4 * 1440, sizeof *s.label)}; /* up to 48 h */
    assert_non_null(s.label);
    for (char *line = strtok(text, "\n"); line; line = strtok(NULL, "\n")) {
        double start, dur;
        char stage[8];
        if (sscanf(line, "%lf,%lf,%7s", &start, &dur, stage) != 3)
            continue; /* the header */
        for (size_t e = (size_t)llround(start / 30.0); e < (size_t)llround((start + dur) / 30.0); e++) {
            snprintf(s.label[e], sizeof s.label[e], "%s", stage);
            s.n = e + 1 > s.n ? e + 1 : s.n;
        }
    }
    free(text);
    return s;
}

/* Drops the rows of [from_s, to_s). */
static void drop(staging *s, double from_s, double to_s)
{
    for (size_t e = 0; e < s->n; e++)
        if (e * 30.0 >= from_s - 1e-9 && e * 30.0 < to_s - 1e-9)
            s->label[e][0] = '\0';
}

/* Writes s as a stage table, one row per staged epoch; returns the path (static). */
static const char *write_csv(const char *dir, const char *name, const staging *s)
{
    static char path[4200];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, "start_s,duration_s,stage\n");
    for (size_t e = 0; e < s->n; e++)
        if (s->label[e][0])
            fprintf(f, "%zu,30,%s\n", e * 30, s->label[e]);
    fclose(f);
    return path;
}

/* The same as a remtone XML scoring file (docs/scoring-file.md) with lights
 * times (negative: not given); returns the path (static). */
static const char *write_xml(const char *dir, const char *name, const staging *s, double off_s,
                             double on_s)
{
    static char path[4200];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<remtone-scoring version=\"1\" "
               "epoch-s=\"30\">\n<lights");
    if (off_s >= 0)
        fprintf(f, " off-s=\"%g\"", off_s);
    if (on_s >= 0)
        fprintf(f, " on-s=\"%g\"", on_s);
    fprintf(f, "/>\n<stages>\n");
    for (size_t e = 0; e < s->n; e++)
        if (s->label[e][0])
            fprintf(f, "<run start-epoch=\"%zu\" epochs=\"1\" stage=\"%s\"/>\n", e, s->label[e]);
    fprintf(f, "</stages>\n</remtone-scoring>\n");
    fclose(f);
    return path;
}

/* ---- scoring and the three reports ----------------------------------------- */

typedef struct scored {
    rt_recording *rec;
    rt_timeline *tl;
    rt_night *night;
    json_t *json;  /* the JSON result, read back */
    char *text;    /* the text summary */
    xmlDocPtr page;/* the review page, read back */
    char dir[4096];
} scored;

/* Scores dir/night.edf with `stages` (a path), optional events and cutoff
 * files and parameters, and writes and reads back the three reports. */
static scored score(const char *dir, const char *stages, const char *events, const char *cutoffs,
                    const rt_score_params *params)
{
    scored s;
    memset(&s, 0, sizeof s);
    snprintf(s.dir, sizeof s.dir, "%s", dir);
    rt_error err;
    char path[4200];
    snprintf(path, sizeof path, "%s/night.edf", dir);
    if (rt_recording_open(path, &s.rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_role_map roles;
    assert_int_equal(rt_roles_resolve(s.rec, NULL, &roles, &err), RT_OK);
    assert_int_equal(rt_timeline_new(&s.tl, &err), RT_OK);
    if (rt_timeline_load_staging(s.tl, stages, NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    if (events && rt_timeline_load_events_csv(s.tl, events, NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    assert_int_equal(rt_timeline_check(s.tl, rt_recording_duration_s(s.rec), &err), RT_OK);
    rt_cutoffs cut;
    rt_cutoffs_published(&cut);
    if (cutoffs && rt_cutoffs_load(&cut, cutoffs, &err) != RT_OK)
        fail_msg("%s", err.message);
    if (rt_night_score(s.rec, &roles, s.tl, params, &cut, &s.night, &err) != RT_OK)
        fail_msg("%s", err.message);

    snprintf(path, sizeof path, "%s/result.json", dir);
    assert_int_equal(rt_night_write_json(s.night, NULL, path, &err), RT_OK);
    json_error_t jerr;
    s.json = json_load_file(path, 0, &jerr);
    if (!s.json)
        fail_msg("%s: %s", path, jerr.text);

    size_t len = 0;
    FILE *f = open_memstream(&s.text, &len);
    assert_non_null(f);
    assert_int_equal(rt_night_write_text(s.night, f, &err), RT_OK);
    fclose(f);

    snprintf(path, sizeof path, "%s/page.html", dir);
    if (rt_night_write_html(s.night, s.rec, s.tl, NULL, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    s.page = xmlReadFile(path, NULL, XML_PARSE_NONET | XML_PARSE_NOERROR);
    assert_non_null(s.page);
    return s;
}

static void free_scored(scored *s)
{
    xmlFreeDoc(s->page);
    free(s->text);
    json_decref(s->json);
    rt_night_free(s->night);
    rt_timeline_free(s->tl);
    rt_recording_close(s->rec);
}

/* The text of the reservation `code` in the JSON result, or NULL. */
static const char *json_reservation(const scored *s, const char *code)
{
    json_t *list = json_object_get(s->json, "reservations");
    assert_true(json_is_array(list));
    for (size_t i = 0; i < json_array_size(list); i++) {
        json_t *r = json_array_get(list, i);
        if (strcmp(json_string_value(json_object_get(r, "code")), code) == 0)
            return json_string_value(json_object_get(r, "text"));
    }
    return NULL;
}

static xmlXPathObjectPtr xpath(const scored *s, const char *expr)
{
    xmlXPathContextPtr ctx = xmlXPathNewContext(s->page);
    xmlXPathRegisterNs(ctx, BAD_CAST "h", BAD_CAST "http://www.w3.org/1999/xhtml");
    xmlXPathObjectPtr r = xmlXPathEvalExpression(BAD_CAST expr, ctx);
    assert_non_null(r);
    xmlXPathFreeContext(ctx);
    return r;
}

static double xpath_number(const scored *s, const char *expr)
{
    xmlXPathObjectPtr r = xpath(s, expr);
    double n = r->type == XPATH_NUMBER ? r->floatval : NAN;
    xmlXPathFreeObject(r);
    return n;
}

/* The string value of expr (a copy; the caller frees). */
static char *xpath_string(const scored *s, const char *expr)
{
    xmlXPathObjectPtr r = xpath(s, expr);
    char *v = strdup(r->type == XPATH_STRING && r->stringval ? (const char *)r->stringval : "");
    xmlXPathFreeObject(r);
    return v;
}

/* The reservation `code` is said everywhere, and the level with it: the JSON
 * result (`reservations`, review.with_reservations, review.statement), the
 * text summary (", WITH RESERVATIONS" and the code's line) and the page (the
 * card beside the level, the level's own class, never the plain clear
 * colour); the cautions of SAFETY.md stay on every report. */
static void said_everywhere(const scored *s, const char *code)
{
    const char *text = json_reservation(s, code);
    if (!text)
        fail_msg("reservation %s missing from the JSON result", code);
    json_t *review = json_object_get(s->json, "review");
    assert_true(json_is_true(json_object_get(review, "with_reservations")));
    const char *statement = json_string_value(json_object_get(review, "statement"));
    assert_non_null(strstr(statement, ", with reservations"));
    assert_string_equal(json_string_value(json_object_get(s->json, "schema")), "remtone-night/4");

    char line[900];
    snprintf(line, sizeof line, "  - [%s] %s\n", code, text);
    assert_non_null(strstr(s->text, line));
    assert_non_null(strstr(s->text, ", WITH RESERVATIONS: "));
    for (size_t i = 0; i < rt_caution_count(); i++)
        assert_non_null(strstr(s->text, rt_caution(i)));
    assert_true(json_array_size(json_object_get(s->json, "cautions")) == rt_caution_count() + 1);

    char expr[300];
    snprintf(expr, sizeof expr,
             "count(//h:section[@id='summary']//h:div[@class='verdict']/h:div[@id='reservations']"
             "//h:li[@data-code='%s'])", code);
    assert_int_equal((int)xpath_number(s, expr), 1);
    snprintf(expr, sizeof expr, "string(//h:li[@data-code='%s'])", code);
    char *li = xpath_string(s, expr);
    assert_non_null(strstr(li, text));
    free(li);
    char *cls = xpath_string(s, "string(//h:span[@id='level']/@class)");
    char *level = xpath_string(s, "string(//h:span[@id='level'])");
    print_message("# page level \"%s\" (class %s)\n", level, cls);
    assert_non_null(strstr(cls, "-with-reservations"));
    assert_non_null(strstr(level, ", with reservations: "));
    free(cls);
    free(level);
    char *page = xpath_string(s, "string(/)");
    for (size_t i = 0; i < rt_caution_count(); i++)
        assert_non_null(strstr(page, rt_caution(i)));
    free(page);
}

/* The night's reservations, one line each, for the log. */
static void print_reservations(const scored *s, const char *label)
{
    json_t *list = json_object_get(s->json, "reservations");
    print_message("# %s: %s, %zu reservation(s)\n", label,
                  json_string_value(json_object_get(json_object_get(s->json, "review"), "statement")),
                  json_array_size(list));
    for (size_t i = 0; i < json_array_size(list); i++)
        print_message("#   [%s] %s\n",
                      json_string_value(json_object_get(json_array_get(list, i), "code")),
                      json_string_value(json_object_get(json_array_get(list, i), "text")));
}

static double json_number(json_t *o, const char *a, const char *b)
{
    json_t *v = json_object_get(json_object_get(o, a), b);
    assert_true(json_is_number(v));
    return json_number_value(v);
}

/* ---- nights --------------------------------------------------------------- */

/* A synthetic night (EMG at 200 Hz: the smallest file the generator makes)
 * in the folder `name`: its path in dir, its stage table's in stages. */
static void make_night(const char *name, rt_synth_profile profile, double hours, uint64_t seed,
                       int pops, char dir[4096], char stages[4200])
{
    rt_synth_options o = rt_test_synth_options(hours, seed);
    o.profile = profile;
    o.emg_rate_hz = 200;
    o.pops = pops;
    snprintf(dir, 4096, "%s", rt_test_dir(name));
    rt_test_synth_write(&o, dir);
    snprintf(stages, 4200, "%s/stages.csv", dir);
}

/* The 7.5-h control night the staging tests share. */
static char long_night[4096];

static int make_long_night(void **state)
{
    (void)state;
    char stages[4200];
    make_night("reserve_long", RT_SYNTH_TYPICAL_OLDER, 7.5, 7, 0, long_night, stages);
    return 0;
}

static int remove_long_night(void **state)
{
    (void)state;
    rt_test_dir("reserve_long"); /* emptied: the EDF+ is large */
    return 0;
}

/* The whole night, staged from start to end: complete, and no reservation
 * (the comparison for the tests below). */
static void whole_night_is_plain(void **state)
{
    (void)state;
    char path[4200];
    snprintf(path, sizeof path, "%s/stages.csv", long_night);
    scored s = score(long_night, path, NULL, NULL, NULL);
    print_reservations(&s, "whole night");
    json_t *st = json_object_get(s.json, "staging");
    assert_true(json_is_true(json_object_get(st, "complete")));
    assert_true(json_number(s.json, "staging", "staged_hours") == 7.5);
    assert_true(json_number(s.json, "staging", "recording_hours") == 7.5);
    assert_int_equal(json_array_size(json_object_get(s.json, "reservations")), 0);
    assert_int_equal(s.night->level, RT_REVIEW_CLEAR);
    assert_non_null(strstr(s.text, "Staging: 7.5 h staged of the 7.5-h recording; complete\n"));
    assert_non_null(strstr(s.text, "\nCLEAR: no verified cutoff is reached or near\n"));
    /* the level line's reason is said once, not repeated as a list item under it */
    assert_null(strstr(s.text, "  - no verified cutoff is reached or near"));
    /* the page: the plain clear label, and no reservation card */
    char *cls = xpath_string(&s, "string(//h:span[@id='level']/@class)");
    assert_string_equal(cls, "level level-clear");
    free(cls);
    assert_int_equal((int)xpath_number(&s, "count(//h:div[@id='reservations'])"), 0);
    free_scored(&s);
}

/* Staging cut at 4 h of the 7.5-h night: the scored part alone is clear,
 * and the result must say that only 4 of 7.5 hours were staged. */
static void staging_cut_at_4h_is_not_a_plain_clear(void **state)
{
    (void)state;
    staging st = read_staging(long_night);
    drop(&st, 4 * 3600.0, 1e9);
    scored s = score(long_night, write_csv(long_night, "cut-4h.csv", &st), NULL, NULL, NULL);
    print_reservations(&s, "cut at 4 h");
    said_everywhere(&s, "partial-staging");
    assert_int_equal(s.night->level, RT_REVIEW_CLEAR);
    assert_string_equal(json_string_value(json_object_get(json_object_get(s.json, "review"),
                                                          "statement")),
                        "clear, with reservations: no verified cutoff is reached or near");
    /* staged hours of recording hours, the unstaged end, REM and scorable REM */
    assert_true(json_number(s.json, "staging", "staged_hours") == 4.0);
    assert_true(json_number(s.json, "staging", "recording_hours") == 7.5);
    assert_true(json_number(s.json, "staging", "unstaged_end_s") == 3.5 * 3600.0);
    assert_true(json_is_true(json_object_get(json_object_get(s.json, "staging"), "partial")));
    assert_true(json_number(s.json, "rem", "minutes") == s.night->rem_minutes);
    assert_true(json_number(s.json, "rem", "scorable_minutes") == s.night->scorable_minutes);
    assert_non_null(strstr(json_reservation(&s, "partial-staging"),
                           "covers 4.0 h of the 7.5-h recording: 3.5 h before the recording's end "
                           "are unstaged (30.0 min allowed)"));
    assert_non_null(strstr(s.text, "Staging: 4.0 h staged of the 7.5-h recording; partial, "
                                   "unstaged 3.5 h at the end (more than the 30.0 min allowed)\n"));
    char rem[96];
    snprintf(rem, sizeof rem, "REM: %.1f min in %zu bouts, %.1f min scorable\n",
             s.night->rem_minutes, s.night->n_bouts, s.night->scorable_minutes);
    assert_non_null(strstr(s.text, rem));
    char *p = xpath_string(&s, "string(//h:p[@id='staging'])");
    assert_non_null(strstr(p, "4.0 h staged of the 7.5-h recording; partial"));
    free(p);
    p = xpath_string(&s, "string(//h:p[@id='rem-minutes'])");
    snprintf(rem, sizeof rem, "REM sleep: %.1f min in %zu bouts; %.1f min scorable",
             s.night->rem_minutes, s.night->n_bouts, s.night->scorable_minutes);
    assert_non_null(strstr(p, rem));
    free(p);
    /* the hypnogram shades the 3.5 unstaged hours */
    assert_true(xpath_number(&s, "count(//*[local-name()='title'][starts-with(., 'not staged: "
                                 "3.5 h')])") == 1);
    free_scored(&s);
    free(st.label);
}

/* Rows missing inside the staging: a 15-min hole in NREM and one REM epoch
 * (so the REM bout is split). Each gap is listed with its clock time (the
 * synthetic night starts at 22:30:00), its offset and its length. */
static void missing_rows_inside_are_listed(void **state)
{
    (void)state;
    staging st = read_staging(long_night);
    drop(&st, 3600.0, 4500.0);
    drop(&st, 5790.0, 5820.0); /* the first REM bout runs 5490-6060 s */
    scored s = score(long_night, write_csv(long_night, "holes.csv", &st), NULL, NULL, NULL);
    print_reservations(&s, "two holes");
    said_everywhere(&s, "staging-gaps");
    assert_null(json_reservation(&s, "partial-staging")); /* the ends are staged */
    assert_non_null(strstr(json_reservation(&s, "staging-gaps"), "2 unstaged gaps inside it "
                                                                   "(15.5 min in all"));
    json_t *gaps = json_object_get(json_object_get(s.json, "staging"), "gaps");
    assert_int_equal(json_array_size(gaps), 2);
    json_t *g = json_array_get(gaps, 0);
    assert_true(json_number_value(json_object_get(g, "start_s")) == 3600.0);
    assert_true(json_number_value(json_object_get(g, "duration_s")) == 900.0);
    assert_string_equal(json_string_value(json_object_get(g, "start_clock")), "23:30:00");
    g = json_array_get(gaps, 1);
    assert_true(json_number_value(json_object_get(g, "start_s")) == 5790.0);
    assert_true(json_number_value(json_object_get(g, "duration_s")) == 30.0);
    assert_string_equal(json_string_value(json_object_get(g, "start_clock")), "00:06:30");
    assert_true(json_number(s.json, "staging", "gap_total_s") == 930.0);
    assert_true(json_number(s.json, "rem", "minutes") == 87.0); /* 87.5 less one epoch */
    assert_non_null(strstr(s.text, "Staging gaps: 2, 15.5 min in all (unstaged epochs inside the "
                                   "staging):\n  - 23:30:00 (3600 s into the recording), 15.0 min\n"
                                   "  - 00:06:30 (5790 s into the recording), 0.5 min\n"));
    /* the page's table of gaps: clock time, seconds, length */
    assert_int_equal((int)xpath_number(&s, "count(//h:table[@id='staging-gaps']/h:tr[h:td])"), 2);
    char *row = xpath_string(&s, "normalize-space(//h:table[@id='staging-gaps']/h:tr[h:td][1])");
    print_message("# first gap row on the page: %s\n", row);
    assert_non_null(strstr(row, "23:30:00"));
    assert_non_null(strstr(row, "3600"));
    assert_non_null(strstr(row, "15.0 min"));
    free(row);
    free_scored(&s);
    free(st.label);
}

/* Unstaged ends within the allowance, and the lights times of an XML
 * scoring file: staging that covers lights-off to lights-on is complete
 * even when the recording runs on. */
static void edges_and_lights(void **state)
{
    (void)state;
    /* 20 min unstaged at the start: within 30 min */
    staging st = read_staging(long_night);
    drop(&st, 0.0, 1200.0);
    scored s = score(long_night, write_csv(long_night, "late-start.csv", &st), NULL, NULL, NULL);
    print_reservations(&s, "20 min unstaged at the start");
    assert_null(json_reservation(&s, "partial-staging"));
    assert_true(json_number(s.json, "staging", "unstaged_start_s") == 1200.0);
    assert_non_null(strstr(s.text, "; complete, unstaged 20.0 min at the start (within the "
                                   "30.0 min allowed)\n"));
    free_scored(&s);
    /* 40 min: beyond it */
    drop(&st, 0.0, 2400.0);
    s = score(long_night, write_csv(long_night, "later-start.csv", &st), NULL, NULL, NULL);
    said_everywhere(&s, "partial-staging");
    assert_non_null(strstr(json_reservation(&s, "partial-staging"),
                           "40.0 min after the recording's start are unstaged"));
    free_scored(&s);
    free(st.label);

    /* cut at 4 h with lights-on at 4 h: the night ended there */
    st = read_staging(long_night);
    drop(&st, 4 * 3600.0, 1e9);
    s = score(long_night, write_xml(long_night, "lights.xml", &st, -1, 4 * 3600.0), NULL, NULL,
              NULL);
    print_reservations(&s, "cut at 4 h, lights-on at 4 h");
    assert_null(json_reservation(&s, "partial-staging"));
    json_t *j = json_object_get(s.json, "staging");
    assert_string_equal(json_string_value(json_object_get(j, "expected_to")), "lights-on");
    assert_true(json_number(s.json, "staging", "tolerance_end_s") == 30.0);
    assert_true(json_is_true(json_object_get(j, "complete")));
    free_scored(&s);
    /* lights-on at 5 h: an hour of the lit night is unstaged */
    s = score(long_night, write_xml(long_night, "lights-5h.xml", &st, -1, 5 * 3600.0), NULL, NULL,
              NULL);
    said_everywhere(&s, "partial-staging");
    assert_non_null(strstr(json_reservation(&s, "partial-staging"),
                           "60.0 min before lights-on are unstaged (0.5 min allowed)"));
    free_scored(&s);
    free(st.label);
}

/* REM epochs of a night, from a first scoring with its own staging. */
static size_t rem_onsets(const char *dir, const char *stages, double **onsets)
{
    scored s = score(dir, stages, NULL, NULL, NULL);
    *onsets = calloc(s.night->n_epochs + 1, sizeof **onsets);
    for (size_t i = 0; i < s.night->n_epochs; i++)
        (*onsets)[i] = s.night->epochs[i].onset_s;
    size_t n = s.night->n_epochs;
    free_scored(&s);
    return n;
}

/* An event table with one event of `type` and `dur_s` at `offset_s` into
 * every `every`-th REM epoch (from the first); returns the path (static). */
static const char *rem_events(const char *dir, const char *name, const double *onsets, size_t n,
                              size_t every, double offset_s, double dur_s, const char *type)
{
    static char path[4200];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, "start_s,duration_s,type\n");
    for (size_t i = 0; i < n; i += every)
        fprintf(f, "%g,%g,%s\n", onsets[i] + offset_s, dur_s, type);
    fclose(f);
    return path;
}

/* Hypopneas in REM, one per 90 s: 40/h, at or above 15/h (Cesari et al.
 * 2023, Sleep). Each leaves 12 s of its 90 (four 3-s mini-epochs), less than
 * a third. */
static void rem_ahi_of_15_or_more(void **state)
{
    (void)state;
    char dir[4096], stages[4200];
    make_night("reserve_ahi", RT_SYNTH_TYPICAL_OLDER, 2.0, 3, 0, dir, stages);
    double *on = NULL;
    size_t n = rem_onsets(dir, stages, &on);
    scored s = score(dir, stages, rem_events(dir, "hypopneas.csv", on, n, 3, 10.0, 10.0, "hypopnea"),
                     NULL, NULL);
    print_reservations(&s, "hypopnea every 90 s of REM");
    assert_true(s.night->exclusions.rem_ahi >= 15.0);
    said_everywhere(&s, "rem-ahi-15");
    assert_non_null(strstr(json_reservation(&s, "rem-ahi-15"), "15/h or more"));
    assert_null(json_reservation(&s, "rem-excluded"));
    free_scored(&s);
    /* one per 270 s: 13.3/h, below 15/h, no reservation */
    s = score(dir, stages, rem_events(dir, "fewer.csv", on, n, 9, 10.0, 10.0, "hypopnea"), NULL,
              NULL);
    print_reservations(&s, "hypopnea every 270 s of REM");
    assert_true(s.night->exclusions.rem_ahi < 15.0 && s.night->exclusions.rem_ahi > 10.0);
    assert_null(json_reservation(&s, "rem-ahi-15"));
    free_scored(&s);
    free(on);
    rt_test_dir("reserve_ahi");
}

/* Artifacts over every other REM epoch leave half of REM out: more than a
 * third. One-second artifacts at the start of every REM epoch but the first
 * five leave a tenth of the 3-s mini-epochs out, but every epoch they touch
 * leaves the epoch indices: those rest on 5 epochs, fewer than 10. */
static void much_rem_left_out_and_few_epochs(void **state)
{
    (void)state;
    char dir[4096], stages[4200];
    make_night("reserve_excluded", RT_SYNTH_TYPICAL_OLDER, 2.0, 4, 0, dir, stages);
    double *on = NULL;
    size_t n = rem_onsets(dir, stages, &on);
    assert_true(n >= 30);
    scored s = score(dir, stages, rem_events(dir, "half.csv", on, n, 2, 0.0, 30.0, "artifact"),
                     NULL, NULL);
    print_reservations(&s, "artifact on every other REM epoch");
    said_everywhere(&s, "rem-excluded");
    assert_non_null(strstr(json_reservation(&s, "rem-excluded"), "more than 33 %"));
    free_scored(&s);

    s = score(dir, stages, rem_events(dir, "starts.csv", on + 5, n - 5, 1, 0.0, 1.0, "artifact"),
              NULL, NULL);
    print_reservations(&s, "1-s artifact at the start of REM epochs 6 on");
    assert_null(json_reservation(&s, "rem-excluded"));
    said_everywhere(&s, "few-units");
    const char *t = json_reservation(&s, "few-units");
    assert_non_null(strstr(t, "less scorable REM than 10 epochs hold (5.0 min; our choice)"));
    assert_non_null(strstr(t, "aasm.tonic_chin_epochs on 5 epochs"));
    assert_non_null(strstr(t, "sinbar.chin_any_fds_phasic_30s on 5 epochs"));
    assert_null(strstr(t, "sinbar.chin_any_3s")); /* 90 % of its mini-epochs are left */
    free_scored(&s);
    /* the threshold is the parameter's: at 0 epochs nothing is too few */
    rt_score_params p;
    rt_score_params_default(&p);
    p.index_min_epochs = 0.0;
    s = score(dir, stages, rem_events(dir, "starts.csv", on + 5, n - 5, 1, 0.0, 1.0, "artifact"),
              NULL, &p);
    assert_null(json_reservation(&s, "few-units"));
    free_scored(&s);
    free(on);
    rt_test_dir("reserve_excluded");
}

/* Electrode pops in the chin during REM: quality marks leave part of REM
 * out on that channel (docs/quality.md). */
static void channel_partly_unusable(void **state)
{
    (void)state;
    char dir[4096], stages[4200];
    make_night("reserve_pops", RT_SYNTH_TYPICAL_OLDER, 2.0, 5, 40, dir, stages);
    scored s = score(dir, stages, NULL, NULL, NULL);
    print_reservations(&s, "40 chin pops");
    assert_true(s.night->channel[RT_ROLE_CHIN].quality.unscorable_min[2] > 0.0);
    said_everywhere(&s, "channel-partly-unusable");
    assert_non_null(strstr(json_reservation(&s, "channel-partly-unusable"), "chin "));
    assert_non_null(strstr(json_reservation(&s, "channel-partly-unusable"), "pop "));
    free_scored(&s);
    rt_test_dir("reserve_pops");
}

/* A lab's cutoff file that moves every verified cutoff out of reach leaves
 * the RBD night clear; its SINBAR indices with recalled cutoffs (chin phasic
 * 16.3 %, FDS 16.8 %, combined 30-s 27 %; src/score/rules.c, from memory)
 * still reach them, which did not decide the level. */
static void unverified_cutoff_reached_on_a_clear_night(void **state)
{
    (void)state;
    char dir[4096], stages[4200];
    make_night("reserve_unverified", RT_SYNTH_RBD, 1.0, 12, 0, dir, stages);
    scored s = score(dir, stages, NULL, NULL, NULL);
    print_reservations(&s, "RBD night, published cutoffs");
    assert_int_equal(s.night->level, RT_REVIEW_FLAGGED);
    assert_null(json_reservation(&s, "cutoff-not-verified")); /* could not raise review */
    free_scored(&s);
    const char *cut = rt_test_text_file(dir, "lab.csv",
                                        "index,cutoff,unit,normal_from\n"
                                        "sinbar.chin_any_3s,99,%,\n"
                                        "sinbar.chin_tonic_30s,99,%,\n"
                                        "sinbar.chin_any_fds_phasic_3s,99,%,\n"
                                        "montreal.tonic_chin,99,%,\n"
                                        "montreal.phasic_chin,99,%,\n"
                                        "rai,0.01,ratio,0.02\n"
                                        "montreal.rem_leg_movements_per_h,9999,/h,\n");
    s = score(dir, stages, NULL, cut, NULL);
    print_reservations(&s, "RBD night, verified cutoffs out of reach");
    assert_int_equal(s.night->level, RT_REVIEW_CLEAR);
    said_everywhere(&s, "cutoff-not-verified");
    const char *t = json_reservation(&s, "cutoff-not-verified");
    assert_non_null(strstr(t, "sinbar.fds_phasic_3s is "));
    assert_non_null(strstr(t, "16.8 % reached"));
    assert_non_null(strstr(t, "recalled but not verified"));
    free_scored(&s);
    rt_test_dir("reserve_unverified");
}

int main(void)
{
    const struct CMUnitTest staging_tests[] = {
        cmocka_unit_test(whole_night_is_plain),
        cmocka_unit_test(staging_cut_at_4h_is_not_a_plain_clear),
        cmocka_unit_test(missing_rows_inside_are_listed),
        cmocka_unit_test(edges_and_lights),
    };
    const struct CMUnitTest other_tests[] = {
        cmocka_unit_test(rem_ahi_of_15_or_more),
        cmocka_unit_test(much_rem_left_out_and_few_epochs),
        cmocka_unit_test(channel_partly_unusable),
        cmocka_unit_test(unverified_cutoff_reached_on_a_clear_night),
    };
    /* REMTONE_TEST_FILTER=name runs only the tests whose names match (development) */
    if (getenv("REMTONE_TEST_FILTER"))
        cmocka_set_test_filter(getenv("REMTONE_TEST_FILTER"));
    int failed = cmocka_run_group_tests_name("staging", staging_tests, make_long_night,
                                             remove_long_night);
    return failed + cmocka_run_group_tests_name("reservations", other_tests, NULL, NULL);
}
