/* EDF+ annotations as the EDF+ specification defines them, read through the
 * public recording API and turned into a timeline. The files are built here
 * byte by byte, TALs included, so the check does not rest on any writer.
 *
 * Source: Kemp B, Olivan J. European data format 'plus' (EDF+), an EDF alike
 * standard format for the exchange of physiological data. Clin Neurophysiol
 * 2003;114:1755-1761, the section "Time-stamped Annotations Lists (TALs) in an
 * 'EDF Annotations' signal" and the section on time keeping of data records.
 * Section titles and examples are quoted from memory. What those sections
 * say, as used below:
 *  - an EDF+ file stores annotations in a signal labelled "EDF Annotations";
 *  - a TAL is: onset ('+' or '-' then seconds, decimals allowed), optionally
 *    0x15 and a duration in seconds, then 0x14, then zero or more annotation
 *    texts each closed by 0x14, then 0x00; unused bytes are 0x00;
 *  - onsets count from the start date/time in the header;
 *  - the first TAL of every data record is a time-keeping TAL: its onset is
 *    the start of that data record and its first annotation is empty
 *    ("+0\x14\x14\x00" for a record starting at the file start); in EDF+C the
 *    records are contiguous, so record r starts at r x record duration plus
 *    the start offset of record 0, which may be a fraction of a second;
 *  - texts are UTF-8. */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/recording.h"
#include "remtone/timeline.h"

/* Onsets come through EDFlib in 100-ns units: 1e-6 s covers that rounding. */
#define ONSET_TOL_S 1e-6

typedef struct tal_bytes {
    int record;          /* data record whose annotation signal holds the TAL */
    const char *bytes;   /* raw TAL bytes, 0x00 terminator included */
    size_t len;
} tal_bytes;
/* Hex escapes swallow following hex digits, so every "\x14" ends its literal. */
#define TAL(r, s) {r, s, sizeof(s) - 1}

enum { ANNOT_SAMPLES = 128 }; /* 256 bytes of annotation signal per record */

static void put_field(unsigned char *dst, size_t width, const char *text)
{
    memset(dst, ' ', width);
    size_t n = strlen(text);
    memcpy(dst, text, n < width ? n : width);
}

/* Writes an EDF+C file: one ordinary signal ("Chin", 1 sample per record,
 * zeros) and one "EDF Annotations" signal. Record r starts with the
 * time-keeping TAL "+<offset + r*record_s>\x14\x14\x00" unless tk_override
 * gives that record's onset text; then the record's TALs follow. */
static void write_edfplus(const char *path, int n_records, double record_s, double offset_s,
                          const tal_bytes *tals, size_t n_tals, const char *const *tk_override)
{
    const int ns = 2;
    size_t header = 256 * (size_t)(ns + 1);
    size_t rec_bytes = 2 + 2 * (size_t)ANNOT_SAMPLES;
    size_t total = header + rec_bytes * (size_t)n_records;
    unsigned char *out = calloc(total, 1);
    assert_non_null(out);
    char num[64];
    /* EDF+ header: identification subfields left unknown ("X"), as EDF+ allows. */
    put_field(out, 8, "0");
    put_field(out + 8, 80, "X X X X");
    put_field(out + 88, 80, "Startdate X X X X");
    put_field(out + 168, 8, "01.12.26");
    put_field(out + 176, 8, "22.00.00");
    snprintf(num, sizeof num, "%zu", header);
    put_field(out + 184, 8, num);
    put_field(out + 192, 44, "EDF+C");
    snprintf(num, sizeof num, "%d", n_records);
    put_field(out + 236, 8, num);
    snprintf(num, sizeof num, "%g", record_s);
    put_field(out + 244, 8, num);
    snprintf(num, sizeof num, "%d", ns);
    put_field(out + 252, 4, num);
    unsigned char *s = out + 256;
    const char *labels[2] = {"Chin", "EDF Annotations"};
    for (int i = 0; i < ns; i++) {
        put_field(s + 16 * i, 16, labels[i]);
        put_field(s + 16 * ns + 80 * i, 80, i == 0 ? "AgAgCl electrode" : "");
        put_field(s + 96 * ns + 8 * i, 8, i == 0 ? "uV" : "");
        put_field(s + 104 * ns + 8 * i, 8, i == 0 ? "-500" : "-1");
        put_field(s + 112 * ns + 8 * i, 8, i == 0 ? "500" : "1");
        put_field(s + 120 * ns + 8 * i, 8, "-32768");
        put_field(s + 128 * ns + 8 * i, 8, "32767");
        put_field(s + 136 * ns + 80 * i, 80, i == 0 ? "HP:10Hz LP:100Hz" : "");
        snprintf(num, sizeof num, "%d", i == 0 ? 1 : ANNOT_SAMPLES);
        put_field(s + 216 * ns + 8 * i, 8, num);
        put_field(s + 224 * ns + 32 * i, 32, "");
    }
    for (int r = 0; r < n_records; r++) {
        unsigned char *d = out + header + rec_bytes * (size_t)r + 2;
        size_t used = 0;
        char tk[64];
        if (tk_override && tk_override[r])
            snprintf(tk, sizeof tk, "%s", tk_override[r]);
        else
            snprintf(tk, sizeof tk, "+%.10g", offset_s + r * record_s);
        size_t tk_len = strlen(tk);
        memcpy(d, tk, tk_len);
        memcpy(d + tk_len, "\x14\x14\x00", 3);
        used = tk_len + 3;
        for (size_t t = 0; t < n_tals; t++) {
            if (tals[t].record != r)
                continue;
            assert_true(used + tals[t].len <= 2 * (size_t)ANNOT_SAMPLES);
            memcpy(d + used, tals[t].bytes, tals[t].len);
            used += tals[t].len;
        }
    }
    rt_test_write_file(path, out, total);
    free(out);
}

static rt_recording *open_ok(const char *path)
{
    rt_error err;
    rt_error_clear(&err);
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s: %s", path, err.message);
    return rec;
}

/* The index of the annotation with this text, failing when there is none. */
static const rt_annotation *find_text(const rt_recording *rec, const char *text, size_t *index)
{
    for (size_t i = 0; i < rt_recording_annotation_count(rec); i++) {
        const rt_annotation *a = rt_recording_annotation(rec, i);
        if (strcmp(a->text, text) == 0) {
            if (index)
                *index = i;
            return a;
        }
    }
    fail_msg("no annotation \"%s\"", text);
    return NULL;
}

static void assert_close(double got, double want, double tol)
{
    if (!(fabs(got - want) <= tol))
        fail_msg("got %.9f, expected %.9f (tolerance %g)", got, want, tol);
}

static const char *file_in(const char *dir, const char *name)
{
    static char path[4400];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    return path;
}

/* ---- the TAL examples ---- */

static void tal_examples_of_the_spec(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("edfplus_tal");
    const tal_bytes tals[] = {
        /* TALs section: one onset, two annotations (from memory). */
        TAL(0, "+180\x14" "Lights off\x14" "Close door\x14" "\x00"),
        /* TALs section: onset with a duration (from memory). */
        TAL(1, "+1800.2\x15" "25.5\x14" "Apnea\x14" "\x00"),
        /* TALs section: a negative onset precedes the file start (from memory). */
        TAL(0, "-0.065\x14" "Pulse before start\x14" "\x00"),
        /* TALs section: texts are UTF-8. */
        TAL(2, "+60\x14" "\xc3\x89lectrode d\xc3\xa9plac\xc3\xa9" "e\x14" "\x00"),
    };
    const char *path = file_in(dir, "tal.edf");
    /* 62 records of 30 s: 1860 s. */
    write_edfplus(path, 62, 30.0, 0.0, tals, sizeof tals / sizeof tals[0], NULL);
    rt_recording *rec = open_ok(path);
    assert_int_equal(rt_recording_kind(rec), RT_FILE_EDFPLUS);
    assert_close(rt_recording_duration_s(rec), 1860.0, ONSET_TOL_S);
    /* Time-keeping TALs (one per record, 62 of them) carry no annotation:
     * only the five texts above come back. */
    assert_int_equal(rt_recording_annotation_count(rec), 5);

    size_t i_off, i_door;
    const rt_annotation *a = find_text(rec, "Lights off", &i_off);
    assert_close(a->onset_s, 180.0, ONSET_TOL_S);
    assert_true(a->duration_s < 0); /* no 0x15 field: no duration */
    a = find_text(rec, "Close door", &i_door);
    assert_close(a->onset_s, 180.0, ONSET_TOL_S); /* both annotations share the TAL's onset */
    assert_true(i_door == i_off + 1);             /* and keep their order */

    a = find_text(rec, "Apnea", NULL);
    assert_close(a->onset_s, 1800.2, ONSET_TOL_S);
    assert_close(a->duration_s, 25.5, ONSET_TOL_S);

    /* EDFlib accepts the negative onset; onsets are ordered, so it is first. */
    a = rt_recording_annotation(rec, 0);
    assert_string_equal(a->text, "Pulse before start");
    assert_close(a->onset_s, -0.065, ONSET_TOL_S);

    a = find_text(rec, "\xc3\x89lectrode d\xc3\xa9plac\xc3\xa9" "e", NULL);
    assert_close(a->onset_s, 60.0, ONSET_TOL_S);
    assert_null(rt_recording_annotation(rec, 5));
    rt_recording_close(rec);
}

static void subsecond_start_of_first_record(void **state)
{
    (void)state;
    /* Time-keeping section: record 0's time-keeping onset "+0.2" says the
     * first sample comes 0.2 s after the header's start time, and TAL onsets
     * count from that header time (from memory). recording.h counts onsets
     * from the first sample, so "+180" is 179.8 s into the recording. */
    const char *dir = rt_test_dir("edfplus_subsecond");
    const tal_bytes tals[] = {TAL(0, "+180\x14" "Lights off\x14" "\x00")};
    const char *path = file_in(dir, "sub.edf");
    write_edfplus(path, 10, 30.0, 0.2, tals, 1, NULL);
    rt_recording *rec = open_ok(path);
    assert_close(rt_recording_start(rec).subsecond, 0.2, ONSET_TOL_S);
    assert_close(find_text(rec, "Lights off", NULL)->onset_s, 179.8, ONSET_TOL_S);
    rt_recording_close(rec);
}

static void continuous_records_must_be_contiguous(void **state)
{
    (void)state;
    /* Time-keeping section: in EDF+C, record r starts at r x 30 s here; a
     * time-keeping TAL saying record 1 starts at 60 s contradicts "+C". */
    const char *dir = rt_test_dir("edfplus_gap");
    const char *const tk[] = {NULL, "+60", NULL, NULL};
    const char *path = file_in(dir, "gap.edf");
    write_edfplus(path, 4, 30.0, 0.0, NULL, 0, tk);
    rt_error err;
    rt_error_clear(&err);
    rt_recording *rec = (rt_recording *)&err; /* must be reset to NULL */
    assert_int_equal(rt_recording_open(path, &rec, &err), RT_ERR_RECORDING);
    assert_null(rec);
    assert_int_equal(err.status, RT_ERR_RECORDING);
    assert_non_null(strstr(err.message, "gap.edf"));
}

/* ---- stages and events from annotations ---- */

static const tal_bytes NIGHT_TALS[] = {
    /* Stage annotations as EDF+ standard texts (from memory), without and with durations. */
    TAL(0, "+0\x14" "Sleep stage W\x14" "\x00"),
    TAL(0, "+30\x14" "Lights off\x14" "\x00"),
    TAL(2, "+60\x15" "30\x14" "Sleep stage 1\x14" "\x00"),
    TAL(3, "+90\x14" "Sleep stage 2\x14" "\x00"),
    TAL(3, "+100\x15" "12\x14" "Obstructive apnea\x14" "\x00"),
    TAL(4, "+150.0004\x14" "Sleep stage R\x14" "\x00"), /* 0.4 ms off the grid: accepted */
    TAL(5, "+160\x15" "3\x14" "Arousal\x14" "\x00"),
    TAL(5, "+170\x14" "Technician note\x14" "\x00"),
    /* Negative onsets (TALs section): an arousal from -2 s to +3 s overlaps
     * the recording; a snore from -10 s to -5 s does not. */
    TAL(0, "-2\x15" "5\x14" "Arousal\x14" "\x00"),
    TAL(0, "-10\x15" "5\x14" "Snoring\x14" "\x00"),
};

static void stages_and_events_from_annotations(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("edfplus_night");
    char path[4400];
    snprintf(path, sizeof path, "%s", file_in(dir, "night.edf"));
    write_edfplus(path, 8, 30.0, 0.0, NIGHT_TALS, sizeof NIGHT_TALS / sizeof NIGHT_TALS[0], NULL);
    rt_recording *rec = open_ok(path);
    rt_timeline *tl = rt_test_timeline();
    rt_error err;
    rt_error_clear(&err);
    if (rt_timeline_load_annotations(tl, rec, NULL, true, true, &err) != RT_OK)
        fail_msg("%s", err.message);
    /* W until the next stage (2 epochs), N1 for its 30-s duration, N2 until
     * R, and the last stage annotation lasts one epoch. */
    static const unsigned char want[] = {RT_STAGE_W, RT_STAGE_W, RT_STAGE_N1, RT_STAGE_N2,
                                         RT_STAGE_N2, RT_STAGE_R};
    assert_int_equal(tl->n_epochs, sizeof want);
    assert_memory_equal(tl->stages, want, sizeof want);
    /* The technician's note is neither; the snore ended before the file start. */
    assert_int_equal(tl->n_events, 3);
    assert_int_equal(tl->events[0].type, RT_EVENT_AROUSAL); /* clipped to the recorded part */
    assert_close(tl->events[0].onset_s, 0.0, ONSET_TOL_S);
    assert_close(tl->events[0].duration_s, 3.0, ONSET_TOL_S);
    assert_int_equal(tl->events[1].type, RT_EVENT_APNEA);
    assert_close(tl->events[1].onset_s, 100.0, ONSET_TOL_S);
    assert_close(tl->events[1].duration_s, 12.0, ONSET_TOL_S);
    assert_int_equal(tl->events[2].type, RT_EVENT_AROUSAL);
    assert_close(tl->events[2].onset_s, 160.0, ONSET_TOL_S);
    assert_close(tl->lights_off_s, 30.0, ONSET_TOL_S);
    assert_int_equal(rt_timeline_check(tl, rt_recording_duration_s(rec), &err), RT_OK);
    rt_timeline_free(tl);

    /* Stages only: the events are left out. */
    tl = rt_test_timeline();
    assert_int_equal(rt_timeline_load_annotations(tl, rec, NULL, true, false, &err), RT_OK);
    assert_int_equal(tl->n_events, 0);
    assert_int_equal(tl->n_epochs, sizeof want);
    rt_timeline_free(tl);
    rt_recording_close(rec);

    /* The same file given as a staging file is recognised by its header. */
    tl = rt_test_timeline();
    if (rt_timeline_load_staging(tl, path, NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    assert_memory_equal(tl->stages, want, sizeof want);
    assert_int_equal(tl->n_events, 3);
    rt_timeline_free(tl);
}

/* Loads stages from a file with these TALs; returns the status and fills err. */
static rt_status load_night(const char *dir, const char *name, const tal_bytes *tals, size_t n,
                            int n_records, rt_error *err)
{
    char path[4400];
    snprintf(path, sizeof path, "%s", file_in(dir, name));
    write_edfplus(path, n_records, 30.0, 0.0, tals, n, NULL);
    rt_recording *rec = open_ok(path);
    rt_timeline *tl = rt_test_timeline();
    rt_error_clear(err);
    rt_status st = rt_timeline_load_annotations(tl, rec, NULL, true, true, err);
    if (st != RT_OK)
        assert_int_equal(tl->n_epochs, 0); /* failed loads leave nothing behind */
    else
        st = rt_timeline_check(tl, rt_recording_duration_s(rec), err);
    rt_timeline_free(tl);
    rt_recording_close(rec);
    return st;
}

static void annotation_staging_errors(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("edfplus_errors");
    rt_error err;

    /* Off the grid by 15.5 s: annotation 2 in onset order. */
    const tal_bytes off[] = {TAL(0, "+0\x14" "Sleep stage W\x14" "\x00"),
                             TAL(1, "+45.5\x14" "Sleep stage 2\x14" "\x00")};
    assert_int_equal(load_night(dir, "off.edf", off, 2, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "off.edf: annotation 2"));
    assert_non_null(strstr(err.message, "45.5 s is not on the 30-s epoch grid"));

    /* 2 ms off is more than the 1 ms allowed. */
    const tal_bytes near[] = {TAL(0, "+30.002\x14" "Sleep stage W\x14" "\x00")};
    assert_int_equal(load_night(dir, "near.edf", near, 1, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "annotation 1"));
    assert_non_null(strstr(err.message, "30.002"));

    /* Durations must be whole epochs. */
    const tal_bytes dur[] = {TAL(0, "+0\x15" "45\x14" "Sleep stage W\x14" "\x00")};
    assert_int_equal(load_night(dir, "dur.edf", dur, 1, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "45 s is not a whole number"));

    /* A duration running into the next stage annotation. */
    const tal_bytes overlap[] = {TAL(0, "+0\x15" "90\x14" "Sleep stage W\x14" "\x00"),
                                 TAL(1, "+60\x14" "Sleep stage 1\x14" "\x00")};
    assert_int_equal(load_night(dir, "overlap.edf", overlap, 2, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "annotation 1"));
    assert_non_null(strstr(err.message, "overlaps annotation 2"));

    /* Texts about a stage that we cannot read are listed, not dropped. */
    const tal_bytes unknown[] = {TAL(0, "+0\x14" "Sleep stage W\x14" "\x00"),
                                 TAL(0, "+30\x14" "Sleep stage N\x14" "\x00"),
                                 TAL(1, "+60\x14" "Stage X\x14" "\x00")};
    assert_int_equal(load_night(dir, "unknown.edf", unknown, 3, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "\"Sleep stage N\" (annotation 2)"));
    assert_non_null(strstr(err.message, "\"Stage X\" (annotation 3)"));

    /* No stage annotation at all: empty staging. */
    const tal_bytes none[] = {TAL(0, "+30\x14" "Lights off\x14" "\x00")};
    assert_int_equal(load_night(dir, "none.edf", none, 1, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "staging is empty"));

    /* Staging past the end of a 120-s recording: the W annotation at 90 s
     * lasts 60 s, one epoch beyond the last record. */
    const tal_bytes past[] = {TAL(0, "+0\x14" "Sleep stage 2\x14" "\x00"),
                              TAL(3, "+90\x15" "60\x14" "Sleep stage W\x14" "\x00")};
    assert_int_equal(load_night(dir, "past.edf", past, 2, 4, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "30 s (1 epoch of 30 s) past the end"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(tal_examples_of_the_spec),
        cmocka_unit_test(subsecond_start_of_first_record),
        cmocka_unit_test(continuous_records_must_be_contiguous),
        cmocka_unit_test(stages_and_events_from_annotations),
        cmocka_unit_test(annotation_staging_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
