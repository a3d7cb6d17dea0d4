/* nn/mlp.h: a stack of dense layers with tangents (an encoder or a decoder), initialisation.
 *
 * widths[0] is the input size, widths[n_layers] the output size. Hidden layers use `act`, the last
 * layer is linear. Parameters are named "<prefix>.W<l>" and "<prefix>.b<l>". */
#ifndef NN_MLP_H
#define NN_MLP_H

#include "nn/params.h"
#include "nn/rng.h"
#include "nn/tape.h"

#define MLP_MAX_LAYERS 16

typedef struct {
    int n_layers;
    int widths[MLP_MAX_LAYERS + 1];
    ActId act;
    int W[MLP_MAX_LAYERS], b[MLP_MAX_LAYERS];   /* ParamSet indices */
} Mlp;

/* Declare the parameters in ps (before params_alloc). */
void mlp_declare(Mlp *m, ParamSet *ps, const char *prefix, const int *widths, int n_layers, ActId act);
/* Glorot (Xavier) uniform weights, zero biases ("Understanding the difficulty of training deep
 * feedforward neural networks", AISTATS 2010, eq. 16): W ~ U(-r, r), r = sqrt(6 / (fan_in + fan_out)). */
void mlp_init_glorot(const Mlp *m, ParamSet *ps, Rng *rng);
/* x (k*B, widths[0]) -> (k*B, widths[n_layers]). */
Node *mlp_forward(Tape *t, const Mlp *m, ParamSet *ps, Node *x, int k);
/* The first n layers only, every one with the hidden activation: x -> (k*B, widths[n]); x itself
 * for n = 0. With n = n_layers - 1 it gives the input of the last (linear) layer, for an op that
 * fuses that layer with what follows (nn_dense_sq_err). */
Node *mlp_forward_hidden(Tape *t, const Mlp *m, ParamSet *ps, Node *x, int k, int n);

/* Fill a tensor with U(-r, r). */
void init_uniform(Mat w, float r, Rng *rng);

#endif
