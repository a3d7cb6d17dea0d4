/* io/run/runlog.h: the training log, RUN_DIR/log.csv, and the one module that writes and reads it
 * (format: docs/formats.md, "log.csv"). The epoch loop (io/run/train.c) starts it, trims it on
 * resume and appends a row per epoch; the report and the sweep summary read the rows back.
 *
 * Header and row, byte for byte:
 *   epoch,phase,lr,loss,reconstruction,dx,dz,l1,active,validation,seconds,epoch_seconds
 *   12,train,0.001,0.01234567,...,14,,3.021,0.2514
 * lr %.6g; loss, reconstruction, dx, dz, l1 and validation %.8g; seconds %.3f; epoch_seconds %.4f;
 * validation empty on an epoch without validation. The file is appended to and flushed after each
 * row (not written atomically); a reader leaves out a last line without its line end (a row being
 * written). Reading uses io/data/csv.h, leniently: columns are found by their header names (a log
 * of an older writer may lack some), an empty field is NaN. */
#ifndef IO_RUNLOG_H
#define IO_RUNLOG_H

#include <stdio.h>

#include "nn/core.h"

#define RUNLOG_FILE "log.csv"   /* in the run folder */

typedef enum { RUNLOG_TRAIN, RUNLOG_REFINE, RUNLOG_WARMUP, RUNLOG_PHASES } RunLogPhase;
/* "train", "refine", "warmup" (the phase column), NULL-terminated */
extern const char *const runlog_phase_names[RUNLOG_PHASES + 1];

/* One epoch. */
typedef struct {
    long epoch;             /* epochs completed (1, 2, ...) */
    int phase;              /* RunLogPhase; -1 when the column is absent or empty (reading) */
    double lr;              /* the learning rate of the epoch */
    double loss;            /* the weighted total, mean over the epoch's samples */
    double reconstruction, dx, dz, l1; /* the terms before weighting, means over the epoch */
    long active;            /* active coefficients after the epoch; -1 when absent (reading) */
    int validated;          /* 1 when the validation loss was computed this epoch */
    double validation;      /* ... that loss; NaN when not validated */
    double seconds;         /* training time so far, across resumes */
    double epoch_seconds;   /* wall time of the epoch */
} RunLogRow;

/* ---- writing (the epoch loop) ------------------------------------------------------------------ */

typedef struct {
    FILE *f;
    char path[4200];
} RunLogWriter;

/* A fresh run (resume = 0): the log is the header alone, written atomically. A resumed run: the
 * header and the rows of epochs <= last_epoch stay (rows written after the checkpoint go, and so
 * does a last line cut short), rewritten atomically; a missing log starts again from the header.
 * Then the file is opened for appending. ST_RUNTIME on a file error. */
int runlog_open(RunLogWriter *w, const char *run_dir, int resume, long last_epoch, Status *st);
/* Append one row and flush it. ST_RUNTIME when the write fails. */
int runlog_append(RunLogWriter *w, const RunLogRow *row, Status *st);
void runlog_close(RunLogWriter *w);

/* ---- reading ----------------------------------------------------------------------------------- */

/* Columns besides epoch, which every log has; a bit is set in RunLog.have when the header holds
 * the column. A row's figure of an absent column is NaN (phase and active: -1). */
enum {
    RUNLOG_HAVE_PHASE = 1 << 0,
    RUNLOG_HAVE_LR = 1 << 1,
    RUNLOG_HAVE_LOSS = 1 << 2,
    RUNLOG_HAVE_RECONSTRUCTION = 1 << 3,
    RUNLOG_HAVE_DX = 1 << 4,
    RUNLOG_HAVE_DZ = 1 << 5,
    RUNLOG_HAVE_L1 = 1 << 6,
    RUNLOG_HAVE_ACTIVE = 1 << 7,
    RUNLOG_HAVE_VALIDATION = 1 << 8,
    RUNLOG_HAVE_SECONDS = 1 << 9,
    RUNLOG_HAVE_EPOCH_SECONDS = 1 << 10,
};

typedef struct {
    long n;
    RunLogRow *rows;        /* (n) in file order */
    unsigned have;          /* RUNLOG_HAVE_* */
} RunLog;

/* Read RUN_DIR/log.csv. ST_INPUT naming the file (and the line) for a missing or malformed log: no
 * header, no epoch column ("log.csv: no column \"epoch\" in the header (not a framelaw log?)"), a
 * field that is not a number, an epoch that is not a whole number. On error *log is empty. */
int runlog_read(const char *run_dir, RunLog *log, Status *st);
void runlog_free(RunLog *log);

#endif
