/* remtone's own reading of the EDF+/BDF+ annotation signals (src/io/edf_tal.c,
 * src/io/recording.c) against the reference, EDFlib 1.23 (Debian libedf-dev),
 * opened with EDFLIB_READ_ALL_ANNOTATIONS on the same file: every annotation
 * must be equal field by field (onset and duration to the bit, text to the
 * byte, in the order remtone sorts them), and remtone must refuse exactly
 * the files EDFlib refuses, with a message naming the data record and the
 * byte offset.
 *
 * The files come from EDFlib's own writer, from remtone's writer
 * (src/io/edf_writer.c) and, for what neither writes, byte by byte from the
 * EDF+ specification (Kemp & Olivan 2003, Clin Neurophysiol 114:1755-1761,
 * the sections on TALs and on the time-keeping TAL): several annotations per
 * TAL and per record, durations, negative onsets, texts longer than 512
 * bytes, UTF-8 and other bytes in texts, two annotation signals, a
 * subsecond start, records without annotations, and malformed TALs. Seeded
 * random files and random byte changes of valid files add the cases nobody
 * thought of.
 *
 * One difference is intended: remtone refuses an onset or a duration with
 * more than 11 digits of whole seconds (over 3000 years), where EDFlib's
 * 64-bit arithmetic overflows (its value is then meaningless); EDFlib accepts
 * such a file. */
#include "support.h"

#include <edflib.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "io/edf_writer.h"
#include "remtone/recording.h"

enum { MAX_PARTS = 8, ORDINARY_SPR = 16, RANDOM_FILES = 40, MUTANTS = 400 };

/* ---- files byte by byte ---------------------------------------------------- */

/* Bytes for one annotation signal of one record: after the time-keeping TAL
 * (signal 0), or instead of it (replace), or the whole of signal 1. */
typedef struct tal_part {
    int record, signal;
    const char *bytes;
    size_t len;
    bool replace;
} tal_part;

/* sizeof counts the literal's embedded 0x00 bytes, not its terminator */
#define AFTER(r, s, lit) {(r), (s), (lit), sizeof(lit) - 1, false}
#define INSTEAD(r, s, lit) {(r), (s), (lit), sizeof(lit) - 1, true}

typedef struct tal_case {
    const char *name;
    bool bdf;
    const char *order;       /* file order: 'o' an ordinary signal, 'a' an annotation signal */
    int annotation_spr;      /* samples per record of each annotation signal */
    const char *record_s;    /* header text of the record duration */
    long long record_units;  /* the same in 100-ns units */
    long long start_units;   /* first record's start after the header's start time */
    int n_records;
    tal_part parts[MAX_PARTS];
    const char *refusal;     /* NULL: both read it; else a fragment of remtone's message */
    int refused_record;      /* the data record the message names (from 1) */
} tal_case;

/* Seconds in 100-ns units as an EDF+ onset: "+12", "+0.25", "+3.0000001". */
static int onset_text(long long units, char *out, size_t cap)
{
    int n = snprintf(out, cap, "+%lld.%07lld", units / 10000000, units % 10000000);
    while (out[n - 1] == '0')
        out[--n] = '\0';
    if (out[n - 1] == '.')
        out[--n] = '\0';
    return n;
}

static int count_annotation_signals(const char *order)
{
    int n = 0;
    for (const char *p = order; *p; p++)
        n += *p == 'a';
    return n;
}

static void fill_annotation(const tal_case *c, int r, int a, unsigned char *at, size_t bytes)
{
    size_t n = 0;
    const tal_part *instead = NULL;
    for (int i = 0; i < MAX_PARTS && c->parts[i].bytes; i++)
        if (c->parts[i].record == r && c->parts[i].signal == a && c->parts[i].replace)
            instead = &c->parts[i];
    memset(at, 0, bytes);
    if (instead) {
        assert_true(instead->len <= bytes);
        memcpy(at, instead->bytes, instead->len);
        return;
    }
    if (a == 0) {
        char tal[48];
        int len = onset_text(c->start_units + r * c->record_units, tal, sizeof tal);
        memcpy(tal + len, "\x14\x14\x00", 3);
        memcpy(at, tal, (size_t)len + 3);
        n = (size_t)len + 3;
    }
    for (int i = 0; i < MAX_PARTS && c->parts[i].bytes; i++)
        if (c->parts[i].record == r && c->parts[i].signal == a) {
            assert_true(n + c->parts[i].len <= bytes);
            memcpy(at + n, c->parts[i].bytes, c->parts[i].len);
            n += c->parts[i].len;
        }
}

/* Writes the case as dir/name.edf; returns its path (static buffer) and the
 * bytes in *data, *size (the caller frees *data). */
static const char *write_case(const tal_case *c, unsigned char **data, size_t *size)
{
    static char path[4400];
    int ns = (int)strlen(c->order), width = c->bdf ? 3 : 2;
    size_t record = 0;
    for (int k = 0; k < ns; k++)
        record += (size_t)(c->order[k] == 'a' ? c->annotation_spr : ORDINARY_SPR) * (size_t)width;
    size_t header = 256 * (size_t)(ns + 1), n = header + record * (size_t)c->n_records;
    unsigned char *b = calloc(n, 1);
    assert_non_null(b);
    /* EDF+ subfields as EDFlib checks them (Kemp & Olivan 2003, 2.1.3) */
    rt_test_edf_put_main(b, &(rt_test_edf_main){
        .bdf = c->bdf, .patient = "X X X Fictional_Sleeper", .recording = "Startdate 02-DEC-2026 X X X",
        .date = "02.12.26", .time = "22.00.00", .reserved = c->bdf ? "BDF+C" : "EDF+C",
        .n_records = c->n_records, .record_s = c->record_s, .ns = ns});
    for (int k = 0; k < ns; k++) {
        bool ann = c->order[k] == 'a';
        char spr[16];
        snprintf(spr, sizeof spr, "%d", ann ? c->annotation_spr : ORDINARY_SPR);
        const char *text[10] = {ann ? (c->bdf ? "BDF Annotations" : "EDF Annotations") : "Chin",
                                ann ? "" : "AgAgCl electrode", ann ? "" : "uV", "-500", "500",
                                c->bdf ? "-8388608" : "-32768", c->bdf ? "8388607" : "32767", "", spr, ""};
        for (int field = 0; field < 10; field++)
            rt_test_edf_put_signal(b, ns, field, k, text[field]);
    }
    unsigned char *at = b + header;
    for (int r = 0; r < c->n_records; r++)
        for (int k = 0, a = 0; k < ns; k++) {
            size_t bytes = (size_t)(c->order[k] == 'a' ? c->annotation_spr : ORDINARY_SPR) * (size_t)width;
            if (c->order[k] == 'a')
                fill_annotation(c, r, a++, at, bytes);
            else
                memset(at, r & 0x7f, bytes);
            at += bytes;
        }
    snprintf(path, sizeof path, "%s/%s.edf", rt_test_dir(c->name), c->name);
    rt_test_write_file(path, b, n);
    *data = b;
    *size = n;
    return path;
}

/* ---- the comparison --------------------------------------------------------- */

typedef struct edflib_annotation {
    struct edf_annotation_struct a;
    size_t index;
} edflib_annotation;

/* remtone's order: by onset, ties in file order. */
static int by_onset(const void *x, const void *y)
{
    const edflib_annotation *a = x, *b = y;
    if (a->a.onset != b->a.onset)
        return a->a.onset < b->a.onset ? -1 : 1;
    return (a->index > b->index) - (a->index < b->index);
}

typedef struct outcome {
    bool remtone_ok, edflib_ok;
    size_t n;               /* annotations, when both read the file */
    char message[RT_ERROR_MESSAGE_MAX];
    rt_status status;
} outcome;

static bool equal_bits(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

/* Opens path with both; when both read it, fails the test on the first
 * field that differs. */
static outcome compare_file(const char *path)
{
    outcome o = {0};
    rt_error err;
    rt_recording *rec = NULL;
    o.status = rt_recording_open(path, &rec, &err);
    o.remtone_ok = o.status == RT_OK;
    if (!o.remtone_ok)
        snprintf(o.message, sizeof o.message, "%s", err.message);
    struct edf_hdr_struct h;
    o.edflib_ok = edfopen_file_readonly(path, &h, EDFLIB_READ_ALL_ANNOTATIONS) == 0;
    if (o.remtone_ok && o.edflib_ok) {
        size_t n = (size_t)h.annotations_in_file;
        if (rt_recording_annotation_count(rec) != n)
            fail_msg("%s: remtone reads %zu annotations, EDFlib %zu", path, rt_recording_annotation_count(rec), n);
        edflib_annotation *e = calloc(n ? n : 1, sizeof *e);
        assert_non_null(e);
        for (size_t i = 0; i < n; i++) {
            assert_int_equal(edf_get_annotation(h.handle, (int)i, &e[i].a), 0);
            e[i].index = i;
        }
        qsort(e, n, sizeof *e, by_onset);
        for (size_t i = 0; i < n; i++) {
            const rt_annotation *mine = rt_recording_annotation(rec, i);
            double onset = (double)e[i].a.onset / (double)EDFLIB_TIME_DIMENSION;
            double duration = e[i].a.duration[0] ? (double)e[i].a.duration_l / (double)EDFLIB_TIME_DIMENSION : -1.0;
            if (!equal_bits(mine->onset_s, onset) || !equal_bits(mine->duration_s, duration) ||
                strcmp(mine->text, e[i].a.annotation) != 0)
                fail_msg("%s: annotation %zu: remtone %.17g s, %.17g s, \"%s\"; EDFlib %.17g s, %.17g s "
                         "(\"%s\"), \"%s\"", path, i, mine->onset_s, mine->duration_s, mine->text, onset,
                         duration, e[i].a.duration, e[i].a.annotation);
        }
        /* the subsecond start EDFlib reports, to the bit */
        double subsecond = (double)h.starttime_subsecond / (double)EDFLIB_TIME_DIMENSION;
        assert_true(equal_bits(rt_recording_start(rec).subsecond, subsecond));
        o.n = n;
        free(e);
    }
    if (o.edflib_ok)
        edfclose_file(h.handle);
    rt_recording_close(rec);
    return o;
}

static bool stricter_by_design(const outcome *o)
{
    return !o->remtone_ok && o->edflib_ok && strstr(o->message, "more than 11 digits of whole seconds");
}

/* Both must agree on reading the file; a refusal must be remtone's own
 * (RT_ERR_RECORDING) and name a data record and a byte offset. */
static outcome check_agreement(const char *path)
{
    outcome o = compare_file(path);
    if (stricter_by_design(&o))
        return o;
    if (o.remtone_ok != o.edflib_ok)
        fail_msg("%s: remtone %s it (%s), EDFlib %s it", path, o.remtone_ok ? "reads" : "refuses", o.message,
                 o.edflib_ok ? "reads" : "refuses");
    if (!o.remtone_ok) {
        assert_int_equal(o.status, RT_ERR_RECORDING);
        if (!strstr(o.message, "data record ") || !strstr(o.message, "byte offset "))
            fail_msg("%s: the refusal names no data record and byte offset: %s", path, o.message);
    }
    return o;
}

static void run_case(const tal_case *c, size_t want_annotations)
{
    unsigned char *data;
    size_t size;
    const char *path = write_case(c, &data, &size);
    free(data);
    outcome o = check_agreement(path);
    if (!c->refusal) {
        if (!o.remtone_ok)
            fail_msg("%s: refused: %s", c->name, o.message);
        assert_int_equal(o.n, want_annotations);
        return;
    }
    if (o.remtone_ok)
        fail_msg("%s: read, but EDF+ forbids it (%s)", c->name, c->refusal);
    char record[48];
    snprintf(record, sizeof record, "data record %d,", c->refused_record);
    if (!strstr(o.message, c->refusal) || !strstr(o.message, record))
        fail_msg("%s: message lacks \"%s\" or \"%s\": %s", c->name, c->refusal, record, o.message);
    printf("# %s: %s\n", c->name, o.message);
}

/* ---- files both read alike ---------------------------------------------------- */

static void several_annotations_durations_and_signs(void **state)
{
    (void)state;
    /* Kemp & Olivan 2003: several TALs per record, several texts per TAL,
     * optional durations, onsets before the file start ("-"), and a TAL
     * holding an onset alone (EDFlib reads nothing from it) */
    tal_case c = {.name = "tal_several", .order = "oa", .annotation_spr = 60, .record_s = "1",
                  .record_units = 10000000, .n_records = 6,
                  .parts = {AFTER(0, 0, "+0\x15" "30\x14Lights off\x14\x00"),
                            AFTER(1, 0, "+1.5\x14" "Arousal\x14Snore\x14\x00+1.75\x15" "0.25\x14Leg\x14\x00"),
                            AFTER(2, 0, "-3.25\x14" "Before start\x14\x00+2\x14\x00"),
                            AFTER(4, 0, "+4.0000001\x15" "0.0000002\x14tiny\x14\x00"),
                            AFTER(5, 0, "+100\x15" "1000.5\x14" "after end\x14\x14\x00")}};
    run_case(&c, 8);
}

static void texts_utf8_long_and_raw(void **state)
{
    (void)state;
    static char long_tal[700];
    /* a 600-byte text: EDFlib keeps 512 bytes (EDFLIB_MAX_ANNOTATION_LEN) */
    int n = snprintf(long_tal, sizeof long_tal, "+2.5\x14");
    memset(long_tal + n, 'x', 600);
    memcpy(long_tal + n + 600, "\x14\x00", 2);
    tal_case c = {.name = "tal_texts", .order = "ao", .annotation_spr = 400, .record_s = "2",
                  .record_units = 20000000, .n_records = 3,
                  .parts = {AFTER(0, 0, "+0.5\x14\xc3\xa9veil \xce\xbc\xe2\x86\x92\x14\x00"),
                            /* bytes that are not UTF-8 stay as written: the readers of
                             * rt_annotation clean them (src/common/text.h) */
                            AFTER(1, 0, "+2\x14\xff\xfe raw \x01\x7f\x14\x00"),
                            {2, 0, long_tal, (size_t)n + 602, false}}};
    run_case(&c, 3);
}

static void two_annotation_signals_subsecond_start(void **state)
{
    (void)state;
    /* the first record starts 0.25 s after the header's start time: every
     * onset counts from there (EDF+ time-keeping TAL); the second annotation
     * signal holds no time-keeping TAL, may start with one 0x00 byte and may
     * hold empty texts, all as EDFlib reads them */
    tal_case c = {.name = "tal_two_signals", .order = "aoa", .annotation_spr = 40, .record_s = "0.5",
                  .record_units = 5000000, .start_units = 2500000, .n_records = 5,
                  .parts = {AFTER(0, 1, "+0.75\x14Second signal\x14\x00"),
                            AFTER(1, 0, "+0.9\x14" "First\x14\x00"),
                            AFTER(2, 1, "\x00+1.5\x14\x14\x00"),
                            AFTER(3, 1, "+1.8\x15" "2\x14" "a\x14" "b\x14\x00+1.9\x14" "c\x14\x00")}};
    run_case(&c, 6);
}

static void bdf_plus_and_no_annotations(void **state)
{
    (void)state;
    tal_case c = {.name = "tal_bdfplus", .bdf = true, .order = "oa", .annotation_spr = 20, .record_s = "0.25",
                  .record_units = 2500000, .start_units = 9999999, .n_records = 8,
                  .parts = {AFTER(6, 0, "+1.6\x14" "BDF text\x14\x00")}};
    run_case(&c, 1);
    tal_case none = {.name = "tal_none", .order = "ao", .annotation_spr = 8, .record_s = "30",
                     .record_units = 300000000, .n_records = 4};
    run_case(&none, 0);
}

static void numbers_at_the_edges(void **state)
{
    (void)state;
    /* seven decimals are kept, further ones dropped, not rounded; a duration
     * is read from its first 15 characters; leading zeros; "-0" */
    tal_case c = {.name = "tal_numbers", .order = "oa", .annotation_spr = 120, .record_s = "1",
                  .record_units = 10000000, .n_records = 3,
                  .parts = {AFTER(0, 0, "+0.123456789\x15" "1.99999999\x14" "cut\x14\x00"),
                            AFTER(1, 0, "+0001.5\x15" "12345678901.2345678\x14long duration\x14\x00"),
                            AFTER(2, 0, "-0\x14zero\x14\x00+99999999999.9999999\x14" "far\x14\x00")}};
    run_case(&c, 4);
}

static void writers_edflib_and_remtone(void **state)
{
    (void)state;
    /* EDFlib's writer, EDF+ and BDF+, a subsecond start, two annotation
     * signals; onsets and durations in its units of 100 us (edflib.h, 1.23) */
    for (int bdf = 0; bdf < 2; bdf++) {
        char path[4400];
        snprintf(path, sizeof path, "%s/w.%s", rt_test_dir(bdf ? "tal_edflib_bdf" : "tal_edflib_edf"),
                 bdf ? "bdf" : "edf");
        int h = edfopen_file_writeonly(path, bdf ? EDFLIB_FILETYPE_BDFPLUS : EDFLIB_FILETYPE_EDFPLUS, 1);
        assert_true(h >= 0);
        assert_int_equal(edf_set_samplefrequency(h, 0, 100), 0);
        assert_int_equal(edf_set_physical_maximum(h, 0, 500), 0);
        assert_int_equal(edf_set_physical_minimum(h, 0, -500), 0);
        assert_int_equal(edf_set_digital_maximum(h, 0, bdf ? 8388607 : 32767), 0);
        assert_int_equal(edf_set_digital_minimum(h, 0, bdf ? -8388608 : -32768), 0);
        assert_int_equal(edf_set_label(h, 0, "Chin"), 0);
        assert_int_equal(edf_set_physical_dimension(h, 0, "uV"), 0);
        assert_int_equal(edf_set_subsecond_starttime(h, 3750000), 0);
        assert_int_equal(edf_set_number_of_annotation_signals(h, 2), 0);
        double buf[100] = {0};
        for (int r = 0; r < 20; r++)
            assert_int_equal(edfwrite_physical_samples(h, buf), 0);
        const char *texts[] = {"Lights off", "\xc3\x89veil", "Arousal", "Leg movement", "Apnea"};
        for (int i = 0; i < 30; i++)
            assert_int_equal(edfwrite_annotation_utf8(h, 3217LL * i, i % 3 ? 5000LL * (i % 7) : -1, texts[i % 5]),
                             0);
        assert_int_equal(edfclose_file(h), 0);
        outcome o = check_agreement(path);
        assert_true(o.remtone_ok);
        assert_int_equal(o.n, 30);
    }
    /* remtone's own writer (the synthetic nights and the annotation output) */
    char path[4400];
    snprintf(path, sizeof path, "%s/own.edf", rt_test_dir("tal_own_writer"));
    rt_edf_writer_signal sig = {.label = "Chin", .unit = "uV", .transducer = "", .prefilter = "", .rate_hz = 50,
                                .phys_min = -500, .phys_max = 500, .dig_min = -32768, .dig_max = 32767};
    rt_edf_writer_header head = {.year = 2026, .month = 12, .day = 2, .hour = 23, .subsecond = 0.5};
    rt_edf_writer *w = NULL;
    rt_error err;
    assert_int_equal(rt_edf_writer_begin(&w, path, &head, &sig, 1, &err), RT_OK);
    for (int i = 0; i < 12; i++)
        assert_int_equal(rt_edf_writer_annotation(w, 2.5 * i, i % 2 ? 1.25 : -1, i % 2 ? "N2" : "R", &err), RT_OK);
    double zeros[50] = {0};
    const double *samples[1] = {zeros};
    for (int r = 0; r < 40; r++)
        assert_int_equal(rt_edf_writer_record(w, samples, &err), RT_OK);
    assert_int_equal(rt_edf_writer_finish(w, &err), RT_OK);
    outcome o = check_agreement(path);
    assert_true(o.remtone_ok);
    assert_int_equal(o.n, 12);
}

/* ---- malformed files ---------------------------------------------------------- */

static void malformed_refused_where_edflib_refuses(void **state)
{
    (void)state;
    /* each breaks one rule of the EDF+ TAL sections (Kemp & Olivan 2003) */
    static char unterminated[112]; /* the whole signal (56 samples), no 0x00 at its end */
    memset(unterminated, 'a', sizeof unterminated);
    memcpy(unterminated, "+4\x14\x14\x00+4\x14", 8);
    const tal_case cases[] = {
        {.name = "bad_time_keeping", .refusal = "onset \"+x.y\" is not", .refused_record = 4,
         .parts = {INSTEAD(3, 0, "+x.y\x14\x14\x00")}},
        {.name = "bad_first_time_keeping", .refusal = "no time-keeping TAL", .refused_record = 1,
         .parts = {INSTEAD(0, 0, "Lights\x00")}},
        {.name = "time_keeping_not_empty", .refusal = "followed by 0x41, not by 0x14 0x14", .refused_record = 3,
         .parts = {INSTEAD(2, 0, "+2\x14" "A\x14\x00")}},
        {.name = "missing_14_00", .refusal = "a TAL ends with 0x74 0x00", .refused_record = 2,
         .parts = {AFTER(1, 0, "+1.5\x14text\x00")}},
        {.name = "not_contiguous", .refusal = "it should be 5 s", .refused_record = 6,
         .parts = {INSTEAD(5, 0, "+6\x14\x14\x00")}},
        {.name = "first_record_late", .refusal = "the first data record starts at 1.5 s", .refused_record = 1,
         .parts = {INSTEAD(0, 0, "+1.5\x14\x14\x00")}},
        {.name = "garbage_after_tals", .refusal = "byte 0x6a after the end of the TALs", .refused_record = 3,
         .parts = {AFTER(2, 0, "\x00junk")}},
        {.name = "onset_without_sign", .refusal = "onset \"3\" is not \"+\" or \"-\"", .refused_record = 4,
         .parts = {AFTER(3, 0, "3\x14" "text\x14\x00")}},
        {.name = "duration_with_sign", .refusal = "duration \"-2\" is not seconds", .refused_record = 2,
         .parts = {AFTER(1, 0, "+1\x15-2\x14x\x14\x00")}},
        {.name = "second_duration", .refusal = "byte 0x15 (which starts a duration)", .refused_record = 2,
         .parts = {AFTER(1, 0, "+1\x15" "2\x15" "3\x14x\x14\x00")}},
        {.name = "unterminated_signal", .refusal = "ends with byte 0x61, not 0x00", .refused_record = 5,
         .parts = {{4, 0, unterminated, sizeof unterminated, true}}},
        {.name = "bad_second_signal", .refusal = "onset \"+\" is not", .refused_record = 2,
         .order = "aoa", .parts = {AFTER(1, 1, "+\x14x\x14\x00")}},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tal_case c = cases[i];
        c.order = c.order ? c.order : "oa";
        c.annotation_spr = 56;
        c.record_s = "1";
        c.record_units = 10000000;
        c.n_records = 8;
        run_case(&c, 0);
    }
}

/* The one intended difference (see the top of this file): EDFlib reads a
 * 12-digit onset, remtone refuses it. */
static void stricter_than_edflib(void **state)
{
    (void)state;
    tal_case c = {.name = "tal_huge_onset", .order = "oa", .annotation_spr = 40, .record_s = "1",
                  .record_units = 10000000, .n_records = 2,
                  .parts = {AFTER(1, 0, "+123456789012\x14" "far\x14\x00")}};
    unsigned char *data;
    size_t size;
    const char *path = write_case(&c, &data, &size);
    free(data);
    outcome o = compare_file(path);
    assert_true(o.edflib_ok);
    assert_true(stricter_by_design(&o));
    assert_int_equal(o.status, RT_ERR_RECORDING);
    printf("# %s\n", o.message);
}

/* ---- random files and random changes ---------------------------------------- */

static const char *const WORDS[] = {"Lights off", "Arousal", "\xc3\x89veil", "R", "N2", "", "Leg \xe2\x86\x92",
                                    "\xff\x80 raw"};

/* One random valid TAL around the record start: 0 to 8 decimals, a duration
 * half of the time, 0 to 3 texts. */
static size_t random_tal(char *out, size_t room, long long start_units)
{
    long long units = start_units + (long long)((rt_test_uniform() - 0.3) * 1e8);
    unsigned long long a = (unsigned long long)llabs(units);
    size_t len = (size_t)snprintf(out, room, "%c%llu", units < 0 ? '-' : '+', a / 10000000);
    int decimals = (int)(rt_test_uniform() * 9);
    if (decimals > 0) {
        char fraction[16];
        snprintf(fraction, sizeof fraction, "%07llu5", a % 10000000);
        len += (size_t)snprintf(out + len, room - len, ".%.*s", decimals, fraction);
    }
    if (rt_test_uniform() < 0.5)
        len += (size_t)snprintf(out + len, room - len, "\x15%d.%d", (int)(rt_test_uniform() * 100),
                                (int)(rt_test_uniform() * 1000));
    out[len++] = 0x14;
    int texts = (int)(rt_test_uniform() * 4);
    for (int i = 0; i < texts; i++)
        len += (size_t)snprintf(out + len, room - len, "%s\x14", WORDS[(int)(rt_test_uniform() * 8)]);
    out[len++] = '\0';
    return len;
}

static void random_files_and_changes(void **state)
{
    (void)state;
    rt_test_rng_seed(rt_test_seed());
    static char tals[RANDOM_FILES][2][200];
    static const unsigned char pick[] = {0x00, 0x14, 0x15, '+', '-', '.', '0', '5', '9', 'a', 'Z', 0xff};
    static size_t where[2 * 2 * 360];
    int mutants_refused = 0, mutants_read = 0;
    for (int f = 0; f < RANDOM_FILES; f++) {
        tal_case c = {.name = "tal_random", .bdf = f % 3 == 0, .order = f % 2 ? "aoa" : "oa",
                      .annotation_spr = 120, .record_s = "1", .record_units = 10000000, .n_records = 2,
                      .start_units = (long long)(rt_test_uniform() * 1e7)};
        for (int s = 0; s < 2; s++) {
            size_t len = 0;
            int n = (int)(rt_test_uniform() * 3);
            for (int t = 0; t < n; t++)
                len += random_tal(tals[f][s] + len, sizeof tals[f][s] - len, c.start_units);
            c.parts[s] = (tal_part){1, s, tals[f][s], len, false};
        }
        if (count_annotation_signals(c.order) < 2)
            c.parts[1] = (tal_part){0};
        unsigned char *data;
        size_t size;
        const char *path = write_case(&c, &data, &size);
        outcome o = check_agreement(path);
        if (!o.remtone_ok)
            fail_msg("random file %d refused: %s", f, o.message);
        /* change one to three bytes of the TALs (or the byte after one), often
         * to a TAL byte: remtone must still read exactly what EDFlib reads,
         * or refuse exactly when EDFlib refuses */
        size_t n_where = 0, at = 256 * (strlen(c.order) + 1), width = c.bdf ? 3 : 2;
        for (int r = 0; r < c.n_records; r++)
            for (const char *k = c.order; *k; k++) {
                size_t bytes = (size_t)(*k == 'a' ? c.annotation_spr : ORDINARY_SPR) * width;
                for (size_t j = 0; j < bytes && *k == 'a'; j++)
                    if (data[at + j] || (j > 0 && data[at + j - 1]))
                        where[n_where++] = at + j;
                at += bytes;
            }
        for (int m = 0; m < MUTANTS / RANDOM_FILES; m++) {
            unsigned char *copy = malloc(size);
            assert_non_null(copy);
            memcpy(copy, data, size);
            int changes = 1 + (int)(rt_test_uniform() * 3);
            for (int i = 0; i < changes; i++) {
                copy[where[(size_t)(rt_test_uniform() * (double)n_where)]] =
                    pick[(int)(rt_test_uniform() * sizeof pick)];
            }
            rt_test_write_file(path, copy, size);
            free(copy);
            outcome mo = check_agreement(path);
            mo.remtone_ok ? mutants_read++ : mutants_refused++;
        }
        free(data);
    }
    printf("# %d random files; changed copies: %d read by both, %d refused by both\n", RANDOM_FILES, mutants_read,
           mutants_refused);
    /* both outcomes must occur, or the changes test nothing */
    assert_true(mutants_read > 0 && mutants_refused > 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(several_annotations_durations_and_signs),
        cmocka_unit_test(texts_utf8_long_and_raw),
        cmocka_unit_test(two_annotation_signals_subsecond_start),
        cmocka_unit_test(bdf_plus_and_no_annotations),
        cmocka_unit_test(numbers_at_the_edges),
        cmocka_unit_test(writers_edflib_and_remtone),
        cmocka_unit_test(malformed_refused_where_edflib_refuses),
        cmocka_unit_test(stricter_than_edflib),
        cmocka_unit_test(random_files_and_changes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
