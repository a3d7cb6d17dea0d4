/* io/run/config_keys.c: the table of config keys (see config_keys.h) and what is said from it alone:
 * each key's rule as text (for messages and docs) and the Markdown key list of docs/config.md.
 * config.c parses, validates, writes and digests configs by walking this table. */
#include "io/run/config_keys.h"

#include <limits.h>
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "nn/mlp.h"
#include "sparse/ensemble.h"
#include "sparse/library.h"
#include "sparse/stencil.h"

/* The Config arrays must hold what the modules they feed accept. */
_Static_assert(CFG_MAX_LIST <= MLP_MAX_LAYERS, "model.encoder / decoder longer than an Mlp");
_Static_assert(CFG_NAME_MAX == LIB_NAME_MAX, "term names: config and library disagree");
_Static_assert(sizeof(((Config *)0)->lib_freq) / sizeof(int) == LIB_MAX_FREQ, "library.multipliers");
_Static_assert(sizeof(((Config *)0)->lib_include) / CFG_NAME_MAX == LIB_MAX_EDITS, "library.include");
_Static_assert(sizeof(((Config *)0)->lib_exclude) / CFG_NAME_MAX == LIB_MAX_EDITS, "library.exclude");

const char *const config_type_names[] = {
    "number", "integer", "integer", "integer", "bool", "string", "path",
    "integer list", "integer list or null", "string list", "crop", "size",
};
_Static_assert(sizeof config_type_names / sizeof config_type_names[0] == T_COUNT, "a key type without a name");

/* ---- the choices: enums parsed from a fixed set of strings ---------------------------------- */

const char *const deriv_method_names[] = {"central", "savgol", "auto"};
_Static_assert(sizeof deriv_method_names / sizeof deriv_method_names[0] == DERIV_METHOD_COUNT, "deriv_method_names");
const char *const model_init_names[] = {"glorot", "pca", "isomap"};
_Static_assert(sizeof model_init_names / sizeof model_init_names[0] == INIT_COUNT, "model_init_names");
const char *const latent_derivs_names[] = {"frames", "latent"};
_Static_assert(sizeof latent_derivs_names / sizeof latent_derivs_names[0] == DERIVS_COUNT, "latent_derivs_names");
const char *const frames_map_names[] = {"auto", "linear", "curved"};
_Static_assert(sizeof frames_map_names / sizeof frames_map_names[0] == MAP_COUNT, "frames_map_names");
const char *const lr_schedule_names[] = {"constant", "step", "cosine"};
_Static_assert(sizeof lr_schedule_names / sizeof lr_schedule_names[0] == SCHED_COUNT, "lr_schedule_names");
const char *const thresh_measure_names[] = {"coefficient", "contribution"};
_Static_assert(sizeof thresh_measure_names / sizeof thresh_measure_names[0] == MEASURE_COUNT, "thresh_measure_names");
const char *const thresh_select_names[] = {"none", "first", "every"};
_Static_assert(sizeof thresh_select_names / sizeof thresh_select_names[0] == SELECT_COUNT, "thresh_select_names");
const char *const ensemble_fit_names[] = {"auto", "selection", "thresholding"};
_Static_assert(sizeof ensemble_fit_names / sizeof ensemble_fit_names[0] == ENSFIT_COUNT, "ensemble_fit_names");
const char *const canon_choose_names[] = {"fit", "forecast", "auto"};
_Static_assert(sizeof canon_choose_names / sizeof canon_choose_names[0] == CANON_CHOOSE_COUNT, "canon_choose_names");

/* Keys that hold a module's enum list its names in the config's own order (the order the docs and
 * the messages give), each with its value; tests/test_config.c checks that every name is the
 * module's name of its value. ACT_NONE (the linear output layer) is not a choice. */
static const char *const gray_choice_names[] = {"bt601", "bt709"};
static const int gray_choice_values[] = {GRAY_BT601, GRAY_BT709};
static const char *const scale_choice_names[] = {"unit", "standardize"};
static const int scale_choice_values[] = {SCALE_UNIT, SCALE_STANDARD};
static const char *const act_choice_names[] = {"sigmoid", "tanh", "softplus", "silu"};
static const int act_choice_values[] = {ACT_SIGMOID, ACT_TANH, ACT_SOFTPLUS, ACT_SILU};
static const char *const ode_choice_names[] = {"dopri5", "rk4"};
static const int ode_choice_values[] = {ODE_DOPRI5, ODE_RK4};
#define N_OF(a) ((int)(sizeof a / sizeof a[0]))
_Static_assert(N_OF(gray_choice_names) == N_OF(gray_choice_values), "data.gray: a name without a value");
_Static_assert(N_OF(scale_choice_names) == N_OF(scale_choice_values), "data.scale: a name without a value");
_Static_assert(N_OF(act_choice_names) == N_OF(act_choice_values), "model.activation: a name without a value");
_Static_assert(N_OF(ode_choice_names) == N_OF(ode_choice_values), "forecast.method: a name without a value");

int config_choice_index(const KeyDef *k, int v) {
    for (int i = 0; i < k->n_names; i++)
        if (config_choice_value(k, i) == v) return i;
    return -1;
}

int config_choice_value(const KeyDef *k, int i) { return k->values ? k->values[i] : i; }

/* ---- the key table ------------------------------------------------------------------------ */

#define FIELD(f) .off = offsetof(Config, f), .size = sizeof(((Config *)0)->f)
#define INTTYPE(f) _Generic(((Config *)0)->f, int: T_INT, long: T_LONG, uint64_t: T_U64)

#define K_NUM(p, f, d, lo, hi, fl, m) \
    { .path = p, .type = T_NUM, .def = d, .min = lo, .max = hi, .flags = fl, FIELD(f), .meaning = m }
#define K_INT(p, f, d, lo, hi, ch, m) \
    { .path = p, .type = INTTYPE(f), .def = d, .min = lo, .max = hi, .choices = ch, FIELD(f), .meaning = m }
#define K_BOOL(p, f, d, m) { .path = p, .type = T_BOOL, .def = d, FIELD(f), .meaning = m }
/* an enum field: names[] and values[] (or NULL: the value is the index); .min is 0, written so that
 * a field that is not int-sized fails to compile (a negative array size) */
#define K_CHOICE(p, f, d, nm, vals, m)                                                                       \
    { .path = p, .type = T_CHOICE, .def = d, .names = nm, .values = vals, .n_names = N_OF(nm), FIELD(f),    \
      .min = sizeof(char[sizeof(((Config *)0)->f) == sizeof(int) ? 1 : -1]) - 1, .meaning = m }
#define K_PATH(p, f, dd, m) { .path = p, .type = T_PATH, .def = "\"\"", .doc_def = dd, FIELD(f), .meaning = m }
#define K_INTS(p, t, f, n, d, mn, lo, hi, m)                                                     \
    { .path = p, .type = t, .def = d, .min = lo, .max = hi, .min_n = mn, FIELD(f),                \
      .off_n = offsetof(Config, n), .meaning = m }
#define K_STRS(p, f, n, d, m) \
    { .path = p, .type = T_STRS, .def = d, FIELD(f), .off_n = offsetof(Config, n), .meaning = m }
#define K_FIXED(p, t, f, d, sh, m) \
    { .path = p, .type = t, .def = d, .min = 0, .max = NOMAX, .shape = sh, FIELD(f), .meaning = m }

const KeyDef config_keys[] = {
    /* data */
    K_PATH("data.frames", frames, "(required)",
           "frames folder (one sub-folder per recording), or a folder or file of CSV / .npy recordings; "
           "relative to the config file's folder"),
    K_PATH("data.frames_origin", frames_origin, "`\"\"`",
           "set by framelaw when a run's frames moved (resume or export with --set data.frames=NEW, their "
           "content checked): where data.frames pointed in training; the config digest reads it in place of "
           "data.frames, so the checkpoints still match (docs/results.md)"),
    K_NUM("data.fps", fps, "30", 0, INFINITY, LO_OPEN,
          "frames (samples) per second of the source; the time step is data.stride / data.fps; required for "
          "image frames (they carry no rate)"),
    K_CHOICE("data.gray", gray, "\"bt601\"", gray_choice_names, gray_choice_values, "weights that turn colour frames to gray"),
    K_FIXED("data.crop", T_CROP, crop, "[0, 0, 0, 0]", "[x, y, width, height]",
            "crop in source pixels, before resizing; width 0 = no crop"),
    K_FIXED("data.size", T_SIZE, size, "[0, 0]", "[width, height]",
            "frame size after cropping and resizing (area average); [0, 0] = keep"),
    K_CHOICE("data.scale", scale, "\"unit\"", scale_choice_names, scale_choice_values,
          "pixel scaling: unit = [0, 1]; standardize = zero mean, unit variance per pixel"),
    K_INT("data.stride", stride, "1", 1, NOMAX, NULL, "keep every n-th frame"),
    K_INT("data.store_bits", store_bits, "8", 8, 16, "8|16", "bits per pixel in the frame store"),
    K_PATH("data.store", store, "`\"\"`",
           "frame store file (a cache of the preprocessed frames); relative to the config file's folder; \"\" = "
           "DIR/.framelaw-store beside the frames, or in $XDG_CACHE_HOME/framelaw (~/.cache/framelaw) when their "
           "folder is not writable (docs/frames.md)"),
    K_CHOICE("data.derivative.method", derivative, "\"auto\"", deriv_method_names, NULL,
          "how x' and x'' (or z', z'') are formed from neighbouring frames: central differences, Savitzky-Golay "
          "(window, degree), or auto: the Savitzky-Golay stencil of least noise whose response stays within 2% "
          "of exact at the rms frequency of the training frames' leading principal components (window up to 13)"),
    K_INT("data.derivative.window", sg_window, "7", 3, STENCIL_MAX_LEN, NULL,
          "Savitzky-Golay window in frames (odd, > degree)"),
    K_INT("data.derivative.degree", sg_degree, "3", 2, STENCIL_MAX_LEN - 1, NULL,
          "Savitzky-Golay polynomial degree"),
    K_STRS("data.validation.recordings", val_names, n_val_names, "[]",
           "names of the recordings held out for validation and forecasts"),
    K_INT("data.validation.last", val_last, "1", 0, NOMAX, NULL,
          "when no names are given: hold out the last N recordings (0 = no validation)"),
    /* model */
    K_INT("model.latent", latent, "1", 1, LIB_MAX_VARS, NULL, "latent variables z1..zk"),
    K_INT("model.order", order, "2", 1, 2, "1|2", "order of the latent ODE: 1 (dz/dt) or 2 (d2z/dt2)"),
    K_INTS("model.encoder", T_INTS, encoder, n_encoder, "[64, 32]", 0, 1, NOMAX,
           "widths of the encoder's hidden layers (model.map linear turns the default into [])"),
    K_INTS("model.decoder", T_INTS_NULL, decoder, n_decoder, "null", 0, 1, NOMAX,
           "widths of the decoder's hidden layers; null = the encoder's reversed"),
    K_CHOICE("model.activation", activation, "\"sigmoid\"", act_choice_names, act_choice_values,
          "activation of the hidden layers (the output layers are linear)"),
    K_CHOICE("model.map", map, "\"auto\"", frames_map_names, NULL,
          "how the frames depend on the state; it sets model.encoder, model.init and model.derivatives "
          "where they hold their defaults: linear (the frames an affine image of the state, "
          "as a field that is a sum of a few patterns): [], pca, frames; curved (a moving or turning object): "
          "the defaults listed; auto: linear when the training frames' leading model.latent principal "
          "directions carry at least 90% of their variance, else curved (train stores the choice in the run's "
          "config.json)"),
    K_CHOICE("model.init", init, "\"isomap\"", model_init_names, NULL,
          "glorot: uniform weights, zero biases; pca: in addition, the encoder's first layer projects on the "
          "leading principal directions of the training frames (whitened) and the decoder starts at the mean "
          "frame; isomap: pca, then the encoder is fitted to an Isomap embedding of the training frames (and "
          "the decoder to its inverse), so that the latent starts along the frames' manifold (model.map linear "
          "turns the default into pca)"),
    K_CHOICE("model.derivatives", derivatives, "\"latent\"", latent_derivs_names, NULL,
          "frames: z' (and z'') by carrying the frames' stencil derivatives x' (x'') through the encoder; "
          "latent: by the same stencil (data.derivative) applied to the codes of the frames around each "
          "sample, robust when the picture changes a lot from one frame to the next (loss.dx is then not "
          "used; model.map linear turns the default into frames)"),
    K_INT("model.init_epochs", init_epochs, "200", 1, NOMAX, NULL,
          "isomap: epochs over the embedded frames that fit the encoder and decoder to the embedding"),
    K_INT("model.init_frames", init_frames, "2000", 16, 20000, NULL,
          "isomap: training frames embedded (evenly spaced; the cost grows as the square)"),
    /* library */
    K_INT("library.degree", lib_degree, "3", 0, LIB_MAX_DEGREE, NULL,
          "highest total degree of the polynomial terms"),
    K_BOOL("library.constant", lib_constant, "true", "include the constant term"),
    K_BOOL("library.trig", lib_trig, "true", "include sin(k*z) and cos(k*z) terms"),
    K_BOOL("library.trig_velocity", lib_trig_velocity, "true",
           "second order: sin and cos of the velocities dz/dt too"),
    K_INTS("library.multipliers", T_INTS, lib_freq, n_lib_freq, "[1]", 1, 1, 100,
           "the multipliers k of the trigonometric terms"),
    K_STRS("library.include", lib_include, n_lib_include, "[]",
           "extra terms by name, e.g. \"z1*dz1/dt\", \"sin(2*z1)\""),
    K_STRS("library.exclude", lib_exclude, n_lib_exclude, "[]", "terms removed by name, e.g. \"1\""),
    /* loss */
    K_NUM("loss.reconstruction", w_rec, "1", 0, INFINITY, 0, "weight of |x - x_hat|^2"),
    K_NUM("loss.dx", w_dx, "0.1", 0, INFINITY, 0,
          "weight of |x' - x_hat'|^2 (first order) or |x'' - x_hat''|^2 (second order)"),
    K_NUM("loss.dz", w_dz, "1", 0, INFINITY, 0,
          "weight of |z' - z'_pred|^2 (first order) or |z'' - z''_pred|^2 (second order)"),
    K_NUM("loss.l1", w_l1, "0.0001", 0, INFINITY, 0,
          "weight of the L1 norm of the coefficients (0 during refinement)"),
    K_BOOL("loss.normalize", loss_normalize, "true",
           "divide |x - x_hat|^2 by the variance of x and the dx term by the mean square of x' (or x'') "
           "over the training set, and |z' - z'_pred|^2 by the batch's mean of z'^2 (z''^2), so that the "
           "weights compare relative errors"),
    /* optimizer */
    K_NUM("optimizer.lr", lr, "0.001", 0, INFINITY, LO_OPEN,
          "Adam learning rate (with train.run_length R > 1 the steps use it over sqrt(R))"),
    K_NUM("optimizer.beta1", beta1, "0.9", 0, 1, HI_OPEN, "Adam decay of the first moment"),
    K_NUM("optimizer.beta2", beta2, "0.999", 0, 1, HI_OPEN, "Adam decay of the second moment"),
    K_NUM("optimizer.eps", eps, "1e-08", 0, INFINITY, LO_OPEN, "Adam epsilon"),
    K_CHOICE("optimizer.schedule", schedule, "\"constant\"", lr_schedule_names, NULL,
          "learning-rate schedule: constant; step (times decay_factor every decay_every epochs); "
          "cosine (from lr down to lr_min over the run)"),
    K_INT("optimizer.decay_every", sched_every, "1000", 1, NOMAX, NULL, "step schedule: epochs between decays"),
    K_NUM("optimizer.decay_factor", sched_factor, "0.5", 0, 1, LO_OPEN, "step schedule: multiplier per decay"),
    K_NUM("optimizer.lr_min", lr_min, "0", 0, INFINITY, 0, "cosine schedule: the final learning rate"),
    /* train */
    K_INT("train.batch", batch, "256", 1, 1 << 20, NULL, "samples per mini-batch"),
    K_INT("train.run_length", run_length, "16", 1, 1 << 20, NULL,
          "an epoch deals runs of this many consecutive training samples (a shuffle of runs); the samples "
          "of a batch then share their stencil's frames, and each distinct frame goes through the "
          "encoder's first layer once a step (with model.derivatives latent through the whole encoder, "
          "as it does with single samples too; with frames the tangents' products are the stencil over "
          "the frames' products); a batch then holds about R times fewer independent stretches of the "
          "motion, and the steps' learning rate is optimizer.lr / sqrt(R) (docs/performance.md); "
          "1 = single samples"),
    K_INT("train.epochs", epochs, "3000", 1, NOMAX, NULL, "epochs in all, refinement included"),
    K_INT("train.seed", seed, "1", 0, INT_EXACT, NULL,
          "seed of the random generator (initialisation, shuffling)"),
    K_INT("train.threads", threads, "0", 0, 1024, NULL, "worker threads; 0 = all cores"),
    K_INT("train.validate_every", validate_every, "10", 1, NOMAX, NULL, "epochs between validation passes"),
    K_NUM("train.memory_budget", mem_budget, "0", 0, INFINITY, 0,
          "GiB a run may hold in memory, estimated before training (frames too large are refused with the "
          "figures); 0 = half of the physical memory"),
    K_INT("train.warmup_epochs", warmup_epochs, "0", 0, NOMAX, NULL,
          "first epochs train the autoencoder alone: the decoder takes the encoder's z' (z''), no dz and "
          "no L1 term"),
    K_BOOL("train.warmup_fit", warmup_fit, "true",
           "at the end of the warm-up, set Xi by sequentially thresholded least squares on the encoded "
           "training set (threshold.value)"),
    /* threshold */
    K_NUM("threshold.value", threshold, "0.02", 0, INFINITY, 0,
          "coefficients with |Xi| below this are set to zero and masked out for good"),
    K_CHOICE("threshold.measure", threshold_measure, "\"contribution\"", thresh_measure_names, NULL,
          "what threshold.value and loss.l1 measure: coefficient = |Xi| in the units of the latent and of "
          "time; contribution = |Xi| rms(term) / rms(z' or z'') over the training set (the L1 term over the "
          "batch), the share of the target a term carries, the same in any units"),
    K_CHOICE("threshold.select", threshold_select, "\"every\"", thresh_select_names, NULL,
          "first: the law is selected once, on the latent of the start-up before joint training; every: then "
          "again at every thresholding pass, in place of pruning. Selection: candidate laws from thresholded "
          "least squares on the encoded training set (nested libraries, a grid of contribution thresholds) "
          "are integrated over segments of the training recordings and scored by forecast error and number "
          "of terms (docs/training.md)"),
    {.path = "threshold.every", .type = INTTYPE(threshold_every), .def = "500", .min = 1, .max = NOMAX,
     .doc_def = "train.epochs / 6 (500)", FIELD(threshold_every),
     .meaning = "epochs between thresholding passes; unless given, a sixth of train.epochs (rounded, at least 1)"},
    {.path = "threshold.refine_epochs", .type = INTTYPE(refine_epochs), .def = "600", .min = 0, .max = NOMAX,
     .doc_def = "train.epochs / 5 (600)", FIELD(refine_epochs),
     .meaning = "the last epochs: mask fixed, no L1, no thresholding; < train.epochs; unless given, a fifth of "
                "train.epochs (rounded)"},
    /* checkpoint */
    K_INT("checkpoint.every", ckpt_every, "100", 1, NOMAX, NULL, "epochs between checkpoints"),
    K_INT("checkpoint.keep", ckpt_keep, "3", 1, NOMAX, NULL,
          "periodic checkpoints kept (the best one is kept besides)"),
    /* forecast */
    K_NUM("forecast.bound", fc_bound, "0.1", 0, INFINITY, LO_OPEN,
          "relative error at which a forecast counts as lost (its time is reported)"),
    K_CHOICE("forecast.method", fc_method, "\"dopri5\"", ode_choice_names, ode_choice_values, "integrator of the learned model"),
    K_NUM("forecast.tolerance", fc_tol, "1e-08", 0, INFINITY, LO_OPEN,
          "relative tolerance of dopri5 (absolute: 1e-3 of it); rk4 takes 8 steps per frame"),
    /* ensemble */
    K_INT("ensemble.members", ens_members, "100", 1, ENSEMBLE_MAX_MEMBERS, NULL,
          "fits of the ensemble by bagging on the encoded training set after training (docs/ensembles.md)"),
    K_CHOICE("ensemble.method", ens_method, "\"auto\"", ensemble_fit_names, NULL,
          "how each member is fitted: selection = the law's forecast-scored selection bagged over its forecast "
          "segments (members choose among ensemble.candidates laws); thresholding = thresholded least squares "
          "at threshold.value on blocks of samples; auto = selection when threshold.select is not none and "
          "library bagging is off, else thresholding"),
    K_INT("ensemble.candidates", ens_candidates, "16", 1, 1000, NULL,
          "ensemble.method selection: the laws each member chooses among (the best of the selection's "
          "candidates on all the training data, and the trained law)"),
    K_INT("ensemble.block", ens_block, "0", 0, NOMAX, NULL,
          "samples per resampled block of consecutive samples; 0 = automatic: twice the derivative "
          "stencil's window, at least 10"),
    K_NUM("ensemble.block_seconds", ens_block_seconds, "0", 0, INFINITY, 0,
          "when > 0: the block length in seconds (rounded to whole samples, at least 1) instead of "
          "ensemble.block"),
    K_BOOL("ensemble.library_bagging", ens_bagging, "false",
           "each member also drops a random fraction of the library's terms"),
    K_NUM("ensemble.drop_fraction", ens_drop, "0.2", 0, 1, HI_OPEN,
          "library bagging: the fraction of the terms each member drops"),
    K_NUM("ensemble.inclusion", ens_inclusion, "0.5", 0, 1, LO_OPEN,
          "the ensemble law keeps the terms whose inclusion probability is at or above this"),
    K_INT("ensemble.band_members", ens_band_members, "100", 1, ENSEMBLE_MAX_MEMBERS, NULL,
          "members whose laws are integrated for the forecast bands (the first ones; at most "
          "ensemble.members)"),
    /* canonical */
    K_NUM("canonical.tolerance", canon_tolerance, "0.05", 0, INFINITY, 0,
          "the canonical law's fit error may exceed the learned law's by this fraction, equation by equation "
          "(docs/canonical.md)"),
    K_NUM("canonical.cond_max", canon_cond_max, "1000", 1, INFINITY, 0,
          "bound on the condition number of the map to canonical coordinates, between standardised "
          "coordinates; a map beyond it is never reported"),
    K_CHOICE("canonical.choose", canon_choose, "\"auto\"", canon_choose_names, NULL,
          "how the canonical law's terms are chosen: fit = the fewest terms within canonical.tolerance of the fit "
          "error; forecast = then leave out terms (and refit the sine frequencies, and with one latent variable "
          "a cubic warp of the map) by the selection's forecast score in the canonical coordinates; auto = "
          "forecast with one latent variable, fit with several (docs/canonical.md)"),
    /* output */
    K_PATH("output", output, "`runs/<config file stem>`",
           "run directory, relative to the current directory"),
};
const int config_n_keys = (int)(sizeof config_keys / sizeof config_keys[0]);

const char *const config_resume_safe_keys[] = {
    "train.epochs", "train.threads", "train.validate_every", "checkpoint.every", "checkpoint.keep",
    "output", "forecast.bound", "forecast.method", "forecast.tolerance", "ensemble.members", "ensemble.method",
    "ensemble.candidates", "ensemble.block",
    "ensemble.block_seconds", "ensemble.library_bagging", "ensemble.drop_fraction", "ensemble.inclusion",
    "ensemble.band_members", "canonical.tolerance", "canonical.cond_max", "canonical.choose", "train.memory_budget", "data.store", NULL,
};

void config_safe_keys_text(char *buf, size_t n) {
    size_t k = 0;
    if (n) buf[0] = 0;
    for (int i = 0; config_resume_safe_keys[i] && k < n; i++) {
        int w = snprintf(buf + k, n - k, "%s%s", i ? ", " : "", config_resume_safe_keys[i]);
        if (w < 0) break;
        k += (size_t)w;
    }
}

const char *config_key_path(int i) { return i >= 0 && i < config_n_keys ? config_keys[i].path : NULL; }

const char *config_choice(const char *path, int i, int *value) {
    const KeyDef *k = config_find_key(path);
    if (!k || k->type != T_CHOICE || i < 0 || i >= k->n_names) return NULL;
    if (value) *value = config_choice_value(k, i);
    return k->names[i];
}

const KeyDef *config_find_key(const char *path) {
    for (int i = 0; i < config_n_keys; i++)
        if (!strcmp(config_keys[i].path, path)) return &config_keys[i];
    return NULL;
}

/* 1 when path is a section: some key path starts with "path.". */
int config_is_section(const char *path) {
    size_t n = strlen(path);
    for (int i = 0; i < config_n_keys; i++)
        if (!strncmp(config_keys[i].path, path, n) && config_keys[i].path[n] == '.') return 1;
    return 0;
}

int config_is_resume_safe(const char *path) {
    for (int i = 0; config_resume_safe_keys[i]; i++)
        if (!strcmp(config_resume_safe_keys[i], path)) return 1;
    return 0;
}

/* ---- rules as text (messages and docs) ---------------------------------------------------- */

/* "bt601|bt709" -> "bt601, bt709" */
static void choices_text(char *b, size_t n, const char *choices) {
    size_t j = 0;
    for (const char *p = choices; *p && j + 3 < n; p++) {
        if (*p == '|') b[j++] = ',', b[j++] = ' ';
        else b[j++] = *p;
    }
    b[j] = 0;
}

/* The largest value an integer field can hold exactly. */
double config_int_limit(KeyType t) { return t == T_INT || t == T_BOOL ? (double)INT_MAX : INT_EXACT; }

/* "a positive integer", "an integer >= 0", "an integer from 1 to 1048576", "one of 8, 16" */
void config_int_rule(char *b, size_t n, double lo, double hi, const char *choices) {
    if (choices) {
        char c[256];
        choices_text(c, sizeof c, choices);
        snprintf(b, n, "one of %s", c);
    } else if (isinf(hi)) {
        if (lo == 1) snprintf(b, n, "a positive integer");
        else snprintf(b, n, "an integer >= %.0f", lo);
    } else {
        snprintf(b, n, "an integer from %.0f to %.0f", lo, hi);
    }
}

/* "a number > 0", "a number >= 0 and < 1" */
static void num_rule(char *b, size_t n, const KeyDef *k) {
    int o = snprintf(b, n, "a number");
    if (!isinf(k->min))
        o += snprintf(b + o, n - (size_t)o, " %s %g", k->flags & LO_OPEN ? ">" : ">=", k->min);
    if (!isinf(k->max))
        snprintf(b + o, n - (size_t)o, "%s %s %g", isinf(k->min) ? "" : " and", k->flags & HI_OPEN ? "<" : "<=",
                 k->max);
}

/* The whole rule of a key, as it follows "must be". */
void config_key_rule(char *b, size_t n, const KeyDef *k) {
    char e[160], c[256];
    size_t cap = k->type == T_STRS ? k->size / CFG_NAME_MAX : k->size / sizeof(int);
    switch (k->type) {
    case T_NUM: num_rule(b, n, k); break;
    case T_INT: case T_LONG: case T_U64: config_int_rule(b, n, k->min, k->max, k->choices); break;
    case T_BOOL: snprintf(b, n, "true or false"); break;
    case T_CHOICE: {
        size_t j = 0;
        for (int i = 0; i < k->n_names && j < sizeof c; i++) {
            int w = snprintf(c + j, sizeof c - j, "%s%s", i ? ", " : "", k->names[i]);
            if (w < 0) break;
            j += (size_t)w;
        }
        snprintf(b, n, "one of %s", c);
        break;
    }
    case T_PATH: snprintf(b, n, "a path (a string of at most %zu bytes)", k->size - 1); break;
    case T_INTS: case T_INTS_NULL:
        config_int_rule(e, sizeof e, k->min, k->max, NULL);
        /* "a positive integer" -> "positive integers", "an integer from" -> "integers from" */
        if (!strncmp(e, "a positive integer", 18)) snprintf(e, sizeof e, "positive integers");
        else if (!strncmp(e, "an integer", 10)) memmove(e, "integers", 8), memmove(e + 8, e + 10, strlen(e + 10) + 1);
        if (k->min_n > 0)
            snprintf(b, n, "%sa list of %d to %zu %s", k->type == T_INTS_NULL ? "null or " : "", k->min_n, cap, e);
        else
            snprintf(b, n, "%sa list of up to %zu %s", k->type == T_INTS_NULL ? "null or " : "", cap, e);
        break;
    case T_STRS: snprintf(b, n, "a list of up to %zu names (non-empty strings)", cap); break;
    case T_CROP: case T_SIZE: snprintf(b, n, "%s, integers >= 0", k->shape); break;
    case T_COUNT: b[0] = 0; break;
    }
}

/* ---- docs --------------------------------------------------------------------------------- */

/* s with '|' escaped for a Markdown table cell. */
static void md_cell(char *b, size_t n, const char *s) {
    size_t j = 0;
    for (; *s && j + 3 < n; s++) {
        if (*s == '|') b[j++] = '\\';
        b[j++] = *s;
    }
    b[j] = 0;
}

char *config_keys_markdown(void) {
    size_t cap = 64 * 1024, len = 0;
    char *out = malloc(cap);
    NN_CHECK(out, "config_keys_markdown: out of memory");
    len += (size_t)snprintf(out, cap, "| key | type | default | allowed | meaning |\n|---|---|---|---|---|\n");
    for (int i = 0; i < config_n_keys; i++) {
        const KeyDef *k = &config_keys[i];
        char rule[400], def[160], meaning[1024];
        config_key_rule(rule, sizeof rule, k);
        if (k->doc_def) snprintf(def, sizeof def, "%s", k->doc_def);
        else snprintf(def, sizeof def, "`%s`", k->def);
        md_cell(meaning, sizeof meaning, k->meaning);
        int n = snprintf(out + len, cap - len, "| `%s` | %s | %s | %s | %s%s |\n", k->path, config_type_names[k->type], def,
                         rule, meaning, config_is_resume_safe(k->path) ? " (may change on resume)" : "");
        NN_CHECK(n > 0 && (size_t)n < cap - len, "config_keys_markdown: table larger than %zu bytes", cap);
        len += (size_t)n;
    }
    return out;
}
