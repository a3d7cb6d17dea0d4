/* io/sweep/sweep.h: parameter sweeps. A sweep file (JSON, docs/sweeps.md) names a base config, the keys
 * to vary with their lists of values, a number of random restarts and an output folder; it expands
 * into members, each a resolved config with a stable id and its own run folder.
 *
 * Grid order: the keys of `vary` in the order the file lists them, the last key varying fastest,
 * and the restarts (seeds) innermost, faster than any key. Member i of n is named
 *     m<i, 4 digits or more>-<8 hex digits>
 * where the hex digits are a hash (FNV-1a 64, folded to 32 bits) of the member's varied values as
 * canonical JSON and its seed, so an id changes only when the file changes (and the hash part
 * only when the member's own values change).
 *
 * Nothing here forks or waits: io/cli/cmd_sweep.c runs the members. This file parses and checks the
 * sweep, tells the state of a member's folder, prepares the shared frame store, writes the Slurm
 * batch script and builds the summary. Errors are ST_INPUT naming the sweep file, the key and the
 * member; ST_RUNTIME for system errors. */
#ifndef IO_SWEEP_H
#define IO_SWEEP_H

#include <stddef.h>
#include <stdint.h>

#include "io/run/config.h"
#include "nn/core.h"

#define SWEEP_MAX_MEMBERS 100000
#define SWEEP_KEY_MAX 128

typedef struct {
    char key[SWEEP_KEY_MAX];    /* config key path, e.g. "loss.dx" */
    int n_values;
    char **values;              /* (n_values) canonical JSON text of each value, as in the file */
} SweepAxis;

typedef struct {
    int index;                  /* position in grid order */
    char id[40];                /* "m0007-1a2b3c4d" */
    int *choice;                /* (n_axes) index of each axis's value */
    uint64_t seed;              /* train.seed */
    char *dir;                  /* its run folder: <output>/<id> (the config's output) */
} SweepMember;

typedef struct {
    char partition[64], time[32], memory[32];  /* "" = not given (the cluster's default) */
    int cpus_per_task;          /* 0 = not given */
    int max_running;            /* array tasks at once (%N); 0 = no limit */
    int n_sbatch, n_setup;
    char **sbatch;              /* (n_sbatch) extra options, each written as "#SBATCH <text>" */
    char **setup;               /* (n_setup) shell lines run before the member (module load ...) */
} SweepSlurm;

typedef struct {
    char path[CFG_PATH_MAX];    /* the sweep file as given */
    char abs_path[CFG_PATH_MAX];/* ... made absolute */
    char dir[CFG_PATH_MAX];     /* its folder, absolute */
    char stem[256];             /* file name without .json */
    char output[CFG_PATH_MAX];  /* the sweep folder (relative to the current directory) */
    Config *base;               /* the base config, resolved */
    int n_axes;
    SweepAxis *axes;            /* (n_axes) */
    int n_seeds;                /* restarts */
    uint64_t *seeds;            /* (n_seeds) */
    int seeds_vary;             /* 1 when restarts or seeds were given (train.seed is then varied) */
    int n_members;
    SweepMember *members;       /* (n_members), grid order */
    SweepSlurm slurm;
} Sweep;

/* Read, expand and check a sweep file: every member config is resolved and validated. On error
 * *sw is left empty (sweep_free is still safe). */
int sweep_load(Sweep *sw, const char *path, Status *st);
void sweep_free(Sweep *sw);

/* "loss.dx=0.001, train.seed=2": the member's varied values (strings unquoted). snprintf-like. */
size_t sweep_member_label(const Sweep *sw, int i, char *buf, size_t n);
/* Value of axis a for member i as displayed (canonical JSON, strings unquoted). */
void sweep_member_value(const Sweep *sw, int i, int a, char *buf, size_t n);
/* The resolved config of member i (base, varied values, seed, output = its folder), validated when
 * the sweep was loaded. Configs are built on demand: a sweep of many members stays small. */
int sweep_member_config(const Sweep *sw, int i, Config *c, Status *st);

/* ---- the state of a member's folder ------------------------------------------------------ */

typedef enum {
    MEMBER_NEW,        /* nothing to continue: start with `train` (folder absent, or no checkpoints/) */
    MEMBER_RESUME,     /* checkpoints/ exists and the run is not finished: `resume` */
    MEMBER_DONE        /* equations.json present and log.csv reaches train.epochs: skip */
} MemberState;

/* The member's state. A folder whose config.json describes another run (config digest differs:
 * the sweep file or its base config changed) is ST_INPUT naming the member and the folder. */
int sweep_member_state(const Sweep *sw, int i, MemberState *state, Status *st);

/* Create the member's folder and, for a new run, write its config.json with train.threads = threads
 * (the file that `framelaw train` is given). */
int sweep_member_prepare(const Sweep *sw, int i, MemberState state, int threads, Status *st);

/* Make sure the frame store of this member's data settings exists and is current, under a lock in
 * the sweep folder (.store.lock), so that members started together find it built and never build
 * it twice. Errors of the data (missing folder, bad frames) are ST_INPUT. */
int sweep_prepare_store(const Sweep *sw, int i, Status *st);

/* Key of the member's frame-store settings (data.frames and the stored settings): members with
 * equal keys share one store file. */
void sweep_store_key(const Config *c, char *buf, size_t n);

/* ---- the last row of a run's log.csv ----------------------------------------------------- */

typedef struct {
    long epoch;                          /* last epoch logged; 0 = no row */
    double loss, reconstruction, dx, dz; /* of that row; NAN when absent */
    long active;                         /* -1 when absent */
    double validation;                   /* the last validation loss logged; NAN when none */
} SweepLog;

/* Reads RUN_DIR/log.csv (columns found by name in the header). A missing file gives epoch 0. */
void sweep_read_log(const char *run_dir, SweepLog *log);

/* ---- Slurm -------------------------------------------------------------------------------- */

/* The batch script: one array task per member, `EXE sweep SWEEP_FILE --member $SLURM_ARRAY_TASK_ID`
 * run in workdir; logs in <output>/slurm/. malloc'ed text, or NULL with a status (ST_INPUT for a
 * path Slurm cannot take). */
char *sweep_slurm_script(const Sweep *sw, const char *exe, const char *workdir, Status *st);
/* Write it to <output>/sweep.sbatch (and create <output>/slurm/); path_out gets the script path. */
int sweep_write_slurm(const Sweep *sw, const char *exe, const char *workdir, char *path_out, size_t n,
                      Status *st);

/* ---- the summary -------------------------------------------------------------------------- */

typedef enum { ERR_NONE, ERR_FORECAST, ERR_VALIDATION } SweepErrorFrom;

typedef struct {
    int member;                 /* index in sw->members */
    const char *status;         /* "finished", "incomplete", "not started" */
    SweepLog log;
    double error;               /* forecast error, or the validation loss (error_from); NAN = none */
    SweepErrorFrom error_from;
    long active;                /* active terms; -1 unknown */
    int pareto;                 /* 1 on the Pareto front of (error, active) */
    int no_better;              /* its forecasts are no better than holding the first state (forecast.json) */
    int structure;              /* index in groups; -1 without equations.json */
    char *equations;            /* equations.txt on one line ("; " between equations); may be NULL */
    char *problem;              /* a result file that could not be read, with why; may be NULL */
    int report;                 /* 1: <dir>/report.html exists (sweep_write_summary writes it when finished) */
} SweepRow;

typedef struct {
    char *key;                  /* "dz1/dt: z1, z2 | dz2/dt: z1" */
    int count;                  /* members with this structure */
    int best;                   /* row of the best-ranked member with it */
} SweepGroup;

/* Inclusion of one term in one equation across members (io/sweep/inclusion.c). */
typedef struct {
    char *lhs, *term;           /* "dz1/dt", "z1*z2" */
    int offered;                /* members with equations whose library has the term */
    int kept;                   /* ... whose law keeps it (nonzero active coefficient) */
    double ens_sum;             /* sum of their ensembles' inclusion probabilities */
    int ens_n;                  /* members with an ensemble */
} SweepTermStat;

typedef struct {
    int members;                /* members with a readable equations.json */
    int n, cap;
    SweepTermStat *t;           /* (n) by equation, then by fraction kept (larger first) */
} SweepInclusion;

/* Count over the members' equations.json (unreadable ones are left out; the summary's rows say why). */
void sweep_inclusion(const Sweep *sw, SweepInclusion *inc);
void sweep_inclusion_free(SweepInclusion *inc);
/* inclusion.csv: equation,term,members,kept,inclusion,ensemble_inclusion; malloc'ed. */
char *sweep_inclusion_csv(const SweepInclusion *inc);

typedef struct {
    int n_rows;
    SweepRow *rows;             /* sorted: rank order */
    int n_groups;
    SweepGroup *groups;         /* by count, larger first; ties by best rank */
    SweepErrorFrom pareto_from; /* the members compared on the front: those with this source */
    SweepInclusion inclusion;   /* each term across members */
} SweepSummary;

/* Read every member's results (log.csv, equations.json, equations.txt, forecast.json) and rank
 * them. Never fails on a member's files: an unreadable file is noted in the row's problem. */
int sweep_summary(const Sweep *sw, SweepSummary *sum, Status *st);
void sweep_summary_free(SweepSummary *sum);
/* The summary as CSV and as a self-contained HTML page; malloc'ed, caller frees. */
char *sweep_summary_csv(const Sweep *sw, const SweepSummary *sum);
char *sweep_summary_html(const Sweep *sw, const SweepSummary *sum);
/* Build the summary and write <output>/summary.csv, summary.html and inclusion.csv atomically, under a lock in
 * the sweep folder (array tasks finishing together). Before, the report (io/report/report.h) of each
 * finished member is written when its report.html is missing or older than its log.csv,
 * equations.json or forecast.json; a report that cannot be written is noted in the row's problem.
 * sum may be NULL. */
int sweep_write_summary(const Sweep *sw, SweepSummary *sum, Status *st);

#endif
