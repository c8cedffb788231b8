/* A technologist's corrections of a scored night, and the night rescored
 * with them (docs/corrections.md).
 *
 * A reviewer reads the evidence and records decisions: confirm what remtone
 * marked on a 3-s mini-epoch and channel, reject a detection (with a reason),
 * add activity remtone missed, or leave a stretch of the night out. The
 * decisions come from one of three files, all read into one rt_corrections:
 * the mini-epoch audit table (CSV, the `decision` columns filled in a
 * spreadsheet), an EDF+ annotation file (texts defined in docs/corrections.md)
 * or the <corrections> element of a remtone XML scoring file.
 * rt_night_correct() then checks every decision against the night and
 * rescores: the night's indices, level, reasons and reservations become the
 * corrected ones, and night->corrections keeps the automatic values, what
 * changed per index, and the agreement (Cohen's kappa) between remtone and
 * the reviewer over the decided mini-epochs.
 *
 * Ownership: rt_corrections_load() makes an object freed by
 * rt_corrections_free(); night->corrections belongs to the night. */
#ifndef REMTONE_CORRECTIONS_H
#define REMTONE_CORRECTIONS_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/score.h"
#include "remtone/status.h"
#include "remtone/timeline.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum rt_decision_kind {
    RT_DECISION_CONFIRM = 0, /* remtone's marks on this mini-epoch and channel are right */
    RT_DECISION_REJECT,      /* a detection is wrong: remove it (a reason is given) */
    RT_DECISION_ADD,         /* activity remtone missed */
    RT_DECISION_EXCLUDE,     /* leave a stretch out of every index (a reason is given) */
    RT_DECISION_KINDS
} rt_decision_kind;

typedef enum rt_decision_activity {
    RT_ACTIVITY_ANY = 0,     /* reject: every mark; confirm and exclude: always */
    RT_ACTIVITY_PHASIC,
    RT_ACTIVITY_TONIC
} rt_decision_activity;

typedef enum rt_decision_reason {
    RT_REASON_NONE = 0,      /* confirm and add */
    RT_REASON_ARTIFACT,      /* "artifact" */
    RT_REASON_NOT_REM,       /* "not-rem": the epoch is not REM sleep after all */
    RT_REASON_AROUSAL,       /* "arousal": the activity belongs to an arousal */
    RT_REASON_OTHER,         /* "other" */
    RT_REASON_COUNT
} rt_decision_reason;

typedef struct rt_decision {
    rt_decision_kind kind;
    rt_decision_activity activity;
    int role;                /* rt_role (not ECG); -1 for an exclusion (every channel) */
    double start_s;          /* seconds from the recording start: a time inside the 3-s
                                mini-epoch decided on, or the start of an excluded stretch */
    double end_s;            /* exclusion: the end of the stretch (> start_s); else start_s */
    rt_decision_reason reason;
    char reviewer[128];      /* who decided (never empty) */
    char decided_at[40];     /* when, as the file writes it (never empty) */
    long place;              /* line (CSV, XML) or annotation number (EDF+), from 1 */
} rt_decision;

typedef struct rt_corrections {
    char path[4096];         /* the file read */
    char place_word[16];     /* "line" or "annotation": how `place` counts */
    bool timed;              /* an EDF+ file: its onsets count from `start`, which must be the
                                recording's start (rt_night_correct checks it) */
    rt_clock_time start;
    size_t n;
    rt_decision *decisions;  /* in the file's order */
} rt_corrections;

/* "confirm", "reject", "add", "exclude"; "phasic", "tonic", "any";
 * "", "artifact", "not-rem", "arousal", "other". */
const char *rt_decision_kind_name(rt_decision_kind kind);
const char *rt_decision_activity_name(rt_decision_activity activity);
const char *rt_decision_reason_name(rt_decision_reason reason);
/* Inverse of rt_decision_reason_name for a non-empty name (case-insensitive);
 * false when unknown. */
bool rt_decision_reason_parse(const char *name, rt_decision_reason *out);

/* An empty set of decisions for path (used in messages), counted by
 * place_word ("line", "annotation"). RT_ERR_NOMEM when out of memory. */
rt_status rt_corrections_new(const char *path, const char *place_word, rt_corrections **out,
                             rt_error *err);
/* Checks one decision on its own (kind, activity, role, times finite and
 * within 31 days, end after start for an exclusion, a reason for a
 * rejection or an exclusion and none otherwise, reviewer and time given)
 * and appends a copy. RT_ERR_STAGING naming the file and place;
 * RT_ERR_NOMEM. */
rt_status rt_corrections_add(rt_corrections *c, const rt_decision *d, rt_error *err);
void rt_corrections_free(rt_corrections *c);

/* Reads decisions from path, telling the format by content: an EDF/BDF
 * header (EDF+ annotations), '<' after an optional BOM and white space (the
 * <corrections> of a remtone XML scoring file), or else the mini-epoch
 * table CSV. Formats: docs/corrections.md. RT_ERR_IO when the file cannot be
 * read; RT_ERR_STAGING naming the file and line (or annotation number) for
 * anything malformed; RT_ERR_NOMEM. A file without any decision is an
 * error: it would rescore nothing. */
rt_status rt_corrections_load(const char *path, rt_corrections **out, rt_error *err);

/* Appends the decisions of the <corrections> element of the remtone XML
 * scoring file c->path (read and validated against the schema as
 * rt_timeline_load_xml does; src/staging/xml.c). */
rt_status rt_corrections_load_xml(rt_corrections *c, rt_error *err);

/* ---- The night rescored ------------------------------------------------ */

/* What the decisions changed in one index, in its units (3-s or 2-s
 * mini-epochs, 30-s epochs): units that count now and did not (added), that
 * counted and do not (removed), and units the reviewer's exclusions took
 * out of the denominator (left_out). Indices counted on seconds or 20-s
 * windows (the REM Atonia Index, Montreal tonic) and the leg-movement rate
 * are not reached by decisions on 3-s mini-epochs: `reached` is false. */
typedef struct rt_index_change {
    bool reached;
    size_t added, removed, left_out;
} rt_index_change;

/* One applied decision on a 3-s mini-epoch (per mini-epoch and channel for
 * confirm, reject and add; per mini-epoch for an exclusion), for the audit
 * table and the page. */
typedef struct rt_applied_decision {
    size_t mini;             /* index into night->minis3 */
    int role;                /* -1: the whole mini-epoch left out */
    size_t decision;         /* index into decisions */
} rt_applied_decision;

typedef struct rt_night_corrections {
    char path[4096];
    size_t n_decisions;
    rt_decision *decisions;          /* a copy of the file's decisions */
    size_t counts[RT_DECISION_KINDS];
    size_t n_applied;
    rt_applied_decision *applied;    /* ordered by mini, then role (-1 first) */
    size_t minis_left_out;           /* 3-s mini-epochs the exclusions took out */
    char reviewers[256];             /* the distinct reviewers, joined by ", " */
    /* the automatic result, before the decisions */
    rt_index_value automatic[RT_IX_COUNT];
    rt_review_level automatic_level;
    size_t automatic_n_reasons;
    char automatic_reasons[RT_IX_COUNT + 4][240];
    rt_index_change change[RT_IX_COUNT];
    /* remtone against the reviewer over the mini-epochs confirmed, rejected or
     * added on (not left out), per role and type (docs/corrections.md) */
    rt_agreement agreement;
    unsigned char *labels;           /* n_minis3 x RT_ROLE_COUNT corrected labels */
} rt_night_corrections;

/* Checks every decision against the night and rescores it. tl is the
 * timeline the night was scored with (for the stage of a refused epoch).
 * Refused, with RT_ERR_STAGING naming the file and place: a time past the
 * end of the recording, a mini-epoch outside scored REM (the message gives
 * its stage), a channel the night does not have, two decisions on the same
 * mini-epoch and channel, a confirm or reject on a mini-epoch without the
 * marks it names, an add of activity already marked, an exclusion that
 * covers no REM. Nothing is dropped silently and the night is unchanged on
 * failure. A night already corrected is RT_ERR_USAGE. The result is the same
 * for the same decisions in any order. RT_ERR_NOMEM. */
rt_status rt_night_correct(rt_night *night, const rt_timeline *tl, const rt_corrections *c,
                           rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
