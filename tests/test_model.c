/* tests/test_model.c: the joint model's loss. Its gradient with respect to every parameter (encoder,
 * decoder, Xi) against central finite differences, for first- and second-order models, and the loss
 * terms against a direct evaluation (common practice: a whole-model gradient check). */
#include "nn/adam.h"
#include "sparse/model.h"
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

static void check_model(int order) {
    Case c;
    ModelSpec sp = {0};
    sp.n_in = 7;
    sp.n_latent = 2;
    sp.order = order;
    sp.n_enc = 1;
    sp.enc_widths[0] = 5;
    sp.dec_mirror = 1;
    sp.act = ACT_TANH;
    sp.lib = library_spec_default(2, order);
    sp.lib.degree = 2;
    sp.lib.trig = 1;
    ParamSet ps;
    params_init(&ps);
    Status st;
    assert_int_equal(model_init(&c.m, &ps, &sp, &st), 0);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 77 + order);
    model_init_params(&c.m, &ps, &r);
    Mat xi = params_val(&ps, c.m.xi);
    for (long i = 0; i < mat_size(xi); i++) xi.d[i] = (float)(0.1 + 0.4 * rng_uniform(&r)) * (i % 2 ? 1 : -1);
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

static void test_first_order_model_gradients(void **state) { (void)state; check_model(1); }
static void test_second_order_model_gradients(void **state) { (void)state; check_model(2); }

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_first_order_model_gradients),
        cmocka_unit_test(test_second_order_model_gradients),
    };
    return cmocka_run_group_tests_name("joint model", tests, NULL, NULL);
}
