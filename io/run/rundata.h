/* io/run/rundata.h: what a command needs to work on a run: its config (from RUN_DIR/config.json) and
 * its data (the frames folder scanned, the frame store opened or built, the training set split),
 * exposed to the epoch loop as TrainData. */
#ifndef IO_RUNDATA_H
#define IO_RUNDATA_H

#include "io/run/config.h"
#include "io/data/frames.h"
#include "io/data/gather.h"
#include "io/data/store.h"
#include "io/run/train.h"

typedef struct {
    FrameScan scan;
    FrameStore store;
    Dataset ds;
    TrainData td;       /* gather over ds for the epoch loop */
    int k;              /* stacked blocks: model order + 1, or the stencil's length (model.derivatives latent) */
    int batch;
    int have_scan, have_store, have_ds;
    StoreOpenInfo store_info;       /* where the store is; its note when the frames' folder is read-only */
    int auto_window, auto_degree;   /* data.derivative.method auto: the stencil chosen (0: not auto) */
    double auto_theta;              /* and the frames' rms frequency it was chosen for (rad / sample) */
    double plane_share;             /* model.map auto: the share of the training frames' variance in their
                                     * leading model.latent principal directions (NAN: not measured) */
} RunData;

/* model.map auto chooses linear when the leading model.latent principal directions carry at least
 * this share of the training frames' variance. Our measurements (docs/battery.md): the convection
 * cell's three carry 0.965, the colony's one 0.773, the other scenarios' 0.13-0.42. */
#define MAP_LINEAR_SHARE 0.90

/* The data.* keys of a resolved run config as frame settings. ST_INPUT naming the
 * key when a name is unknown. */
int frame_settings_from_config(const Config *c, FrameSettings *s, Status *st);

/* data.derivative.method auto: the Savitzky-Golay stencil for frames that move as the training
 * recordings of ds do (the rms frequency of their leading principal component scores) and a model of
 * that order, written into s (stencil, sg_window, sg_degree); *theta the frequency (rad per frame).
 * The caller makes the dataset again with s. ST_INPUT when a recording is too short for it. */
int rundata_auto_stencil(const Dataset *ds, const FrameStore *fs, int order, FrameSettings *s, double *theta,
                         Status *st);

/* Scan data.frames, open (or build) the frame store, split; with model.map auto, measure plane_share.
 * ST_INPUT naming the fault. */
int rundata_open(RunData *d, const Config *c, Status *st);

/* The principal component analysis of the frames (data.derivative.method auto, model.map auto, the pca
 * and isomap starts) of N samples of n values: *gram says which path it takes (nn/pca.h,
 * pca_use_gram under train.memory_budget: the n x n covariance, or with fewer samples than values
 * on large frames or when the covariance does not fit, the N x N Gram matrix and a copy of the
 * samples). ST_INPUT naming `why` (the key that asks for it), the size and data.size when that path
 * would exceed train.memory_budget, before anything is built. */
int rundata_pca_fits(long n, long N, const Config *c, const char *why, int *gram, Status *st);

/* The share of the training frames' variance (over the recordings ds trains on) that their leading q
 * principal directions carry, into *share (1 for frames that never change). */
int rundata_plane_share(const Dataset *ds, const FrameStore *fs, int q, int gram, double *share, Status *st);

/* A fresh run's model.map: auto becomes linear or curved by plane_share (rundata_open measured it),
 * and config_apply_map sets the keys it decides; the samples' blocks follow model.derivatives. Then
 * the cross-key checks (config_validate) on the result. Only for a config being trained anew: a
 * run's config.json holds the resolved values. */
int rundata_apply_map(RunData *d, Config *c, Status *st);
void rundata_close(RunData *d);

/* Videos and CSV recordings with a time column carry their rate (frames_source_rate): when data.fps
 * is not given, set it to theirs; when given, it must agree (0.1%). ST_INPUT otherwise. Called before
 * the run's config.json is written. */
int rundata_source_fps(Config *c, Status *st);

/* The memory estimate of the run (io/run/train.h, model_memory) with its data: the samples' width,
 * the blocks gathered per sample and the batch as training will use them. */
void rundata_memory(const RunData *d, const Config *c, MemEstimate *e);
/* ST_INPUT when the estimate exceeds the budget: a message with the figures that proposes data.size
 * and data.crop. */
int rundata_memory_check(const RunData *d, const Config *c, Status *st);

/* ST_INPUT when the frames the run's config names are gone, with the command that follows them to a
 * new place (cmd: "resume", "export"). */
int run_frames_reachable(const char *run_dir, const Config *c, const char *cmd, Status *st);

/* `--set data.frames=NEW` on a trained run (c: its config with the new value; old: data.frames as
 * its config.json has it). When NEW is another place, its frames must be the run's: the content
 * digest of their store (store_content_digest) equals the one provenance.json recorded (or, for a
 * run that records none, the one of the frames still at the old place). Then data.frames_origin
 * keeps the place of training (the config digest reads it, so the checkpoints still match),
 * config.json is rewritten and provenance.json gets a "move" session. ST_INPUT, naming both places,
 * when the content differs or cannot be checked. */
int run_frames_move(const char *run_dir, Config *c, const char *old, int argc, char **argv, int quiet, Status *st);

/* Read RUN_DIR/config.json. ST_INPUT when the folder or the file is missing ("not a run folder"). */
int run_config_load(const char *run_dir, Config *c, Status *st);

#endif
