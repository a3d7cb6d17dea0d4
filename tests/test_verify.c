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

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pendulum_periods),
        cmocka_unit_test(test_swing_period),
        cmocka_unit_test(test_pendulum_decay),
        cmocka_unit_test(test_lyapunov),
        cmocka_unit_test(test_failures_are_reported),
    };
    return cmocka_run_group_tests_name("coordinate-free checks", tests, NULL, NULL);
}
