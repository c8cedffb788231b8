/* remtone's checks of an EDF/BDF header on the raw bytes (see
 * edf_header_check.h). The layout follows the EDF specification (Kemp et al.
 * 1992, Electroencephalogr Clin Neurophysiol 82:391-393) and EDF+ (Kemp &
 * Olivan 2003, Clin Neurophysiol 114:1755-1761): a 256-byte main header, then
 * ns signal headers stored field by field (all labels, then all transducers,
 * ...), 256 bytes per signal in all. BDF (BioSemi) keeps the layout with 3-byte
 * samples and "\xffBIOSEMI" as version. Every failure names the field and the
 * byte offset where it starts, so a technician can find it in a hex viewer. */
#include "edf_header_check.h"

#include <ctype.h>
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "input.h"
#include "internal.h"

enum {
    MAIN_BYTES = 256,
    SIGNAL_BYTES = 256,
    MAX_SIGNALS = RT_EDF_MAX_SIGNALS,
    FIELD_TEXT_MAX = 81
};

/* EDFlib refuses data records above 10 MiB (EDF) and 15 MiB (BDF); saying so
 * here keeps the message specific (edflib.h, "maximum datarecord size"). */
static const long long EDF_RECORD_MAX_BYTES = 10LL * 1024 * 1024;
static const long long BDF_RECORD_MAX_BYTES = 15LL * 1024 * 1024;

typedef struct main_field {
    const char *name;
    int offset;
    int width;
} main_field;

enum { F_VERSION, F_PATIENT, F_RECORDING, F_DATE, F_TIME, F_HEADER_BYTES, F_RESERVED,
       F_RECORDS, F_DURATION, F_SIGNALS, F_MAIN_COUNT };

static const main_field MAIN_FIELDS[F_MAIN_COUNT] = {
    {"version", 0, 8},
    {"patient", 8, 80},
    {"recording", 88, 80},
    {"start date", 168, 8},
    {"start time", 176, 8},
    {"header byte count", 184, 8},
    {"reserved", 192, 44},
    {"data record count", 236, 8},
    {"data record duration", 244, 8},
    {"signal count", 252, 4},
};

typedef struct signal_field {
    const char *name;
    int width;
} signal_field;

enum { S_LABEL, S_TRANSDUCER, S_UNIT, S_PHYS_MIN, S_PHYS_MAX, S_DIG_MIN, S_DIG_MAX,
       S_PREFILTER, S_SAMPLES, S_RESERVED, S_FIELD_COUNT };

static const signal_field SIGNAL_FIELDS[S_FIELD_COUNT] = {
    {"label", 16},
    {"transducer", 80},
    {"physical dimension", 8},
    {"physical minimum", 8},
    {"physical maximum", 8},
    {"digital minimum", 8},
    {"digital maximum", 8},
    {"prefilter", 80},
    {"samples per record", 8},
    {"reserved", 32},
};

typedef struct header_ctx {
    const char *path;
    unsigned char *bytes; /* main header, then signal headers once read */
    long long file_bytes;
    int ns;
    bool is_bdf;
    rt_error *err;
} header_ctx;

/* Byte offset where field f of signal k (0-based) starts. */
static long long signal_field_offset(int ns, int f, int k)
{
    long long offset = MAIN_BYTES;
    for (int i = 0; i < f; i++)
        offset += (long long)ns * SIGNAL_FIELDS[i].width;
    return offset + (long long)k * SIGNAL_FIELDS[f].width;
}

/* Copies a field, trailing and leading spaces removed. */
static void field_text(const header_ctx *c, long long offset, int width, char *out)
{
    memcpy(out, c->bytes + offset, (size_t)width);
    out[width] = '\0';
    rt_trim(out);
}

void rt_edf_quote_bytes(const unsigned char *p, int width, char *out, size_t cap)
{
    size_t n = 0;
    for (int i = 0; i < width && n + 5 < cap; i++) {
        if (p[i] >= 32 && p[i] < 127 && p[i] != '"' && p[i] != '\\')
            out[n++] = (char)p[i];
        else
            n += (size_t)snprintf(out + n, cap - n, "\\x%02x", p[i]);
    }
    out[n] = '\0';
    while (n > 0 && out[n - 1] == ' ')
        out[--n] = '\0';
}

static rt_status fail_main(const header_ctx *c, int f, const char *why)
{
    char shown[4 * 80 + 8];
    rt_edf_quote_bytes(c->bytes + MAIN_FIELDS[f].offset, MAIN_FIELDS[f].width, shown, sizeof shown);
    return rt_fail(c->err, RT_ERR_RECORDING, "%s: header field \"%s\" (byte offset %d) is \"%s\": %s",
                   c->path, MAIN_FIELDS[f].name, MAIN_FIELDS[f].offset, shown, why);
}

static rt_status fail_signal(const header_ctx *c, int f, int k, const char *why)
{
    char shown[4 * 80 + 8], label[4 * 16 + 8];
    long long offset = signal_field_offset(c->ns, f, k);
    rt_edf_quote_bytes(c->bytes + offset, SIGNAL_FIELDS[f].width, shown, sizeof shown);
    rt_edf_quote_bytes(c->bytes + signal_field_offset(c->ns, S_LABEL, k), 16, label, sizeof label);
    return rt_fail(c->err, RT_ERR_RECORDING,
                   "%s: signal %d of %d (\"%s\") field \"%s\" (byte offset %lld) is \"%s\": %s",
                   c->path, k + 1, c->ns, label, SIGNAL_FIELDS[f].name, offset, shown, why);
}

/* A whole decimal integer, optional sign, nothing else ("0x10" and "1e3"
 * stop strtoll base 10 early and so are refused). */
static int parse_integer(const char *s, long long *out)
{
    const char *p = s;
    if (*p == '+' || *p == '-')
        p++;
    if (!isdigit((unsigned char)*p))
        return -1;
    char *end;
    errno = 0;
    long long v = strtoll(s, &end, 10);
    if (errno == ERANGE || *end != '\0')
        return -1;
    *out = v;
    return 0;
}

static int main_integer(const header_ctx *c, int f, long long *out)
{
    char text[FIELD_TEXT_MAX];
    field_text(c, MAIN_FIELDS[f].offset, MAIN_FIELDS[f].width, text);
    return parse_integer(text, out);
}

static int signal_integer(const header_ctx *c, int f, int k, long long *out)
{
    char text[FIELD_TEXT_MAX];
    field_text(c, signal_field_offset(c->ns, f, k), SIGNAL_FIELDS[f].width, text);
    return parse_integer(text, out);
}

/* A number as the EDF specification writes it (Kemp et al. 1992: numbers are
 * plain ASCII; EDF+, Kemp & Olivan 2003, section 2.1.3: digits with an
 * optional sign and decimal point): [+-]digits[.digits] or [+-].digits,
 * nothing else. strtod alone would also take "1e-9", "0x10", "0x1p0", "inf"
 * and "nan", which EDFlib refuses with a generic error -- or worse, reads
 * otherwise. */
static int parse_edf_number(const char *s, double *out)
{
    const char *p = s;
    if (*p == '+' || *p == '-')
        p++;
    size_t digits = 0;
    while (isdigit((unsigned char)*p))
        p++, digits++;
    if (*p == '.')
        for (p++; isdigit((unsigned char)*p); p++)
            digits++;
    if (digits == 0 || *p != '\0')
        return -1;
    return rt_parse_double(s, out);
}

/* What a number field must look like, for messages. */
#define EDF_NUMBER_FORM "not a plain decimal number (EDF allows digits with an optional sign and " \
                        "decimal point only: Kemp et al. 1992; Kemp & Olivan 2003)"
#define EDF_INTEGER_FORM "not a plain whole number (EDF allows digits with an optional sign only: " \
                         "Kemp et al. 1992)"

static int signal_number(const header_ctx *c, int f, int k, double *out)
{
    char text[FIELD_TEXT_MAX];
    field_text(c, signal_field_offset(c->ns, f, k), SIGNAL_FIELDS[f].width, text);
    return parse_edf_number(text, out);
}

/* Name of the field holding byte `offset` of the header, for non-ASCII reports. */
static void describe_offset(const header_ctx *c, long long offset, char *out, size_t cap)
{
    if (offset < MAIN_BYTES) {
        for (int f = F_MAIN_COUNT - 1; f >= 0; f--)
            if (offset >= MAIN_FIELDS[f].offset) {
                snprintf(out, cap, "header field \"%s\"", MAIN_FIELDS[f].name);
                return;
            }
    }
    for (int f = S_FIELD_COUNT - 1; f >= 0; f--) {
        long long start = signal_field_offset(c->ns, f, 0);
        if (offset >= start) {
            long long k = (offset - start) / SIGNAL_FIELDS[f].width;
            snprintf(out, cap, "signal %lld field \"%s\"", k + 1, SIGNAL_FIELDS[f].name);
            return;
        }
    }
    snprintf(out, cap, "header");
}

/* The EDF specification allows printable US-ASCII (32..126) only in the header;
 * the BDF version field's first byte (0xff) is the one exception. */
static rt_status check_ascii(const header_ctx *c, long long from, long long to)
{
    for (long long i = from; i < to; i++) {
        unsigned char b = c->bytes[i];
        if (i == 0 && c->is_bdf)
            continue;
        if (b < 32 || b > 126) {
            char where[96];
            describe_offset(c, i, where, sizeof where);
            return rt_fail(c->err, RT_ERR_RECORDING,
                           "%s: non-ASCII byte 0x%02x at byte offset %lld in %s "
                           "(EDF headers allow printable ASCII only)",
                           c->path, b, i, where);
        }
    }
    return RT_OK;
}

static rt_status check_version(header_ctx *c)
{
    if (memcmp(c->bytes, "0       ", 8) == 0) {
        c->is_bdf = false;
        return RT_OK;
    }
    if (memcmp(c->bytes, "\xff" "BIOSEMI", 8) == 0) {
        c->is_bdf = true;
        return RT_OK;
    }
    return fail_main(c, F_VERSION, "expected \"0\" followed by 7 spaces (EDF) or \"\\xffBIOSEMI\" (BDF)");
}

/* "dd.mm.yy" or "hh.mm.ss": digits with dots at positions 2 and 5, each
 * part in its calendar or clock range. */
static rt_status check_clock_field(const header_ctx *c, int f)
{
    static const int low[2][3] = {{1, 1, 0}, {0, 0, 0}}, high[2][3] = {{31, 12, 99}, {23, 59, 59}};
    const unsigned char *p = c->bytes + MAIN_FIELDS[f].offset;
    const char *expected = f == F_DATE ? "expected dd.mm.yy" : "expected hh.mm.ss";
    int row = f == F_DATE ? 0 : 1;
    for (int i = 0; i < 8; i++) {
        bool ok = (i == 2 || i == 5) ? p[i] == '.' : isdigit(p[i]) != 0;
        if (!ok)
            return fail_main(c, f, expected);
    }
    for (int part = 0; part < 3; part++) {
        int v = (p[3 * part] - '0') * 10 + (p[3 * part + 1] - '0');
        if (v < low[row][part] || v > high[row][part])
            return fail_main(c, f, f == F_DATE ? "day or month out of range" : "hour, minute or second out of range");
    }
    return RT_OK;
}

static bool is_plus(const header_ctx *c)
{
    const char *reserved = (const char *)c->bytes + MAIN_FIELDS[F_RESERVED].offset;
    return strncmp(reserved, "EDF+", 4) == 0 || strncmp(reserved, "BDF+", 4) == 0;
}

/* EDF+ (Kemp & Olivan 2003, section 2.1.3.2): the recording field starts with
 * "Startdate ". The finer subfield rules are left to EDFlib. */
static rt_status check_plus_identity(const header_ctx *c)
{
    const char *recording = (const char *)c->bytes + MAIN_FIELDS[F_RECORDING].offset;
    if (is_plus(c) && strncmp(recording, "Startdate ", 10) != 0)
        return fail_main(c, F_RECORDING, "an EDF+ recording field must start with \"Startdate \"");
    return RT_OK;
}

static rt_status check_signal_count(header_ctx *c)
{
    long long ns;
    if (main_integer(c, F_SIGNALS, &ns) != 0)
        return fail_main(c, F_SIGNALS, EDF_INTEGER_FORM);
    if (ns < 1 || ns > MAX_SIGNALS)
        return fail_main(c, F_SIGNALS, "must be 1 to 640 (EDFlib's limit)");
    c->ns = (int)ns;
    return RT_OK;
}

static rt_status check_header_bytes(const header_ctx *c, rt_edf_layout *layout)
{
    long long bytes;
    if (main_integer(c, F_HEADER_BYTES, &bytes) != 0)
        return fail_main(c, F_HEADER_BYTES, EDF_INTEGER_FORM);
    layout->header_bytes = (long long)SIGNAL_BYTES * (c->ns + 1);
    if (bytes != layout->header_bytes) {
        char why[128];
        snprintf(why, sizeof why, "%d signals need 256 x (%d + 1) = %lld header bytes", c->ns, c->ns,
                 layout->header_bytes);
        return fail_main(c, F_HEADER_BYTES, why);
    }
    return RT_OK;
}

static rt_status check_reserved(const header_ctx *c)
{
    const char *reserved = (const char *)c->bytes + MAIN_FIELDS[F_RESERVED].offset;
    if (strncmp(reserved, "EDF+D", 5) == 0 || strncmp(reserved, "BDF+D", 5) == 0)
        return fail_main(c, F_RESERVED, "discontinuous EDF+D is not supported");
    return RT_OK;
}

static rt_status check_record_count(const header_ctx *c, rt_edf_layout *layout)
{
    if (main_integer(c, F_RECORDS, &layout->n_records) != 0)
        return fail_main(c, F_RECORDS, EDF_INTEGER_FORM);
    if (layout->n_records == -1)
        return fail_main(c, F_RECORDS, "record count unknown (-1: the recording was not closed properly)");
    if (layout->n_records < 1)
        return fail_main(c, F_RECORDS, "the file must hold at least one data record");
    return RT_OK;
}

static rt_status check_record_duration(const header_ctx *c, rt_edf_layout *layout)
{
    char text[FIELD_TEXT_MAX];
    field_text(c, MAIN_FIELDS[F_DURATION].offset, MAIN_FIELDS[F_DURATION].width, text);
    if (parse_edf_number(text, &layout->record_s) != 0)
        return fail_main(c, F_DURATION, EDF_NUMBER_FORM);
    if (!(layout->record_s > 0))
        return fail_main(c, F_DURATION, "must be greater than 0 seconds");
    return RT_OK;
}

static rt_status check_main_header(header_ctx *c, rt_edf_layout *layout)
{
    rt_status s;
    if ((s = check_version(c)) != RT_OK || (s = check_ascii(c, 0, MAIN_BYTES)) != RT_OK ||
        (s = check_clock_field(c, F_DATE)) != RT_OK || (s = check_clock_field(c, F_TIME)) != RT_OK ||
        (s = check_signal_count(c)) != RT_OK || (s = check_header_bytes(c, layout)) != RT_OK ||
        (s = check_reserved(c)) != RT_OK || (s = check_plus_identity(c)) != RT_OK ||
        (s = check_record_count(c, layout)) != RT_OK ||
        (s = check_record_duration(c, layout)) != RT_OK)
        return s;
    layout->is_bdf = c->is_bdf;
    layout->n_signals = c->ns;
    return RT_OK;
}

static rt_status check_physical_range(const header_ctx *c, int k)
{
    double lo, hi;
    if (signal_number(c, S_PHYS_MIN, k, &lo) != 0)
        return fail_signal(c, S_PHYS_MIN, k, EDF_NUMBER_FORM);
    if (signal_number(c, S_PHYS_MAX, k, &hi) != 0)
        return fail_signal(c, S_PHYS_MAX, k, EDF_NUMBER_FORM);
    if (lo == hi)
        return fail_signal(c, S_PHYS_MAX, k, "equals the physical minimum, so no sample can be scaled");
    return RT_OK;
}

static rt_status check_digital_range(const header_ctx *c, int k)
{
    long long lo, hi;
    long long limit_lo = c->is_bdf ? -8388608 : -32768;
    long long limit_hi = c->is_bdf ? 8388607 : 32767;
    const char *range = c->is_bdf ? "BDF samples are -8388608..8388607" : "EDF samples are -32768..32767";
    if (signal_integer(c, S_DIG_MIN, k, &lo) != 0)
        return fail_signal(c, S_DIG_MIN, k, EDF_INTEGER_FORM);
    if (signal_integer(c, S_DIG_MAX, k, &hi) != 0)
        return fail_signal(c, S_DIG_MAX, k, EDF_INTEGER_FORM);
    if (lo < limit_lo || lo > limit_hi)
        return fail_signal(c, S_DIG_MIN, k, range);
    if (hi < limit_lo || hi > limit_hi)
        return fail_signal(c, S_DIG_MAX, k, range);
    if (lo >= hi)
        return fail_signal(c, S_DIG_MAX, k, "must be greater than the digital minimum");
    return RT_OK;
}

static rt_status check_samples(const header_ctx *c, int k, long long *samples)
{
    if (signal_integer(c, S_SAMPLES, k, samples) != 0)
        return fail_signal(c, S_SAMPLES, k, EDF_INTEGER_FORM);
    if (*samples < 1)
        return fail_signal(c, S_SAMPLES, k, "must be at least 1");
    if (*samples > 100000000)
        return fail_signal(c, S_SAMPLES, k, "too large (more than 10^8)");
    return RT_OK;
}

static bool is_annotation_signal(const header_ctx *c, int k)
{
    char label[FIELD_TEXT_MAX];
    field_text(c, signal_field_offset(c->ns, S_LABEL, k), 16, label);
    return strcmp(label, c->is_bdf ? "BDF Annotations" : "EDF Annotations") == 0;
}

static bool field_is_blank(const header_ctx *c, int f, int k)
{
    char text[FIELD_TEXT_MAX];
    field_text(c, signal_field_offset(c->ns, f, k), SIGNAL_FIELDS[f].width, text);
    return text[0] == '\0';
}

/* EDF+ (Kemp & Olivan 2003): a file holds at least one annotation signal, and
 * its transducer and prefilter fields are blank (EDFlib enforces both). */
static rt_status check_annotation_signals(const header_ctx *c)
{
    int found = 0;
    for (int k = 0; k < c->ns; k++) {
        if (!is_annotation_signal(c, k))
            continue;
        found++;
        if (!field_is_blank(c, S_TRANSDUCER, k))
            return fail_signal(c, S_TRANSDUCER, k, "must be blank for an EDF+ annotation signal");
        if (!field_is_blank(c, S_PREFILTER, k))
            return fail_signal(c, S_PREFILTER, k, "must be blank for an EDF+ annotation signal");
    }
    if (found == 0)
        return rt_fail(c->err, RT_ERR_RECORDING,
                       "%s: an EDF+/BDF+ file needs a signal labelled \"%s\" (field \"label\" from byte "
                       "offset 256), and none is",
                       c->path, c->is_bdf ? "BDF Annotations" : "EDF Annotations");
    return RT_OK;
}

/* The signals EDFlib sets aside as annotation signals, so the data records
 * can be read without it in the same signal order: EDFlib takes a file as
 * EDF+ only with "EDF+C" in an EDF (BDF+: "BDF+C" in a BDF), and then hides
 * each signal whose raw 16-byte label is "EDF Annotations " ("BDF ..."). */
static bool edflib_hides_signal(const header_ctx *c, int k)
{
    const char *reserved = (const char *)c->bytes + MAIN_FIELDS[F_RESERVED].offset;
    const char *label = (const char *)c->bytes + signal_field_offset(c->ns, S_LABEL, k);
    if (strncmp(reserved, c->is_bdf ? "BDF+C" : "EDF+C", 5) != 0)
        return false;
    return memcmp(label, c->is_bdf ? "BDF Annotations " : "EDF Annotations ", 16) == 0;
}

static rt_status check_signal_headers(const header_ctx *c, rt_edf_layout *layout)
{
    rt_status s = check_ascii(c, MAIN_BYTES, layout->header_bytes);
    if (s == RT_OK && is_plus(c))
        s = check_annotation_signals(c);
    long long samples_per_record = 0;
    for (int k = 0; k < c->ns && s == RT_OK; k++) {
        long long samples = 0;
        if ((s = check_physical_range(c, k)) == RT_OK && (s = check_digital_range(c, k)) == RT_OK &&
            (s = check_samples(c, k, &samples)) == RT_OK) {
            samples_per_record += samples;
            layout->samples_per_record[k] = (int)samples;
            layout->edflib_annotation[k] = edflib_hides_signal(c, k);
        }
    }
    if (s != RT_OK)
        return s;
    layout->record_bytes = samples_per_record * (c->is_bdf ? 3 : 2);
    long long limit = c->is_bdf ? BDF_RECORD_MAX_BYTES : EDF_RECORD_MAX_BYTES;
    if (layout->record_bytes > limit)
        return rt_fail(c->err, RT_ERR_RECORDING,
                       "%s: a data record of %lld bytes exceeds EDFlib's limit of %lld bytes "
                       "(sum of field \"samples per record\" from byte offset %lld)",
                       c->path, layout->record_bytes, limit, signal_field_offset(c->ns, S_SAMPLES, 0));
    return RT_OK;
}

/* Truncated data and a record count larger than the data are the same fault
 * seen from the file: name the record where the bytes run out. */
static rt_status check_file_size(const header_ctx *c, const rt_edf_layout *layout)
{
    long long data = c->file_bytes - layout->header_bytes;
    long long needed = layout->n_records * layout->record_bytes;
    if (data >= needed)
        return RT_OK;
    long long whole = data / layout->record_bytes;
    long long end_offset = c->file_bytes;
    if (data % layout->record_bytes == 0)
        return rt_fail(c->err, RT_ERR_RECORDING,
                       "%s: file ends after data record %lld (byte offset %lld); header promises %lld "
                       "records of %lld bytes (field \"data record count\", byte offset %d)",
                       c->path, whole, end_offset, layout->n_records, layout->record_bytes,
                       MAIN_FIELDS[F_RECORDS].offset);
    return rt_fail(c->err, RT_ERR_RECORDING,
                   "%s: file ends inside data record %lld (byte offset %lld); header promises %lld "
                   "records of %lld bytes (field \"data record count\", byte offset %d)",
                   c->path, whole + 1, end_offset, layout->n_records, layout->record_bytes,
                   MAIN_FIELDS[F_RECORDS].offset);
}

static rt_status fail_truncated_header(const header_ctx *c, long long needed, const char *what)
{
    return rt_fail(c->err, RT_ERR_RECORDING,
                   "%s: header truncated: the file has %lld bytes but %s needs %lld", c->path,
                   c->file_bytes, what, needed);
}

static rt_status read_exact(const header_ctx *c, FILE *f, long long offset, long long n)
{
    if (fread(c->bytes + offset, 1, (size_t)n, f) != (size_t)n)
        return rt_fail(c->err, RT_ERR_IO, "%s: cannot read the header at byte offset %lld: %s", c->path,
                       offset, ferror(f) ? strerror(errno) : "unexpected end of file");
    return RT_OK;
}

/* A text file given where the recording belongs is most often the staging or
 * event table (or the XML scoring file) given in its place: say so rather than
 * report its first bytes as a bad EDF version field. Looks only at files that
 * are not EDF or BDF by their first 8 bytes; n bytes at c->bytes. */
static rt_status refuse_text_file(const header_ctx *c, long long n)
{
    if (n >= 8 && (memcmp(c->bytes, "0       ", 8) == 0 || memcmp(c->bytes, "\xff" "BIOSEMI", 8) == 0))
        return RT_OK;
    const char *b = (const char *)c->bytes;
    long long line = 0;
    bool delimited = false;
    while (line < n && b[line] != '\n') {
        unsigned char ch = (unsigned char)b[line];
        if (ch < 0x20 && ch != '\t' && ch != '\r')
            return RT_OK; /* binary: the ordinary checks say what is wrong */
        delimited |= ch == ',' || ch == '\t' || ch == ';';
        line++;
    }
    if (n >= 5 && memcmp(b, "<?xml", 5) == 0)
        return rt_fail(c->err, RT_ERR_RECORDING,
                       "%s: this is an XML file, not an EDF/BDF recording; did you swap the "
                       "recording and --stages?", c->path);
    if (!delimited || (line == n && n >= MAIN_BYTES))
        return RT_OK;
    return rt_fail(c->err, RT_ERR_RECORDING,
                   "%s: this is a text table, not an EDF/BDF recording; did you swap the "
                   "recording and --stages?", c->path);
}

static rt_status check_open_file(header_ctx *c, FILE *f, rt_edf_layout *layout)
{
    rt_status s;
    long long head = c->file_bytes < MAIN_BYTES ? c->file_bytes : MAIN_BYTES;
    if ((s = read_exact(c, f, 0, head)) != RT_OK || (s = refuse_text_file(c, head)) != RT_OK)
        return s;
    rewind(f); /* the checks below read the header from its start */
    if (c->file_bytes < MAIN_BYTES)
        return fail_truncated_header(c, MAIN_BYTES, "the main header");
    if ((s = read_exact(c, f, 0, MAIN_BYTES)) != RT_OK || (s = check_main_header(c, layout)) != RT_OK)
        return s;
    if (c->file_bytes < layout->header_bytes) {
        char what[64];
        snprintf(what, sizeof what, "a header with %d signals", c->ns);
        return fail_truncated_header(c, layout->header_bytes, what);
    }
    if ((s = read_exact(c, f, MAIN_BYTES, layout->header_bytes - MAIN_BYTES)) != RT_OK ||
        (s = check_signal_headers(c, layout)) != RT_OK)
        return s;
    layout->file_bytes = c->file_bytes;
    return check_file_size(c, layout);
}

rt_status rt_edf_header_check(const char *path, rt_edf_layout *layout, rt_error *err)
{
    header_ctx c = {.path = path, .err = err};
    FILE *f = NULL;
    /* EDFlib seeks, so only a regular file will do (src/common/input.h) */
    rt_status s = rt_input_open(path, "recording", &f, &c.file_bytes, err);
    if (s != RT_OK)
        return s;
    c.bytes = rt_calloc((size_t)SIGNAL_BYTES * (MAX_SIGNALS + 1), 1);
    if (!c.bytes) {
        fclose(f);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory reading the header", path);
    }
    memset(layout, 0, sizeof *layout);
    s = check_open_file(&c, f, layout);
    free(c.bytes);
    fclose(f);
    return s;
}
