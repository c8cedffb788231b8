/* Fuzz target: the label map CSV (`label,meaning`). A loaded map is then
 * consulted as the staging readers do, including with labels taken from the
 * input itself. */
#include <stdlib.h>
#include <string.h>

#include "fuzz_support.h"
#include "remtone/timeline.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const char *path = rt_fuzz_write_file("input.csv", data, size);
    rt_error err;
    rt_error_clear(&err);
    rt_labelmap *map = NULL;
    if (rt_labelmap_load(path, &map, &err) != RT_OK) {
        if (err.message[0] == '\0')
            abort();
        return 0;
    }
    /* the first line of the input, whatever it holds, as a label */
    char label[256];
    size_t n = 0;
    while (n < size && n < sizeof label - 1 && data[n] != '\n')
        n++;
    memcpy(label, data, n);
    label[n] = '\0';
    static const char *const probes[] = {"R", "Sleep stage R", "REM", "W", "Arousal", "snore", ""};
    rt_stage stage;
    rt_event_type type;
    for (size_t i = 0; i < sizeof probes / sizeof probes[0]; i++) {
        (void)rt_stage_parse(probes[i], map, &stage);
        (void)rt_event_parse(probes[i], map, &type);
        (void)rt_label_is_ignored(probes[i], map);
    }
    if (rt_stage_parse(label, map, &stage) && (unsigned)stage >= RT_STAGE_COUNT)
        abort();
    if (rt_event_parse(label, map, &type) && (unsigned)type >= RT_EVENT_TYPE_COUNT)
        abort();
    (void)rt_label_is_ignored(label, map);
    rt_labelmap_free(map);
    return 0;
}
