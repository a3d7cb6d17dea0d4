/* io/run/config.h: the run config (JSON), its defaults, validation and overrides.
 *
 * Every key, its type, default, range and meaning is listed in docs/config.md; that page and the
 * key table in io/run/config.c must agree (a test checks that every key in the table appears in the
 * page). Everything but data.frames has a default.
 *
 * Errors name the key path, e.g. `model.encoder[1]: must be a positive integer`, and have code
 * ST_INPUT (exit 2): unknown keys, wrong types, out-of-range values, malformed JSON (with the line).
 */
#ifndef IO_CONFIG_H
#define IO_CONFIG_H

#include <stddef.h>
#include <stdint.h>

#include "io/data/frames.h"
#include "nn/act.h"
#include "nn/core.h"
#include "sparse/integrate.h"

#define CFG_PATH_MAX 4096

/* Keys with a fixed set of string values are parsed once into enums: the Config holds the value,
 * never the string. A key whose values a module below already names holds that module's enum
 * (data.gray GrayStd, data.scale ScaleMode, model.activation ActId, forecast.method OdeMethod);
 * the others have their enums here. The name of each value, as a config file writes it, is in the
 * key table (config_choice_name); the config's tables of these enums are below. */
typedef enum { DERIV_CENTRAL, DERIV_SAVGOL, DERIV_AUTO, DERIV_METHOD_COUNT } DerivMethod;   /* data.derivative.method */
typedef enum { INIT_GLOROT, INIT_PCA, INIT_ISOMAP, INIT_COUNT } ModelInit;                   /* model.init */
typedef enum { DERIVS_FRAMES, DERIVS_LATENT, DERIVS_COUNT } LatentDerivs;                  /* model.derivatives */
typedef enum { MAP_AUTO, MAP_LINEAR, MAP_CURVED, MAP_COUNT } FramesMap;                     /* model.map */
typedef enum { SCHED_CONSTANT, SCHED_STEP, SCHED_COSINE, SCHED_COUNT } LrSchedule;          /* optimizer.schedule */
typedef enum { MEASURE_COEFFICIENT, MEASURE_CONTRIBUTION, MEASURE_COUNT } ThreshMeasure;    /* threshold.measure */
typedef enum { SELECT_NONE, SELECT_FIRST, SELECT_EVERY, SELECT_COUNT } ThreshSelect;        /* threshold.select */
typedef enum { ENSFIT_AUTO, ENSFIT_SELECTION, ENSFIT_THRESHOLDING, ENSFIT_COUNT } EnsembleFit; /* ensemble.method */
typedef enum { CANON_CHOOSE_FIT, CANON_CHOOSE_FORECAST, CANON_CHOOSE_AUTO, CANON_CHOOSE_COUNT } CanonChoose; /* canonical.choose */

/* The names of those enums' values, indexed by value ("central", "savgol", "auto"; ...). */
extern const char *const deriv_method_names[];    /* (DERIV_METHOD_COUNT) */
extern const char *const model_init_names[];      /* (INIT_COUNT) */
extern const char *const latent_derivs_names[];   /* (DERIVS_COUNT) */
extern const char *const frames_map_names[];      /* (MAP_COUNT) */
extern const char *const lr_schedule_names[];     /* (SCHED_COUNT) */
extern const char *const thresh_measure_names[];  /* (MEASURE_COUNT) */
extern const char *const thresh_select_names[];   /* (SELECT_COUNT) */
extern const char *const ensemble_fit_names[];    /* (ENSFIT_COUNT) */
extern const char *const canon_choose_names[];    /* (CANON_CHOOSE_COUNT) */
#define CFG_MAX_LIST 16
#define CFG_NAME_MAX 96

typedef struct {
    /* data */
    char frames[CFG_PATH_MAX];      /* data.frames: frames folder, or a folder/file of CSV / .npy recordings */
    char frames_origin[CFG_PATH_MAX]; /* data.frames_origin: data.frames when trained, once the frames moved */
    double fps;                     /* data.fps: frames (samples) per second; dt = stride / fps     [30] */
    GrayStd gray;                   /* data.gray: "bt601" | "bt709"                              [bt601] */
    int crop[4];                    /* data.crop: [x, y, width, height] in source pixels; width 0 = none */
    int size[2];                    /* data.size: [width, height] after resizing; 0 = keep           */
    ScaleMode scale;                /* data.scale: "unit" ([0,1]) | "standardize" (per pixel)     [unit] */
    int stride;                     /* data.stride: keep every n-th frame                              [1] */
    int store_bits;                 /* data.store_bits: 8 | 16                                         [8] */
    char store[CFG_PATH_MAX];       /* data.store: frame store file; "": beside the frames, or the cache when
                                       their folder is read-only (docs/frames.md)                  [""] */
    DerivMethod derivative;         /* data.derivative.method: "central" | "savgol" | "auto"      [auto] */
    int sg_window, sg_degree;       /* data.derivative.window [7], .degree [3]                          */
    int n_val_names;                /* data.validation.recordings: names of held-out recordings        */
    char val_names[CFG_MAX_LIST][CFG_NAME_MAX];
    int val_last;                   /* data.validation.last: hold out the last N recordings        [1] */
                                    /*   (used when no names are given; 0 = no validation)             */
    /* model */
    int latent;                     /* model.latent                                                 [1] */
    int order;                      /* model.order: 1 | 2                                           [2] */
    int n_encoder;                  /* model.encoder: hidden widths                           [[64, 32]] */
    int encoder[CFG_MAX_LIST];
    int n_decoder;                  /* model.decoder: hidden widths; null = encoder mirrored    [null] */
                                    /*   (n_decoder = -1 for null)                                     */
    int decoder[CFG_MAX_LIST];
    ActId activation;               /* model.activation: sigmoid | tanh | softplus | silu     [sigmoid] */
    FramesMap map;                  /* model.map: "auto" | "linear" | "curved"                   [auto] */
                                    /*   (train resolves auto and stores linear or curved)             */
    ModelInit init;                 /* model.init: "glorot" | "pca" | "isomap"                 [isomap] */
    LatentDerivs derivatives;       /* model.derivatives: "frames" | "latent"                 [latent] */
    long init_epochs;               /* model.init_epochs: isomap fitting epochs                   [200] */
    long init_frames;               /* model.init_frames: frames embedded by isomap              [2000] */
    /* library */
    int lib_degree;                 /* library.degree                                               [3] */
    int lib_constant;               /* library.constant                                          [true] */
    int lib_trig;                   /* library.trig                                              [true] */
    int lib_trig_velocity;          /* library.trig_velocity: sin/cos of velocities too          [true] */
    int n_lib_freq;                 /* library.multipliers: k in sin(k z), cos(k z)               [[1]] */
    int lib_freq[8];
    int n_lib_include, n_lib_exclude; /* library.include / library.exclude: term names           [[]] */
    char lib_include[32][CFG_NAME_MAX];
    char lib_exclude[32][CFG_NAME_MAX];
    /* loss */
    double w_rec, w_dx, w_dz, w_l1; /* loss.reconstruction [1], loss.dx [0.1], loss.dz [1], loss.l1 [1e-4] */
    int loss_normalize;             /* loss.normalize: divide rec and dx terms by the data's scale [true] */
    /* optimizer */
    double lr, beta1, beta2, eps;   /* optimizer.lr [1e-3], .beta1 [0.9], .beta2 [0.999], .eps [1e-8] */
    LrSchedule schedule;            /* optimizer.schedule: "constant" | "step" | "cosine"    [constant] */
    int sched_every;                /* optimizer.decay_every: epochs between step decays         [1000] */
    double sched_factor;            /* optimizer.decay_factor: step decay multiplier              [0.5] */
    double lr_min;                  /* optimizer.lr_min: floor of the cosine schedule               [0] */
    /* train */
    int batch;                      /* train.batch                                                [256] */
    int run_length;                 /* train.run_length: samples per run of an epoch's order        [1] */
    long epochs;                    /* train.epochs: total, refinement included                  [1500] */
    uint64_t seed;                  /* train.seed                                                   [1] */
    int threads;                    /* train.threads: 0 = all cores                                 [0] */
    int validate_every;             /* train.validate_every: epochs                                [10] */
    double mem_budget;              /* train.memory_budget: GiB; 0 = half of physical memory        [0] */
    long warmup_epochs;             /* train.warmup_epochs: autoencoder alone first (no dz, no L1)   [0] */
    int warmup_fit;                 /* train.warmup_fit: Xi from thresholded least squares after it [true] */
    /* threshold */
    double threshold;               /* threshold.value                                           [0.02] */
    ThreshMeasure threshold_measure; /* threshold.measure: "coefficient" | "contribution" [contribution] */
    ThreshSelect threshold_select;  /* threshold.select: "none" | "first" | "every"                 [every] */
    int threshold_every;            /* threshold.every: epochs between passes                     [250] */
    long refine_epochs;             /* threshold.refine_epochs: last epochs, mask fixed, no L1    [300] */
    /* checkpoint */
    int ckpt_every;                 /* checkpoint.every: epochs                                   [100] */
    int ckpt_keep;                  /* checkpoint.keep: how many periodic checkpoints to keep       [3] */
    /* forecast (safe to change on resume: they do not affect training) */
    double fc_bound;                /* forecast.bound: relative error that ends a good forecast   [0.1] */
    OdeMethod fc_method;            /* forecast.method: "dopri5" | "rk4"                       [dopri5] */
    double fc_tol;                  /* forecast.tolerance: dopri5 relative tolerance             [1e-8] */
    /* ensemble by bagging after training (safe to change on resume; docs/ensembles.md) */
    int ens_members;                /* ensemble.members                                           [100] */
    EnsembleFit ens_method;         /* ensemble.method: "auto" | "selection" | "thresholding"     [auto] */
    int ens_candidates;             /* ensemble.candidates: laws of the selection's path per member [16] */
    long ens_block;                 /* ensemble.block: samples per block; 0 = automatic             [0] */
    double ens_block_seconds;       /* ensemble.block_seconds: > 0 overrides ensemble.block         [0] */
    int ens_bagging;                /* ensemble.library_bagging                                 [false] */
    double ens_drop;                /* ensemble.drop_fraction                                     [0.2] */
    double ens_inclusion;           /* ensemble.inclusion: threshold on inclusion probability     [0.5] */
    int ens_band_members;           /* ensemble.band_members: members integrated for bands        [100] */
    /* canonical (docs/canonical.md) */
    double canon_tolerance;         /* canonical.tolerance: allowed growth of the fit error       [0.05] */
    double canon_cond_max;          /* canonical.cond_max: bound on the map's condition number    [1000] */
    CanonChoose canon_choose;       /* canonical.choose: "fit" | "forecast" | "auto"            [auto] */
    /* output */
    char output[CFG_PATH_MAX];      /* output: run directory                       [runs/<config name>] */
    unsigned char given[16];        /* bit i: key i of the table was given (file, --set), not defaulted */
} Config;

/* Defaults for every key (data.frames empty). */
void config_defaults(Config *c);

/* Parse JSON text over the defaults; `origin` names the source in messages (file name; NULL: none).
 * A relative data.frames is resolved against base_dir (the config file's folder; NULL or "" leaves
 * it as written, i.e. relative to the current directory); output is always relative to the current
 * directory. On error *c is left unchanged. Returns 0 or ST_INPUT. */
int config_parse(Config *c, const char *json, const char *origin, const char *base_dir, Status *st);

/* Read and parse a config file over *c (also fills output with runs/<file stem> when absent).
 * base_dir is the file's folder made absolute, so the resolved data.frames is absolute. A missing
 * or unreadable file is ST_INPUT naming the file. */
int config_load(Config *c, const char *path, Status *st);

/* config_load for a run folder's config.json: a key added after the file was written (it lacks it)
 * takes the value that behaves as framelaw did then, not today's default, so an old run resumes,
 * reports and verifies as it trained. */
int config_load_run(Config *c, const char *path, Status *st);

/* Apply one `KEY.PATH=VALUE` override (VALUE is JSON; a bare word is taken as a string). KEY.PATH
 * may also name a section with an object value (`data.derivative={"method":"savgol"}`). Same
 * validation and messages as the file, prefixed "--set"; a relative data.frames is made absolute
 * against the current directory. On error *c is left unchanged. */
int config_set(Config *c, const char *assignment, Status *st);
/* The same with messages prefixed origin instead of "--set" ("<origin>: <key>: why"), or (origin
 * NULL) not prefixed at all, for a caller that says where the assignment came from. */
int config_set_as(Config *c, const char *assignment, const char *origin, Status *st);

/* 1 when the key was given (by the file or a --set), 0 when it holds its default. A run folder's
 * config.json gives every key it holds. */
int config_given(const Config *c, const char *path);
/* The first library.include / library.exclude name that writes a product with a space ("z1 z2",
 * deprecated: "z1*z2"), with its key in *key; NULL when there is none. */
const char *config_old_term(const Config *c, const char **key);

/* model.map resolved to map (MAP_LINEAR or MAP_CURVED): linear sets model.encoder [] (no hidden
 * layer), model.init pca and model.derivatives frames where they hold their defaults (curved's), so
 * that the rule reads the same from a user's file as from a config.json that writes every key;
 * curved keeps the keys as they are. */
void config_apply_map(Config *c, FramesMap map);

/* Cross-key checks after parsing and overrides (e.g. refine_epochs < epochs, data.frames given). */
int config_validate(const Config *c, Status *st);

/* The resolved config as JSON text (every key, defaults filled in); malloc'ed, caller frees. */
char *config_to_json(const Config *c);

/* Digest (FNV-1a 64) of the resolved config without the keys that are safe to change on resume
 * (train.epochs, train.threads, train.validate_every, checkpoint.every, checkpoint.keep, output,
 * forecast.*, ensemble.*). */
uint64_t config_digest(const Config *c);

/* The names of the keys that may change on resume, for messages and docs. */
extern const char *const config_resume_safe_keys[];
/* Those names as one comma-separated line, for messages. */
void config_safe_keys_text(char *buf, size_t n);   /* NULL-terminated */

/* The key table, for docs and tests: the path of key i (0, 1, ...), NULL past the last key. */
const char *config_key_path(int i);
/* A key with a fixed set of string values: the i-th allowed name (0, 1, ...) and, in *value, the
 * enum value it is parsed into; NULL past the last name or when the key has no such set. */
const char *config_choice(const char *path, int i, int *value);

/* The key table as Markdown (one row per key: key, type, default, allowed values, meaning), as it
 * appears in docs/config.md; malloc'ed, caller frees. */
char *config_keys_markdown(void);

#endif
