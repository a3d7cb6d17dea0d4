/* sparse/model.h: the joint model (encoder, decoder, sparse latent dynamics) and its loss on one
 * batch given as arrays. Pure computation: no files, no time, no terminal.
 *
 * A batch is stacked as in nn/: X (k B, n_in) holds x in rows [0, B), x' in [B, 2B) and, for a
 * second-order model, x'' in [2B, 3B); k = order + 1.
 *
 * First order (s = z):
 *   (z, z') = enc(x, x');  z'_pred = Theta(z) (Xi * M);  (x_hat, x_hat') = dec(z, z'_pred)
 *   L = w_rec |x - x_hat|^2 + w_dx |x' - x_hat'|^2 + w_dz |z' - z'_pred|^2 + w_l1 |Xi * M|_1
 * Second order (s = (z, z')):
 *   (z, z', z'') = enc(x, x', x'');  z''_pred = Theta(z, z') (Xi * M)
 *   (x_hat, x_hat', x_hat'') = dec(z, z', z''_pred)
 *   L = w_rec |x - x_hat|^2 + w_dx |x'' - x_hat''|^2 + w_dz |z'' - z''_pred|^2 + w_l1 |Xi * M|_1
 * Every squared term is a mean over the batch and the components (so the weights compare terms of
 * unit size); the L1 term is a plain sum over the coefficients.
 * With m->dz_relative the latent term is divided by the batch's mean of z'^2 (z''^2), gradient
 * included: scale-free, like the normalised reconstruction terms of io/run/train.c (loss.normalize).
 * Warm-up (m->warmup): the decoder takes the encoder's z' (z'') in place of the model's, so that with
 * the dz and L1 weights at 0 the autoencoder and its derivatives train alone. */
#ifndef SPARSE_MODEL_H
#define SPARSE_MODEL_H

#include <stdint.h>

#include "nn/mlp.h"
#include "nn/params.h"
#include "nn/rng.h"
#include "nn/tape.h"
#include "sparse/library.h"
#include "sparse/stencil.h"

typedef struct {
    float rec, dx, dz, l1;      /* loss weights */
} LossWeights;

typedef struct {
    double total, rec, dx, dz, l1;  /* l1 is |Xi * M|_1 before weighting; the others likewise */
} LossParts;

typedef struct {
    int n_in, n_latent, order;
    Mlp enc, dec;
    Library lib;
    int xi;                     /* ParamSet index of Xi (n_terms, n_latent) */
    uint8_t *mask;              /* (n_terms, n_latent), 1 = active */
    int warmup;                 /* 1: the decoder takes the encoder's z' (z'') instead of the model's
                                 * (set by the epoch loop during the warm-up) */
    int dz_relative;            /* 1: the latent term is |z' - z'_pred|^2 / |z'|^2 (z'' for second order),
                                 * a relative error that a shrinking or growing latent scale cannot game */
    float *maskf;               /* (n_terms, n_latent) the same as floats, for the tape */
    int l1_contribution;        /* 1: the L1 term weighs each coefficient by its term's contribution
                                 * scale, |Xi_ti| rms(Theta_t) / rms(target_i) over the batch (a constant
                                 * of the step, no gradient), so that it does not depend on the units of
                                 * the latent or of time; 0: the plain sum |Xi * M|_1 */
    float *l1w;                 /* (n_terms, n_latent) work: the weights of the last batch */
    int win;                    /* 0: the input holds x, x' (, x'') and the encoder carries the derivatives
                                 * by tangents; > 0: the input holds the win frames of a derivative stencil
                                 * around each sample, and z', z'' are the stencil applied to their codes */
    float lw1[STENCIL_MAX_LEN], lw2[STENCIL_MAX_LEN]; /* win > 0: the stencil's weights / dt, / dt^2 */
    int fwin;                   /* win == 0: the frames' derivative stencil's length (0: not set), and */
    float fw1[STENCIL_MAX_LEN], fw2[STENCIL_MAX_LEN]; /* its weights / dt, / dt^2 (model_set_frame_stencil) */
} Model;

typedef struct {
    int n_in, n_latent, order;
    int n_enc;                  /* hidden layers of the encoder */
    int enc_widths[MLP_MAX_LAYERS];
    int n_dec;                  /* hidden layers of the decoder; 0 with dec_mirror */
    int dec_widths[MLP_MAX_LAYERS];
    int dec_mirror;             /* 1: decoder hidden widths are the encoder's reversed */
    ActId act;
    LibrarySpec lib;
} ModelSpec;

/* Derivatives in latent space (win > 0) from stencil s at sample spacing dt; s = NULL: by tangents
 * of the frames' derivatives (the default). With a window, model_loss and model_encode (k > 1) take
 * X as win blocks of B rows, block j the frames at offset j - m of each sample; the decoder term
 * is the reconstruction of the centre frame alone (w->dx is not used). */
void model_set_window(Model *m, const Stencil *s, double dt);

/* Derivatives by tangents (win == 0): the stencil s (at sample spacing dt) that formed the frames'
 * x' and x'', for model_loss_frames_shared. */
void model_set_frame_stencil(Model *m, const Stencil *s, double dt);

/* Declare the model's parameters in ps (call params_alloc after). ST_INPUT for a bad library. */
int model_init(Model *m, ParamSet *ps, const ModelSpec *spec, Status *st);
void model_free(Model *m);
/* Glorot weights, zero biases, Xi = 0 (after params_alloc). */
void model_init_params(Model *m, ParamSet *ps, Rng *rng);

/* Record the loss of one batch on the tape; returns the scalar loss node and fills parts. The
 * caller runs tape_backward for training, or only reads the value for validation. */
Node *model_loss(Tape *t, const Model *m, ParamSet *ps, float *X, int B, const LossWeights *w,
                 LossParts *parts);

/* model_loss with derivatives in latent space (win > 0) when the batch's samples share frames:
 * X (U, n_in) holds each distinct frame once and map (win B) places them, map[j B + b] the row of X
 * holding the frame at offset j - m of sample b. Each frame goes through the encoder once and its
 * code's gradient is the sum over the places it fills. When rows 0..B-1 are the centre frames in
 * order (map[m B + b] = b, as dataset_gather_window_shared lays them out), the reconstruction reads
 * them in place; any other map costs a copy. The same loss and gradients as model_loss on the
 * expanded batch, to float rounding. */
Node *model_loss_shared(Tape *t, const Model *m, ParamSet *ps, float *X, int U, const int *map, int B,
                        const LossWeights *w, LossParts *parts);

/* model_loss with derivatives by tangents (win == 0, model_set_frame_stencil) when the batch's
 * samples share frames: X (k B, n_in) as model_loss takes it (the targets of the reconstruction
 * terms), F (U, n_in) each distinct frame of the samples' stencil windows once and map (fwin B)
 * placing them. The encoder's first layer takes the frames' products F W once and forms the
 * tangents' products x' W, x'' W by the stencil over them (nn_dense_t_map). The same loss and
 * gradients as model_loss on X, to float rounding. */
Node *model_loss_frames_shared(Tape *t, const Model *m, ParamSet *ps, float *X, float *F, int U, const int *map,
                               int B, const LossWeights *w, LossParts *parts);

/* Encode only: z (k B, n_latent) rows copied to out; returns out. For trajectories and forecasts. */
void model_encode(Tape *t, const Model *m, ParamSet *ps, float *X, int B, int k, float *out);

/* Zero the masked coefficients of Xi and their Adam moments (after each optimiser step). */
void model_apply_mask(Model *m, ParamSet *ps);
/* Sequential thresholding: mask out |Xi| < threshold for good. Returns the active count after. */
long model_threshold(Model *m, ParamSet *ps, float threshold);
/* The same on contributions: mask out |Xi_ti| scale_ti < threshold, scale (n_terms, n_latent) =
 * rms(Theta_t) / rms(target_i) over the training set (model_term_scales). */
long model_threshold_scaled(Model *m, ParamSet *ps, const double *scale, double threshold);

/* Contribution scales from sums over samples: scale (n_terms, d) = sqrt(theta2_t / target2_i), with
 * theta2 (n_terms) the sum of Theta_t^2 and target2 (d) that of the target (z' or z'') squared. */
void model_term_scales(const Model *m, const double *theta2, const double *target2, double *scale);
/* Accumulate theta2 (n_terms) and target2 (d) over a batch X (as model_loss takes it, B samples)
 * encoded by the model. t is reset by the call. */
void model_accumulate_scales(Tape *t, const Model *m, ParamSet *ps, float *X, int B, double *theta2,
                             double *target2);
long model_active(const Model *m);

#endif
