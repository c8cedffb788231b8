/* A reviewer's corrections (docs/corrections.md): one set of decisions read
 * from the mini-epoch table CSV, an EDF+ annotation file or an XML scoring
 * file's <corrections> (src/staging/xml.c), then checked against the night
 * and applied. The night is rescored on its own labels: corrected copies of
 * the mini-epochs and epochs go through the same index counting as the
 * automatic ones (rt_night_resummarise), so an index cannot be counted one
 * way automatically and another way corrected. remtone's own detections stay
 * in the night (minis3, minis2, epochs) beside the corrected labels, because
 * the audit table must show what remtone found and what the reviewer decided.
 * A decision that does not fit the night is refused with its file and place,
 * never dropped: a dropped correction would give a corrected result that the
 * reviewer did not make. */
#include <ctype.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "agreement.h"
#include "internal.h"
#include "night_internal.h"
#include "table.h"
#include "remtone/corrections.h"
#include "remtone/roles.h"

#define MINI_S 3.0
#define MINI2_S 2.0
#define MINIS_PER_EPOCH 10
#define LONGEST_S (31.0 * 86400.0)
/* Times from text: 1 us absorbs decimal rounding, far below a mini-epoch. */
#define TIME_TOL_S 1e-6

/* ---- Names --------------------------------------------------------------- */

static const char *const KIND_NAMES[RT_DECISION_KINDS] = {"confirm", "reject", "add", "exclude"};
static const char *const ACTIVITY_NAMES[] = {"any", "phasic", "tonic"};
static const char *const REASON_NAMES[RT_REASON_COUNT] = {"", "artifact", "not-rem", "arousal",
                                                          "other"};

const char *rt_decision_kind_name(rt_decision_kind kind)
{
    return (unsigned)kind < RT_DECISION_KINDS ? KIND_NAMES[kind] : "unknown";
}

const char *rt_decision_activity_name(rt_decision_activity activity)
{
    return (unsigned)activity <= RT_ACTIVITY_TONIC ? ACTIVITY_NAMES[activity] : "unknown";
}

const char *rt_decision_reason_name(rt_decision_reason reason)
{
    return (unsigned)reason < RT_REASON_COUNT ? REASON_NAMES[reason] : "unknown";
}

bool rt_decision_reason_parse(const char *name, rt_decision_reason *out)
{
    for (int i = 1; i < RT_REASON_COUNT; i++)
        if (rt_equal_nocase(name, REASON_NAMES[i])) {
            *out = (rt_decision_reason)i;
            return true;
        }
    return false;
}

static bool kind_parse(const char *name, rt_decision_kind *out)
{
    for (int i = 0; i < RT_DECISION_KINDS; i++)
        if (rt_equal_nocase(name, KIND_NAMES[i])) {
            *out = (rt_decision_kind)i;
            return true;
        }
    return false;
}

static bool activity_parse(const char *name, rt_decision_activity *out)
{
    for (int i = RT_ACTIVITY_PHASIC; i <= RT_ACTIVITY_TONIC; i++)
        if (rt_equal_nocase(name, ACTIVITY_NAMES[i])) {
            *out = (rt_decision_activity)i;
            return true;
        }
    return false;
}

/* ---- The set of decisions ------------------------------------------------ */

static rt_status fail_at(rt_error *err, rt_status status, const rt_corrections *c, long place,
                         const char *fmt, ...) RT_PRINTF(5, 6);
static rt_status fail_at(rt_error *err, rt_status status, const rt_corrections *c, long place,
                         const char *fmt, ...)
{
    char what[700];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    if (place > 0)
        return rt_fail(err, status, "%s %s %ld: %s", c->path, c->place_word, place, what);
    return rt_fail(err, status, "%s: %s", c->path, what);
}

rt_status rt_corrections_new(const char *path, const char *place_word, rt_corrections **out,
                             rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_corrections_new: no place for the result");
    *out = NULL;
    rt_corrections *c = rt_calloc(1, sizeof *c);
    if (!c)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path ? path : "corrections");
    rt_copy_string(c->path, sizeof c->path, path ? path : "corrections");
    rt_copy_string(c->place_word, sizeof c->place_word, place_word ? place_word : "line");
    *out = c;
    return RT_OK;
}

void rt_corrections_free(rt_corrections *c)
{
    if (!c)
        return;
    free(c->decisions);
    free(c);
}

static bool all_digits(const char *s, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!isdigit((unsigned char)s[i]))
            return false;
    return true;
}

/* YYYY-MM-DD, optionally followed by T (or a space) and HH:MM, then anything
 * of seconds, fraction and zone: ISO 8601 as spreadsheets and xs:dateTime
 * write it. */
static bool date_text_ok(const char *s)
{
    size_t n = strlen(s);
    if (n < 10 || !all_digits(s, 4) || s[4] != '-' || !all_digits(s + 5, 2) || s[7] != '-' ||
        !all_digits(s + 8, 2))
        return false;
    if (n == 10)
        return true;
    if ((s[10] != 'T' && s[10] != ' ') || n < 16 || !all_digits(s + 11, 2) || s[13] != ':' ||
        !all_digits(s + 14, 2))
        return false;
    for (size_t i = 16; i < n; i++)
        if (!isdigit((unsigned char)s[i]) && !strchr(":.+-Z", s[i]))
            return false;
    return true;
}

rt_status rt_corrections_add(rt_corrections *c, const rt_decision *d, rt_error *err)
{
    if (!c || !d)
        return rt_fail(err, RT_ERR_USAGE, "rt_corrections_add: NULL argument");
    rt_decision x = *d;
    long at = x.place;
    if ((unsigned)x.kind >= RT_DECISION_KINDS || (unsigned)x.activity > RT_ACTIVITY_TONIC ||
        (unsigned)x.reason >= RT_REASON_COUNT)
        return fail_at(err, RT_ERR_STAGING, c, at, "not a decision");
    const char *kind = rt_decision_kind_name(x.kind);
    if (!isfinite(x.start_s) || x.start_s < 0.0 || x.start_s > LONGEST_S)
        return fail_at(err, RT_ERR_STAGING, c, at, "%s at %.10g s: not a time within 0 s .. 31 days",
                       kind, x.start_s);
    if (x.kind == RT_DECISION_EXCLUDE) {
        if (!isfinite(x.end_s) || x.end_s > LONGEST_S || !(x.end_s > x.start_s))
            return fail_at(err, RT_ERR_STAGING, c, at,
                           "exclude: the stretch must end after it starts (%.10g s .. %.10g s)",
                           x.start_s, x.end_s);
        x.role = -1;
        x.activity = RT_ACTIVITY_ANY;
    } else {
        x.end_s = x.start_s;
        if (x.role < 0 || x.role >= RT_ROLE_COUNT || x.role == RT_ROLE_ECG)
            return fail_at(err, RT_ERR_STAGING, c, at, "%s: needs an EMG channel role (chin, "
                           "arm-left, arm-right, leg-left, leg-right)", kind);
        if (x.kind == RT_DECISION_ADD && x.activity == RT_ACTIVITY_ANY)
            return fail_at(err, RT_ERR_STAGING, c, at, "add: say phasic or tonic");
        if (x.kind == RT_DECISION_CONFIRM && x.activity != RT_ACTIVITY_ANY)
            return fail_at(err, RT_ERR_STAGING, c, at,
                           "confirm applies to all of remtone's marks on the mini-epoch; it "
                           "takes no activity type");
    }
    bool needs_reason = x.kind == RT_DECISION_REJECT || x.kind == RT_DECISION_EXCLUDE;
    if (needs_reason && x.reason == RT_REASON_NONE)
        return fail_at(err, RT_ERR_STAGING, c, at,
                       "%s needs a reason: artifact, not-rem, arousal or other", kind);
    if (!needs_reason && x.reason != RT_REASON_NONE)
        return fail_at(err, RT_ERR_STAGING, c, at, "%s takes no reason", kind);
    rt_trim(x.reviewer);
    rt_trim(x.decided_at);
    if (!x.reviewer[0])
        return fail_at(err, RT_ERR_STAGING, c, at, "%s: no reviewer named", kind);
    if (!date_text_ok(x.decided_at))
        return fail_at(err, RT_ERR_STAGING, c, at,
                       "%s: the decision time \"%s\" is not YYYY-MM-DD or YYYY-MM-DDTHH:MM[:SS]",
                       kind, x.decided_at);
    if (c->n >= ((size_t)-1) / sizeof x - 1)
        return fail_at(err, RT_ERR_NOMEM, c, at, "too many decisions");
    rt_decision *grown = realloc(c->decisions, (c->n + 1) * sizeof *grown);
    if (!grown)
        return fail_at(err, RT_ERR_NOMEM, c, at, "out of memory for decisions");
    c->decisions = grown;
    c->decisions[c->n++] = x;
    return RT_OK;
}

/* ---- The mini-epoch table CSV -------------------------------------------- */

enum { COL_ELAPSED = 0, COL_ROLE, COL_DECISION, COL_REASON, COL_REVIEWER, COL_DECIDED_AT };

typedef struct csv_rows {
    rt_corrections *c;
    rt_error *err;
} csv_rows;

/* "confirm", "reject", "reject-phasic", "reject-tonic", "add-phasic",
 * "add-tonic", "exclude". */
static bool decision_word(const char *word, rt_decision *d)
{
    char kind[16];
    const char *dash = strchr(word, '-');
    size_t n = dash ? (size_t)(dash - word) : strlen(word);
    if (n >= sizeof kind)
        return false;
    memcpy(kind, word, n);
    kind[n] = '\0';
    d->activity = RT_ACTIVITY_ANY;
    if (!kind_parse(kind, &d->kind))
        return false;
    if (!dash)
        return d->kind != RT_DECISION_ADD;
    return (d->kind == RT_DECISION_REJECT || d->kind == RT_DECISION_ADD) &&
           activity_parse(dash + 1, &d->activity);
}

/* Consecutive excluded mini-epochs with the same reason, reviewer and time
 * are one stretch (the table has a row per channel and per mini-epoch). */
static bool extends_stretch(rt_corrections *c, const rt_decision *d)
{
    if (c->n == 0)
        return false;
    rt_decision *p = &c->decisions[c->n - 1];
    if (p->kind != RT_DECISION_EXCLUDE || p->reason != d->reason ||
        strcmp(p->reviewer, d->reviewer) != 0 || strcmp(p->decided_at, d->decided_at) != 0 ||
        d->start_s < p->start_s - TIME_TOL_S || d->start_s > p->end_s + TIME_TOL_S)
        return false;
    p->end_s = fmax(p->end_s, d->end_s);
    return true;
}

static void on_csv_row(rt_table *t, char **v)
{
    csv_rows *rows = t->user;
    if (v[COL_DECISION][0] == '\0')
        return; /* not decided: remtone's marks stand */
    rt_decision d;
    memset(&d, 0, sizeof d);
    d.place = t->row_line;
    char q[RT_TABLE_QUOTE_MAX];
    if (!decision_word(v[COL_DECISION], &d)) {
        rt_table_quote(q, sizeof q, v[COL_DECISION]);
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: decision \"%s\" is not confirm, reject, "
                                 "reject-phasic, reject-tonic, add-phasic, add-tonic or exclude",
                                 t->path, t->row_line, q));
        return;
    }
    if (!rt_table_number(t, v[COL_ELAPSED], "elapsed_s", &d.start_s))
        return;
    rt_role role = rt_role_from_name(v[COL_ROLE]);
    if (role == RT_ROLE_NONE) {
        rt_table_quote(q, sizeof q, v[COL_ROLE]);
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: unknown channel role \"%s\"", t->path,
                                 t->row_line, q));
        return;
    }
    d.role = (int)role;
    d.end_s = d.start_s + MINI_S;
    if (v[COL_REASON][0] && !rt_decision_reason_parse(v[COL_REASON], &d.reason)) {
        rt_table_quote(q, sizeof q, v[COL_REASON]);
        rt_table_fail(t, rt_fail(&t->error, RT_ERR_STAGING,
                                 "%s line %ld: reason \"%s\" is not artifact, not-rem, arousal "
                                 "or other", t->path, t->row_line, q));
        return;
    }
    rt_copy_string(d.reviewer, sizeof d.reviewer, v[COL_REVIEWER]);
    rt_copy_string(d.decided_at, sizeof d.decided_at, v[COL_DECIDED_AT]);
    if (d.kind == RT_DECISION_EXCLUDE) {
        rt_trim(d.reviewer);
        rt_trim(d.decided_at);
        if (extends_stretch(rows->c, &d))
            return;
    }
    rt_table_fail(t, rt_corrections_add(rows->c, &d, &t->error));
}

static rt_status load_csv(rt_corrections *c, rt_error *err)
{
    csv_rows rows = {c, err};
    rt_table t;
    memset(&t, 0, sizeof t);
    t.path = c->path;
    t.what = "corrections table";
    static const char *const cols[] = {"elapsed_s", "role", "decision", "reason", "reviewer",
                                       "decided_at"};
    for (size_t i = 0; i < sizeof cols / sizeof cols[0]; i++)
        t.columns[i] = cols[i];
    t.n_columns = sizeof cols / sizeof cols[0];
    t.optional[COL_REASON] = true;
    t.on_row = on_csv_row;
    t.user = &rows;
    return rt_table_read(&t, err);
}

/* ---- EDF+ annotations ---------------------------------------------------- */

/* Texts (docs/corrections.md), words separated by spaces, case-insensitive:
 *   review by NAME            the reviewer of every decision in the file
 *   review at YYYY-MM-DDTHH:MM   when
 *   confirm ROLE | reject [phasic|tonic] ROLE REASON | add phasic|tonic ROLE
 *   exclude REASON            over the annotation's duration
 * The detected-activity texts remtone writes ("remtone ...") are passed
 * over, so the file --annotations wrote can be edited and read back; any
 * other text is refused, because a mistyped decision must not vanish. */
enum { MAX_WORDS = 6 };

static size_t split_words(char *text, char **words)
{
    size_t n = 0;
    char *save = NULL;
    for (char *w = strtok_r(text, " \t\r\n", &save); w; w = strtok_r(NULL, " \t\r\n", &save)) {
        if (n == MAX_WORDS)
            return MAX_WORDS + 1;
        words[n++] = w;
    }
    return n;
}

typedef struct review_header {
    char reviewer[128];
    char at[40];
    long reviewer_place, at_place;
} review_header;

static rt_status review_line(rt_corrections *c, const char *text, long place, review_header *h,
                             rt_error *err)
{
    /* "review by NAME" keeps the name's own spacing after "by " */
    const char *p = text;
    while (*p == ' ')
        p++;
    p += strlen("review");
    while (*p == ' ')
        p++;
    char word[3] = {p[0], p[0] ? p[1] : '\0', '\0'};
    bool spaced = p[0] && p[1] && p[2] == ' ';
    bool by = spaced && rt_equal_nocase(word, "by");
    bool at = spaced && rt_equal_nocase(word, "at");
    if (!by && !at)
        return fail_at(err, RT_ERR_STAGING, c, place,
                       "\"%s\": a review annotation is \"review by NAME\" or \"review at TIME\"",
                       text);
    char value[128];
    rt_copy_string(value, sizeof value, p + 3);
    rt_trim(value);
    char *slot = by ? h->reviewer : h->at;
    size_t cap = by ? sizeof h->reviewer : sizeof h->at;
    long *slot_place = by ? &h->reviewer_place : &h->at_place;
    if (!value[0])
        return fail_at(err, RT_ERR_STAGING, c, place, "\"%s\" names nothing", text);
    if (slot[0] && strcmp(slot, value) != 0)
        return fail_at(err, RT_ERR_STAGING, c, place,
                       "a second review %s (\"%s\"; annotation %ld gave \"%s\"): one file holds "
                       "one review", by ? "by" : "at", value, *slot_place, slot);
    rt_copy_string(slot, cap, value);
    *slot_place = place;
    return RT_OK;
}

static rt_status annotation_decision(rt_corrections *c, const rt_annotation *a, long place,
                                     rt_decision *d, rt_error *err)
{
    char text[sizeof a->text];
    rt_copy_string(text, sizeof text, a->text);
    char *w[MAX_WORDS];
    size_t n = split_words(text, w);
    memset(d, 0, sizeof *d);
    d->place = place;
    d->start_s = a->onset_s;
    size_t k = 1;
    bool ok = n >= 2 && n <= MAX_WORDS && kind_parse(w[0], &d->kind);
    if (ok && (d->kind == RT_DECISION_REJECT || d->kind == RT_DECISION_ADD) &&
        activity_parse(w[1], &d->activity))
        k = 2;
    if (ok && d->kind != RT_DECISION_EXCLUDE) {
        rt_role role = k < n ? rt_role_from_name(w[k]) : RT_ROLE_NONE;
        if (role == RT_ROLE_NONE)
            return fail_at(err, RT_ERR_STAGING, c, place,
                           "\"%s\": unknown channel role \"%s\"", a->text, k < n ? w[k] : "");
        d->role = (int)role;
        k++;
    }
    bool needs_reason = ok && (d->kind == RT_DECISION_REJECT || d->kind == RT_DECISION_EXCLUDE);
    if (needs_reason && k < n && !rt_decision_reason_parse(w[k], &d->reason))
        return fail_at(err, RT_ERR_STAGING, c, place,
                       "\"%s\": reason \"%s\" is not artifact, not-rem, arousal or other",
                       a->text, w[k]);
    if (needs_reason)
        k++;
    if (!ok || k != n)
        return fail_at(err, RT_ERR_STAGING, c, place,
                       "\"%s\" is not a decision (docs/corrections.md lists them)", a->text);
    if (d->kind == RT_DECISION_EXCLUDE) {
        if (!(a->duration_s > 0.0))
            return fail_at(err, RT_ERR_STAGING, c, place,
                           "\"%s\": an exclusion needs a duration (the stretch left out)",
                           a->text);
        d->end_s = a->onset_s + a->duration_s;
    }
    return RT_OK;
}

static rt_status load_edf(rt_corrections *c, rt_error *err)
{
    rt_recording *rec = NULL;
    rt_status st = rt_recording_open(c->path, &rec, err);
    if (st != RT_OK)
        return st;
    size_t n = rt_recording_annotation_count(rec);
    c->timed = true;
    c->start = rt_recording_start(rec);
    review_header h;
    memset(&h, 0, sizeof h);
    rt_decision *found = rt_calloc(n + 1, sizeof *found);
    if (!found) {
        rt_recording_close(rec);
        return fail_at(err, RT_ERR_NOMEM, c, 0, "out of memory for %zu annotations", n);
    }
    size_t n_found = 0;
    for (size_t i = 0; i < n && st == RT_OK; i++) {
        const rt_annotation *a = rt_recording_annotation(rec, i);
        char lead[16];
        rt_copy_string(lead, sizeof lead, a->text);
        rt_trim(lead);
        if (strncmp(lead, "remtone ", 8) == 0)
            continue; /* remtone's own detections */
        lead[strcspn(lead, " \t")] = '\0';
        if (rt_equal_nocase(lead, "review"))
            st = review_line(c, a->text, (long)i + 1, &h, err);
        else
            st = annotation_decision(c, a, (long)i + 1, &found[n_found++], err);
    }
    rt_recording_close(rec);
    if (st == RT_OK && n_found > 0 && (!h.reviewer[0] || !h.at[0]))
        st = fail_at(err, RT_ERR_STAGING, c, 0,
                     "no \"review %s\" annotation: every decision names its reviewer and time",
                     h.reviewer[0] ? "at YYYY-MM-DDTHH:MM" : "by NAME");
    for (size_t i = 0; i < n_found && st == RT_OK; i++) {
        rt_copy_string(found[i].reviewer, sizeof found[i].reviewer, h.reviewer);
        rt_copy_string(found[i].decided_at, sizeof found[i].decided_at, h.at);
        st = rt_corrections_add(c, &found[i], err);
    }
    free(found);
    return st;
}

rt_status rt_corrections_load(const char *path, rt_corrections **out, rt_error *err)
{
    if (!out || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_corrections_load: NULL argument");
    *out = NULL;
    rt_input_format format = RT_INPUT_CSV;
    rt_status st = rt_input_sniff(path, "corrections file", &format, err);
    if (st != RT_OK)
        return st;
    rt_corrections *c = NULL;
    st = rt_corrections_new(path, format == RT_INPUT_EDF ? "annotation" : "line", &c, err);
    if (st != RT_OK)
        return st;
    if (format == RT_INPUT_EDF)
        st = load_edf(c, err);
    else if (format == RT_INPUT_XML)
        st = rt_corrections_load_xml(c, err);
    else
        st = load_csv(c, err);
    if (st == RT_OK && c->n == 0)
        st = fail_at(err, RT_ERR_STAGING, c, 0, "holds no decision (docs/corrections.md)");
    if (st != RT_OK) {
        rt_corrections_free(c);
        return st;
    }
    *out = c;
    return RT_OK;
}

/* ---- Checking against the night ------------------------------------------ */

/* The 3-s mini-epoch of night->minis3 holding t_s, or n_minis3. */
static size_t mini_at(const rt_night *night, double t_s)
{
    size_t lo = 0, hi = night->n_minis3;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (night->minis3[mid].onset_s + MINI_S <= t_s + TIME_TOL_S)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < night->n_minis3 && night->minis3[lo].onset_s <= t_s + TIME_TOL_S
               ? lo
               : night->n_minis3;
}

static const char *stage_at(const rt_timeline *tl, double t_s)
{
    if (!tl || !(tl->epoch_s > 0))
        return "?";
    double e = floor(t_s / tl->epoch_s);
    if (e < 0 || e >= (double)tl->n_epochs)
        return "?";
    return rt_stage_name((rt_stage)tl->stages[(size_t)e]);
}

static bool marked(unsigned labels, rt_decision_activity a)
{
    unsigned want = a == RT_ACTIVITY_PHASIC  ? RT_LABEL_SINBAR_PHASIC
                    : a == RT_ACTIVITY_TONIC ? RT_LABEL_SINBAR_TONIC
                                             : RT_LABEL_SINBAR_ANY;
    return (labels & want) != 0;
}

/* A decision on one mini-epoch and channel: where it lands, or why not. */
static rt_status place_decision(const rt_night *night, const rt_timeline *tl,
                                const rt_corrections *c, const rt_decision *d, size_t *mini,
                                rt_error *err)
{
    const char *kind = rt_decision_kind_name(d->kind);
    const char *role = rt_role_name((rt_role)d->role);
    if (d->start_s >= night->recording_s - TIME_TOL_S)
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "%s at %.10g s is past the end of the recording (%.10g s)", kind,
                       d->start_s, night->recording_s);
    if (!night->channel[d->role].present)
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "%s on %s: the night has no %s channel", kind, role, role);
    *mini = mini_at(night, d->start_s);
    if (*mini == night->n_minis3)
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "%s at %.10g s: epoch %.0f is staged %s, not a scored REM epoch", kind,
                       d->start_s, floor(d->start_s / 30.0) + 1, stage_at(tl, d->start_s));
    const rt_mini *m = &night->minis3[*mini];
    unsigned labels = m->labels[d->role];
    if (labels & (RT_LABEL_EXCLUDED | RT_LABEL_ABSENT))
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "%s at %.10g s on %s: remtone left this mini-epoch out of scoring "
                       "(see excluded_by in the mini-epoch table)", kind, m->onset_s, role);
    if (d->kind == RT_DECISION_REJECT && !marked(labels, d->activity))
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "reject at %.10g s on %s: remtone marked no %sactivity there", m->onset_s,
                       role, d->activity == RT_ACTIVITY_PHASIC  ? "phasic "
                             : d->activity == RT_ACTIVITY_TONIC ? "tonic "
                                                                : "");
    if (d->kind == RT_DECISION_ADD && marked(labels, d->activity))
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "add at %.10g s on %s: remtone already marked %s activity there",
                       m->onset_s, role, rt_decision_activity_name(d->activity));
    return RT_OK;
}

/* The 3-s mini-epochs an exclusion covers: [*first, *last). */
static rt_status place_exclusion(const rt_night *night, const rt_corrections *c,
                                 const rt_decision *d, size_t *first, size_t *last, rt_error *err)
{
    if (d->start_s >= night->recording_s - TIME_TOL_S ||
        d->end_s > night->recording_s + TIME_TOL_S)
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "exclude %.10g s .. %.10g s reaches past the end of the recording "
                       "(%.10g s)", d->start_s, d->end_s, night->recording_s);
    size_t i = 0;
    while (i < night->n_minis3 && night->minis3[i].onset_s + MINI_S <= d->start_s + TIME_TOL_S)
        i++;
    size_t j = i;
    while (j < night->n_minis3 && night->minis3[j].onset_s < d->end_s - TIME_TOL_S)
        j++;
    if (i == j)
        return fail_at(err, RT_ERR_STAGING, c, d->place,
                       "exclude %.10g s .. %.10g s covers no scored REM mini-epoch", d->start_s,
                       d->end_s);
    *first = i;
    *last = j;
    return RT_OK;
}

static int by_mini_role(const void *a, const void *b)
{
    const rt_applied_decision *x = a, *y = b;
    if (x->mini != y->mini)
        return (x->mini > y->mini) - (x->mini < y->mini);
    if (x->role != y->role)
        return (x->role > y->role) - (x->role < y->role);
    return (x->decision > y->decision) - (x->decision < y->decision);
}

/* ---- Applying ------------------------------------------------------------ */

static void set_bits(unsigned char *labels, unsigned bits, bool on)
{
    if (on)
        *labels = (unsigned char)(*labels | bits);
    else
        *labels = (unsigned char)(*labels & ~bits);
}

/* The reviewer's marks on a decided mini-epoch and channel, from remtone's. */
static void reviewer_marks(const rt_decision *d, unsigned labels, bool *phasic, bool *tonic)
{
    *phasic = (labels & RT_LABEL_SINBAR_PHASIC) != 0;
    *tonic = (labels & RT_LABEL_SINBAR_TONIC) != 0;
    bool phasic_only = d->activity == RT_ACTIVITY_PHASIC, tonic_only = d->activity == RT_ACTIVITY_TONIC;
    if (d->kind == RT_DECISION_REJECT) {
        if (!tonic_only)
            *phasic = false;
        if (!phasic_only)
            *tonic = false;
    } else if (d->kind == RT_DECISION_ADD) {
        *phasic = *phasic || phasic_only;
        *tonic = *tonic || tonic_only;
    }
}

/* A decided mini-epoch and channel takes the reviewer's marks: phasic is a
 * burst for every 3-s rule (AASM and SINBAR); "any" follows phasic or tonic. */
static void apply_marks(rt_mini *m, int role, bool phasic, bool tonic)
{
    unsigned char *l = &m->labels[role];
    if (phasic != ((*l & RT_LABEL_SINBAR_PHASIC) != 0))
        set_bits(l, RT_LABEL_SINBAR_PHASIC | RT_LABEL_AASM_PHASIC, phasic);
    set_bits(l, RT_LABEL_SINBAR_TONIC, tonic);
    set_bits(l, RT_LABEL_SINBAR_ANY, phasic || tonic);
}

static void leave_out(rt_mini *m)
{
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        m->labels[r] = (unsigned char)(m->labels[r] | RT_LABEL_EXCLUDED);
    m->excluded_by |= RT_EXCLUDED_BY_REVIEW;
}

/* An epoch in which a decision changed a chin tonic mark takes its tonic
 * flags from the corrected marks of its ten 3-s mini-epochs: SINBAR tonic
 * when more than half of the epoch is tonic (6 or more; Frauscher et al.
 * 2012, Sleep 35:835-847), AASM tonic when at least half is (5 or more; AASM
 * Manual v2, "at least 50 % of the epoch"). */
static void retonic_epoch(rt_epoch_result *e, const rt_mini *minis)
{
    int tonic = 0;
    for (int k = 0; k < MINIS_PER_EPOCH; k++)
        tonic += (minis[k].labels[RT_ROLE_CHIN] & RT_LABEL_SINBAR_TONIC) != 0;
    e->sinbar_tonic = tonic >= 6;
    e->aasm_tonic = tonic >= 5;
}

typedef struct work {
    rt_mini *minis3, *minis2;
    rt_epoch_result *epochs;
    rt_manual_mini *reviewed;   /* the reviewer's marks, for the agreement */
    size_t n_reviewed;
} work;

static void work_free(work *w)
{
    free(w->minis3);
    free(w->minis2);
    free(w->epochs);
    free(w->reviewed);
}

static void *copy_of(const void *src, size_t n, size_t size)
{
    void *p = rt_calloc(n + 1, size);
    if (p && n)
        memcpy(p, src, n * size);
    return p;
}

static void reviewers_text(const rt_corrections *c, char *buf, size_t cap)
{
    buf[0] = '\0';
    for (size_t i = 0; i < c->n; i++) {
        bool seen = false;
        for (size_t j = 0; j < i && !seen; j++)
            seen = strcmp(c->decisions[j].reviewer, c->decisions[i].reviewer) == 0;
        if (seen)
            continue;
        size_t len = strlen(buf);
        snprintf(buf + len, cap - len, "%s%s", len ? ", " : "", c->decisions[i].reviewer);
    }
}

/* What the corrected labels changed in each index, unit by unit. */
static void count_changes(const rt_night *night, const work *w, rt_night_corrections *nc)
{
    bool arms = night->channel[RT_ROLE_ARM_LEFT].present &&
                night->channel[RT_ROLE_ARM_RIGHT].present;
    for (int i = 0; i < RT_IX_COUNT; i++) {
        rt_index_change *ch = &nc->change[i];
        const rt_mini *before = i == RT_IX_MONTREAL_PHASIC_CHIN ? night->minis2 : night->minis3;
        const rt_mini *after = i == RT_IX_MONTREAL_PHASIC_CHIN ? w->minis2 : w->minis3;
        size_t n = i == RT_IX_MONTREAL_PHASIC_CHIN ? night->n_minis2 : night->n_minis3;
        bool d0, d1;
        ch->reached = i != RT_IX_RAI && i != RT_IX_MONTREAL_TONIC_CHIN &&
                      i != RT_IX_MONTREAL_LM_PER_H;
        for (size_t k = 0; k < n; k++) {
            bool was = rt_index_mini_counts(i, &before[k], arms, &d0);
            bool now = rt_index_mini_counts(i, &after[k], arms, &d1);
            if (!d0 && !d1)
                continue;
            ch->added += now && !was;
            ch->removed += was && !now && d1;
            ch->left_out += d0 && !d1;
        }
        for (size_t e = 0; e < night->n_epochs; e++) {
            bool was = rt_index_epoch_counts(i, &night->epochs[e], arms, &d0);
            bool now = rt_index_epoch_counts(i, &w->epochs[e], arms, &d1);
            if (!d0 && !d1)
                continue;
            ch->added += now && !was;
            ch->removed += was && !now && d1;
            ch->left_out += d0 && !d1;
        }
    }
}

void rt_night_corrections_free(rt_night_corrections *c)
{
    if (!c)
        return;
    free(c->decisions);
    free(c->applied);
    free(c->labels);
    free(c);
}

static rt_status check_all(const rt_night *night, const rt_timeline *tl, const rt_corrections *c,
                           rt_night_corrections *nc, rt_error *err)
{
    /* at most one applied entry per decision and mini-epoch: an exclusion
     * adds one per mini-epoch it covers */
    size_t cap = 0;
    rt_status st = RT_OK;
    for (size_t k = 0; k < c->n && st == RT_OK; k++) {
        const rt_decision *d = &c->decisions[k];
        size_t first = 0, last = 0;
        if (d->kind == RT_DECISION_EXCLUDE)
            st = place_exclusion(night, c, d, &first, &last, err);
        else
            st = place_decision(night, tl, c, d, &first, err), last = first + 1;
        if (st != RT_OK)
            break;
        if (nc->n_applied + (last - first) > cap) {
            size_t want = 2 * cap + (last - first) + 16;
            rt_applied_decision *grown = realloc(nc->applied, want * sizeof *grown);
            if (!grown)
                return fail_at(err, RT_ERR_NOMEM, c, d->place, "out of memory");
            nc->applied = grown;
            cap = want;
        }
        for (size_t m = first; m < last; m++)
            nc->applied[nc->n_applied++] =
                (rt_applied_decision){m, d->kind == RT_DECISION_EXCLUDE ? -1 : d->role, k};
    }
    if (st != RT_OK)
        return st;
    qsort(nc->applied, nc->n_applied, sizeof *nc->applied, by_mini_role);
    for (size_t i = 1; i < nc->n_applied; i++) {
        const rt_applied_decision *a = &nc->applied[i - 1], *b = &nc->applied[i];
        if (a->mini != b->mini || a->role != b->role || b->role < 0)
            continue;
        return fail_at(err, RT_ERR_STAGING, c, c->decisions[b->decision].place,
                       "a second decision on the mini-epoch at %.10g s on %s (%s %ld decided it "
                       "already)", night->minis3[b->mini].onset_s, rt_role_name((rt_role)b->role),
                       c->place_word, c->decisions[a->decision].place);
    }
    return RT_OK;
}

/* The decisions on the working copies; the reviewer's marks for the
 * agreement. */
static rt_status apply_all(const rt_night *night, const rt_corrections *c,
                           rt_night_corrections *nc, work *w, rt_error *err)
{
    w->reviewed = rt_calloc(nc->n_applied + 1, sizeof *w->reviewed);
    if (!w->reviewed)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", c->path);
    bool *tonic_changed = rt_calloc(night->n_epochs + 1, sizeof *tonic_changed);
    if (!tonic_changed)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", c->path);
    /* exclusions first, so that the marks of a mini-epoch also left out
     * do not count in the agreement */
    for (size_t i = 0; i < nc->n_applied; i++) {
        const rt_applied_decision *a = &nc->applied[i];
        if (a->role >= 0)
            continue;
        rt_mini *m = &w->minis3[a->mini];
        if (!(m->excluded_by & RT_EXCLUDED_BY_REVIEW))
            nc->minis_left_out++;
        leave_out(m);
        /* the 2-s mini-epochs overlapping it (Montreal) */
        for (size_t k = 0; k < night->n_minis2; k++)
            if (w->minis2[k].onset_s < m->onset_s + MINI_S - TIME_TOL_S &&
                w->minis2[k].onset_s + MINI2_S > m->onset_s + TIME_TOL_S)
                leave_out(&w->minis2[k]);
    }
    for (size_t i = 0; i < nc->n_applied; i++) {
        const rt_applied_decision *a = &nc->applied[i];
        if (a->role < 0)
            continue;
        const rt_decision *d = &c->decisions[a->decision];
        rt_mini *m = &w->minis3[a->mini];
        bool phasic, tonic;
        reviewer_marks(d, night->minis3[a->mini].labels[a->role], &phasic, &tonic);
        if (!(m->excluded_by & RT_EXCLUDED_BY_REVIEW))
            w->reviewed[w->n_reviewed++] = (rt_manual_mini){m->onset_s, (signed char)a->role,
                                                            phasic, tonic};
        bool was_tonic = (m->labels[a->role] & RT_LABEL_SINBAR_TONIC) != 0;
        apply_marks(m, a->role, phasic, tonic);
        if (a->role == RT_ROLE_CHIN && was_tonic != tonic)
            tonic_changed[a->mini / MINIS_PER_EPOCH] = true;
    }
    for (size_t e = 0; e < night->n_epochs; e++)
        if (tonic_changed[e])
            retonic_epoch(&w->epochs[e], &w->minis3[e * MINIS_PER_EPOCH]);
    free(tonic_changed);
    return RT_OK;
}

rt_status rt_night_correct(rt_night *night, const rt_timeline *tl, const rt_corrections *c,
                           rt_error *err)
{
    if (!night || !c)
        return rt_fail(err, RT_ERR_USAGE, "rt_night_correct: NULL argument");
    if (night->corrections)
        return rt_fail(err, RT_ERR_USAGE, "%s: the night is corrected already", c->path);
    const rt_clock_time *a = &c->start, *b = &night->start;
    if (c->timed && (a->year != b->year || a->month != b->month || a->day != b->day ||
                     a->hour != b->hour || a->minute != b->minute || a->second != b->second ||
                     fabs(a->subsecond - b->subsecond) > 1e-3))
        return fail_at(err, RT_ERR_STAGING, c, 0,
                       "starts at %04d-%02d-%02d %02d:%02d:%06.3f, the recording at "
                       "%04d-%02d-%02d %02d:%02d:%06.3f: its onsets would land on other "
                       "mini-epochs", a->year, a->month, a->day, a->hour, a->minute,
                       a->second + a->subsecond, b->year, b->month, b->day, b->hour, b->minute,
                       b->second + b->subsecond);
    rt_night_corrections *nc = rt_calloc(1, sizeof *nc);
    if (!nc)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", c->path);
    rt_status st = check_all(night, tl, c, nc, err);
    work w;
    memset(&w, 0, sizeof w);
    if (st == RT_OK) {
        w.minis3 = copy_of(night->minis3, night->n_minis3, sizeof *night->minis3);
        w.minis2 = copy_of(night->minis2, night->n_minis2, sizeof *night->minis2);
        w.epochs = copy_of(night->epochs, night->n_epochs, sizeof *night->epochs);
        nc->decisions = copy_of(c->decisions, c->n, sizeof *c->decisions);
        nc->labels = rt_calloc(night->n_minis3 * RT_ROLE_COUNT + 1, 1);
        if (!w.minis3 || !w.minis2 || !w.epochs || !nc->decisions || !nc->labels)
            st = rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", c->path);
    }
    if (st == RT_OK)
        st = apply_all(night, c, nc, &w, err);
    rt_night saved = *night; /* the automatic result, to restore on failure */
    if (st == RT_OK) {
        rt_copy_string(nc->path, sizeof nc->path, c->path);
        nc->n_decisions = c->n;
        for (size_t i = 0; i < c->n; i++)
            nc->counts[c->decisions[i].kind]++;
        reviewers_text(c, nc->reviewers, sizeof nc->reviewers);
        memcpy(nc->automatic, night->index, sizeof nc->automatic);
        nc->automatic_level = night->level;
        nc->automatic_n_reasons = night->n_reasons;
        memcpy(nc->automatic_reasons, night->reasons, sizeof nc->automatic_reasons);
        /* remtone's labels against the reviewer's, before the night changes */
        rt_agreement_compute(night, w.reviewed, w.n_reviewed, nc->reviewers, &nc->agreement);
        night->minis3 = w.minis3;
        night->minis2 = w.minis2;
        night->epochs = w.epochs;
        st = rt_night_resummarise(night, err);
        /* back to remtone's own detections; the corrected arrays to the side */
        w.minis3 = night->minis3;
        w.minis2 = night->minis2;
        w.epochs = night->epochs;
        night->minis3 = saved.minis3;
        night->minis2 = saved.minis2;
        night->epochs = saved.epochs;
    }
    if (st == RT_OK) {
        count_changes(night, &w, nc);
        for (size_t i = 0; i < night->n_minis3; i++)
            memcpy(nc->labels + i * RT_ROLE_COUNT, w.minis3[i].labels, RT_ROLE_COUNT);
        night->corrections = nc;
    } else {
        *night = saved;
        rt_night_corrections_free(nc);
    }
    work_free(&w);
    return st;
}
