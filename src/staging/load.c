/* The staging dispatcher: tells a staging file's format from its first bytes
 * and hands it to its loader (EDF+ annotations, the XML scoring file, or the
 * stage table). It sits above the loaders, which sit above timeline.c; no
 * loader and nothing in timeline.c calls back up here (tests/cli/test_layers.sh). */
#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "internal.h"
#include "remtone/recording.h"
#include "remtone/timeline.h"

/* Format of a staging file as told by its first bytes. */
typedef enum staging_format { FORMAT_CSV, FORMAT_EDF, FORMAT_XML } staging_format;

static rt_status sniff_format(const char *path, staging_format *format, rt_error *err)
{
    struct stat st;
    if (stat(path, &st) != 0)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot open: %s", path, strerror(errno));
    if (S_ISDIR(st.st_mode))
        return rt_fail(err, RT_ERR_IO, "%s: is a directory, not a staging file", path);
    FILE *f = fopen(path, "rb");
    if (!f)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot open: %s", path, strerror(errno));
    unsigned char head[256];
    size_t n = fread(head, 1, sizeof head, f);
    int read_error = ferror(f);
    fclose(f);
    if (read_error)
        return rt_fail(err, RT_ERR_IO, "%s: cannot read", path);
    if (n >= 8 && (memcmp(head, "0       ", 8) == 0 || memcmp(head, "\xff" "BIOSEMI", 8) == 0)) {
        *format = FORMAT_EDF;
        return RT_OK;
    }
    size_t i = 0;
    if (n >= 3 && memcmp(head, "\xef\xbb\xbf", 3) == 0)
        i = 3;
    while (i < n && (head[i] == ' ' || head[i] == '\t' || head[i] == '\r' || head[i] == '\n'))
        i++;
    *format = (i < n && head[i] == '<') ? FORMAT_XML : FORMAT_CSV;
    return RT_OK;
}

rt_status rt_timeline_load_staging(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                   rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_staging: NULL argument");
    staging_format format = FORMAT_CSV;
    rt_status st = sniff_format(path, &format, err);
    if (st != RT_OK)
        return st;
    switch (format) {
    case FORMAT_EDF: {
        rt_recording *rec = NULL;
        if ((st = rt_recording_open(path, &rec, err)) != RT_OK)
            return st;
        st = rt_timeline_load_annotations(tl, rec, map, true, true, err);
        rt_recording_close(rec);
        return st;
    }
    case FORMAT_XML:
        /* Only remtone's own scoring schema is read; a label map has nothing
         * to do there (the schema fixes the stage and event names). */
        return rt_timeline_load_xml(tl, path, err);
    case FORMAT_CSV:
        break;
    }
    return rt_timeline_load_stages_csv(tl, path, map, err);
}
