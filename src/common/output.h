/* Output files that are never left half-written: each is written to a
 * temporary file in the destination folder and renamed into place only when
 * complete, so a reader sees the previous file or the new one, never a part.
 * A process killed mid-write leaves the previous file intact and, at worst, a
 * stray PATH.tmp-XXXXXX beside it. A destination that exists and is not a
 * regular file (a FIFO, /dev/null, /dev/full, a terminal) cannot be replaced
 * by a rename, so it is written directly and every write error is reported;
 * a directory is refused. See docs/hardening.md. */
#ifndef REMTONE_OUTPUT_H
#define REMTONE_OUTPUT_H

#include <stdio.h>

#include "remtone/status.h"

typedef struct rt_output {
    FILE *file;            /* write here (NULL when the writer keeps its own handle) */
    char path[4096];       /* final destination */
    char temp_path[4200];  /* where the bytes go until rt_output_commit (equal to path
                              when direct) */
    int direct;            /* 1: path is a device or FIFO, written in place, never
                              renamed or removed */
} rt_output;

/* Creates a unique temporary file beside path. With open_stream false only the
 * name is reserved (for writers such as EDFlib that open by name: they write
 * to temp_path). The path "-" means standard output (open_stream must be
 * true): written directly. A path that is a directory is RT_ERR_IO. */
rt_status rt_output_begin(rt_output *out, const char *path, int open_stream, rt_error *err);

/* Flushes, syncs and renames the temporary file onto the destination.
 * On failure the temporary file is removed and the destination is untouched. */
rt_status rt_output_commit(rt_output *out, rt_error *err);

/* Removes the temporary file; safe to call after a failed commit or twice. */
void rt_output_abort(rt_output *out);

/* Ends an output written through out->file: aborts it when a writer ran out
 * of memory (no_memory, RT_ERR_NOMEM) or the stream holds a write error
 * (RT_ERR_IO, naming what was written: "the evidence list"), else commits it. */
rt_status rt_output_finish(rt_output *out, int no_memory, const char *what, rt_error *err);

/* The whole of an output composed in memory: len bytes (and a newline when
 * add_newline) written to path as above, begin to commit. A write error is
 * RT_ERR_IO naming what was written ("JSON", "the page"). */
rt_status rt_output_write_all(const char *path, const char *bytes, size_t len, int add_newline,
                              const char *what, rt_error *err);

#endif
