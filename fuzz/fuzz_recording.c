/* Fuzz target: opening an EDF/EDF+/BDF file (remtone's header checks, then
 * EDFlib) and reading what a scoring run reads: every channel's header
 * values, a few samples at the start and the end of each channel, and the
 * annotations. Any input must give a recording or an error with a message,
 * never a crash, a sanitizer report or a leak.
 *
 * The annotations are also compared with EDFlib's own reading of them
 * (EDFLIB_READ_ALL_ANNOTATIONS), the reference remtone's TAL reader follows
 * (src/io/edf_tal.c): when both open the file, the annotations must be equal
 * field by field; when EDFlib refuses it, remtone must refuse it too; when
 * remtone refuses a TAL (its messages name an "annotation signal"), EDFlib
 * must refuse the file too, except for the one stricter rule (onsets and
 * durations over 11 digits of whole seconds, where EDFlib overflows).
 * remtone's header checks are stricter than EDFlib's in many documented
 * ways (docs/recording.md), so other refusals are not compared. */
#include <edflib.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fuzz_support.h"
#include "remtone/recording.h"

enum { READ_SAMPLES = 64, MAX_CHANNELS_READ = 8 };

static void check_message(const rt_error *err)
{
    /* a failure without a message would leave the user nothing to act on */
    if (err->status != RT_OK && err->message[0] == '\0')
        abort();
}

typedef struct kept_annotation {
    rt_annotation a;
    size_t index; /* EDFlib's file order, for ties */
} kept_annotation;

/* remtone's order: by onset, ties in file order. */
static int by_onset(const void *x, const void *y)
{
    const kept_annotation *a = x, *b = y;
    if (a->a.onset_s != b->a.onset_s)
        return a->a.onset_s < b->a.onset_s ? -1 : 1;
    return (a->index > b->index) - (a->index < b->index);
}

static bool same_bits(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

/* mine: remtone's annotations (n of them), or NULL when remtone refused the
 * file with message. Opens path with EDFlib and aborts on a difference. */
static void compare_with_edflib(const char *path, const rt_annotation *mine, size_t n, const char *message)
{
    struct edf_hdr_struct *h = calloc(1, sizeof *h);
    if (!h)
        return;
    bool edflib_ok = edfopen_file_readonly(path, h, EDFLIB_READ_ALL_ANNOTATIONS) == 0;
    bool tal_refusal = !mine && strstr(message, "annotation signal (signal ");
    bool stricter = tal_refusal && strstr(message, "more than 11 digits of whole seconds");
    if (mine && !edflib_ok)
        abort(); /* remtone read a file EDFlib refuses */
    if (tal_refusal && edflib_ok && !stricter)
        abort(); /* remtone refused a TAL EDFlib reads */
    if (mine && edflib_ok) {
        size_t count = (size_t)h->annotations_in_file;
        if (count != n)
            abort();
        kept_annotation *e = calloc(count ? count : 1, sizeof *e);
        for (size_t i = 0; e && i < count; i++) {
            struct edf_annotation_struct a;
            if (edf_get_annotation(h->handle, (int)i, &a) != 0)
                abort();
            e[i].a.onset_s = (double)a.onset / (double)EDFLIB_TIME_DIMENSION;
            e[i].a.duration_s = a.duration[0] ? (double)a.duration_l / (double)EDFLIB_TIME_DIMENSION : -1.0;
            snprintf(e[i].a.text, sizeof e[i].a.text, "%s", a.annotation);
            e[i].index = i;
        }
        if (e)
            qsort(e, count, sizeof *e, by_onset);
        for (size_t i = 0; e && i < count; i++)
            if (!same_bits(e[i].a.onset_s, mine[i].onset_s) || !same_bits(e[i].a.duration_s, mine[i].duration_s) ||
                strcmp(e[i].a.text, mine[i].text) != 0)
                abort();
        free(e);
    }
    if (edflib_ok)
        edfclose_file(h->handle);
    free(h);
}

static void read_channel(rt_recording *rec, int k)
{
    const rt_channel_info *ch = rt_recording_channel(rec, k);
    double out[READ_SAMPLES];
    rt_error err;
    long long n = ch->n_samples < READ_SAMPLES ? ch->n_samples : READ_SAMPLES;
    if (n <= 0)
        return;
    rt_error_clear(&err);
    if (rt_recording_read_uv(rec, k, 0, (size_t)n, out, &err) != RT_OK)
        check_message(&err);
    rt_error_clear(&err);
    if (rt_recording_read_uv(rec, k, ch->n_samples - n, (size_t)n, out, &err) != RT_OK)
        check_message(&err);
    /* one past the end must be refused, not read */
    if (rt_recording_read_uv(rec, k, ch->n_samples, 1, out, &err) == RT_OK)
        abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.edf", data, size);
    rt_error err;
    rt_error_clear(&err);
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK) {
        check_message(&err);
        compare_with_edflib(path, NULL, 0, err.message);
        return 0;
    }
    int n = rt_recording_channel_count(rec);
    volatile size_t sink = strlen(rt_recording_patient_text(rec)) + strlen(rt_recording_recording_text(rec));
    for (int k = 0; k < n; k++) {
        const rt_channel_info *ch = rt_recording_channel(rec, k);
        sink += strlen(ch->label) + strlen(ch->unit);
        if (k < MAX_CHANNELS_READ)
            read_channel(rec, k);
    }
    if (n > 0)
        sink += (size_t)rt_recording_find_channel(rec, rt_recording_channel(rec, 0)->label);
    size_t n_ann = rt_recording_annotation_count(rec);
    rt_annotation *mine = calloc(n_ann ? n_ann : 1, sizeof *mine);
    for (size_t i = 0; i < n_ann; i++) {
        sink += strlen(rt_recording_annotation(rec, i)->text);
        if (mine)
            mine[i] = *rt_recording_annotation(rec, i);
    }
    (void)sink;
    /* EDFlib opens a file once per process: remtone's recording goes first */
    rt_recording_close(rec);
    if (mine)
        compare_with_edflib(path, mine, n_ann, "");
    free(mine);
    return 0;
}
