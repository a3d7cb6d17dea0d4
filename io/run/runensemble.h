/* io/run/runensemble.h: the ensemble by bagging of a trained run (sparse/ensemble.h on the encoded
 * training set, io/run/trainset.h), its settings from the config's ensemble.* keys, its object in
 * equations.json and the forecast bands of held-out recordings (docs/ensembles.md, docs/formats.md).
 *
 * It runs after training: at the end of `framelaw train` / `resume` (through export and forecast),
 * on demand with `framelaw ensemble RUN_DIR`, and whenever `framelaw export` or `framelaw forecast`
 * need it. It is a function of the final model, the data and the config, so a run that was stopped
 * and resumed gets the same bits. The generator is xoshiro256** (nn/rng.h) seeded with
 * train.seed XOR ENSEMBLE_SEED_MIX, apart from the training's stream. */
#ifndef IO_RUNENSEMBLE_H
#define IO_RUNENSEMBLE_H

#include <cjson/cJSON.h>

#include "io/run/results.h"
#include "sparse/ensemble.h"

#define ENSEMBLE_SEED_MIX 0x656e73656d626c65ull /* "ensemble" in ASCII */

typedef struct RunEnsemble {
    Ensemble e;
    EnsembleOptions opt;
    int block_from_seconds;     /* 1 when ensemble.block_seconds set the block */
    int by_selection;           /* 1: members fitted by the selection bagged (ensemble.method) */
    uint64_t seed;              /* train.seed */
    double fit_seconds;         /* wall time: encoding the training set and fitting the members */
    double band_seconds;        /* wall time of the bands integrated so far */
} RunEnsemble;

/* The ensemble options of a config for samples dt seconds apart and a stencil of half-width m
 * (the automatic block). ST_INPUT naming the key for a value the config parser cannot check alone. */
int run_ensemble_options(const Config *c, double dt, int m, EnsembleOptions *o, int *from_seconds, Status *st);

/* 1 when the config's ensemble is fitted by the selection bagged (ensemble.method selection, or auto
 * with threshold.select not none and no library bagging), 0 for thresholded least squares. */
int run_ensemble_by_selection(const Config *c);

/* Fit the ensemble of r once (later calls return at once); r->ens holds it. Prints one summary line
 * on stderr unless quiet. ST_INPUT naming the key (e.g. ensemble.block longer than every
 * recording), ST_RUNTIME on a solver failure. */
int run_ensemble_get(LoadedRun *r, int quiet, Status *st);
void run_ensemble_free(RunEnsemble *re);

/* The "ensemble" object of equations.json (docs/formats.md); NULL when r has no ensemble. */
cJSON *run_ensemble_json(const LoadedRun *r, int digits);

/* The term table's header: how the members were fitted; with selection, how many chose the trained
 * law, and a line of warning under it when fewer than half did. */
void run_ensemble_print_header(FILE *f, const RunEnsemble *re);

/* Print the term table (inclusion, median, interval) and the ensemble law to f. */
void run_ensemble_print(FILE *f, const LoadedRun *r);

/* Forecast bands of one held-out recording from the start state y0 (n_vars) at the output times
 * t_out (n_out), with the forecast's integrator options; widths are divided by scale (the recording's
 * root mean square of z) and compared with forecast.bound. */
int run_ensemble_bands(LoadedRun *r, const double *y0, const double *t_out, int n_out, double scale,
                       const OdeOptions *opt, EnsembleBands *b, Status *st);

#endif
