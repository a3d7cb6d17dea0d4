/* tests/test_adam.c: Adam against the update written out by hand from Algorithm 1 of "Adam: A Method
 * for Stochastic Optimization" (ICLR 2015), and Glorot initialisation bounds. */
#include "nn/adam.h"
#include "nn/mlp.h"
#include "nn/rng.h"
#include "tests/testutil.h"

/* Algorithm 1, in double, for one scalar parameter. */
typedef struct { double theta, m, v; int t; } Ref;

static void ref_step(Ref *r, double g, double lr, double b1, double b2, double eps) {
    r->t++;
    r->m = b1 * r->m + (1 - b1) * g;
    r->v = b2 * r->v + (1 - b2) * g * g;
    double mh = r->m / (1 - pow(b1, r->t)), vh = r->v / (1 - pow(b2, r->t));
    r->theta -= lr * mh / (sqrt(vh) + eps);
}

static void test_adam_matches_algorithm_1(void **state) {
    (void)state;
    ParamSet ps;
    params_init(&ps);
    params_add(&ps, "w", 3, 4);
    params_add(&ps, "b", 1, 5);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 2015);
    Ref ref[32];
    for (size_t i = 0; i < ps.n; i++) {
        ps.val[i] = (float)(rng_uniform(&r) - 0.5);
        ref[i] = (Ref){ps.val[i], 0, 0, 0};
    }
    AdamCfg c = {2e-3f, 0.9f, 0.999f, 1e-8f};
    for (int step = 0; step < 50; step++) {
        for (size_t i = 0; i < ps.n; i++) {
            /* a gradient that changes sign and scale over the steps */
            double g = sin(0.3 * step + (double)i) * (1 + (double)i / 10);
            ps.grad[i] = (float)g;
            ref_step(&ref[i], (float)g, c.lr, c.beta1, c.beta2, c.eps);
        }
        adam_step(&ps, &c);
        for (size_t i = 0; i < ps.n; i++) assert_close(ps.val[i], ref[i].theta, 1e-6, 1e-5);
    }
    assert_int_equal(ps.step, 50);
    params_free(&ps);
}

/* Section 2.1 of the paper: with bias correction, the first step has magnitude lr for any nonzero
 * gradient (m_hat / sqrt(v_hat) = g / |g|), up to eps. */
static void test_adam_first_step_is_lr(void **state) {
    (void)state;
    ParamSet ps;
    params_init(&ps);
    params_add(&ps, "w", 1, 3);
    params_alloc(&ps);
    float g[3] = {1e-3f, -5.0f, 200.0f};
    for (int i = 0; i < 3; i++) ps.grad[i] = g[i];
    AdamCfg c = adam_defaults();
    adam_step(&ps, &c);
    assert_close(ps.val[0], -1e-3, 1e-8, 1e-4);
    assert_close(ps.val[1], 1e-3, 1e-8, 1e-4);
    assert_close(ps.val[2], -1e-3, 1e-8, 1e-4);
    params_free(&ps);
}

/* Glorot uniform ("Understanding the difficulty of training deep feedforward neural networks",
 * AISTATS 2010, eq. 16): W ~ U(-r, r), r = sqrt(6 / (fan_in + fan_out)), so every weight lies in
 * (-r, r) and the variance is r^2 / 3 = 2 / (fan_in + fan_out). */
static void test_glorot_bounds_and_variance(void **state) {
    (void)state;
    int widths[] = {300, 200, 10};
    Mlp m;
    ParamSet ps;
    params_init(&ps);
    mlp_declare(&m, &ps, "enc", widths, 2, ACT_TANH);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 1);
    mlp_init_glorot(&m, &ps, &r);
    Mat W = params_val(&ps, m.W[0]);
    double rr = sqrt(6.0 / 500), s2 = 0;
    for (long i = 0; i < mat_size(W); i++) {
        assert_true(fabs(W.d[i]) < rr);
        s2 += (double)W.d[i] * W.d[i];
    }
    assert_close(s2 / mat_size(W), 2.0 / 500, 0, 0.02); /* 60000 draws: sd of the estimate ~0.4% */
    Mat b = params_val(&ps, m.b[0]);
    for (long i = 0; i < mat_size(b); i++) assert_true(b.d[i] == 0);
    params_free(&ps);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_adam_matches_algorithm_1),
        cmocka_unit_test(test_adam_first_step_is_lr),
        cmocka_unit_test(test_glorot_bounds_and_variance),
    };
    return cmocka_run_group_tests_name("adam and initialisation", tests, NULL, NULL);
}
