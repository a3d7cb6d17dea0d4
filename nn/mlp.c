/* nn/mlp.c: encoder / decoder stacks of dense layers with tangents; Glorot initialisation. */
#include "nn/mlp.h"

#include <math.h>
#include <stdio.h>

#include "nn/core.h"

void mlp_declare(Mlp *m, ParamSet *ps, const char *prefix, const int *widths, int n_layers, ActId act) {
    NN_CHECK(n_layers >= 1 && n_layers <= MLP_MAX_LAYERS, "mlp %s: %d layers (1..%d)", prefix, n_layers,
             MLP_MAX_LAYERS);
    m->n_layers = n_layers;
    m->act = act;
    for (int l = 0; l <= n_layers; l++) m->widths[l] = widths[l];
    char name[PARAM_NAME_MAX];
    for (int l = 0; l < n_layers; l++) {
        snprintf(name, sizeof name, "%s.W%d", prefix, l);
        m->W[l] = params_add(ps, name, widths[l], widths[l + 1]);
        snprintf(name, sizeof name, "%s.b%d", prefix, l);
        m->b[l] = params_add(ps, name, 1, widths[l + 1]);
    }
}

void init_uniform(Mat w, float r, Rng *rng) {
    long n = mat_size(w);
    for (long i = 0; i < n; i++) w.d[i] = (float)((2.0 * rng_uniform(rng) - 1.0) * r);
}

void mlp_init_glorot(const Mlp *m, ParamSet *ps, Rng *rng) {
    for (int l = 0; l < m->n_layers; l++) {
        float r = sqrtf(6.0f / (float)(m->widths[l] + m->widths[l + 1]));
        init_uniform(params_val(ps, m->W[l]), r, rng);
        Mat b = params_val(ps, m->b[l]);
        for (long i = 0; i < mat_size(b); i++) b.d[i] = 0.0f;
    }
}

Node *mlp_forward(Tape *t, const Mlp *m, ParamSet *ps, Node *x, int k) {
    Node *h = mlp_forward_hidden(t, m, ps, x, k, m->n_layers - 1);
    int l = m->n_layers - 1;
    return nn_dense_t(t, h, nn_param(t, ps, m->W[l]), nn_param(t, ps, m->b[l]), k, ACT_NONE);
}

Node *mlp_forward_hidden(Tape *t, const Mlp *m, ParamSet *ps, Node *x, int k, int n) {
    NN_CHECK(x->val.cols == m->widths[0], "mlp: input has %d columns, the network takes %d", x->val.cols,
             m->widths[0]);
    NN_CHECK(n >= 0 && n < m->n_layers, "mlp: %d hidden layers asked of %d layers", n, m->n_layers);
    Node *h = x;
    for (int l = 0; l < n; l++) h = nn_dense_t(t, h, nn_param(t, ps, m->W[l]), nn_param(t, ps, m->b[l]), k, m->act);
    return h;
}
