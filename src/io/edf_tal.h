/* The EDF+/BDF+ annotation signals read by remtone itself: the bytes of each
 * data record's annotation signals go in, annotations come out, and every
 * malformed Time-stamped Annotations List (TAL) is refused with the file,
 * the data record and the byte offset. The rules are those of EDF+ (Kemp &
 * Olivan 2003, Clin Neurophysiol 114:1755-1761, the sections on TALs and on
 * the time-keeping TAL) as EDFlib applies them; EDFlib is the reference the
 * tests compare against (tests/unit/test_tal_edflib.c). The record reading
 * itself is recording.c's. Internal. */
#ifndef REMTONE_EDF_TAL_H
#define REMTONE_EDF_TAL_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/recording.h"
#include "remtone/status.h"

/* EDFlib's time unit: 100 ns (EDFLIB_TIME_DIMENSION, edflib.h). */
#define RT_TAL_UNITS_PER_S 10000000LL

/* The annotations read so far and the time keeping between records. Set it
 * up with rt_tal_list_init; the caller owns items (free it, or take it). */
typedef struct rt_tal_list {
    const char *path;          /* for messages; not owned */
    long long record_units;    /* data record duration, 100-ns units (EDFlib's value) */
    long long start_units;     /* onset of data record 1's time-keeping TAL: [0, 1 s) */
    long long previous_units;  /* onset of the last time-keeping TAL read */
    long long records_read;    /* data records whose time-keeping TAL was read */
    rt_annotation *items;      /* file order; onsets from the recording start */
    size_t n, cap;
} rt_tal_list;

void rt_tal_list_init(rt_tal_list *list, const char *path, long long record_units);

/* Where one annotation signal of one data record lies, for the messages. */
typedef struct rt_tal_place {
    long long record;      /* data record, counted from 0 (messages count from 1) */
    int signal;            /* signal in the file, counted from 0 */
    long long offset;      /* byte offset of bytes[0] in the file */
    bool time_keeping;     /* the first annotation signal: its first TAL keeps the time */
} rt_tal_place;

/* Reads the TALs of one annotation signal of one data record (len >= 1 bytes)
 * and appends its annotations: onset in seconds from the recording start
 * (onset minus the first time-keeping onset, to EDFlib's 100 ns, further
 * decimals dropped as EDFlib drops them), duration in seconds or -1 when the
 * TAL gives none, text of at most 512 bytes as written (cleaned to UTF-8 by
 * the readers of rt_annotation). The time-keeping signals of the records must
 * come in record order. Returns RT_OK, RT_ERR_RECORDING (the message names
 * the file, the record, the signal and the byte offset) or RT_ERR_NOMEM. */
rt_status rt_tal_read_signal(rt_tal_list *list, const unsigned char *bytes, size_t len,
                             const rt_tal_place *at, rt_error *err);

#endif
