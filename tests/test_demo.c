/* tests/test_demo.c: the demo scenarios (demo/lantern.h, demo/convection.h, demo/elliptic.h) and
 * `framelaw demo`: the physics against closed forms and outside references, the cameras against
 * the states they film, and the command's files and bad-input handling. */
#include <sys/stat.h>
#include <sys/wait.h>

#include "demo/convection.h"
#include "demo/elliptic.h"
#include "demo/lantern.h"
#include "io/data/images.h"
#include "tests/testutil.h"

#define DEG (M_PI / 180)

/* ---- K(m) -------------------------------------------------------------------------------------- */

/* Abramowitz and Stegun, Handbook of Mathematical Functions (1964), table 17.1: K at the modular
 * angle alpha, m = sin^2 alpha (15 decimals; they agree with scipy.special.ellipk to the last digit).
 * The AGM result is within a few units in the last place, so rtol 1e-14 leaves room only for the
 * rounding of m = sin^2 alpha (dK/dm m = 16 at alpha = 80 degrees: 2e-15). */
static void test_ellip_k_table(void **state) {
    (void)state;
    assert_close(ellip_k(0), M_PI / 2, 0, 1e-15);
    assert_close(ellip_k(0.25), 1.685750354812596, 0, 1e-14);    /* alpha 30 */
    assert_close(ellip_k(0.5), 1.8540746773013719, 0, 1e-14);    /* alpha 45 */
    assert_close(ellip_k(0.75), 2.156515647499643, 0, 1e-14);    /* alpha 60 */
    double s80 = sin(80 * DEG), s89 = sin(89 * DEG);
    assert_close(ellip_k(s80 * s80), 3.1533852518878374, 0, 1e-14);
    assert_close(ellip_k(s89 * s89), 5.434909829625681, 0, 1e-13);
    /* Near m = 1: K ~ ln(4 / sqrt(1 - m)) (A&S chapter 17, the limit as m -> 1), the error O((1 - m) ln(1 - m)) = 4e-11
     * here (1 - m is exact in floating point for m this close to 1). */
    double m = 1 - 1e-12;
    assert_close(ellip_k(m), log(4 / sqrt(1 - m)), 1e-10, 0);
    assert_true(isinf(ellip_k(1)));
    assert_true(isnan(ellip_k(1.5)));
    assert_true(isnan(ellip_k(NAN)));
}

/* ---- the lantern's physics --------------------------------------------------------------------- */

/* Times of the upward zero crossings of theta in a simulated recording (rows t, theta, theta_dot):
 * each root of the cubic Hermite interpolant between two frames (values and slopes known, error
 * O(dt^4)), found by bisection. */
static int up_crossings(const double *y, int n, double *out, int max) {
    int m = 0;
    for (int k = 0; k + 1 < n && m < max; k++) {
        double t0 = y[3 * k], t1 = y[3 * k + 3], a = y[3 * k + 1], b = y[3 * k + 4];
        if (!(a < 0 && b >= 0)) continue;
        double h = t1 - t0, da = y[3 * k + 2] * h, db = y[3 * k + 5] * h, lo = 0, hi = 1;
        for (int it = 0; it < 60; it++) {
            double s = 0.5 * (lo + hi), s2 = s * s, s3 = s2 * s;
            double v = (2 * s3 - 3 * s2 + 1) * a + (s3 - 2 * s2 + s) * da + (-2 * s3 + 3 * s2) * b + (s3 - s2) * db;
            if (v < 0) lo = s;
            else hi = s;
        }
        out[m++] = t0 + 0.5 * (lo + hi) * h;
    }
    return m;
}

/* Mean period of an undamped swing released at rest from theta0, over the crossings of 20 s. */
static double measured_period(double theta0) {
    LanternPhysics p = lantern_physics_default();
    p.c = 0;
    int n = 600;
    double *y = malloc(sizeof(double) * 3 * n), cr[64];
    Status st;
    assert_int_equal(lantern_simulate(&p, theta0, 0, LANTERN_FPS, n, DEMO_SUBSTEPS, y, &st), 0);
    int m = up_crossings(y, n, cr, 64);
    assert_true(m >= 6);
    free(y);
    return (cr[m - 1] - cr[0]) / (m - 1);
}

/* Small swings: T = 2 pi sqrt(L/g) (common practice; any mechanics text). At 1 degree the
 * finite-amplitude correction is theta0^2 / 16 = 2e-5 of T, so rtol 5e-5. */
static void test_lantern_small_period(void **state) {
    (void)state;
    LanternPhysics p = lantern_physics_default();
    double t0 = 2 * M_PI * sqrt(p.L / p.g);
    assert_close(measured_period(1 * DEG), t0, 0, 5e-5);
    assert_close(lantern_period(&p, 1e-9), t0, 0, 1e-15);
}

/* Large swings: T = 4 sqrt(L/g) K(sin^2(theta0/2)) (Abramowitz and Stegun 1964, chapter 17; any
 * mechanics text). RK4 at 1/600 s and the Hermite crossings are accurate to ~1e-9 of T here; rtol
 * 1e-7 is that with a wide margin, and 1e4 times finer than the 3% and 5% the discovery checks ask. */
static void test_lantern_large_period(void **state) {
    (void)state;
    LanternPhysics p = lantern_physics_default();
    static const double amps[] = {30, 90, 120, 150};
    for (size_t i = 0; i < sizeof amps / sizeof *amps; i++) {
        double k = sin(amps[i] * DEG / 2);
        double exact = 4 * sqrt(p.L / p.g) * ellip_k(k * k);
        assert_close(lantern_period(&p, amps[i] * DEG), exact, 0, 1e-15);
        assert_close(measured_period(amps[i] * DEG), exact, 0, 1e-7);
    }
    /* 150 degrees swings 2.6 times slower than a small swing: the nonlinearity is in the data. */
    assert_true(lantern_period(&p, 150 * DEG) > 1.7 * lantern_period(&p, 0));
}

/* Damping: dE/dt = -c theta'^2 for E = theta'^2/2 + (g/L)(1 - cos theta) (from the equation of
 * motion). (a) A small swing's energy decays as exp(-c t): the least-squares slope of ln E over 30 s
 * is -c to within 0.1% (E wobbles by c / (2 omega) = 1% within each period, which averages out over
 * 21 periods: 1e-5 measured). (b) At 150 degrees, E(T) - E(0) = -c int theta'^2 dt, the integral by
 * composite Simpson over the 30 fps samples: rtol 1e-6 (5e-9 measured). */
static void test_lantern_energy_decay(void **state) {
    (void)state;
    LanternPhysics p = lantern_physics_default();
    int n = 901;
    double *y = malloc(sizeof(double) * 3 * n);
    Status st;
    assert_int_equal(lantern_simulate(&p, 5 * DEG, 0, LANTERN_FPS, n, DEMO_SUBSTEPS, y, &st), 0);
    double st_ = 0, sl = 0, stt = 0, stl = 0;
    for (int k = 0; k < n; k++) {
        double t = y[3 * k], l = log(lantern_energy(&p, y[3 * k + 1], y[3 * k + 2]));
        st_ += t, sl += l, stt += t * t, stl += t * l;
    }
    double slope = (n * stl - st_ * sl) / (n * stt - st_ * st_);
    assert_close(-slope, p.c, 0, 1e-3);

    n = 601;   /* 20 s, an even number of intervals for Simpson */
    assert_int_equal(lantern_simulate(&p, 150 * DEG, 0, LANTERN_FPS, n, DEMO_SUBSTEPS, y, &st), 0);
    double h = 1 / LANTERN_FPS, integral = 0;
    for (int k = 0; k < n; k++) {
        double w = (k == 0 || k == n - 1) ? 1 : (k % 2 ? 4 : 2);
        integral += w * y[3 * k + 2] * y[3 * k + 2];
    }
    integral *= h / 3;
    double e0 = lantern_energy(&p, y[1], y[2]), e1 = lantern_energy(&p, y[3 * (n - 1) + 1], y[3 * (n - 1) + 2]);
    assert_true(e1 < 0.5 * e0);   /* the damping is visible within a recording */
    assert_close(e1 - e0, -p.c * integral, 0, 1e-6);
    free(y);
}

/* The recording set: amplitudes from 10 to 150 degrees (the brief), start states on the energy
 * level of their amplitude, varied start velocities, and no recording turns over (|theta| < pi) -
 * nor exceeds its amplitude, since damping only removes energy. */
static void test_lantern_recordings(void **state) {
    (void)state;
    LanternPhysics p = lantern_physics_default();
    enum { N = 16, F = 300 };
    double th[N], om[N], amp[N], lo = 1e9, hi = -1e9;
    Rng r;
    rng_seed(&r, 1);
    lantern_initial_states(&p, N, &r, th, om, amp);
    int moving = 0, positive = 0;
    double *y = malloc(sizeof(double) * 3 * F);
    Status st;
    for (int k = 0; k < N; k++) {
        lo = fmin(lo, amp[k]), hi = fmax(hi, amp[k]);
        assert_close(lantern_energy(&p, th[k], om[k]), (p.g / p.L) * (1 - cos(amp[k])), 1e-12, 1e-12);
        moving += fabs(om[k]) > 0.1;
        positive += om[k] > 0;
        assert_int_equal(lantern_simulate(&p, th[k], om[k], LANTERN_FPS, F, DEMO_SUBSTEPS, y, &st), 0);
        for (int f = 0; f < F; f++) assert_true(fabs(y[3 * f + 1]) <= amp[k] + 1e-9 && fabs(y[3 * f + 1]) < M_PI);
    }
    assert_close(lo, 10 * DEG, 1e-12, 0);
    assert_close(hi, 150 * DEG, 1e-12, 0);
    assert_true(moving >= N / 2 && positive >= 3 && positive <= N - 3);
    /* A swing that would go over the top is refused with its time. */
    assert_int_equal(lantern_simulate(&p, 0, 10, LANTERN_FPS, F, DEMO_SUBSTEPS, y, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "over the top"));
    free(y);
}

/* ---- the lantern's camera ---------------------------------------------------------------------- */

/* Centroid of the brightest blob: the pixels brighter than halfway between the brightest pixel and
 * the frame's median, weighted by how far above that level they are. */
static void blob_centroid(const uint8_t *px, int w, int h, double *cx, double *cy) {
    int hist[256] = {0}, mx = 0, med = 0, acc = 0;
    for (int i = 0; i < w * h; i++) hist[px[i]]++, mx = px[i] > mx ? px[i] : mx;
    while (acc + hist[med] < w * h / 2) acc += hist[med++];
    double level = 0.5 * (mx + med), sw = 0, sx = 0, sy = 0;
    for (int i = 0; i < h; i++)
        for (int j = 0; j < w; j++) {
            double v = px[i * w + j] - level;
            if (v <= 0) continue;
            sw += v, sx += v * (j + 0.5), sy += v * (i + 0.5);
        }
    *cx = sx / sw;
    *cy = sy / sw;
}

#define LW 48 /* the lantern's default frame side */

/* The lantern appears where the rod puts it: pivot + (R / L) (L sin theta, L cos theta) in pixels
 * (x right, y down). The brightest blob's centroid is found within 0.2 px without noise (the
 * anti-aliased disk is symmetric up to the vignetting gradient and 8-bit rounding: 0.14 px measured
 * at 48 px over -150..150 degrees) and within 0.5 px with the default noise (0.19 px measured); and
 * the whole disk of a 150-degree swing (indeed of any swing) lies inside the frame. */
static void test_lantern_render_centroid(void **state) {
    (void)state;
    LanternPhysics p = lantern_physics_default();
    static const double angles[] = {-150, -120, -90, -45, -10, 0, 10, 30, 60, 90, 135, 150};
    for (int noisy = 0; noisy < 2; noisy++) {
        LanternCamera cam = lantern_camera(LW, noisy ? 0.02 : 0);
        uint8_t px[LW * LW];
        Rng r;
        rng_seed(&r, 7);
        for (size_t i = 0; i < sizeof angles / sizeof *angles; i++) {
            double th = angles[i] * DEG, x, y, cx, cy;
            lantern_camera_project(&cam, th, &x, &y);
            double s = cam.rod_px / p.L;   /* pixels per metre */
            assert_close(x, cam.pivot_x + s * p.L * sin(th), 1e-9, 0);
            assert_close(y, cam.pivot_y + s * p.L * cos(th), 1e-9, 0);
            lantern_render(&cam, th, &r, px);
            blob_centroid(px, LW, LW, &cx, &cy);
            double tol = noisy ? 0.5 : 0.2;
            if (hypot(cx - x, cy - y) > tol)
                fail_msg("theta %g deg: blob at (%.3f, %.3f), lantern at (%.3f, %.3f)", angles[i], cx, cy, x, y);
        }
    }
    LanternCamera cam = lantern_camera(LW, 0);
    for (double a = -180; a <= 180; a += 1) {
        double x, y;
        lantern_camera_project(&cam, a * DEG, &x, &y);
        assert_true(x - cam.bob_r >= 0 && x + cam.bob_r <= LW && y - cam.bob_r >= 0 && y + cam.bob_r <= LW);
    }
    /* At 150 degrees the lantern stays clear of the border: no bright pixel in the outer ring. */
    uint8_t px[LW * LW];
    for (int sgn = -1; sgn <= 1; sgn += 2) {
        lantern_render(&cam, sgn * 150 * DEG, NULL, px);
        for (int i = 0; i < LW; i++)
            for (int j = 0; j < LW; j++)
                if (i == 0 || j == 0 || i == LW - 1 || j == LW - 1) assert_true(px[i * LW + j] < 60);
    }
}

/* Sensor noise: the difference between a noisy and a clean frame has the configured standard
 * deviation (0.02 of full scale = 5.1 levels; the 8-bit rounding of both adds ~0.4 in quadrature;
 * the sampling error of a standard deviation over 48 x 48 = 2304 pixels is 1.5%, so rtol 5%), and the same
 * seed renders the same bytes. */
static void test_lantern_noise(void **state) {
    (void)state;
    LanternCamera c0 = lantern_camera(LW, 0), c1 = lantern_camera(LW, 0.02);
    uint8_t a[LW * LW], b[LW * LW], b2[LW * LW];
    Rng r;
    lantern_render(&c0, 0.3, NULL, a);
    rng_seed(&r, 3);
    lantern_render(&c1, 0.3, &r, b);
    rng_seed(&r, 3);
    lantern_render(&c1, 0.3, &r, b2);
    assert_memory_equal(b, b2, sizeof b);
    double s = 0, s2 = 0;
    int n = LW * LW;
    for (int i = 0; i < n; i++) {
        double d = (double)b[i] - a[i];
        s += d, s2 += d * d;
    }
    double sd = sqrt(s2 / n - (s / n) * (s / n));
    assert_close(sd, sqrt(5.1 * 5.1 + 2.0 / 12), 0, 0.05);
}

/* ---- the convection cell's physics ------------------------------------------------------------- */

/* The demo's integration (RK4, 20 steps per 0.01 time units) against SciPy's DOP853 at rtol = atol
 * = 1e-13 (tests/reference/lorenz_ivp.txt, written by tests/reference/make_lorenz_ivp.py), from
 * (1, 1, 1) to t = 2: agreement to 1e-7 (4e-9 measured: RK4's global error at h = 5e-4). */
static void test_lorenz_reference(void **state) {
    (void)state;
    LorenzParams p = lorenz_params_default();
    double y0[3] = {1, 1, 1}, *y = malloc(sizeof(double) * 4 * 201);
    Status st;
    assert_int_equal(convection_simulate(&p, y0, CONVECTION_FPS, 201, DEMO_SUBSTEPS, y, &st), 0);
    FILE *f = fopen("tests/reference/lorenz_ivp.txt", "r");
    assert_non_null(f);
    char line[512];
    int rows = 0;
    while (fgets(line, sizeof line, f)) {
        double t, r[3];
        if (line[0] == '#' || sscanf(line, "%lf %lf %lf %lf", &t, &r[0], &r[1], &r[2]) != 4) continue;
        int k = (int)lrint(t * CONVECTION_FPS);
        assert_close(y[4 * k], t, 1e-12, 0);
        for (int i = 0; i < 3; i++) assert_close(y[4 * k + 1 + i], r[i], 1e-7, 0);
        rows++;
    }
    fclose(f);
    assert_int_equal(rows, 41);
    free(y);
}

/* Step refinement: the error at t = 2 falls by 2^4 = 16 per halving of the step (fourth order),
 * against a run at 1/16 of the demo's step. Measured 19.4, 17.9, 17.2 from 5 to 40 steps per frame
 * (higher-order terms still show at the coarse end); accepted in [12, 24], which a third-order (8)
 * or fifth-order (32) method would fail. The demo's own step is accurate to 1e-8 there (6e-9). */
static void test_lorenz_rk4_converges(void **state) {
    (void)state;
    LorenzParams p = lorenz_params_default();
    double y0[3] = {-8, 7, 27}, ref[4 * 201], y[4 * 201];
    Status st;
    assert_int_equal(convection_simulate(&p, y0, CONVECTION_FPS, 201, 16 * DEMO_SUBSTEPS, ref, &st), 0);
    double err[4];
    static const int sub[4] = {5, 10, 20, 40};
    for (int i = 0; i < 4; i++) {
        assert_int_equal(convection_simulate(&p, y0, CONVECTION_FPS, 201, sub[i], y, &st), 0);
        err[i] = 0;
        for (int c = 1; c < 4; c++) err[i] = fmax(err[i], fabs(y[4 * 200 + c] - ref[4 * 200 + c]));
    }
    for (int i = 0; i + 1 < 4; i++) {
        double ratio = err[i] / err[i + 1];
        if (!(ratio > 12 && ratio < 24)) fail_msg("steps %d -> %d: error ratio %g", sub[i], sub[i + 1], ratio);
    }
    assert_true(err[2] < 1e-8);   /* DEMO_SUBSTEPS = 20 */
}

/* Bounded: V = X^2 + Y^2 + (Z - rho - sigma)^2 has dV/dt = -2 (sigma X^2 + Y^2 + beta Z^2 -
 * beta (rho + sigma) Z) (from the equations, "Deterministic Nonperiodic Flow" 1963 shows the
 * solutions bounded the same way), negative outside an ellipsoid on which V <= c^2 beta^2 /
 * (beta - 1), c = (rho + sigma) / 2 (= 1540.3): the ball V <= 1540.3 traps every trajectory that
 * starts inside it, and the demo's initial box lies inside it. Every default recording stays there
 * for 100 time units (1e-6 slack for rounding). */
static void test_lorenz_bounded(void **state) {
    (void)state;
    LorenzParams p = lorenz_params_default();
    double c = (p.rho + p.sigma) / 2, vmax = c * c * p.beta * p.beta / (p.beta - 1);
    assert_close(vmax, 1540.27, 0.01, 0);
    enum { N = 8, F = 10001 };
    double xyz[3 * N];
    Rng r;
    rng_seed(&r, 1);
    convection_initial_states(N, &r, xyz);
    double *y = malloc(sizeof(double) * 4 * F);
    Status st;
    for (int k = 0; k < N; k++) {
        assert_int_equal(convection_simulate(&p, xyz + 3 * k, CONVECTION_FPS, F, DEMO_SUBSTEPS, y, &st), 0);
        double zmin = 1e9, zmax = -1e9;
        for (int f = 0; f < F; f++) {
            double *s = y + 4 * f + 1, v = s[0] * s[0] + s[1] * s[1] + (s[2] - 2 * c) * (s[2] - 2 * c);
            if (!(v <= vmax * (1 + 1e-6))) fail_msg("recording %d leaves the ball at t = %g: V = %g", k, y[4 * f], v);
            if (f > 100) zmin = fmin(zmin, s[2]), zmax = fmax(zmax, s[2]);
        }
        assert_true(zmax - zmin > 20);   /* chaotic motion, not a fixed point */
    }
    free(y);
}

/* ---- the convection cell's camera -------------------------------------------------------------- */

/* Fit the mode amplitudes back out of a clean frame: invert the camera response on every pixel not
 * near saturation and solve least squares on the modes of demo/convection.h. out: X (velocity
 * panel), Y, Z (temperature panel, after removing the conduction profile 1 - z/H). */
static void fit_modes(const ConvectionCamera *cam, const LorenzParams *p, const uint8_t *px, double out[3]) {
    double a = CONVECTION_ASPECT, svv = 0, svw = 0, m[2][2] = {{0}}, rhs[2] = {0};
    for (int i = 0; i < cam->height; i++) {
        double zh = 1 - (i + 0.5) / cam->height;
        for (int j = 0; j < cam->panel_w; j++) {
            double xh = (j + 0.5) / cam->panel_w / a;
            double fy = M_SQRT2 * cos(M_PI * a * xh) * sin(M_PI * zh) / (M_PI * p->rho);
            double fz = -sin(2 * M_PI * zh) / (M_PI * p->rho);
            double pt = px[i * cam->width + j] / 255.0, pv = px[i * cam->width + cam->panel_w + cam->gap + j] / 255.0;
            if (pv > 0.03 && pv < 0.97) {
                double w = atanh(2 * pv - 1) * cam->vel_scale, fx = M_SQRT2 * cos(M_PI * a * xh) * sin(M_PI * zh);
                svv += fx * fx, svw += fx * w;
            }
            if (pt > 0.03 && pt < 0.97) {
                double d = atanh(2 * pt - 1) / cam->temp_gain + 0.5 - (1 - zh);
                m[0][0] += fy * fy, m[0][1] += fy * fz, m[1][1] += fz * fz;
                rhs[0] += fy * d, rhs[1] += fz * d;
            }
        }
    }
    out[0] = svw / svv;
    double det = m[0][0] * m[1][1] - m[0][1] * m[0][1];
    out[1] = (rhs[0] * m[1][1] - rhs[1] * m[0][1]) / det;
    out[2] = (m[0][0] * rhs[1] - m[0][1] * rhs[0]) / det;
}

/* The frame carries the state: X is read back from the velocity panel and (Y, Z) from the
 * temperature panel to within 0.05, 0.25% of the attractor's scale of 20 (8-bit rounding through the
 * inverted tanh: 0.012 measured); still fluid (X = 0) is mid-gray; the temperature panel alone cannot tell X from -X (both
 * panels are needed); the conduction state is bright (hot) at the bottom; warm fluid rises on the
 * left for X, Y > 0. */
static void test_convection_panels(void **state) {
    (void)state;
    LorenzParams p = lorenz_params_default();
    ConvectionCamera cam = convection_camera(32, 0);
    assert_int_equal(cam.panel_w, 45);
    assert_int_equal(cam.width, 2 * 45 + 2);
    uint8_t *px = malloc((size_t)cam.width * cam.height), *qx = malloc((size_t)cam.width * cam.height);
    double fp = sqrt(p.beta * (p.rho - 1));
    static const double states[][3] = {{8.485, 8.485, 27}, {-8.485, -8.485, 27}, {15, 3, 20}, {-4, 12, 35}, {0, -10, 15}};
    for (size_t s = 0; s < sizeof states / sizeof *states; s++) {
        double got[3];
        convection_render(&cam, &p, states[s], NULL, px);
        fit_modes(&cam, &p, px, got);
        for (int i = 0; i < 3; i++)
            if (fabs(got[i] - states[s][i]) > 0.05)
                fail_msg("state (%g, %g, %g): mode %d read back as %g", states[s][0], states[s][1], states[s][2], i,
                         got[i]);
    }
    /* Steady convection C+ (X = Y = sqrt(beta (rho - 1)), Z = rho - 1): left rises, right sinks. */
    double cplus[3] = {fp, fp, p.rho - 1};
    convection_render(&cam, &p, cplus, NULL, px);
    int mid = cam.height / 2, vx0 = cam.panel_w + cam.gap;
    assert_true(px[mid * cam.width + vx0 + 1] > 170 && px[mid * cam.width + vx0 + cam.panel_w - 2] < 85);
    assert_true(px[mid * cam.width + 1] > px[mid * cam.width + cam.panel_w - 2]);
    for (int i = 0; i < cam.height; i++)
        for (int j = cam.panel_w; j < vx0; j++) assert_int_equal(px[i * cam.width + j], 0);   /* the gap */
    /* Conduction (X = Y = Z = 0): velocity mid-gray everywhere; temperature the same along each row
     * and brightening downwards. */
    double rest[3] = {0, 0, 0};
    convection_render(&cam, &p, rest, NULL, px);
    for (int i = 0; i < cam.height; i++) {
        for (int j = 0; j < cam.panel_w; j++) {
            assert_int_equal(px[i * cam.width + vx0 + j], 128);
            assert_int_equal(px[i * cam.width + j], px[i * cam.width]);
        }
        if (i) assert_true(px[i * cam.width] > px[(i - 1) * cam.width]);
    }
    /* X and -X: identical temperature panels, different velocity panels. */
    double s1[3] = {6, -3, 22}, s2[3] = {-6, -3, 22};
    convection_render(&cam, &p, s1, NULL, px);
    convection_render(&cam, &p, s2, NULL, qx);
    int diff_v = 0;
    for (int i = 0; i < cam.height; i++) {
        assert_memory_equal(px + i * cam.width, qx + i * cam.width, (size_t)cam.panel_w);
        diff_v += memcmp(px + i * cam.width + vx0, qx + i * cam.width + vx0, (size_t)cam.panel_w) != 0;
    }
    assert_true(diff_v > cam.height / 2);
    free(px);
    free(qx);
}

/* ---- framelaw demo ----------------------------------------------------------------------------- */

static int exists(const char *path) {
    struct stat sb;
    return stat(path, &sb) == 0;
}

/* --help names both scenarios and every option with its default (DEVELOPERS.md: every command has --help listing each option with its default). */
static void test_cmd_help(void **state) {
    (void)state;
    static char out[16384];
    assert_int_equal(test_run_capture("demo --help", out, sizeof out), 0);
    assert_non_null(strstr(out, "  lantern "));
    assert_non_null(strstr(out, "  convection "));
    static const char *const opts[] = {"--size", "--recordings", "--frames", "--noise", "--seed", "--overwrite"};
    for (size_t i = 0; i < sizeof opts / sizeof *opts; i++) {
        char key[64];
        snprintf(key, sizeof key, "  %s ", opts[i]);
        const char *at = strstr(out, key);
        if (!at) fail_msg("--help lacks %s", opts[i]);
        const char *br = strchr(at, '['), *next = strstr(at + 2, "  --");
        if (!br || (next && br > next)) fail_msg("--help: %s shows no default", opts[i]);
    }
    assert_int_equal(test_run_capture("help", out, sizeof out), 0);
    assert_non_null(strstr(out, "  demo "));
}

/* A small render of each scenario: the folders, frame names and sizes, truth.csv, demo.json. */
static void test_cmd_files(void **state) {
    (void)state;
    char dir[256], args[1024], path[1024];
    static char out[16384];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(args, sizeof args, "demo lantern '%s/l' --size 21 --recordings 2 --frames 4 --seed 5", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    for (int k = 0; k < 2; k++) {
        for (int f = 0; f < 4; f++) {
            snprintf(path, sizeof path, "%s/l/rec%02d/frame%06d.png", dir, k, f);
            int w, h;
            Status st;
            assert_int_equal(image_probe(path, &w, &h, &st), 0);
            assert_int_equal(w, 21);
            assert_int_equal(h, 21);
        }
        snprintf(path, sizeof path, "%s/l/rec%02d/frame%06d.png", dir, k, 4);
        assert_false(exists(path));
        snprintf(path, sizeof path, "%s/l/rec%02d/truth.csv", dir, k);
        FILE *f = fopen(path, "r");
        assert_non_null(f);
        char line[512];
        assert_non_null(fgets(line, sizeof line, f));
        assert_string_equal(line, "t,theta,theta_dot\n");
        int rows = 0;
        double t, th, om, t_prev = -1;
        while (fscanf(f, "%lf,%lf,%lf", &t, &th, &om) == 3) {
            assert_close(t, rows / LANTERN_FPS, 1e-12, 0);
            assert_true(t > t_prev && fabs(th) < M_PI);
            t_prev = t;
            rows++;
        }
        fclose(f);
        assert_int_equal(rows, 4);
    }
    snprintf(path, sizeof path, "%s/l/demo.json", dir);
    assert_true(exists(path));
    snprintf(path, sizeof path, "%s/l/rec02", dir);
    assert_false(exists(path));

    snprintf(args, sizeof args, "demo convection '%s/c' --size 8 --recordings 1 --frames 3 --noise 0", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(path, sizeof path, "%s/c/rec00/frame000002.png", dir);
    int w, h;
    Status st;
    assert_int_equal(image_probe(path, &w, &h, &st), 0);
    assert_int_equal(h, 8);
    assert_int_equal(w, 2 * 11 + 1);
    snprintf(path, sizeof path, "%s/c/rec00/truth.csv", dir);
    FILE *f = fopen(path, "r");
    assert_non_null(f);
    char line[512];
    assert_non_null(fgets(line, sizeof line, f));
    assert_string_equal(line, "t,X,Y,Z\n");
    fclose(f);
    test_rmtree(dir);
}

/* Bad input exits 2 with a one-line message that names the fault (DEVELOPERS.md: exit status 2 for
 * bad usage or bad input): an unknown scenario lists the known ones; a non-empty OUT_DIR is refused
 * unless --overwrite, which replaces an earlier demo's recordings and leaves other files alone. */
static void test_cmd_bad_input(void **state) {
    (void)state;
    char dir[256], args[1024], path[1024];
    static char out[16384];
    assert_non_null(test_tmpdir(dir, sizeof dir));
    snprintf(args, sizeof args, "demo pendulum '%s/x'", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "unknown scenario 'pendulum'"));
    assert_non_null(strstr(out, "lantern"));
    assert_non_null(strstr(out, "convection"));
    snprintf(path, sizeof path, "%s/x", dir);
    assert_false(exists(path));

    snprintf(args, sizeof args, "demo lantern '%s/o' --size 16 --recordings 3 --frames 2", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(path, sizeof path, "%s/o/notes.txt", dir);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs("mine\n", f);
    fclose(f);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "not empty"));
    assert_non_null(strstr(out, "--overwrite"));
    snprintf(args, sizeof args, "demo lantern '%s/o' --size 16 --recordings 2 --frames 2 --overwrite", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 0);
    snprintf(path, sizeof path, "%s/o/rec02", dir);
    assert_false(exists(path));   /* the earlier third recording is gone */
    snprintf(path, sizeof path, "%s/o/rec01/frame000001.png", dir);
    assert_true(exists(path));
    snprintf(path, sizeof path, "%s/o/notes.txt", dir);
    assert_true(exists(path));    /* not the demo's: kept */

    static const char *const bad[] = {"--size 4", "--recordings 0", "--frames x", "--noise -1", "--seed -3",
                                      "--colour 1", "--size"};
    for (size_t i = 0; i < sizeof bad / sizeof *bad; i++) {
        snprintf(args, sizeof args, "demo lantern '%s/b' %s", dir, bad[i]);
        if (test_run_capture(args, out, sizeof out) != 2) fail_msg("'%s' did not exit 2: %s", bad[i], out);
        assert_non_null(strstr(out, "framelaw: demo: "));
    }
    assert_int_equal(test_run_capture("demo lantern", out, sizeof out), 2);
    snprintf(args, sizeof args, "demo lantern '%s/o/notes.txt'", dir);
    assert_int_equal(test_run_capture(args, out, sizeof out), 2);
    assert_non_null(strstr(out, "not a folder"));
    test_rmtree(dir);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ellip_k_table),
        cmocka_unit_test(test_lantern_small_period),
        cmocka_unit_test(test_lantern_large_period),
        cmocka_unit_test(test_lantern_energy_decay),
        cmocka_unit_test(test_lantern_recordings),
        cmocka_unit_test(test_lantern_render_centroid),
        cmocka_unit_test(test_lantern_noise),
        cmocka_unit_test(test_lorenz_reference),
        cmocka_unit_test(test_lorenz_rk4_converges),
        cmocka_unit_test(test_lorenz_bounded),
        cmocka_unit_test(test_convection_panels),
        cmocka_unit_test(test_cmd_help),
        cmocka_unit_test(test_cmd_files),
        cmocka_unit_test(test_cmd_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
