/* Fuzz target: the stage table and event table CSV readers. The first byte
 * picks the reader (stage table, event table, or rt_timeline_load_staging,
 * which tells CSV, XML and EDF apart by content) and whether a label map is
 * in force; the rest is the file. A failed load must leave the timeline
 * unchanged, and every failure must carry a message. */
#include <stdlib.h>

#include "fuzz_support.h"
#include "remtone/timeline.h"

static rt_labelmap *fixed_map(void)
{
    /* a lab's map of the kind docs/staging.md shows: renamed stages, an
     * event and an ignored label */
    rt_labelmap *map = NULL;
    if (rt_labelmap_new(&map, NULL) != RT_OK || rt_labelmap_add(map, "Stage R", "R", NULL) != RT_OK ||
        rt_labelmap_add(map, "Wake", "W", NULL) != RT_OK ||
        rt_labelmap_add(map, "Snore?", "snore", NULL) != RT_OK ||
        rt_labelmap_add(map, "movement", "ignore", NULL) != RT_OK)
        abort();
    return map;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1)
        return 0;
    unsigned mode = data[0];
    const char *path = rt_fuzz_write_file("input.csv", data + 1, size - 1);
    rt_labelmap *map = (mode & 0x80) ? fixed_map() : NULL;
    rt_timeline *tl = NULL;
    if (rt_timeline_new(&tl, NULL) != RT_OK)
        abort();
    rt_error err;
    rt_error_clear(&err);
    rt_status s;
    switch (mode % 3) {
    case 0: s = rt_timeline_load_stages_csv(tl, path, map, &err); break;
    case 1: s = rt_timeline_load_events_csv(tl, path, map, &err); break;
    default: s = rt_timeline_load_staging(tl, path, map, &err); break;
    }
    if (s != RT_OK && (err.message[0] == '\0' || tl->n_epochs != 0 || tl->n_events != 0))
        abort();
    if (s == RT_OK) {
        for (size_t i = 0; i < tl->n_epochs; i++)
            if (tl->stages[i] >= RT_STAGE_COUNT)
                abort();
        for (size_t i = 1; i < tl->n_events; i++)
            if (tl->events[i].onset_s < tl->events[i - 1].onset_s)
                abort();
        rt_error_clear(&err);
        s = rt_timeline_check(tl, 8.0 * 3600.0, &err);
        if (s != RT_OK && err.message[0] == '\0')
            abort();
    }
    rt_timeline_free(tl);
    rt_labelmap_free(map);
    return 0;
}
