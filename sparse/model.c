/* sparse/model.c: the joint model and its loss (see model.h for the math). */
#include "sparse/model.h"

#include <math.h>
#include <string.h>

#include "nn/core.h"
#include "sparse/coef.h"

int model_init(Model *m, ParamSet *ps, const ModelSpec *sp, Status *st) {
    memset(m, 0, sizeof *m);
    m->n_in = sp->n_in;
    m->n_latent = sp->n_latent;
    m->order = sp->order;
    LibrarySpec ls = sp->lib;
    ls.n_latent = sp->n_latent;
    ls.order = sp->order;
    int rc = library_init(&m->lib, &ls, st);
    if (rc) return rc;
    int w[MLP_MAX_LAYERS + 1], n = 0;
    w[n++] = sp->n_in;
    for (int i = 0; i < sp->n_enc; i++) w[n++] = sp->enc_widths[i];
    w[n++] = sp->n_latent;
    mlp_declare(&m->enc, ps, "enc", w, n - 1, sp->act);
    n = 0;
    w[n++] = sp->n_latent;
    if (sp->dec_mirror)
        for (int i = sp->n_enc - 1; i >= 0; i--) w[n++] = sp->enc_widths[i];
    else
        for (int i = 0; i < sp->n_dec; i++) w[n++] = sp->dec_widths[i];
    w[n++] = sp->n_in;
    mlp_declare(&m->dec, ps, "dec", w, n - 1, sp->act);
    m->xi = params_add(ps, "xi", m->lib.n_terms, sp->n_latent);
    long nc = (long)m->lib.n_terms * sp->n_latent;
    m->mask = nn_alloc((size_t)nc);
    m->maskf = nn_alloc((size_t)nc * sizeof(float));
    m->l1w = nn_alloc((size_t)nc * sizeof(float));
    memset(m->mask, 1, (size_t)nc);
    for (long i = 0; i < nc; i++) m->maskf[i] = 1.0f;
    return 0;
}

void model_free(Model *m) {
    library_free(&m->lib);
    nn_free(m->mask);
    nn_free(m->maskf);
    nn_free(m->l1w);
    memset(m, 0, sizeof *m);
}

void model_init_params(Model *m, ParamSet *ps, Rng *rng) {
    mlp_init_glorot(&m->enc, ps, rng);
    mlp_init_glorot(&m->dec, ps, rng);
    Mat xi = params_val(ps, m->xi);
    memset(xi.d, 0, (size_t)mat_size(xi) * sizeof(float));
}

/* ratio = a / (b + eps), a and b (1,1): the relative latent error. forward was c = a / (b + eps);
 * so da += g / (b + eps), db += -g a / (b + eps)^2. */
#define RATIO_EPS 1e-12f

static void ratio_backward(Tape *t, Node *c) {
    (void)t;
    Node *a = c->in[0], *b = c->in[1];
    float den = b->val.d[0] + RATIO_EPS, g = c->grad[0];
    if (a->grad) a->grad[0] += g / den;
    if (b->grad) b->grad[0] -= g * a->val.d[0] / (den * den);
}

static const CustomOp RATIO_OP = {"ratio", ratio_backward};

static Node *ratio(Tape *t, Node *a, Node *b) {
    Node *in[2] = {a, b};
    Node *c = nn_custom(t, &RATIO_OP, NULL, in, 2, 1, 1);
    c->val.d[0] = a->val.d[0] / (b->val.d[0] + RATIO_EPS);
    return c;
}

void model_set_window(Model *m, const Stencil *s, double dt) {
    memset(m->lw1, 0, sizeof m->lw1);
    memset(m->lw2, 0, sizeof m->lw2);
    m->win = s ? 2 * s->m + 1 : 0;
    for (int j = 0; j < m->win; j++) m->lw1[j] = (float)(s->w1[j] / dt), m->lw2[j] = (float)(s->w2[j] / (dt * dt));
}

void model_set_frame_stencil(Model *m, const Stencil *s, double dt) {
    memset(m->fw1, 0, sizeof m->fw1);
    memset(m->fw2, 0, sizeof m->fw2);
    m->fwin = s ? 2 * s->m + 1 : 0;
    for (int j = 0; j < m->fwin; j++) m->fw1[j] = (float)(s->w1[j] / dt), m->fw2[j] = (float)(s->w2[j] / (dt * dt));
}

/* window: c (B, d) = sum_j w_j a[j B + b] over the win blocks of a (win B, d); backward
 * da[j B + b] += w_j dc[b]. ctx: the weights (win floats, owned by the model). */
static void window_backward(Tape *t, Node *c) {
    (void)t;
    Node *a = c->in[0];
    if (!a->grad) return;
    const float *w = c->ctx;
    long n = (long)c->val.rows * c->val.cols, win = a->val.rows / c->val.rows;
    for (long j = 0; j < win; j++)
        for (long i = 0; i < n; i++) a->grad[j * n + i] += w[j] * c->grad[i];
}

static const CustomOp WINDOW_OP = {"window", window_backward};

static Node *window(Tape *t, Node *a, const float *w, int win) {
    int B = a->val.rows / win, d = a->val.cols;
    Node *c = nn_custom(t, &WINDOW_OP, (void *)w, &a, 1, B, d);
    long n = (long)B * d;
    for (long i = 0; i < n; i++) {
        float acc = 0;
        for (long j = 0; j < win; j++) acc += w[j] * a->val.d[j * n + i];
        c->val.d[i] = acc;
    }
    return c;
}

/* Frame sharing (model_loss_shared): the codes za (U, d) of the batch's distinct frames and a map
 * (win B) of rows, map[j B + b] the row of the frame at offset j - m of sample b. ctx: a WindowMap. */
typedef struct {
    const float *w; /* (win) the stencil's weights; NULL: the map's rows at offset c (a gather) */
    const int *map; /* (win B) */
    int win;
} WindowMap;

/* c (B, d) = sum_j w_j za[map[j B + b]]; backward dza[map[j B + b]] += w_j dc[b], in the order of
 * j, then b (one thread: the same bits on every run). */
static void window_map_backward(Tape *t, Node *c) {
    (void)t;
    Node *a = c->in[0];
    if (!a->grad) return;
    const WindowMap *wm = c->ctx;
    int B = c->val.rows, d = c->val.cols;
    for (int j = 0; j < wm->win; j++)
        for (int b = 0; b < B; b++) {
            float *ga = a->grad + (long)wm->map[(long)j * B + b] * d;
            const float *gc = c->grad + (long)b * d;
            float wj = wm->w ? wm->w[j] : 1.0f;
            for (int i = 0; i < d; i++) ga[i] += wj * gc[i];
        }
}

static const CustomOp WINDOW_MAP_OP = {"window_map", window_map_backward};

/* The stencil (w != NULL, win terms) or the gather of one offset (w == NULL: map already points at
 * the offset's B entries and win is 1) over the codes za (U, d). */
static Node *window_map(Tape *t, Node *za, const float *w, int win, const int *map, int B) {
    int d = za->val.cols;
    WindowMap *wm = arena_alloc(&t->arena, sizeof *wm);
    *wm = (WindowMap){w, map, win};
    Node *c = nn_custom(t, &WINDOW_MAP_OP, wm, &za, 1, B, d);
    for (int b = 0; b < B; b++)
        for (int i = 0; i < d; i++) {
            float acc = 0;
            for (int j = 0; j < win; j++) acc += (w ? w[j] : 1.0f) * za->val.d[(long)map[(long)j * B + b] * d + i];
            c->val.d[(long)b * d + i] = acc;
        }
    return c;
}

/* The L1 term. With m->l1_contribution each coefficient is weighed by rms(Theta_t) / rms(target_i)
 * over the batch (theta (B, T) and target (B, d) as recorded): a constant of the step. */
static Node *l1_term(Tape *t, const Model *m, Node *xi, const Node *theta, const Node *target) {
    if (!m->l1_contribution) return nn_sum_abs(t, xi);
    int T = m->lib.n_terms, d = m->n_latent, B = theta->val.rows;
    double *tq = arena_alloc(&t->arena, (size_t)(T + d) * sizeof *tq), *yq = tq + T;
    memset(tq, 0, (size_t)(T + d) * sizeof *tq);
    for (int b = 0; b < B; b++) {
        const float *th = theta->val.d + (long)b * T, *y = target->val.d + (long)b * d;
        for (int j = 0; j < T; j++) tq[j] += (double)th[j] * th[j];
        for (int i = 0; i < d; i++) yq[i] += (double)y[i] * y[i];
    }
    for (int j = 0; j < T; j++)
        for (int i = 0; i < d; i++) m->l1w[(long)j * d + i] = (float)(yq[i] > 0 ? sqrt(tq[j] / yq[i]) : 1.0);
    return nn_sum_abs(t, nn_mul(t, xi, nn_input(t, m->l1w, T, d)));
}

static Node *weighted(Tape *t, Node *acc, Node *term, float w) {
    if (w == 0.0f) return acc;
    Node *x = w == 1.0f ? term : nn_scale(t, term, w);
    return acc ? nn_add(t, acc, x) : x;
}

/* The loss with derivatives in latent space (model_set_window). map == NULL: X holds the win
 * frames of every sample (U = win B rows); else X (U, n_in) holds the batch's distinct frames and
 * map (win B) places them (model_loss_shared). */
static Node *model_loss_window(Tape *t, const Model *m, ParamSet *ps, float *X, int U, const int *map, int B,
                               const LossWeights *w, LossParts *parts) {
    int win = m->win, c = win / 2;
    Node *x = nn_input(t, X, U, m->n_in);                       /* (U, n_in) */
    Node *za = mlp_forward(t, &m->enc, ps, x, 1);               /* (U, d) codes of every frame */
    Node *z0, *z1 = NULL, *zt;
    float *Xc = X + (long)c * B * m->n_in;                      /* (B, n_in) the centre frames */
    if (!map) {
        z0 = nn_rows(t, za, c * B, B);                          /* the centre frame's */
        if (m->order == 2) z1 = window(t, za, m->lw1, win);
        zt = window(t, za, m->order == 2 ? m->lw2 : m->lw1, win); /* z'' or z' */
    } else {
        z0 = window_map(t, za, NULL, 1, map + (long)c * B, B);
        if (m->order == 2) z1 = window_map(t, za, m->lw1, win, map, B);
        zt = window_map(t, za, m->order == 2 ? m->lw2 : m->lw1, win, map, B);
        int first = 1; /* the gather puts distinct samples' centre frames first, in order */
        for (int b = 0; b < B && first; b++) first = map[(long)c * B + b] == b;
        Xc = X;
        if (!first) {
            Xc = arena_alloc(&t->arena, (size_t)B * m->n_in * sizeof *Xc);
            for (int b = 0; b < B; b++)
                memcpy(Xc + (long)b * m->n_in, X + (long)map[(long)c * B + b] * m->n_in, (size_t)m->n_in * sizeof *Xc);
        }
    }
    Node *s = m->order == 1 ? z0 : nn_hstack(t, z0, z1);
    Node *theta = library_op(t, &m->lib, s);
    Node *xi = nn_mul(t, nn_param(t, ps, m->xi), nn_input(t, m->maskf, m->lib.n_terms, m->n_latent));
    Node *pred = nn_matmul(t, theta, xi, 0, 0);
    int L = m->dec.n_layers - 1, blocks[1] = {0};
    float wx[1] = {w->rec};
    Node *hd = mlp_forward_hidden(t, &m->dec, ps, z0, 1, L);
    Node *xc = nn_input(t, Xc, B, m->n_in);
    Node *rx = nn_dense_sq_err(t, hd, nn_param(t, ps, m->dec.W[L]), nn_param(t, ps, m->dec.b[L]), xc, 1, 1, blocks, wx);
    Node *ddz = nn_mean_sq(t, nn_sub(t, zt, pred));
    if (m->dz_relative) ddz = ratio(t, ddz, nn_mean_sq(t, zt));
    Node *l1 = l1_term(t, m, xi, theta, zt);
    Node *loss = weighted(t, rx, ddz, w->dz);
    loss = weighted(t, loss, l1, w->l1);
    if (parts) {
        parts->rec = nn_dense_sq_err_mean(rx, 0);
        parts->dx = 0;
        parts->dz = ddz->val.d[0];
        parts->l1 = l1->val.d[0];
        parts->total = loss->val.d[0];
    }
    return loss;
}

/* The loss with derivatives by tangents from the codes z (kB, d) of x (kB, n_in), the targets. */
static Node *model_loss_codes(Tape *t, const Model *m, ParamSet *ps, Node *x, Node *z, int B, const LossWeights *w,
                              LossParts *parts) {
    int k = m->order + 1, d = m->n_latent;
    Node *z0 = nn_rows(t, z, 0, B), *z1 = nn_rows(t, z, B, B);  /* (B, d) each */
    Node *s = m->order == 1 ? z0 : nn_hstack(t, z0, z1);        /* (B, n_vars) */
    Node *theta = library_op(t, &m->lib, s);                    /* (B, n_terms) */
    Node *xi = nn_mul(t, nn_param(t, ps, m->xi), nn_input(t, m->maskf, m->lib.n_terms, d));
    Node *pred = nn_matmul(t, theta, xi, 0, 0);                 /* (B, d): z' or z'' predicted */
    Node *zt = m->order == 1 ? z1 : nn_rows(t, z, 2 * B, B);    /* the encoder's z' or z'' */
    /* warm-up: the decoder gets the encoder's own z' (z''), so the autoencoder learns alone */
    Node *zd = m->warmup ? zt : pred;
    Node *dec_in = m->order == 1 ? nn_vstack(t, z0, zd) : nn_vstack(t, nn_rows(t, z, 0, 2 * B), zd);
    /* The decoder's last (linear) layer and the two reconstruction terms are one op: it computes
     * only the blocks the loss reads, x_hat and x_hat' (first order) or x_hat and x_hat'' (second
     * order; x_hat' is not needed), and never stores x_hat as a node. */
    int L = m->dec.n_layers - 1;
    Node *hd = mlp_forward_hidden(t, &m->dec, ps, dec_in, k, L);   /* (kB, last hidden width) */
    int blocks[2] = {0, k - 1};
    float wx[2] = {w->rec, w->dx};
    Node *rx = nn_dense_sq_err(t, hd, nn_param(t, ps, m->dec.W[L]), nn_param(t, ps, m->dec.b[L]), x, k, 2, blocks,
                               wx); /* w_rec |x - x_hat|^2 + w_dx |x' - x_hat'|^2 (x'' in second order) */
    Node *ddz = nn_mean_sq(t, nn_sub(t, zt, pred));
    if (m->dz_relative) ddz = ratio(t, ddz, nn_mean_sq(t, zt)); /* |z' - z'_pred|^2 / |z'|^2 */
    Node *l1 = l1_term(t, m, xi, theta, zt);
    Node *loss = weighted(t, rx, ddz, w->dz);
    loss = weighted(t, loss, l1, w->l1);
    if (parts) {
        parts->rec = nn_dense_sq_err_mean(rx, 0);
        parts->dx = nn_dense_sq_err_mean(rx, 1);
        parts->dz = ddz->val.d[0];
        parts->l1 = l1->val.d[0];
        parts->total = loss->val.d[0];
    }
    return loss;
}

Node *model_loss(Tape *t, const Model *m, ParamSet *ps, float *X, int B, const LossWeights *w,
                 LossParts *parts) {
    if (m->win) return model_loss_window(t, m, ps, X, m->win * B, NULL, B, w, parts);
    int k = m->order + 1;
    Node *x = nn_input(t, X, k * B, m->n_in);                   /* (kB, n_in) */
    Node *z = mlp_forward(t, &m->enc, ps, x, k);                /* (kB, d) */
    return model_loss_codes(t, m, ps, x, z, B, w, parts);
}

Node *model_loss_frames_shared(Tape *t, const Model *m, ParamSet *ps, float *X, float *F, int U, const int *map,
                               int B, const LossWeights *w, LossParts *parts) {
    NN_CHECK(!m->win && m->fwin > 0, "model_loss_frames_shared: no frame stencil (model_set_frame_stencil)");
    int k = m->order + 1, L = m->enc.n_layers;
    Node *x = nn_input(t, X, k * B, m->n_in);                   /* (kB, n_in) the targets */
    Node *f = nn_input(t, F, U, m->n_in);                       /* (U, n_in) the distinct frames */
    Node *z = nn_dense_t_map(t, f, nn_param(t, ps, m->enc.W[0]), nn_param(t, ps, m->enc.b[0]), k,
                             L == 1 ? ACT_NONE : m->enc.act, map, m->fwin, m->fw1, m->fw2, B);
    for (int l = 1; l < L; l++) /* as mlp_forward: hidden layers with the activation, the last linear */
        z = nn_dense_t(t, z, nn_param(t, ps, m->enc.W[l]), nn_param(t, ps, m->enc.b[l]), k,
                       l == L - 1 ? ACT_NONE : m->enc.act);
    return model_loss_codes(t, m, ps, x, z, B, w, parts);
}

Node *model_loss_shared(Tape *t, const Model *m, ParamSet *ps, float *X, int U, const int *map, int B,
                        const LossWeights *w, LossParts *parts) {
    NN_CHECK(m->win > 0, "model_loss_shared: the model has no stencil window (model_set_window)");
    return model_loss_window(t, m, ps, X, U, map, B, w, parts);
}

void model_encode(Tape *t, const Model *m, ParamSet *ps, float *X, int B, int k, float *out) {
    if (m->win && k > 1) { /* X: the win frames of each sample; out: z, z' (, z'') */
        Node *za = mlp_forward(t, &m->enc, ps, nn_input(t, X, m->win * B, m->n_in), 1);
        long n = (long)B * m->n_latent;
        memcpy(out, za->val.d + (long)(m->win / 2) * n, (size_t)n * sizeof(float));
        for (int blk = 1; blk < k; blk++) {
            const float *wt = blk == 1 ? m->lw1 : m->lw2;
            for (long i = 0; i < n; i++) {
                float acc = 0;
                for (long j = 0; j < m->win; j++) acc += wt[j] * za->val.d[j * n + i];
                out[blk * n + i] = acc;
            }
        }
        return;
    }
    Node *z = mlp_forward(t, &m->enc, ps, nn_input(t, X, k * B, m->n_in), k);
    memcpy(out, z->val.d, (size_t)k * B * m->n_latent * sizeof(float));
}

void model_apply_mask(Model *m, ParamSet *ps) {
    const ParamView *v = &ps->views[m->xi];
    long n = (long)v->rows * v->cols;
    for (long i = 0; i < n; i++)
        if (!m->mask[i]) ps->val[v->off + i] = ps->m[v->off + i] = ps->v[v->off + i] = 0.0f;
}

long model_threshold(Model *m, ParamSet *ps, float threshold) {
    const ParamView *v = &ps->views[m->xi];
    long n = (long)v->rows * v->cols;
    long active = coef_threshold_f(ps->val + v->off, m->mask, ps->val + v->off, m->mask, n, threshold);
    for (long i = 0; i < n; i++) m->maskf[i] = m->mask[i] ? 1.0f : 0.0f;
    model_apply_mask(m, ps);
    return active;
}

long model_active(const Model *m) { return coef_active(m->mask, (long)m->lib.n_terms * m->n_latent); }

long model_threshold_scaled(Model *m, ParamSet *ps, const double *scale, double threshold) {
    const ParamView *v = &ps->views[m->xi];
    long n = (long)v->rows * v->cols;
    const float *xi = ps->val + v->off;
    for (long i = 0; i < n; i++)
        if (m->mask[i] && !(fabs((double)xi[i]) * scale[i] >= threshold)) m->mask[i] = 0;
    for (long i = 0; i < n; i++) m->maskf[i] = m->mask[i] ? 1.0f : 0.0f;
    model_apply_mask(m, ps);
    return model_active(m);
}

void model_term_scales(const Model *m, const double *theta2, const double *target2, double *scale) {
    int T = m->lib.n_terms, d = m->n_latent;
    for (int j = 0; j < T; j++)
        for (int i = 0; i < d; i++) scale[(long)j * d + i] = target2[i] > 0 ? sqrt(theta2[j] / target2[i]) : 1.0;
}

void model_accumulate_scales(Tape *t, const Model *m, ParamSet *ps, float *X, int B, double *theta2,
                             double *target2) {
    int d = m->n_latent, k = m->order + 1, nv = m->lib.n_vars, T = m->lib.n_terms;
    tape_reset(t);
    float *z = arena_alloc(&t->arena, (size_t)k * B * d * sizeof *z);
    double *th = arena_alloc(&t->arena, (size_t)T * sizeof *th);
    model_encode(t, m, ps, X, B, k, z);
    for (int b = 0; b < B; b++) {
        double sv[LIB_MAX_VARS];
        for (int j = 0; j < nv; j++) sv[j] = z[((long)(j / d) * B + b) * d + j % d];
        library_eval(&m->lib, th, sv, 1);
        for (int j = 0; j < T; j++) theta2[j] += th[j] * th[j];
        for (int i = 0; i < d; i++) {
            double y = z[((long)(k - 1) * B + b) * d + i];
            target2[i] += y * y;
        }
    }
}
