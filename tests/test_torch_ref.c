/* tests/test_torch_ref.c: encoder -> decoder networks with tangents against PyTorch.
 *
 * Source: PyTorch (Debian python3-torch 1.13), autograd, float64 reference, through the fixture
 * tests/reference/nn_fixture.txt written by tests/reference/make_nn_fixture.py. There the tangents
 * z', z'', x_hat', x_hat'' are torch's own derivatives along the curve x + t x' + t^2/2 x'' (nested
 * jvp), not our propagation formulas, and the gradients are torch's backward through them. Here the
 * same networks run on our tape in float32: values, every parameter gradient, and the loss along 20
 * Adam steps (torch.optim.Adam, lr 1e-2, default betas, eps 1e-8) are compared.
 *
 * Tolerances. Weights and inputs are float32 numbers on both sides, so the only difference is float32
 * rounding (unit roundoff 6e-8) in our forward and backward: each value passes through at most ~8
 * rounded ops per layer and sums of at most 7 terms, and the second tangent and its backward involve
 * s''' and products of tangents, so relative errors of a few 1e-7 are expected (measured: below
 * 1.5e-7 for values, 2.2e-7 for gradients). Each entry is compared as |ours - ref| <= TOL * (|ref| +
 * max|ref| of its matrix), i.e. relative to the element and, near zero, to the matrix's scale:
 * TOL = 2e-5, about 100 times the measured error, while a wiring fault (a wrong weight, a dropped
 * s'' term, a transposed product) changes entries by 1e-2 or more. Along the Adam trajectory the
 * rounding could grow (m / sqrt(v) divides two rounded quantities and updates are lr-sized whatever
 * the gradient size); measured: below 2e-7 relative over 20 steps. rtol 1e-5 keeps a 50-fold margin
 * and still catches small optimiser faults: beta2 = 0.99 instead of 0.999 moves the loss by 1e-4
 * relative within 12 steps, a missing bias correction by far more at the first step. */
#include "nn/adam.h"
#include "nn/mlp.h"
#include "nn/tape.h"
#include "tests/testutil.h"

#define FIXTURE "tests/reference/nn_fixture.txt"

static const double TOL = 2e-5;        /* values and gradients, scaled as above */
static const double TRAJ_RTOL = 1e-5;  /* loss along the Adam trajectory */
static const float W_X[3] = {1.0f, 0.5f, 0.25f}, W_Z[2] = {0.3f, 0.2f};
enum { ADAM_STEPS = 20 };

/* ---- the fixture ------------------------------------------------------------------------------ */

typedef struct {
    char name[64];
    int rows, cols;
    double *v;  /* (rows, cols) */
} Entry;

static Entry *entries;
static int n_entries;

static int fixture_load(void **state) {
    (void)state;
    FILE *f = fopen(FIXTURE, "r");
    if (!f) {
        fprintf(stderr, "cannot open %s (run from the repository root)\n", FIXTURE);
        return -1;
    }
    int cap = 0;
    char line[256];
    while (fscanf(f, " %255s", line) == 1) {
        if (line[0] == '#') { /* comment: skip the rest of the line */
            int ch;
            while ((ch = fgetc(f)) != EOF && ch != '\n') {}
            continue;
        }
        if (n_entries == cap) {
            cap = cap ? 2 * cap : 64;
            entries = realloc(entries, (size_t)cap * sizeof *entries);
            if (!entries) return -1;
        }
        Entry *e = &entries[n_entries++];
        snprintf(e->name, sizeof e->name, "%.63s", line);
        if (fscanf(f, "%d %d", &e->rows, &e->cols) != 2 || e->rows <= 0 || e->cols <= 0) return -1;
        e->v = malloc((size_t)e->rows * e->cols * sizeof(double));
        if (!e->v) return -1;
        for (long i = 0; i < (long)e->rows * e->cols; i++)
            if (fscanf(f, "%lf", &e->v[i]) != 1) {
                fprintf(stderr, "%s: short entry %s\n", FIXTURE, e->name);
                return -1;
            }
    }
    fclose(f);
    return n_entries > 0 ? 0 : -1;
}

static int fixture_free(void **state) {
    (void)state;
    for (int i = 0; i < n_entries; i++) free(entries[i].v);
    free(entries);
    return 0;
}

static const Entry *get(const char *case_name, const char *what, int rows, int cols) {
    char name[64];
    snprintf(name, sizeof name, "%s/%s", case_name, what);
    for (int i = 0; i < n_entries; i++)
        if (!strcmp(entries[i].name, name)) {
            if (entries[i].rows != rows || entries[i].cols != cols)
                fail_msg("%s is (%d,%d) in the fixture, the test expects (%d,%d)", name, entries[i].rows,
                         entries[i].cols, rows, cols);
            return &entries[i];
        }
    fail_msg("%s missing from %s", name, FIXTURE);
    return NULL;
}

static void to_float(float *dst, const Entry *e) {
    for (long i = 0; i < (long)e->rows * e->cols; i++) dst[i] = (float)e->v[i];
}

/* |ours - ref| <= TOL (|ref| + max|ref|) for every entry; returns the worst ratio error / bound. */
static double compare(const char *case_name, const char *what, const float *ours, int rows, int cols) {
    const Entry *e = get(case_name, what, rows, cols);
    long n = (long)rows * cols;
    double scale = 0, worst = 0;
    for (long i = 0; i < n; i++) scale = fmax(scale, fabs(e->v[i]));
    for (long i = 0; i < n; i++) {
        double err = fabs(ours[i] - e->v[i]), bound = TOL * (fabs(e->v[i]) + scale);
        if (!(err <= bound))
            fail_msg("%s/%s[%ld]: ours %.9g, torch %.9g (bound %.3g)", case_name, what, i, (double)ours[i],
                     e->v[i], bound);
        worst = fmax(worst, err / (fabs(e->v[i]) + scale + 1e-300));
    }
    return worst;
}

/* ---- the cases (same table as the script) ----------------------------------------------------- */

typedef struct {
    const char *name;
    int k, B;
    int n_enc, we[4], n_dec, wd[4];
    ActId ae, ad;
} Case;

static const Case CASES[] = {
    {"o1_sigmoid", 2, 4, 2, {6, 5, 2}, 2, {2, 5, 6}, ACT_SIGMOID, ACT_SIGMOID},
    {"o2_sigmoid", 3, 4, 3, {7, 6, 4, 2}, 3, {2, 4, 6, 7}, ACT_SIGMOID, ACT_SIGMOID},
    {"o2_tanh_silu", 3, 3, 2, {5, 6, 3}, 2, {3, 6, 5}, ACT_TANH, ACT_SILU},
    {"o2_softplus", 3, 3, 2, {5, 4, 2}, 2, {2, 4, 5}, ACT_SOFTPLUS, ACT_SOFTPLUS},
};

typedef struct {
    const Case *c;
    Mlp enc, dec;
    ParamSet ps;
    float *X, *c1, *c2;   /* (k*B, n), (B, nz), (B, nz) */
    Node *z, *xh;         /* the last graph's stacked outputs */
} Net;

static void net_init(Net *n, const Case *c) {
    n->c = c;
    int nx = c->we[0], nz = c->we[c->n_enc];
    params_init(&n->ps);
    mlp_declare(&n->enc, &n->ps, "enc", c->we, c->n_enc, c->ae);
    mlp_declare(&n->dec, &n->ps, "dec", c->wd, c->n_dec, c->ad);
    params_alloc(&n->ps);
    for (int i = 0; i < n->ps.n_views; i++) {
        Mat v = params_val(&n->ps, i);
        to_float(v.d, get(c->name, n->ps.views[i].name, v.rows, v.cols));
    }
    n->X = malloc((size_t)c->k * c->B * nx * sizeof(float));
    n->c1 = malloc((size_t)c->B * nz * sizeof(float));
    n->c2 = malloc((size_t)c->B * nz * sizeof(float));
    assert_true(n->X && n->c1 && n->c2);
    to_float(n->X, get(c->name, "X", c->k * c->B, nx));
    to_float(n->c1, get(c->name, "c1", c->B, nz));
    to_float(n->c2, get(c->name, "c2", c->B, nz));
}

static void net_free(Net *n) {
    free(n->X);
    free(n->c1);
    free(n->c2);
    params_free(&n->ps);
}

/* loss = sum_j W_X[j] mean|x^(j) - x_hat^(j)|^2 + W_Z[0] mean|z' - c1|^2 (+ W_Z[1] mean|z'' - c2|^2) */
static Node *build(Tape *t, Net *n) {
    const Case *c = n->c;
    int B = c->B, nz = c->we[c->n_enc];
    Node *x = nn_input(t, n->X, c->k * B, c->we[0]);
    n->z = mlp_forward(t, &n->enc, &n->ps, x, c->k);
    n->xh = mlp_forward(t, &n->dec, &n->ps, n->z, c->k);
    Node *loss = NULL;
    for (int j = 0; j < c->k; j++) {
        Node *d = nn_sub(t, nn_rows(t, x, j * B, B), nn_rows(t, n->xh, j * B, B));
        Node *term = nn_scale(t, nn_mean_sq(t, d), W_X[j]);
        loss = loss ? nn_add(t, loss, term) : term;
    }
    float *targets[2] = {n->c1, n->c2};
    for (int j = 1; j < c->k; j++) {
        Node *d = nn_sub(t, nn_rows(t, n->z, j * B, B), nn_input(t, targets[j - 1], B, nz));
        loss = nn_add(t, loss, nn_scale(t, nn_mean_sq(t, d), W_Z[j - 1]));
    }
    return loss;
}

/* ---- the tests -------------------------------------------------------------------------------- */

/* z, z', z'', x_hat and its tangents, the loss, and every parameter gradient. */
static void test_values_and_gradients(void **state) {
    (void)state;
    for (size_t ci = 0; ci < sizeof CASES / sizeof CASES[0]; ci++) {
        const Case *c = &CASES[ci];
        Net n;
        net_init(&n, c);
        Tape t;
        tape_init(&t, 128, 1 << 16);
        params_zero_grad(&n.ps);
        Node *loss = build(&t, &n);
        tape_backward(&t, loss);
        double wv = 0, wg = 0;
        wv = fmax(wv, compare(c->name, "Z", n.z->val.d, n.z->val.rows, n.z->val.cols));
        wv = fmax(wv, compare(c->name, "XH", n.xh->val.d, n.xh->val.rows, n.xh->val.cols));
        wv = fmax(wv, compare(c->name, "loss", loss->val.d, 1, 1));
        for (int i = 0; i < n.ps.n_views; i++) {
            char what[64];
            snprintf(what, sizeof what, "grad/%s", n.ps.views[i].name);
            Mat g = params_grad(&n.ps, i);
            wg = fmax(wg, compare(c->name, what, g.d, g.rows, g.cols));
        }
        printf("  %-13s worst relative error: values %.2g, gradients %.2g\n", c->name, wv, wg);
        tape_free(&t);
        net_free(&n);
    }
}

/* The loss before each of 20 Adam steps and after the last follows torch's: the optimizer checked against the reference library over a whole run, not one step. */
static void test_adam_trajectory(void **state) {
    (void)state;
    for (size_t ci = 0; ci < sizeof CASES / sizeof CASES[0]; ci++) {
        const Case *c = &CASES[ci];
        Net n;
        net_init(&n, c);
        const Entry *ref = get(c->name, "adam_loss", 1, ADAM_STEPS + 1);
        Tape t;
        tape_init(&t, 128, 1 << 16);
        AdamCfg cfg = adam_defaults();
        cfg.lr = 1e-2f;
        double worst = 0;
        for (int s = 0; s <= ADAM_STEPS; s++) {
            tape_reset(&t);
            params_zero_grad(&n.ps);
            Node *loss = build(&t, &n);
            double ours = loss->val.d[0], want = ref->v[s];
            if (!(fabs(ours - want) <= TRAJ_RTOL * fabs(want)))
                fail_msg("%s: loss before Adam step %d: ours %.9g, torch %.9g", c->name, s + 1, ours, want);
            worst = fmax(worst, fabs(ours - want) / fabs(want));
            if (s == ADAM_STEPS) break;
            tape_backward(&t, loss);
            adam_step(&n.ps, &cfg);
        }
        /* the trajectory is not flat, so following it means something */
        assert_true(ref->v[ADAM_STEPS] < 0.8 * ref->v[0]);
        printf("  %-13s Adam trajectory: worst relative error %.2g over %d steps\n", c->name, worst, ADAM_STEPS);
        tape_free(&t);
        net_free(&n);
    }
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_values_and_gradients),
        cmocka_unit_test(test_adam_trajectory),
    };
    return cmocka_run_group_tests_name("against PyTorch autograd", tests, fixture_load, fixture_free);
}
