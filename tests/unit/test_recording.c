/* The recording reader: files built byte by byte from the EDF specification
 * (Kemp et al. 1992, Electroencephalogr Clin Neurophysiol 82:391-393), EDF+
 * (Kemp & Olivan 2003, Clin Neurophysiol 114:1755-1761) and BDF (BioSemi:
 * 24-bit samples, version "\xffBIOSEMI"), plus one written by EDFlib's own
 * writer; then each header fault on its own, which must be named with its
 * field and byte offset. */
#include "support.h"

#include <edflib.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/recording.h"

enum { MAX_SIG = 6 };

typedef struct sig_spec {
    const char *label, *unit;
    double pmin, pmax;
    int dmin, dmax, spr;
} sig_spec;

typedef struct file_spec {
    bool bdf;
    const char *reserved; /* "", "EDF+C", "EDF+D", "24BIT" */
    int n_records;
    const char *record_s;
    int ns;
    sig_spec sig[MAX_SIG];
    int annot_signal;    /* index of the "EDF Annotations" signal, -1 if none */
} file_spec;

typedef struct bytes {
    unsigned char *p;
    size_t n;
} bytes;

/* Deterministic digital value of sample j (0-based over the file) of signal k. */
static int digital_value(const sig_spec *s, int k, long long j)
{
    long long span = (long long)s->dmax - s->dmin + 1;
    return (int)(s->dmin + ((j * 7919 + k * 104729) % span));
}

static double physical_value(const sig_spec *s, int d)
{
    /* EDF specification: linear map of [dmin, dmax] onto [pmin, pmax]. */
    return s->pmin + (double)(d - s->dmin) * (s->pmax - s->pmin) / (double)(s->dmax - s->dmin);
}

static void put_main_header(const file_spec *f, unsigned char *h)
{
    bool plus_patient = strcmp(f->reserved, "EDF+C") == 0 || strcmp(f->reserved, "EDF+D") == 0;
    rt_test_edf_put_main(h, &(rt_test_edf_main){
        .bdf = f->bdf, .patient = plus_patient ? "X M 02-FEB-1948 Fictional_Sleeper" : "Fictional sleeper 7",
        .recording = strncmp(f->reserved, "EDF+", 4) == 0 ? "Startdate 01-DEC-2026 X X X" : "Night 1 lab B",
        .date = "01.12.26", .time = "22.30.05", .reserved = f->reserved, .n_records = f->n_records,
        .record_s = f->record_s, .ns = f->ns});
}

static void put_signal_headers(const file_spec *f, unsigned char *h)
{
    for (int k = 0; k < f->ns; k++) {
        const sig_spec *s = &f->sig[k];
        char pmin[32], pmax[32], dmin[16], dmax[16], spr[16];
        snprintf(pmin, sizeof pmin, "%g", s->pmin);
        snprintf(pmax, sizeof pmax, "%g", s->pmax);
        snprintf(dmin, sizeof dmin, "%d", s->dmin);
        snprintf(dmax, sizeof dmax, "%d", s->dmax);
        snprintf(spr, sizeof spr, "%d", s->spr);
        const char *text[10] = {s->label, k == f->annot_signal ? "" : "AgAgCl electrode", s->unit, pmin, pmax,
                                dmin, dmax, "", spr, ""};
        for (int field = 0; field < 10; field++)
            rt_test_edf_put_signal(h, f->ns, field, k, text[field]);
    }
}

/* EDF+ annotation signal of record r: time-keeping TAL, then one annotation
 * per record, written out of onset order on purpose (record 0 holds the
 * latest one) to check the reader's sort. */
static void put_tal(unsigned char *at, int nbytes, int r, double record_s)
{
    char tal[256];
    int n = snprintf(tal, sizeof tal, "+%g%c%c%c", r * record_s, 0x14, 0x14, 0);
    if (r == 0)
        n += snprintf(tal + n, sizeof tal - (size_t)n, "+5.5%c30%cSleep stage R%c%c", 0x15, 0x14, 0x14, 0);
    else if (r == 1)
        n += snprintf(tal + n, sizeof tal - (size_t)n, "+1.25%cLights off%c%c", 0x14, 0x14, 0);
    memset(at, 0, (size_t)nbytes);
    memcpy(at, tal, (size_t)n < (size_t)nbytes ? (size_t)n : (size_t)nbytes);
}

static void put_samples(unsigned char *at, const sig_spec *s, int k, int r, int width)
{
    for (int j = 0; j < s->spr; j++) {
        int d = digital_value(s, k, (long long)r * s->spr + j);
        for (int b = 0; b < width; b++)
            at[j * width + b] = (unsigned char)(((unsigned)d >> (8 * b)) & 0xff);
    }
}

static bytes build_file(const file_spec *f)
{
    int width = f->bdf ? 3 : 2;
    size_t record = 0;
    for (int k = 0; k < f->ns; k++)
        record += (size_t)f->sig[k].spr * (size_t)width;
    size_t header = 256 * (size_t)(f->ns + 1);
    bytes b = {calloc(header + record * (size_t)f->n_records, 1), header + record * (size_t)f->n_records};
    assert_non_null(b.p);
    put_main_header(f, b.p);
    put_signal_headers(f, b.p);
    unsigned char *at = b.p + header;
    for (int r = 0; r < f->n_records; r++)
        for (int k = 0; k < f->ns; k++) {
            if (k == f->annot_signal)
                put_tal(at, f->sig[k].spr * width, r, atof(f->record_s));
            else
                put_samples(at, &f->sig[k], k, r, width);
            at += (size_t)f->sig[k].spr * (size_t)width;
        }
    return b;
}

static const char *write_bytes(const char *name, const bytes *b, size_t len)
{
    static char path[4400];
    snprintf(path, sizeof path, "%s/%s", rt_test_dir(name), "rec.edf");
    rt_test_write_file(path, b->p, len);
    return path;
}

/* A plain EDF with a uV, an mV and a non-voltage channel, 2-s records. */
static file_spec plain_edf(void)
{
    return (file_spec){.bdf = false, .reserved = "", .n_records = 3, .record_s = "2", .ns = 3,
                       .annot_signal = -1,
                       .sig = {{"Chin", "uV", -500, 500, -32768, 32767, 512},
                               {"Leg R", "mV", -2, 2, -2048, 2047, 100},
                               {"Temp", "degC", 30, 40, 0, 1000, 2}}};
}

static file_spec edfplus(const char *reserved)
{
    return (file_spec){.bdf = false, .reserved = reserved, .n_records = 3, .record_s = "1", .ns = 2,
                       .annot_signal = 1,
                       .sig = {{"Chin1-Chin2", "V", -0.001, 0.001, -32768, 32767, 256},
                               {"EDF Annotations", "", -1, 1, -32768, 32767, 40}}};
}

static rt_recording *open_ok(const char *path)
{
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("open %s: %s", path, err.message);
    return rec;
}

/* Reads a whole channel and compares with the spec's formula; the only
 * difference allowed is floating rounding (a millionth of a digital step). */
static void check_channel_samples(rt_recording *rec, int index, const sig_spec *s, double uv_per_unit)
{
    const rt_channel_info *ch = rt_recording_channel(rec, index);
    double *out = calloc((size_t)ch->n_samples, sizeof *out);
    rt_error err;
    assert_int_equal(rt_recording_read_uv(rec, index, 0, (size_t)ch->n_samples, out, &err), RT_OK);
    double step = (s->pmax - s->pmin) / (s->dmax - s->dmin) * uv_per_unit;
    for (long long j = 0; j < ch->n_samples; j++) {
        double want = physical_value(s, digital_value(s, index, j)) * uv_per_unit;
        if (fabs(out[j] - want) > 1e-6 * step)
            fail_msg("%s sample %lld: %.12g, expected %.12g", s->label, j, out[j], want);
    }
    free(out);
}

static void plain_edf_channels_and_units(void **state)
{
    (void)state;
    file_spec f = plain_edf();
    bytes b = build_file(&f);
    rt_recording *rec = open_ok(write_bytes("rec_plain", &b, b.n));
    assert_int_equal(rt_recording_kind(rec), RT_FILE_EDF);
    assert_int_equal(rt_recording_channel_count(rec), 3);
    assert_true(rt_recording_duration_s(rec) == 6.0);
    assert_int_equal(rt_recording_file_size(rec), (long long)b.n);
    const rt_channel_info *chin = rt_recording_channel(rec, 0), *leg = rt_recording_channel(rec, 1);
    const rt_channel_info *temp = rt_recording_channel(rec, 2);
    /* rate = samples per record / record duration (EDF specification) */
    assert_true(chin->rate_hz == 256.0 && leg->rate_hz == 50.0 && temp->rate_hz == 1.0);
    assert_int_equal(chin->n_samples, 3 * 512);
    assert_true(chin->is_voltage && chin->uv_per_unit == 1.0);
    assert_true(leg->is_voltage && leg->uv_per_unit == 1e3); /* SI: 1 mV = 1000 uV */
    assert_false(temp->is_voltage);
    assert_true(temp->uv_per_unit == 1.0);
    assert_string_equal(temp->unit, "degC");
    assert_string_equal(chin->transducer, "AgAgCl electrode");
    check_channel_samples(rec, 0, &f.sig[0], 1.0);
    check_channel_samples(rec, 1, &f.sig[1], 1e3);
    check_channel_samples(rec, 2, &f.sig[2], 1.0); /* non-voltage: physical value as is */
    rt_clock_time t = rt_recording_start(rec);
    assert_int_equal(t.year, 2026); /* EDF: yy 00-84 means 20yy */
    assert_int_equal(t.month, 12);
    assert_int_equal(t.second, 5);
    assert_string_equal(rt_recording_patient_text(rec), "Fictional sleeper 7");
    assert_string_equal(rt_recording_recording_text(rec), "Night 1 lab B");
    assert_int_equal(rt_recording_find_channel(rec, " leg r "), 1);
    assert_int_equal(rt_recording_find_channel(rec, "Leg"), -1);
    assert_int_equal(rt_recording_find_channel(rec, "#2"), 1); /* channel 2 counted from 1 */
    assert_int_equal(rt_recording_find_channel(rec, "#4"), RT_CHANNEL_NONE);
    assert_null(rt_recording_channel(rec, 3));
    assert_null(rt_recording_channel(rec, -1));
    rt_recording_close(rec);
    free(b.p);
}

static void read_ranges_are_checked(void **state)
{
    (void)state;
    file_spec f = plain_edf();
    bytes b = build_file(&f);
    rt_recording *rec = open_ok(write_bytes("rec_ranges", &b, b.n));
    double out[64];
    rt_error err;
    /* A stretch across a record boundary (sample 512 starts record 2). */
    assert_int_equal(rt_recording_read_uv(rec, 0, 500, 30, out, &err), RT_OK);
    for (int j = 0; j < 30; j++)
        assert_true(fabs(out[j] - physical_value(&f.sig[0], digital_value(&f.sig[0], 0, 500 + j))) < 1e-9);
    assert_int_equal(rt_recording_read_uv(rec, 0, 1536 - 4, 4, out, &err), RT_OK);
    assert_int_equal(rt_recording_read_uv(rec, 0, 1536, 0, out, &err), RT_OK);
    assert_int_equal(rt_recording_read_uv(rec, 0, 1536 - 4, 5, out, &err), RT_ERR_USAGE);
    assert_non_null(strstr(err.message, "\"Chin\""));
    assert_int_equal(rt_recording_read_uv(rec, 0, -1, 2, out, &err), RT_ERR_USAGE);
    assert_int_equal(rt_recording_read_uv(rec, 3, 0, 2, out, &err), RT_ERR_USAGE);
    rt_recording_close(rec);
    rt_recording_close(NULL);
    free(b.p);
}

static void edfplus_annotations_sorted(void **state)
{
    (void)state;
    file_spec f = edfplus("EDF+C");
    bytes b = build_file(&f);
    rt_recording *rec = open_ok(write_bytes("rec_edfplus", &b, b.n));
    assert_int_equal(rt_recording_kind(rec), RT_FILE_EDFPLUS);
    assert_int_equal(rt_recording_channel_count(rec), 1); /* the annotation signal is hidden */
    assert_true(rt_recording_channel(rec, 0)->uv_per_unit == 1e6); /* SI: 1 V = 10^6 uV */
    check_channel_samples(rec, 0, &f.sig[0], 1e6);
    assert_int_equal(rt_recording_annotation_count(rec), 2);
    const rt_annotation *a0 = rt_recording_annotation(rec, 0), *a1 = rt_recording_annotation(rec, 1);
    assert_string_equal(a0->text, "Lights off");
    assert_true(a0->onset_s == 1.25);
    assert_true(a0->duration_s < 0); /* EDF+ TAL without duration */
    assert_string_equal(a1->text, "Sleep stage R");
    assert_true(a1->onset_s == 5.5 && a1->duration_s == 30.0);
    assert_null(rt_recording_annotation(rec, 2));
    rt_recording_close(rec);
    free(b.p);
}

static void bdf_samples(void **state)
{
    (void)state;
    file_spec f = {.bdf = true, .reserved = "24BIT", .n_records = 2, .record_s = "1", .ns = 2,
                   .annot_signal = -1,
                   .sig = {{"Chin", "uV", -262144, 262143, -8388608, 8388607, 64},
                           {"FDS L", "mV", -5, 5, -1000000, 1000000, 32}}};
    bytes b = build_file(&f);
    rt_recording *rec = open_ok(write_bytes("rec_bdf", &b, b.n));
    assert_int_equal(rt_recording_kind(rec), RT_FILE_BDF);
    check_channel_samples(rec, 0, &f.sig[0], 1.0);
    check_channel_samples(rec, 1, &f.sig[1], 1e3);
    rt_recording_close(rec);
    free(b.p);
}

/* A file from EDFlib's own writer: physical values in, the same values out
 * within half a digital step (the file's resolution). */
static void edflib_written_file(void **state)
{
    (void)state;
    char path[4400];
    snprintf(path, sizeof path, "%s/edflib.edf", rt_test_dir("rec_edflib"));
    int h = edfopen_file_writeonly(path, EDFLIB_FILETYPE_EDFPLUS, 2);
    assert_true(h >= 0);
    const char *labels[2] = {"EMG Chin", "Tib L"}, *units[2] = {"uV", "mV"};
    const double pmax[2] = {800.0, 1.5};
    for (int k = 0; k < 2; k++) {
        assert_int_equal(edf_set_samplefrequency(h, k, k ? 100 : 200), 0);
        assert_int_equal(edf_set_physical_maximum(h, k, pmax[k]), 0);
        assert_int_equal(edf_set_physical_minimum(h, k, -pmax[k]), 0);
        assert_int_equal(edf_set_digital_maximum(h, k, 32767), 0);
        assert_int_equal(edf_set_digital_minimum(h, k, -32768), 0);
        assert_int_equal(edf_set_label(h, k, labels[k]), 0);
        assert_int_equal(edf_set_physical_dimension(h, k, units[k]), 0);
    }
    double buf[200];
    for (int r = 0; r < 4; r++)
        for (int k = 0; k < 2; k++) {
            int n = k ? 100 : 200;
            for (int j = 0; j < n; j++)
                buf[j] = pmax[k] * 0.9 * sin(0.05 * (r * n + j) + k);
            assert_int_equal(edfwrite_physical_samples(h, buf), 0);
        }
    /* EDFlib 1.23: onset and duration in units of 100 us (edflib.h) */
    assert_int_equal(edfwrite_annotation_utf8(h, 25000, -1, "Arousal"), 0);
    assert_int_equal(edfclose_file(h), 0);

    rt_recording *rec = open_ok(path);
    assert_int_equal(rt_recording_channel_count(rec), 2);
    double out[400];
    rt_error err;
    assert_int_equal(rt_recording_read_uv(rec, 1, 0, 400, out, &err), RT_OK);
    /* One digital step, not half: EDFlib's writer converts to digital by
     * truncation toward zero, not rounding (observed with libedf 1.23). */
    double step_uv = (2 * 1.5 / 65535.0) * 1e3;
    double worst = 0;
    for (int j = 0; j < 400; j++)
        worst = fmax(worst, fabs(out[j] - 1e3 * 1.35 * sin(0.05 * j + 1)));
    printf("# EDFlib round trip: worst error %.3g uV, step %.3g uV\n", worst, step_uv);
    assert_true(worst <= step_uv + 1e-9);
    assert_int_equal(rt_recording_annotation_count(rec), 1);
    assert_true(fabs(rt_recording_annotation(rec, 0)->onset_s - 2.5) < 1e-9);
    rt_recording_close(rec);
}

static void unit_names(void **state)
{
    (void)state;
    /* SI prefixes (BIPM SI Brochure): m = 1e-3, u/micro = 1e-6, n = 1e-9. */
    static const struct {
        const char *unit;
        bool voltage;
        double uv;
    } cases[] = {
        {"uV", true, 1}, {"UV", true, 1}, {"uv", true, 1}, {"\xb5V", true, 1} /* Latin-1 micro */,
        {"\xc2\xb5V", true, 1} /* UTF-8 U+00B5 */, {"\xce\xbcV", true, 1} /* UTF-8 U+03BC */,
        {"mV", true, 1e3}, {"mv", true, 1e3}, {"V", true, 1e6}, {" nV ", true, 1e-3},
        {"MV", false, 1} /* mega, not milli */, {"NV", false, 1}, {"degC", false, 1}, {"%", false, 1},
        {"", false, 1}, {"uVV", false, 1}, {"kV", false, 1},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        double f = -1;
        if (rt_unit_uv_per_unit(cases[i].unit, &f) != cases[i].voltage || f != cases[i].uv)
            fail_msg("unit \"%s\": voltage %d factor %g", cases[i].unit, !cases[i].voltage, f);
    }
}

/* ---- malformed files ---------------------------------------------------- */

static void expect_refusal(const char *name, const bytes *b, size_t len, rt_status status, const char *part1,
                           const char *part2)
{
    rt_error err;
    const char *path = write_bytes(name, b, len);
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) == RT_OK)
        fail_msg("%s: opened, expected a refusal", name);
    assert_int_equal(err.status, status);
    if (strncmp(err.message, path, strlen(path)) != 0 || !strstr(err.message, part1) ||
        (part2 && !strstr(err.message, part2)))
        fail_msg("%s: message \"%s\" lacks \"%s\" / \"%s\"", name, err.message, part1, part2 ? part2 : "");
}

static void patch(bytes *b, long long offset, int width, const char *text)
{
    rt_test_edf_put(b->p + offset, width, text);
}

static void truncated_files(void **state)
{
    (void)state;
    file_spec f = plain_edf();
    bytes b = build_file(&f);
    expect_refusal("bad_short_main", &b, 100, RT_ERR_RECORDING, "header truncated", "needs 256");
    expect_refusal("bad_short_signals", &b, 600, RT_ERR_RECORDING, "header truncated", "needs 1024");
    /* record = 2 * (512 + 100 + 2) = 1228 bytes; cut inside the second record */
    expect_refusal("bad_mid_record", &b, 1024 + 1228 + 10, RT_ERR_RECORDING,
                   "file ends inside data record 2 (byte offset 2262)", "header promises 3 records");
    patch(&b, 236, 8, "5"); /* count lies: 5 promised, 3 present */
    expect_refusal("bad_count", &b, b.n, RT_ERR_RECORDING, "file ends after data record 3",
                   "header promises 5 records");
    patch(&b, 236, 8, "-1");
    expect_refusal("bad_count_unknown", &b, b.n, RT_ERR_RECORDING, "record count unknown", "byte offset 236");
    free(b.p);
}

static void main_header_faults(void **state)
{
    (void)state;
    file_spec f = plain_edf();
    bytes b = build_file(&f);
    patch(&b, 244, 8, "0");
    expect_refusal("bad_duration_zero", &b, b.n, RT_ERR_RECORDING, "\"data record duration\" (byte offset 244)",
                   "greater than 0");
    patch(&b, 244, 8, "-2");
    expect_refusal("bad_duration_neg", &b, b.n, RT_ERR_RECORDING, "\"data record duration\"", "greater than 0");
    patch(&b, 244, 8, "two");
    expect_refusal("bad_duration_text", &b, b.n, RT_ERR_RECORDING, "\"data record duration\"", "not a plain decimal number");
    patch(&b, 244, 8, "2");
    patch(&b, 0, 8, "1");
    expect_refusal("bad_version", &b, b.n, RT_ERR_RECORDING, "\"version\" (byte offset 0)", NULL);
    patch(&b, 0, 8, "0");
    b.p[20] = 0xe9; /* Latin-1 e-acute inside the patient field */
    expect_refusal("bad_ascii_main", &b, b.n, RT_ERR_RECORDING, "non-ASCII byte 0xe9 at byte offset 20",
                   "\"patient\"");
    b.p[20] = 'e';
    b.p[256 + 16 + 3] = 0xb5; /* inside signal 2's label */
    expect_refusal("bad_ascii_signal", &b, b.n, RT_ERR_RECORDING, "byte offset 275", "signal 2 field \"label\"");
    b.p[256 + 16 + 3] = ' ';
    patch(&b, 168, 8, "31.13.26"); /* month 13 */
    expect_refusal("bad_date", &b, b.n, RT_ERR_RECORDING, "\"start date\" (byte offset 168)", "out of range");
    patch(&b, 168, 8, "01.12.26");
    patch(&b, 184, 8, "1000");
    expect_refusal("bad_header_bytes", &b, b.n, RT_ERR_RECORDING, "\"header byte count\" (byte offset 184)",
                   "1024");
    free(b.p);
}

static void signal_header_faults(void **state)
{
    (void)state;
    file_spec f = plain_edf();
    bytes b = build_file(&f);
    char where[64];
    patch(&b, rt_test_edf_signal_offset(3, 4, 1), 8, "-2"); /* physical maximum of signal 2 = its minimum */
    snprintf(where, sizeof where, "\"physical maximum\" (byte offset %lld)",
             rt_test_edf_signal_offset(3, 4, 1));
    expect_refusal("bad_phys_equal", &b, b.n, RT_ERR_RECORDING, where, "signal 2 of 3 (\"Leg R\")");
    patch(&b, rt_test_edf_signal_offset(3, 4, 1), 8, "2");
    patch(&b, rt_test_edf_signal_offset(3, 6, 0), 8, "40000"); /* EDF samples are 16-bit */
    snprintf(where, sizeof where, "\"digital maximum\" (byte offset %lld)",
             rt_test_edf_signal_offset(3, 6, 0));
    expect_refusal("bad_dig_range", &b, b.n, RT_ERR_RECORDING, where, "-32768..32767");
    patch(&b, rt_test_edf_signal_offset(3, 6, 0), 8, "-32768");
    expect_refusal("bad_dig_order", &b, b.n, RT_ERR_RECORDING, "\"digital maximum\"", "greater than the digital minimum");
    patch(&b, rt_test_edf_signal_offset(3, 6, 0), 8, "32767");
    patch(&b, rt_test_edf_signal_offset(3, 8, 2), 8, "0");
    snprintf(where, sizeof where, "\"samples per record\" (byte offset %lld)",
             rt_test_edf_signal_offset(3, 8, 2));
    expect_refusal("bad_spr", &b, b.n, RT_ERR_RECORDING, where, "at least 1");
    free(b.p);

    file_spec g = {.bdf = true, .reserved = "24BIT", .n_records = 1, .record_s = "1", .ns = 1,
                   .annot_signal = -1, .sig = {{"Chin", "uV", -1, 1, -8388608, 8388607, 8}}};
    b = build_file(&g);
    patch(&b, rt_test_edf_signal_offset(1, 5, 0), 8, "-9000000"); /* BDF samples are 24-bit */
    expect_refusal("bad_bdf_range", &b, b.n, RT_ERR_RECORDING, "\"digital minimum\"", "-8388608..8388607");
    free(b.p);
}

/* EDF+ rules (Kemp & Olivan 2003) that EDFlib enforces with a bare error. */
static void edfplus_faults(void **state)
{
    (void)state;
    file_spec f = edfplus("EDF+C");
    bytes b = build_file(&f);
    patch(&b, 88, 80, "Night 1");
    expect_refusal("bad_plus_recording", &b, b.n, RT_ERR_RECORDING, "\"recording\" (byte offset 88)",
                   "Startdate");
    patch(&b, 88, 80, "Startdate 01-DEC-2026 X X X");
    patch(&b, rt_test_edf_signal_offset(2, 1, 1), 80, "electrode"); /* transducer of the annotation signal */
    expect_refusal("bad_plus_transducer", &b, b.n, RT_ERR_RECORDING, "signal 2 of 2 (\"EDF Annotations\")",
                   "must be blank");
    patch(&b, rt_test_edf_signal_offset(2, 1, 1), 80, "");
    patch(&b, rt_test_edf_signal_offset(2, 0, 1), 16, "EDF Notes");
    expect_refusal("bad_plus_no_annotations", &b, b.n, RT_ERR_RECORDING, "needs a signal labelled", NULL);
    free(b.p);
}

static void unsupported_and_missing(void **state)
{
    (void)state;
    file_spec f = edfplus("EDF+D");
    bytes b = build_file(&f);
    expect_refusal("bad_edfd", &b, b.n, RT_ERR_RECORDING, "discontinuous EDF+D is not supported", "byte offset 192");
    patch(&b, 192, 44, "EDF+C");
    b.p = realloc(b.p, b.n + 7);
    memset(b.p + b.n, 0, 7);
    /* EDFlib 1.23 refuses trailing bytes; remtone says how to cut them. */
    expect_refusal("bad_trailing", &b, b.n + 7, RT_ERR_RECORDING, "7 extra bytes", "truncate -s");
    free(b.p);

    rt_error err;
    const char *dir = rt_test_dir("rec_missing");
    char path[4400];
    snprintf(path, sizeof path, "%s/none.edf", dir);
    rt_recording *rec = NULL;
    assert_int_equal(rt_recording_open(path, &rec, &err), RT_ERR_IO);
    assert_null(rec);
    assert_int_equal(err.status, RT_ERR_IO);
    assert_non_null(strstr(err.message, "No such file or directory")); /* strerror(ENOENT), glibc */
    assert_int_equal(rt_recording_open(dir, &rec, &err), RT_ERR_IO);
    assert_null(rec);
    assert_int_equal(err.status, RT_ERR_IO);
    assert_non_null(strstr(err.message, "Is a directory")); /* strerror(EISDIR), glibc */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plain_edf_channels_and_units),
        cmocka_unit_test(read_ranges_are_checked),
        cmocka_unit_test(edfplus_annotations_sorted),
        cmocka_unit_test(bdf_samples),
        cmocka_unit_test(edflib_written_file),
        cmocka_unit_test(unit_names),
        cmocka_unit_test(truncated_files),
        cmocka_unit_test(main_header_faults),
        cmocka_unit_test(signal_header_faults),
        cmocka_unit_test(edfplus_faults),
        cmocka_unit_test(unsupported_and_missing),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
