/* tests/test_integrate.c: RK4 and Dormand-Prince 5(4) against exact solutions and a SciPy
 * reference; blow-up reported, not a crash; a learned sparse model as a right-hand side. */
#include "sparse/integrate.h"
#include "tests/testutil.h"

/* ---- harmonic oscillator x'' = -w^2 x, x(0) = 1, x'(0) = 0: x = cos(w t), x' = -w sin(w t) ---- */

typedef struct {
    double w;
} Osc;

static void osc_accel(double t, const double *x, const double *v, double *a, void *ctx) {
    (void)t, (void)v;
    const Osc *o = ctx;
    a[0] = -o->w * o->w * x[0];
}

/* Largest error in (x, x') over the outputs t_out (n) after integrating with opt. */
static double osc_error(const OdeOptions *opt, const double *t_out, int n, OdeReport *rep) {
    Osc o = {2.0};
    OdeSecondOrder so = {osc_accel, &o, 1};
    double y0[2] = {1, 0}, *y = malloc(sizeof(double) * 2 * n);
    Status st;
    int rc = ode_solve(ode_second_order_rhs, &so, 2, 0.0, y0, t_out, n, y, NULL, opt, rep, &st);
    if (rc) fail_msg("ode_solve: %s", st.msg);
    double worst = 0;
    for (int i = 0; i < n; i++) {
        double ex = cos(o.w * t_out[i]), ev = -o.w * sin(o.w * t_out[i]);
        worst = fmax(worst, fmax(fabs(y[2 * i] - ex), fabs(y[2 * i + 1] - ev)));
    }
    free(y);
    return worst;
}

/* Classical RK4 has global error O(h^4) ("Solving Ordinary Differential Equations I", Springer
 * 1993, section II.1 and II.3): halving h divides the error by about 2^4 = 16. */
static void test_rk4_order(void **state) {
    (void)state;
    double t_out[1] = {10.0};
    OdeOptions opt = ode_defaults();
    opt.method = ODE_RK4;
    OdeReport rep;
    double e[3];
    for (int i = 0; i < 3; i++) {
        opt.h = 0.04 / (1 << i);
        e[i] = osc_error(&opt, t_out, 1, &rep);
        assert_int_equal(rep.steps, (long)(10.0 / opt.h + 0.5));
    }
    print_message("  rk4 errors %.3g %.3g %.3g, ratios %.2f %.2f\n", e[0], e[1], e[2], e[0] / e[1], e[1] / e[2]);
    for (int i = 0; i < 2; i++) {
        assert_true(e[i] / e[i + 1] > 14.0);
        assert_true(e[i] / e[i + 1] < 18.0);
    }
}

/* Dormand-Prince with error control: the global error over [0, 10] stays within a small multiple
 * of the tolerance and follows it down in proportion (tolerance proportionality). Local error
 * control does not bound the global error by the tolerance itself ("Solving Ordinary Differential
 * Equations I", Springer 1993, section II.4: the error per step is controlled, errors accumulate
 * over the steps); over these three periods the factor is measured at 11 to 14, and we allow 20.
 * Each 100-fold tighter tolerance must cut the error between 30- and 300-fold. */
static void test_dopri5_tolerance(void **state) {
    (void)state;
    double t_out[10];   /* sparse outputs, so that they do not shorten the steps */
    for (int i = 0; i < 10; i++) t_out[i] = i + 1.0;
    double prev = INFINITY;
    for (int e = 4; e <= 12; e += 2) {
        OdeOptions opt = ode_defaults();
        opt.rtol = opt.atol = pow(10.0, -e);
        OdeReport rep;
        double err = osc_error(&opt, t_out, 10, &rep);
        print_message("  dopri5 tol 1e-%02d: max error %.3g (%.2f x tol), %ld steps, %ld rejected\n", e, err,
                      err / opt.rtol, rep.steps, rep.rejected);
        assert_true(err <= 20 * opt.rtol);
        if (isfinite(prev)) assert_true(prev / err > 30 && prev / err < 300);
        prev = err;
        assert_int_equal(rep.stop, ODE_DONE);
        assert_int_equal(rep.n_out, 10);
    }
}

/* ---- Lorenz ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 1963; sigma 10, rho 28, beta 8/3) */

static void lorenz(double t, const double *s, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = 10.0 * (s[1] - s[0]);
    d[1] = s[0] * (28.0 - s[2]) - s[1];
    d[2] = s[0] * s[1] - 8.0 / 3.0 * s[2];
}

/* Against scipy.integrate.solve_ivp (DOP853, rtol = atol = 1e-13) over t in [0, 2] from (1, 1, 1):
 * tests/reference/lorenz_ivp.txt, written by tests/reference/make_lorenz_ivp.py. */
static void test_lorenz_vs_scipy(void **state) {
    (void)state;
    FILE *f = fopen("tests/reference/lorenz_ivp.txt", "r");
    assert_non_null(f);
    double t[64], ref[64][3];
    int n = 0;
    char line[512];
    while (fgets(line, sizeof line, f) && n < 64) {
        if (line[0] == '#') continue;
        if (sscanf(line, "%lf %lf %lf %lf", &t[n], &ref[n][0], &ref[n][1], &ref[n][2]) == 4) n++;
    }
    fclose(f);
    assert_int_equal(n, 41);
    double y0[3] = {1, 1, 1}, y[64 * 3];
    Status st;
    OdeReport rep;

    /* dopri5 at rtol 1e-10, atol 1e-10: errors amplify along the chaotic flow (largest Lyapunov
     * exponent about 0.9, so e^(0.9 * 2) ~ 6 over the horizon); 1e-7 relative to the size of the
     * state (|y| ~ 20) leaves margin. */
    OdeOptions opt = ode_defaults();
    opt.rtol = opt.atol = 1e-10;
    assert_int_equal(ode_solve(lorenz, NULL, 3, 0.0, y0, t, n, y, NULL, &opt, &rep, &st), 0);
    double worst = 0;
    for (int i = 0; i < n; i++)
        for (int j = 0; j < 3; j++) worst = fmax(worst, fabs(y[i * 3 + j] - ref[i][j]));
    print_message("  dopri5 vs SciPy: max abs error %.3g over %d outputs (%ld steps)\n", worst, n, rep.steps);
    assert_true(worst < 2e-6);

    /* rk4 with h = 1e-3: global error ~ C h^4 */
    opt.method = ODE_RK4;
    opt.h = 1e-3;
    assert_int_equal(ode_solve(lorenz, NULL, 3, 0.0, y0, t, n, y, NULL, &opt, &rep, &st), 0);
    worst = 0;
    for (int i = 0; i < n; i++)
        for (int j = 0; j < 3; j++) worst = fmax(worst, fabs(y[i * 3 + j] - ref[i][j]));
    print_message("  rk4 h=1e-3 vs SciPy: max abs error %.3g\n", worst);
    assert_true(worst < 2e-6);
}

/* ---- blow-up: y' = y^2, y(0) = 1 has y = 1 / (1 - t), infinite at t = 1 (common practice) ---- */

static void square(double t, const double *y, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = y[0] * y[0];
}

static void test_blowup(void **state) {
    (void)state;
    double t_out[4] = {0.5, 0.9, 1.5, 2.0}, y[4], y0[1] = {1}, yend[1];
    Status st;
    OdeReport rep;
    /* rk4 without a bound: runs into inf / nan, stops there */
    OdeOptions opt = ode_defaults();
    opt.method = ODE_RK4;
    opt.h = 0.01;
    assert_int_equal(ode_solve(square, NULL, 1, 0.0, y0, t_out, 4, y, yend, &opt, &rep, &st), ST_RUNTIME);
    assert_int_equal(rep.stop, ODE_NONFINITE);
    assert_int_equal(rep.n_out, 2);
    assert_close(y[1], 10.0, 1e-3, 0);
    assert_true(rep.t > 0.9 && rep.t < 1.5);
    assert_true(isfinite(yend[0]));
    assert_non_null(strstr(st.msg, "non-finite at t ="));
    print_message("  %s\n", st.msg);

    /* dopri5 with a bound: stops when |y| > 1e6, i.e. within 1e-6 of t = 1 */
    opt = ode_defaults();
    opt.bound = 1e6;
    assert_int_equal(ode_solve(square, NULL, 1, 0.0, y0, t_out, 4, y, yend, &opt, &rep, &st), ST_RUNTIME);
    assert_int_equal(rep.stop, ODE_OUT_OF_BOUND);
    assert_int_equal(rep.n_out, 2);
    assert_true(rep.t_bad < 1.0 + 1e-9 && rep.t_bad > 1.0 - 1e-5);
    assert_true(fabs(yend[0]) <= 1e6);
    assert_non_null(strstr(st.msg, "left the bound 1e+06 at t ="));
    print_message("  %s\n", st.msg);

    /* dopri5 without a bound: the step collapses near t = 1; a report, not a hang */
    opt = ode_defaults();
    int rc = ode_solve(square, NULL, 1, 0.0, y0, t_out, 4, y, yend, &opt, &rep, &st);
    assert_int_equal(rc, ST_RUNTIME);
    assert_true(rep.stop == ODE_STEP_TOO_SMALL || rep.stop == ODE_NONFINITE);
    assert_true(fabs(rep.t - 1.0) < 1e-3);
    print_message("  %s (%ld steps)\n", st.msg, rep.steps);

    /* a step limit */
    opt = ode_defaults();
    opt.max_steps = 5;
    rc = ode_solve(square, NULL, 1, 0.0, y0, t_out, 4, y, yend, &opt, &rep, &st);
    assert_int_equal(rc, ST_RUNTIME);
    assert_int_equal(rep.stop, ODE_MAX_STEPS);
    assert_int_equal(rep.steps, 5);
}

static void test_bad_arguments(void **state) {
    (void)state;
    double y0[1] = {1}, y[2], t_back[2] = {1.0, 0.5}, t_ok[2] = {0.5, 1.0};
    Status st;
    OdeReport rep;
    OdeOptions opt = ode_defaults();
    assert_int_equal(ode_solve(square, NULL, 1, 0.0, y0, t_back, 2, y, NULL, &opt, &rep, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "backwards"));
    opt.method = ODE_RK4;
    opt.h = 0;
    assert_int_equal(ode_solve(square, NULL, 1, 0.0, y0, t_ok, 2, y, NULL, &opt, &rep, &st), ST_INPUT);
    opt = ode_defaults();
    double nan0[1] = {NAN};
    assert_int_equal(ode_solve(square, NULL, 1, 0.0, nan0, t_ok, 2, y, NULL, &opt, &rep, &st), ST_INPUT);
    assert_int_equal(ode_method_from_name("rk4"), ODE_RK4);
    assert_int_equal(ode_method_from_name("dopri5"), ODE_DOPRI5);
    assert_int_equal(ode_method_from_name("euler"), ODE_METHOD_COUNT);
}

/* ---- a learned model: the damped pendulum theta'' = -(g/L) sin(theta) - c theta' written as a
 * second-order sparse model must integrate exactly like the same system written by hand. */

typedef struct {
    double gl, c;
} Pend;

static void pend_accel(double t, const double *x, const double *v, double *a, void *ctx) {
    (void)t;
    const Pend *p = ctx;
    a[0] = -p->gl * sin(x[0]) - p->c * v[0];
}

static void test_learned_second_order(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(1, 2);
    sp.degree = 1;
    sp.trig = 1;
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    double *xi = calloc((size_t)lib.n_terms, sizeof *xi);
    uint8_t *mask = malloc((size_t)lib.n_terms);
    memset(mask, 1, (size_t)lib.n_terms);
    Pend p = {9.80665, 0.1};
    xi[library_find(&lib, "sin(z1)")] = -p.gl;
    xi[library_find(&lib, "dz1/dt")] = -p.c;
    xi[library_find(&lib, "z1")] = 5.0;     /* masked out: must not act */
    mask[library_find(&lib, "z1")] = 0;
    LearnedOde m;
    learned_ode_init(&m, &lib, xi, mask);
    OdeSecondOrder so = {pend_accel, &p, 1};
    double t_out[20], ya[40], yb[40], y0[2] = {2.0, 0.0};
    for (int i = 0; i < 20; i++) t_out[i] = 0.25 * (i + 1);
    OdeOptions opt = ode_defaults();
    OdeReport rep;
    assert_int_equal(ode_solve(learned_ode_rhs, &m, 2, 0.0, y0, t_out, 20, ya, NULL, &opt, &rep, &st), 0);
    assert_int_equal(ode_solve(ode_second_order_rhs, &so, 2, 0.0, y0, t_out, 20, yb, NULL, &opt, &rep, &st), 0);
    for (int i = 0; i < 40; i++) assert_close(ya[i], yb[i], 1e-12, 1e-12);
    learned_ode_free(&m);

    /* a learned model that blows up: z' = z^2 */
    LibrarySpec s1 = library_spec_default(1, 1);
    Library l1;
    assert_int_equal(library_init(&l1, &s1, &st), 0);
    double x1[3] = {0, 0, 1};   /* 1, z1, z1^2 */
    learned_ode_init(&m, &l1, x1, NULL);
    double z0[1] = {1}, zt[1] = {3.0}, zo[1];
    opt.bound = 1e8;
    assert_int_equal(ode_solve(learned_ode_rhs, &m, 1, 0.0, z0, zt, 1, zo, NULL, &opt, &rep, &st), ST_RUNTIME);
    assert_int_equal(rep.stop, ODE_OUT_OF_BOUND);
    assert_int_equal(rep.n_out, 0);
    learned_ode_free(&m);
    library_free(&l1);
    library_free(&lib);
    free(xi), free(mask);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rk4_order),      cmocka_unit_test(test_dopri5_tolerance),
        cmocka_unit_test(test_lorenz_vs_scipy), cmocka_unit_test(test_blowup),
        cmocka_unit_test(test_bad_arguments),  cmocka_unit_test(test_learned_second_order),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
