/* tests/test_canonfold.c: a model rewritten in canonical coordinates (sparse/canonfold.h).
 *
 * The fold is a change of variables v = w (A z + b) pushed into the encoder's last layer, the
 * decoder's first layer and the law's coefficients. What must hold is the identity itself (common
 * practice: an affine change of variables of a linear layer and of a polynomial law):
 * - the folded encoder gives v = (A z + b) w for the frames, and v' = A z' w, v'' = A z'' w;
 * - the folded decoder maps v to what the old one mapped z to;
 * - the folded law at the state in v gives w_j times the canonical law at the state in u, for every
 *   equation j (sin and cos terms of the canonical law are taken at f w_i u_i, canonical_eval).
 * Tolerances: float32 weights and activations (relative 2e-5 of the values' scale). */
#include "sparse/canonfold.h"
#include "tests/testutil.h"

static void build(Model *m, ParamSet *ps, int d, int trig, int degree) {
    ModelSpec sp = {0};
    sp.n_in = 10;
    sp.n_latent = d;
    sp.order = 2;
    sp.n_enc = 1;
    sp.enc_widths[0] = 8;
    sp.dec_mirror = 1;
    sp.act = ACT_TANH;
    sp.lib = library_spec_default(d, 2);
    sp.lib.degree = degree;
    sp.lib.trig = trig;
    params_init(ps);
    Status st;
    assert_int_equal(model_init(m, ps, &sp, &st), 0);
    params_alloc(ps);
    Rng r;
    rng_seed(&r, 7);
    model_init_params(m, ps, &r);
    /* biases away from zero, so that the bias updates are exercised */
    for (int l = 0; l < m->enc.n_layers; l++) {
        Mat b = params_val(ps, m->enc.b[l]);
        for (long i = 0; i < mat_size(b); i++) b.d[i] = (float)(0.3 * rng_normal(&r));
    }
    Mat b0 = params_val(ps, m->dec.b[0]);
    for (long i = 0; i < mat_size(b0); i++) b0.d[i] = (float)(0.3 * rng_normal(&r));
}

static double scale_of(const float *x, long n) {
    double s = 0;
    for (long i = 0; i < n; i++) s = fmax(s, fabs(x[i]));
    return s > 0 ? s : 1;
}

static void check_fold(int d, int trig, int degree, const double *A, const double *b, const double *w) {
    Model m;
    ParamSet ps;
    build(&m, &ps, d, trig, degree);
    int T = m.lib.n_terms, nv = m.lib.n_vars, B = 16, k = 3, n_in = m.n_in;
    Canonical c = {0};
    c.status = CANON_FOUND;
    c.k = d, c.order = 2, c.n_terms = T, c.trig = trig;
    memcpy(c.A, A, (size_t)d * d * sizeof *A);
    memcpy(c.b, b, (size_t)d * sizeof *b);
    memcpy(c.w, w, (size_t)d * sizeof *w);
    c.xi = nn_alloc((size_t)T * d * sizeof *c.xi);
    c.mask = nn_alloc((size_t)T * d);
    Rng r;
    rng_seed(&r, 11);
    for (long i = 0; i < (long)T * d; i++) {
        c.mask[i] = i % 3 != 1;
        c.xi[i] = c.mask[i] ? rng_normal(&r) : 0;
    }
    float *X = nn_alloc((size_t)k * B * n_in * sizeof *X);
    for (long i = 0; i < (long)k * B * n_in; i++) X[i] = (float)rng_normal(&r);
    float *z = nn_alloc((size_t)k * B * d * sizeof *z), *v = nn_alloc((size_t)k * B * d * sizeof *v);
    Tape t;
    tape_init(&t, 64, (size_t)1 << 20);
    model_encode(&t, &m, &ps, X, B, k, z);
    /* the old decoder at z */
    tape_reset(&t);
    Node *y0 = mlp_forward(&t, &m.dec, &ps, nn_input(&t, z, B, d), 1);
    long ny = (long)B * n_in;
    float *dec0 = nn_alloc((size_t)ny * sizeof *dec0);
    memcpy(dec0, y0->val.d, (size_t)ny * sizeof *dec0);

    Status st;
    assert_int_equal(canonical_fold(&c, &m, &ps, NULL, &st), 0);
    tape_reset(&t);
    model_encode(&t, &m, &ps, X, B, k, v);
    double zs = scale_of(v, (long)k * B * d);
    for (int blk = 0; blk < k; blk++)
        for (int s = 0; s < B; s++)
            for (int j = 0; j < d; j++) {
                double want = blk == 0 ? b[j] : 0;
                for (int i = 0; i < d; i++) want += A[j * d + i] * z[((long)blk * B + s) * d + i];
                want *= w[j];
                assert_close(v[((long)blk * B + s) * d + j], want, 2e-5 * zs, 0);
            }
    /* the new decoder at v */
    tape_reset(&t);
    Node *y1 = mlp_forward(&t, &m.dec, &ps, nn_input(&t, v, B, d), 1);
    double ys = scale_of(dec0, ny);
    for (long i = 0; i < ny; i++) assert_close(y1->val.d[i], dec0[i], 2e-5 * ys, 0);
    /* the law: at random states, w_j (canonical law at u)_j = (folded law at v)_j */
    double su[2 * 4], sv[2 * 4];
    double *th = nn_alloc((size_t)T * sizeof *th), *tc = nn_alloc((size_t)T * sizeof *tc);
    const float *xv = params_val(&ps, m.xi).d;
    for (int rep = 0; rep < 20; rep++) {
        for (int i = 0; i < nv; i++) {
            su[i] = rng_normal(&r);
            sv[i] = su[i] * w[i % d];
        }
        canonical_eval(&c, &m.lib, tc, su, 1);
        library_eval(&m.lib, th, sv, 1);
        for (int j = 0; j < d; j++) {
            double yu = 0, yv = 0, mag = 0;
            for (int q = 0; q < T; q++) {
                yu += c.xi[(long)q * d + j] * tc[q];
                yv += xv[(long)q * d + j] * th[q];
                mag += fabs(xv[(long)q * d + j] * th[q]);
                assert_int_equal(m.mask[(long)q * d + j], c.mask[(long)q * d + j]);
            }
            assert_close(yv, w[j] * yu, 1e-5 * (mag + 1), 0);
        }
    }
    /* Adam starts over */
    for (size_t i = 0; i < ps.n; i++) assert_true(ps.m[i] == 0 && ps.v[i] == 0);
    assert_int_equal(ps.step, 0);
    nn_free(th), nn_free(tc), nn_free(X), nn_free(z), nn_free(v), nn_free(dec0);
    tape_free(&t);
    canonical_free(&c);
    model_free(&m);
    params_free(&ps);
}

/* two latent variables, a polynomial law: a general map (rotation, shear, offset), w = 1 */
static void test_fold_general_map(void **state) {
    (void)state;
    const double A[4] = {0.8, -0.5, 0.3, 1.4}, b[2] = {0.7, -1.2}, w[2] = {1, 1};
    check_fold(2, 0, 2, A, b, w);
}

/* one latent variable with sin / cos terms: the frequency goes into the coordinate */
static void test_fold_frequency(void **state) {
    (void)state;
    const double A[1] = {-1.7}, b[1] = {0.4}, w[1] = {0.6};
    check_fold(1, 1, 3, A, b, w);
}

/* what does not fit is refused, and nothing is modified */
static void test_fold_refuses(void **state) {
    (void)state;
    Model m;
    ParamSet ps;
    build(&m, &ps, 2, 0, 2);
    float *before = nn_alloc((size_t)ps.n * sizeof *before);
    memcpy(before, ps.val, (size_t)ps.n * sizeof *before);
    Canonical c = {0};
    c.status = CANON_FOUND, c.k = 2, c.order = 2, c.n_terms = m.lib.n_terms;
    c.xi = nn_calloc((size_t)c.n_terms * 2, sizeof *c.xi);
    c.mask = nn_calloc((size_t)c.n_terms * 2, 1);
    const double A[4] = {1, 2, 2, 4}; /* singular */
    memcpy(c.A, A, sizeof A);
    c.w[0] = c.w[1] = 1;
    Status st;
    assert_int_equal(canonical_fold(&c, &m, &ps, NULL, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "singular"));
    c.A[3] = 1, c.w[1] = 0;
    assert_int_equal(canonical_fold(&c, &m, &ps, NULL, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "w2"));
    c.w[1] = 1, c.k = 1;
    assert_int_equal(canonical_fold(&c, &m, &ps, NULL, &st), ST_INPUT);
    c.k = 2, c.status = CANON_NOTHING;
    assert_int_equal(canonical_fold(&c, &m, &ps, NULL, &st), ST_INPUT);
    assert_memory_equal(before, ps.val, (size_t)ps.n * sizeof *before);
    nn_free(before);
    canonical_free(&c);
    model_free(&m);
    params_free(&ps);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fold_general_map),
        cmocka_unit_test(test_fold_frequency),
        cmocka_unit_test(test_fold_refuses),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
