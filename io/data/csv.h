/* io/data/csv.h: the one CSV reader of the program. Numeric recordings (io/data/series.h), the
 * training log (io/run/runlog.h) and the trajectories and forecasts that the report reads back all
 * go through it, so every CSV file framelaw reads follows the same rules:
 *
 *  - records end at LF or CRLF; an optional UTF-8 byte order mark at the start is skipped;
 *  - fields are separated by commas; spaces and tabs around a field are dropped;
 *  - a field may be quoted as in RFC 4180: "a, ""b""" is the text  a, "b"  (a quoted field ends on
 *    its own line);
 *  - a line that is empty or only spaces and tabs, or whose first other character is '#', is skipped
 *    (it still counts for line numbers).
 *
 * Errors are ST_INPUT and name the file and the line: "data.csv:7: unterminated quoted field".
 *
 * Two ways in: record by record (CsvReader: the fields as text), or a whole numeric table with a
 * header (CsvTable: column names and a (rows, cols) matrix of doubles).
 *
 *     CsvReader r;
 *     if (csv_open(&r, path, 0, st)) return st->code;
 *     int has, rc;
 *     while (!(rc = csv_next(&r, &has, st)) && has) { ... r.f[0..r.n), r.line ... }
 *     csv_close(&r);
 */
#ifndef IO_CSV_H
#define IO_CSV_H

#include <stddef.h>

#include "nn/core.h"

/* ---- record by record ---------------------------------------------------------------------- */

typedef struct {
    const char *name;   /* the file, for messages */
    char *text;         /* the whole file (owned), cut into fields in place */
    char *p, *end;      /* where the next line starts; the end of the text */
    long next_line;     /* its number */
    long line;          /* line number of the record last returned (from 1) */
    int complete;       /* that record ended with a line end (0: a last line without one) */
    int n;              /* its number of fields */
    char **f;           /* (n) its fields, NUL-terminated, unquoted and trimmed */
    int cap;
} CsvReader;

/* Read the file (at most max bytes; 0: no limit of ours) and stand before its first record. */
int csv_open(CsvReader *r, const char *path, size_t max, Status *st);
/* The same over a copy of text; name is used in messages (and must outlive the reader). */
int csv_open_text(CsvReader *r, const char *name, const char *text, Status *st);
/* The next record that is not blank or a comment: *has = 1 with its fields in r->f, or *has = 0
 * at the end of the file. Returns 0 or ST_INPUT (a malformed quoted field), ST_RUNTIME (memory). */
int csv_next(CsvReader *r, int *has, Status *st);
void csv_close(CsvReader *r);

/* ---- numeric tables ---------------------------------------------------------------------------- */

enum {
    CSV_HEADER_AUTO,       /* the first record is a header when one of its fields is not a finite number */
    CSV_HEADER_REQUIRED    /* the first record is the header */
};

typedef struct {
    int header;                 /* CSV_HEADER_AUTO or CSV_HEADER_REQUIRED */
    int lenient;                /* 0: every field must be a finite number (strtod syntax; "nan", "inf"
                                 * and empty fields are refused): errors say "is not a finite number".
                                 * 1: an empty field is NaN, "nan" and "inf" are read, and a field equal
                                 * to words[i] is read as i: errors say "is not a number" and name the
                                 * column, as in "log.csv:3: field 4 (loss) \"oops\" is not a number" */
    const char *const *words;   /* lenient: NULL-terminated list, or NULL */
    int drop_unfinished;        /* a last data line without its line end is left out (a file that is
                                 * still being appended to) */
    int need_rows;              /* a file without data rows is an error ("no data rows") */
    size_t max_bytes;           /* the largest file read; 0: no limit of ours */
} CsvOptions;

typedef struct {
    int cols;
    long rows;
    char **names;   /* (cols) the header's fields, or NULL when the file has none (CSV_HEADER_AUTO) */
    double *d;      /* (rows, cols) row-major */
    long *lines;    /* (rows) the file line of each row */
} CsvTable;

/* Every row must have as many fields as the first record: "data.csv:17: ragged row: 3 fields where
 * line 1 has 4". A required header that is missing: "log.csv: empty (no header row)". On error the
 * table is left empty (csv_table_free is still safe). */
int csv_read_table(const char *path, const CsvOptions *o, CsvTable *t, Status *st);
/* The same over text in memory; name is used in messages. */
int csv_parse_table(const char *name, const char *text, const CsvOptions *o, CsvTable *t, Status *st);
/* Index of the column with that header name, -1 when there is none. */
int csv_col(const CsvTable *t, const char *name);
void csv_table_free(CsvTable *t);

#endif
