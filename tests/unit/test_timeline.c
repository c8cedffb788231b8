/* The staging timeline: stage and event labels against the manuals that
 * define them, the stage/event table CSV format (remtone's own format,
 * docs/staging.md) with every error it must report, the label map,
 * and the timeline check against a recording's length.
 *
 * Sources named beside the checks:
 *   [AASM]  AASM Manual for the Scoring of Sleep and Associated Events (stage names W, N1, N2, N3, R;
 *           N3 replaces R&K stages 3 and 4).
 *   [RK]    Rechtschaffen & Kales 1968, A manual of standardized terminology, techniques and scoring
 *           system for sleep stages of human subjects (stages W, 1, 2, 3, 4, REM, movement time).
 *   [EDF+]  Kemp & Olivan 2003, Clin Neurophysiol 114:1755-1761, and its list of standard texts
 *           ("Sleep stage W" ... "Sleep stage R", "Sleep stage ?", "Movement time"), from memory.
 *   [RFC4180] Common format for CSV files: quoted fields, "" for a quote, CRLF line ends.
 *   [RFC3629] UTF-8: which byte sequences are valid.
 *   [FMT]   remtone's own table formats, docs/staging.md (stage and event tables);
 *           30-s epochs and unscored epochs never guessed are common practice
 *           (AASM Manual for the Scoring of Sleep, from memory).
 *   [CP]    common practice, no single published source. */
#include "support.h"

#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "remtone/timeline.h"

/* ---- helpers ---- */

static const char *write_table(const char *dir, const char *name, const char *text)
{
    return rt_test_text_file(dir, name, text);
}

/* Loads a stage table expecting failure; checks the status and that the
 * message holds every fragment given (NULL-terminated list). */
static void expect_stage_error(const char *dir, const char *name, const char *text,
                               rt_status status, const char *const *fragments)
{
    const char *path = write_table(dir, name, text);
    char path_copy[4400];
    snprintf(path_copy, sizeof path_copy, "%s", path);
    rt_timeline *tl = rt_test_timeline();
    assert_non_null(tl);
    rt_error err;
    rt_error_clear(&err);
    rt_status st = rt_timeline_load_stages_csv(tl, path_copy, NULL, &err);
    if (st != status)
        fail_msg("%s: status %s, expected %s (message: %s)", name, rt_status_name(st),
                 rt_status_name(status), err.message);
    assert_int_equal(err.status, status);
    for (size_t i = 0; fragments[i]; i++)
        if (!strstr(err.message, fragments[i]))
            fail_msg("%s: message lacks \"%s\": %s", name, fragments[i], err.message);
    /* A failed load leaves the timeline as it was: empty. */
    assert_int_equal(tl->n_epochs, 0);
    assert_int_equal(tl->n_events, 0);
    rt_timeline_free(tl);
}

static rt_timeline *load_stages_ok(const char *path, const rt_labelmap *map)
{
    rt_timeline *tl = rt_test_timeline();
    assert_non_null(tl);
    rt_error err;
    rt_error_clear(&err);
    rt_status st = rt_timeline_load_stages_csv(tl, path, map, &err);
    if (st != RT_OK)
        fail_msg("%s: %s", path, err.message);
    return tl;
}

static void expect_stages(const rt_timeline *tl, const char *expected)
{
    /* expected: one character per epoch: ?WabcRM (a=N1, b=N2, c=N3, M=MT) */
    static const char codes[RT_STAGE_COUNT] = {'?', 'W', 'a', 'b', 'c', 'R', 'M'};
    char got[256];
    size_t n = tl->n_epochs < sizeof got - 1 ? tl->n_epochs : sizeof got - 1;
    for (size_t i = 0; i < n; i++)
        got[i] = tl->stages[i] < RT_STAGE_COUNT ? codes[tl->stages[i]] : 'X';
    got[n] = '\0';
    assert_string_equal(got, expected);
}

/* ---- labels ---- */

typedef struct stage_case {
    const char *label;
    rt_stage stage;
} stage_case;

static void check_stage_cases(const stage_case *cases, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        rt_stage s = RT_STAGE_COUNT;
        if (!rt_stage_parse(cases[i].label, NULL, &s))
            fail_msg("label \"%s\" not read as a stage", cases[i].label);
        if (s != cases[i].stage)
            fail_msg("label \"%s\" read as %s, expected %s", cases[i].label, rt_stage_name(s),
                     rt_stage_name(cases[i].stage));
    }
}

static void stage_labels_aasm(void **state)
{
    (void)state;
    /* [AASM] the five stage names. */
    static const stage_case cases[] = {
        {"W", RT_STAGE_W}, {"N1", RT_STAGE_N1}, {"N2", RT_STAGE_N2},
        {"N3", RT_STAGE_N3}, {"R", RT_STAGE_R},
        {" n2 ", RT_STAGE_N2}, /* case and surrounding space do not matter */
    };
    check_stage_cases(cases, sizeof cases / sizeof cases[0]);
    assert_string_equal(rt_stage_name(RT_STAGE_N3), "N3");
    assert_string_equal(rt_stage_name(RT_STAGE_UNSCORED), "?");
    assert_string_equal(rt_stage_name(RT_STAGE_MOVEMENT), "MT");
}

static void stage_labels_rk(void **state)
{
    (void)state;
    /* [RK] stages W, 1-4, REM, MT; [AASM] merges R&K stages 3 and 4 into N3. */
    static const stage_case cases[] = {
        {"W", RT_STAGE_W},   {"1", RT_STAGE_N1},   {"2", RT_STAGE_N2},
        {"3", RT_STAGE_N3},  {"4", RT_STAGE_N3},   {"REM", RT_STAGE_R},
        {"MT", RT_STAGE_MOVEMENT},
    };
    check_stage_cases(cases, sizeof cases / sizeof cases[0]);
}

static void stage_labels_edfplus_texts(void **state)
{
    (void)state;
    /* [EDF+] standard texts for sleep stages, from memory. */
    static const stage_case cases[] = {
        {"Sleep stage W", RT_STAGE_W},  {"Sleep stage 1", RT_STAGE_N1},
        {"Sleep stage 2", RT_STAGE_N2}, {"Sleep stage 3", RT_STAGE_N3},
        {"Sleep stage 4", RT_STAGE_N3}, {"Sleep stage R", RT_STAGE_R},
        {"Sleep stage ?", RT_STAGE_UNSCORED}, {"Movement time", RT_STAGE_MOVEMENT},
        /* [CP] exporters vary case, spacing and underscores */
        {"SLEEP_STAGE_W", RT_STAGE_W},  {"sleep  stage 2", RT_STAGE_N2},
    };
    check_stage_cases(cases, sizeof cases / sizeof cases[0]);
}

static void stage_labels_common_and_unscored(void **state)
{
    (void)state;
    /* [CP] common variants documented in docs/staging.md. */
    static const stage_case cases[] = {
        {"Wake", RT_STAGE_W},      {"S1", RT_STAGE_N1},       {"S4", RT_STAGE_N3},
        {"Stage 2", RT_STAGE_N2},  {"Stage R", RT_STAGE_R},   {"NREM3", RT_STAGE_N3},
        {"NREM4", RT_STAGE_N3},    {"Sleep stage N2", RT_STAGE_N2},
        {"?", RT_STAGE_UNSCORED},  {"U", RT_STAGE_UNSCORED},  {"unscored", RT_STAGE_UNSCORED},
    };
    check_stage_cases(cases, sizeof cases / sizeof cases[0]);
    /* Numeric hypnogram codes are not universal ([CP]: some write 0 = W and
     * 5 = REM, others do not), and "Sleep stage N" names no single stage:
     * these need a label map rather than a guess. */
    static const char *const not_stages[] = {"0", "5", "Sleep stage N", "N4", "Stage", "",
                                             "Arousal", "REM sleep behaviour"};
    for (size_t i = 0; i < sizeof not_stages / sizeof not_stages[0]; i++)
        if (rt_stage_parse(not_stages[i], NULL, NULL))
            fail_msg("\"%s\" must not be read as a stage", not_stages[i]);
}

static void event_labels(void **state)
{
    (void)state;
    typedef struct {
        const char *label;
        rt_event_type type;
    } event_case;
    static const event_case cases[] = {
        /* [FMT] the event table's type names */
        {"arousal", RT_EVENT_AROUSAL},   {"apnea", RT_EVENT_APNEA},
        {"hypopnea", RT_EVENT_HYPOPNEA}, {"resp-arousal", RT_EVENT_RESP_AROUSAL},
        {"snore", RT_EVENT_SNORE},       {"artifact", RT_EVENT_ARTIFACT},
        {"limb-movement", RT_EVENT_LIMB_MOVEMENT},
        /* [EDF+] texts, from memory */
        {"Obstructive apnea", RT_EVENT_APNEA}, {"Central apnea", RT_EVENT_APNEA},
        {"Mixed apnea", RT_EVENT_APNEA},       {"Hypopnea", RT_EVENT_HYPOPNEA},
        {"Arousal", RT_EVENT_AROUSAL},
        /* [CP] spellings and abbreviations */
        {"Apnoea", RT_EVENT_APNEA},      {"Hypopnoea", RT_EVENT_HYPOPNEA},
        {"RERA", RT_EVENT_RESP_AROUSAL}, {"Respiratory arousal", RT_EVENT_RESP_AROUSAL},
        {"Snoring", RT_EVENT_SNORE},     {"Artefact", RT_EVENT_ARTIFACT},
        {"Leg movement", RT_EVENT_LIMB_MOVEMENT}, {"LM", RT_EVENT_LIMB_MOVEMENT},
        {"PLM", RT_EVENT_LIMB_MOVEMENT},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        rt_event_type t = RT_EVENT_TYPE_COUNT;
        if (!rt_event_parse(cases[i].label, NULL, &t) || t != cases[i].type)
            fail_msg("\"%s\" not read as %s", cases[i].label, rt_event_type_name(cases[i].type));
    }
    /* Type names round-trip: the event table writes what the parser reads. */
    for (int t = 0; t < RT_EVENT_TYPE_COUNT; t++) {
        rt_event_type back;
        assert_true(rt_event_parse(rt_event_type_name((rt_event_type)t), NULL, &back));
        assert_int_equal(back, t);
    }
    assert_false(rt_event_parse("Sleep stage W", NULL, NULL));
    assert_false(rt_event_parse("Lights off", NULL, NULL));
}

/* ---- label map ---- */

static void label_map_comes_first(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_map");
    /* A lab's numeric hypnogram codes ([CP]: 0 = W, 5 = REM is one common
     * convention); it redefines "4" (normally R&K 4 -> N3) as unscored, and
     * drops its "Lights" marks. Header in another order, tab-separated. */
    const char *path = write_table(dir, "map.tsv",
                                   "meaning\tlabel\n"
                                   "W\t0\n"
                                   "R\t5\n"
                                   "?\t4\n"
                                   "ignore\tLights\n"
                                   "apnea\tOA\n"
                                   "N2\tREM\n");
    rt_error err;
    rt_error_clear(&err);
    rt_labelmap *map = NULL;
    if (rt_labelmap_load(path, &map, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_stage s;
    assert_true(rt_stage_parse("0", map, &s));
    assert_int_equal(s, RT_STAGE_W);
    assert_true(rt_stage_parse("5", map, &s));
    assert_int_equal(s, RT_STAGE_R);
    assert_true(rt_stage_parse("4", map, &s)); /* map before the built-in R&K form */
    assert_int_equal(s, RT_STAGE_UNSCORED);
    assert_true(rt_stage_parse("rem", map, &s)); /* labels compare case-insensitively */
    assert_int_equal(s, RT_STAGE_N2);
    assert_true(rt_stage_parse("3", map, &s)); /* unmapped labels fall back to built-ins */
    assert_int_equal(s, RT_STAGE_N3);
    assert_true(rt_label_is_ignored(" lights ", map));
    assert_false(rt_stage_parse("Lights", map, NULL));
    rt_event_type t;
    assert_true(rt_event_parse("OA", map, &t));
    assert_int_equal(t, RT_EVENT_APNEA);
    assert_false(rt_stage_parse("OA", map, NULL));
    assert_false(rt_label_is_ignored("Lights", NULL));

    /* Stage table read through the map. */
    const char *stages = write_table(dir, "stages.csv",
                                     "start_s,duration_s,stage\n0,60,0\n60,30,5\n90,30,Lights\n");
    rt_timeline *tl = load_stages_ok(stages, map);
    expect_stages(tl, "WWR"); /* the ignored row stays unscored and is not counted */
    rt_timeline_free(tl);
    rt_labelmap_free(map);
    rt_labelmap_free(NULL);
}

/* A label map load expected to fail: the status returned and err agree, and
 * *out is left NULL. Returns that NULL. */
static rt_labelmap *load_map_fails(const char *path, rt_error *err)
{
    rt_labelmap *map = (rt_labelmap *)err; /* must be reset to NULL */
    rt_status st = rt_labelmap_load(path, &map, err);
    assert_int_not_equal(st, RT_OK);
    assert_int_equal(st, err->status);
    return map;
}

static void label_map_errors(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_map_err");
    rt_error err;
    char path[4400];
    snprintf(path, sizeof path, "%s", write_table(dir, "dup.csv", "label,meaning\nX,W\nY,R\nx,N1\n"));
    assert_null(load_map_fails(path, &err));
    assert_int_equal(err.status, RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "dup.csv line 4"));
    assert_non_null(strstr(err.message, "already mapped to W"));

    snprintf(path, sizeof path, "%s", write_table(dir, "bad.csv", "label,meaning\nX,deep sleep\n"));
    assert_null(load_map_fails(path, &err));
    assert_non_null(strstr(err.message, "bad.csv line 2"));
    assert_non_null(strstr(err.message, "\"deep sleep\""));

    snprintf(path, sizeof path, "%s", write_table(dir, "nocol.csv", "label,stage\nX,W\n"));
    assert_null(load_map_fails(path, &err));
    assert_non_null(strstr(err.message, "nocol.csv line 1"));
    assert_non_null(strstr(err.message, "\"meaning\""));

    /* The same mapping twice is harmless. */
    rt_labelmap *map = rt_test_labelmap();
    assert_int_equal(rt_labelmap_add(map, "X", "W", &err), RT_OK);
    assert_int_equal(rt_labelmap_add(map, " x ", "w", &err), RT_OK);
    assert_int_equal(rt_labelmap_add(map, "  ", "w", &err), RT_ERR_STAGING);
    rt_labelmap_free(map);
}

/* ---- stage table ---- */

static void stage_table_forms(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_forms");
    /* [RFC4180] quoted fields and CRLF; [CP] UTF-8 byte order mark as
     * spreadsheet programs write it; [FMT] columns by name in any order,
     * extra columns ignored; blank lines skipped. A 60-s gap (epochs 4-5)
     * stays unscored: [FMT] never guessed. */
    const char *text = "\xef\xbb\xbf" "Stage,Scorer,START_S,duration_s\r\n"
                       "\r\n"
                       "W,ab,0,60\r\n"
                       "\"Sleep stage 1\",ab,60,30\r\n"
                       "\"N2, light\",ab,90,30\r\n"
                       "   \r\n"
                       "R,\"a \"\"quoted\"\" note\",180,60\r\n";
    rt_error err;
    rt_labelmap *map = rt_test_labelmap();
    assert_int_equal(rt_labelmap_add(map, "N2, light", "N2", &err), RT_OK);
    rt_timeline *tl = load_stages_ok(write_table(dir, "forms.csv", text), map);
    assert_true(tl->epoch_s == 30.0); /* [FMT] epochs are 30 s */
    expect_stages(tl, "WWab??RR");
    rt_timeline_free(tl);

    /* Tab-separated, detected from the header line. */
    tl = load_stages_ok(write_table(dir, "tabs.tsv",
                                    "start_s\tduration_s\tstage\n0\t30\t3\n30\t30\t4\n60\t30\tMT\n"),
                        NULL);
    expect_stages(tl, "ccM");
    rt_timeline_free(tl);

    /* Trailing unscored entries do not lengthen the staging: n_epochs ends at
     * the last scored epoch. Within 1e-6 s the grid is met (decimal text). */
    tl = load_stages_ok(write_table(dir, "tail.csv",
                                    "start_s,duration_s,stage\n0,30,W\n30.0000004,29.9999996,N1\n"
                                    "60,90,?\n"),
                        NULL);
    expect_stages(tl, "Wa");
    rt_timeline_free(tl);
    rt_labelmap_free(map);
}

static void stage_table_errors(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_errors");
    const char *const missing[] = {"missing.csv line 1", "\"duration_s\"", NULL};
    expect_stage_error(dir, "missing.csv", "start_s,dur,stage\n0,30,W\n", RT_ERR_STAGING, missing);

    const char *const nonnum[] = {"nonnum.csv line 3", "duration_s \"30s\" is not a number", NULL};
    expect_stage_error(dir, "nonnum.csv", "start_s,duration_s,stage\n0,30,W\n30,30s,N1\n",
                       RT_ERR_STAGING, nonnum);

    const char *const negative[] = {"negative.csv line 2", "negative", NULL};
    expect_stage_error(dir, "negative.csv", "start_s,duration_s,stage\n-30,30,W\n",
                       RT_ERR_STAGING, negative);

    const char *const zero[] = {"zero.csv line 3", "not positive", NULL};
    expect_stage_error(dir, "zero.csv", "start_s,duration_s,stage\n0,30,W\n30,0,W\n",
                       RT_ERR_STAGING, zero);

    /* [FMT] durations in whole 30-s epochs */
    const char *const partial[] = {"partial.csv line 2", "45 s is not a whole number of 30-s epochs",
                                   NULL};
    expect_stage_error(dir, "partial.csv", "start_s,duration_s,stage\n0,45,W\n", RT_ERR_STAGING,
                       partial);
    const char *const tiny[] = {"tiny.csv line 2", "not a whole number", NULL};
    expect_stage_error(dir, "tiny.csv", "start_s,duration_s,stage\n0,30.00001,W\n", RT_ERR_STAGING,
                       tiny);

    const char *const grid[] = {"grid.csv line 3", "15 s is not on the 30-s epoch grid", NULL};
    expect_stage_error(dir, "grid.csv", "start_s,duration_s,stage\n0,30,W\n15,30,W\n",
                       RT_ERR_STAGING, grid);

    const char *const overlap[] = {"overlap.csv line 4", "overlaps line 3", NULL};
    expect_stage_error(dir, "overlap.csv",
                       "start_s,duration_s,stage\n0,30,W\n30,90,N1\n90,30,N2\n", RT_ERR_STAGING,
                       overlap);

    const char *const order[] = {"order.csv line 4", "not in time order", "line 3", NULL};
    expect_stage_error(dir, "order.csv", "start_s,duration_s,stage\n60,30,W\n120,30,N1\n0,30,N2\n",
                       RT_ERR_STAGING, order);

    /* Every distinct unknown label, with the line it first appears on, and a
     * pointer to the label map. */
    const char *const unknown[] = {"unknown.csv", "2 unknown stage labels", "\"Deep\" (line 3)",
                                   "\"light sleep\" (line 5)", "label map", NULL};
    expect_stage_error(dir, "unknown.csv",
                       "start_s,duration_s,stage\n0,30,W\n30,30,Deep\n60,30,N2\n90,30,light sleep\n"
                       "120,30,Deep\n",
                       RT_ERR_STAGING, unknown);

    const char *const empty_rows[] = {"header.csv", "staging is empty", NULL};
    expect_stage_error(dir, "header.csv", "start_s,duration_s,stage\n\n", RT_ERR_STAGING,
                       empty_rows);
    const char *const empty_file[] = {"empty.csv", "empty", NULL};
    expect_stage_error(dir, "empty.csv", "", RT_ERR_STAGING, empty_file);
    const char *const blank[] = {"blank.csv", "no header row", NULL};
    expect_stage_error(dir, "blank.csv", "\n  \n\n", RT_ERR_STAGING, blank);

    /* [RFC3629] 0xff never appears in UTF-8; a binary file is refused by line. */
    const char *const binary[] = {"binary.csv line 2", "not UTF-8", NULL};
    expect_stage_error(dir, "binary.csv", "start_s,duration_s,stage\n0,30,\xff\xfe\n",
                       RT_ERR_STAGING, binary);

    /* [RFC4180] a quote inside an unquoted field is malformed. */
    const char *const quote[] = {"quote.csv line 3", "malformed CSV", NULL};
    expect_stage_error(dir, "quote.csv", "start_s,duration_s,stage\n0,30,W\n30,30,N\"1\n",
                       RT_ERR_STAGING, quote);

    const char *const short_row[] = {"short.csv line 2", "\"stage\" missing", NULL};
    expect_stage_error(dir, "short.csv", "start_s,duration_s,stage\n0,30\n", RT_ERR_STAGING,
                       short_row);

    const char *const semicolon[] = {"semi.csv line 1", "comma or a tab", NULL};
    expect_stage_error(dir, "semi.csv", "start_s;duration_s;stage\n0;30;W\n", RT_ERR_STAGING,
                       semicolon);
}

static void stage_table_file_errors(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_files");
    char path[4400];
    rt_error err;
    rt_timeline *tl = rt_test_timeline();

    snprintf(path, sizeof path, "%s/absent.csv", dir);
    assert_int_equal(rt_timeline_load_stages_csv(tl, path, NULL, &err), RT_ERR_IO);
    assert_non_null(strstr(err.message, "absent.csv"));

    snprintf(path, sizeof path, "%s/sub", dir);
    assert_int_equal(mkdir(path, 0755), 0);
    assert_int_equal(rt_timeline_load_stages_csv(tl, path, NULL, &err), RT_ERR_IO);
    assert_non_null(strstr(err.message, "directory"));

    /* Fields are bounded: a 5000-byte label is refused with its line. */
    static char text[6000];
    int n = snprintf(text, sizeof text, "start_s,duration_s,stage\n0,30,");
    memset(text + n, 'W', 5000);
    text[n + 5000] = '\n';
    text[n + 5001] = '\0';
    snprintf(path, sizeof path, "%s", rt_test_text_file(dir, "long.csv", text));
    assert_int_equal(rt_timeline_load_stages_csv(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "long.csv line 2"));
    assert_non_null(strstr(err.message, "longer than"));
    assert_int_equal(tl->n_epochs, 0);
    rt_timeline_free(tl);
}

static void stages_load_once(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_once");
    char path[4400];
    snprintf(path, sizeof path, "%s",
             write_table(dir, "s.csv", "start_s,duration_s,stage\n0,30,W\n"));
    rt_timeline *tl = load_stages_ok(path, NULL);
    rt_error err;
    assert_int_equal(rt_timeline_load_stages_csv(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "already loaded"));
    expect_stages(tl, "W");
    rt_timeline_free(tl);
    rt_timeline_free(NULL);
}

/* ---- the shared checked path ---- */

static void add_stage_run_checks(void **state)
{
    (void)state;
    rt_timeline *tl = rt_test_timeline();
    rt_error err;
    assert_int_equal(rt_timeline_add_stage_run(tl, 60, 30, RT_STAGE_N2, "x.xml", 12, &err), RT_OK);
    expect_stages(tl, "??b"); /* [FMT] epochs before the first entry stay unscored */
    assert_int_equal(rt_timeline_add_stage_run(tl, 60, 30, RT_STAGE_N2, "x.xml", 13, &err),
                     RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "x.xml line 13"));
    assert_non_null(strstr(err.message, "overlaps line 12"));
    /* No line: the place is the source alone. */
    assert_int_equal(rt_timeline_add_stage_run(tl, 95, 30, RT_STAGE_R, "x.edf: annotation 4", 0,
                                               &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "x.edf: annotation 4: start 95 s is not on the 30-s"));
    assert_int_equal(rt_timeline_add_stage_run(tl, 1e9, 30, RT_STAGE_R, "x", 0, &err),
                     RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "31 days"));
    expect_stages(tl, "??b");
    rt_timeline_free(tl);
}

/* ---- event table ---- */

static void event_table(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_events");
    rt_timeline *tl = rt_test_timeline();
    rt_error err;
    /* Rows out of order: the timeline keeps events ordered by onset; equal
     * onsets keep file order. */
    const char *path = write_table(dir, "events.csv",
                                   "type,start_s,duration_s,note\n"
                                   "Obstructive apnea,300,22.5,\n"
                                   "arousal,120,5,x\n"
                                   "limb-movement,300,1.5,\n"
                                   "RERA,10,8,\n");
    assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_OK);
    assert_int_equal(tl->n_events, 4);
    assert_true(tl->events[0].onset_s == 10 && tl->events[0].type == RT_EVENT_RESP_AROUSAL);
    assert_true(tl->events[1].onset_s == 120 && tl->events[1].type == RT_EVENT_AROUSAL);
    assert_true(tl->events[2].onset_s == 300 && tl->events[2].type == RT_EVENT_APNEA);
    assert_true(tl->events[2].duration_s == 22.5);
    assert_true(tl->events[3].onset_s == 300 && tl->events[3].type == RT_EVENT_LIMB_MOVEMENT);

    /* A second table appends and merges in order. */
    path = write_table(dir, "more.csv", "start_s\tduration_s\ttype\n200\t3\tsnore\n");
    assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_OK);
    assert_int_equal(tl->n_events, 5);
    assert_true(tl->events[2].onset_s == 200 && tl->events[2].type == RT_EVENT_SNORE);

    /* Errors leave the timeline unchanged. */
    path = write_table(dir, "bad.csv",
                       "start_s,duration_s,type\n0,3,apnea\n5,3,burp\n9,3,hiccup\n11,3,burp\n");
    assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "2 unknown event labels"));
    assert_non_null(strstr(err.message, "\"burp\" (line 3)"));
    assert_non_null(strstr(err.message, "\"hiccup\" (line 4)"));
    path = write_table(dir, "zero.csv", "start_s,duration_s,type\n0,0,apnea\n");
    assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "zero.csv line 2"));
    path = write_table(dir, "neg.csv", "start_s,duration_s,type\n-1,3,apnea\n");
    assert_int_equal(rt_timeline_load_events_csv(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "neg.csv line 2"));
    assert_int_equal(tl->n_events, 5);
    rt_timeline_free(tl);
}

/* ---- the check against the recording ---- */

static void check_past_end(void **state)
{
    (void)state;
    rt_timeline *tl = rt_test_timeline();
    rt_error err;
    assert_int_equal(rt_timeline_check(tl, 100, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "empty"));
    assert_int_equal(rt_timeline_add_stage_run(tl, 0, 120, RT_STAGE_W, "s", 2, &err), RT_OK);
    /* 4 epochs = 120 s against 120 s: fits exactly. */
    assert_int_equal(rt_timeline_check(tl, 120, &err), RT_OK);
    /* 60 s recording: two whole epochs past the end. */
    assert_int_equal(rt_timeline_check(tl, 60, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "60 s (2 epochs of 30 s) past the end"));
    /* 100 s recording: the epoch at 90-120 s is covered for only 10 s, which
     * counts as past the end (its EMG cannot be read whole). */
    assert_int_equal(rt_timeline_check(tl, 100, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "20 s (1 epoch of 30 s) past the end"));
    assert_non_null(strstr(err.message, "90-120 s"));
    assert_non_null(strstr(err.message, "partial epoch counts as past the end"));
    assert_int_equal(rt_timeline_check(tl, 0, &err), RT_ERR_USAGE);

    /* Events must lie inside the recording. */
    assert_int_equal(rt_timeline_add_event(tl, 110, 15, RT_EVENT_APNEA, "e", 3, &err), RT_OK);
    assert_int_equal(rt_timeline_check(tl, 125, &err), RT_OK);
    assert_int_equal(rt_timeline_check(tl, 120, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "apnea at 110 s"));
    assert_non_null(strstr(err.message, "5 s past the end"));
    rt_timeline_free(tl);
}

/* ---- format detection ---- */

static void staging_format_by_content(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("tl_sniff");
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    char path[4400];
    snprintf(path, sizeof path, "%s",
             write_table(dir, "scoring.dat", "\xef\xbb\xbf  \n<?xml version=\"1.0\"?><x/>"));
    assert_int_equal(rt_timeline_load_staging(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "line 2: not well-formed XML"));
    snprintf(path, sizeof path, "%s",
             write_table(dir, "stages.txt", "start_s,duration_s,stage\n30,30,R\n"));
    assert_int_equal(rt_timeline_load_staging(tl, path, NULL, &err), RT_OK);
    expect_stages(tl, "?R");
    rt_timeline_free(tl);
}

/* ---- robustness ---- */

static uint64_t next_random(uint64_t *x)
{
    /* xorshift64*: enough to scramble bytes reproducibly. */
    *x ^= *x >> 12;
    *x ^= *x << 25;
    *x ^= *x >> 27;
    return *x * 2685821657736338717ull;
}

static void mutated_tables_never_crash(void **state)
{
    (void)state;
    /* Bad input must give a status and a message naming the file, never a
     * crash (sanitizer builds catch memory errors), and what loads must keep
     * the timeline's invariants. */
    uint64_t x = rt_test_seed() | 1u;
    const char *dir = rt_test_dir("tl_mutate");
    static const char base[] = "\xef\xbb\xbfstart_s,duration_s,stage,note\r\n0,60,W,\"a\"\r\n"
                               "60,30,N1,\r\n\r\n120,90,\"Sleep stage R\",x\r\n210,30,?,\n";
    static const char alphabet[] = ",\t\"\r\n0123456789.-+eWNR? \x00\xff\xc3";
    char path[4400];
    snprintf(path, sizeof path, "%s/m.csv", dir);
    for (int round = 0; round < 400; round++) {
        char text[sizeof base + 16];
        size_t len = sizeof base - 1;
        memcpy(text, base, len);
        int edits = 1 + (int)(next_random(&x) % 4);
        for (int e = 0; e < edits; e++) {
            size_t at = (size_t)(next_random(&x) % len);
            uint64_t what = next_random(&x);
            if (what % 3 == 0 && len > 1) { /* delete a byte */
                memmove(text + at, text + at + 1, len - at - 1);
                len--;
            } else { /* replace it */
                text[at] = alphabet[(what >> 8) % (sizeof alphabet - 1)];
            }
        }
        rt_test_write_file(path, text, len);
        rt_timeline *tl = rt_test_timeline();
        rt_error err;
        rt_error_clear(&err);
        rt_status st = rt_timeline_load_stages_csv(tl, path, NULL, &err);
        if (st == RT_OK) {
            for (size_t i = 0; i < tl->n_epochs; i++)
                assert_true(tl->stages[i] < RT_STAGE_COUNT);
            /* n_epochs ends at a scored epoch */
            assert_true(tl->n_epochs == 0 || tl->stages[tl->n_epochs - 1] != RT_STAGE_UNSCORED);
        } else {
            if (st != RT_ERR_STAGING)
                fail_msg("round %d: status %s: %s", round, rt_status_name(st), err.message);
            if (!strstr(err.message, "m.csv"))
                fail_msg("round %d: message without the file name: %s", round, err.message);
        }
        rt_timeline_free(tl);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(stage_labels_aasm),
        cmocka_unit_test(stage_labels_rk),
        cmocka_unit_test(stage_labels_edfplus_texts),
        cmocka_unit_test(stage_labels_common_and_unscored),
        cmocka_unit_test(event_labels),
        cmocka_unit_test(label_map_comes_first),
        cmocka_unit_test(label_map_errors),
        cmocka_unit_test(stage_table_forms),
        cmocka_unit_test(stage_table_errors),
        cmocka_unit_test(stage_table_file_errors),
        cmocka_unit_test(stages_load_once),
        cmocka_unit_test(add_stage_run_checks),
        cmocka_unit_test(event_table),
        cmocka_unit_test(check_past_end),
        cmocka_unit_test(staging_format_by_content),
        cmocka_unit_test(mutated_tables_never_crash),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
