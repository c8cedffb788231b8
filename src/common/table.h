/* Reading the small CSV tables remtone takes (stage and event tables, label
 * maps, cutoff files, manifests): UTF-8 text of bounded size, comma or tab
 * (told from the header line), an optional byte-order mark, CRLF, RFC 4180
 * quoting through libcsv, columns found by name in the header, and messages
 * that name the file and the line. */
#ifndef REMTONE_TABLE_H
#define REMTONE_TABLE_H

#include <stdbool.h>
#include <stddef.h>

#include "remtone/status.h"

enum {
    RT_TABLE_MAX_COLUMNS = 32, /* columns a reader asks for */
    RT_TABLE_MAX_FIELDS = 256, /* fields a row may hold */
    RT_TABLE_QUOTE_MAX = 48    /* bytes of a bad value quoted in a message */
};

typedef struct rt_table rt_table;
typedef void (*rt_table_row_fn)(rt_table *r, char **values);

struct rt_table {
    const char *path;
    const char *what;             /* "stage table", "cutoff file", ... for messages */
    const char *columns[RT_TABLE_MAX_COLUMNS];
    size_t n_columns;
    bool optional[RT_TABLE_MAX_COLUMNS]; /* may be missing from the header: value "" */
    bool leading_comments;        /* lines starting with '#' before the header are skipped
                                     (a note on where the file's values come from) */
    int column_index[RT_TABLE_MAX_COLUMNS]; /* field index of each wanted column, -1 if absent */
    bool have_header;
    long header_line;
    long line;                    /* physical line being fed to libcsv */
    long row_line;                /* line on which the current row started */
    bool row_started;
    char *fields[RT_TABLE_MAX_FIELDS];
    size_t n_fields;
    size_t n_rows;                /* data rows seen (not blank) */
    rt_table_row_fn on_row;
    void *user;
    rt_status status;
    rt_error error;
};

/* Reads t->path and calls t->on_row(t, values) for each non-blank data row,
 * values[k] being the field of t->columns[k] (trimmed; "" for an absent
 * optional column). Set path, what, columns, n_columns, optional, on_row and
 * user (and leading_comments when wanted); zero the rest. On failure the message names the file and line. */
rt_status rt_table_read(rt_table *t, rt_error *err);

/* Records the first failure of a row handler (later ones are dropped). */
void rt_table_fail(rt_table *t, rt_status status);

/* Parses a number of column `name`; on failure records an error quoting it. */
bool rt_table_number(rt_table *t, const char *value, const char *name, double *out);

/* Copies src for quoting in a message, cut on a UTF-8 boundary with "...". */
void rt_table_quote(char *dst, size_t cap, const char *src);

/* The format of an input file told by its first bytes: an EDF/BDF header
 * ("0       " or "\xffBIOSEMI" in the first 8 bytes), XML (first character
 * '<' after an optional BOM and white space), or else a CSV table. `what`
 * names the expected file in messages ("staging file"), as rt_input_open. RT_ERR_IO (or RT_ERR_NOMEM) when the file cannot be read. */
typedef enum rt_input_format { RT_INPUT_CSV = 0, RT_INPUT_EDF, RT_INPUT_XML } rt_input_format;
rt_status rt_input_sniff(const char *path, const char *what, rt_input_format *format,
                         rt_error *err);

#endif
