/* rt_dump: shows what remtone reads from a recording, through the public API
 * only, so scripts can compare it with an outside reader (python3-mne).
 *
 *   rt_dump FILE                      JSON header description on stdout
 *   rt_dump FILE CHANNEL FIRST N      N samples of channel CHANNEL (0-based)
 *                                     from sample FIRST, in uV, one per line
 *
 * Exit status: 0 success, 1 usage, 2 the library refused the file (message on
 * stderr, prefixed with the status name). */
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/recording.h"

static const char *const KIND_NAMES[] = {"EDF", "EDF+", "BDF", "BDF+"};

/* Annotation text is UTF-8 by the EDF+ rule but not guaranteed; replace
 * non-ASCII bytes rather than emit invalid JSON. */
static json_t *text_value(const char *text)
{
    json_t *v = json_string(text);
    if (v)
        return v;
    char safe[1024];
    size_t n = 0;
    for (; text[n] && n + 1 < sizeof safe; n++)
        safe[n] = (unsigned char)text[n] < 128 ? text[n] : '?';
    safe[n] = '\0';
    return json_string(safe);
}

static json_t *channel_json(const rt_channel_info *ch)
{
    return json_pack("{s:o, s:o, s:o, s:f, s:I, s:f, s:b, s:f, s:f, s:i, s:i}", "label", text_value(ch->label),
                     "unit", text_value(ch->unit), "transducer", text_value(ch->transducer), "rate_hz",
                     ch->rate_hz, "n_samples", (json_int_t)ch->n_samples, "uv_per_unit", ch->uv_per_unit,
                     "is_voltage", ch->is_voltage, "phys_min", ch->phys_min, "phys_max", ch->phys_max,
                     "dig_min", ch->dig_min, "dig_max", ch->dig_max);
}

static json_t *annotation_json(const rt_annotation *a)
{
    return json_pack("{s:f, s:f, s:o}", "onset_s", a->onset_s, "duration_s", a->duration_s, "text",
                     text_value(a->text));
}

static int dump_header(const rt_recording *rec)
{
    json_t *channels = json_array(), *annotations = json_array();
    for (int i = 0; i < rt_recording_channel_count(rec); i++)
        json_array_append_new(channels, channel_json(rt_recording_channel(rec, i)));
    for (size_t i = 0; i < rt_recording_annotation_count(rec); i++)
        json_array_append_new(annotations, annotation_json(rt_recording_annotation(rec, i)));
    json_t *root = json_pack("{s:s, s:f, s:I, s:o, s:o, s:o, s:o}", "kind", KIND_NAMES[rt_recording_kind(rec)],
                             "duration_s", rt_recording_duration_s(rec), "file_size",
                             (json_int_t)rt_recording_file_size(rec), "patient",
                             text_value(rt_recording_patient_text(rec)), "recording",
                             text_value(rt_recording_recording_text(rec)), "channels", channels,
                             "annotations", annotations);
    if (!root)
        return 2;
    json_dumpf(root, stdout, JSON_INDENT(1) | JSON_REAL_PRECISION(17));
    putchar('\n');
    json_decref(root);
    return 0;
}

static int dump_samples(rt_recording *rec, int channel, long long first, size_t n)
{
    double *out = calloc(n ? n : 1, sizeof *out);
    rt_error err;
    if (!out)
        return 2;
    if (rt_recording_read_uv(rec, channel, first, n, out, &err) != RT_OK) {
        fprintf(stderr, "rt_dump: %s: %s\n", rt_status_name(err.status), err.message);
        free(out);
        return 2;
    }
    for (size_t i = 0; i < n; i++)
        printf("%.9g\n", out[i]);
    free(out);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc != 2 && argc != 5) {
        fprintf(stderr, "usage: rt_dump FILE [CHANNEL_INDEX FIRST N]\n");
        return 1;
    }
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(argv[1], &rec, &err) != RT_OK) {
        fprintf(stderr, "rt_dump: %s: %s\n", rt_status_name(err.status), err.message);
        return 2;
    }
    int rc = argc == 2 ? dump_header(rec)
                       : dump_samples(rec, atoi(argv[2]), atoll(argv[3]), (size_t)strtoull(argv[4], NULL, 10));
    rt_recording_close(rec);
    return rc;
}
