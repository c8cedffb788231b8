/* The night's timeline: a stage for every 30-s epoch, and events as intervals.
 *
 * Stages come from a stage table CSV (header `start_s,duration_s,stage`), from
 * EDF+ annotations (in the recording or in a separate EDF+ file), and, with the
 * XML module, from a scoring file. Events come from an event table CSV
 * (`start_s,duration_s,type`) or EDF+ annotations. Labels in AASM, Rechtschaffen
 * & Kales and EDF+ standard forms are understood; others need a label map.
 * Epochs nobody scored stay RT_STAGE_UNSCORED: they are never guessed.
 *
 * Ownership: rt_timeline_new() makes an object (*out) freed by rt_timeline_free();
 * the stages, events and manual arrays belong to it. A timeline is made only
 * by rt_timeline_new (never declare or copy one: the library keeps the order
 * check's bookkeeping beside the public fields) and changed only through the
 * functions below; its fields are public for reading. */
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
    signed char role;    /* rt_role of the one channel the event concerns (roles.h),
                            -1 = the whole recording (the default) */
    char place[96];      /* where it was read ("events.csv line 3"), for messages; a
                            longer place keeps its end, after "..." */
} rt_event;

/* One mini-epoch of a manual RSWA scoring (from an XML scoring file), used
 * to measure agreement between a scorer and remtone. */
typedef struct rt_manual_mini {
    double onset_s;          /* onset of the 3-s mini-epoch, on the epoch's 3-s grid */
    signed char role;        /* rt_role scored (roles.h) */
    unsigned char phasic;    /* 1 when the scorer marked phasic activity */
    unsigned char tonic;     /* 1 when the scorer marked tonic activity */
} rt_manual_mini;

typedef struct rt_timeline {
    double epoch_s;          /* epoch length in seconds, > 0 (30 unless a scoring file says
                                otherwise; rt_night_score needs 30) */
    size_t n_epochs;         /* epochs from the recording start to the last scored epoch */
    unsigned char *stages;   /* n_epochs values of rt_stage; epoch i covers [i*epoch_s, (i+1)*epoch_s);
                                NULL when n_epochs is 0 */
    size_t n_events;
    rt_event *events;        /* n_events, ordered by onset (NULL when none) */
    double lights_off_s;     /* analysis starts here, s from the recording start; 0 when not given */
    double lights_on_s;      /* analysis ends here, s; negative when not given */
    size_t n_manual;         /* manual RSWA scoring, when the scoring file holds one */
    rt_manual_mini *manual;  /* n_manual, ordered by onset, then role (NULL when none) */
    char scorer[128];        /* who scored the night ("" when unknown) */
    char scored_on[32];      /* when, as written in the scoring file ("" when unknown) */
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

/* The map's CSV has a header row naming the columns `label` and `meaning`
 * (any order, comma or tab, as the stage table). A label listed twice with
 * different meanings is an error naming the line. The caller frees the map
 * with rt_labelmap_free(). On success *out holds the map; on failure *out is
 * NULL and the status is RT_ERR_IO, RT_ERR_STAGING or RT_ERR_NOMEM. */
rt_status rt_labelmap_load(const char *path, rt_labelmap **out, rt_error *err);
/* An empty map in *out, to be filled with rt_labelmap_add(); RT_ERR_NOMEM
 * (and *out NULL) when out of memory. */
rt_status rt_labelmap_new(rt_labelmap **out, rt_error *err);
/* Adds label -> meaning (meaning as in the CSV: W, N1, N2, N3, R, MT, ? or
 * unscored, an event type name, or ignore; case-insensitive). The strings are
 * copied. Fails with RT_ERR_STAGING for an unknown meaning, an empty label,
 * or a label already mapped to something else (the message names the label). */
rt_status rt_labelmap_add(rt_labelmap *map, const char *label, const char *meaning, rt_error *err);
/* Accepts NULL. */
void rt_labelmap_free(rt_labelmap *map);
/* True when the map (may be NULL) lists label as `ignore`. */
bool rt_label_is_ignored(const char *label, const rt_labelmap *map);

/* Interprets a stage label. The label map (may be NULL) is consulted first,
 * so a lab can redefine any built-in form (a label mapped to an event or to
 * `ignore` is then not a stage). Then the built-in forms: AASM (W, N1, N2, N3,
 * R), R&K (W, 1, 2, 3, 4, REM, MT; 3 and 4 map to N3), EDF+ standard texts
 * ("Sleep stage W" .. "Sleep stage R", "Sleep stage ?", "Movement time") and
 * the common variants listed in docs/staging.md ("?", "U" and "unscored" give
 * RT_STAGE_UNSCORED). Built-in forms compare case-insensitively after trimming,
 * with runs of spaces, '_' and '-' taken as one space.
 * Returns true and sets *stage when the label is a stage. */
bool rt_stage_parse(const char *label, const rt_labelmap *map, rt_stage *stage);

/* Interprets an event label: the label map first (may be NULL), then event
 * table type names and common annotation texts such as "Obstructive apnea"
 * or "Arousal" (list in docs/staging.md). Returns true and sets *type when
 * the label is an event. */
bool rt_event_parse(const char *label, const rt_labelmap *map, rt_event_type *type);

/* An empty timeline in *out: 30-s epochs, no stages, no events, lights not
 * given. RT_ERR_NOMEM (and *out NULL) when out of memory. */
rt_status rt_timeline_new(rt_timeline **out, rt_error *err);
/* Accepts NULL. */
void rt_timeline_free(rt_timeline *tl);

/* The one checked path by which every loader (CSV, EDF+ annotations, XML)
 * adds stages. Adds a run of `stage` from start_s for duration_s seconds.
 * start_s must be >= 0 and on the epoch grid, duration_s a whole number of
 * epochs (both within 1e-6 s), and the run must start at or after the end of
 * the previous run (runs come in time order, without overlap). Epochs between
 * runs stay RT_STAGE_UNSCORED; a run of RT_STAGE_UNSCORED only advances the
 * order check, so n_epochs ends at the last epoch with a real stage. Runs may
 * not reach past 31 days. Messages start with `source` (a file name, or a
 * place such as "night.edf: annotation 7") and, when line > 0, "line N".
 * Returns RT_ERR_STAGING or RT_ERR_NOMEM on failure, leaving tl unchanged
 * (RT_ERR_USAGE when tl is NULL, RT_ERR_INTERNAL when stage is not an
 * rt_stage). */
rt_status rt_timeline_add_stage_run(rt_timeline *tl, double start_s, double duration_s,
                                    rt_stage stage, const char *source, long line,
                                    rt_error *err);

/* Adds an event, keeping events ordered by onset (events of equal onset keep
 * the order they were added in). onset_s >= 0 and duration_s >= 0, both
 * finite, ending within 31 days; source and line as for
 * rt_timeline_add_stage_run. RT_ERR_STAGING or RT_ERR_NOMEM on failure,
 * leaving tl unchanged (RT_ERR_USAGE when tl is NULL, RT_ERR_INTERNAL when
 * type is not an rt_event_type). */
rt_status rt_timeline_add_event(rt_timeline *tl, double onset_s, double duration_s,
                                rt_event_type type, const char *source, long line,
                                rt_error *err);

/* As rt_timeline_add_event, for an event that concerns one channel: role is
 * an rt_role (roles.h, 0 .. RT_ROLE_COUNT-1) or -1 for the whole recording.
 * Any other role is RT_ERR_STAGING. */
rt_status rt_timeline_add_event_role(rt_timeline *tl, double onset_s, double duration_s,
                                     rt_event_type type, int role, const char *source,
                                     long line, rt_error *err);

/* Length of a manual RSWA mini-epoch, seconds (the SINBAR 3-s mini-epoch). */
#define RT_MANUAL_MINI_S 3.0

/* Adds one mini-epoch of manual RSWA scoring, keeping tl->manual ordered by
 * onset, then role. onset_s must lie on the 3-s grid of its epoch (within
 * 1e-6 s; epoch i's minis start at i*epoch_s + 3k with 3k + 3 <= epoch_s);
 * role is 0 .. RT_ROLE_COUNT-1; the same onset and role twice is an error.
 * source and line as for rt_timeline_add_stage_run. RT_ERR_STAGING or
 * RT_ERR_NOMEM on failure, leaving tl unchanged. */
rt_status rt_timeline_add_manual(rt_timeline *tl, double onset_s, int role, bool phasic,
                                 bool tonic, const char *source, long line, rt_error *err);

/* Moves src's stages and events into tl, all or nothing, leaving src empty
 * (still to be freed by its owner). Events are merged in onset order. src's
 * stages are taken only when tl holds none (a timeline takes its stages from
 * one source); a tl without stages or manual scoring takes src's epoch
 * length, otherwise the two must agree; lights_off_s/lights_on_s, scorer
 * and scored_on are taken when src gives them; src's manual scoring is taken
 * when tl holds none (two manual scorings are an error). The loaders build
 * into a scratch timeline and merge on success, so a failed load leaves tl
 * unchanged. */
rt_status rt_timeline_merge(rt_timeline *tl, rt_timeline *src, rt_error *err);

/* Loads stages from a stage table CSV (comma or tab). Errors name the file and
 * line: unknown labels (all of them listed), overlapping or non-monotonic
 * entries, durations that are not whole epochs, empty staging. tl must hold
 * no stages yet; on failure it is left unchanged. Rows whose label the map
 * marks `ignore` are skipped (their epochs stay unscored). */
rt_status rt_timeline_load_stages_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err);

/* Loads events from an event table CSV (comma or tab), appending to tl (which
 * is left unchanged on failure). Durations must be > 0; unknown types are all
 * listed; rows whose type the map marks `ignore` are skipped. */
rt_status rt_timeline_load_events_csv(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                      rt_error *err);

/* Takes stages and/or events from a recording's EDF+ annotations. Annotations
 * that are neither a stage nor an event nor listed as ignorable are ignored
 * (EDF+ files carry many other annotations), except that with want_stages an
 * annotation containing "stage" that cannot be read is an error.
 * A stage annotation with a duration covers duration/epoch_s epochs; one
 * without (or with duration 0) lasts until the next stage annotation, or one
 * epoch when it is the last. Stage onsets must lie on the epoch grid within
 * 1 ms (they are then snapped to it). With want_stages, "Lights off" and
 * "Lights on" set lights_off_s and lights_on_s. Event annotations without a
 * duration get duration 0; one with an onset before the file start (EDF+
 * allows it) is clipped to start at 0 s, or dropped when it ends before 0 s.
 * Messages number annotations
 * from 1 in onset order. tl is left unchanged on failure; with want_stages it
 * must hold no stages yet. */
rt_status rt_timeline_load_annotations(rt_timeline *tl, const rt_recording *rec,
                                       const rt_labelmap *map, bool want_stages,
                                       bool want_events, rt_error *err);

/* Loads stages (and events, when the file holds them) from `path`, telling the
 * format by content: an EDF/BDF header ("0       " or "\xffBIOSEMI" in the
 * first 8 bytes: its annotations are read), a remtone XML scoring file (first
 * character '<' after an optional BOM and white space: rt_timeline_load_xml),
 * or else a stage table CSV. */
rt_status rt_timeline_load_staging(rt_timeline *tl, const char *path, const rt_labelmap *map,
                                   rt_error *err);

/* Loads a remtone XML scoring file (docs/scoring-file.md; schema
 * docs/remtone-scoring.xsd, compiled into the library): stages, events with
 * their channel, lights, scorer and date, and the manual RSWA scoring. The
 * file (at most 64 MiB) is read whole, parsed without network access, and
 * refused outright when it has a document type declaration (so no entity is
 * ever expanded and no external file is read); it is then validated against
 * the schema. Errors are RT_ERR_IO (cannot read) or RT_ERR_STAGING naming the
 * file, the line and the reason. Stages go through rt_timeline_add_stage_run,
 * events through rt_timeline_add_event_role, into a scratch timeline merged
 * on success: tl is unchanged on failure and must hold no stages yet.
 * Thread-safe: all libxml2 state is per call. */
rt_status rt_timeline_load_xml(rt_timeline *tl, const char *path, rt_error *err);

/* As rt_timeline_load_xml on len bytes in memory; name is used in messages. */
rt_status rt_timeline_load_xml_memory(rt_timeline *tl, const char *data, size_t len,
                                      const char *name, rt_error *err);

/* Writes tl as a remtone XML scoring file at path (atomically: a temporary
 * file renamed into place). Stages become runs, events keep their channel,
 * and lights, scorer, date and manual scoring are written when present.
 * Numbers are written as the shortest plain decimal that reads back as the
 * same double, so the file loads back to an equal timeline. RT_ERR_USAGE
 * when tl has no staged epoch; RT_ERR_IO when the file cannot be written. */
rt_status rt_timeline_write_xml(const rt_timeline *tl, const char *path, rt_error *err);

/* Checks the timeline against a recording of recording_s seconds (> 0):
 * staging must not run past the end (the message says by how many seconds and
 * epochs; a final epoch the recording covers only in part counts as past the
 * end), must not be empty, and events must lie inside the recording (within
 * 1e-6 s). Returns RT_ERR_STAGING, or RT_ERR_USAGE for a bad recording_s. */
rt_status rt_timeline_check(const rt_timeline *tl, double recording_s, rt_error *err);

/* Where the latest stage run came from ("stages.csv line 9", a scoring file's
 * line), for messages about the staging; "" when no run was added. */
const char *rt_timeline_staging_place(const rt_timeline *tl);

#ifdef __cplusplus
}
#endif
#endif
