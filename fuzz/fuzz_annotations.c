/* Fuzz target: EDF+/BDF+ annotations mapped to the night's timeline, the way
 * `remtone score` does with a recording that carries its own staging
 * (rt_timeline_load_annotations, then rt_timeline_check against the
 * recording's length), and the way a separate hypnogram file is taken
 * (rt_timeline_load_staging, which tells the format by content). */
#include <stdlib.h>

#include "fuzz_support.h"
#include "remtone/recording.h"
#include "remtone/timeline.h"

static void check_message(rt_status s, const rt_error *err)
{
    if (s != RT_OK && err->message[0] == '\0')
        abort();
}

/* A failed load must leave the timeline as it was: empty here. */
static void check_unchanged(rt_status s, const rt_timeline *tl)
{
    if (s != RT_OK && (tl->n_epochs != 0 || tl->n_events != 0))
        abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.edf", data, size);
    rt_error err;
    rt_error_clear(&err);
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) == RT_OK) {
        rt_timeline *tl = NULL;
        if (rt_timeline_new(&tl, NULL) != RT_OK)
            abort();
        rt_status s = rt_timeline_load_annotations(tl, rec, NULL, true, true, &err);
        check_message(s, &err);
        check_unchanged(s, tl);
        if (s == RT_OK) {
            rt_error_clear(&err);
            s = rt_timeline_check(tl, rt_recording_duration_s(rec) > 0 ? rt_recording_duration_s(rec) : 1,
                                  &err);
            check_message(s, &err);
        }
        rt_timeline_free(tl);
        rt_recording_close(rec);
    }
    /* EDFlib refuses a file already open in the process, so the hypnogram
     * route runs after the recording is closed */
    rt_timeline *tl = NULL;
    if (rt_timeline_new(&tl, NULL) != RT_OK)
        abort();
    rt_error_clear(&err);
    rt_status s = rt_timeline_load_staging(tl, path, NULL, &err);
    check_message(s, &err);
    check_unchanged(s, tl);
    rt_timeline_free(tl);
    return 0;
}
