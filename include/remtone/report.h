/* Writing results: the night result as text or JSON, the channel scan, the
 * rule table, and the clinical cautions every report quotes (SAFETY.md).
 * Files are written atomically (temporary file, then rename); the path "-"
 * writes to standard output. */
#ifndef REMTONE_REPORT_H
#define REMTONE_REPORT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

#include "remtone/recording.h"
#include "remtone/roles.h"
#include "remtone/score.h"
#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The cautions of SAFETY.md, in its order. Static strings. */
size_t rt_caution_count(void);
const char *rt_caution(size_t index);
/* "Published cutoffs come from visual scoring ..." */
const char *rt_visual_scoring_note(void);

struct rt_report_options;

/* Where a night's inputs came from, for the provenance block. Paths may be
 * NULL when an input was not given. report (may be NULL) gives the video
 * offset of the evidence rows. */
typedef struct rt_run_inputs {
    const char *recording;
    const char *stages;
    const char *events;
    const char *cutoffs;
    const char *label_map;
    const char *corrections;   /* a reviewer's decisions (docs/corrections.md) */
    const struct rt_report_options *report;
} rt_run_inputs;

/* The night result, schema "remtone-night/4" (docs/night-json.md). */
rt_status rt_night_write_json(const rt_night *night, const rt_run_inputs *inputs,
                              const char *path, rt_error *err);
/* The short text summary for people. */
rt_status rt_night_write_text(const rt_night *night, FILE *out, rt_error *err);

/* The channels of a recording with their detected roles and, when quality is
 * not NULL (rt_recording_quality, remtone/quality.h), each EMG channel's
 * quality summary. */
rt_status rt_scan_write_json(const rt_recording *rec, const rt_role_map *roles,
                             const rt_channel_quality *quality, const char *path, rt_error *err);
rt_status rt_scan_write_text(const rt_recording *rec, const rt_role_map *roles,
                             const rt_channel_quality *quality, FILE *out, rt_error *err);

/* The review page and its companions (docs/review-report.md). */
typedef struct rt_report_options {
    bool show_identity;        /* print patient name, birth date and free-text identity from the
                                  EDF header; false by default (privacy) */
    const char *recording_id;  /* shown instead of identity; NULL = the recording's file name */
    bool video_given;          /* give a video time beside every evidence row */
    double video_offset_s;     /* the video started this many seconds after the recording
                                  (negative: before); video time = recording time - this */
    unsigned annotate_rules;   /* bursts in the annotation file: RT_LABEL_AASM_PHASIC,
                                  RT_LABEL_SINBAR_PHASIC, RT_LABEL_MONTREAL_PHASIC or several
                                  ORed; 0 = SINBAR alone */
} rt_report_options;

/* The video offset from the clock time the video started (hour 0-23,
 * minute, second 0-59): the difference to the recording's start time taken
 * within -12 h .. +12 h, since a night's video starts near its recording. */
double rt_video_offset_from_clock(const rt_recording *rec, int hour, int minute, double second);

/* One self-contained HTML page (inline SVG and CSS, no scripts) for a
 * physician: identity (de-identified unless asked), REM minutes, headline,
 * review level and reasons, plots, ranked evidence epochs with clock times,
 * exclusions and quality, cautions. rec is read again for the envelopes of
 * the evidence epochs. */
rt_status rt_night_write_html(const rt_night *night, rt_recording *rec, const rt_timeline *tl,
                              const rt_report_options *options, const char *path, rt_error *err);

/* The audit table: one CSV row per REM 3-s mini-epoch and channel; epochs
 * and mini-epochs counted from 1, with clock time, seconds from the
 * recording start and, when options give one, the video time. options may
 * be NULL. */
rt_status rt_night_write_minis_csv(const rt_night *night, const rt_recording *rec,
                                   const rt_report_options *options, const char *path,
                                   rt_error *err);

/* The evidence list: every flagged REM epoch (one with detected activity), in
 * time order, one CSV row each: epoch (from 1), clock time, seconds from the
 * recording start, video time (when options give one), channels with
 * activity, rule sets that fired, strength (docs/review-report.md). */
rt_status rt_night_write_evidence_csv(const rt_night *night, const rt_recording *rec,
                                      const rt_report_options *options, const char *path,
                                      rt_error *err);

/* The detected activity and the evidence epochs as an EDF+ file (EDFlib's
 * writer) as long as the recording and timed against it: the bursts of the
 * rule sets of options->annotate_rules (SINBAR alone by default or with
 * options NULL), tonic runs, evidence epochs, and one 1-Hz signal marking
 * scored REM. */
rt_status rt_night_write_annotations(const rt_night *night, const rt_recording *rec,
                                     const rt_report_options *options, const char *path,
                                     rt_error *err);

/* The indices per REM period and per half of the night as CSV, one row per
 * period (1 .. N, then half-1 and half-2) and index: clock times, first and
 * last epoch counted from 1, REM and scorable minutes, value, status,
 * numerator, denominator (docs/review-report.md). rec (may be NULL) gives
 * the clock. */
rt_status rt_night_write_periods_csv(const rt_night *night, const rt_recording *rec,
                                     const char *path, rt_error *err);
/* One sentence in plain words for the referring physician: what was
 * measured, how it compares with the cutoff (and the norms when placed), the
 * reservations; never a diagnosis. The same in the text, JSON and page. */
void rt_night_plain_sentence(const rt_night *night, char *buf, size_t cap);
/* The rule table with the cutoffs in force. */
rt_status rt_rules_write_text(const rt_cutoffs *cutoffs, FILE *out, rt_error *err);
/* Every row of a lab's norms file (rt_norms_load), in file order: its index,
 * its percentile, value and stratum with the file's line, and its source and
 * method (`remtone rules --norms`). RT_ERR_IO on a write error. */
rt_status rt_norms_write_text(const rt_norms *norms, FILE *out, rt_error *err);

/* Writes the scoring parameter table (rt_score_param_table: name, default,
 * range, unit, source) as a Markdown page; docs/parameters.md is this
 * output, so the docs cannot drift from the code. RT_ERR_IO on a write error. */
rt_status rt_params_write_markdown(FILE *out, rt_error *err);

#ifdef __cplusplus
}
#endif
#endif
