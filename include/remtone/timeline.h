/* The night's timeline: a stage for every 30-s epoch, and events as intervals.
 *
 * Stages come from a stage table CSV (header `start_s,duration_s,stage`), from
 * EDF+ annotations (in the recording or in a separate EDF+ file), and, with the
 * XML module, from a scoring file. Events come from an event table CSV
 * (`start_s,duration_s,type`) or EDF+ annotations. Labels in AASM, Rechtschaffen
 * & Kales and EDF+ standard forms are understood; others need a label map.
 * Epochs nobody scored stay RT_STAGE_UNSCORED: they are never guessed.
 *
 * Ownership: rt_timeline_new() returns an object freed by rt_timeline_free();
 * the stages and events arrays belong to it. Fields are read-only for callers. */
#ifndef REMTONE_TIMELINE_H
#define REMTONE_TIMELINE_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/recording.h"
#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum rt_stage {
    RT_STAGE_UNSCORED = 0,
    RT_STAGE_W,
    RT_STAGE_N1,
    RT_STAGE_N2,
    RT_STAGE_N3,
    RT_STAGE_R,
    RT_STAGE_MOVEMENT,
    RT_STAGE_COUNT
} rt_stage;

typedef enum rt_event_type {
    RT_EVENT_AROUSAL = 0,
    RT_EVENT_APNEA,
    RT_EVENT_HYPOPNEA,
    RT_EVENT_RESP_AROUSAL,
    RT_EVENT_SNORE,
    RT_EVENT_ARTIFACT,
    RT_EVENT_LIMB_MOVEMENT,
    RT_EVENT_TYPE_COUNT
} rt_event_type;

typedef struct rt_event {
    double onset_s;      /* seconds from the recording start, >= 0 */
    double duration_s;   /* seconds, >= 0 */
    rt_event_type type;
} rt_event;

typedef struct rt_timeline {
    double epoch_s;          /* epoch length in seconds (30 unless a scoring file says otherwise) */
    size_t n_epochs;         /* epochs from the recording start to the last scored epoch */
    unsigned char *stages;   /* n_epochs values of rt_stage; epoch i covers [i*epoch_s, (i+1)*epoch_s) */
    size_t n_events;
    rt_event *events;        /* ordered by onset */
    double lights_off_s;     /* analysis starts here; 0 when not given */
    double lights_on_s;      /* analysis ends here; negative when not given */
} rt_timeline;

/* Short stage name: "?", "W", "N1", "N2", "N3", "R", "MT". */
const char *rt_stage_name(rt_stage stage);
/* Event type name as used in the event table: "arousal", "apnea", "hypopnea",
 * "resp-arousal", "snore", "artifact", "limb-movement". */
const char *rt_event_type_name(rt_event_type type);

/* A user label map: CSV `label,meaning`, where meaning is a stage (W, N1, N2,
 * N3, R, MT, ?) or an event type name, or `ignore`. Labels compare
 * case-insensitively after trimming. */
typedef struct rt_labelmap rt_labelmap;
rt_labelmap *rt_labelmap_load(const char *path, rt_error *err);
void rt_labelmap_free(rt_labelmap *map);

/* Interprets a stage label: AASM (W, N1, N2, N3, R), R&K (W, 1, 2, 3, 4, REM,
 * MT; 3 and 4 map to N3), EDF+ standard texts ("Sleep stage W" .. "Sleep stage
 * R", "Sleep stage ?", "Movement time"), then the label map (may be NULL).
 * Returns true and sets *stage when the label is a stage. */
bool rt_stage_parse(const char *label, const rt_labelmap *map, rt_stage *stage);

/* Interprets an event label (event table type names, common annotation texts
 * such as "Obstructive apnea" or "Arousal", then the label map). Returns true
 * and sets *type when the label is an event. */
bool rt_event_parse(const char *label, const rt_labelmap *map, rt_event_type *type);

rt_timeline *rt_timeline_new(void);
void rt_timeline_free(rt_timeline *tl);

/* Loads stages from a stage table CSV (comma or tab). Errors name the file and
 * line: unknown labels (all of them listed), overlapping or non-monotonic
 * entries, durations that are not whole epochs, empty staging. */
rt_status rt_timeline_load_stages_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err);

/* Loads events from an event table CSV (comma or tab), appending to tl. */
rt_status rt_timeline_load_events_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err);

/* Takes stages and/or events from a recording's EDF+ annotations. Annotations
 * that are neither a stage nor an event nor listed as ignorable are ignored
 * (EDF+ files carry many other annotations), except that with want_stages an
 * annotation containing "stage" that cannot be read is an error. */
rt_status rt_timeline_load_annotations(rt_timeline *tl, const rt_recording *rec,
                                       const rt_labelmap *map, bool want_stages,
                                       bool want_events, rt_error *err);

/* Loads stages (and events, when the file holds them) from `path`, telling the
 * format by content: an EDF/BDF header, an XML document (when the XML module
 * is built in), or a CSV table. */
rt_status rt_timeline_load_staging(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                   rt_error *err);

/* Checks the timeline against a recording of recording_s seconds: staging must
 * not run past the end (the message says by how much), must not be empty, and
 * events must lie inside the recording. */
rt_status rt_timeline_check(const rt_timeline *tl, double recording_s, rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
