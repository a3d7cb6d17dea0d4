/* tests/test_model.c: the joint model's loss. Its gradient with respect to every parameter (encoder,
 * decoder, Xi) against central finite differences, for first- and second-order models, and the loss
 * terms against a direct evaluation (common practice: a whole-model gradient check). */
#include "nn/adam.h"
#include "sparse/model.h"
#include "sparse/stencil.h"
#include "tests/gradcheck.h"

typedef struct {
    Model m;
    float *X;
    int B;
    LossWeights w;
} Case;

static Node *build(Tape *t, ParamSet *ps, void *ctx) {
    Case *c = ctx;
    return model_loss(t, &c->m, ps, c->X, c->B, &c->w, NULL);
}

/* |Xi|_1 has a kink at 0; Xi is set away from it and elements within 2h of 0 are skipped. */
static int near_zero(float v, float h) { return fabsf(v) < 2 * h; }

/* A small tanh model (one hidden layer of `hidden`, library of degree `degree` with sines and
 * cosines), Glorot weights from seed `seed`, Xi away from 0 with alternating signs. */
static void small_model(Model *m, ParamSet *ps, Rng *r, int n_in, int d, int order, int hidden, int degree,
                        uint64_t seed) {
    ModelSpec sp = {0};
    sp.n_in = n_in;
    sp.n_latent = d;
    sp.order = order;
    sp.n_enc = hidden > 0; /* hidden 0: a linear encoder */
    sp.enc_widths[0] = hidden;
    sp.dec_mirror = 1;
    sp.act = ACT_TANH;
    sp.lib = library_spec_default(d, order);
    sp.lib.degree = degree;
    sp.lib.trig = 1;
    params_init(ps);
    Status st;
    assert_int_equal(model_init(m, ps, &sp, &st), 0);
    params_alloc(ps);
    rng_seed(r, seed);
    model_init_params(m, ps, r);
    Mat xi = params_val(ps, m->xi);
    for (long i = 0; i < mat_size(xi); i++) xi.d[i] = (float)(0.1 + 0.4 * rng_uniform(r)) * (i % 2 ? 1 : -1);
}

static void check_model(int order) {
    Case c;
    ModelSpec sp = {0};
    sp.n_in = 7;
    ParamSet ps;
    Rng r;
    small_model(&c.m, &ps, &r, sp.n_in, 2, order, 5, 2, 77 + order);
    Mat xi = params_val(&ps, c.m.xi);
    c.B = 4;
    int k = order + 1;
    c.X = malloc((size_t)k * c.B * sp.n_in * sizeof(float));
    for (int i = 0; i < k * c.B * sp.n_in; i++) c.X[i] = (float)(rng_uniform(&r) - 0.5);
    c.w = (LossWeights){1.0f, 0.5f, 0.3f, 0.01f};
    Tape t;
    tape_init(&t, 128, 1 << 16);
    /* tolerance as for the chains in tests/test_dense_t.c: several layers, float32, h = 1e-2 */
    GcOpts o = {.h = 1e-2f, .tol = 1e-2f, .floor = 1e-3f, .max_checked = 40, .at_kink = near_zero};
    gradcheck(&t, &ps, build, &c, &o);
    c.m.dz_relative = 1; /* the relative latent term, gradient through the normaliser included */
    gradcheck(&t, &ps, build, &c, &o);
    c.m.dz_relative = 0;

    /* the parts add up to the total with the weights */
    tape_reset(&t);
    LossParts p;
    Node *loss = model_loss(&t, &c.m, &ps, c.X, c.B, &c.w, &p);
    assert_close(p.total, loss->val.d[0], 1e-7, 0);
    assert_close(p.total, p.rec + 0.5 * p.dx + 0.3 * p.dz + 0.01 * p.l1, 1e-6, 1e-5);
    double l1 = 0;
    for (long i = 0; i < mat_size(xi); i++) l1 += fabsf(xi.d[i]);
    assert_close(p.l1, l1, 1e-6, 1e-6);

    /* thresholding masks out small coefficients for good, even through later Adam steps */
    long before = model_active(&c.m);
    xi.d[0] = 0.05f;
    long after = model_threshold(&c.m, &ps, 0.08f);
    assert_int_equal(after, before - 1);
    assert_true(xi.d[0] == 0.0f);
    AdamCfg ad = adam_defaults();
    for (int s = 0; s < 5; s++) {
        tape_reset(&t);
        params_zero_grad(&ps);
        tape_backward(&t, model_loss(&t, &c.m, &ps, c.X, c.B, &c.w, NULL));
        adam_step(&ps, &ad);
        model_apply_mask(&c.m, &ps);
        assert_true(xi.d[0] == 0.0f);
    }
    free(c.X);
    tape_free(&t);
    model_free(&c.m);
    params_free(&ps);
}

/* Derivatives in latent space (model_set_window): the same gradient check with X the stencil's
 * frames, a 5-point Savitzky-Golay stencil of degree 3. */
static void check_window(int order) {
    Case c;
    ModelSpec sp = {0};
    sp.n_in = 6;
    ParamSet ps;
    Rng r;
    small_model(&c.m, &ps, &r, sp.n_in, 1, order, 4, 3, 91 + order);
    Status st;
    Stencil sten;
    assert_int_equal(stencil_savgol(&sten, 5, 3, &st), 0);
    /* dt 1: the weights / dt^2 would multiply the float32 rounding of the finite differences */
    model_set_window(&c.m, &sten, 1.0);
    assert_int_equal(c.m.win, 5);
    c.B = 3;
    c.X = malloc((size_t)5 * c.B * sp.n_in * sizeof(float));
    /* smooth in the window (a sample's frames differ a little), so z' and z'' stay moderate */
    for (int b = 0; b < c.B; b++)
        for (int i = 0; i < sp.n_in; i++) {
            double a0 = rng_uniform(&r) - 0.5, a1 = 0.3 * (rng_uniform(&r) - 0.5);
            for (int j = 0; j < 5; j++) c.X[((long)j * c.B + b) * sp.n_in + i] = (float)(a0 + a1 * (j - 2) * (j - 1));
        }
    c.w = (LossWeights){1.0f, 0.5f, 0.3f, 0.01f};
    Tape t;
    tape_init(&t, 128, 1 << 16);
    GcOpts o = {.h = 1e-2f, .tol = 1e-2f, .floor = 1e-3f, .max_checked = 40, .at_kink = near_zero};
    gradcheck(&t, &ps, build, &c, &o);
    c.m.dz_relative = 1;
    gradcheck(&t, &ps, build, &c, &o);
    free(c.X);
    tape_free(&t);
    model_free(&c.m);
    params_free(&ps);
}

/* With a linear encoder (no hidden layer) the stencil commutes with the encoder: the latent-space
 * derivatives equal the frames' derivatives carried by tangents. On frames that are cubic in time
 * the Savitzky-Golay stencil of degree 3 is exact (A. Savitzky, M. J. E. Golay, Anal. Chem. 36,
 * 1964: least-squares polynomial fits reproduce polynomials up to their degree), so the two modes'
 * latent terms agree with the exact x' and x'' given to the tangent mode. */
static void test_window_matches_tangents_for_linear_encoder(void **state) {
    (void)state;
    enum { N_IN = 5, B = 4, WIN = 7 };
    const double dt = 0.05;
    ModelSpec sp = {0};
    sp.n_in = N_IN;
    sp.n_latent = 2;
    sp.order = 2;
    sp.n_enc = 0;
    sp.dec_mirror = 1;
    sp.act = ACT_TANH;
    sp.lib = library_spec_default(2, 2);
    sp.lib.degree = 2;
    Model a, w;
    ParamSet pa, pw;
    Status st;
    params_init(&pa), params_init(&pw);
    assert_int_equal(model_init(&a, &pa, &sp, &st), 0);
    assert_int_equal(model_init(&w, &pw, &sp, &st), 0);
    params_alloc(&pa), params_alloc(&pw);
    Rng r;
    rng_seed(&r, 5);
    model_init_params(&a, &pa, &r);
    Mat xi = params_val(&pa, a.xi);
    for (long i = 0; i < mat_size(xi); i++) xi.d[i] = (float)(rng_uniform(&r) - 0.5);
    memcpy(pw.val, pa.val, pa.n * sizeof(float));
    Stencil sten;
    assert_int_equal(stencil_savgol(&sten, WIN, 3, &st), 0);
    model_set_window(&w, &sten, dt);
    static float Xa[3 * B * N_IN], Xw[WIN * B * N_IN];
    for (int b = 0; b < B; b++)
        for (int i = 0; i < N_IN; i++) {
            double c0 = rng_uniform(&r) - 0.5, c1 = rng_uniform(&r) - 0.5, c2 = rng_uniform(&r) - 0.5,
                   c3 = rng_uniform(&r) - 0.5; /* x(t) = c0 + c1 t + c2 t^2 + c3 t^3 around the sample */
            Xa[(0 * B + b) * N_IN + i] = (float)c0;
            Xa[(1 * B + b) * N_IN + i] = (float)c1;
            Xa[(2 * B + b) * N_IN + i] = (float)(2 * c2);
            for (int j = 0; j < WIN; j++) {
                double tt = (j - WIN / 2) * dt;
                Xw[((long)j * B + b) * N_IN + i] = (float)(c0 + tt * (c1 + tt * (c2 + tt * c3)));
            }
        }
    LossWeights lw = {1.0f, 0.0f, 1.0f, 0.0f};
    Tape t;
    tape_init(&t, 128, 1 << 16);
    LossParts p1, p2;
    model_loss(&t, &a, &pa, Xa, B, &lw, &p1);
    tape_reset(&t);
    model_loss(&t, &w, &pw, Xw, B, &lw, &p2);
    assert_close(p2.rec, p1.rec, 1e-5, 1e-7);
    /* float frames: the second-derivative stencil divides rounding of ~1e-7 by dt^2 */
    assert_close(p2.dz, p1.dz, 2e-3, 1e-6);
    float za[3 * B * 2], zw[3 * B * 2];
    tape_reset(&t);
    model_encode(&t, &a, &pa, Xa, B, 3, za);
    tape_reset(&t);
    model_encode(&t, &w, &pw, Xw, B, 3, zw);
    for (int i = 0; i < 3 * B * 2; i++) assert_close(zw[i], za[i], 2e-3, 2e-4);
    tape_free(&t);
    model_free(&a), model_free(&w);
    params_free(&pa), params_free(&pw);
}

static void test_window_gradients_first_order(void **state) { (void)state; check_window(1); }
static void test_window_gradients_second_order(void **state) { (void)state; check_window(2); }

static void test_first_order_model_gradients(void **state) { (void)state; check_model(1); }
static void test_second_order_model_gradients(void **state) { (void)state; check_model(2); }

/* Every gradient of ps within rel of the largest expanded gradient ge (which must not be all 0). */
static void assert_grads_close(const ParamSet *ps, const float *ge, double rel, int order, int window) {
    double gmax = 0;
    for (size_t i = 0; i < ps->n; i++) gmax = fmax(gmax, fabs(ge[i]));
    assert_true(gmax > 0);
    for (size_t i = 0; i < ps->n; i++)
        if (fabs(ps->grad[i] - ge[i]) > rel * gmax)
            fail_msg("order %d window %d: grad %zu shared %g expanded %g", order, window, i, ps->grad[i], ge[i]);
}

/* Frame sharing (model_loss_shared): a batch whose samples overlap in time (neighbours, a repeat
 * and a far one) as its distinct frames once plus a map gives the loss and every parameter's
 * gradient of the expanded batch (each sample's win frames), to float rounding. Reference: the
 * expanded loss, checked against finite differences above; a shared input's gradient is the sum
 * over its uses (common practice: the multivariable chain rule). */
static void check_shared(int order) {
    enum { N_IN = 6, F = 16, WIN = 5, B = 7 };
    Model m;
    ParamSet ps;
    Rng r;
    small_model(&m, &ps, &r, N_IN, 2, order, 4, 3, 131 + order);
    Status st;
    Stencil sten;
    assert_int_equal(stencil_savgol(&sten, WIN, 3, &st), 0);
    model_set_window(&m, &sten, 0.5);
    static float frames[F * N_IN], Xe[WIN * B * N_IN], Xu[WIN * B * N_IN];
    for (int f = 0; f < F; f++) /* a smooth recording: sines of time per value */
        for (int i = 0; i < N_IN; i++) frames[f * N_IN + i] = (float)(0.6 * sin(0.3 * f * (1 + 0.2 * i) + i));
    const int centre[B] = {4, 5, 6, 7, 5, 12, 2}; /* 5 twice; 12 shares nothing with the others' windows */
    int map[WIN * B], U = 0, row_of[F];
    for (int f = 0; f < F; f++) row_of[f] = -1;
    for (int j = 0; j < WIN; j++)
        for (int b = 0; b < B; b++) {
            int f = centre[b] - WIN / 2 + j;
            memcpy(Xe + ((long)j * B + b) * N_IN, frames + f * N_IN, N_IN * sizeof(float));
            if (row_of[f] < 0) {
                row_of[f] = U;
                memcpy(Xu + (long)U * N_IN, frames + f * N_IN, N_IN * sizeof(float));
                U++;
            }
            map[j * B + b] = row_of[f];
        }
    assert_int_equal(U, 15); /* frames 0..14: fewer rows than the expanded 35 */
    LossWeights w = {1.0f, 0.0f, 0.7f, 0.01f};
    Tape t;
    tape_init(&t, 128, 1 << 16);
    for (int rel = 0; rel < 2; rel++) {
        m.dz_relative = rel;
        LossParts pe, pu;
        params_zero_grad(&ps);
        tape_backward(&t, model_loss(&t, &m, &ps, Xe, B, &w, &pe));
        float *ge = malloc(ps.n * sizeof *ge);
        memcpy(ge, ps.grad, ps.n * sizeof *ge);
        tape_reset(&t);
        params_zero_grad(&ps);
        tape_backward(&t, model_loss_shared(&t, &m, &ps, Xu, U, map, B, &w, &pu));
        tape_reset(&t);
        /* float32 sums in another order: a few units of rounding of the largest terms */
        assert_close(pu.total, pe.total, 1e-5, 1e-7);
        assert_close(pu.rec, pe.rec, 1e-5, 1e-7);
        assert_close(pu.dz, pe.dz, 1e-5, 1e-7);
        assert_close(pu.l1, pe.l1, 1e-6, 0);
        assert_grads_close(&ps, ge, 1e-5, order, WIN);
        free(ge);
    }
    tape_free(&t);
    model_free(&m);
    params_free(&ps);
}

/* Frame sharing in frames mode (model_loss_frames_shared): the encoder's first layer over the
 * batch's distinct frames, its tangent rows the stencil over their products, gives the loss and
 * every parameter's gradient of model_loss on the expanded x, x' (, x'') to float rounding.
 * Reference: model_loss, checked against finite differences above; the first layer is linear
 * before its activation, so (sum_j w_j x_j) W = sum_j w_j (x_j W) (common practice: linearity of
 * the product), and a shared input's gradient is the sum over its uses (the chain rule). */
static void check_frames_shared(int order, int hidden, ActId act, int window) {
    enum { N_IN = 6, NF = 20, B = 7, MAXW = 7 };
    Model m;
    ParamSet ps;
    Rng r;
    small_model(&m, &ps, &r, N_IN, 2, order, hidden, 3, 151 + order + hidden + window);
    m.enc.act = m.dec.act = act;
    Status st;
    Stencil sten;
    if (window == 3) stencil_central(&sten);
    else assert_int_equal(stencil_savgol(&sten, window, 3, &st), 0);
    model_set_frame_stencil(&m, &sten, 0.25);
    assert_int_equal(m.fwin, window);
    int k = order + 1, h = window / 2;
    static float frames[NF * N_IN], X[3 * B * N_IN], F[MAXW * B * N_IN];
    for (int f = 0; f < NF; f++)
        for (int i = 0; i < N_IN; i++) frames[f * N_IN + i] = (float)(0.6 * sin(0.3 * f * (1 + 0.2 * i) + i));
    const int centre[B] = {5, 6, 7, 8, 6, 15, 4}; /* 6 twice; 15 shares nothing with the others */
    int map[MAXW * B], U = 0, row_of[NF];
    for (int f = 0; f < NF; f++) row_of[f] = -1;
    for (int j = 0; j < window; j++)
        for (int b = 0; b < B; b++) {
            int f = centre[b] - h + j;
            if (row_of[f] < 0) {
                row_of[f] = U;
                memcpy(F + (long)U * N_IN, frames + f * N_IN, N_IN * sizeof(float));
                U++;
            }
            map[j * B + b] = row_of[f];
        }
    assert_true(U < window * B);
    for (int b = 0; b < B; b++) /* the expanded batch: the frame and the stencil's derivatives */
        for (int i = 0; i < N_IN; i++) {
            double d1 = 0, d2 = 0;
            for (int j = 0; j < window; j++) {
                double v = frames[(centre[b] - h + j) * N_IN + i];
                d1 += m.fw1[j] * v, d2 += m.fw2[j] * v;
            }
            X[(long)b * N_IN + i] = frames[centre[b] * N_IN + i];
            X[((long)B + b) * N_IN + i] = (float)d1;
            if (k == 3) X[(2L * B + b) * N_IN + i] = (float)d2;
        }
    LossWeights w = {1.0f, 0.3f, 0.7f, 0.01f};
    Tape t;
    tape_init(&t, 128, 1 << 16);
    for (int warm = 0; warm < 2; warm++) {
        m.warmup = warm;
        LossParts pe, pu;
        params_zero_grad(&ps);
        tape_backward(&t, model_loss(&t, &m, &ps, X, B, &w, &pe));
        float *ge = malloc(ps.n * sizeof *ge);
        memcpy(ge, ps.grad, ps.n * sizeof *ge);
        tape_reset(&t);
        params_zero_grad(&ps);
        tape_backward(&t, model_loss_frames_shared(&t, &m, &ps, X, F, U, map, B, &w, &pu));
        tape_reset(&t);
        /* the stencil over products cancels the frames' common part: a few units of rounding of
         * the products, relative to the derivatives' smaller size */
        assert_close(pu.total, pe.total, 1e-4, 1e-6);
        assert_close(pu.rec, pe.rec, 1e-5, 1e-7);
        assert_close(pu.dx, pe.dx, 1e-4, 1e-6);
        assert_close(pu.dz, pe.dz, 1e-4, 1e-6);
        assert_close(pu.l1, pe.l1, 1e-6, 0);
        assert_grads_close(&ps, ge, 1e-4, order, window);
        free(ge);
    }
    tape_free(&t);
    model_free(&m);
    params_free(&ps);
}

static void test_frames_shared_first_order(void **state) {
    (void)state;
    check_frames_shared(1, 4, ACT_TANH, 3);
    check_frames_shared(1, 4, ACT_SIGMOID, 5);
}

static void test_frames_shared_second_order(void **state) {
    (void)state;
    check_frames_shared(2, 4, ACT_TANH, 3);
    check_frames_shared(2, 4, ACT_SIGMOID, 7);
}

/* a linear encoder (no hidden layer): the shared layer is the encoder's only one */
static void test_frames_shared_linear_encoder(void **state) {
    (void)state;
    check_frames_shared(1, 0, ACT_SIGMOID, 5);
    check_frames_shared(2, 0, ACT_TANH, 3);
}

static void test_shared_frames_first_order(void **state) { (void)state; check_shared(1); }
static void test_shared_frames_second_order(void **state) { (void)state; check_shared(2); }

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_first_order_model_gradients),
        cmocka_unit_test(test_second_order_model_gradients),
        cmocka_unit_test(test_window_gradients_first_order),
        cmocka_unit_test(test_window_gradients_second_order),
        cmocka_unit_test(test_window_matches_tangents_for_linear_encoder),
        cmocka_unit_test(test_shared_frames_first_order),
        cmocka_unit_test(test_shared_frames_second_order),
        cmocka_unit_test(test_frames_shared_first_order),
        cmocka_unit_test(test_frames_shared_second_order),
        cmocka_unit_test(test_frames_shared_linear_encoder),
    };
    return cmocka_run_group_tests_name("joint model", tests, NULL, NULL);
}
