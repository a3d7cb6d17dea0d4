/* tests/test_library.c: the candidate library. Term names and their order are fixed here (they
 * are part of the exported equations and of the equations JSON; docs/sparse.md documents them);
 * values against hand computation; the derivative against central finite differences in double
 * and, through the tape, in float32 (common practice: gradient checks of a hand-written backward). */
#include "sparse/library.h"
#include "nn/rng.h"
#include "tests/gradcheck.h"

static Library make(LibrarySpec sp) {
    Library lib;
    Status st;
    int rc = library_init(&lib, &sp, &st);
    if (rc) fail_msg("library_init: %s", st.msg);
    return lib;
}

static void expect_names(const Library *lib, const char *const *want, int n) {
    assert_int_equal(lib->n_terms, n);
    for (int i = 0; i < n; i++) {
        if (strcmp(lib->names[i], want[i])) fail_msg("term %d is '%s', expected '%s'", i, lib->names[i], want[i]);
        /* every name finds its own term again (names parse back) */
        assert_int_equal(library_find(lib, want[i]), i);
    }
}

/* Term order, first order: constant, monomials by degree in lexicographic order of the sorted
 * variable tuple, then per multiplier k, per variable: sin, cos (library.h, docs/sparse.md). */
static void test_order_first(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 1);
    sp.degree = 3;
    sp.trig = 1;
    sp.n_freq = 2;
    sp.freq[1] = 2;
    Library lib = make(sp);
    static const char *const want[] = {"1",       "z1",      "z2",         "z1^2",       "z1*z2",
                                       "z2^2",    "z1^3",    "z1^2*z2",    "z1*z2^2",    "z2^3",
                                       "sin(z1)", "cos(z1)", "sin(z2)",    "cos(z2)",    "sin(2*z1)",
                                       "cos(2*z1)", "sin(2*z2)", "cos(2*z2)"};
    expect_names(&lib, want, (int)(sizeof want / sizeof *want));
    library_free(&lib);
}

/* Second order: the state is (z, z'), velocities named dz<i>/dt. */
static void test_order_second(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(1, 2);
    sp.trig = 1;
    Library lib = make(sp);
    static const char *const want[] = {"1",          "z1",      "dz1/dt",  "z1^2",        "z1*dz1/dt",
                                       "(dz1/dt)^2", "sin(z1)", "cos(z1)", "sin(dz1/dt)", "cos(dz1/dt)"};
    expect_names(&lib, want, 10);
    library_free(&lib);

    sp.trig_velocity = 0;   /* sin / cos of z only */
    sp.constant = 0;
    sp.degree = 1;
    lib = make(sp);
    static const char *const want2[] = {"z1", "dz1/dt", "sin(z1)", "cos(z1)"};
    expect_names(&lib, want2, 4);
    library_free(&lib);
}

/* Number of terms of a degree-2 library in 3 variables: 1 + 3 + 6 (C(n+d-1, d) monomials of
 * degree d, common practice), the Lorenz library. */
static void test_count(void **state) {
    (void)state;
    Library lib = make(library_spec_default(3, 1));
    assert_int_equal(lib.n_terms, 10);
    assert_string_equal(lib.names[4], "z1^2");
    assert_string_equal(lib.names[9], "z3^2");
    library_free(&lib);
}

static void test_include_exclude(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 1);
    sp.n_include = 3;
    strcpy(sp.include[0], "z1^3");
    strcpy(sp.include[1], "sin(3 * z2)");
    strcpy(sp.include[2], "z2*z1");     /* already present: not repeated */
    sp.n_exclude = 2;
    strcpy(sp.exclude[0], "1");
    strcpy(sp.exclude[1], "z2 *  z1");  /* factor order and spacing do not matter */
    Library lib = make(sp);
    static const char *const want[] = {"z1", "z2", "z1^2", "z2^2", "z1^3", "sin(3*z2)"};
    expect_names(&lib, want, 6);
    library_free(&lib);

    /* the old form with a space for a product (before equations JSON version 2) still reads */
    strcpy(sp.include[1], "sin(3 z2)");
    strcpy(sp.include[2], "z2 z1");
    strcpy(sp.exclude[1], "z2  z1");
    lib = make(sp);
    expect_names(&lib, want, 6);
    library_free(&lib);
}

/* Which names write a product with a space (deprecated), and their spelling with '*'. */
static void test_old_form(void **state) {
    (void)state;
    static const char *const cases[][2] = {
        {"z1 z2", "z1*z2"},           {"z1^2 dz1/dt", "z1^2*dz1/dt"}, {"(dz1/dt)^2 z1", "(dz1/dt)^2*z1"},
        {"sin(2 z1)", "sin(2*z1)"},   {"cos(3  dz2/dt)", "cos(3*dz2/dt)"},
    };
    char b[LIB_NAME_MAX];
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++) {
        assert_int_equal(library_name_old_form(cases[i][0], b, sizeof b), 1);
        assert_string_equal(b, cases[i][1]);
    }
    static const char *const today[] = {"1", "z1", "z1*z2", "z1 * z2", " z1^2*dz1/dt ", "sin(2*z1)", "sin( z1 )",
                                        "(dz1/dt)^2"};
    for (size_t i = 0; i < sizeof today / sizeof *today; i++) assert_int_equal(library_name_old_form(today[i], NULL, 0), 0);
}

static void expect_error(LibrarySpec sp, const char *fragment) {
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), ST_INPUT);
    if (!strstr(st.msg, fragment)) fail_msg("message '%s' lacks '%s'", st.msg, fragment);
}

static void test_bad_specs(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 1);
    sp.n_exclude = 1;
    strcpy(sp.exclude[0], "z3");
    expect_error(sp, "no variable z3");
    strcpy(sp.exclude[0], "dz1/dt");
    expect_error(sp, "second-order");
    strcpy(sp.exclude[0], "sin(z1)");
    expect_error(sp, "no term 'sin(z1)'");
    strcpy(sp.exclude[0], "z1 +");
    expect_error(sp, "term 'z1 +'");
    strcpy(sp.exclude[0], "z1*");
    expect_error(sp, "a factor must follow '*'");
    strcpy(sp.exclude[0], "z1**z2");
    expect_error(sp, "term 'z1**z2'");
    strcpy(sp.exclude[0], "*z1");
    expect_error(sp, "term '*z1'");
    sp = library_spec_default(2, 3);
    expect_error(sp, "order 3");
    sp = library_spec_default(2, 1);
    sp.degree = 0, sp.constant = 0;
    expect_error(sp, "no terms");
    sp = library_spec_default(20, 1);
    sp.degree = 6;
    expect_error(sp, "more than");
}

static void test_latex_names(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(1, 2);
    sp.trig = 1;
    sp.freq[0] = 2;
    Library lib = make(sp);
    char b[LIB_NAME_MAX];
    library_term_name(&lib, library_find(&lib, "z1*dz1/dt"), NAME_LATEX, b, sizeof b);
    assert_string_equal(b, "z_{1} \\dot{z}_{1}");
    library_term_name(&lib, library_find(&lib, "(dz1/dt)^2"), NAME_LATEX, b, sizeof b);
    assert_string_equal(b, "\\dot{z}_{1}^{2}");
    library_term_name(&lib, library_find(&lib, "sin(2*z1)"), NAME_LATEX, b, sizeof b);
    assert_string_equal(b, "\\sin(2 z_{1})");
    library_free(&lib);
}

/* Values at one point against direct evaluation (definitions in library.h). */
static void test_values(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 1);
    sp.degree = 3;
    sp.trig = 1;
    sp.n_freq = 2;
    sp.freq[1] = 3;
    Library lib = make(sp);
    double s[2] = {0.7, -1.3}, th[18];
    library_eval(&lib, th, s, 1);
    double x = s[0], y = s[1];
    double want[18] = {1,         x,         y,         x * x,         x * y,         y * y,
                       x * x * x, x * x * y, x * y * y, y * y * y,     sin(x),        cos(x),
                       sin(y),    cos(y),    sin(3 * x), cos(3 * x), sin(3 * y), cos(3 * y)};
    for (int i = 0; i < 18; i++) assert_close(th[i], want[i], 1e-15, 1e-15);
    float sf[2] = {0.7f, -1.3f}, tf[18];
    library_eval_f(&lib, tf, sf, 1);
    for (int i = 0; i < 18; i++) assert_close(tf[i], want[i], 1e-6, 1e-6);
    library_free(&lib);
}

/* The double-precision derivative against central differences: truncation O(h^2) with h = 1e-5
 * and rounding O(eps / h) are both below 1e-8 here for terms of size ~1 (common practice). */
static void test_grad_double(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 2);
    sp.degree = 3;
    sp.trig = 1;
    sp.n_freq = 2;
    sp.freq[1] = 2;
    Library lib = make(sp);
    int T = lib.n_terms, V = lib.n_vars, B = 3;
    double s[3 * 4] = {0.3, -0.8, 1.1, 0.5, -1.2, 0.4, 0.9, -0.6, 0.05, 1.4, -0.2, 0.7};
    double *g = malloc(sizeof(double) * B * T), *th = malloc(sizeof(double) * B * T);
    double *tp = malloc(sizeof(double) * B * T), ds[12] = {0};
    for (int i = 0; i < B * T; i++) g[i] = sin(1.0 + i);   /* a fixed upstream gradient */
    library_grad(&lib, ds, g, s, B);
    const double h = 1e-5;
    for (int i = 0; i < B * V; i++) {
        double keep = s[i];
        s[i] = keep + h;
        library_eval(&lib, tp, s, B);
        s[i] = keep - h;
        library_eval(&lib, th, s, B);
        s[i] = keep;
        double num = 0;
        for (int j = 0; j < B * T; j++) num += g[j] * (tp[j] - th[j]) / (2 * h);
        assert_close(ds[i], num, 1e-8, 1e-8);
    }
    free(g), free(th), free(tp);
    library_free(&lib);
}

typedef struct {
    const Library *lib;
    float *r;   /* (B, T) fixed weights */
} OpCase;

/* loss = mean((Theta(s) * R)^2): smooth, every term weighted differently. */
static Node *build_op(Tape *t, ParamSet *ps, void *ctx) {
    OpCase *c = ctx;
    Node *s = nn_param(t, ps, 0);
    Node *th = library_op(t, c->lib, s);
    Node *r = nn_input(t, c->r, th->val.rows, th->val.cols);
    return nn_mean_sq(t, nn_mul(t, th, r));
}

/* The op on the tape, float32, against central differences of the float32 loss (error measure of
 * tests/gradcheck.h). Two errors compete: truncation h^2 |L'''| / (6 |L'|), which is ~1e-2 at
 * h = 3e-2 and falls 9-fold at h = 1e-2 (measured: the loss is a polynomial of degree 6 in s), and
 * float32 rounding eps_f |L| / (h |L'|), which is large because L is a mean over B x T elements, so
 * one element's gradient is ~|L| / (B T): ~1e-3 at h = 3e-3. With h = 5e-3 both are below ~1e-3;
 * the tolerance 5e-3 leaves margin, while a wrong derivative (a missing factor, a sign) gives an
 * error of order 1. */
static void test_grad_tape(void **state) {
    (void)state;
    for (int order = 1; order <= 2; order++) {
        LibrarySpec sp = library_spec_default(2, order);
        sp.degree = 3;
        sp.trig = 1;
        sp.n_freq = 2;
        sp.freq[1] = 2;
        Library lib = make(sp);
        int B = 5, V = lib.n_vars, T = lib.n_terms;
        ParamSet ps;
        params_init(&ps);
        params_add(&ps, "s", B, V);
        params_alloc(&ps);
        Rng rng;
        rng_seed(&rng, 11 + order);
        for (int i = 0; i < B * V; i++) ps.val[i] = (float)(2 * rng_uniform(&rng) - 1);
        OpCase c = {&lib, malloc(sizeof(float) * B * T)};
        for (int i = 0; i < B * T; i++) c.r[i] = (float)(0.5 + rng_uniform(&rng));
        Tape t;
        tape_init(&t, 16, 1 << 16);
        GcOpts o = {.h = 5e-3f, .tol = 5e-3f, .floor = 1e-4f, .max_checked = 100, .at_kink = NULL};
        double worst = gradcheck(&t, &ps, build_op, &c, &o);
        print_message("  order %d: worst gradient error %.2g (tolerance 5e-3)\n", order, worst);
        tape_free(&t);
        params_free(&ps);
        free(c.r);
        library_free(&lib);
    }
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_order_first),   cmocka_unit_test(test_order_second),
        cmocka_unit_test(test_count),         cmocka_unit_test(test_include_exclude),
        cmocka_unit_test(test_old_form),
        cmocka_unit_test(test_bad_specs),     cmocka_unit_test(test_latex_names),
        cmocka_unit_test(test_values),        cmocka_unit_test(test_grad_double),
        cmocka_unit_test(test_grad_tape),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
