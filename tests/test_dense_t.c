/* tests/test_dense_t.c: the fused dense layer with tangents, encoder -> decoder chains, and the
 * tangents themselves against finite differences of the network along a curve. */
#include "nn/adam.h"
#include "nn/mlp.h"
#include "nn/rng.h"
#include "nn/tape.h"
#include "tests/gradcheck.h"

/* Tolerances as in tests/test_nn_ops.c (float32, h = 1e-2, loss of order 1). Chains of several
 * layers have larger third derivatives, so their truncation error is larger: 1e-2 there. */
static const GcOpts OPTS = {.h = 1e-2f, .tol = 5e-3f, .floor = 1e-3f, .max_checked = 48, .at_kink = NULL};

static void fill(Mat m, Rng *r, float lo, float hi) {
    for (long i = 0; i < mat_size(m); i++) m.d[i] = (float)(lo + (hi - lo) * rng_uniform(r));
}

/* ---- one fused layer -------------------------------------------------------------------------- */

typedef struct {
    int k;
    ActId act;
    float *target;
} LayerCase;

static Node *build_layer(Tape *t, ParamSet *ps, void *ctx) {
    LayerCase *c = ctx;
    Node *h = nn_param(t, ps, 0), *W = nn_param(t, ps, 1), *b = nn_param(t, ps, 2);
    Node *y = nn_dense_t(t, h, W, b, c->k, c->act);
    return nn_mean_sq(t, nn_sub(t, y, nn_input(t, c->target, y->val.rows, y->val.cols)));
}

/* forward and backward of dense_t by central differences, every k and activation */
static void test_dense_t_gradients(void **state) {
    (void)state;
    for (int k = 1; k <= 3; k++)
        for (int a = 0; a < ACT_COUNT; a++) {
            int B = 3, n_in = 4, n_out = 5;
            ParamSet ps;
            params_init(&ps);
            params_add(&ps, "h", k * B, n_in);
            params_add(&ps, "W", n_in, n_out);
            params_add(&ps, "b", 1, n_out);
            params_alloc(&ps);
            Rng r;
            rng_seed(&r, 100 + 10 * k + a);
            fill(params_val(&ps, 0), &r, -1, 1);
            fill(params_val(&ps, 1), &r, -0.8f, 0.8f);
            fill(params_val(&ps, 2), &r, -0.5f, 0.5f);
            float target[64];
            for (int i = 0; i < 64; i++) target[i] = (float)(rng_uniform(&r) - 0.5);
            LayerCase c = {k, (ActId)a, target};
            Tape t;
            tape_init(&t, 16, 1 << 16);
            gradcheck(&t, &ps, build_layer, &c, &OPTS);
            tape_free(&t);
            params_free(&ps);
        }
}

/* The fused primal rows equal the generic ops: act(h W + b) (common practice: same math). */
static void test_dense_t_matches_generic_ops(void **state) {
    (void)state;
    int B = 4, n_in = 6, n_out = 3;
    float h[3 * 4 * 6], W[6 * 3], b[3];
    Rng r;
    rng_seed(&r, 3);
    fill(mat_view(h, 3 * B, n_in), &r, -1, 1);
    fill(mat_view(W, n_in, n_out), &r, -1, 1);
    fill(mat_view(b, 1, n_out), &r, -1, 1);
    Tape t;
    tape_init(&t, 16, 1 << 16);
    Node *H = nn_input(&t, h, 3 * B, n_in), *Wn = nn_input(&t, W, n_in, n_out), *bn = nn_input(&t, b, 1, n_out);
    Node *fused = nn_dense_t(&t, H, Wn, bn, 3, ACT_TANH);
    Node *gen = nn_act(&t, nn_bias_add(&t, nn_matmul(&t, nn_rows(&t, H, 0, B), Wn, 0, 0), bn), ACT_TANH);
    for (int i = 0; i < B * n_out; i++) assert_close(fused->val.d[i], gen->val.d[i], 1e-6, 1e-6);
    tape_free(&t);
}

/* ---- tangents against finite differences ------------------------------------------------------
 * The network is re-evaluated in double precision with the same weights (a plain reference, no
 * tape), so the finite differences are accurate to ~1e-8 and the float32 tangents are compared at
 * float32 accuracy. Definitions (common practice, chain rule along a curve):
 *   z'  = d/dt phi(x + t x')|_{t=0}                       ~ (phi(x + e x') - phi(x - e x')) / 2e
 *   z'' = d^2/dt^2 phi(x + t x' + t^2/2 x'')|_{t=0}      ~ (phi(c(e)) - 2 phi(c(0)) + phi(c(-e))) / e^2 */

static double act_double(ActId a, double x) {
    switch (a) {
    case ACT_NONE: return x;
    case ACT_SIGMOID: return 1.0 / (1.0 + exp(-x));
    case ACT_TANH: return tanh(x);
    case ACT_SOFTPLUS: return log1p(exp(x));
    case ACT_SILU: return x / (1.0 + exp(-x));
    default: return NAN;
    }
}

/* phi(x) for one sample, in double */
static void mlp_double(const Mlp *m, const ParamSet *ps, const double *x, double *out) {
    double buf[2][64];
    int n = m->widths[0];
    for (int i = 0; i < n; i++) buf[0][i] = x[i];
    int cur = 0;
    for (int l = 0; l < m->n_layers; l++) {
        Mat W = params_val(ps, m->W[l]), b = params_val(ps, m->b[l]);
        int no = m->widths[l + 1];
        for (int j = 0; j < no; j++) {
            double s = b.d[j];
            for (int i = 0; i < n; i++) s += buf[cur][i] * W.d[i * no + j];
            buf[1 - cur][j] = act_double(l == m->n_layers - 1 ? ACT_NONE : m->act, s);
        }
        cur = 1 - cur;
        n = no;
    }
    for (int j = 0; j < n; j++) out[j] = buf[cur][j];
}

static void check_tangents(ActId act) {
    enum { B = 5, NI = 6, NO = 3 };
    int widths[] = {NI, 8, 7, NO};
    Mlp m;
    ParamSet ps;
    params_init(&ps);
    mlp_declare(&m, &ps, "enc", widths, 3, act);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 11 + act);
    mlp_init_glorot(&m, &ps, &r);
    for (int l = 0; l < m.n_layers; l++) fill(params_val(&ps, m.b[l]), &r, -0.3f, 0.3f);
    float X[3 * B * NI];
    fill(mat_view(X, 3 * B, NI), &r, -1, 1);
    Tape t;
    tape_init(&t, 32, 1 << 16);
    Node *z = mlp_forward(&t, &m, &ps, nn_input(&t, X, 3 * B, NI), 3);
    const double e = 1e-4;
    for (int s = 0; s < B; s++) {
        double x[NI], xp[NI], xm[NI], c0[NO], cp[NO], cm[NO], fp[NO], fm[NO];
        for (int i = 0; i < NI; i++) {
            double x0 = X[s * NI + i], v = X[(B + s) * NI + i], w = X[(2 * B + s) * NI + i];
            x[i] = x0;
            xp[i] = x0 + e * v;
            xm[i] = x0 - e * v;
            (void)w;
        }
        mlp_double(&m, &ps, xp, fp);
        mlp_double(&m, &ps, xm, fm);
        mlp_double(&m, &ps, x, c0);
        for (int i = 0; i < NI; i++) {
            double x0 = X[s * NI + i], v = X[(B + s) * NI + i], w = X[(2 * B + s) * NI + i];
            xp[i] = x0 + e * v + 0.5 * e * e * w;
            xm[i] = x0 - e * v + 0.5 * e * e * w;
        }
        mlp_double(&m, &ps, xp, cp);
        mlp_double(&m, &ps, xm, cm);
        for (int j = 0; j < NO; j++) {
            double d1 = (fp[j] - fm[j]) / (2 * e);
            double d2 = (cp[j] - 2 * c0[j] + cm[j]) / (e * e);
            /* float32 tangents through three layers: ~1e-6 relative rounding per op, accumulated */
            assert_close(z->val.d[s * NO + j], c0[j], 1e-5, 1e-5);
            assert_close(z->val.d[(B + s) * NO + j], d1, 1e-5, 1e-4);
            /* the second difference in double with e = 1e-4 carries ~1e-16/1e-8 = 1e-8 rounding */
            assert_close(z->val.d[(2 * B + s) * NO + j], d2, 5e-5, 1e-4);
        }
    }
    tape_free(&t);
    params_free(&ps);
}

static void test_tangents_match_finite_differences(void **state) {
    (void)state;
    for (int a = 1; a < ACT_COUNT; a++) check_tangents((ActId)a);
}

/* ---- whole encoder -> decoder chains with a loss on top --------------------------------------- */

typedef struct {
    Mlp enc, dec;
    int k;      /* 2: first order (x, x'), 3: second order (x, x', x'') */
    int B;
    float *X;   /* (k*B, n) */
} Chain;

/* loss = mean|x - x_hat|^2 + 0.5 mean|x' - x_hat'|^2 (+ 0.25 mean|x'' - x_hat''|^2) */
static Node *build_chain(Tape *t, ParamSet *ps, void *ctx) {
    Chain *c = ctx;
    int n = c->enc.widths[0];
    Node *x = nn_input(t, c->X, c->k * c->B, n);
    Node *z = mlp_forward(t, &c->enc, ps, x, c->k);
    Node *xh = mlp_forward(t, &c->dec, ps, z, c->k);
    Node *loss = NULL;
    const float w[3] = {1.0f, 0.5f, 0.25f};
    for (int j = 0; j < c->k; j++) {
        Node *d = nn_sub(t, nn_rows(t, x, j * c->B, c->B), nn_rows(t, xh, j * c->B, c->B));
        Node *term = nn_scale(t, nn_mean_sq(t, d), w[j]);
        loss = loss ? nn_add(t, loss, term) : term;
    }
    return loss;
}

static void check_chain(int k) {
    Chain c;
    c.k = k;
    c.B = 4;
    int we[] = {6, 5, 2}, wd[] = {2, 5, 6};
    ParamSet ps;
    params_init(&ps);
    mlp_declare(&c.enc, &ps, "enc", we, 2, ACT_SIGMOID);
    mlp_declare(&c.dec, &ps, "dec", wd, 2, ACT_SIGMOID);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 5 + k);
    mlp_init_glorot(&c.enc, &ps, &r);
    mlp_init_glorot(&c.dec, &ps, &r);
    float X[3 * 4 * 6];
    fill(mat_view(X, k * c.B, 6), &r, -1, 1);
    c.X = X;
    Tape t;
    tape_init(&t, 64, 1 << 16);
    GcOpts o = OPTS;
    o.tol = 1e-2f;
    gradcheck(&t, &ps, build_chain, &c, &o);
    tape_free(&t);
    params_free(&ps);
}

static void test_chain_first_order_gradients(void **state) { (void)state; check_chain(2); }
static void test_chain_second_order_gradients(void **state) { (void)state; check_chain(3); }

/* A whole training step (forward, backward, Adam) allocates nothing from the system once the arena
 * has seen one step (docs/nn.md, "Matrices and memory": later steps make no system allocation). */
static void test_training_step_allocates_nothing(void **state) {
    (void)state;
    Chain c;
    c.k = 3;
    c.B = 16;
    int we[] = {20, 12, 3}, wd[] = {3, 12, 20};
    ParamSet ps;
    params_init(&ps);
    mlp_declare(&c.enc, &ps, "enc", we, 2, ACT_SIGMOID);
    mlp_declare(&c.dec, &ps, "dec", wd, 2, ACT_SIGMOID);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 9);
    mlp_init_glorot(&c.enc, &ps, &r);
    mlp_init_glorot(&c.dec, &ps, &r);
    float *X = malloc(3 * 16 * 20 * sizeof(float));
    fill(mat_view(X, 48, 20), &r, 0, 1);
    c.X = X;
    Tape t;
    tape_init(&t, 64, 4096); /* deliberately small: the first step must grow it */
    AdamCfg ad = adam_defaults();
    float first = 0, last = 0;
    long allocs_after_first = 0;
    for (int step = 0; step < 200; step++) {
        tape_reset(&t);
        if (step == 1) allocs_after_first = t.arena.sys_allocs;
        params_zero_grad(&ps);
        Node *loss = build_chain(&t, &ps, &c);
        if (step == 0) first = loss->val.d[0];
        last = loss->val.d[0];
        tape_backward(&t, loss);
        adam_step(&ps, &ad);
    }
    assert_int_equal(t.arena.sys_allocs, allocs_after_first);
    assert_true(last < 0.5f * first); /* and the step learns: the loss halves in 200 steps */
    free(X);
    tape_free(&t);
    params_free(&ps);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_dense_t_gradients),
        cmocka_unit_test(test_dense_t_matches_generic_ops),
        cmocka_unit_test(test_tangents_match_finite_differences),
        cmocka_unit_test(test_chain_first_order_gradients),
        cmocka_unit_test(test_chain_second_order_gradients),
        cmocka_unit_test(test_training_step_allocates_nothing),
    };
    return cmocka_run_group_tests_name("dense layer with tangents", tests, NULL, NULL);
}
