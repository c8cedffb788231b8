/* The CSV table reader behind every small table remtone reads (table.h).
 * It takes the whole file into memory (src/common/input.h: a regular file of at
 * most 64 MiB, so a wrong path to a recording fails fast), insists on UTF-8 text, finds the delimiter from the
 * header line, and feeds libcsv one physical line at a time so every row
 * knows the line it started on. */
#include "table.h"

#include <csv.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "input.h"
#include "internal.h"
#include "text.h"

enum { FIELD_MAX_BYTES = 4096 }; /* no stage, time, path or label needs more */

/* ---- reading the file ---- */

/* Offset of the first byte that breaks UTF-8 (or is NUL), or len when valid. */
static size_t utf8_invalid_at(const unsigned char *s, size_t len)
{
    size_t i = 0;
    while (i < len) {
        unsigned code = 0;
        size_t n = s[i] ? rt_utf8_sequence(s + i, len - i, &code) : 0;
        if (n == 0)
            return i;
        i += n;
    }
    return len;
}

static long line_of_offset(const unsigned char *s, size_t off)
{
    long line = 1;
    for (size_t i = 0; i < off; i++)
        line += s[i] == '\n';
    return line;
}

/* Reads path whole into *out (NUL-terminated, caller frees): a regular file
 * of at most 64 MiB, not empty, not UTF-16 or UTF-32 (src/common/input.h),
 * and valid UTF-8 without NUL bytes. */
static rt_status read_text_file(const char *path, const char *what, unsigned char **out,
                                size_t *out_len, rt_error *err)
{
    unsigned char *buf = NULL;
    size_t len = 0;
    rt_status st = rt_input_read_text(path, what, &buf, &len, err);
    if (st != RT_OK)
        return st;
    size_t bad = utf8_invalid_at(buf, len);
    if (bad < len) {
        long line = line_of_offset(buf, bad);
        unsigned int byte = buf[bad];
        free(buf);
        return rt_fail(err, RT_ERR_STAGING,
                       "%s line %ld: not UTF-8 text (byte 0x%02x at offset %zu); a %s must be "
                       "plain text", path, line, byte, bad, what);
    }
    *out = buf;
    *out_len = len;
    return RT_OK;
}

/* Copies a value for quoting in a message: control characters become '?',
 * long values are cut at a character boundary and end in "...". */
void rt_table_quote(char *dst, size_t cap, const char *src)
{
    size_t n = 0, i = 0;
    size_t limit = cap < RT_TABLE_QUOTE_MAX ? cap : RT_TABLE_QUOTE_MAX;
    while (src[i] && n + 4 < limit) {
        unsigned char c = (unsigned char)src[i++];
        dst[n++] = c < 0x20 || c == 0x7F ? '?' : (char)c;
    }
    if (src[i]) {
        while (n > 0 && ((unsigned char)dst[n - 1] & 0xC0) == 0x80)
            n--;
        if (n > 0 && ((unsigned char)dst[n - 1] & 0xC0) == 0xC0)
            n--;
        memcpy(dst + n, "...", 3);
        n += 3;
    }
    dst[n] = '\0';
}

/* ---- the row reader on top of libcsv ---- */


void rt_table_fail(rt_table *r, rt_status st)
{
    if (r->status == RT_OK)
        r->status = st;
}

static void reset_row(rt_table *r)
{
    for (size_t i = 0; i < r->n_fields; i++)
        free(r->fields[i]);
    r->n_fields = 0;
    r->row_started = false;
}

static void on_field(void *s, size_t len, void *data)
{
    rt_table *r = data;
    if (r->status != RT_OK)
        return;
    if (!r->row_started) {
        r->row_started = true;
        r->row_line = r->line;
    }
    if (len > FIELD_MAX_BYTES) {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                      "%s line %ld: field %zu is longer than %d bytes", r->path,
                                      r->row_line, r->n_fields + 1, FIELD_MAX_BYTES));
        return;
    }
    if (r->n_fields >= RT_TABLE_MAX_FIELDS) {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                      "%s line %ld: more than %d fields in a row", r->path,
                                      r->row_line, RT_TABLE_MAX_FIELDS));
        return;
    }
    char *copy = malloc(len + 1);
    if (!copy) {
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_NOMEM, "%s: out of memory", r->path));
        return;
    }
    if (len)
        memcpy(copy, s, len);
    copy[len] = '\0';
    rt_trim(copy);
    r->fields[r->n_fields++] = copy;
}

static void read_header(rt_table *r)
{
    r->have_header = true;
    r->header_line = r->row_line;
    for (size_t c = 0; c < r->n_columns; c++) {
        r->column_index[c] = -1;
        for (size_t f = 0; f < r->n_fields; f++) {
            if (!rt_equal_nocase(r->fields[f], r->columns[c]))
                continue;
            if (r->column_index[c] >= 0) {
                rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                              "%s line %ld: column \"%s\" appears twice in the "
                                              "header", r->path, r->row_line, r->columns[c]));
                return;
            }
            r->column_index[c] = (int)f;
        }
    }
    for (size_t c = 0; c < r->n_columns; c++) {
        if (r->column_index[c] >= 0 || r->optional[c])
            continue;
        char found[400] = "";
        size_t used = 0;
        for (size_t f = 0; f < r->n_fields && used + 4 < sizeof found; f++) {
            char q[RT_TABLE_QUOTE_MAX];
            rt_table_quote(q, sizeof q, r->fields[f]);
            int w = snprintf(found + used, sizeof found - used, "%s\"%s\"", f ? ", " : "", q);
            if (w < 0)
                break;
            used += (size_t)w;
        }
        char expected[400] = "";
        size_t e_used = 0;
        for (size_t k = 0; k < r->n_columns && e_used + 2 < sizeof expected; k++) {
            int w = snprintf(expected + e_used, sizeof expected - e_used, "%s%s%s",
                             k ? "," : "", r->columns[k], r->optional[k] ? "(optional)" : "");
            if (w < 0)
                break;
            e_used += (size_t)w;
        }
        const char *hint = strchr(found, ';') ? " (the delimiter must be a comma or a tab)" : "";
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                 "%s line %ld: the %s header has no column \"%s\" (header "
                                 "fields: %s)%s; expected %s",
                                 r->path, r->row_line, r->what, r->columns[c], found, hint,
                                 expected));
        return;
    }
}

static void on_row_end(int c, void *data)
{
    (void)c;
    rt_table *r = data;
    if (r->status != RT_OK || !r->row_started) {
        reset_row(r);
        return;
    }
    bool blank = true;
    for (size_t i = 0; i < r->n_fields && blank; i++)
        blank = r->fields[i][0] == '\0';
    if (!blank) {
        if (!r->have_header) {
            read_header(r);
        } else {
            char *values[RT_TABLE_MAX_COLUMNS];
            static char empty[1] = "";
            for (size_t k = 0; k < r->n_columns; k++) {
                if (r->column_index[k] < 0) {
                    values[k] = empty; /* an optional column the header does not have */
                    continue;
                }
                size_t idx = (size_t)r->column_index[k];
                if (idx >= r->n_fields) {
                    rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                                  "%s line %ld: column \"%s\" missing: the row "
                                                  "has %zu field%s, the header puts it at field %zu",
                                                  r->path, r->row_line, r->columns[k], r->n_fields,
                                                  r->n_fields == 1 ? "" : "s", idx + 1));
                    reset_row(r);
                    return;
                }
                values[k] = r->fields[idx];
            }
            r->n_rows++;
            r->on_row(r, values);
        }
    }
    reset_row(r);
}

static int space_not_tab(unsigned char c) { return c == ' '; }
static int space_or_tab(unsigned char c) { return c == ' ' || c == '\t'; }

/* Reads path and calls r->on_row for each data row. */
rt_status rt_table_read(rt_table *r, rt_error *err)
{
    unsigned char *buf = NULL;
    size_t len = 0;
    rt_status st = read_text_file(r->path, r->what ? r->what : "table", &buf, &len, err);
    if (st != RT_OK)
        return st;
    size_t pos = 0;
    if (len >= 3 && memcmp(buf, "\xef\xbb\xbf", 3) == 0)
        pos = 3; /* UTF-8 byte order mark, as spreadsheet programs write */

    /* The delimiter is a tab when the header line has tabs but no commas. */
    size_t h = pos;
    for (;;) {
        while (h < len && (buf[h] == '\n' || buf[h] == '\r' || buf[h] == ' ' || buf[h] == '\t'))
            h++;
        if (!(r->leading_comments && h < len && buf[h] == '#'))
            break;
        while (h < len && buf[h] != '\n')
            h++;
    }
    size_t h_end = h;
    while (h_end < len && buf[h_end] != '\n' && buf[h_end] != '\r')
        h_end++;
    bool has_tab = memchr(buf + h, '\t', h_end - h) != NULL;
    bool has_comma = memchr(buf + h, ',', h_end - h) != NULL;
    unsigned char delim = has_tab && !has_comma ? CSV_TAB : CSV_COMMA;

    struct csv_parser p;
    if (csv_init(&p, CSV_STRICT | CSV_STRICT_FINI | CSV_APPEND_NULL) != 0) {
        free(buf);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory", r->path);
    }
    csv_set_delim(&p, delim);
    csv_set_space_func(&p, delim == CSV_TAB ? space_not_tab : space_or_tab);
    rt_error_clear(&r->error);
    r->status = RT_OK;
    r->line = 1;
    for (size_t i = 0; i < pos; i++)
        r->line += buf[i] == '\n';
    bool started = false; /* a line other than a leading comment or a blank was fed */
    while (pos < len && r->status == RT_OK) {
        const unsigned char *nl = memchr(buf + pos, '\n', len - pos);
        size_t n = nl ? (size_t)(nl - (buf + pos)) + 1 : len - pos;
        size_t first = pos;
        while (first < pos + n && (buf[first] == ' ' || buf[first] == '\t'))
            first++;
        if (!started && r->leading_comments && first < pos + n && buf[first] == '#') {
            pos += n;
            r->line++;
            continue;
        }
        started |= first < pos + n && buf[first] != '\n' && buf[first] != '\r';
        if (csv_parse(&p, buf + pos, n, on_field, on_row_end, r) != n) {
            if (csv_error(&p) == CSV_ENOMEM) /* libcsv grows its field buffer */
                rt_table_fail(r, rt_fail(&r->error, RT_ERR_NOMEM, "%s line %ld: out of memory",
                                         r->path, r->line));
            else
                rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                         "%s line %ld: malformed CSV (%s); check the quotes",
                                         r->path, r->line, csv_strerror(csv_error(&p))));
            break;
        }
        pos += n;
        r->line++;
    }
    if (r->status == RT_OK && csv_fini(&p, on_field, on_row_end, r) != 0)
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                      "%s line %ld: malformed CSV (%s); a quoted field is not "
                                      "closed", r->path, r->row_line,
                                      csv_strerror(csv_error(&p))));
    reset_row(r);
    csv_free(&p);
    free(buf);
    if (r->status == RT_OK && !r->have_header)
        rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                      "%s: no header row (the file holds only blank lines)",
                                      r->path));
    if (r->status != RT_OK && err)
        *err = r->error;
    return r->status;
}

/* Parses a number of column `name`; on failure records an error quoting it. */
bool rt_table_number(rt_table *r, const char *value, const char *name, double *out)
{
    if (rt_parse_double(value, out) == 0)
        return true;
    char q[RT_TABLE_QUOTE_MAX];
    rt_table_quote(q, sizeof q, value);
    rt_table_fail(r, rt_fail(&r->error, RT_ERR_STAGING,
                                  "%s line %ld: %s \"%s\" is not a number", r->path, r->row_line,
                                  name, q));
    return false;
}


rt_status rt_input_sniff(const char *path, const char *what, rt_input_format *format,
                         rt_error *err)
{
    FILE *f = NULL;
    long long size = 0;
    rt_status st = rt_input_open(path, what, &f, &size, err);
    if (st != RT_OK)
        return st;
    unsigned char head[256];
    size_t n = fread(head, 1, sizeof head, f);
    int read_error = ferror(f), code = errno;
    fclose(f);
    if (read_error)
        return rt_fail(err, rt_errno_status(code, RT_ERR_IO), "%s: cannot read: %s", path,
                       strerror(code));
    const char *foreign = rt_input_foreign_encoding(head, n);
    if (foreign)
        return rt_fail(err, RT_ERR_STAGING, RT_INPUT_FOREIGN_MESSAGE, path, foreign);
    if (n >= 8 && (memcmp(head, "0       ", 8) == 0 || memcmp(head, "\xff" "BIOSEMI", 8) == 0)) {
        *format = RT_INPUT_EDF;
        return RT_OK;
    }
    size_t i = 0;
    if (n >= 3 && memcmp(head, "\xef\xbb\xbf", 3) == 0)
        i = 3;
    while (i < n && (head[i] == ' ' || head[i] == '\t' || head[i] == '\r' || head[i] == '\n'))
        i++;
    *format = (i < n && head[i] == '<') ? RT_INPUT_XML : RT_INPUT_CSV;
    return RT_OK;
}
