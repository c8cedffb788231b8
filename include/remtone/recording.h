/* Reading a polysomnography recording: EDF, EDF+ (continuous) and BDF/BDF+.
 *
 * The file is opened through EDFlib after remtone's own header checks, so a
 * malformed header is reported with the field and its byte offset rather than
 * a bare "format error". Annotations of an EDF+/BDF+ file are read once at
 * open time, by remtone from the data records as EDFlib would read them
 * (malformed ones refused with the data record and byte offset). Samples are read by channel and sample range, so the scoring
 * stages read only the stretches they need; they are read straight from the
 * data records in blocks (not through EDFlib), with values bit-identical to
 * EDFlib's edfread_physical_samples.
 *
 * Ownership: rt_recording_open() makes an object (*out) the caller frees with
 * rt_recording_close(). Pointers returned by accessors live until then.
 * Thread safety: EDFlib keeps a process-wide table of open files and is not
 * thread-safe, so remtone serialises every EDFlib call (the open, header and
 * the close of EDFlib's handle, all inside rt_recording_open) behind one
 * lock. Sample reads take no lock: each
 * recording has its own file descriptor and reads with pread(2), which keeps
 * no file position, so reads run in parallel, also several at once on one
 * recording. Recordings may be opened, read and closed from several threads;
 * closing one while another thread reads it is the caller's error.
 *
 * Extra bytes after the last data record are refused (EDFlib 1.23 refuses
 * them); the message gives the size to cut the file to. See docs/recording.md. */
#ifndef REMTONE_RECORDING_H
#define REMTONE_RECORDING_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/status.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct rt_recording rt_recording;

typedef enum rt_file_kind {
    RT_FILE_EDF = 0,
    RT_FILE_EDFPLUS = 1,
    RT_FILE_BDF = 2,
    RT_FILE_BDFPLUS = 3
} rt_file_kind;

typedef struct rt_channel_info {
    char label[17];       /* header label, trailing spaces removed */
    char transducer[81];  /* transducer type text */
    char unit[9];         /* physical dimension text as written ("uV", "mV", ...) */
    char prefilter[81];   /* prefiltering text */
    double rate_hz;       /* samples per second */
    double phys_min;      /* physical minimum, in the header's unit */
    double phys_max;      /* physical maximum, in the header's unit */
    int dig_min;          /* digital minimum */
    int dig_max;          /* digital maximum */
    long long n_samples;  /* samples of this channel in the file */
    bool is_voltage;      /* unit recognised as a voltage (V, mV, uV, nV) */
    double uv_per_unit;   /* factor from the header's unit to microvolts; 1 when not a voltage */
} rt_channel_info;

typedef struct rt_annotation {
    double onset_s;       /* seconds from the recording start */
    double duration_s;    /* seconds; negative when the annotation gives none */
    char text[513];       /* UTF-8 description */
} rt_annotation;

typedef struct rt_clock_time {
    int year, month, day;     /* start date from the header */
    int hour, minute, second; /* start time from the header */
    double subsecond;         /* EDF+ sub-second start offset, seconds in [0, 1) */
} rt_clock_time;

/* Opens path (EDF, EDF+C, BDF, BDF+C). Refuses EDF+D/BDF+D (discontinuous),
 * truncated files, trailing bytes, malformed headers and malformed EDF+
 * annotation signals with RT_ERR_RECORDING (the message starts with the path
 * and names the field, or the data record, and the byte offset), a
 * missing, unreadable or directory path with RT_ERR_IO (with the system's
 * reason), RT_ERR_NOMEM when out of memory, RT_ERR_USAGE without a path.
 * On success *out holds the recording; on failure *out is NULL. */
rt_status rt_recording_open(const char *path, rt_recording **out, rt_error *err);

/* Closes and frees; accepts NULL. */
void rt_recording_close(rt_recording *rec);

const char *rt_recording_path(const rt_recording *rec);
rt_file_kind rt_recording_kind(const rt_recording *rec);
/* Duration in seconds (data records x record duration). */
double rt_recording_duration_s(const rt_recording *rec);
/* Start date and time from the header. */
rt_clock_time rt_recording_start(const rt_recording *rec);
/* Identity text from the header (patient and recording fields, EDF+ subfields
 * joined). Untrusted text: escape before display. Never NULL. */
const char *rt_recording_patient_text(const rt_recording *rec);
const char *rt_recording_recording_text(const rt_recording *rec);
/* Size of the file in bytes. */
long long rt_recording_file_size(const rt_recording *rec);

/* Ordinary (non-annotation) channels, numbered 0 .. count-1. */
int rt_recording_channel_count(const rt_recording *rec);
/* NULL when index is out of range. */
const rt_channel_info *rt_recording_channel(const rt_recording *rec, int index);
/* Index of the channel named by name (surrounding spaces ignored): the one
 * channel whose label equals it exactly; else the one whose label equals it
 * ignoring ASCII case; else, for "#N", channel N counted from 1 among the
 * ordinary channels (the way to name one of several channels with the same
 * label). RT_CHANNEL_NONE (-1) when none, RT_CHANNEL_AMBIGUOUS (-2) when
 * several channels match at the first level that matches any: never the
 * first of them. */
enum { RT_CHANNEL_NONE = -1, RT_CHANNEL_AMBIGUOUS = -2 };
int rt_recording_find_channel(const rt_recording *rec, const char *name);

size_t rt_recording_annotation_count(const rt_recording *rec);
/* NULL when index is out of range. Ordered by onset. */
const rt_annotation *rt_recording_annotation(const rt_recording *rec, size_t index);

/* Reads n samples of channel, starting at sample `first` (0 = recording start),
 * into out, in microvolts (scaled by uv_per_unit). The range must lie inside
 * the channel: first >= 0 and first + n <= n_samples. */
rt_status rt_recording_read_uv(rt_recording *rec, int channel, long long first, size_t n,
                               double *out, rt_error *err);

/* The data records of the last span read, kept for the next read of another
 * channel over the same span: a night's channels are conditioned one after
 * the other over the same minutes, and each reading whole data records would
 * copy every record from the file once per channel. One keep serves one
 * thread at a time; it holds at most RT_RECORD_KEEP_MAX_BYTES (longer spans
 * are read directly). The samples are the same with or without it. */
#define RT_RECORD_KEEP_MAX_BYTES (8u << 20)
typedef struct rt_record_keep rt_record_keep;
rt_status rt_record_keep_new(rt_record_keep **out, rt_error *err);
void rt_record_keep_free(rt_record_keep *keep);

/* rt_recording_read_uv through keep (NULL: read directly). */
rt_status rt_recording_read_uv_kept(rt_recording *rec, rt_record_keep *keep, int channel,
                                    long long first, size_t n, double *out, rt_error *err);

/* Recognises a physical dimension as a voltage: "V", "mV", "uV" (also "UV",
 * "uv", "\xb5V" in Latin-1, "\xc2\xb5V" and "\xce\xbcV" in UTF-8) and "nV";
 * the volt letter may be "V" or "v", surrounding spaces are ignored. The
 * prefix letter is strict: "MV" (mega) and "NV" are not voltages. Returns true
 * and sets *uv_per_unit (V: 1e6, mV: 1e3, uV: 1, nV: 1e-3) for a voltage;
 * returns false and sets *uv_per_unit to 1 otherwise. uv_per_unit may be NULL. */
bool rt_unit_uv_per_unit(const char *unit, double *uv_per_unit);

#ifdef __cplusplus
}
#endif
#endif
