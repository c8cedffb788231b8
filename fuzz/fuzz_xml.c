/* Fuzz target: the remtone XML scoring file (rt_timeline_load_xml_memory).
 * A file that loads is written back (rt_timeline_write_xml) and read again:
 * timeline.h promises the file "loads back to an equal timeline", so any
 * difference in stages, events or manual scoring is a finding. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fuzz_support.h"
#include "remtone/timeline.h"

static void check_equal(const rt_timeline *a, const rt_timeline *b)
{
    if (a->n_epochs != b->n_epochs || a->n_events != b->n_events || a->n_manual != b->n_manual ||
        a->epoch_s != b->epoch_s)
        abort();
    if (a->n_epochs && memcmp(a->stages, b->stages, a->n_epochs) != 0)
        abort();
    for (size_t i = 0; i < a->n_events; i++)
        if (a->events[i].onset_s != b->events[i].onset_s || a->events[i].duration_s != b->events[i].duration_s ||
            a->events[i].type != b->events[i].type || a->events[i].role != b->events[i].role)
            abort();
    for (size_t i = 0; i < a->n_manual; i++)
        if (a->manual[i].onset_s != b->manual[i].onset_s || a->manual[i].role != b->manual[i].role ||
            a->manual[i].phasic != b->manual[i].phasic || a->manual[i].tonic != b->manual[i].tonic)
            abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    rt_timeline *tl = NULL;
    if (rt_timeline_new(&tl, NULL) != RT_OK)
        abort();
    rt_error err;
    rt_error_clear(&err);
    rt_status s = rt_timeline_load_xml_memory(tl, (const char *)data, size, "fuzz.xml", &err);
    if (s != RT_OK && (err.message[0] == '\0' || tl->n_epochs != 0 || tl->n_events != 0))
        abort();
    if (s == RT_OK && tl->n_epochs > 0) {
        char path[512];
        snprintf(path, sizeof path, "%s/roundtrip.xml", rt_fuzz_dir());
        rt_error_clear(&err);
        if (rt_timeline_write_xml(tl, path, &err) != RT_OK)
            abort();
        rt_timeline *back = NULL;
        if (rt_timeline_new(&back, NULL) != RT_OK)
            abort();
        if (rt_timeline_load_xml(back, path, &err) != RT_OK)
            abort();
        check_equal(tl, back);
        rt_timeline_free(back);
        remove(path);
    }
    rt_timeline_free(tl);
    return 0;
}
