/* The recording reader: remtone's header checks (edf_header_check.c) first,
 * then EDFlib for the header values. EDFlib keeps a
 * process-wide table of open files and its open/close are not thread-safe
 * (edflib.h, "EDFlib and thread-safety"), so every EDFlib call runs under the
 * io/ lock (edflib_lock.h).
 *
 * Samples are read straight from the data records, not through EDFlib, which
 * reads them a byte at a time. The layout is fixed by the EDF specification:
 * after the 256 x (ns + 1) header bytes come the data records, each holding
 * every signal's samples-per-record samples in signal order (annotation
 * signals included), 16-bit little-endian two's complement in EDF, 24-bit in
 * BDF. The conversion is EDFlib's own, operation for operation, so the values
 * are bit-identical to edfread_physical_samples (tests/unit/test_read_direct.c):
 * the digital value clamped to [dig_min, dig_max], then
 * bitvalue * (offset + digital) with bitvalue = (phys_max - phys_min) /
 * (dig_max - dig_min) and offset = phys_max / bitvalue - dig_max, from the
 * header values as EDFlib parsed them. The direct reads use the recording's
 * own descriptor and pread(2), which has no shared file position, so they
 * need no lock and run in parallel; EDFlib's handle is closed once the header
 * is read. Should remtone's view of the record layout ever disagree with
 * EDFlib's, EDFlib's handle stays open and samples are read through it, under
 * the lock, as before. Samples come out in microvolts: the physical value
 * times the unit's factor.
 *
 * The EDF+/BDF+ annotation signals are read the same way, several records
 * per pread, and their TALs parsed by edf_tal.c, because EDFlib 1.23 reading
 * them itself (EDFLIB_READ_ALL_ANNOTATIONS) makes about two read(2) calls per
 * data record: 57,600 for an 8-hour night of 1-s records, most of the time
 * of an open (docs/performance.md, "Opening a recording"). EDFlib is opened
 * with EDFLIB_DO_NOT_READ_ANNOTATIONS, which still checks the header and the
 * first time-keeping TAL, and stays the reference: remtone reads the same
 * annotations and refuses the same files (tests/unit/test_tal_edflib.c), with
 * a message naming the record and the byte offset where EDFlib gives a bare
 * "format error". When the layouts disagree, EDFlib reads the annotations. */
#define _FILE_OFFSET_BITS 64 /* 64-bit off_t for pread on 32-bit systems */

#include "remtone/recording.h"

#include <edflib.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

#include "digest.h"
#include "edf_header_check.h"
#include "edf_tal.h"
#include "edflib_lock.h"
#include "recording_seam.h"
#include "internal.h"

_Static_assert(sizeof(off_t) >= 8, "recordings above 2 GiB need a 64-bit off_t");

/* READ_CHUNK: samples per EDFlib call (it takes an int count).
 * SPAN_BYTES: most bytes one direct read asks for, which bounds the buffer.
 * SKIP_BYTES: records are read whole, several per pread, when the bytes of the
 * other signals in between are fewer than this (copying them costs less than
 * a system call per record); otherwise the channel's bytes record by record. */
enum { IDENTITY_TEXT_MAX = 512, READ_CHUNK = 1 << 20, SPAN_BYTES = 1 << 18, SKIP_BYTES = 16 << 10 };

/* Where one channel lies in the data records, and EDFlib's conversion of it. */
typedef struct record_slot {
    long long offset;     /* byte offset of the channel's first sample in a record */
    long long spr;        /* samples per record */
    long long group;      /* records per read (1: the channel's bytes only) */
    int dig_min, dig_max; /* digital values are clamped to these, as EDFlib does */
    double bitvalue;      /* EDFlib's (phys_max - phys_min) / (dig_max - dig_min) */
    double phys_offset;   /* EDFlib's phys_max / bitvalue - dig_max */
} record_slot;

struct rt_recording {
    char *path;
    int handle;           /* EDFlib's; -1 once closed (direct reads) */
    int fd;               /* own descriptor for direct reads; -1 when reading through EDFlib */
    rt_file_kind kind;
    double duration_s;
    rt_clock_time start;
    char patient[IDENTITY_TEXT_MAX];
    char recording[IDENTITY_TEXT_MAX];
    long long file_bytes;
    int n_channels;
    rt_channel_info *channels;
    size_t n_annotations;
    rt_annotation *annotations;
    /* the data records, for direct reads */
    long long header_bytes;
    long long record_bytes;
    int sample_bytes;     /* 2 (EDF) or 3 (BDF) */
    record_slot *slots;   /* one per channel */
};

/* ---- units ------------------------------------------------------------ */

/* Length of the micro prefix at p (ASCII u/U, Latin-1 0xb5, UTF-8 U+00B5 or
 * U+03BC), 0 when p does not start with one. */
static size_t micro_prefix_length(const unsigned char *p)
{
    if (p[0] == 'u' || p[0] == 'U' || p[0] == 0xb5)
        return 1;
    if ((p[0] == 0xc2 && p[1] == 0xb5) || (p[0] == 0xce && p[1] == 0xbc))
        return 2;
    return 0;
}

static bool is_volt_letter(const char *s)
{
    return (s[0] == 'V' || s[0] == 'v') && s[1] == '\0';
}

bool rt_unit_uv_per_unit(const char *unit, double *uv_per_unit)
{
    char text[32];
    rt_copy_string(text, sizeof text, unit ? unit : "");
    rt_trim(text);
    double factor = 0;
    size_t micro = micro_prefix_length((const unsigned char *)text);
    if (is_volt_letter(text))
        factor = 1e6;
    else if (text[0] == 'm' && is_volt_letter(text + 1))
        factor = 1e3;
    else if (micro > 0 && is_volt_letter(text + micro))
        factor = 1.0;
    else if (text[0] == 'n' && is_volt_letter(text + 1))
        factor = 1e-3;
    if (uv_per_unit)
        *uv_per_unit = factor > 0 ? factor : 1.0;
    return factor > 0;
}

/* ---- EDFlib errors ------------------------------------------------------ */

static const char *edflib_error_text(int code)
{
    switch (code) {
    case EDFLIB_MALLOC_ERROR: return "out of memory inside EDFlib";
    case EDFLIB_NO_SUCH_FILE_OR_DIRECTORY: return "EDFlib cannot open the file";
    case EDFLIB_FILE_CONTAINS_FORMAT_ERRORS:
        return "EDFlib reports a format error that remtone's header checks did not pin down "
               "(often the EDF+ patient or recording subfields or the start date)";
    case EDFLIB_MAXFILES_REACHED: return "too many recordings open at once (EDFlib's limit)";
    case EDFLIB_FILE_READ_ERROR: return "read error inside EDFlib";
    case EDFLIB_FILE_ALREADY_OPENED: return "the file is already open in this process";
    case EDFLIB_FILETYPE_ERROR: return "not an EDF, EDF+, BDF or BDF+ file";
    case EDFLIB_NUMBER_OF_SIGNALS_INVALID: return "invalid number of signals";
    case EDFLIB_FILE_IS_DISCONTINUOUS: return "discontinuous EDF+D is not supported";
    case EDFLIB_INVALID_READ_ANNOTS_VALUE: return "internal: invalid annotation mode";
    case EDFLIB_ARCH_ERROR: return "EDFlib does not support this machine architecture";
    default: return "unknown EDFlib error";
    }
}

static rt_status edflib_open_status(int code)
{
    switch (code) {
    case EDFLIB_MALLOC_ERROR: return RT_ERR_NOMEM;
    case EDFLIB_NO_SUCH_FILE_OR_DIRECTORY:
    case EDFLIB_FILE_READ_ERROR:
    case EDFLIB_MAXFILES_REACHED:
    case EDFLIB_FILE_ALREADY_OPENED: return RT_ERR_IO;
    case EDFLIB_INVALID_READ_ANNOTS_VALUE:
    case EDFLIB_ARCH_ERROR: return RT_ERR_INTERNAL;
    default: return RT_ERR_RECORDING;
    }
}

/* ---- filling the object from EDFlib's header -------------------------- */

static rt_file_kind kind_from_edflib(int filetype)
{
    switch (filetype) {
    case EDFLIB_FILETYPE_EDFPLUS: return RT_FILE_EDFPLUS;
    case EDFLIB_FILETYPE_BDF: return RT_FILE_BDF;
    case EDFLIB_FILETYPE_BDFPLUS: return RT_FILE_BDFPLUS;
    default: return RT_FILE_EDF;
    }
}

/* Appends word to a space-separated text, skipping empty words. */
static void append_word(char *text, size_t cap, const char *word)
{
    char copy[96];
    rt_copy_string(copy, sizeof copy, word);
    rt_trim(copy);
    if (copy[0] == '\0')
        return;
    size_t n = strlen(text);
    if (n > 0 && n + 1 < cap)
        text[n++] = ' ';
    rt_copy_string(text + n, cap - n, copy);
}

/* EDFlib splits the EDF+ identity fields into subfields and leaves the plain
 * ones empty, and the other way round for plain EDF; join whatever is there. */
static void fill_identity(rt_recording *rec, const struct edf_hdr_struct *h)
{
    const char *patient[] = {h->patient, h->patientcode, h->gender, h->birthdate, h->patient_name,
                             h->patient_additional};
    const char *recording[] = {h->recording, h->admincode, h->technician, h->equipment,
                               h->recording_additional};
    for (size_t i = 0; i < sizeof patient / sizeof patient[0]; i++)
        append_word(rec->patient, sizeof rec->patient, patient[i]);
    for (size_t i = 0; i < sizeof recording / sizeof recording[0]; i++)
        append_word(rec->recording, sizeof rec->recording, recording[i]);
}

static void fill_start(rt_recording *rec, const struct edf_hdr_struct *h)
{
    rec->start = (rt_clock_time){
        .year = h->startdate_year, .month = h->startdate_month, .day = h->startdate_day,
        .hour = h->starttime_hour, .minute = h->starttime_minute, .second = h->starttime_second,
        .subsecond = (double)h->starttime_subsecond / (double)EDFLIB_TIME_DIMENSION};
}

static void fill_channel(rt_channel_info *ch, const struct edf_param_struct *p, double record_s)
{
    rt_copy_string(ch->label, sizeof ch->label, p->label);
    rt_trim(ch->label);
    rt_copy_string(ch->transducer, sizeof ch->transducer, p->transducer);
    rt_trim(ch->transducer);
    rt_copy_string(ch->unit, sizeof ch->unit, p->physdimension);
    rt_trim(ch->unit);
    rt_copy_string(ch->prefilter, sizeof ch->prefilter, p->prefilter);
    rt_trim(ch->prefilter);
    ch->rate_hz = (double)p->smp_in_datarecord / record_s;
    ch->phys_min = p->phys_min;
    ch->phys_max = p->phys_max;
    ch->dig_min = p->dig_min;
    ch->dig_max = p->dig_max;
    ch->n_samples = p->smp_in_file;
    ch->is_voltage = rt_unit_uv_per_unit(ch->unit, &ch->uv_per_unit);
}

static rt_status fill_channels(rt_recording *rec, const struct edf_hdr_struct *h, rt_error *err)
{
    double record_s = (double)h->datarecord_duration / (double)EDFLIB_TIME_DIMENSION;
    rec->n_channels = h->edfsignals;
    rec->channels = rt_calloc((size_t)h->edfsignals, sizeof *rec->channels);
    if (!rec->channels)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %d channels", rec->path, h->edfsignals);
    for (int i = 0; i < h->edfsignals; i++)
        fill_channel(&rec->channels[i], &h->signalparam[i], record_s);
    return RT_OK;
}

/* ---- annotations --------------------------------------------------------- */

typedef struct onset_key {
    double onset_s;
    size_t index;
} onset_key;

/* Ties keep file order, so the sort is stable. */
static int compare_onset(const void *a, const void *b)
{
    const onset_key *x = a, *y = b;
    if (x->onset_s != y->onset_s)
        return x->onset_s < y->onset_s ? -1 : 1;
    return (x->index > y->index) - (x->index < y->index);
}

static rt_status sort_annotations(rt_recording *rec, rt_error *err)
{
    size_t n = rec->n_annotations;
    if (n < 2)
        return RT_OK;
    onset_key *keys = rt_calloc(n, sizeof *keys);
    rt_annotation *sorted = rt_calloc(n, sizeof *sorted);
    if (!keys || !sorted) {
        free(keys);
        free(sorted);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory sorting %zu annotations", rec->path, n);
    }
    for (size_t i = 0; i < n; i++)
        keys[i] = (onset_key){rec->annotations[i].onset_s, i};
    qsort(keys, n, sizeof *keys, compare_onset);
    for (size_t i = 0; i < n; i++)
        sorted[i] = rec->annotations[keys[i].index];
    free(keys);
    free(rec->annotations);
    rec->annotations = sorted;
    return RT_OK;
}

static void copy_annotation(rt_annotation *out, const struct edf_annotation_struct *a)
{
    out->onset_s = (double)a->onset / (double)EDFLIB_TIME_DIMENSION;
    /* EDFlib leaves the duration text empty when the annotation has none. */
    out->duration_s = a->duration[0] ? (double)a->duration_l / (double)EDFLIB_TIME_DIMENSION : -1.0;
    rt_copy_string(out->text, sizeof out->text, a->annotation);
}

static rt_status read_edflib_annotations(rt_recording *rec, long long count, rt_error *err)
{
    if (count <= 0)
        return RT_OK;
    rec->annotations = rt_calloc((size_t)count, sizeof *rec->annotations);
    if (!rec->annotations)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for %lld annotations", rec->path, count);
    for (long long i = 0; i < count; i++) {
        struct edf_annotation_struct a;
        if (edf_get_annotation(rec->handle, (int)i, &a) != 0)
            return rt_fail(err, RT_ERR_RECORDING, "%s: EDFlib cannot return annotation %lld of %lld",
                           rec->path, i + 1, count);
        copy_annotation(&rec->annotations[i], &a);
        rec->n_annotations++;
    }
    return RT_OK;
}

/* ---- open / close ---------------------------------------------------------- */

/* Caller holds the lock. */
static rt_status open_with_edflib(rt_recording *rec, struct edf_hdr_struct *h, int annotation_mode,
                                  rt_error *err)
{
    errno = 0;
    int rc = edfopen_file_readonly(rec->path, h, annotation_mode);
    int saved = errno;
    /* EDFlib 1.23 reports an allocation that failed while it reads the
     * annotations as a format error; the allocator's ENOMEM tells them apart
     * (remtone's own header checks have already passed by now). */
    if (rc != 0 && saved == ENOMEM)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory inside EDFlib (EDFlib error %d)",
                       rec->path, h->filetype);
    if (rc != 0)
        return rt_fail(err, edflib_open_status(h->filetype), "%s: %s (EDFlib error %d)", rec->path,
                       edflib_error_text(h->filetype), h->filetype);
    rec->handle = h->handle;
    return RT_OK;
}

/* Caller holds the lock. The annotations are read afterwards. */
static rt_status fill_from_header(rt_recording *rec, const struct edf_hdr_struct *h, rt_error *err)
{
    rec->kind = kind_from_edflib(h->filetype);
    rec->duration_s = (double)h->file_duration / (double)EDFLIB_TIME_DIMENSION;
    fill_start(rec, h);
    fill_identity(rec, h);
    /* An EDF+ file with the annotation signal alone is a valid hypnogram file
     * (a separate staging file); it has no channels to score, which the role
     * step reports if it is used as a recording. */
    return fill_channels(rec, h, err);
}

static rt_status recording_new(const char *path, rt_recording **out, rt_error *err)
{
    *out = NULL;
    rt_recording *rec = rt_calloc(1, sizeof *rec);
    size_t n = strlen(path);
    if (rec)
        rec->path = rt_calloc(n + 1, 1);
    if (!rec || !rec->path) {
        free(rec);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    }
    memcpy(rec->path, path, n + 1);
    rec->handle = -1;
    rec->fd = -1;
    *out = rec;
    return RT_OK;
}

/* The EDF specification does not forbid bytes after the last data record,
 * but EDFlib 1.23 refuses any file whose size differs from the header's
 * promise, with a bare "format error". Say exactly what is wrong and how to
 * fix it instead. */
static rt_status check_no_trailing_bytes(const char *path, const rt_edf_layout *layout, rt_error *err)
{
    long long end = layout->header_bytes + layout->n_records * layout->record_bytes;
    if (layout->file_bytes == end)
        return RT_OK;
    return rt_fail(err, RT_ERR_RECORDING,
                   "%s: %lld extra bytes after the last of %lld data records (from byte offset %lld); "
                   "EDFlib refuses such files: cut the file to %lld bytes (truncate -s %lld FILE)",
                   path, layout->file_bytes - end, layout->n_records, end, end, end);
}

/* ---- the data records, read directly ------------------------------------ */

static long long min_ll(long long a, long long b) { return a < b ? a : b; }

/* "channel \"LABEL\"" for read_bytes_at's messages; returns buf. */
static const char *channel_what(const rt_recording *rec, int channel, char *buf, size_t cap)
{
    snprintf(buf, cap, "channel \"%s\"", rec->channels[channel].label);
    return buf;
}

/* Reads len bytes at offset of the file through fd (pread: no shared file
 * position, so no lock); what names the bytes in a message. */
static rt_status read_bytes_at(int fd, const char *path, const char *what, unsigned char *buf, size_t len,
                               long long offset, rt_error *err)
{
    for (size_t done = 0; done < len;) {
        ssize_t got = pread(fd, buf + done, len - done, (off_t)(offset + (long long)done));
        if (got < 0 && errno == EINTR)
            continue;
        if (got <= 0)
            return rt_fail(err, got < 0 ? rt_errno_status(errno, RT_ERR_IO) : RT_ERR_IO,
                           "%s: %s: cannot read %zu bytes at byte offset %lld: %s", path, what, len - done,
                           offset + (long long)done,
                           got < 0 ? strerror(errno) : "the file ends early (cut after it was opened?)");
        done += (size_t)got;
    }
    return RT_OK;
}

/* Maps EDFlib's channels onto the file's signals (EDFlib hides the annotation
 * signals) and checks that both agree on the record layout: the record count,
 * the sample size and every channel's samples per record. The file size check
 * of both already ties the record size to the sum over all signals. */
static atomic_bool force_edflib; /* recording_seam.h */

void rt_recording_seam_force_edflib(bool on) { atomic_store(&force_edflib, on); }

static bool layout_agrees(const rt_edf_layout *l, const struct edf_hdr_struct *h, int *signal_of)
{
    if (atomic_load(&force_edflib))
        return false;
    bool bdf = h->filetype == EDFLIB_FILETYPE_BDF || h->filetype == EDFLIB_FILETYPE_BDFPLUS;
    if (h->datarecords_in_file != l->n_records || bdf != l->is_bdf || h->edfsignals > l->n_signals)
        return false;
    int j = 0;
    for (int k = 0; k < l->n_signals; k++) {
        if (l->edflib_annotation[k])
            continue;
        if (j == h->edfsignals || h->signalparam[j].smp_in_datarecord != l->samples_per_record[k])
            return false;
        signal_of[j++] = k;
    }
    return j == h->edfsignals;
}

static void plan_slot(record_slot *slot, const rt_edf_layout *l, int signal, const struct edf_param_struct *p)
{
    int width = l->is_bdf ? 3 : 2;
    slot->offset = 0;
    for (int k = 0; k < signal; k++)
        slot->offset += (long long)l->samples_per_record[k] * width;
    slot->spr = l->samples_per_record[signal];
    long long skipped = l->record_bytes - slot->spr * width;
    slot->group = l->record_bytes <= SPAN_BYTES && skipped < SKIP_BYTES ? SPAN_BYTES / l->record_bytes : 1;
    slot->dig_min = p->dig_min;
    slot->dig_max = p->dig_max;
    /* EDFlib's two expressions as it writes them (edflib.c, end of the header
     * check): the digital span is an int difference */
    slot->bitvalue = (p->phys_max - p->phys_min) / (p->dig_max - p->dig_min);
    slot->phys_offset = p->phys_max / slot->bitvalue - p->dig_max;
}

/* Opens the recording's own descriptor and plans every channel's slot.
 * Returns RT_OK with rec->fd >= 0, or RT_OK with rec->fd == -1 when the
 * layouts disagree (samples then come through EDFlib). */
static rt_status plan_direct_reads(rt_recording *rec, const rt_edf_layout *l, const struct edf_hdr_struct *h,
                                   rt_error *err)
{
    int signal_of[RT_EDF_MAX_SIGNALS];
    if (!layout_agrees(l, h, signal_of))
        return RT_OK;
    rec->slots = rt_calloc(h->edfsignals > 0 ? (size_t)h->edfsignals : 1, sizeof *rec->slots);
    if (!rec->slots)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", rec->path);
    for (int j = 0; j < h->edfsignals; j++)
        plan_slot(&rec->slots[j], l, signal_of[j], &h->signalparam[j]);
    rec->header_bytes = l->header_bytes;
    rec->record_bytes = l->record_bytes;
    rec->sample_bytes = l->is_bdf ? 3 : 2;
    int fd = open(rec->path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO), "%s: cannot open: %s", rec->path,
                       strerror(errno));
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode) || (long long)st.st_size != l->file_bytes) {
        close(fd);
        return rt_fail(err, RT_ERR_IO, "%s: the file changed while it was being opened (%lld bytes "
                       "when its header was checked)", rec->path, l->file_bytes);
    }
    rec->fd = fd;
    return RT_OK;
}

/* ---- the annotation signals, read directly -------------------------------- */

static bool has_annotation_signal(const rt_edf_layout *l)
{
    for (int k = 0; k < l->n_signals; k++)
        if (l->edflib_annotation[k])
            return true;
    return false;
}

/* Reads the annotation signals of every data record through fd into list, in
 * blocks like read_direct: several whole records per pread when the other
 * signals' bytes in between are few, otherwise the annotation signals' bytes
 * of one record per pread. With whole (records of at most SPAN_BYTES), the
 * header and whole records are read, every byte of the file in order, and
 * fed to the hash. */
static rt_status read_tals(const char *path, int fd, const rt_edf_layout *l, rt_tal_list *list,
                           XXH3_state_t *whole, rt_error *err)
{
    int width = l->is_bdf ? 3 : 2;
    int signal[RT_EDF_MAX_SIGNALS], n_annotation = 0;
    long long at[RT_EDF_MAX_SIGNALS], lo = 0, hi = 0, pos = 0;
    for (int k = 0; k < l->n_signals; k++) {
        long long bytes = (long long)l->samples_per_record[k] * width;
        if (l->edflib_annotation[k]) {
            if (n_annotation == 0)
                lo = pos;
            signal[n_annotation] = k;
            at[n_annotation++] = pos;
            hi = pos + bytes;
        }
        pos += bytes;
    }
    if (n_annotation == 0)
        return RT_OK;
    const long long rb = l->record_bytes;
    if (whole) { /* whole records: every byte of the file, in order */
        lo = 0;
        hi = rb;
    }
    const long long span = hi - lo;
    long long group = rb <= SPAN_BYTES && rb - span < SKIP_BYTES ? SPAN_BYTES / rb : 1;
    group = min_ll(group, l->n_records);
    size_t buf_bytes = (size_t)((group - 1) * rb + span);
    if (whole && (long long)buf_bytes < l->header_bytes)
        buf_bytes = (size_t)l->header_bytes;
    unsigned char *buf = malloc(buf_bytes);
    if (!buf)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory reading the annotation signals", path);
    rt_status s = RT_OK;
    if (whole) {
        s = read_bytes_at(fd, path, "header", buf, (size_t)l->header_bytes, 0, err);
        if (s == RT_OK)
            XXH3_64bits_update(whole, buf, (size_t)l->header_bytes);
    }
    for (long long r0 = 0; r0 < l->n_records && s == RT_OK; r0 += group) {
        long long g = min_ll(group, l->n_records - r0);
        long long offset = l->header_bytes + r0 * rb + lo;
        size_t bytes = (size_t)((g - 1) * rb + span);
        s = read_bytes_at(fd, path, "annotation signals", buf, bytes, offset, err);
        if (s == RT_OK && whole)
            XXH3_64bits_update(whole, buf, bytes);
        for (long long j = 0; j < g && s == RT_OK; j++)
            for (int a = 0; a < n_annotation && s == RT_OK; a++) {
                long long within = j * rb + at[a] - lo;
                rt_tal_place place = {.record = r0 + j, .signal = signal[a], .offset = offset + within,
                                      .time_keeping = a == 0};
                size_t len = (size_t)l->samples_per_record[signal[a]] * (size_t)width;
                s = rt_tal_read_signal(list, buf + within, len, &place, err);
            }
    }
    free(buf);
    return s;
}

/* The annotations of an EDF+/BDF+ recording whose records are read directly.
 * EDFlib (opened without its annotations) has read the first time-keeping
 * TAL for the start time: remtone's reading must agree with it. */
static rt_status read_direct_annotations(rt_recording *rec, const rt_edf_layout *l, long long record_units,
                                         long long edflib_start_units, rt_error *err)
{
    rt_tal_list list;
    rt_tal_list_init(&list, rec->path, record_units);
    /* records of at most one read are read whole for their annotation
     * signals, and then the file's digest is taken on the way (digest.h) */
    XXH3_state_t *whole = l->record_bytes <= SPAN_BYTES ? XXH3_createState() : NULL;
    struct stat before, after;
    bool hashing = whole && XXH3_64bits_reset(whole) == XXH_OK && fstat(rec->fd, &before) == 0;
    rt_status s = read_tals(rec->path, rec->fd, l, &list, hashing ? whole : NULL, err);
    if (s == RT_OK && hashing && fstat(rec->fd, &after) == 0) {
        char hex[17];
        rt_digest_hex(whole, hex);
        rt_digest_remember(&before, &after, l->header_bytes + l->n_records * l->record_bytes, hex);
    }
    XXH3_freeState(whole);
    if (s == RT_OK && list.start_units != edflib_start_units)
        s = rt_fail(err, RT_ERR_INTERNAL, "%s: the first data record starts %lld x 100 ns after the header's "
                    "start time for remtone but %lld x 100 ns for EDFlib", rec->path, list.start_units,
                    edflib_start_units);
    if (s != RT_OK) {
        free(list.items);
        return s;
    }
    rec->annotations = list.items;
    rec->n_annotations = list.n;
    return RT_OK;
}

/* EDFlib answers any fault of the first data record's time-keeping TAL with a
 * bare format error: remtone's own reading of the annotation signals names the
 * record and the byte. RT_ERR_RECORDING with that message, or RT_OK when it
 * finds nothing wrong (or cannot look: EDFlib's message stands then). */
static rt_status explain_format_error(const char *path, const rt_edf_layout *l, rt_error *err)
{
    if (!has_annotation_signal(l))
        return RT_OK;
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return RT_OK;
    rt_tal_list list;
    rt_tal_list_init(&list, path, llround(l->record_s * (double)RT_TAL_UNITS_PER_S));
    rt_status s = read_tals(path, fd, l, &list, NULL, err);
    free(list.items);
    close(fd);
    return s == RT_ERR_RECORDING ? s : RT_OK;
}

/* ---- open / close (continued) ------------------------------------------ */

/* The whole EDFlib session of an open runs under the lock: open (without the
 * annotations), header and, when the records are read directly, close; the
 * annotation signals are read after it, through remtone's own descriptor.
 * When remtone's layout disagrees with EDFlib's, EDFlib is opened again to
 * read the annotations itself, and keeps its handle for the samples. */
static rt_status open_locked(rt_recording *rec, const rt_edf_layout *layout, rt_error *err)
{
    struct edf_hdr_struct *h = rt_calloc(1, sizeof *h);
    if (!h)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", rec->path);
    rt_edflib_lock();
    rt_status s = open_with_edflib(rec, h, EDFLIB_DO_NOT_READ_ANNOTATIONS, err);
    bool edflib_refused = s != RT_OK;
    if (s == RT_OK)
        s = fill_from_header(rec, h, err);
    if (s == RT_OK)
        s = plan_direct_reads(rec, layout, h, err);
    if (s == RT_OK && rec->fd < 0) {
        edfclose_file(rec->handle);
        rec->handle = -1;
        s = open_with_edflib(rec, h, EDFLIB_READ_ALL_ANNOTATIONS, err);
        if (s == RT_OK)
            s = read_edflib_annotations(rec, h->annotations_in_file, err);
    } else if (s == RT_OK) {
        edfclose_file(rec->handle);
        rec->handle = -1;
    }
    rt_edflib_unlock();
    bool plus = h->filetype == EDFLIB_FILETYPE_EDFPLUS || h->filetype == EDFLIB_FILETYPE_BDFPLUS;
    if (s == RT_OK && rec->fd >= 0 && plus)
        s = read_direct_annotations(rec, layout, h->datarecord_duration, h->starttime_subsecond, err);
    if (s == RT_OK)
        s = sort_annotations(rec, err);
    if (edflib_refused && s == RT_ERR_RECORDING && h->filetype == EDFLIB_FILE_CONTAINS_FORMAT_ERRORS) {
        rt_error mine;
        if (explain_format_error(rec->path, layout, &mine) != RT_OK && err)
            *err = mine;
    }
    free(h);
    return s;
}

rt_status rt_recording_open(const char *path, rt_recording **out, rt_error *err)
{
    if (!out)
        return rt_fail(err, RT_ERR_USAGE, "rt_recording_open: no place for the result");
    *out = NULL;
    if (!path)
        return rt_fail(err, RT_ERR_USAGE, "no recording path given");
    /* the layout holds per-signal tables of EDFlib's 640-signal limit */
    rt_edf_layout *layout = rt_calloc(1, sizeof *layout);
    if (!layout)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    rt_recording *rec = NULL;
    rt_status s = rt_edf_header_check(path, layout, err);
    if (s == RT_OK)
        s = check_no_trailing_bytes(path, layout, err);
    if (s == RT_OK)
        s = recording_new(path, &rec, err);
    if (s == RT_OK) {
        rec->file_bytes = layout->file_bytes;
        s = open_locked(rec, layout, err);
    }
    free(layout);
    if (s != RT_OK) {
        rt_recording_close(rec);
        return s;
    }
    *out = rec;
    return RT_OK;
}

void rt_recording_close(rt_recording *rec)
{
    if (!rec)
        return;
    if (rec->handle >= 0) {
        rt_edflib_lock();
        edfclose_file(rec->handle);
        rt_edflib_unlock();
    }
    if (rec->fd >= 0)
        close(rec->fd);
    free(rec->slots);
    free(rec->channels);
    free(rec->annotations);
    free(rec->path);
    free(rec);
}

/* ---- accessors ----------------------------------------------------------- */

const char *rt_recording_path(const rt_recording *rec) { return rec->path; }
rt_file_kind rt_recording_kind(const rt_recording *rec) { return rec->kind; }
double rt_recording_duration_s(const rt_recording *rec) { return rec->duration_s; }
rt_clock_time rt_recording_start(const rt_recording *rec) { return rec->start; }
const char *rt_recording_patient_text(const rt_recording *rec) { return rec->patient; }
const char *rt_recording_recording_text(const rt_recording *rec) { return rec->recording; }
long long rt_recording_file_size(const rt_recording *rec) { return rec->file_bytes; }
int rt_recording_channel_count(const rt_recording *rec) { return rec->n_channels; }
size_t rt_recording_annotation_count(const rt_recording *rec) { return rec->n_annotations; }

const rt_channel_info *rt_recording_channel(const rt_recording *rec, int index)
{
    if (index < 0 || index >= rec->n_channels)
        return NULL;
    return &rec->channels[index];
}

int rt_recording_find_channel(const rt_recording *rec, const char *name)
{
    char wanted[64];
    rt_copy_string(wanted, sizeof wanted, name ? name : "");
    rt_trim(wanted);
    int exact = RT_CHANNEL_NONE, n_exact = 0, folded = RT_CHANNEL_NONE, n_folded = 0;
    for (int i = 0; i < rec->n_channels; i++) {
        if (strcmp(rec->channels[i].label, wanted) == 0) {
            exact = i;
            n_exact++;
        } else if (rt_equal_nocase(rec->channels[i].label, wanted)) {
            folded = i;
            n_folded++;
        }
    }
    if (n_exact > 0)
        return n_exact == 1 ? exact : RT_CHANNEL_AMBIGUOUS;
    if (n_folded > 0)
        return n_folded == 1 ? folded : RT_CHANNEL_AMBIGUOUS;
    if (wanted[0] == '#' && wanted[1] >= '1' && wanted[1] <= '9') {
        char *end = NULL;
        long k = strtol(wanted + 1, &end, 10);
        if (*end == '\0' && k >= 1 && k <= rec->n_channels)
            return (int)(k - 1);
    }
    return RT_CHANNEL_NONE;
}

const rt_annotation *rt_recording_annotation(const rt_recording *rec, size_t index)
{
    return index < rec->n_annotations ? &rec->annotations[index] : NULL;
}

/* ---- samples --------------------------------------------------------------- */

static rt_status check_read_range(const rt_recording *rec, int channel, long long first, size_t n,
                                  rt_error *err)
{
    if (channel < 0 || channel >= rec->n_channels)
        return rt_fail(err, RT_ERR_USAGE, "%s: channel index %d out of range (0..%d)", rec->path, channel,
                       rec->n_channels - 1);
    long long total = rec->channels[channel].n_samples;
    if (first < 0 || first > total || (unsigned long long)n > (unsigned long long)(total - first))
        return rt_fail(err, RT_ERR_USAGE, "%s: channel \"%s\": samples %lld..+%zu outside 0..%lld",
                       rec->path, rec->channels[channel].label, first, n, total);
    return RT_OK;
}

/* EDFlib takes an int count, so long reads go in chunks. Caller holds the lock. */
static rt_status read_physical(rt_recording *rec, int channel, long long first, size_t n, double *out,
                               rt_error *err)
{
    if (edfseek(rec->handle, channel, first, EDFSEEK_SET) != first)
        return rt_fail(err, RT_ERR_IO, "%s: channel \"%s\": cannot seek to sample %lld", rec->path,
                       rec->channels[channel].label, first);
    for (size_t done = 0; done < n;) {
        int want = (int)(n - done < READ_CHUNK ? n - done : READ_CHUNK);
        errno = 0; /* EDFlib allocates a buffer per read: ENOMEM tells that failure */
        int got = edfread_physical_samples(rec->handle, channel, want, out + done);
        if (got != want)
            return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                           "%s: channel \"%s\": read failed at sample %lld%s", rec->path,
                           rec->channels[channel].label, first + (long long)done,
                           errno == ENOMEM ? ": out of memory" : "");
        done += (size_t)got;
    }
    return RT_OK;
}

static rt_status read_through_edflib(rt_recording *rec, int channel, long long first, size_t n, double *out,
                                     rt_error *err)
{
    rt_edflib_lock();
    rt_status s = read_physical(rec, channel, first, n, out, err);
    rt_edflib_unlock();
    double factor = rec->channels[channel].uv_per_unit;
    if (s == RT_OK && factor != 1.0)
        for (size_t i = 0; i < n; i++)
            out[i] *= factor;
    return s;
}

/* n samples from p (little-endian, 2 or 3 bytes each, two's complement) to
 * physical values the way EDFlib computes them, then to microvolts. The
 * factor is applied to EDFlib's value, as a separate multiplication (x * 1 is
 * exact), so the result equals EDFlib's read followed by the unit factor. */
static void convert(const unsigned char *p, size_t n, int width, const record_slot *slot, double factor,
                    double *out)
{
    /* the slot's values in locals: out cannot alias them, so the loop runs
     * without reloading them and the 16-bit one vectorises */
    const int lo = slot->dig_min, hi = slot->dig_max;
    const double bitvalue = slot->bitvalue, offset = slot->phys_offset;
    if (width == 2) {
        for (size_t i = 0; i < n; i++) {
            int d = (int16_t)(uint16_t)(p[2 * i] | p[2 * i + 1] << 8);
            d = d > hi ? hi : d < lo ? lo : d;
            double physical = bitvalue * (offset + (double)d);
            out[i] = physical * factor;
        }
        return;
    }
    for (size_t i = 0; i < n; i++, p += 3) {
        int d = p[0] | p[1] << 8 | p[2] << 16;
        d -= (d & 0x800000) << 1;
        d = d > hi ? hi : d < lo ? lo : d;
        double physical = bitvalue * (offset + (double)d);
        out[i] = physical * factor;
    }
}

/* Reads samples [first, first + n) of channel from the records: each pread
 * covers up to slot->group records (from the first wanted sample to the last
 * one it needs) or, record by record, the channel's bytes only; never more
 * than SPAN_BYTES, so the buffer stays small whatever the request. */
static rt_status read_direct(const rt_recording *rec, int channel, long long first, size_t n, double *out,
                             rt_error *err)
{
    const record_slot *slot = &rec->slots[channel];
    const long long spr = slot->spr, rb = rec->record_bytes, width = rec->sample_bytes;
    const long long end = first + (long long)n; /* one past the last sample wanted */
    const double factor = rec->channels[channel].uv_per_unit;
    long long span = ((end - 1) / spr - first / spr) * rb + ((end - 1) % spr - first % spr + 1) * width;
    size_t cap = (size_t)min_ll(span, SPAN_BYTES);
    char what[96];
    channel_what(rec, channel, what, sizeof what);
    unsigned char *buf = malloc(cap);
    if (!buf)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory reading %s", rec->path, what);
    rt_status s = RT_OK;
    for (long long pos = first; pos < end && s == RT_OK;) {
        long long r0 = pos / spr, k0 = pos % spr;
        long long stop = min_ll(end, (r0 + slot->group) * spr);
        if (slot->group == 1)
            stop = min_ll(stop, pos + SPAN_BYTES / width);
        long long r1 = (stop - 1) / spr, k1 = (stop - 1) % spr;
        long long at = rec->header_bytes + r0 * rb + slot->offset + k0 * width;
        size_t len = (size_t)((r1 - r0) * rb + (k1 - k0 + 1) * width);
        s = read_bytes_at(rec->fd, rec->path, what, buf, len, at, err);
        /* each record's run of the channel's samples sits at (r - r0) records
         * and (k - k0) samples from the start of the buffer */
        for (long long cur = pos; cur < stop && s == RT_OK;) {
            long long r = cur / spr, k = cur % spr;
            long long count = min_ll(stop, (r + 1) * spr) - cur;
            convert(buf + (r - r0) * rb + (k - k0) * width, (size_t)count, (int)width, slot, factor,
                    out + (cur - first));
            cur += count;
        }
        pos = stop;
    }
    free(buf);
    return s;
}

/* ---- kept records ---------------------------------------------------------- */

struct rt_record_keep {
    const rt_recording *rec; /* whose records are kept (NULL: none yet) */
    long long r0, r1;        /* records [r0, r1) */
    unsigned char *bytes;
    size_t cap;
};

rt_status rt_record_keep_new(rt_record_keep **out, rt_error *err)
{
    *out = rt_calloc(1, sizeof **out);
    return *out ? RT_OK : rt_fail(err, RT_ERR_NOMEM, "out of memory for the record keep");
}

void rt_record_keep_free(rt_record_keep *keep)
{
    if (!keep)
        return;
    free(keep->bytes);
    free(keep);
}

/* Records [r0, r1) into the keep, one record more on each side (within the
 * file) so the channels' own roundings of one time span still fall inside. */
static rt_status keep_records(const rt_recording *rec, rt_record_keep *keep, int channel,
                              long long r0, long long r1, rt_error *err)
{
    const long long records = rec->channels[channel].n_samples / rec->slots[channel].spr;
    r0 = r0 > 0 ? r0 - 1 : 0;
    r1 = r1 < records ? r1 + 1 : records;
    size_t len = (size_t)((r1 - r0) * rec->record_bytes);
    if (len > keep->cap) {
        unsigned char *b = realloc(keep->bytes, len);
        if (!b)
            return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory reading channel \"%s\"", rec->path,
                           rec->channels[channel].label);
        keep->bytes = b;
        keep->cap = len;
    }
    keep->rec = NULL; /* until the read succeeds */
    char what[96];
    rt_status s = read_bytes_at(rec->fd, rec->path, channel_what(rec, channel, what, sizeof what), keep->bytes,
                                len, rec->header_bytes + r0 * rec->record_bytes, err);
    if (s == RT_OK) {
        keep->rec = rec;
        keep->r0 = r0;
        keep->r1 = r1;
    }
    return s;
}

/* Samples [first, first + n) of channel from the kept records, read into the
 * keep first when they are not there; false when the span is longer than a
 * keep holds (the caller reads directly). */
static rt_status read_kept(const rt_recording *rec, rt_record_keep *keep, int channel,
                           long long first, size_t n, double *out, bool *done, rt_error *err)
{
    const record_slot *slot = &rec->slots[channel];
    const long long spr = slot->spr, rb = rec->record_bytes, width = rec->sample_bytes;
    const long long end = first + (long long)n;
    long long r0 = first / spr, r1 = (end - 1) / spr + 1;
    *done = false;
    if (keep->rec != rec || r0 < keep->r0 || r1 > keep->r1) {
        if ((r1 - r0 + 2) * rb > (long long)RT_RECORD_KEEP_MAX_BYTES)
            return RT_OK;
        rt_status s = keep_records(rec, keep, channel, r0, r1, err);
        if (s != RT_OK)
            return s;
    }
    const double factor = rec->channels[channel].uv_per_unit;
    for (long long cur = first; cur < end;) {
        long long r = cur / spr, k = cur % spr;
        long long count = min_ll(end, (r + 1) * spr) - cur;
        convert(keep->bytes + (r - keep->r0) * rb + slot->offset + k * width, (size_t)count,
                (int)width, slot, factor, out + (cur - first));
        cur += count;
    }
    *done = true;
    return RT_OK;
}

rt_status rt_recording_read_uv(rt_recording *rec, int channel, long long first, size_t n, double *out,
                               rt_error *err)
{
    return rt_recording_read_uv_kept(rec, NULL, channel, first, n, out, err);
}

rt_status rt_recording_read_uv_kept(rt_recording *rec, rt_record_keep *keep, int channel,
                                    long long first, size_t n, double *out, rt_error *err)
{
    rt_status s = check_read_range(rec, channel, first, n, err);
    if (s != RT_OK || n == 0)
        return s;
    if (rec->fd < 0)
        return read_through_edflib(rec, channel, first, n, out, err);
    if (keep) {
        bool done = false;
        s = read_kept(rec, keep, channel, first, n, out, &done, err);
        if (s != RT_OK || done)
            return s;
    }
    return read_direct(rec, channel, first, n, out, err);
}
