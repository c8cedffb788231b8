/* EDF+ Time-stamped Annotations Lists, read from the bytes of one annotation
 * signal of one data record (see edf_tal.h). EDF+ (Kemp & Olivan 2003, Clin
 * Neurophysiol 114:1755-1761) defines a TAL as: an onset, "+" or "-" then
 * seconds with an optional decimal fraction; optionally byte 21 (0x15) and a
 * duration in seconds; byte 20 (0x14); then annotation texts, each closed by
 * 0x14; and a final 0x00. TALs follow one another; the rest of the signal is
 * 0x00. The first TAL of every data record, in the first annotation signal,
 * is the time-keeping TAL: its first annotation is empty and its onset is
 * the record's start, which in EDF+C is the previous record's start plus the
 * record duration; the first record may start up to a second after the
 * header's start time, and every onset counts from that subsecond start.
 *
 * Where the specification leaves room, remtone does what EDFlib does, so a
 * file opens the same whichever reads it (tests/unit/test_tal_edflib.c
 * compares them): a TAL may hold an onset alone, or empty texts (kept, as
 * empty annotations); a signal may start with one 0x00 byte; a fraction keeps
 * seven decimals (100 ns) and drops the rest; a duration is read from its
 * first 15 characters; a text keeps its first 512 bytes. remtone is stricter
 * in one place: an onset or a duration with more than 11 whole-second digits
 * (over 3000 years) is refused, where EDFlib's arithmetic would overflow. */
#include "edf_tal.h"

#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "edf_header_check.h"
#include "internal.h"

enum {
    TAL_END = 0x00,
    TAL_SEPARATOR = 0x14,   /* closes the onset, the duration and each text */
    TAL_DURATION = 0x15,    /* between the onset and the duration */
    MAX_WHOLE_DIGITS = 11,  /* 10^11 s x 10^7 units stays far below 2^63 */
    DURATION_CHARS = 15,    /* EDFlib reads a duration from its first 15 characters */
    TEXT_MAX = 512,         /* EDFlib's EDFLIB_MAX_ANNOTATION_LEN */
    SHOWN_MAX = 40          /* bytes of a field quoted in a message */
};

_Static_assert(sizeof(((rt_annotation *)0)->text) == TEXT_MAX + 1, "rt_annotation.text holds EDFlib's 512 bytes");

void rt_tal_list_init(rt_tal_list *list, const char *path, long long record_units)
{
    *list = (rt_tal_list){.path = path, .record_units = record_units};
}

/* ---- numbers ------------------------------------------------------------- */

/* EDFlib's form of an onset ("+" or "-", digits with at most one '.', not
 * right after the sign nor last) or of a duration (the same without sign). */
static bool is_tal_number(const unsigned char *s, size_t n, bool with_sign)
{
    size_t i = 0;
    if (with_sign) {
        if (n < 2 || (s[0] != '+' && s[0] != '-'))
            return false;
        i = 1;
    }
    if (n <= i || s[i] == '.' || s[n - 1] == '.')
        return false;
    int dots = 0;
    for (; i < n; i++) {
        if (s[i] == '.') {
            if (++dots > 1)
                return false;
        } else if (s[i] < '0' || s[i] > '9') {
            return false;
        }
    }
    return true;
}

/* The value of a number of that form in 100-ns units: seven decimals kept,
 * the rest dropped (not rounded), as EDFlib reads it. False when the whole
 * seconds have more than MAX_WHOLE_DIGITS significant digits. */
static bool tal_units(const unsigned char *s, size_t n, long long *units)
{
    size_t i = 0;
    bool negative = n > 0 && s[0] == '-';
    if (n > 0 && (s[0] == '+' || s[0] == '-'))
        i = 1;
    long long whole = 0;
    int digits = 0;
    for (; i < n && s[i] != '.'; i++) {
        if (whole == 0 && s[i] == '0')
            continue;
        if (++digits > MAX_WHOLE_DIGITS)
            return false;
        whole = whole * 10 + (s[i] - '0');
    }
    long long fraction = 0;
    long long scale = RT_TAL_UNITS_PER_S / 10;
    for (i++; i < n && scale > 0; i++, scale /= 10)
        fraction += (s[i] - '0') * scale;
    long long v = whole * RT_TAL_UNITS_PER_S + fraction;
    *units = negative ? -v : v;
    return true;
}

/* 100-ns units as seconds for a message: "-12.5", "3600". */
static void units_text(long long units, char *out, size_t cap)
{
    unsigned long long a = units < 0 ? 0ULL - (unsigned long long)units : (unsigned long long)units;
    unsigned long long whole = a / RT_TAL_UNITS_PER_S, fraction = a % RT_TAL_UNITS_PER_S;
    int n = snprintf(out, cap, "%s%llu.%07llu", units < 0 ? "-" : "", whole, fraction);
    while (n > 0 && (size_t)n < cap && out[n - 1] == '0')
        out[--n] = '\0';
    if (n > 0 && (size_t)n < cap && out[n - 1] == '.')
        out[--n] = '\0';
}

/* ---- failures ------------------------------------------------------------- */

enum { WHERE_MAX = RT_ERROR_MESSAGE_MAX };

/* "FILE: data record R, annotation signal (signal S), byte offset B", the
 * start of every message; returns buf. */
static const char *where(const rt_tal_list *list, const rt_tal_place *at, size_t i, char *buf)
{
    snprintf(buf, WHERE_MAX, "%s: data record %lld, annotation signal (signal %d), byte offset %lld", list->path,
             at->record + 1, at->signal + 1, at->offset + (long long)i);
    return buf;
}

static void shown(const unsigned char *s, size_t n, char *out, size_t cap)
{
    rt_edf_quote_bytes(s, n < SHOWN_MAX ? (int)n : SHOWN_MAX, out, cap);
}

static rt_status fail_number(const rt_tal_list *list, const rt_tal_place *at, const unsigned char *bytes,
                             size_t start, size_t n, const char *name, rt_error *err)
{
    char text[4 * SHOWN_MAX + 8], w[WHERE_MAX];
    shown(bytes + start, n, text, sizeof text);
    bool onset = strcmp(name, "onset") == 0;
    if (is_tal_number(bytes + start, n, onset))
        return rt_fail(err, RT_ERR_RECORDING, "%s: %s \"%s\" has more than %d digits of whole seconds "
                       "(over 3000 years; EDFlib's arithmetic overflows there)",
                       where(list, at, start, w), name, text, MAX_WHOLE_DIGITS);
    return rt_fail(err, RT_ERR_RECORDING, "%s: %s \"%s\" is not %sseconds (digits with at most one '.', "
                   "neither first nor last; EDF+ TAL)",
                   where(list, at, start, w), name, text, onset ? "\"+\" or \"-\" then " : "");
}

/* ---- one annotation signal ------------------------------------------------ */

static rt_status keep(rt_tal_list *list, const rt_annotation *a)
{
    if (list->n == list->cap) {
        size_t cap = list->cap ? 2 * list->cap : 64;
        if (cap > SIZE_MAX / sizeof *list->items)
            return RT_ERR_NOMEM;
        rt_annotation *grown = realloc(list->items, cap * sizeof *grown);
        if (!grown)
            return RT_ERR_NOMEM;
        list->items = grown;
        list->cap = cap;
    }
    list->items[list->n++] = *a;
    return RT_OK;
}

/* The time-keeping TAL at the start of the first annotation signal: an onset,
 * then 0x14 0x14 (its empty first annotation). Record 1 may start a fraction
 * of a second after the header's start time; each later record starts one
 * record duration after the one before (EDF+C). */
static rt_status read_time_keeping(rt_tal_list *list, const unsigned char *b, size_t len, const rt_tal_place *at,
                                   rt_error *err)
{
    char w[WHERE_MAX];
    size_t k = 0;
    while (k + 2 < len && b[k] != TAL_SEPARATOR)
        k++;
    if (k + 2 >= len)
        return rt_fail(err, RT_ERR_RECORDING, "%s: no time-keeping TAL (EDF+: the first TAL of every data "
                       "record gives its start, as in \"+0\\x14\\x14\\x00\")", where(list, at, 0, w));
    if (!is_tal_number(b, k, true))
        return fail_number(list, at, b, 0, k, "onset", err);
    if (b[k + 1] != TAL_SEPARATOR)
        return rt_fail(err, RT_ERR_RECORDING, "%s: the time-keeping TAL's onset is followed by 0x%02x, not "
                       "by 0x14 0x14 (EDF+: its first annotation is empty)", where(list, at, k + 1, w), b[k + 1]);
    long long units;
    if (!tal_units(b, k, &units))
        return fail_number(list, at, b, 0, k, "onset", err);
    char got[32], want[32], step[32];
    units_text(units, got, sizeof got);
    if (list->records_read == 0) {
        if (units < 0 || units >= RT_TAL_UNITS_PER_S)
            return rt_fail(err, RT_ERR_RECORDING, "%s: the first data record starts at %s s; EDF+ allows it "
                           "from 0 s to under 1 s after the header's start time", where(list, at, 0, w), got);
        list->start_units = units;
    } else if (units - list->previous_units != list->record_units) {
        units_text(list->previous_units + list->record_units, want, sizeof want);
        units_text(list->record_units, step, sizeof step);
        return rt_fail(err, RT_ERR_RECORDING, "%s: the time-keeping TAL says the record starts at %s s, but "
                       "EDF+C records follow one another without gaps: it should be %s s (the record before "
                       "plus the record duration of %s s)", where(list, at, 0, w), got, want, step);
    }
    list->previous_units = units;
    list->records_read++;
    return RT_OK;
}

/* What is known of the TAL being read. */
typedef struct tal_state {
    size_t field;             /* where the current field (onset, duration or text) starts */
    size_t onset, onset_len;  /* the onset's bytes, once closed */
    size_t duration, duration_len;
    bool has_onset, in_duration, has_duration;
} tal_state;

/* A text closed by 0x14: an annotation, unless it is the time-keeping TAL's
 * empty first one. */
static rt_status close_text(rt_tal_list *list, const unsigned char *b, size_t i, const tal_state *t,
                            const rt_tal_place *at, rt_error *err)
{
    rt_annotation a = {.duration_s = -1.0};
    long long onset, duration;
    if (!tal_units(b + t->onset, t->onset_len, &onset))
        return fail_number(list, at, b, t->onset, t->onset_len, "onset", err);
    a.onset_s = (double)(onset - list->start_units) / (double)RT_TAL_UNITS_PER_S;
    if (t->has_duration) {
        size_t n = t->duration_len < DURATION_CHARS ? t->duration_len : DURATION_CHARS;
        if (!tal_units(b + t->duration, n, &duration))
            return fail_number(list, at, b, t->duration, t->duration_len, "duration", err);
        a.duration_s = (double)duration / (double)RT_TAL_UNITS_PER_S;
    }
    size_t n = i - t->field < TEXT_MAX ? i - t->field : TEXT_MAX;
    memcpy(a.text, b + t->field, n);
    a.text[n] = '\0';
    if (keep(list, &a) != RT_OK)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %zu annotations", list->path, list->n + 1);
    return RT_OK;
}

rt_status rt_tal_read_signal(rt_tal_list *list, const unsigned char *b, size_t len, const rt_tal_place *at,
                             rt_error *err)
{
    char w[WHERE_MAX];
    if (len == 0 || b[len - 1] != TAL_END)
        return rt_fail(err, RT_ERR_RECORDING, "%s: the annotation signal ends with byte 0x%02x, not 0x00 (EDF+: "
                       "every TAL ends with 0x14 0x00, unused bytes are 0x00)",
                       where(list, at, len ? len - 1 : 0, w), len ? b[len - 1] : 0);
    if (at->time_keeping) {
        rt_status s = read_time_keeping(list, b, len, at, err);
        if (s != RT_OK)
            return s;
    }
    tal_state t = {0};
    size_t zeros = 0, texts = 0;
    for (size_t i = 0; i < len; i++) {
        unsigned char c = b[i];
        if (c == TAL_END) {
            if (zeros == 0 && i > 0 && b[i - 1] != TAL_SEPARATOR)
                return rt_fail(err, RT_ERR_RECORDING, "%s: a TAL ends with 0x%02x 0x00; EDF+ ends every TAL "
                               "with 0x14 0x00", where(list, at, i, w), b[i - 1]);
            zeros++;
            t = (tal_state){.field = i + 1};
            continue;
        }
        if (zeros > 1)
            return rt_fail(err, RT_ERR_RECORDING, "%s: byte 0x%02x after the end of the TALs (EDF+: after the "
                           "last TAL the signal holds 0x00 only)", where(list, at, i, w), c);
        zeros = 0;
        if (c == TAL_DURATION && t.has_onset)
            return rt_fail(err, RT_ERR_RECORDING, "%s: byte 0x15 (which starts a duration) is allowed only "
                           "right after the onset, once per TAL", where(list, at, i, w));
        if (c != TAL_SEPARATOR && c != TAL_DURATION)
            continue;
        size_t n = i - t.field;
        if (!t.has_onset) {
            if (!is_tal_number(b + t.field, n, true))
                return fail_number(list, at, b, t.field, n, "onset", err);
            t.has_onset = true;
            t.onset = t.field;
            t.onset_len = n;
            t.in_duration = c == TAL_DURATION;
        } else if (t.in_duration) {
            if (!is_tal_number(b + t.field, n, false))
                return fail_number(list, at, b, t.field, n, "duration", err);
            t.in_duration = false;
            t.has_duration = true;
            t.duration = t.field;
            t.duration_len = n;
        } else {
            if (!(at->time_keeping && texts == 0)) {
                rt_status s = close_text(list, b, i, &t, at, err);
                if (s != RT_OK)
                    return s;
            }
            texts++;
        }
        t.field = i + 1;
    }
    return RT_OK;
}
