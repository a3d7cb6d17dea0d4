/* io/run/results.h: what a trained run gives back: `framelaw export` (equations, latent trajectories,
 * reconstructions, the training region) and `framelaw forecast` (integrate the learned model from
 * the first frame of each held-out recording and compare with the real frames). File formats in
 * docs/formats.md. */
#ifndef IO_RESULTS_H
#define IO_RESULTS_H

#include "io/run/config.h"
#include "io/run/rundata.h"
#include "nn/params.h"
#include "nn/tape.h"
#include "sparse/coef.h"
#include "sparse/model.h"

/* A run loaded from its folder: config, data, and the model of its newest valid checkpoint. */
typedef struct {
    char dir[CFG_PATH_MAX];
    Config cfg;
    RunData data;
    Model m;
    ParamSet ps;
    Coef coef;          /* Xi (masked) and mask in double */
    Tape tape;
    int have_data, have_model, have_tape;
    struct RunEnsemble *ens;    /* the ensemble by bagging, once computed (io/run/runensemble.h) */
    struct RunCanonical *canon; /* the canonical form, once computed (io/run/runcanonical.h) */
} LoadedRun;

int loaded_run_open(LoadedRun *r, const char *run_dir, Status *st);
void loaded_run_close(LoadedRun *r);

/* The training region: per latent variable the range of z (and of z' for a second-order model)
 * over every training sample. */
typedef struct {
    int d, order;
    double zmin[LIB_MAX_VARS], zmax[LIB_MAX_VARS];   /* (n_vars): z then z' */
} Region;

int results_region(LoadedRun *r, Region *reg, Status *st);

/* Write equations.txt, .tex and .json (with the ensemble and the canonical form, computed when not
 * yet there; a sparser canonical law opens the text files, the learned law follows it). */
int results_write_equations(LoadedRun *r, int quiet, Status *st);

/* Write equations, trajectories/, reconstructions/ (image data only) and region.json. Unless quiet, a
 * summary line on stdout, the stream of results (forecast's lines too); notes go to stderr. */
int results_export(LoadedRun *r, int quiet, Status *st);

/* Forecast every held-out recording, with the ensemble's bands; writes forecast.json and forecast/.
 * With no held-out recording, writes a forecast.json with an empty list and says so. Unless quiet,
 * the summary of each recording on stdout. */
int results_forecast(LoadedRun *r, int quiet, Status *st);

#endif
