/* io/data/series.c: CSV and .npy readers, .npy writer (see series.h). */
#include "io/data/series.h"

#include <ctype.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <errno.h>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "io/data/csv.h"
#include "io/fs/atomic_file.h"
#include "io/fs/bytes.h"
#include "io/fs/files.h"

void series_free(Series *s) {
    CsvTable t = {.cols = s->cols, .rows = s->rows, .names = s->names, .d = s->d, .lines = s->lines};
    csv_table_free(&t);   /* a CSV series is the reader's table; a .npy one has only d */
    memset(s, 0, sizeof *s);
}

static int ends_with_ci(const char *s, const char *suffix) {
    size_t a = strlen(s), b = strlen(suffix);
    return a >= b && !strcasecmp(s + a - b, suffix);
}

int series_is_numeric_path(const char *path) {
    return ends_with_ci(path, ".csv") || ends_with_ci(path, ".npy");
}

int series_read(const char *path, Series *s, Status *st) {
    if (ends_with_ci(path, ".csv")) return series_read_csv(path, s, st);
    if (ends_with_ci(path, ".npy")) return series_read_npy(path, s, st);
    memset(s, 0, sizeof *s);
    return status_set(st, ST_INPUT, "%s: not a numeric recording (expected .csv or .npy)", path);
}

/* ---- CSV ---------------------------------------------------------------------------------- */

int series_read_csv(const char *path, Series *s, Status *st) {
    memset(s, 0, sizeof *s);
    CsvTable t;
    const CsvOptions o = {.header = CSV_HEADER_AUTO, .need_rows = 1};
    if (csv_read_table(path, &o, &t, st)) return st->code;
    s->d = t.d;
    s->rows = t.rows;
    s->cols = t.cols;
    s->names = t.names;
    s->lines = t.lines;
    return 0;
}

/* ---- .npy --------------------------------------------------------------------------------- */

static const unsigned char NPY_MAGIC[6] = {0x93, 'N', 'U', 'M', 'P', 'Y'};
#define NPY_HEADER_MAX (1 << 20) /* the longest header read: 1 MiB (NumPy writes them under 64 KiB) */

/* A tiny reader for the header's Python dict literal. */
typedef struct {
    const char *p, *end;
} Lex;

static void lex_ws(Lex *l) {
    while (l->p < l->end && isspace((unsigned char)*l->p)) l->p++;
}
static int lex_char(Lex *l, char c) {
    lex_ws(l);
    if (l->p < l->end && *l->p == c) return l->p++, 1;
    return 0;
}
static int lex_string(Lex *l, char *out, size_t n) {
    lex_ws(l);
    if (l->p >= l->end || (*l->p != '\'' && *l->p != '"')) return 0;
    char q = *l->p++;
    size_t k = 0;
    while (l->p < l->end && *l->p != q) {
        if (k + 1 < n) out[k++] = *l->p;
        l->p++;
    }
    if (l->p >= l->end) return 0;
    l->p++;
    out[k] = 0;
    return 1;
}

/* The .npy in buf[0..len), of a file of `total` bytes (len = total, or only its first bytes when s
 * is NULL: then the header is checked, and whether the file has the size its shape gives). */
static int npy_parse(const char *path, const char *buf, size_t len, size_t total, Series *s, Status *st) {
    const unsigned char *u = (const unsigned char *)buf;
    int rc = 0;
    double *d = NULL;
    if (len < 10 || total < 10 || memcmp(u, NPY_MAGIC, 6)) {
        rc = status_set(st, ST_INPUT, "%s: not a .npy file (bad magic)", path);
        goto done;
    }
    int major = u[6], minor = u[7];
    size_t hlen, hstart;
    if (major == 1 && minor == 0) {
        hlen = le_get_u16(u + 8);
        hstart = 10;
    } else if ((major == 2 || major == 3) && minor == 0) {
        if (len < 12 || total < 12) {
            rc = status_set(st, ST_INPUT, "%s: truncated .npy header", path);
            goto done;
        }
        hlen = le_get_u32(u + 8);
        hstart = 12;
    } else {
        rc = status_set(st, ST_INPUT, "%s: unsupported .npy format version %d.%d (1.0, 2.0, 3.0 are read)",
                        path, major, minor);
        goto done;
    }
    if (hlen > total - hstart) {
        rc = status_set(st, ST_INPUT, "%s: truncated .npy header (%zu bytes announced, %zu present)", path,
                        hlen, total - hstart);
        goto done;
    }
    if (hlen > len - hstart) {
        rc = status_set(st, ST_INPUT, "%s: .npy header of %zu bytes, more than the %d read", path, hlen, NPY_HEADER_MAX);
        goto done;
    }
    Lex l = {buf + hstart, buf + hstart + hlen};
    char descr[32] = "", key[32];
    int fortran = -1, ndim = -1;
    long shape[2] = {0, 1};
    if (!lex_char(&l, '{')) goto bad_header;
    while (!lex_char(&l, '}')) {
        if (!lex_string(&l, key, sizeof key) || !lex_char(&l, ':')) goto bad_header;
        if (!strcmp(key, "descr")) {
            if (!lex_string(&l, descr, sizeof descr)) goto bad_header;
        } else if (!strcmp(key, "fortran_order")) {
            lex_ws(&l);
            if (l.end - l.p >= 4 && !strncmp(l.p, "True", 4)) fortran = 1, l.p += 4;
            else if (l.end - l.p >= 5 && !strncmp(l.p, "False", 5)) fortran = 0, l.p += 5;
            else goto bad_header;
        } else if (!strcmp(key, "shape")) {
            if (!lex_char(&l, '(')) goto bad_header;
            ndim = 0;
            while (!lex_char(&l, ')')) {
                lex_ws(&l);
                char *e;
                long v = strtol(l.p, &e, 10);
                if (e == l.p || e > l.end || v < 0) goto bad_header;
                l.p = e;
                if (ndim >= 2) {
                    rc = status_set(st, ST_INPUT, "%s: .npy array has more than 2 dimensions", path);
                    goto done;
                }
                shape[ndim++] = v;
                lex_char(&l, ',');
            }
        } else {
            goto bad_header;
        }
        lex_char(&l, ',');
    }
    if (!descr[0] || fortran < 0 || ndim < 0) goto bad_header;
    int isz, kind;   /* kind: 0 float, 1 signed integer */
    if (!strcmp(descr, "<f8")) isz = 8, kind = 0;
    else if (!strcmp(descr, "<f4")) isz = 4, kind = 0;
    else if (!strcmp(descr, "<i8")) isz = 8, kind = 1;
    else if (!strcmp(descr, "<i4")) isz = 4, kind = 1;
    else {
        rc = status_set(st, ST_INPUT, "%s: .npy element type '%s' not supported (use '<f8', '<f4', '<i4' or '<i8')",
                        path, descr);
        goto done;
    }
    if (ndim == 0) {
        rc = status_set(st, ST_INPUT, "%s: .npy array is a scalar, expected (rows, cols) or (rows,)", path);
        goto done;
    }
    if (ndim == 1) shape[1] = 1;
    long rows = shape[0], cols = shape[1];
    if (rows <= 0 || cols <= 0 || cols > (1L << 24) || rows > (long)(total / (size_t)isz)) {
        rc = status_set(st, ST_INPUT, "%s: .npy shape (%ld, %ld) is empty or larger than the file", path,
                        rows, cols);
        goto done;
    }
    size_t need = (size_t)rows * (size_t)cols * (size_t)isz, have = total - hstart - hlen;
    if (need != have) {
        rc = status_set(st, ST_INPUT, "%s: .npy data is %zu bytes, shape (%ld, %ld) of '%s' needs %zu%s", path,
                        have, rows, cols, descr, need, have < need ? " (truncated)" : "");
        goto done;
    }
    if (!s) goto done; /* the header and the size check out */
    d = malloc(sizeof(double) * (size_t)rows * (size_t)cols);
    if (!d) {
        rc = status_set(st, ST_RUNTIME, "%s: out of memory", path);
        goto done;
    }
    const unsigned char *src = u + hstart + hlen;
    for (long k = 0; k < rows * cols; k++) {
        uint64_t bits = isz == 8 ? le_get_u64(src + k * isz) : le_get_u32(src + k * isz);
        double v;
        if (kind == 0 && isz == 8) memcpy(&v, &bits, 8);
        else if (kind == 0) {
            uint32_t b32 = (uint32_t)bits;
            float f;
            memcpy(&f, &b32, 4);
            v = f;
        } else if (isz == 8) v = (double)(int64_t)bits;
        else v = (double)(int32_t)(uint32_t)bits;
        /* Element k is (r, c) in C order, (c, r) in Fortran order. */
        long r = fortran ? k % rows : k / cols, c = fortran ? k / rows : k % cols;
        if (!isfinite(v)) {
            rc = status_set(st, ST_INPUT, "%s: value at row %ld, column %ld is not finite", path, r + 1, c + 1);
            goto done;
        }
        d[r * cols + c] = v;
    }
    s->d = d, d = NULL;
    s->rows = rows;
    s->cols = (int)cols;
    goto done;
bad_header:
    rc = status_set(st, ST_INPUT, "%s: malformed .npy header (expected descr, fortran_order, shape)", path);
done:
    free(d);
    return rc;
}

int series_read_npy(const char *path, Series *s, Status *st) {
    memset(s, 0, sizeof *s);
    /* the header first, from the file's first bytes: the file is read whole only when its size is the
     * one its shape gives (a huge file is not read in to be refused) */
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) return status_set(st, ST_INPUT, "%s: cannot open: %s", path, strerror(errno));
    struct stat sb;
    if (fstat(fd, &sb) != 0 || !S_ISREG(sb.st_mode)) {
        close(fd);
        return status_set(st, ST_INPUT, "%s: not a regular file (a device, pipe or socket)", path);
    }
    size_t total = (size_t)sb.st_size, want = total < NPY_HEADER_MAX + 12 ? total : NPY_HEADER_MAX + 12, got = 0;
    char *pre = malloc(want + 1);
    if (!pre) {
        close(fd);
        return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    }
    while (got < want) {
        ssize_t r = pread(fd, pre + got, want - got, (off_t)got);
        if (r <= 0) break;
        got += (size_t)r;
    }
    close(fd);
    int rc = npy_parse(path, pre, got, total, NULL, st);
    free(pre);
    if (rc) return rc;
    char *buf;
    size_t len;
    if (fs_read_file(path, total, &buf, &len, st)) return st->code;
    rc = npy_parse(path, buf, len, len, s, st);
    free(buf);
    return rc;
}

int npy_write(const char *path, const void *data, long rows, int cols, NpyType type, Status *st) {
    char hdr[256];
    int isz = type == NPY_F64 ? 8 : 4;
    int n;
    if (cols <= 0)
        n = snprintf(hdr + 10, sizeof hdr - 10, "{'descr': '%s', 'fortran_order': False, 'shape': (%ld,), }",
                     type == NPY_F64 ? "<f8" : "<f4", rows);
    else
        n = snprintf(hdr + 10, sizeof hdr - 10, "{'descr': '%s', 'fortran_order': False, 'shape': (%ld, %d), }",
                     type == NPY_F64 ? "<f8" : "<f4", rows, cols);
    /* Pad with spaces and a final newline so that magic + version + length + dict is a multiple of
     * 64 bytes (the data then starts aligned). */
    int total = 10 + n + 1;
    total = (total + 63) / 64 * 64;
    memset(hdr + 10 + n, ' ', (size_t)(total - 10 - n));
    hdr[total - 1] = '\n';
    memcpy(hdr, NPY_MAGIC, 6);
    hdr[6] = 1, hdr[7] = 0;
    int hl = total - 10;
    le_put_u16((unsigned char *)hdr + 8, (uint16_t)hl);
    AtomicFile af;
    if (atomic_open(&af, path, st)) return st->code;
    int ok = fwrite(hdr, 1, (size_t)total, af.f) == (size_t)total;
    long count = rows * (cols > 0 ? cols : 1);
    const unsigned char *src = data;
    unsigned char le[8];
    for (long k = 0; ok && k < count; k++) {
        /* Little-endian on any host. */
        uint64_t bits = 0;
        if (isz == 8) memcpy(&bits, src + k * 8, 8);
        else {
            uint32_t b32;
            memcpy(&b32, src + k * 4, 4);
            bits = b32;
        }
        if (isz == 8) le_put_u64(le, bits);
        else le_put_u32(le, (uint32_t)bits);
        ok = fwrite(le, 1, (size_t)isz, af.f) == (size_t)isz;
    }
    if (!ok) {
        atomic_abort(&af);
        return status_set(st, ST_RUNTIME, "%s: write failed", path);
    }
    return atomic_commit(&af, st);
}

int series_time_column(const Series *s) {
    if (!s->names) return -1;
    for (int c = 0; c < s->cols; c++)
        if (s->names[c] && (!strcasecmp(s->names[c], "t") || !strcasecmp(s->names[c], "time"))) return c;
    return -1;
}

/* "file:LINE (data row R)" for a CSV, "file: row R" for a .npy (row: 0-based). */
static void row_at(char *buf, size_t n, const char *path, const Series *s, long row) {
    if (s->lines && s->lines[row] > 0) snprintf(buf, n, "%s:%ld (data row %ld)", path, s->lines[row], row + 1);
    else snprintf(buf, n, "%s: row %ld", path, row + 1);
}

static int cmp_double(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int series_time_step(const Series *s, int tc, const char *path, double tol, double *dt, Status *st) {
    long n = s->rows;
    const double *x = s->d;
    int C = s->cols;
    char w[1100];
    if (n < 2) return status_set(st, ST_INPUT, "%s: %ld sample; a time series needs more", path, n);
    for (long r = 1; r < n; r++)
        if (!(x[r * C + tc] > x[(r - 1) * C + tc])) {
            row_at(w, sizeof w, path, s, r);
            return status_set(st, ST_INPUT,
                              "%s: time %.9g is not greater than the time before it (%.9g); the time column must "
                              "increase", w, x[r * C + tc], x[(r - 1) * C + tc]);
        }
    /* the expected step is the median one: a gap or a jump shifts the mean, so that measured against it
     * every step could be off and the first would be named; against the median the gap itself is */
    double *steps = malloc(sizeof(double) * (size_t)(n - 1));   /* (n - 1) */
    if (!steps) return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    for (long r = 1; r < n; r++) steps[r - 1] = x[r * C + tc] - x[(r - 1) * C + tc];
    qsort(steps, (size_t)(n - 1), sizeof *steps, cmp_double);
    double med = (n - 1) % 2 ? steps[(n - 1) / 2] : 0.5 * (steps[(n - 1) / 2 - 1] + steps[(n - 1) / 2]);
    free(steps);
    long first = -1, count = 0;
    for (long r = 1; r < n; r++) {
        double step = x[r * C + tc] - x[(r - 1) * C + tc];
        if (fabs(step - med) > tol * med) count++, first = first < 0 ? r : first;
    }
    if (first > 0) {
        double step = x[first * C + tc] - x[(first - 1) * C + tc];
        char more[64] = "";
        if (count > 1) snprintf(more, sizeof more, " (the first of %ld such steps)", count);
        row_at(w, sizeof w, path, s, first);
        return status_set(st, ST_INPUT,
                          "%s: time step %.6g (from %.9g to %.9g) differs from the median step %.6g by more than "
                          "%g%%%s; the derivative stencils need equally spaced samples (resample, or give the rate)",
                          w, step, x[(first - 1) * C + tc], x[first * C + tc], med, 100 * tol,
                          more);
    }
    *dt = (x[(n - 1) * C + tc] - x[tc]) / (double)(n - 1);
    return 0;
}
