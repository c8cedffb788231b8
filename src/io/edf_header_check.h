/* remtone's own checks of an EDF/BDF header, run on the raw bytes before the
 * file is handed to EDFlib. EDFlib answers a malformed file with a bare
 * "format error"; these checks name the field, the signal and the byte offset
 * instead, and tell a truncated file from a lying record count. Internal. */
#ifndef REMTONE_EDF_HEADER_CHECK_H
#define REMTONE_EDF_HEADER_CHECK_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/status.h"

/* EDFlib's EDFLIB_MAXSIGNALS; the header checks refuse more signals. */
#define RT_EDF_MAX_SIGNALS 640

/* What the checks learned; only filled when they pass. */
typedef struct rt_edf_layout {
    bool is_bdf;              /* "\xffBIOSEMI" version field: 3-byte samples */
    int n_signals;            /* signals in the file, annotation signals included */
    long long header_bytes;   /* 256 * (n_signals + 1) */
    long long n_records;      /* data records the header promises (>= 1) */
    double record_s;          /* duration of one data record, seconds (> 0) */
    long long record_bytes;   /* bytes of one data record */
    long long file_bytes;     /* size of the file; may exceed the data (extra bytes are ignored) */
    /* Per signal, in file order (annotation signals included), for reading
     * the data records directly: */
    int samples_per_record[RT_EDF_MAX_SIGNALS];
    /* EDFlib's rule for the signals it hides: in an EDF+/BDF+ file, a label of
     * exactly "EDF Annotations " ("BDF Annotations "), all 16 bytes. */
    bool edflib_annotation[RT_EDF_MAX_SIGNALS];
} rt_edf_layout;

/* Reads the header of path and checks it. Returns RT_OK and fills layout, or
 * RT_ERR_IO (cannot open or read the file: the message carries strerror) or
 * RT_ERR_RECORDING (the message names the path, the field, the signal and the
 * byte offset). Refuses EDF+D/BDF+D. */
rt_status rt_edf_header_check(const char *path, rt_edf_layout *layout, rt_error *err);

/* Quotes width untrusted bytes at p for a message, NUL-terminated in out
 * (cap bytes): printable ASCII as is, other bytes, '"' and '\\' as \xHH;
 * trailing spaces dropped; cut when out is full. */
void rt_edf_quote_bytes(const unsigned char *p, int width, char *out, size_t cap);

#endif
