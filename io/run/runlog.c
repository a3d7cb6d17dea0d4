/* io/run/runlog.c: see runlog.h. */
#include "io/run/runlog.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "io/data/csv.h"
#include "io/fs/atomic_file.h"
#include "io/fs/files.h"

const char *const runlog_phase_names[RUNLOG_PHASES + 1] = {"train", "refine", "warmup", NULL};
_Static_assert(RUNLOG_PHASES == 3, "runlog_phase_names lists every phase");

static const char HEADER[] = "epoch,phase,lr,loss,reconstruction,dx,dz,l1,active,validation,seconds,epoch_seconds\n";

#define RUNLOG_MAX_BYTES ((size_t)1 << 30)   /* about ten million epochs */

static int log_path(char *buf, size_t n, const char *run_dir, Status *st) {
    if (snprintf(buf, n, "%s/" RUNLOG_FILE, run_dir) >= (int)n)
        return status_set(st, ST_INPUT, "%.200s...: path too long", run_dir);
    return 0;
}

/* ---- writing ------------------------------------------------------------------------------------ */

/* Keep the header and the complete rows of epochs <= last_epoch. */
static int trim(const char *path, long last_epoch, Status *st) {
    char *text;
    size_t n;
    if (fs_read_file(path, RUNLOG_MAX_BYTES, &text, &n, st)) return st->code;
    size_t out = 0;
    int first = 1;
    for (char *p = text; p < text + n;) {
        char *nl = memchr(p, '\n', (size_t)(text + n - p));
        if (!nl) break;   /* a row cut short by a crash */
        size_t len = (size_t)(nl + 1 - p);
        if (first || strtol(p, NULL, 10) <= last_epoch) {
            memmove(text + out, p, len);
            out += len;
        }
        first = 0;
        p = nl + 1;
    }
    int rc = out ? atomic_write_bytes(path, text, out, st) : atomic_write_bytes(path, HEADER, strlen(HEADER), st);
    free(text);
    return rc;
}

int runlog_open(RunLogWriter *w, const char *run_dir, int resume, long last_epoch, Status *st) {
    memset(w, 0, sizeof *w);
    if (log_path(w->path, sizeof w->path, run_dir, st)) return st->code;
    int rc = resume && fs_exists(w->path) ? trim(w->path, last_epoch, st)
                                          : atomic_write_bytes(w->path, HEADER, strlen(HEADER), st);
    if (rc) return rc;
    w->f = fopen(w->path, "a");
    if (!w->f) return status_set(st, ST_RUNTIME, "%s: cannot open: %s", w->path, strerror(errno));
    return 0;
}

int runlog_append(RunLogWriter *w, const RunLogRow *row, Status *st) {
    NN_CHECK(row->phase >= 0 && row->phase < RUNLOG_PHASES, "runlog_append: phase %d", row->phase);
    FILE *f = w->f;
    fprintf(f, "%ld,%s,%.6g,%.8g,%.8g,%.8g,%.8g,%.8g,%ld,", row->epoch, runlog_phase_names[row->phase], row->lr,
            row->loss, row->reconstruction, row->dx, row->dz, row->l1, row->active);
    if (row->validated) fprintf(f, "%.8g", row->validation);
    fprintf(f, ",%.3f,%.4f\n", row->seconds, row->epoch_seconds);
    if (fflush(f) != 0 || ferror(f)) return status_set(st, ST_RUNTIME, "%s: write failed: %s", w->path, strerror(errno));
    return 0;
}

void runlog_close(RunLogWriter *w) {
    if (w->f) fclose(w->f);
    w->f = NULL;
}

/* ---- reading ------------------------------------------------------------------------------------ */

void runlog_free(RunLog *log) {
    free(log->rows);
    memset(log, 0, sizeof *log);
}

enum { C_PHASE, C_LR, C_LOSS, C_REC, C_DX, C_DZ, C_L1, C_ACTIVE, C_VAL, C_SECONDS, C_EPOCH_SECONDS, C_N };
_Static_assert(RUNLOG_HAVE_EPOCH_SECONDS == 1 << C_EPOCH_SECONDS, "a RUNLOG_HAVE_ bit for every column");
static const char *const column_names[C_N] = {"phase", "lr", "loss", "reconstruction", "dx", "dz", "l1",
                                              "active", "validation", "seconds", "epoch_seconds"};

int runlog_read(const char *run_dir, RunLog *log, Status *st) {
    memset(log, 0, sizeof *log);
    char path[4200];
    if (log_path(path, sizeof path, run_dir, st)) return st->code;
    CsvTable t;
    const CsvOptions o = {.header = CSV_HEADER_REQUIRED, .lenient = 1, .words = runlog_phase_names,
                          .drop_unfinished = 1, .max_bytes = RUNLOG_MAX_BYTES};
    if (csv_read_table(path, &o, &t, st)) return st->code;
    int ce = csv_col(&t, "epoch"), col[C_N];
    if (ce < 0) {
        csv_table_free(&t);
        return status_set(st, ST_INPUT, "%s: no column \"epoch\" in the header (not a framelaw log?)", path);
    }
    for (int k = 0; k < C_N; k++)
        if ((col[k] = csv_col(&t, column_names[k])) >= 0) log->have |= 1u << k;
    log->rows = calloc((size_t)(t.rows ? t.rows : 1), sizeof *log->rows);
    if (!log->rows) {
        csv_table_free(&t);
        return status_set(st, ST_RUNTIME, "%s: out of memory", path);
    }
    int rc = 0;
    for (long i = 0; i < t.rows && !rc; i++) {
        const double *d = t.d + i * t.cols;
        double v[C_N];
        for (int k = 0; k < C_N; k++) v[k] = col[k] >= 0 ? d[col[k]] : NAN;
        double e = d[ce];
        if (!(e >= 0 && e <= 1e15 && e == floor(e))) {
            rc = status_set(st, ST_INPUT, "%s:%ld: the epoch is not a whole number", path, t.lines[i]);
            break;
        }
        RunLogRow *r = &log->rows[i];
        r->epoch = (long)e;
        r->phase = v[C_PHASE] == 0 || v[C_PHASE] == 1 || v[C_PHASE] == 2 ? (int)v[C_PHASE] : -1;
        r->lr = v[C_LR];
        r->loss = v[C_LOSS];
        r->reconstruction = v[C_REC];
        r->dx = v[C_DX];
        r->dz = v[C_DZ];
        r->l1 = v[C_L1];
        r->active = v[C_ACTIVE] >= 0 && v[C_ACTIVE] <= 1e15 ? (long)v[C_ACTIVE] : -1;
        r->validated = !isnan(v[C_VAL]);
        r->validation = v[C_VAL];
        r->seconds = v[C_SECONDS];
        r->epoch_seconds = v[C_EPOCH_SECONDS];
        log->n = i + 1;
    }
    csv_table_free(&t);
    if (rc) runlog_free(log);
    return rc;
}
