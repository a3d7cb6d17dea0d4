/* io/cli/cli.h: the commands of the front end. Each returns the process exit status:
 * 0 success, 1 runtime failure, 2 bad usage or bad input. */
#ifndef IO_CLI_H
#define IO_CLI_H

#include <signal.h>

#include "io/run/config.h"
#include "io/run/results.h"
#include "io/run/runlock.h"

#include "io/run/provenance.h" /* FRAMELAW_VERSION */

typedef struct {
    const char *name;
    const char *summary;
    int (*run)(int argc, char **argv);  /* argv[0] is the command name */
} Command;

/* Print "framelaw: <message>" to stderr and return code (for `return cli_error(2, ...)`). */
int cli_error(int code, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* A one-line note on stderr that a term name of key (an option or config key) writes a product with a
 * space, deprecated, and how to write it now ("z1 z2" -> "z1*z2"). */
void cli_note_old_term(const char *key, const char *name);
/* The note for the first such name in a config's library.include / library.exclude, if any. */
void cli_note_old_terms(const Config *c);
/* 1 when argv holds --help or -h. */
int cli_wants_help(int argc, char **argv);

/* framelaw fit FILE: a sparse ODE fitted to a time series of state coordinates (io/cli/cmd_fit.c). */
int cmd_fit(int argc, char **argv);

/* framelaw frames DIR: inspect a frames folder (io/cli/cmd_frames.c). */
int cmd_frames(int argc, char **argv);

/* framelaw report RUN_DIR: the run's self-contained HTML report (io/cli/cmd_report.c). */
int cmd_report(int argc, char **argv);

/* framelaw demo SCENARIO OUT_DIR: render a demo scenario's recordings (io/cli/cmd_demo.c). */
int cmd_demo(int argc, char **argv);




int cmd_train(int argc, char **argv);   /* io/cli/cmd_train.c */
int cmd_resume(int argc, char **argv);  /* io/cli/cmd_train.c */
int cmd_sweep(int argc, char **argv);   /* io/cli/cmd_sweep.c */

int cmd_export(int argc, char **argv);   /* io/cli/cmd_results.c */
int cmd_forecast(int argc, char **argv); /* io/cli/cmd_results.c */

int cmd_verify(int argc, char **argv);   /* io/cli/cmd_verify.c */

/* framelaw ensemble RUN_DIR: ensembles by bagging of a finished run (io/cli/cmd_ensemble.c). */
int cmd_ensemble(int argc, char **argv);

/* framelaw canonical RUN_DIR: the sparsest form of a finished run's law (io/cli/cmd_canonical.c). */
int cmd_canonical(int argc, char **argv);

/* ---- commands on a finished run (io/cli/runargs.c) ---- */

/* Has the run in dir (config c) finished training? The log's last epoch against train.epochs. 0, or
 * ST_INPUT saying what to do. */
int cli_run_finished(const char *dir, const Config *c, Status *st);
/* The end of a run's training: export and forecast from its final checkpoint, the equations on
 * stdout (io/cli/cmd_train.c; also used for the refined run of `framelaw canonical --refine`). */
int cli_finish_run(const char *run_dir, int quiet, Status *st);

/* A stop request during long work (training, refinement): cli_stop_catch makes SIGINT and SIGTERM
 * set cli_stop_flag (and cli_stop_sig) instead of ending the process, cli_stop_release puts the
 * handlers from before back (main's, which remove temporaries and end it). io/cli/cmd_train.c. */
extern volatile sig_atomic_t cli_stop_flag, cli_stop_sig;
void cli_stop_catch(void);
void cli_stop_release(void);

#define CLI_MAX_SETS 64
typedef struct {
    const char *cmd, *dir;
    int quiet, n_sets;
    const char *sets[CLI_MAX_SETS];
    RunLock lock;        /* held from cli_open_finished; run_unlock it at the end */
} RunArgs;

/* RUN_DIR, --quiet and --set PREFIX.KEY=VALUE (only keys of that section, e.g. "ensemble.");
 * argv[0] is the command's name. 0, or the exit status after printing the error. */
int cli_run_args(int argc, char **argv, const char *prefix, RunArgs *a);
/* Load the run's config, apply the --set keys, validate, check training finished, take the run
 * folder's lock (these commands rewrite config.json and the equations: one command at a time), open
 * the run with that config. 0, or the exit status after printing the error (the lock released). */
int cli_open_finished(RunArgs *a, Config *c, LoadedRun *r);
/* Store the config with the --set keys in RUN_DIR/config.json (nothing without --set). */
int cli_store_sets(const RunArgs *a, const Config *c, Status *st);

#endif
