/* io/run/train.h: the epoch loop. Owns time, files and the terminal around sparse/model's step:
 * shuffling, Adam, the learning-rate schedule, sequential thresholding, the refinement phase,
 * validation, the CSV log, progress, checkpoints, resume and stopping on a signal.
 *
 * Run directory (docs/formats.md):
 *   config.json              the resolved config (written by the command)
 *   log.csv                  one row per epoch
 *   checkpoints/ckpt-<epoch:8>-<batch:6>.ckpt   the last checkpoint.keep periodic ones, plus those
 *                            written on a stop; checkpoints/best.ckpt the best by validation loss */
#ifndef IO_TRAIN_H
#define IO_TRAIN_H

#include <signal.h>
#include <stdint.h>

#include "io/run/config.h"
#include "nn/core.h"
#include "sparse/model.h"

/* Where batches come from. X (k B, n_in): rows [0, B) x, [B, 2B) x', [2B, 3B) x'' of the samples
 * idx (B) of a split (0 training, 1 validation). k = model order + 1; or, with sten set, the
 * 2m+1 frames of the stencil around each sample (k = 2m+1). */
typedef struct {
    int n_in;
    int k;
    long n_train, n_val;
    double dt;              /* seconds between samples */
    int (*gather)(void *ctx, int split, const long *idx, int B, float *X, Status *st);
    void *ctx;
    const long *sample_frame; /* (n_train) or NULL: the frame of each training sample (consecutive frames
                             * of one recording are consecutive samples); selection needs it */
    const Stencil *sten;    /* non-NULL: derivatives in latent space; the gather gives the stencil's
                             * 2m+1 frames around each sample as k = 2m+1 blocks */
    volatile sig_atomic_t *stop; /* NULL, or a stop request (a signal): a pass over a split ends at its
                             * next batch (batches_next returns TRAIN_STOPPED) */
    /* NULL, or the frames of the batch's stencil windows with each distinct frame once: X (U, n_in)
     * and map ((2m+1) B) as model_loss_shared (with sten) or model_loss_frames_shared (with
     * frame_sten) take them; training uses it in latent mode, and in frames mode
     * when train.run_length > 1 */
    int (*gather_shared)(void *ctx, int split, const long *idx, int B, float *X, int *map, int *U, Status *st);
    const Stencil *frame_sten; /* NULL, or (derivatives by tangents) the stencil of the frames' x', x'' */
} TrainData;

/* The passes over a whole split (the data's scales, the start-ups, the thresholding and selection
 * passes, the encoded training set) take its samples in order, in batches gathered into X:
 *
 *     TrainBatches it;
 *     batches_begin(&it, ds, 0, N, N, Bmax);
 *     while ((rc = batches_next(&it, X, st)) > 0) { ...it.s0, it.B: samples s0 .. s0 + B - 1... }
 *     batches_end(&it);
 *
 * span > N spreads N samples evenly over the first span (sample i of the pass is i * span / N). */
typedef struct {
    const TrainData *ds;
    int split;                          /* 0 training, 1 validation */
    long N, span, s0, next;
    int B, Bmax;
    long *idx;                          /* (Bmax) */
} TrainBatches;

void batches_begin(TrainBatches *it, const TrainData *ds, int split, long N, long span, int Bmax);
/* 1: the next batch is in X (it->s0, it->B); 0: no more; < 0: minus a status code, the gather's
 * error in st, or -TRAIN_STOPPED when ds->stop was set (st says so). The passes built on it return
 * that code as their own: TRAIN_STOPPED is not an exit status, and train_run turns it into a
 * checkpoint. */
enum { TRAIN_STOPPED = 100 };
int batches_next(TrainBatches *it, float *X, Status *st);
void batches_end(TrainBatches *it);

/* Every training sample encoded, in order: state (N, n_vars): z (and z') as the library takes them;
 * target (N, d): z' (first order) or z'' (second order). X: a gather buffer for Bmax samples. */
int train_encode_set(const TrainData *ds, const Model *m, ParamSet *ps, Tape *t, float *X, int Bmax, double *state,
                     double *target, Status *st);

typedef struct {
    const Config *cfg;
    const char *run_dir;
    int resume;                         /* continue from the newest valid checkpoint */
    int quiet;                          /* no progress output */
    volatile sig_atomic_t *stop;        /* set by a signal: finish the step, checkpoint, return */
    int stop_after_steps;               /* tests: behave as if stopped after this many steps (0 = off) */
    const ParamSet *start;              /* NULL, or a new run starts from these values (same layout; no
                                         * model.init, no threshold.select pass) and ... */
    const uint8_t *start_mask;          /* ... this mask (n_terms, n_latent) (refinement) */
} TrainOpts;

typedef struct {
    long epochs_done;
    int interrupted;                    /* stopped by a signal, checkpoint written */
    double last_loss, best_val;
    long active;
    char checkpoint[4200];              /* the last checkpoint written */
} TrainResult;

/* The validation loss of a model (as train_run's log reports it: the loss weights of the config
 * without the L1 term, the data's scales with loss.normalize), over ds's validation split. */
int train_validation_loss(const Config *c, const TrainData *ds, Model *m, ParamSet *ps, double *out, Status *st);

/* What a run will hold in memory, estimated before anything is allocated: the model's parameters
 * (values, gradients, two Adam moments and the checkpoint's copy: 6 floats each; for frames the first
 * layer n_in x h1 dominates), a step's buffers (the blocks stacked blocks of the batch gathered, the
 * decoder's output and their gradients: 4 (2 blocks + 4) bytes per value of a sample; each hidden
 * layer's output, pre-activation and gradient per block), one checkpoint on disk (3 floats per
 * parameter). Calibrated on a run of 24 frames of 1920x1080 with the defaults of release 1: 17 GB
 * measured, 14.5 GB estimated. */
typedef struct {
    long n_in;                  /* values per sample (pixels) */
    double params;              /* parameters of the autoencoder and the law */
    double bytes;               /* memory, estimated */
    double checkpoint_bytes;    /* one checkpoint file */
    double physical;            /* the machine's physical memory (INFINITY when unknown) */
    double budget;              /* train.memory_budget in bytes (0 in the key: half of physical memory) */
} MemEstimate;

/* The estimate for the config's model on samples of n_in values, `blocks` stacked blocks per sample
 * (order + 1, or the stencil's window in latent mode) and batches of `batch` samples. */
void model_memory(const Config *c, long n_in, int blocks, long batch, MemEstimate *e);

/* ST_INPUT naming model.encoder when the model the config describes, for n_in inputs, would need
 * more memory than the machine has (the estimate above with order + 1 blocks). Every model built from
 * a config passes here; before training, rundata_memory_check holds the run to its budget. */
int model_memory_check(const Config *c, int n_in, Status *st);

/* The model the config describes, for n_in inputs (checked by model_memory_check). */
int model_spec_from_config(const Config *c, int n_in, ModelSpec *sp, Status *st);

/* Set up the model (fresh or from the newest valid checkpoint) and run the remaining epochs. On
 * return the model's parameters and mask are in *m and *ps (initialised by this call; the caller
 * frees them with model_free / params_free). ST_RUNTIME on divergence (the last good checkpoint
 * stays) or a file error. */
int train_run(const TrainOpts *o, const TrainData *ds, Model *m, ParamSet *ps, TrainResult *res, Status *st);

/* Load the newest valid checkpoint of a run into a model set up from its config (no training).
 * *found (when not NULL) receives the number of checkpoint files in the run's checkpoints folder,
 * readable or not (-1 when the call failed before looking): 0 tells a run never trained from one
 * whose checkpoints are all unusable, without reading the message. */
int train_load_latest(const char *run_dir, const Config *cfg, int n_in, long n_train, Model *m, ParamSet *ps,
                      int *found, Status *st);

#endif
