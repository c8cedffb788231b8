/* Pieces shared by the report writers (JSON, text); nothing here is public. */
#ifndef REMTONE_REPORT_INTERNAL_H
#define REMTONE_REPORT_INTERNAL_H

#include <stdbool.h>
#include <stdio.h>

#include <jansson.h>

#include "json_build.h"

#include "remtone/recording.h"
#include "remtone/score.h"

/* rt_json_write, which writes a JSON file atomically: json_build.h. */

/* {"path": path (when with_path), "bytes": size, "xxh3": digest} of a file
 * in *out, for provenance and resumable runs; on failure *out is NULL and the
 * status (RT_ERR_IO, RT_ERR_NOMEM) is returned. */
rt_status rt_file_identity_json(const char *path, bool with_path, json_t **out, rt_error *err);
/* o[key] = that identity of path; nothing when path is NULL. */
rt_status rt_file_identity_add(json_t *o, const char *key, const char *path, bool with_path,
                               rt_error *err);

/* Builders below that return json_t * are built with json_build.h: NULL
 * means out of memory. */

/* A JSON string of text made valid UTF-8 (rt_utf8_clean, src/common/text.h):
 * every text that comes from a file, a path or an error message goes through
 * this, never json_string, which refuses invalid UTF-8 and so would drop the
 * field or the whole document. NULL text gives "". NULL only when out of
 * memory. */
json_t *rt_json_text(const char *text);

/* Copies text into *out (the caller frees it) as valid XML 1.0 UTF-8: valid
 * UTF-8 sequences are kept, invalid bytes become U+FFFD, control characters
 * other than tab and newline become spaces. NULL text gives "". RT_ERR_NOMEM
 * (and *out NULL) when out of memory. */
rt_status rt_xml_clean_text(const char *text, char **out, rt_error *err);

/* A channel's quality summary as JSON (docs/night-json.md). */
json_t *rt_quality_json(const rt_channel_quality *q);

/* The agreement with a manual scoring as JSON (docs/agreement.md, "In the
 * night JSON"): {"present": false} when the night had none; otherwise the
 * scorer and, per role that has compared mini-epochs, per type ("phasic",
 * "tonic", "any"), the counts, percent agreement, kappa and the two rates
 * (null where undefined). Returns a new reference the caller owns (NULL only
 * when out of memory, as every builder here). */
json_t *rt_agreement_json(const rt_agreement *a);

/* The same as a short text table; writes nothing when a->present is false. */
void rt_agreement_write_text(const rt_agreement *a, FILE *out);

/* The "indices" object of the night JSON (docs/night-json.md) for the
 * index values given: night->index, or the automatic values of a corrected
 * night. */
json_t *rt_indices_json(const rt_night *night, const rt_index_value *index);

/* An index value in its unit as the text summary writes it ("12.3 %",
 * "0.812", "4.0/h", "-" when not finite). */
void rt_report_value_text(const rt_index_rule *rule, double v, char *buf, size_t cap);

/* A reviewer's corrections (docs/corrections.md) as the "corrections"
 * object of the night JSON: {"present": false} for a night not corrected. */
json_t *rt_corrections_json(const rt_night *night);
/* The same as text for the summary; nothing for a night not corrected. */
void rt_corrections_write_text(const rt_night *night, FILE *out);
/* The agreement table under a title of its own (rt_agreement_write_text
 * writes the manual scoring's). */
void rt_agreement_write_text_titled(const rt_agreement *a, const char *title, FILE *out);

/* Wall-clock time of onset_s after the recording start, "HH:MM:SS" (wraps at
 * midnight; sub-second start offsets included, the result rounded down). */
void rt_report_clock(const rt_clock_time *start, double onset_s, char *buf, size_t cap);
/* Elapsed time since the recording start, "H:MM:SS". */
void rt_report_elapsed(double seconds, char *buf, size_t cap);

/* The evidence order shared by the JSON result, the page and the annotation
 * file: REM epochs with activity > 0, highest activity first, earlier epoch
 * first among equals. Writes up to `limit` indices into night->epochs to
 * order[] and returns how many. */
size_t rt_report_rank_evidence(const rt_night *night, size_t *order, size_t limit);

/* The review level in plain words: "review advised", "near a cutoff",
 * "clear", "not assessable". */
const char *rt_report_level_plain(rt_review_level level);
/* The level as the reports state it, with what it rests on: "clear: no
 * verified cutoff is reached or near", or "clear, with reservations: ..."
 * when the night has any (and so for every level). */
void rt_report_statement(const rt_night *night, char *buf, size_t cap);
/* What the level rests on, with the words "reached" / "not reached" and the
 * kind of cutoff: "a published cutoff is reached", "a lab's own cutoff is
 * reached (lab.csv)", "no verified cutoff is reached or near", ... */
void rt_report_level_means(const rt_night *night, char *buf, size_t cap);
/* Index i against its cutoff in force: "reached", "not reached",
 * "not reached; intermediate (0.800 to 0.900)", "no cutoff", "not computed". */
void rt_report_status_words(const rt_night *night, int i, char *buf, size_t cap);
/* Whether index i's cutoff in force is reached: 1, 0, or -1 when it has no
 * cutoff or was not computed. */
int rt_report_cutoff_reached(const rt_night *night, int i);
/* The headline as one sentence: the value of "REM with preserved muscle
 * activity", whether its cutoff (published or the lab's) is reached, and,
 * when the preferred index cannot be computed, why and which index is shown
 * instead, or that none can be. */
void rt_report_headline(const rt_night *night, char *buf, size_t cap);
/* What index i counted, with units: "38 of 180 3-s mini-epochs",
 * "29 leg movements in 9.0 min of REM". */
void rt_report_counted(const rt_night *night, int i, char *buf, size_t cap);
/* The units of rt_report_counted: numerator and denominator nouns. */
const char *rt_report_numerator_unit(int i);
const char *rt_report_denominator_unit(int i);
/* "s" when n is not 1: "1 bout", "2 bouts". */
const char *rt_report_plural(size_t n);

/* What the staging covers, one line: "4.0 h staged of the 7.5-h recording;
 * partial, unstaged 3.5 h at the end (more than the 30.0 min allowed)". The
 * gaps are listed separately (night->staging.gaps). */
void rt_report_staging_text(const rt_night *night, char *buf, size_t cap);

/* An index value in its rule's unit: "12.3 %", "4.0/h", "0.812"; "-" when
 * not finite. */
void rt_report_value_text(const rt_index_rule *rule, double v, char *buf, size_t cap);
/* The sleep context, the REM periods and halves, and the norms (when
 * placed) as lines of the text summary. */
void rt_context_write_text(const rt_night *night, FILE *out);
/* The video time of t_s (seconds from the recording start) as "H:MM:SS",
 * "-H:MM:SS" before the video started; false (and "") when options give no
 * video offset (options may be NULL). */
struct rt_report_options;
bool rt_report_video_time(const struct rt_report_options *options, double t_s, char *buf,
                          size_t cap);
/* Whether REM epoch k (index into night->epochs) is flagged (has detected
 * activity) and, if so, the roles with activity ("chin leg-left") and the
 * rule sets that fired ("aasm-phasic sinbar-phasic sinbar-tonic"), space
 * separated. */
bool rt_report_evidence_words(const rt_night *night, size_t k, char *channels, size_t ch_cap,
                              char *rules, size_t rules_cap);

/* The last component of a path (the path itself when it has no '/'). */
const char *rt_report_basename(const char *path);

#endif
