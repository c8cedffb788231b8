/* The staging dispatcher: tells a staging file's format from its first bytes
 * and hands it to its loader (EDF+ annotations, the XML scoring file, or the
 * stage table). It sits above the loaders, which sit above timeline.c; no
 * loader and nothing in timeline.c calls back up here (tests/cli/test_layers.sh). */
#include "internal.h"
#include "table.h"
#include "remtone/recording.h"
#include "remtone/timeline.h"

rt_status rt_timeline_load_staging(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                   rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_staging: NULL argument");
    rt_input_format format = RT_INPUT_CSV;
    rt_status st = rt_input_sniff(path, "staging file", &format, err);
    if (st != RT_OK)
        return st;
    switch (format) {
    case RT_INPUT_EDF: {
        rt_recording *rec = NULL;
        if ((st = rt_recording_open(path, &rec, err)) != RT_OK)
            return st;
        st = rt_timeline_load_annotations(tl, rec, map, true, true, err);
        rt_recording_close(rec);
        return st;
    }
    case RT_INPUT_XML:
        /* Only remtone's own scoring schema is read; a label map has nothing
         * to do there (the schema fixes the stage and event names). */
        return rt_timeline_load_xml(tl, path, err);
    case RT_INPUT_CSV:
        break;
    }
    return rt_timeline_load_stages_csv(tl, path, map, err);
}
