/* EDF+ files through EDFlib's writer (edf_writer.h). Each function takes the
 * EDFlib lock for its EDFlib calls only, so a long synthetic night does not
 * hold up readers in other threads between records. */
#include "edf_writer.h"

#include <edflib.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "edf_header_check.h"
#include "edflib_lock.h"
#include "internal.h"
#include "output.h"

struct rt_edf_writer {
    rt_output out;          /* the destination and its temporary file */
    char edf_path[4200];    /* where EDFlib writes: out.temp_path, or a private
                               temporary file when the destination is a device */
    int handle;             /* EDFlib's; -1 once closed */
    int n_signals;
    long records;           /* data records written */
};

/* EDFlib counts annotation time in units of 100 us (10^-4 s). */
static long long ticks(double s) { return llround(s * 10000.0); }

/* Caller holds the lock. Returns the name of the first field EDFlib refuses,
 * NULL when it takes them all. */
static const char *set_signal(int h, int k, const rt_edf_writer_signal *s)
{
    if (edf_set_samplefrequency(h, k, s->rate_hz) != 0)
        return "sample frequency";
    if (edf_set_physical_maximum(h, k, s->phys_max) != 0 || edf_set_physical_minimum(h, k, s->phys_min) != 0)
        return "physical range";
    if (edf_set_digital_maximum(h, k, s->dig_max) != 0 || edf_set_digital_minimum(h, k, s->dig_min) != 0)
        return "digital range";
    if (edf_set_label(h, k, s->label) != 0)
        return "label";
    if (edf_set_physical_dimension(h, k, s->unit) != 0)
        return "physical dimension";
    if (s->transducer && edf_set_transducer(h, k, s->transducer) != 0)
        return "transducer";
    if (s->prefilter && edf_set_prefilter(h, k, s->prefilter) != 0)
        return "prefilter";
    return NULL;
}

/* Caller holds the lock. */
static const char *set_header(int h, const rt_edf_writer_header *m)
{
    if (edf_set_startdatetime(h, m->year, m->month, m->day, m->hour, m->minute, m->second) != 0)
        return "start date and time";
    /* EDFlib takes the sub-second start in units of 100 ns */
    if (m->subsecond > 0 && edf_set_subsecond_starttime(h, (int)llround(m->subsecond * 1e7)) != 0)
        return "sub-second start";
    if (m->patient_name && edf_set_patientname(h, m->patient_name) != 0)
        return "patient name";
    if (m->equipment && edf_set_equipment(h, m->equipment) != 0)
        return "equipment";
    if (m->recording_additional && edf_set_recording_additional(h, m->recording_additional) != 0)
        return "recording additional";
    if (m->annotation_signals > 1 && edf_set_number_of_annotation_signals(h, m->annotation_signals) != 0)
        return "number of annotation signals";
    return NULL;
}

/* A device or FIFO cannot be renamed over, and EDFlib seeks in what it
 * writes: it writes a private temporary file, copied at the end. */
static rt_status private_temp(rt_edf_writer *w, rt_error *err)
{
    const char *dir = getenv("TMPDIR");
    snprintf(w->edf_path, sizeof w->edf_path, "%s/remtone-edf-XXXXXX", dir && dir[0] ? dir : "/tmp");
    int fd = mkstemp(w->edf_path);
    if (fd < 0) {
        w->edf_path[0] = '\0';
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot create a temporary file for EDFlib: %s", w->out.path,
                       strerror(errno));
    }
    close(fd);
    return RT_OK;
}

/* Caller holds the lock. */
static rt_status open_locked(rt_edf_writer *w, const rt_edf_writer_header *header,
                             const rt_edf_writer_signal *signals, rt_error *err)
{
    w->handle = edfopen_file_writeonly(w->edf_path, EDFLIB_FILETYPE_EDFPLUS, w->n_signals);
    if (w->handle < 0)
        return rt_fail(err, RT_ERR_IO, "%s: EDFlib cannot create the file (EDFlib error %d)", w->out.path,
                       w->handle);
    for (int k = 0; k < w->n_signals; k++) {
        const char *field = set_signal(w->handle, k, &signals[k]);
        if (field)
            return rt_fail(err, RT_ERR_INTERNAL, "%s: EDFlib refused the %s of signal %d (\"%s\")",
                           w->out.path, field, k + 1, signals[k].label);
    }
    const char *field = set_header(w->handle, header);
    if (field)
        return rt_fail(err, RT_ERR_INTERNAL, "%s: EDFlib refused the %s (start %04d-%02d-%02d %02d:%02d:%02d)",
                       w->out.path, field, header->year, header->month, header->day, header->hour,
                       header->minute, header->second);
    return RT_OK;
}

rt_status rt_edf_writer_begin(rt_edf_writer **out, const char *path, const rt_edf_writer_header *header,
                              const rt_edf_writer_signal *signals, int n_signals, rt_error *err)
{
    *out = NULL;
    if (strcmp(path, "-") == 0)
        return rt_fail(err, RT_ERR_USAGE, "an EDF+ file needs a file name, not '-'");
    rt_edf_writer *w = rt_calloc(1, sizeof *w);
    if (!w)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", path);
    w->handle = -1;
    w->n_signals = n_signals;
    rt_status s = rt_output_begin(&w->out, path, 0, err);
    if (s != RT_OK) {
        free(w);
        return s;
    }
    if (w->out.direct)
        s = private_temp(w, err);
    else
        rt_copy_string(w->edf_path, sizeof w->edf_path, w->out.temp_path);
    if (s == RT_OK) {
        rt_edflib_lock();
        s = open_locked(w, header, signals, err);
        rt_edflib_unlock();
    }
    if (s != RT_OK) {
        rt_edf_writer_abort(w);
        return s;
    }
    *out = w;
    return RT_OK;
}

rt_status rt_edf_writer_annotation(rt_edf_writer *w, double onset_s, double duration_s, const char *text,
                                   rt_error *err)
{
    rt_edflib_lock();
    int rc = edfwrite_annotation_utf8(w->handle, ticks(onset_s), duration_s < 0 ? -1 : ticks(duration_s), text);
    rt_edflib_unlock();
    if (rc != 0)
        return rt_fail(err, RT_ERR_INTERNAL, "%s: EDFlib refused the annotation \"%s\" at %.4f s", w->out.path,
                       text, onset_s);
    return RT_OK;
}

rt_status rt_edf_writer_record(rt_edf_writer *w, const double *const *samples, rt_error *err)
{
    int failed = -1, code = 0;
    rt_edflib_lock();
    for (int k = 0; k < w->n_signals && failed < 0; k++) {
        /* EDFlib's prototype takes a non-const buffer but only reads it; a
         * failed fwrite inside it leaves the reason in errno */
        errno = 0;
        if (edfwrite_physical_samples(w->handle, (double *)samples[k]) != 0) {
            failed = k;
            code = errno;
        }
    }
    rt_edflib_unlock();
    if (failed >= 0)
        return rt_fail(err, RT_ERR_IO, "%s: cannot write data record %ld (signal %d): %s", w->out.path,
                       w->records + 1, failed + 1, code ? strerror(code) : "EDFlib refused the samples");
    w->records++;
    return RT_OK;
}

/* EDFlib ignores failed writes and a failed close, so the file is read back:
 * it must pass the header checks remtone makes on every recording it reads
 * (so every file written is one remtone can open: at least one data record)
 * with exactly the size its header gives. */
static rt_status check_written(const rt_edf_writer *w, rt_error *err)
{
    rt_edf_layout *layout = rt_calloc(1, sizeof *layout);
    if (!layout)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", w->out.path);
    rt_error inner;
    rt_status s = rt_edf_header_check(w->edf_path, layout, &inner);
    long long end = layout->header_bytes + layout->n_records * layout->record_bytes;
    if (s != RT_OK)
        s = rt_fail(err, RT_ERR_IO, "%s: cannot write output: the file EDFlib wrote is incomplete (%s)",
                    w->out.path, inner.message);
    else if (layout->file_bytes != end)
        s = rt_fail(err, RT_ERR_IO, "%s: cannot write output: EDFlib wrote %lld bytes, its header gives %lld",
                    w->out.path, layout->file_bytes, end);
    free(layout);
    return s;
}

/* The bytes reach the disk before the rename, as rt_output_commit does for
 * the files it writes itself. */
static rt_status sync_file(const char *file, const char *path, rt_error *err)
{
    FILE *f = fopen(file, "rb");
    if (!f || fsync(fileno(f)) != 0) {
        int code = errno;
        if (f)
            fclose(f);
        return rt_fail(err, rt_errno_status(code, RT_ERR_IO), "%s: cannot write output: %s", path,
                       strerror(code));
    }
    fclose(f);
    return RT_OK;
}

/* A device or FIFO destination: the checked file copied into it. */
static rt_status copy_to_destination(const rt_edf_writer *w, rt_error *err)
{
    FILE *in = fopen(w->edf_path, "rb");
    FILE *out = in ? fopen(w->out.path, "wb") : NULL;
    int failed = !in || !out, code = errno;
    char buf[1 << 16];
    while (!failed) {
        size_t n = fread(buf, 1, sizeof buf, in);
        if (n > 0 && fwrite(buf, 1, n, out) != n)
            failed = 1, code = errno;
        if (n < sizeof buf) {
            if (ferror(in))
                failed = 1, code = errno;
            break;
        }
    }
    if (out && fclose(out) != 0 && !failed)
        failed = 1, code = errno;
    if (in)
        fclose(in);
    if (failed)
        return rt_fail(err, rt_errno_status(code, RT_ERR_IO), "%s: cannot write output: %s",
                       w->out.path, strerror(code ? code : EIO));
    return RT_OK;
}

rt_status rt_edf_writer_finish(rt_edf_writer *w, rt_error *err)
{
    rt_edflib_lock();
    int rc = edfclose_file(w->handle);
    rt_edflib_unlock();
    w->handle = -1;
    rt_status s = RT_OK;
    if (rc != 0)
        s = rt_fail(err, RT_ERR_IO, "%s: cannot write output: EDFlib cannot finish the file (EDFlib error %d)",
                    w->out.path, rc);
    if (s == RT_OK)
        s = check_written(w, err);
    if (s == RT_OK && w->out.direct)
        s = copy_to_destination(w, err);
    else if (s == RT_OK)
        s = sync_file(w->edf_path, w->out.path, err);
    if (s == RT_OK && !w->out.direct)
        s = rt_output_commit(&w->out, err);
    rt_edf_writer_abort(w);
    return s;
}

void rt_edf_writer_abort(rt_edf_writer *w)
{
    if (!w)
        return;
    if (w->handle >= 0) {
        rt_edflib_lock();
        edfclose_file(w->handle);
        rt_edflib_unlock();
    }
    if (w->out.direct && w->edf_path[0])
        unlink(w->edf_path);
    rt_output_abort(&w->out);
    free(w);
}
