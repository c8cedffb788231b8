/* Writing an EDF+ file through EDFlib's writer, for the rest of the library:
 * the synthetic night (src/synth/signals.c) and the activity annotations
 * (src/report/annotations_out.c). Every EDFlib call runs under the EDFlib
 * lock (edflib_lock.h), so writers and readers may run in several threads.
 *
 * The output is never left half-written: EDFlib writes a temporary file
 * beside the destination (rt_output_begin), renamed into place only by
 * rt_edf_writer_finish. EDFlib does not report every failed write (its close
 * ignores them), so finish reads the written file back with remtone's header
 * checks and refuses one whose size disagrees with its header, and syncs it
 * to disk before the rename. A destination that is a device or a FIFO (see
 * output.h) is written by EDFlib to a private temporary file first and then
 * copied, with every write checked. Every error names the destination.
 * Internal. */
#ifndef REMTONE_EDF_WRITER_H
#define REMTONE_EDF_WRITER_H

#include "remtone/status.h"

typedef struct rt_edf_writer rt_edf_writer;

/* One ordinary signal; texts as EDFlib writes them (it cuts long ones). */
typedef struct rt_edf_writer_signal {
    const char *label;
    const char *unit;        /* physical dimension */
    const char *transducer;
    const char *prefilter;
    int rate_hz;             /* samples per second (EDFlib writes 1-s data records) */
    double phys_min, phys_max;
    int dig_min, dig_max;    /* within -32768..32767 (EDF) */
} rt_edf_writer_signal;

/* Header fields; a NULL text leaves EDFlib's default. */
typedef struct rt_edf_writer_header {
    int year, month, day;          /* start date, year 1985..2084 (EDFlib) */
    int hour, minute, second;      /* start time */
    double subsecond;              /* sub-second start, seconds in [0, 1) */
    const char *patient_name;
    const char *equipment;
    const char *recording_additional;
    int annotation_signals;        /* 0 or 1: EDFlib's one; up to 64 when a file has more
                                      annotations than data records (each signal holds one
                                      annotation per record) */
} rt_edf_writer_header;

/* Begins an EDF+ file for path with n_signals signals (0: annotations only).
 * Returns RT_OK and sets *out, or fails with RT_ERR_IO (cannot create) or
 * RT_ERR_INTERNAL (EDFlib refused a header value), leaving nothing behind. */
rt_status rt_edf_writer_begin(rt_edf_writer **out, const char *path, const rt_edf_writer_header *header,
                              const rt_edf_writer_signal *signals, int n_signals, rt_error *err);

/* Adds an annotation: onset and duration in seconds from the start (EDFlib
 * keeps 100 us; duration_s < 0: none), UTF-8 text of at most 40 bytes.
 * RT_ERR_INTERNAL when EDFlib refuses it. */
rt_status rt_edf_writer_annotation(rt_edf_writer *w, double onset_s, double duration_s, const char *text,
                                   rt_error *err);

/* Writes one data record: samples[k] holds the samples_per_record physical
 * values of signal k. RT_ERR_IO when a write fails. */
rt_status rt_edf_writer_record(rt_edf_writer *w, const double *const *samples, rt_error *err);

/* Closes the file, checks and syncs it and renames (or copies) it into place.
 * Frees w, whatever the result; on failure the destination is untouched and
 * no temporary file is left. */
rt_status rt_edf_writer_finish(rt_edf_writer *w, rt_error *err);

/* Drops the file: closes it and removes the temporary files. Accepts NULL. */
void rt_edf_writer_abort(rt_edf_writer *w);

#endif
