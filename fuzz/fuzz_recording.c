/* Fuzz target: opening an EDF/EDF+/BDF file (remtone's header checks, then
 * EDFlib) and reading what a scoring run reads: every channel's header
 * values, a few samples at the start and the end of each channel, and the
 * annotations. Any input must give a recording or an error with a message,
 * never a crash, a sanitizer report or a leak. */
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
    for (size_t i = 0; i < n_ann; i++)
        sink += strlen(rt_recording_annotation(rec, i)->text);
    (void)sink;
    rt_recording_close(rec);
    return 0;
}
