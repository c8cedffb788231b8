/* Direct reads of the data records against EDFlib: rt_recording_read_uv reads
 * the records itself (src/io/recording.c), and its values must be
 * bit-identical to EDFlib's edfread_physical_samples (times the unit factor
 * to microvolts) for every stretch of every channel. The files are built
 * byte by byte from the EDF specification (Kemp et al. 1992), EDF+ (Kemp &
 * Olivan 2003) and BDF (BioSemi, 24-bit samples): several signals at
 * different and odd rates, annotation signals first, in the middle and last,
 * records of several durations, records larger than one read, and random
 * digital values with many at, and beyond, the digital minimum and maximum
 * (EDFlib clamps those). Stretches are random in offset and length, plus the
 * whole channel, single samples and the last samples of the file. Each
 * stretch is also read through a keep of data records
 * (rt_recording_read_uv_kept), which must give the same values.
 *
 * EDFlib is opened on the same file while remtone has it open: EDFlib refuses
 * a file open twice in a process, so this also proves remtone's recording
 * does not keep EDFlib's handle, i.e. that its reads are the direct ones.
 * The path remtone takes should its layout ever disagree with EDFlib's
 * (EDFlib reads samples and annotations) is forced through a seam and must
 * give what the direct path gives. */
#include "support.h"

#include <edflib.h>
#include <pthread.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <fcntl.h>
#include <sys/stat.h>

#include "digest.h"
#include "io/recording_seam.h"
#include "remtone/recording.h"

enum { MAX_SIG = 6, RANDOM_READS = 60, THREADS = 4 };

typedef struct sig_spec {
    const char *label, *unit;
    const char *pmin, *pmax; /* header text, as a recorder writes it */
    int dmin, dmax, spr;
} sig_spec;

typedef struct file_spec {
    const char *name;
    bool bdf;
    const char *reserved; /* "", "EDF+C", "BDF+C", "24BIT" */
    int n_records;
    const char *record_s; /* header text; exact in binary for the TALs */
    int ns;
    sig_spec sig[MAX_SIG];
} file_spec;

static bool is_plus(const file_spec *f) { return strstr(f->reserved, "DF+") != NULL; }

static bool is_annotation(const file_spec *f, int k)
{
    return is_plus(f) && strstr(f->sig[k].label, "Annotations") != NULL;
}

static void put_headers(const file_spec *f, unsigned char *h)
{
    /* EDF+ subfields as EDFlib checks them (Kemp & Olivan 2003, 2.1.3) */
    rt_test_edf_put_main(h, &(rt_test_edf_main){
        .bdf = f->bdf, .patient = is_plus(f) ? "X M 02-FEB-1948 Fictional_Sleeper" : "Fictional sleeper 9",
        .recording = is_plus(f) ? "Startdate 01-DEC-2026 X X X" : "Night 2 lab C", .date = "01.12.26",
        .time = "23.10.00", .reserved = f->reserved, .n_records = f->n_records, .record_s = f->record_s,
        .ns = f->ns});
    for (int k = 0; k < f->ns; k++) {
        const sig_spec *s = &f->sig[k];
        char dmin[16], dmax[16], spr[16];
        snprintf(dmin, sizeof dmin, "%d", s->dmin);
        snprintf(dmax, sizeof dmax, "%d", s->dmax);
        snprintf(spr, sizeof spr, "%d", s->spr);
        const char *text[10] = {s->label, is_annotation(f, k) ? "" : "AgAgCl electrode", s->unit, s->pmin,
                                s->pmax, dmin, dmax, "", spr, ""};
        for (int field = 0; field < 10; field++)
            rt_test_edf_put_signal(h, f->ns, field, k, text[field]);
    }
}

/* EDF+ time-keeping TAL of record r (Kemp & Olivan 2003, 2.2.4), and in
 * every third record one annotation with a duration (a TAL of its own, 2.2.2);
 * they go in the first annotation signal, the others are left empty (zeros). */
static void put_tal(unsigned char *at, size_t nbytes, int r, double record_s)
{
    char tal[96];
    int n = snprintf(tal, sizeof tal, "+%g%c%c%c", r * record_s, 0x14, 0x14, 0);
    if (r % 3 == 1)
        n += snprintf(tal + n, sizeof tal - (size_t)n, "+%g%c%g%cArousal %d%c%c", r * record_s + 0.125,
                      0x15, 0.25 * r, 0x14, r, 0x14, 0);
    memset(at, 0, nbytes);
    memcpy(at, tal, (size_t)n < nbytes ? (size_t)n : nbytes);
}

/* A random digital value: a quarter of them the digital minimum or maximum,
 * an eighth beyond them (EDFlib clamps), an eighth the storage limits, the
 * rest anywhere in the digital range. */
static int random_digital(const sig_spec *s, bool bdf)
{
    int lo = bdf ? -8388608 : -32768, hi = bdf ? 8388607 : 32767;
    double u = rt_test_uniform();
    if (u < 0.125)
        return s->dmin;
    if (u < 0.25)
        return s->dmax;
    if (u < 0.3125)
        return s->dmin > lo ? s->dmin - 1 - (int)(rt_test_uniform() * (s->dmin - lo)) : lo;
    if (u < 0.375)
        return s->dmax < hi ? s->dmax + 1 + (int)(rt_test_uniform() * (hi - s->dmax)) : hi;
    if (u < 0.5)
        return rt_test_uniform() < 0.5 ? lo : hi;
    return s->dmin + (int)(rt_test_uniform() * ((double)s->dmax - s->dmin + 1));
}

/* Writes the file into dir/name.edf and returns its path (static buffer). */
static const char *build_file(const file_spec *f)
{
    static char path[4400];
    int width = f->bdf ? 3 : 2;
    size_t record = 0;
    for (int k = 0; k < f->ns; k++)
        record += (size_t)f->sig[k].spr * (size_t)width;
    size_t header = 256 * (size_t)(f->ns + 1), n = header + record * (size_t)f->n_records;
    unsigned char *b = calloc(n, 1);
    assert_non_null(b);
    put_headers(f, b);
    unsigned char *at = b + header;
    int first_annotation = -1;
    for (int k = f->ns - 1; k >= 0; k--)
        if (is_annotation(f, k))
            first_annotation = k;
    for (int r = 0; r < f->n_records; r++)
        for (int k = 0; k < f->ns; k++) {
            size_t bytes = (size_t)f->sig[k].spr * (size_t)width;
            if (k == first_annotation) {
                put_tal(at, bytes, r, atof(f->record_s));
            } else if (is_annotation(f, k)) {
                memset(at, 0, bytes);
            } else {
                for (int j = 0; j < f->sig[k].spr; j++) {
                    unsigned d = (unsigned)random_digital(&f->sig[k], f->bdf);
                    for (int i = 0; i < width; i++)
                        at[j * width + i] = (unsigned char)(d >> (8 * i));
                }
            }
            at += bytes;
        }
    snprintf(path, sizeof path, "%s/%s.edf", rt_test_dir(f->name), f->name);
    rt_test_write_file(path, b, n);
    free(b);
    return path;
}

/* EDFlib's values of a stretch, times the unit factor (as remtone applies it). */
static void edflib_read(int handle, int channel, long long first, size_t n, double factor, double *out)
{
    assert_int_equal(edfseek(handle, channel, first, EDFSEEK_SET), first);
    assert_int_equal(edfread_physical_samples(handle, channel, (int)n, out), (int)n);
    if (factor != 1.0)
        for (size_t i = 0; i < n; i++)
            out[i] *= factor;
}

static void compare_values(const rt_recording *rec, const rt_channel_info *ch, const char *how,
                           long long first, size_t n, const double *got, const double *want)
{
    for (size_t i = 0; i < n; i++)
        if (memcmp(&got[i], &want[i], sizeof got[i]) != 0)
            fail_msg("%s \"%s\" sample %lld (stretch %lld+%zu, %s): remtone %.17g, EDFlib %.17g",
                     rt_recording_path(rec), ch->label, first + (long long)i, first, n, how, got[i],
                     want[i]);
}

/* The stretch read directly and through keep (whose records are those of the
 * previous reads, of any channel: hits and misses both) against EDFlib. */
static void compare_stretch(rt_recording *rec, rt_record_keep *keep, int handle, int channel,
                            long long first, size_t n)
{
    const rt_channel_info *ch = rt_recording_channel(rec, channel);
    double *got = malloc((n ? n : 1) * sizeof *got), *want = malloc((n ? n : 1) * sizeof *want);
    assert_true(got && want);
    rt_error err;
    edflib_read(handle, channel, first, n, ch->uv_per_unit, want);
    if (rt_recording_read_uv(rec, channel, first, n, got, &err) != RT_OK)
        fail_msg("%s", err.message);
    compare_values(rec, ch, "direct", first, n, got, want);
    if (rt_recording_read_uv_kept(rec, keep, channel, first, n, got, &err) != RT_OK)
        fail_msg("%s", err.message);
    compare_values(rec, ch, "kept records", first, n, got, want);
    free(got);
    free(want);
}

/* Every channel: whole, first and last sample, the last samples of the file
 * (a request ending exactly at its end), one record plus one sample from a
 * record boundary, and random stretches. */
static void compare_file(const file_spec *f)
{
    const char *path = build_file(f);
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    struct edf_hdr_struct h;
    if (edfopen_file_readonly(path, &h, EDFLIB_DO_NOT_READ_ANNOTATIONS) != 0)
        fail_msg("%s: EDFlib cannot open it beside remtone (error %d): remtone keeps EDFlib's handle",
                 path, h.filetype);
    assert_int_equal(h.edfsignals, rt_recording_channel_count(rec));
    rt_record_keep *keep = NULL;
    assert_int_equal(rt_record_keep_new(&keep, &err), RT_OK);
    for (int c = 0; c < h.edfsignals; c++) {
        long long total = rt_recording_channel(rec, c)->n_samples, spr = h.signalparam[c].smp_in_datarecord;
        compare_stretch(rec, keep, h.handle, c, 0, (size_t)total);
        compare_stretch(rec, keep, h.handle, c, 0, 1);
        compare_stretch(rec, keep, h.handle, c, total - 1, 1);
        compare_stretch(rec, keep, h.handle, c, total - (total > 3 * spr / 2 ? 3 * spr / 2 : total),
                        (size_t)(total > 3 * spr / 2 ? 3 * spr / 2 : total));
        if (total > spr + 1)
            compare_stretch(rec, keep, h.handle, c, spr - 1, (size_t)spr + 2);
        for (int i = 0; i < RANDOM_READS; i++) {
            long long first = (long long)(rt_test_uniform() * (double)total);
            long long room = total - first;
            /* short stretches most of the time, some up to the end */
            long long n = rt_test_uniform() < 0.7 ? 1 + (long long)(rt_test_uniform() * (double)(3 * spr))
                                                  : 1 + (long long)(rt_test_uniform() * (double)room);
            compare_stretch(rec, keep, h.handle, c, first, (size_t)(n < room ? n : room));
        }
    }
    rt_record_keep_free(keep);
    edfclose_file(h.handle);
    rt_recording_close(rec);
}

static void plain_edf_mixed_rates(void **state)
{
    (void)state;
    /* a signal labelled "EDF Annotations" is ordinary in a plain EDF (EDFlib
     * hides it only in EDF+), so it is a channel here */
    file_spec f = {.name = "direct_edf", .bdf = false, .reserved = "", .n_records = 37, .record_s = "1",
                   .ns = 5,
                   .sig = {{"Chin", "uV", "-3276.8", "3276.7", -32768, 32767, 200},
                           {"Leg odd", "mV", "-2.048", "2.047", -2048, 2047, 7},
                           {"SpO2", "%", "0", "100", 0, 1000, 1},
                           {"EDF Annotations", "uV", "-500", "500", -32768, 32767, 333},
                           {"Tib R", "V", "-0.0005", "0.0005", -100, 923, 512}}};
    rt_test_rng_seed(rt_test_seed());
    compare_file(&f);
}

static void edfplus_annotation_signals(void **state)
{
    (void)state;
    /* annotation signals in the middle and last, half-second records */
    file_spec f = {.name = "direct_edfplus", .bdf = false, .reserved = "EDF+C", .n_records = 41,
                   .record_s = "0.5", .ns = 5,
                   .sig = {{"EEG C3-M2", "uV", "-1000", "1000", -32768, 32767, 64},
                           {"EDF Annotations", "", "-1", "1", -32768, 32767, 30},
                           {"FDS L", "uV", "-500", "500", -32768, 32767, 250},
                           {"ECG", "mV", "-5", "5", -2000, 2000, 101},
                           {"EDF Annotations", "", "-1", "1", -32768, 32767, 12}}};
    rt_test_rng_seed(rt_test_seed() + 1);
    compare_file(&f);
}

static void bdf_and_bdfplus(void **state)
{
    (void)state;
    file_spec bdf = {.name = "direct_bdf", .bdf = true, .reserved = "24BIT", .n_records = 23,
                     .record_s = "2", .ns = 3,
                     .sig = {{"Chin", "uV", "-262144", "262143", -8388608, 8388607, 1024},
                             {"FDS L", "mV", "-5", "5", -1000000, 1000000, 3},
                             {"Pos", "", "0", "4", 0, 4, 1}}};
    rt_test_rng_seed(rt_test_seed() + 2);
    compare_file(&bdf);
    /* the annotation signal first, quarter-second records */
    file_spec plus = {.name = "direct_bdfplus", .bdf = true, .reserved = "BDF+C", .n_records = 33,
                      .record_s = "0.25", .ns = 4,
                      .sig = {{"BDF Annotations", "", "-1", "1", -8388608, 8388607, 20},
                              {"Tib L", "uV", "-8192", "8191.99", -8388608, 8388607, 128},
                              {"Snore", "uV", "-500", "500", -77777, 99999, 17},
                              {"Thor", "nV", "-300000", "300000", -8388608, 8388607, 9}}};
    compare_file(&plus);
}

/* Records wider than one direct read (a 900 kB record), and a narrow channel
 * beside a wide one, so both ways of reading are taken: whole records several
 * at a time, and a channel's bytes record by record, in pieces. */
static void wide_records(void **state)
{
    (void)state;
    file_spec f = {.name = "direct_wide", .bdf = true, .reserved = "24BIT", .n_records = 3,
                   .record_s = "10", .ns = 3,
                   .sig = {{"Wide", "uV", "-1000", "1000", -8388608, 8388607, 300000},
                           {"Narrow", "uV", "-1000", "1000", -8388608, 8388607, 5},
                           {"Mid", "uV", "-10", "10", -4096, 4095, 20000}}};
    rt_test_rng_seed(rt_test_seed() + 3);
    compare_file(&f);
    file_spec g = {.name = "direct_skip", .bdf = false, .reserved = "", .n_records = 30, .record_s = "1",
                   .ns = 2,
                   .sig = {{"Wide", "uV", "-1000", "1000", -32768, 32767, 12000},
                           {"Narrow", "uV", "-1000", "1000", -32768, 32767, 8}}};
    compare_file(&g);
}

/* ---- reads from several threads at once ---------------------------------- */

typedef struct reader_job {
    rt_recording *rec;
    const double *want; /* the whole channel 0, read before */
    long long total;
    uint64_t seed;
    int mismatches;
} reader_job;

static void *reader(void *arg)
{
    reader_job *job = arg;
    double *buf = malloc((size_t)job->total * sizeof *buf);
    uint64_t x = job->seed | 1;
    for (int i = 0; i < 200 && buf; i++) {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        long long first = (long long)(x % (uint64_t)job->total);
        long long n = 1 + (long long)((x >> 32) % (uint64_t)(job->total - first));
        rt_error err;
        if (rt_recording_read_uv(job->rec, 0, first, (size_t)n, buf, &err) != RT_OK ||
            memcmp(buf, job->want + first, (size_t)n * sizeof *buf) != 0)
            job->mismatches++;
    }
    free(buf);
    return NULL;
}

/* Direct reads take no lock and share no file position (pread), so threads
 * reading one recording at once must each get exactly their stretch. */
static void threads_read_one_recording(void **state)
{
    (void)state;
    file_spec f = {.name = "direct_threads", .bdf = false, .reserved = "", .n_records = 60, .record_s = "1",
                   .ns = 2,
                   .sig = {{"Chin", "uV", "-500", "500", -32768, 32767, 256},
                           {"Leg", "uV", "-500", "500", -32768, 32767, 100}}};
    uint64_t seed = rt_test_seed();
    rt_test_rng_seed(seed + 4);
    const char *path = build_file(&f);
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    long long total = rt_recording_channel(rec, 0)->n_samples;
    double *want = malloc((size_t)total * sizeof *want);
    assert_non_null(want);
    assert_int_equal(rt_recording_read_uv(rec, 0, 0, (size_t)total, want, &err), RT_OK);
    pthread_t t[THREADS];
    reader_job jobs[THREADS];
    for (int i = 0; i < THREADS; i++) {
        jobs[i] = (reader_job){rec, want, total, seed + 100 + (uint64_t)i, 0};
        assert_int_equal(pthread_create(&t[i], NULL, reader, &jobs[i]), 0);
    }
    for (int i = 0; i < THREADS; i++) {
        pthread_join(t[i], NULL);
        assert_int_equal(jobs[i].mismatches, 0);
    }
    free(want);
    rt_recording_close(rec);
}

/* ---- the path of a layout disagreement ---------------------------------- */

/* When remtone's record layout disagreed with EDFlib's, EDFlib would keep
 * its handle and read the samples and the annotations: no valid file does
 * that, so the seam forces the path, and an open through it must give the
 * same channels, samples (through a keep too) and annotations as the direct
 * one. The annotations of the direct open are remtone's own TAL reader's;
 * those of the forced one EDFlib's (EDFLIB_READ_ALL_ANNOTATIONS). */
static void compare_forced_open(const file_spec *f)
{
    const char *path = build_file(f);
    rt_error err;
    rt_recording *direct = NULL, *forced = NULL;
    if (rt_recording_open(path, &direct, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_recording_seam_force_edflib(true);
    rt_status st = rt_recording_open(path, &forced, &err);
    rt_recording_seam_force_edflib(false);
    if (st != RT_OK)
        fail_msg("%s", err.message);
    /* the forced open keeps EDFlib's handle: EDFlib refuses a second open */
    struct edf_hdr_struct h;
    assert_int_not_equal(edfopen_file_readonly(path, &h, EDFLIB_DO_NOT_READ_ANNOTATIONS), 0);
    assert_int_equal(h.filetype, EDFLIB_FILE_ALREADY_OPENED);
    int channels = rt_recording_channel_count(direct);
    assert_int_equal(rt_recording_channel_count(forced), channels);
    rt_record_keep *keep = NULL;
    assert_int_equal(rt_record_keep_new(&keep, &err), RT_OK);
    for (int c = 0; c < channels; c++) {
        const rt_channel_info *ch = rt_recording_channel(direct, c);
        assert_string_equal(rt_recording_channel(forced, c)->label, ch->label);
        assert_int_equal(rt_recording_channel(forced, c)->n_samples, ch->n_samples);
        size_t n = (size_t)ch->n_samples;
        double *want = malloc(n * sizeof *want), *got = malloc(n * sizeof *got);
        assert_true(want && got);
        assert_int_equal(rt_recording_read_uv(direct, c, 0, n, want, &err), RT_OK);
        assert_int_equal(rt_recording_read_uv(forced, c, 0, n, got, &err), RT_OK);
        compare_values(forced, ch, "forced EDFlib path", 0, n, got, want);
        for (int i = 0; i < RANDOM_READS; i++) {
            long long first = (long long)(rt_test_uniform() * (double)n);
            size_t len = 1 + (size_t)(rt_test_uniform() * (double)(n - (size_t)first - 1));
            assert_int_equal(rt_recording_read_uv_kept(forced, keep, c, first, len, got, &err), RT_OK);
            compare_values(forced, ch, "forced EDFlib path, kept", first, len, got, want + first);
        }
        free(want);
        free(got);
    }
    rt_record_keep_free(keep);
    size_t count = rt_recording_annotation_count(direct);
    assert_int_equal(rt_recording_annotation_count(forced), count);
    if (is_plus(f)) /* every third record holds one */
        assert_int_equal(count, (size_t)(f->n_records + 1) / 3);
    for (size_t i = 0; i < count; i++) {
        const rt_annotation *a = rt_recording_annotation(direct, i), *b = rt_recording_annotation(forced, i);
        assert_true(b->onset_s == a->onset_s);
        assert_true(b->duration_s == a->duration_s);
        assert_string_equal(b->text, a->text);
    }
    rt_recording_close(forced);
    rt_recording_close(direct);
}

static void forced_edflib_path(void **state)
{
    (void)state;
    rt_test_rng_seed(rt_test_seed() + 5);
    file_spec plus = {.name = "forced_edfplus", .bdf = false, .reserved = "EDF+C", .n_records = 41,
                      .record_s = "0.5", .ns = 3,
                      .sig = {{"Chin", "uV", "-1000", "1000", -32768, 32767, 64},
                              {"EDF Annotations", "", "-1", "1", -32768, 32767, 30},
                              {"Tib L", "mV", "-5", "5", -2000, 2000, 101}}};
    compare_forced_open(&plus);
    file_spec bdfplus = {.name = "forced_bdfplus", .bdf = true, .reserved = "BDF+C", .n_records = 33,
                         .record_s = "0.25", .ns = 3,
                         .sig = {{"BDF Annotations", "", "-1", "1", -8388608, 8388607, 20},
                                 {"Tib L", "uV", "-8192", "8191.99", -8388608, 8388607, 128},
                                 {"Snore", "uV", "-500", "500", -77777, 99999, 17}}};
    compare_forced_open(&bdfplus);
    file_spec plain = {.name = "forced_edf", .bdf = false, .reserved = "", .n_records = 20, .record_s = "1",
                       .ns = 2,
                       .sig = {{"Chin", "uV", "-3276.8", "3276.7", -32768, 32767, 200},
                               {"Leg odd", "mV", "-2.048", "2.047", -2048, 2047, 7}}};
    compare_forced_open(&plain);
}

/* ---- the digest taken while opening ---------------------------------------
 * An EDF+ open reads every record for the annotation signal and takes the
 * file's XXH3 digest on the way (common/digest.h); a later digest of the same
 * unchanged file is that one. It must equal libxxhash's one-shot XXH3 of the
 * whole file, and a file changed since (another size or modification time)
 * must be read again. */
static void one_shot_hex(const char *path, char hex[17])
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    assert_int_equal(fseek(f, 0, SEEK_END), 0);
    long size = ftell(f);
    rewind(f);
    unsigned char *b = malloc((size_t)size + 1);
    assert_non_null(b);
    assert_int_equal(fread(b, 1, (size_t)size, f), (size_t)size);
    fclose(f);
    snprintf(hex, 17, "%016llx", (unsigned long long)XXH3_64bits(b, (size_t)size));
    free(b);
}

static void digest_taken_while_opening(void **state)
{
    (void)state;
    rt_test_rng_seed(rt_test_seed() + 6);
    file_spec plus = {.name = "digest_edfplus", .bdf = false, .reserved = "EDF+C", .n_records = 90,
                      .record_s = "1", .ns = 3,
                      .sig = {{"Chin", "uV", "-1000", "1000", -32768, 32767, 256},
                              {"EDF Annotations", "", "-1", "1", -32768, 32767, 30},
                              {"Tib L", "uV", "-500", "500", -32768, 32767, 200}}};
    const char *path = build_file(&plus);
    char want[17], got[17];
    one_shot_hex(path, want);
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    long long bytes = 0;
    assert_int_equal(rt_file_digest(path, &bytes, got, &err), RT_OK);
    assert_string_equal(got, want);
    rt_recording_close(rec);
    /* the same file written again (new contents, same size, a later time):
     * its digest is taken anew */
    struct stat before;
    assert_int_equal(stat(path, &before), 0);
    rt_test_rng_seed(rt_test_seed() + 7);
    build_file(&plus);
    struct timespec later[2] = {{0, UTIME_OMIT}, before.st_mtim};
    later[1].tv_sec += 5;
    assert_int_equal(utimensat(AT_FDCWD, path, later, 0), 0);
    one_shot_hex(path, want);
    assert_int_equal(rt_file_digest(path, &bytes, got, &err), RT_OK);
    assert_string_equal(got, want);
    assert_int_equal(bytes, (long long)before.st_size);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(plain_edf_mixed_rates),
        cmocka_unit_test(edfplus_annotation_signals),
        cmocka_unit_test(bdf_and_bdfplus),
        cmocka_unit_test(wide_records),
        cmocka_unit_test(threads_read_one_recording),
        cmocka_unit_test(forced_edflib_path),
        cmocka_unit_test(digest_taken_while_opening),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
