/* tests/test_nn_ops.c: the matrix product, the arena, the random generator and every tape op. */
#include "nn/core.h"
#include "nn/mat.h"
#include "nn/par.h"
#include "nn/rng.h"
#include "nn/tape.h"
#include "tests/gradcheck.h"

/* Gradient-check tolerances for float32 ops (see tests/gradcheck.h). float32 carries about 7
 * significant digits; with inputs of order 1 and h = 1e-2 the rounding error of the difference
 * quotient is about 1e-7 / 1e-2 = 1e-5 of the loss scale and the truncation error O(h^2) about 1e-4,
 * so an error measure of 5e-3 leaves a wide margin while a wrong term gives an error of order 1.
 * The losses here are of order 1, whose float rounding (6e-8) over 2h leaves an absolute noise of
 * about 3e-6 in the numeric gradient: the floor 1e-3 keeps tiny gradients from failing on it, and a
 * gradient of 1e-4 computed as 0 still fails (error 0.09). */
static const GcOpts OPTS = {.h = 1e-2f, .tol = 5e-3f, .floor = 1e-3f, .max_checked = 64, .at_kink = NULL};

static void fill(Mat m, Rng *r, float lo, float hi) {
    for (long i = 0; i < mat_size(m); i++) m.d[i] = (float)(lo + (hi - lo) * rng_uniform(r));
}

/* The cblas wrapper against the triple loop, every transpose combination (common practice). */
static void test_gemm_matches_reference(void **state) {
    (void)state;
    Rng r;
    rng_seed(&r, 1);
    for (int ta = 0; ta < 2; ta++)
        for (int tb = 0; tb < 2; tb++) {
            int m = 7, n = 5, k = 9;
            float A[63], B[45], C1[35], C2[35];
            Mat a = ta ? mat_view(A, k, m) : mat_view(A, m, k);
            Mat b = tb ? mat_view(B, n, k) : mat_view(B, k, n);
            fill(a, &r, -1, 1);
            fill(b, &r, -1, 1);
            fill(mat_view(C1, m, n), &r, -1, 1);
            memcpy(C2, C1, sizeof C1);
            mat_gemm(ta, tb, 0.5f, a, b, 0.25f, mat_view(C1, m, n));
            mat_gemm_ref(ta, tb, 0.5f, a, b, 0.25f, mat_view(C2, m, n));
            for (int i = 0; i < m * n; i++) assert_close(C1[i], C2[i], 1e-5, 1e-5);
        }
}

/* A product large enough to be split over two threads (by C's rows when m >= n, else by its columns)
 * matches the triple loop, every transpose combination, with beta != 0, and gives the same bits from
 * call to call (common practice: each block is its own cblas_sgemm over the whole of k). A wrong
 * block offset fails the comparison with the loop. */
static void test_gemm_split_matches_reference(void **state) {
    (void)state;
    Rng r;
    rng_seed(&r, 2);
    int shapes[2][3] = {{301, 70, 64}, {40, 333, 96}}; /* m, n, k: split by rows, then by columns */
    nn_set_threads(2);
    for (int s = 0; s < 2; s++)
        for (int ta = 0; ta < 2; ta++)
            for (int tb = 0; tb < 2; tb++) {
                int m = shapes[s][0], n = shapes[s][1], k = shapes[s][2];
                float *A = malloc(sizeof(float) * m * k), *B = malloc(sizeof(float) * k * n);
                float *C0 = malloc(sizeof(float) * m * n), *C[3];
                Mat a = ta ? mat_view(A, k, m) : mat_view(A, m, k);
                Mat b = tb ? mat_view(B, n, k) : mat_view(B, k, n);
                fill(a, &r, -1, 1);
                fill(b, &r, -1, 1);
                fill(mat_view(C0, m, n), &r, -1, 1);
                for (int i = 0; i < 3; i++) {
                    C[i] = malloc(sizeof(float) * m * n);
                    memcpy(C[i], C0, sizeof(float) * m * n);
                    (i == 2 ? mat_gemm_ref : mat_gemm)(ta, tb, 0.5f, a, b, 0.25f, mat_view(C[i], m, n));
                }
                assert_memory_equal(C[0], C[1], sizeof(float) * m * n);
                for (long i = 0; i < (long)m * n; i++) assert_close(C[0][i], C[2][i], 1e-5, 1e-5);
                free(A), free(B), free(C0), free(C[0]), free(C[1]), free(C[2]);
            }
    nn_set_threads(1);
}

/* A hand example: [1 2; 3 4] [5 6; 7 8] = [19 22; 43 50]. */
static void test_gemm_hand_example(void **state) {
    (void)state;
    float A[] = {1, 2, 3, 4}, B[] = {5, 6, 7, 8}, C[4];
    mat_gemm(0, 0, 1, mat_view(A, 2, 2), mat_view(B, 2, 2), 0, mat_view(C, 2, 2));
    assert_true(C[0] == 19 && C[1] == 22 && C[2] == 43 && C[3] == 50);
}

static void test_arena_reuses_memory_after_first_step(void **state) {
    (void)state;
    Arena a;
    arena_init(&a, 4096);
    for (int step = 0; step < 5; step++) {
        long before = a.sys_allocs;
        for (int i = 0; i < 100; i++) {
            float *p = arena_floats(&a, 1000);
            assert_int_equal((uintptr_t)p % 64, 0);
            p[999] = 1.0f;
        }
        if (step >= 1) assert_int_equal(a.sys_allocs, before); /* steady state: no system allocation */
        arena_reset(&a);
    }
    assert_true(a.high >= 100 * 4000);
    arena_free(&a);
}

/* xoshiro256** reference output. The first outputs for the state s = {1, 2, 3, 4} are computed
 * here from the algorithm's definition in "Scrambled Linear Pseudorandom Number Generators" (ACM
 * TOMS 2021, Fig. 1): result = rotl(s1 * 5, 7) * 9 = rotl(10, 7) * 9 = 1280 * 9 = 11520; the second
 * follows from the state update (s = {7, 0, 262146, 211106232532992}): rotl(0, 7) * 9 = 0. */
static void test_rng_reference_values(void **state) {
    (void)state;
    Rng r = {{1, 2, 3, 4}};
    assert_int_equal(rng_u64(&r), 11520);
    assert_int_equal(rng_u64(&r), 0);
    /* save and restore reproduces the stream */
    rng_seed(&r, 42);
    Rng saved = r;
    uint64_t a = rng_u64(&r), b = rng_u64(&r);
    r = saved;
    assert_true(rng_u64(&r) == a && rng_u64(&r) == b);
    /* uniform in [0,1) with mean 1/2 and variance 1/12 (common practice), 1e5 draws: 4 sigma */
    double s = 0, s2 = 0;
    for (int i = 0; i < 100000; i++) {
        double u = rng_uniform(&r);
        assert_true(u >= 0 && u < 1);
        s += u;
        s2 += u * u;
    }
    assert_close(s / 1e5, 0.5, 4 * sqrt(1.0 / 12 / 1e5), 0);
    assert_close(s2 / 1e5 - (s / 1e5) * (s / 1e5), 1.0 / 12, 2e-3, 0);
}

/* ---- per-op gradient checks ------------------------------------------------------------------- */

typedef struct {
    int op;     /* which op to check */
    int ta, tb;
    ActId act;
    float *target;
} OpCase;

static Node *build_op(Tape *t, ParamSet *ps, void *ctx) {
    OpCase *c = ctx;
    Node *a = nn_param(t, ps, 0), *b = nn_param(t, ps, 1), *y = NULL;
    switch (c->op) {
    case OP_MATMUL: y = nn_matmul(t, a, b, c->ta, c->tb); break;
    case OP_BIAS_ADD: y = nn_bias_add(t, a, nn_rows(t, b, 0, 1)); break;
    case OP_ADD: y = nn_add(t, a, b); break;
    case OP_SUB: y = nn_sub(t, a, b); break;
    case OP_MUL: y = nn_mul(t, a, b); break;
    case OP_SCALE: y = nn_scale(t, a, -1.7f); break;
    case OP_ACT: y = nn_act(t, a, c->act); break;
    case OP_ROWS: y = nn_mul(t, nn_rows(t, a, 1, 3), nn_rows(t, b, 0, 3)); break;
    case OP_VSTACK: y = nn_vstack(t, a, b); break;
    case OP_HSTACK: y = nn_hstack(t, a, b); break;
    case OP_SUM_ABS: return nn_sum_abs(t, nn_mul(t, a, b));
    default: fail_msg("no case for op %d", c->op);
    }
    /* a smooth scalar on top: mean((y - target)^2) exercises OP_SUB and OP_MEAN_SQ too */
    Node *tg = nn_input(t, c->target, y->val.rows, y->val.cols);
    return nn_mean_sq(t, nn_sub(t, y, tg));
}

static int near_zero(float v, float h) { return fabsf(v) < 2 * h; }

static void check_op(int op, int ar, int ac, int br, int bc, int ta, int tb, ActId act) {
    ParamSet ps;
    params_init(&ps);
    params_add(&ps, "a", ar, ac);
    params_add(&ps, "b", br, bc);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 7 + op);
    fill(params_val(&ps, 0), &r, -1.5f, 1.5f);
    fill(params_val(&ps, 1), &r, -1.5f, 1.5f);
    float target[256];
    for (int i = 0; i < 256; i++) target[i] = (float)(rng_uniform(&r) - 0.5);
    OpCase c = {op, ta, tb, act, target};
    Tape t;
    tape_init(&t, 64, 1 << 16);
    GcOpts o = OPTS;
    if (op == OP_SUM_ABS) o.at_kink = near_zero; /* |a b| has a kink where a b = 0: skip a, b near 0 */
    gradcheck(&t, &ps, build_op, &c, &o);
    tape_free(&t);
    params_free(&ps);
}

static void test_grad_matmul(void **state) {
    (void)state;
    check_op(OP_MATMUL, 4, 3, 3, 5, 0, 0, 0);
    check_op(OP_MATMUL, 3, 4, 3, 5, 1, 0, 0);
    check_op(OP_MATMUL, 4, 3, 5, 3, 0, 1, 0);
    check_op(OP_MATMUL, 3, 4, 5, 3, 1, 1, 0);
}
static void test_grad_bias_add(void **state) { (void)state; check_op(OP_BIAS_ADD, 4, 3, 2, 3, 0, 0, 0); }
static void test_grad_add(void **state) { (void)state; check_op(OP_ADD, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_sub(void **state) { (void)state; check_op(OP_SUB, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_mul(void **state) { (void)state; check_op(OP_MUL, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_scale(void **state) { (void)state; check_op(OP_SCALE, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_sum_abs(void **state) { (void)state; check_op(OP_SUM_ABS, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_rows(void **state) { (void)state; check_op(OP_ROWS, 4, 3, 4, 3, 0, 0, 0); }
static void test_grad_vstack(void **state) { (void)state; check_op(OP_VSTACK, 4, 3, 2, 3, 0, 0, 0); }
static void test_grad_hstack(void **state) { (void)state; check_op(OP_HSTACK, 4, 3, 4, 2, 0, 0, 0); }
static void test_grad_activations(void **state) {
    (void)state;
    for (int a = 0; a < ACT_COUNT; a++) check_op(OP_ACT, 4, 3, 4, 3, 0, 0, (ActId)a);
}

/* Each activation's tabulated derivatives against central differences of the one below it
 * (common practice): s' ~ (s(x+h) - s(x-h)) / 2h, likewise s'' from s' and s''' from s''. The closed
 * forms are evaluated in float: h = 1e-2 gives truncation ~1e-5 and rounding ~1e-5. */
static void test_activation_derivatives(void **state) {
    (void)state;
    const float h = 1e-2f;
    for (int a = 0; a < ACT_COUNT; a++) {
        for (float x = -4.0f; x <= 4.0f; x += 0.37f) {
            float dp[4], dm[4], d[4];
            act_table[a].fn(x + h, dp);
            act_table[a].fn(x - h, dm);
            act_table[a].fn(x, d);
            for (int o = 1; o < 4; o++) assert_close(d[o], (dp[o - 1] - dm[o - 1]) / (2 * h), 2e-4, 2e-3);
        }
    }
    /* published values: sigmoid(0) = 1/2, tanh(1) = 0.7615941559557649, softplus(0) = ln 2 */
    float d[4];
    act_table[ACT_SIGMOID].fn(0, d);
    assert_close(d[0], 0.5, 1e-7, 0);
    assert_close(d[1], 0.25, 1e-7, 0);
    act_table[ACT_TANH].fn(1, d);
    assert_close(d[0], 0.7615941559557649, 1e-7, 0);
    act_table[ACT_SOFTPLUS].fn(0, d);
    assert_close(d[0], 0.6931471805599453, 1e-7, 0);
    assert_int_equal(act_from_name("silu"), ACT_SILU);
    assert_int_equal(act_from_name("nonsense"), ACT_COUNT);
    /* the derivatives from the output are the same bits as those from the input */
    for (int a = 0; a < ACT_COUNT; a++) {
        if (!act_table[a].from_out) continue;
        for (float x = -9.0f; x <= 9.0f; x += 0.13f) {
            float dx[4], dy[4];
            act_table[a].fn(x, dx);
            act_table[a].from_out(dx[0], dy);
            for (int o = 0; o < 4; o++) assert_true(dx[o] == dy[o]);
        }
    }
}

/* The exponential without a library call and the sigmoid built on it, against exp in double (common
 * practice: a float function within 1 ulp of the correctly rounded value; the sigmoid within a few
 * float roundings, 3e-7 relative, of 1 / (1 + e^-x)). */
static void test_exp_and_sigmoid_accuracy(void **state) {
    (void)state;
    for (int i = 0; i <= 1000000; i++) {
        float t = -87.0f * (float)i / 1e6f;
        float got = act_exp_nonpos(t), want = (float)exp((double)t);
        assert_true(fabsf(got - want) <= nextafterf(want, INFINITY) - want);
    }
    assert_true(act_exp_nonpos(0.0f) == 1.0f);
    assert_true(act_exp_nonpos(-INFINITY) > 0 && act_exp_nonpos(-INFINITY) < 2e-38f);
    assert_true(isnan(act_exp_nonpos(NAN)) && isnan(act_sigmoid_value(NAN)));
    for (float x = -87.0f; x <= 80.0f; x += 1.0e-3f) {
        double want = 1.0 / (1.0 + exp(-(double)x));
        assert_close(act_sigmoid_value(x), want, 0, 3e-7);
    }
    assert_true(act_sigmoid_value(0.0f) == 0.5f && act_sigmoid_value(INFINITY) == 1.0f);
}

/* ---- the linear output layer fused with squared errors ---------------------------------------- */

typedef struct {
    int k, n_blocks, blocks[3];
    float w[3];
    float *y;   /* (k B, n_out) */
    int generic;    /* build the same loss from generic ops instead */
} SqErrCase;

static Node *build_sq_err(Tape *t, ParamSet *ps, void *ctx) {
    SqErrCase *c = ctx;
    Node *h = nn_param(t, ps, 0), *W = nn_param(t, ps, 1), *b = nn_param(t, ps, 2);
    int B = h->val.rows / c->k, n_out = W->val.cols;
    Node *y = nn_input(t, c->y, c->k * B, n_out);
    if (!c->generic) return nn_dense_sq_err(t, h, W, b, y, c->k, c->n_blocks, c->blocks, c->w);
    Node *out = nn_dense_t(t, h, W, b, c->k, ACT_NONE), *loss = NULL;
    for (int i = 0; i < c->n_blocks; i++) {
        int r0 = c->blocks[i] * B;
        Node *term = nn_scale(t, nn_mean_sq(t, nn_sub(t, nn_rows(t, out, r0, B), nn_rows(t, y, r0, B))), c->w[i]);
        loss = loss ? nn_add(t, loss, term) : term;
    }
    return loss;
}

static void sq_err_params(ParamSet *ps, int k, int B, int n_in, int n_out, uint64_t seed, float **y) {
    params_init(ps);
    params_add(ps, "h", k * B, n_in);
    params_add(ps, "W", n_in, n_out);
    params_add(ps, "b", 1, n_out);
    params_alloc(ps);
    Rng r;
    rng_seed(&r, seed);
    fill(params_val(ps, 0), &r, -1, 1);
    fill(params_val(ps, 1), &r, -0.8f, 0.8f);
    fill(params_val(ps, 2), &r, -0.5f, 0.5f);
    *y = malloc(sizeof(float) * (size_t)k * B * n_out);
    for (long i = 0; i < (long)k * B * n_out; i++) (*y)[i] = (float)(rng_uniform(&r) - 0.5);
}

/* Every choice of blocks (consecutive or not), by central differences and against the same loss
 * from generic ops (dense_t, rows, sub, mean_sq, scale, add: same math, so values and gradients
 * agree to float rounding). */
static void test_grad_dense_sq_err(void **state) {
    (void)state;
    static const int choice[][4] = {/* k, n_blocks, blocks */
                                    {1, 1, 0, 0}, {2, 2, 0, 1}, {2, 1, 1, 0}, {3, 2, 0, 2},
                                    {3, 3, 0, 1}, {3, 2, 1, 2}, {3, 1, 2, 0}};
    for (size_t ci = 0; ci < sizeof choice / sizeof choice[0]; ci++) {
        int k = choice[ci][0], B = 3, n_in = 4, n_out = 5;
        SqErrCase c = {k, choice[ci][1], {choice[ci][2], choice[ci][3], 2}, {1.0f, 0.4f, 0.7f}, NULL, 0};
        ParamSet ps;
        sq_err_params(&ps, k, B, n_in, n_out, 300 + ci, &c.y);
        Tape t;
        tape_init(&t, 32, 1 << 16);
        gradcheck(&t, &ps, build_sq_err, &c, &OPTS);
        /* against the generic ops */
        float *g = malloc(ps.n * sizeof(float));
        double v[2];
        for (int gen = 0; gen < 2; gen++) {
            c.generic = gen;
            tape_reset(&t);
            params_zero_grad(&ps);
            Node *loss = build_sq_err(&t, &ps, &c);
            v[gen] = loss->val.d[0];
            tape_backward(&t, loss);
            if (!gen) memcpy(g, ps.grad, ps.n * sizeof(float));
        }
        assert_close(v[0], v[1], 1e-6, 1e-6);
        for (size_t i = 0; i < ps.n; i++) assert_close(g[i], ps.grad[i], 1e-6, 1e-5);
        free(g);
        free(c.y);
        tape_free(&t);
        params_free(&ps);
    }
}

/* A step's passes give the same bits at 1 and 2 threads (elementwise passes are split over
 * threads; reductions are taken over fixed row blocks): a sigmoid dense_t layer with tangents
 * feeding dense_sq_err, forward and backward, on shapes large enough to be split. The products stay
 * whole here (mat_set_split_min): split, their blocks may round differently (see nn/mat.h). */
static void test_ops_same_bits_any_thread_count(void **state) {
    (void)state;
    int k = 3, B = 600, n_in = 40, n_mid = 128, n_out = 700, blocks[2] = {0, 2};
    float w[2] = {1.0f, 0.3f};
    ParamSet ps;
    params_init(&ps);
    params_add(&ps, "h", k * B, n_in);
    params_add(&ps, "W1", n_in, n_mid);
    params_add(&ps, "b1", 1, n_mid);
    params_add(&ps, "W2", n_mid, n_out);
    params_add(&ps, "b2", 1, n_out);
    params_alloc(&ps);
    Rng r;
    rng_seed(&r, 99);
    for (int i = 0; i < 5; i++) fill(params_val(&ps, i), &r, -1, 1);
    float *y = malloc(sizeof(float) * (size_t)k * B * n_out), *grad[2], loss[2];
    for (long i = 0; i < (long)k * B * n_out; i++) y[i] = (float)(rng_uniform(&r) - 0.5);
    for (int th = 1; th <= 2; th++) {
        nn_set_threads(th);
        double split = mat_set_split_min(INFINITY);
        Tape t;
        tape_init(&t, 32, 1 << 20);
        params_zero_grad(&ps);
        Node *a = nn_dense_t(&t, nn_param(&t, &ps, 0), nn_param(&t, &ps, 1), nn_param(&t, &ps, 2), k, ACT_SIGMOID);
        Node *l = nn_dense_sq_err(&t, a, nn_param(&t, &ps, 3), nn_param(&t, &ps, 4), nn_input(&t, y, k * B, n_out), k,
                                  2, blocks, w);
        tape_backward(&t, l);
        loss[th - 1] = l->val.d[0];
        grad[th - 1] = malloc(ps.n * sizeof(float));
        memcpy(grad[th - 1], ps.grad, ps.n * sizeof(float));
        tape_free(&t);
        mat_set_split_min(split);
    }
    nn_set_threads(1);
    assert_true(loss[0] == loss[1]);
    assert_memory_equal(grad[0], grad[1], ps.n * sizeof(float));
    free(grad[0]), free(grad[1]), free(y);
    params_free(&ps);
}

/* Forward values of the reductions, by hand. */
static void test_reduction_values(void **state) {
    (void)state;
    float a[] = {1, -2, 3, -4};
    Tape t;
    tape_init(&t, 8, 4096);
    Node *x = nn_input(&t, a, 2, 2);
    assert_close(nn_mean_sq(&t, x)->val.d[0], (1 + 4 + 9 + 16) / 4.0, 1e-6, 0);
    assert_close(nn_sum_abs(&t, x)->val.d[0], 10.0, 1e-6, 0);
    tape_free(&t);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_gemm_matches_reference),
        cmocka_unit_test(test_gemm_hand_example),
        cmocka_unit_test(test_gemm_split_matches_reference),
        cmocka_unit_test(test_arena_reuses_memory_after_first_step),
        cmocka_unit_test(test_rng_reference_values),
        cmocka_unit_test(test_grad_matmul),
        cmocka_unit_test(test_grad_bias_add),
        cmocka_unit_test(test_grad_add),
        cmocka_unit_test(test_grad_sub),
        cmocka_unit_test(test_grad_mul),
        cmocka_unit_test(test_grad_scale),
        cmocka_unit_test(test_grad_sum_abs),
        cmocka_unit_test(test_grad_rows),
        cmocka_unit_test(test_grad_vstack),
        cmocka_unit_test(test_grad_hstack),
        cmocka_unit_test(test_grad_activations),
        cmocka_unit_test(test_activation_derivatives),
        cmocka_unit_test(test_reduction_values),
        cmocka_unit_test(test_exp_and_sigmoid_accuracy),
        cmocka_unit_test(test_grad_dense_sq_err),
        cmocka_unit_test(test_ops_same_bits_any_thread_count),
    };
    return cmocka_run_group_tests_name("nn ops", tests, NULL, NULL);
}
