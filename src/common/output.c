/* Atomic output files: temporary file in the same folder, then rename(2). */
#include "output.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "internal.h"

/* A device or FIFO: renaming a temporary file over it would replace the
 * node itself (as root, /dev/full would become a plain file), so it is
 * opened and written in place. */
static rt_status begin_direct(rt_output *out, int open_stream, rt_error *err)
{
    out->direct = 1;
    rt_copy_string(out->temp_path, sizeof out->temp_path, out->path);
    if (!open_stream)
        return RT_OK;
    out->file = fopen(out->path, "wb");
    if (!out->file)
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot open output: %s", out->path, strerror(errno));
    return RT_OK;
}

rt_status rt_output_begin(rt_output *out, const char *path, int open_stream, rt_error *err)
{
    memset(out, 0, sizeof *out);
    if (strcmp(path, "-") == 0) {
        /* standard output: nothing to rename, nothing to remove */
        rt_copy_string(out->path, sizeof out->path, path);
        out->file = stdout;
        return RT_OK;
    }
    if (strlen(path) >= sizeof out->path)
        return rt_fail(err, RT_ERR_IO, "%.80s...: cannot write output: the path is too long (%zu "
                       "bytes, at most %zu)", path, strlen(path), sizeof out->path - 1);
    rt_copy_string(out->path, sizeof out->path, path);
    struct stat st;
    if (stat(path, &st) == 0) {
        if (S_ISDIR(st.st_mode))
            return rt_fail(err, RT_ERR_IO, "%s: cannot write output: %s", path, strerror(EISDIR));
        if (!S_ISREG(st.st_mode))
            return begin_direct(out, open_stream, err);
    }
    snprintf(out->temp_path, sizeof out->temp_path, "%s.tmp-XXXXXX", path);
    int fd = mkstemp(out->temp_path);
    if (fd < 0) {
        out->temp_path[0] = '\0';
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot create output: %s", path, strerror(errno));
    }
    /* mkstemp makes the file private; give it the permissions a plain
     * fopen would (0666 less the umask) */
    mode_t mask = umask(0);
    umask(mask);
    fchmod(fd, 0666 & ~mask);
    if (!open_stream) {
        close(fd);
        return RT_OK;
    }
    out->file = fdopen(fd, "wb");
    if (!out->file) {
        close(fd);
        rt_output_abort(out);
        return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                       "%s: cannot open output: %s", path, strerror(errno));
    }
    return RT_OK;
}

rt_status rt_output_commit(rt_output *out, rt_error *err)
{
    if (out->file == stdout) {
        out->file = NULL;
        if (fflush(stdout) != 0)
            return rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                           "standard output: cannot write: %s", strerror(errno));
        return RT_OK;
    }
    int failed = 0;
    int saved = 0;
    if (out->file) {
        /* fsync fails with EINVAL on a FIFO or a device: only a regular
         * file's bytes need to reach the disk before the rename */
        if (fflush(out->file) != 0 || ferror(out->file) ||
            (!out->direct && fsync(fileno(out->file)) != 0)) {
            failed = 1;
            saved = errno;
        }
        if (fclose(out->file) != 0 && !failed) {
            failed = 1;
            saved = errno;
        }
        out->file = NULL;
    }
    if (!failed && !out->direct && rename(out->temp_path, out->path) != 0) {
        failed = 1;
        saved = errno;
    }
    if (failed) {
        rt_output_abort(out);
        return rt_fail(err, rt_errno_status(saved, RT_ERR_IO), "%s: cannot write output: %s",
                       out->path, strerror(saved ? saved : EIO));
    }
    out->temp_path[0] = '\0';
    return RT_OK;
}

rt_status rt_output_write_all(const char *path, const char *bytes, size_t len, int add_newline,
                              const char *what, rt_error *err)
{
    rt_output out;
    rt_status st = rt_output_begin(&out, path, 1, err);
    if (st != RT_OK)
        return st;
    if ((len > 0 && fwrite(bytes, 1, len, out.file) != len) ||
        (add_newline && fputc('\n', out.file) == EOF)) {
        int saved = errno;
        rt_output_abort(&out);
        return rt_fail(err, rt_errno_status(saved, RT_ERR_IO), "%s: cannot write %s: %s", path,
                       what, strerror(saved ? saved : EIO));
    }
    return rt_output_commit(&out, err);
}

void rt_output_abort(rt_output *out)
{
    if (out->file == stdout) {
        out->file = NULL;
        return;
    }
    if (out->file) {
        fclose(out->file);
        out->file = NULL;
    }
    if (out->direct) {
        out->temp_path[0] = '\0';
        return;
    }
    if (out->temp_path[0] && !out->direct) {
        unlink(out->temp_path);
        out->temp_path[0] = '\0';
    }
}

rt_status rt_output_finish(rt_output *out, int no_memory, const char *what, rt_error *err)
{
    if (no_memory || (out->file && ferror(out->file))) {
        rt_output_abort(out);
        return no_memory ? rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", out->path)
                         : rt_fail(err, RT_ERR_IO, "%s: cannot write %s", out->path, what);
    }
    return rt_output_commit(out, err);
}
