/* io/data/csv.c: see csv.h. */
#include "io/data/csv.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "io/fs/files.h"

/* ---- record by record ---------------------------------------------------------------------- */

static void start(CsvReader *r, const char *name, char *text, size_t len) {
    memset(r, 0, sizeof *r);
    r->name = name;
    r->text = text;
    r->p = text;
    r->end = text + len;
    if (len >= 3 && !memcmp(text, "\xEF\xBB\xBF", 3)) r->p += 3;   /* UTF-8 byte order mark */
    r->next_line = 1;
}

int csv_open(CsvReader *r, const char *path, size_t max, Status *st) {
    memset(r, 0, sizeof *r);
    char *text;
    size_t len;
    if (fs_read_file(path, max ? max : SIZE_MAX, &text, &len, st)) return st->code;
    start(r, path, text, len);
    return 0;
}

int csv_open_text(CsvReader *r, const char *name, const char *text, Status *st) {
    memset(r, 0, sizeof *r);
    size_t len = strlen(text);
    char *copy = malloc(len + 1);
    if (!copy) return status_set(st, ST_RUNTIME, "%s: out of memory", name);
    memcpy(copy, text, len + 1);
    start(r, name, copy, len);
    return 0;
}

void csv_close(CsvReader *r) {
    free(r->text);
    free(r->f);
    memset(r, 0, sizeof *r);
}

static int push(CsvReader *r, char *field, Status *st) {
    if (r->n == r->cap) {
        int cap = r->cap ? 2 * r->cap : 16;
        char **f = realloc(r->f, sizeof(char *) * (size_t)cap);
        if (!f) return status_set(st, ST_RUNTIME, "%s: out of memory", r->name);
        r->f = f, r->cap = cap;
    }
    r->f[r->n++] = field;
    return 0;
}

static int blank(char c) { return c == ' ' || c == '\t'; }

/* Cut the line (NUL-terminated, no line end) into fields in place. */
static int split(CsvReader *r, char *s, Status *st) {
    r->n = 0;
    for (;;) {
        while (blank(*s)) s++;
        char *field = s, *next;
        if (*s == '"') {
            char *w = s, *q = s + 1;   /* w writes the unquoted text over the quoted one */
            for (;;) {
                if (!*q)
                    return status_set(st, ST_INPUT, "%s:%ld: field %d: unterminated quoted field (a quoted field ends "
                                                    "on its own line)", r->name, r->line, r->n + 1);
                if (*q == '"') {
                    if (q[1] != '"') break;
                    q++;
                }
                *w++ = *q++;
            }
            q++;   /* the closing quote */
            *w = 0;
            while (blank(*q)) q++;
            if (*q && *q != ',')
                return status_set(st, ST_INPUT, "%s:%ld: field %d: text after the closing quote", r->name, r->line,
                                  r->n + 1);
            next = *q == ',' ? q + 1 : NULL;
        } else {
            char *c = strchr(s, ',');
            char *e = c ? c : s + strlen(s);
            next = c ? c + 1 : NULL;
            while (e > s && blank(e[-1])) e--;
            *e = 0;
        }
        if (push(r, field, st)) return st->code;
        if (!next) return 0;
        s = next;
    }
}

int csv_next(CsvReader *r, int *has, Status *st) {
    *has = 0;
    while (r->p < r->end) {
        char *line = r->p;
        char *nl = memchr(line, '\n', (size_t)(r->end - line));
        char *eol = nl ? nl : r->end;
        r->p = nl ? nl + 1 : r->end;
        r->line = r->next_line++;
        r->complete = nl != NULL;
        if (memchr(line, 0, (size_t)(eol - line)))
            return status_set(st, ST_INPUT, "%s:%ld: a zero byte (not a text file)", r->name, r->line);
        if (eol > line && eol[-1] == '\r') eol--;
        *eol = 0;
        char *t = line;
        while (blank(*t)) t++;
        if (!*t || *t == '#') continue;
        if (split(r, line, st)) return st->code;
        *has = 1;
        return 0;
    }
    return 0;
}

/* ---- numeric tables ---------------------------------------------------------------------------- */

void csv_table_free(CsvTable *t) {
    if (t->names)
        for (int i = 0; i < t->cols; i++) free(t->names[i]);
    free(t->names);
    free(t->d);
    free(t->lines);
    memset(t, 0, sizeof *t);
}

int csv_col(const CsvTable *t, const char *name) {
    for (int i = 0; t->names && i < t->cols; i++)
        if (!strcmp(t->names[i], name)) return i;
    return -1;
}

/* A finite number in strtod syntax, the whole field. */
static int finite_number(const char *f, double *v) {
    if (!*f) return 0;
    char *e;
    *v = strtod(f, &e);
    return !*e && isfinite(*v);
}

static int field_value(const CsvReader *r, const CsvTable *t, const CsvOptions *o, int i, double *v, Status *st) {
    const char *f = r->f[i];
    if (!o->lenient) {
        if (finite_number(f, v)) return 0;
        return status_set(st, ST_INPUT, "%s:%ld: field %d \"%.40s\" is not a finite number", r->name, r->line, i + 1, f);
    }
    if (!*f) {
        *v = NAN;
        return 0;
    }
    for (int k = 0; o->words && o->words[k]; k++)
        if (!strcmp(f, o->words[k])) {
            *v = k;
            return 0;
        }
    char *e;
    *v = strtod(f, &e);
    if (!*e) return 0;
    return status_set(st, ST_INPUT, "%s:%ld: field %d (%s) \"%.40s\" is not a number", r->name, r->line, i + 1,
                      t->names ? t->names[i] : "?", f);
}

static int take_header(const CsvReader *r, CsvTable *t, Status *st) {
    t->names = calloc((size_t)r->n, sizeof(char *));
    if (!t->names) return status_set(st, ST_RUNTIME, "%s: out of memory", r->name);
    t->cols = r->n;
    for (int i = 0; i < r->n; i++)
        if (!(t->names[i] = strdup(r->f[i]))) return status_set(st, ST_RUNTIME, "%s: out of memory", r->name);
    return 0;
}

static int read_rows(CsvReader *r, const CsvOptions *o, CsvTable *t, Status *st) {
    long first_line = 0, cap = 0;
    int has, rc;
    while (!(rc = csv_next(r, &has, st)) && has) {
        if (!first_line) {
            first_line = r->line;
            int header = o->header == CSV_HEADER_REQUIRED;
            double v;
            for (int i = 0; i < r->n && !header; i++) header = !finite_number(r->f[i], &v);
            t->cols = r->n;
            if (header) {
                if ((rc = take_header(r, t, st))) return rc;
                continue;
            }
        }
        if (!r->complete && o->drop_unfinished) break;
        if (r->n != t->cols)
            return status_set(st, ST_INPUT, "%s:%ld: ragged row: %d fields where line %ld has %d", r->name, r->line,
                              r->n, first_line, t->cols);
        if (t->rows == cap) {
            cap = cap ? 2 * cap : 256;
            double *d = realloc(t->d, sizeof(double) * (size_t)cap * (size_t)t->cols);
            if (d) t->d = d;
            long *l = realloc(t->lines, sizeof(long) * (size_t)cap);
            if (l) t->lines = l;
            if (!d || !l) return status_set(st, ST_RUNTIME, "%s: out of memory", r->name);
        }
        double *row = t->d + t->rows * t->cols;
        for (int i = 0; i < t->cols; i++)
            if ((rc = field_value(r, t, o, i, &row[i], st))) return rc;
        t->lines[t->rows++] = r->line;
    }
    if (rc) return rc;
    if (!first_line && o->header == CSV_HEADER_REQUIRED)
        return status_set(st, ST_INPUT, "%s: empty (no header row)", r->name);
    if (!t->rows && o->need_rows) return status_set(st, ST_INPUT, "%s: no data rows", r->name);
    return 0;
}

static int table_from(CsvReader *r, const CsvOptions *o, CsvTable *t, Status *st) {
    int rc = read_rows(r, o, t, st);
    csv_close(r);
    if (rc) csv_table_free(t);
    return rc;
}

int csv_read_table(const char *path, const CsvOptions *o, CsvTable *t, Status *st) {
    memset(t, 0, sizeof *t);
    CsvReader r;
    if (csv_open(&r, path, o->max_bytes, st)) return st->code;
    return table_from(&r, o, t, st);
}

int csv_parse_table(const char *name, const char *text, const CsvOptions *o, CsvTable *t, Status *st) {
    memset(t, 0, sizeof *t);
    CsvReader r;
    if (csv_open_text(&r, name, text, st)) return st->code;
    return table_from(&r, o, t, st);
}
