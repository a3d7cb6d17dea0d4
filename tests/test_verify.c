/* tests/test_verify.c: the coordinate-free checks of sparse/verify.h on systems whose answers are
 * published. */
#include "demo/elliptic.h"
#include "sparse/verify.h"
#include "tests/testutil.h"

typedef struct {
    double g_over_l, c;
} Pend;

/* theta'' = -(g/L) sin(theta) - c theta' */
static void pendulum(double t, const double *y, double *dy, void *ctx) {
    (void)t;
    const Pend *p = ctx;
    dy[0] = y[1];
    dy[1] = -p->g_over_l * sin(y[0]) - p->c * y[1];
}

/* Lorenz ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 1963): sigma 10, rho 28, beta 8/3. */
static void lorenz(double t, const double *y, double *dy, void *ctx) {
    (void)t;
    (void)ctx;
    dy[0] = 10 * (y[1] - y[0]);
    dy[1] = y[0] * (28 - y[2]) - y[1];
    dy[2] = y[0] * y[1] - 8.0 / 3.0 * y[2];
}

static const double G = 9.80665, L = 0.5; /* standard gravity; the demo's rod */

/* The period of the undamped pendulum: 4 sqrt(L/g) K(sin^2(theta0/2)) (Abramowitz and Stegun,
 * Handbook of Mathematical Functions, 1964, chapter 17; K computed by the arithmetic-geometric mean
 * and tested against its table 17.1 in tests/test_demo.c); 2 pi sqrt(L/g) for small swings (common
 * practice), whose first correction is a factor 1 + theta0^2/16 (2e-5 at 1 degree). */
static void test_pendulum_periods(void **state) {
    (void)state;
    Pend p = {G / L, 0};
    Status st;
    double period, th = 120 * M_PI / 180, y0[2] = {th, 0};
    assert_int_equal(verify_period(pendulum, &p, 2, y0, 0, 20, 1e-3, &period, &st), 0);
    assert_close(period, 4 * sqrt(L / G) * ellip_k(pow(sin(th / 2), 2)), 0, 1e-6);
    double y1[2] = {M_PI / 180, 0};
    assert_int_equal(verify_period(pendulum, &p, 2, y1, 0, 20, 1e-3, &period, &st), 0);
    assert_close(period, 2 * M_PI * sqrt(L / G), 0, 5e-5);
    /* a shifted and scaled coordinate gives the same period: z = 3 theta + 7 */
    double y2[2] = {th, 0};
    assert_int_equal(verify_period(pendulum, &p, 2, y2, 1, 20, 1e-3, &period, &st), 0); /* via theta' */
    assert_close(period, 4 * sqrt(L / G) * ellip_k(pow(sin(th / 2), 2)), 0, 1e-6);
}

/* The first swing's period from 120 degrees at rest. Undamped: the elliptic-integral period (as
 * above). With the lantern's damping c = 0.1 1/s: 1.9065721500720 s, from SciPy 1.10 (Debian
 * python3-scipy) solve_ivp, RK45 at rtol 1e-11, atol 1e-12, twice the time of the first event
 * theta' = 0 (computed for this test, 2026-12-02); the mean period over ten swings is far shorter,
 * as the amplitude decays. In a shifted and scaled coordinate the turning points are the same. */
static void test_swing_period(void **state) {
    (void)state;
    Status st;
    double period, th = 120 * M_PI / 180, y0[2] = {th, 0};
    Pend p = {G / L, 0};
    assert_int_equal(verify_swing_period(pendulum, &p, 2, y0, 0, 5, 1e-3, &period, &st), 0);
    assert_close(period, 4 * sqrt(L / G) * ellip_k(pow(sin(th / 2), 2)), 0, 1e-6);
    Pend pd = {G / L, 0.1};
    assert_int_equal(verify_swing_period(pendulum, &pd, 2, y0, 0, 5, 1e-3, &period, &st), 0);
    assert_close(period, 1.9065721500720434, 0, 1e-6);
    double mean;
    assert_int_equal(verify_period(pendulum, &pd, 2, y0, 0, 20, 1e-3, &mean, &st), 0);
    assert_true(mean < 0.9 * period);
    double neg[2] = {-th, 0};
    assert_int_equal(verify_swing_period(pendulum, &pd, 2, neg, 0, 5, 1e-3, &period, &st), 0);
    assert_close(period, 1.9065721500720434, 0, 1e-6);
    /* no turning point in time: an error, not a number */
    assert_int_equal(verify_swing_period(pendulum, &p, 2, y0, 0, 0.5, 1e-3, &period, &st), ST_RUNTIME);
}

/* x'' = -w^2 x - c x': the amplitude decays as exp(-c t / 2) (common practice: the damped harmonic
 * oscillator); the small-swing pendulum with c = 0.1 1/s decays at 0.05 1/s. */
static void test_pendulum_decay(void **state) {
    (void)state;
    Pend p = {G / L, 0.1};
    Status st;
    double rate, y0[2] = {2 * M_PI / 180, 0};
    assert_int_equal(verify_decay_rate(pendulum, &p, 2, y0, 0, 60, 1e-3, &rate, &st), 0);
    assert_close(rate, 0.05, 0, 0.01);
}

/* The largest Lyapunov exponent of the Lorenz system, 0.9056 (J. C. Sprott, Chaos and Time-Series
 * Analysis, Oxford 2003, table of Lyapunov exponents); over 1000 time units the estimate is good to
 * a few percent (common practice: the error falls as 1/sqrt(T)). A periodic orbit has 0. */
static void test_lyapunov(void **state) {
    (void)state;
    Status st;
    double lambda, y0[3] = {1, 1, 1};
    assert_int_equal(verify_lyapunov(lorenz, NULL, 3, y0, 50, 1000, 0.005, 1.0, &lambda, &st), 0);
    assert_close(lambda, 0.9056, 0, 0.04);
    Pend p = {G / L, 0};
    double y1[2] = {0.5, 0};
    assert_int_equal(verify_lyapunov(pendulum, &p, 2, y1, 10, 500, 1e-3, 1.0, &lambda, &st), 0);
    assert_close(lambda, 0.0, 0.02, 0);
}

/* No oscillation, and a blow-up: reported, not a wrong number. */
static void test_failures_are_reported(void **state) {
    (void)state;
    Pend p = {-1.0, 0}; /* theta'' = +sin(theta): falls away from 0 */
    Status st;
    double period, y0[2] = {0.1, 0};
    assert_int_equal(verify_period(pendulum, &p, 2, y0, 0, 5, 1e-3, &period, &st), ST_RUNTIME);
    assert_non_null(strstr(st.msg, "no oscillation"));
}

/* Fixed points and their eigenvalues of the Lorenz system (closed forms from the equations, as in
 * the 1963 paper: C+- = (+-sqrt(beta (rho - 1)), +-sqrt(beta (rho - 1)), rho - 1); at the origin the
 * eigenvalues are -beta and (-(sigma + 1) +- sqrt((sigma + 1)^2 + 4 sigma (rho - 1))) / 2), and of the
 * damped pendulum at rest (-c/2 +- i sqrt(g/L - c^2/4)). The Jacobian is by central differences:
 * 1e-6 relative agreement is its truncation and rounding. */
static void test_fixed_points_and_eigenvalues(void **state) {
    (void)state;
    const double beta = 8.0 / 3.0, q = sqrt(beta * 27);
    double y0[3] = {q + 0.7, q - 0.4, 27.5}, y[3], re[3], im[3];
    Status st;
    assert_int_equal(verify_fixed_point(lorenz, NULL, 3, y0, y, &st), 0);
    assert_close(y[0], q, 1e-9, 1e-9);
    assert_close(y[1], q, 1e-9, 1e-9);
    assert_close(y[2], 27, 1e-9, 1e-9);
    double o[3] = {0, 0, 0};
    assert_int_equal(verify_jacobian_eigs(lorenz, NULL, 3, o, re, im, &st), 0);
    double disc = sqrt(11.0 * 11.0 + 4 * 10 * 27), ev[3] = {(-11 - disc) / 2, -beta, (-11 + disc) / 2};
    for (int k = 0; k < 3; k++) assert_close(im[k], 0, 1e-9, 0);
    /* all real: sorted by the real part */
    for (int k = 0; k < 3; k++) assert_close(re[k], ev[k], 1e-6, 1e-6);
    Pend p = {G / L, 0.1};
    double r0[2] = {0.3, -0.2}, r[2];
    assert_int_equal(verify_fixed_point(pendulum, &p, 2, r0, r, &st), 0);
    assert_close(r[0], 0, 1e-9, 0);
    assert_int_equal(verify_jacobian_eigs(pendulum, &p, 2, r, re, im, &st), 0);
    assert_close(re[1], -0.05, 1e-6, 1e-6);
    assert_close(im[1], sqrt(G / L - 0.0025), 1e-6, 1e-6);
    assert_close(im[0], -sqrt(G / L - 0.0025), 1e-6, 1e-6);
}

typedef struct {
    double mu;
} Vdp;

static void vdp(double t, const double *y, double *dy, void *ctx) {
    (void)t;
    const Vdp *v = ctx;
    dy[0] = y[1];
    dy[1] = v->mu * (1 - y[0] * y[0]) * y[1] - y[0];
}

/* The van der Pol limit cycle for mu = 1: its period from SciPy (tests/reference/vdp_period.txt,
 * written by make_vdp_period.py; 6.6633 is also the value usually quoted, from memory), reached from
 * inside and from outside with the same range (the cycle's x runs from about -2 to 2). RK4 at
 * h = 1e-3 over 40 cycles: 1e-6 on the period. */
static void test_limit_cycle(void **state) {
    (void)state;
    char *txt = test_slurp("tests/reference/vdp_period.txt");
    if (!txt) fail_msg("tests/reference/vdp_period.txt not found (run the tests from the project root)");
    const char *line = strchr(txt, '\n');
    double want = atof(line ? line + 1 : txt);
    free(txt);
    assert_close(want, 6.6633, 1e-4, 0);
    Vdp v = {1.0};
    double a[2] = {0.2, 0}, b[2] = {3.0, 0}, pa, pb, ra, rb;
    Status st;
    assert_int_equal(verify_cycle(vdp, &v, 2, a, 0, 100, 60, 1e-3, &pa, &ra, &st), 0);
    assert_int_equal(verify_cycle(vdp, &v, 2, b, 0, 100, 60, 1e-3, &pb, &rb, &st), 0);
    assert_close(pa, want, 1e-5, 0);
    assert_close(pb, want, 1e-5, 0);
    assert_close(ra, rb, 1e-3, 0);
    assert_close(ra / 2, 2.0, 0.02, 0); /* amplitude about 2 (common practice), 2.0086 */
    /* a damped oscillator has no cycle: it settles, and no crossings are left to time */
    Pend p = {G / L, 3.0};
    double c0[2] = {0.5, 0}, pc, rc;
    assert_int_equal(verify_cycle(pendulum, &p, 2, c0, 0, 30, 10, 1e-3, &pc, &rc, &st), ST_RUNTIME);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pendulum_periods),
        cmocka_unit_test(test_swing_period),
        cmocka_unit_test(test_pendulum_decay),
        cmocka_unit_test(test_lyapunov),
        cmocka_unit_test(test_failures_are_reported),
        cmocka_unit_test(test_fixed_points_and_eigenvalues),
        cmocka_unit_test(test_limit_cycle),
    };
    return cmocka_run_group_tests_name("coordinate-free checks", tests, NULL, NULL);
}
