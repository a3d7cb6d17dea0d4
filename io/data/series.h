/* io/data/series.h: numeric recordings (CSV and NumPy .npy) read into a double matrix, and the .npy
 * writer.
 *
 * A series is a (rows, cols) row-major double matrix: rows are time samples, columns channels.
 *
 * CSV (read by io/data/csv.h, whose rules apply: commas, optional spaces or tabs around a field,
 * quoted fields, LF or CRLF line ends, an optional UTF-8 byte order mark, blank lines and lines
 * starting with '#' skipped): one row per line. The first row is a header (its fields become column
 * names) when any of its fields is not a number; every later field must be a finite number (strtod
 * syntax, "nan" and "inf" are refused). Every row must have as many fields as the first. Errors
 * name the file and line:
 *     data.csv:17: ragged row: 3 fields where line 1 has 4
 *     data.csv:9: field 2 "1.2.3" is not a finite number
 *
 * .npy (the NumPy file format, format versions 1.0, 2.0 and 3.0): magic "\x93NUMPY", version, a
 * little-endian header length, a Python dict literal with 'descr' ('<f8', '<f4', '<i4' or '<i8'),
 * 'fortran_order' (False, or True which is transposed on reading) and 'shape' ((rows, cols) or
 * (rows,), read as one column), then the data. The file size must equal header plus data exactly.
 * Non-finite values are refused (naming the row and column).
 *
 * The writer produces format version 1.0, '<f8' or '<f4', C order, header padded with spaces to a
 * multiple of 64 bytes, written atomically (io/fs/atomic_file.h). */
#ifndef IO_SERIES_H
#define IO_SERIES_H

#include "nn/core.h"

typedef struct {
    double *d;      /* (rows, cols) row-major; owned */
    long rows;
    int cols;
    char **names;   /* (cols) column names from a CSV header row, or NULL; owned */
    long *lines;    /* (rows) the file line of each row of a CSV, for messages; NULL for .npy; owned */
} Series;

int series_read_csv(const char *path, Series *s, Status *st);
int series_read_npy(const char *path, Series *s, Status *st);
/* By extension (.csv or .npy, any case); ST_INPUT for another extension. */
int series_read(const char *path, Series *s, Status *st);
/* 1 when the path ends in .csv or .npy (any case). */
int series_is_numeric_path(const char *path);
void series_free(Series *s);

/* The time column of a recording: the CSV column whose header names it "t" or "time" (any case),
 * or -1. framelaw train and frames take it as the clock, not as a channel (framelaw fit names its
 * own with --time-column). */
int series_time_column(const Series *s);

/* The time column tc must increase in equal steps: each within tol of the median step (so that a gap
 * is named where it is, not where the mean it shifts is first missed); *dt receives the mean step.
 * ST_INPUT naming the file, line and data row (CSV) or the row (.npy) of the first step at fault,
 * the step found, the times it spans and the median step:
 *     data.csv:9 (data row 7): time step 0.5 (from 0.6 to 1.1) differs from the median step 0.1 ... */
int series_time_step(const Series *s, int tc, const char *path, double tol, double *dt, Status *st);

typedef enum { NPY_F64, NPY_F32 } NpyType;

/* Write data (rows, cols), row-major, of the given element type as a 2-D .npy file; cols <= 0
 * writes a 1-D array of `rows` values. Returns 0 or ST_RUNTIME. */
int npy_write(const char *path, const void *data, long rows, int cols, NpyType type, Status *st);
static inline int npy_write_f64(const char *path, const double *d, long rows, int cols, Status *st) {
    return npy_write(path, d, rows, cols, NPY_F64, st);
}
static inline int npy_write_f32(const char *path, const float *d, long rows, int cols, Status *st) {
    return npy_write(path, d, rows, cols, NPY_F32, st);
}

#endif
