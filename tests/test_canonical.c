/* tests/test_canonical.c: the canonical form of a learned law (sparse/canonical.h) on systems whose
 * sparse form is known: Lorenz's system seen through a random affine map, a damped pendulum seen
 * through a scale and an offset of its angle, Lorenz's system through a bent map (fewer terms never
 * come with a tighter tolerance), and a linear law in rotated coordinates; the exact
 * affine transform of polynomial laws against direct evaluation; maps beyond the condition bound,
 * a law with no terms and bad options. */
#include <float.h>

#include "nn/mat.h"
#include "nn/rng.h"
#include "sparse/canonical.h"
#include "sparse/canonical_select.h"
#include "sparse/integrate.h"
#include "sparse/library.h"
#include "sparse/optim.h"
#include "sparse/polymap.h"
#include "sparse/thresh_lsq.h"
#include "sparse/verify.h"
#include "tests/testutil.h"

/* ---- helpers ---------------------------------------------------------------------------------- */

/* Samples (n, dim) of a trajectory at t = dt, 2 dt, ..., n dt from y0, by dopri5 at rtol = atol =
 * 1e-10 (the outputs land on the steps, so no interpolation enters the data). */
static double *simulate(OdeFn f, void *ctx, int dim, const double *y0, double dt, int n) {
    double *t = malloc(sizeof(double) * n), *y = malloc(sizeof(double) * n * dim);
    for (int i = 0; i < n; i++) t[i] = dt * (i + 1);
    OdeOptions opt = ode_defaults();
    opt.rtol = opt.atol = 1e-10;
    OdeReport rep;
    Status st;
    if (ode_solve(f, ctx, dim, 0.0, y0, t, n, y, NULL, &opt, &rep, &st)) fail_msg("simulate: %s", st.msg);
    free(t);
    return y;
}

/* The learned law of the tests: thresholded least squares of dx (N, k) on the library at s. */
static void fit_law(const Library *lib, const double *s, const double *dx, long N, double threshold, double *xi,
                    uint8_t *mask) {
    int p = lib->n_terms, k = lib->spec.n_latent;
    double *theta = malloc(sizeof(double) * N * p);
    library_eval(lib, theta, s, N);
    ThreshLsqOptions o = thresh_lsq_defaults();
    o.threshold = threshold;
    Status st;
    if (thresh_lsq_fit(xi, mask, theta, dx, N, p, k, NULL, &o, NULL, &st)) fail_msg("fit: %s", st.msg);
    free(theta);
}

/* Coefficient of term `name` (in the learned library's names, z for u) in canonical equation j. */
static double canon_coef(const Canonical *c, const Library *lib, const char *name, int j) {
    int t = library_find(lib, name);
    if (t < 0) fail_msg("no term %s", name);
    return c->mask[t * c->k + j] ? c->xi[t * c->k + j] : 0.0;
}

static void print_canonical(const Canonical *c, const Library *lib) {
    char buf[4096];
    canonical_format(buf, sizeof buf, EQ_TEXT, c, lib, 6);
    print_message("canonical (%s, %ld terms, learned %ld; cond %.3g): %s\n%s", canon_status_name(c->status),
                  c->active, c->active_raw, c->cond, c->note, buf);
    canonical_format_map(buf, sizeof buf, c, 6);
    print_message("%s", buf);
}

/* ---- the exact transform ---------------------------------------------------------------------- */

/* A polynomial law substituted exactly (sparse/polymap.h) equals the law evaluated at the
 * substituted point: the algebraic identity Theta(Q (sigma - c)) coef = Theta_full(sigma) out, checked
 * at random points for a second-order library of two latent variables and degree 3 with random
 * coefficients, map and offset. Tolerance 1e-11 relative: both sides are sums of at most 35 products
 * of O(1) numbers in double precision (rounding about 1e-15 each); the margin covers the growth of
 * cubes of the mapped coordinates. */
static void test_polymap_exact(void **state) {
    (void)state;
    LibrarySpec sp = library_spec_default(2, 2);
    sp.degree = 3;
    sp.constant = 0;   /* the law has no constant; the substitution creates one */
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    PolyBasis pb;
    assert_int_equal(polybasis_init(&pb, 2, 2, 3, &st), 0);
    assert_int_equal(pb.n_terms, 35);   /* C(4 + 3, 3): monomials of degree <= 3 in 4 variables */
    Rng rng;
    rng_seed(&rng, 7);
    int p = lib.n_terms, m = 2, nv = 4, nb = pb.n_terms;
    double *coef = malloc(sizeof(double) * p * m), *out = malloc(sizeof(double) * nb * m);
    for (int i = 0; i < p * m; i++) coef[i] = rng_normal(&rng);
    double Q[16], c[4];
    for (int i = 0; i < 16; i++) Q[i] = rng_normal(&rng) * 0.7;
    for (int i = 0; i < 4; i++) c[i] = rng_normal(&rng);
    polymap_apply(&pb, out, &lib, coef, m, Q, c);
    double *th = malloc(sizeof(double) * p), *thb = malloc(sizeof(double) * nb);
    for (int trial = 0; trial < 50; trial++) {
        double sig[4], s[4];
        for (int v = 0; v < nv; v++) sig[v] = rng_normal(&rng);
        for (int v = 0; v < nv; v++) {
            double a = 0;
            for (int w = 0; w < nv; w++) a += Q[v * nv + w] * (sig[w] - c[w]);
            s[v] = a;
        }
        library_eval(&lib, th, s, 1);
        library_eval(&pb.basis, thb, sig, 1);
        double thp[35];   /* the basis by products equals the library's evaluation of it */
        polybasis_eval(&pb, thp, sig, 1);
        for (int r = 0; r < nb; r++) assert_close(thp[r], thb[r], 1e-14, 1e-13);
        for (int j = 0; j < m; j++) {
            double direct = 0, mapped = 0, scale = 0;
            for (int t = 0; t < p; t++) direct += th[t] * coef[t * m + j], scale += fabs(th[t] * coef[t * m + j]);
            for (int r = 0; r < nb; r++) mapped += thb[r] * out[r * m + j];
            if (fabs(direct - mapped) > 1e-11 * (scale + 1))
                fail_msg("trial %d equation %d: direct %.17g, transformed %.17g", trial, j, direct, mapped);
        }
    }
    free(coef), free(out), free(th), free(thb);
    polybasis_free(&pb);
    library_free(&lib);
}

/* ---- Lorenz ------------------------------------------------------------------------------------ */

/* "Deterministic Nonperiodic Flow" (E. N. Lorenz, Journal of the Atmospheric Sciences 20, 1963):
 * sigma 10, rho 28, beta 8/3. */
static const double SIGMA = 10.0, RHO = 28.0, BETA = 8.0 / 3.0;

static void lorenz(double t, const double *s, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = SIGMA * (s[1] - s[0]);
    d[1] = s[0] * (RHO - s[2]) - s[1];
    d[2] = s[0] * s[1] - BETA * s[2];
}

/* A random affine map of three variables drawn from rng: R (3, 3) standard normal, then the offset
 * d (3) of scale 5. */
static void random_map(Rng *rng, double *R, double *d) {
    for (int i = 0; i < 9; i++) R[i] = rng_normal(rng);
    for (int i = 0; i < 3; i++) d[i] = 5 * rng_normal(rng);
}

/* Lorenz's system in z = R x + d (R, d random, seeded), derivatives with 0.1% noise (of each
 * component's rms); the dense degree-2 law fitted in z (30 terms), then the canonical step must
 * return the seven terms of the published form, whose diagonal coefficients -sigma, -1, -beta
 * (coefficient of u_i in du_i/dt, unchanged by any scaling of the variables, and by the offset
 * z -> z - rho of the third variable) match within 1%, the bound the issue asks. Why 0.1% noise:
 * the map is estimated from the same data, and its error moves the coefficients; measured over
 * twelve random maps, the coefficient -1 is off by up to 3% at 1% noise, 0.9% at 0.3% and 0.3% at
 * 0.1% (the error scales with the noise, so it is statistical, not a bias of the method). At 0.1%
 * a miss of 1% means a wrong map. */
static void test_lorenz(void **state) {
    (void)state;
    const int n = 5000, k = 3;
    const double dt = 0.004, y0[3] = {-8, 7, 27};
    double *x = simulate(lorenz, NULL, 3, y0, dt, n + 250);
    double *X = x + 250 * 3;   /* past the transient of one second */
    Rng rng;
    rng_seed(&rng, 2024);
    double R[9], d[3];
    random_map(&rng, R, d);
    double condR = la_cond(R, 3);
    print_message("random map: cond %.3g\n", condR);
    assert_true(condR > 2 && condR < 100);   /* a real mixing, well inside the default bound */
    double *z = malloc(sizeof(double) * n * k), *dz = malloc(sizeof(double) * n * k), rms[3] = {0};
    for (int r = 0; r < n; r++) {
        double f[3];
        lorenz(0, X + r * 3, f, NULL);
        for (int i = 0; i < k; i++) {
            double a = d[i], b = 0;
            for (int j = 0; j < 3; j++) a += R[i * 3 + j] * X[r * 3 + j], b += R[i * 3 + j] * f[j];
            z[r * k + i] = a;
            dz[r * k + i] = b;
            rms[i] += b * b;
        }
    }
    for (int i = 0; i < k; i++) rms[i] = sqrt(rms[i] / n);
    for (int r = 0; r < n; r++)
        for (int i = 0; i < k; i++) dz[r * k + i] += 0.001 * rms[i] * rng_normal(&rng);
    LibrarySpec sp = library_spec_default(3, 1);   /* degree 2 with the constant: 10 terms */
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int p = lib.n_terms;
    double *xi = malloc(sizeof(double) * p * k);
    uint8_t *mask = malloc((size_t)p * k);
    fit_law(&lib, z, dz, n, 1e-6, xi, mask);
    long dense = 0;
    for (int i = 0; i < p * k; i++) dense += mask[i] && xi[i] != 0;
    print_message("dense law: %ld terms\n", dense);
    assert_true(dense >= 27);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    print_canonical(&c, &lib);
    assert_int_equal(c.status, CANON_FOUND);
    assert_int_equal(c.active, 7);
    assert_true(c.cond <= o.cond_max);
    double diag[3], want[3] = {-SIGMA, -BETA, -1.0};   /* sorted ascending */
    const char *names[3] = {"z1", "z2", "z3"};
    for (int i = 0; i < 3; i++) diag[i] = canon_coef(&c, &lib, names[i], i);
    for (int a = 0; a < 3; a++)   /* sort */
        for (int b = a + 1; b < 3; b++)
            if (diag[b] < diag[a]) {
                double t = diag[a];
                diag[a] = diag[b];
                diag[b] = t;
            }
    for (int i = 0; i < 3; i++) {
        print_message("diagonal %d: %.6g (published %.6g)\n", i, diag[i], want[i]);
        assert_true(fabs(diag[i] - want[i]) <= 0.01 * fabs(want[i]));
    }
    for (int i = 0; i < k; i++) assert_true(c.err[i] <= (1 + o.tolerance) * c.err_raw[i] + o.err_floor);
    canonical_free(&c);
    free(x), free(z), free(dz), free(xi), free(mask);
    library_free(&lib);
}

/* Lorenz's system seen through a bent map, as an encoder may see it: z_i = v_i + 0.1 v_i^2 / 40 + d_i
 * with v = R x (R, d random, seeded; the chain rule gives z'), 3000 samples 0.01 apart (the search
 * on 2000 of them: its test of a law and the final one on every sample then differ), z' with 1% noise. No affine map straightens the
 * bend, so the law stays dense and the sparse candidates sit near the tolerance. The number of
 * terms can never grow when the tolerance is loosened: a law within 15% of the reference is within
 * 20% too (the definition of the tolerance, docs/canonical.md). This case once gave 16, 12 and 15
 * terms at 0.1, 0.15 and 0.2 (the greedy descent took the first removal within the tolerance, so a
 * looser tolerance followed another path, into a less sparse end). */
static void test_monotone_in_tolerance(void **state) {
    (void)state;
    const int n = 3000, k = 3;
    const double dt = 0.01, y0[3] = {-8, 7, 27}, bend = 0.1;
    double *x = simulate(lorenz, NULL, 3, y0, dt, n + 100);
    double *X = x + 100 * 3;   /* past the transient of one second */
    Rng rng;
    rng_seed(&rng, 3);
    double R[9], d[3];
    random_map(&rng, R, d);
    double *z = malloc(sizeof(double) * n * k), *dz = malloc(sizeof(double) * n * k), rms[3] = {0};
    for (int r = 0; r < n; r++) {
        double f[3];
        lorenz(0, X + r * 3, f, NULL);
        for (int i = 0; i < k; i++) {
            double v = 0, dv = 0;
            for (int j = 0; j < 3; j++) v += R[i * 3 + j] * X[r * 3 + j], dv += R[i * 3 + j] * f[j];
            z[r * k + i] = v + bend * v * v / 40 + d[i];
            dz[r * k + i] = dv * (1 + 2 * bend * v / 40);
            rms[i] += dz[r * k + i] * dz[r * k + i];
        }
    }
    for (int i = 0; i < k; i++) rms[i] = sqrt(rms[i] / n);
    for (int r = 0; r < n; r++)
        for (int i = 0; i < k; i++) dz[r * k + i] += 0.01 * rms[i] * rng_normal(&rng);
    LibrarySpec sp = library_spec_default(3, 1);
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int p = lib.n_terms;
    double *xi = malloc(sizeof(double) * p * k);
    uint8_t *mask = malloc((size_t)p * k);
    fit_law(&lib, z, dz, n, 1e-6, xi, mask);
    const double tol[3] = {0.1, 0.15, 0.2};
    long prev = -1;
    for (int q = 0; q < 3; q++) {
        CanonOptions o = canon_defaults();
        o.tolerance = tol[q];
        o.max_samples = 2000;   /* the search on a subsample, as it was when the case was found */
        Canonical c;
        assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
        print_message("tolerance %g: %s, %ld terms (learned %ld)\n", tol[q], canon_status_name(c.status), c.active,
                      c.active_raw);
        assert_int_equal(c.status, CANON_FOUND);
        assert_true(c.active < c.active_raw);
        if (prev >= 0 && c.active > prev) fail_msg("tolerance %g: %ld terms, more than %ld at %g", tol[q], c.active, prev, tol[q - 1]);
        prev = c.active;
        canonical_free(&c);
    }
    free(x), free(z), free(dz), free(xi), free(mask);
    library_free(&lib);
}

/* ---- damped pendulum --------------------------------------------------------------------------- */

/* theta'' = -(g / L) sin(theta) - c theta' (the damped rigid pendulum, any mechanics text), g the
 * standard gravity 9.80665 m/s^2 (3rd CGPM, 1901), L = 0.5 m, c = 0.3 1/s (our choice). */
static const double G0 = 9.80665, LEN = 0.5, DAMP = 0.3;

static void pendulum(double t, const double *s, double *d, void *ctx) {
    (void)t, (void)ctx;
    d[0] = s[1];
    d[1] = -(G0 / LEN) * sin(s[0]) - DAMP * s[1];
}

static const double PEND_A = 0.6, PEND_B = 0.4, PEND_DT = 0.01;
enum { PEND_REC = 5, PEND_PER = 800 };

/* The samples (PEND_REC recordings of PEND_PER, state (n, 2) and target (n)) of the test below. */
static void pendulum_data(double **s_out, double **y_out) {
    const double a = PEND_A, b = PEND_B, dt = PEND_DT, amps[PEND_REC] = {0.3, 0.9, 1.5, 2.1, 2.6};
    const int per = PEND_PER, n = PEND_REC * per;
    double *s = malloc(sizeof(double) * n * 2), *y = malloc(sizeof(double) * n);
    Rng rng;
    rng_seed(&rng, 11);
    double rms = 0;
    for (int r = 0; r < 5; r++) {
        double y0[2] = {amps[r], 0};
        double *th = simulate(pendulum, NULL, 2, y0, dt, per);
        for (int i = 0; i < per; i++) {
            double d[2];
            pendulum(0, th + 2 * i, d, NULL);
            long q = (long)r * per + i;
            s[q * 2] = (th[2 * i] - b) / a;
            s[q * 2 + 1] = th[2 * i + 1] / a;
            y[q] = d[1] / a;
            rms += y[q] * y[q];
        }
        free(th);
    }
    rms = sqrt(rms / n);
    for (int q = 0; q < n; q++) y[q] += 0.005 * rms * rng_normal(&rng);
    *s_out = s, *y_out = y;
}

/* The samples above, the lantern's library (second order, degree 3, no constant, sin and cos of z)
 * and the learned law on it (thresholded least squares at 1e-3). */
static void pendulum_law(Library *lib, double **s, double **y, double **xi, uint8_t **mask) {
    pendulum_data(s, y);
    LibrarySpec sp = library_spec_default(1, 2);
    sp.degree = 3;
    sp.constant = 0;
    sp.trig = 1;
    sp.trig_velocity = 0;
    Status st;
    assert_int_equal(library_init(lib, &sp, &st), 0);
    *xi = malloc(sizeof(double) * lib->n_terms);
    *mask = malloc((size_t)lib->n_terms);
    fit_law(lib, *s, *y, PEND_REC * PEND_PER, 1e-3, *xi, *mask);
}

/* Swings from 0.3 to 2.6 rad seen in z = (theta - b) / a (a = 0.6, b = 0.4), z'' with 0.5% noise,
 * the lantern's library (second order, degree 3, no constant, sin and cos of z). In z the library
 * has sin(z) but the law needs sin(0.6 z + 0.4): the learned law is a dense approximation. The
 * canonical step must return exactly sin(w u) and du/dt, with w c_sin = -g/L within 1% and the
 * damping coefficient -c within 2% (both unchanged by any scale or offset of the angle: w u is the
 * angle up to a shift, and d2u/dt2 = a_u theta'' keeps the ratio of the terms). With 0.5% noise on
 * 4000 samples the least-squares errors of both are below 0.1%, so the bounds test the map. */
static void test_pendulum(void **state) {
    (void)state;
    const double a = PEND_A, b = PEND_B;
    const int n = PEND_REC * PEND_PER;
    double *s, *y, *xi;
    uint8_t *mask;
    Library lib;
    Status st;
    pendulum_law(&lib, &s, &y, &xi, &mask);
    char buf[2048];
    equation_format(buf, sizeof buf, EQ_TEXT, &lib, xi, mask, 5);
    print_message("learned: %s", buf);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, s, y, n, &o, &st), 0);
    print_canonical(&c, &lib);
    print_message("errors: canonical %.4g, learned %.4g\n", c.err[0], c.err_raw[0]);
    assert_int_equal(c.status, CANON_FOUND);
    assert_int_equal(c.active, 2);
    double cs = canon_coef(&c, &lib, "sin(z1)", 0), cd = canon_coef(&c, &lib, "dz1/dt", 0);
    assert_true(cs != 0 && cd != 0);
    print_message("w c_sin = %.6g (-g/L = %.6g), damping %.6g (-c = %.6g)\n", cs * c.w[0], -G0 / LEN, cd, -DAMP);
    assert_close(cs * c.w[0], -G0 / LEN, 0, 0.01);
    assert_close(cd, -DAMP, 0, 0.02);
    assert_close(c.w[0], a, 0, 0.01);   /* one variable keeps its scale: w u is the angle */
    /* the canonical law integrated (canonical_ode_rhs, what `framelaw verify --law canonical` runs)
     * from a 0.3 rad release mapped into u: its period is the true pendulum's, measured the same way
     * from the true law (a property no change of coordinates alters); with both coefficients within
     * 1-2% the period is within 1% */
    CanonicalOde co;
    assert_int_equal(canonical_ode_init(&co, &c, &lib, &st), 0);
    double s0[2] = {(0.3 - b) / a, 0}, u0[2], th0[2] = {0.3, 0}, per_u, per_true;
    canonical_map_state(&c, u0, s0, 1);
    assert_int_equal(verify_period(canonical_ode_rhs, &co, 2, u0, 0, 20, 1e-3, &per_u, &st), 0);
    assert_int_equal(verify_period(pendulum, NULL, 2, th0, 0, 20, 1e-3, &per_true, &st), 0);
    print_message("period: canonical law %.6g s, true law %.6g s\n", per_u, per_true);
    assert_close(per_u, per_true, 0, 0.01);
    canonical_ode_free(&co);
    canonical_free(&c);
    free(s), free(y), free(xi), free(mask);
    library_free(&lib);
}

/* canonical_find at `tolerance` on the pendulum's samples (s, y; its PEND_REC recordings), then the
 * forecast choice with the selection's defaults; both laws printed. *before: the search's terms. */
static void find_and_choose(const Library *lib, const double *s, const double *y, const double *xi,
                            const uint8_t *mask, double tolerance, Canonical *c, CanonSelectReport *rep,
                            long *before) {
    const int n = PEND_REC * PEND_PER;
    CanonOptions o = canon_defaults();
    o.tolerance = tolerance;
    long rs[PEND_REC + 1];
    for (int r = 0; r <= PEND_REC; r++) rs[r] = (long)r * PEND_PER;
    SelectData D = {n, 2, 1, s, y, PEND_REC, rs, PEND_DT};
    SelectOptions so = select_defaults();
    Status st;
    assert_int_equal(canonical_find(c, lib, xi, mask, s, y, n, &o, &st), 0);
    print_canonical(c, lib);
    *before = c->active;
    assert_int_equal(canonical_select(c, lib, &D, &so, rep, &st), 0);
    print_canonical(c, lib);
}

/* The forecast choice (sparse/canonical_select.h) on the pendulum's samples above: canonical_find at
 * tolerance 0 keeps every term that improves the fit at all (a dense law in u); the backward
 * elimination by the selection's forecast score, with the sine's frequency refitted, must come back
 * to exactly sin(w u) and du/dt, with w c_sin = -g/L within 1%, the damping -c within 2% and w
 * within 1% of the angle's scale (the same bounds as the test above, for the same reasons), so the
 * weak damping (damping ratio c / (2 sqrt(g/L)) = 0.034) is not left out. The score must fall, and
 * the choice must say it changed the law. Its eliminations (one per trial warp) run in parallel and
 * are merged in grid order, so two threads must give the bits of one. */
static void test_pendulum_forecast_choice(void **state) {
    (void)state;
    const int n = PEND_REC * PEND_PER;
    double *s, *y, *xi;
    uint8_t *mask;
    Library lib;
    Status st;
    pendulum_law(&lib, &s, &y, &xi, &mask);
    {
        Canonical c, c1;
        CanonSelectReport rep, rep1;
        long dense;
        nn_set_threads(1);
        find_and_choose(&lib, s, y, xi, mask, 0, &c1, &rep1, &dense);
        nn_set_threads(2);
        find_and_choose(&lib, s, y, xi, mask, 0, &c, &rep, &dense);
        assert_int_equal(c.active, c1.active);
        assert_memory_equal(c.mask, c1.mask, (size_t)lib.n_terms);
        assert_memory_equal(c.xi, c1.xi, (size_t)lib.n_terms * sizeof *c.xi);
        assert_memory_equal(c.w, c1.w, sizeof c.w);
        assert_memory_equal(&rep.score, &rep1.score, sizeof rep.score);
        assert_int_equal(rep.steps, rep1.steps);
        canonical_free(&c1);
        print_message("forecast choice: %ld -> %ld terms, score %.4g -> %.4g, %d laws scored\n", dense, c.active,
                      rep.score_start, rep.score, rep.steps);
        assert_true(dense > 2);
        assert_int_equal(rep.changed, 1);
        assert_true(rep.score < rep.score_start);
        assert_int_equal(c.status, CANON_FOUND);
        assert_int_equal(c.active, 2);
        double cs = canon_coef(&c, &lib, "sin(z1)", 0), cd = canon_coef(&c, &lib, "dz1/dt", 0);
        assert_true(cs != 0 && cd != 0);
        print_message("w c_sin = %.6g (-g/L = %.6g), damping %.6g (-c = %.6g), w %.6g\n", cs * c.w[0], -G0 / LEN, cd,
                      -DAMP, c.w[0]);
        assert_close(cs * c.w[0], -G0 / LEN, 0, 0.01);
        assert_close(cd, -DAMP, 0, 0.02);
        assert_close(c.w[0], PEND_A, 0, 0.01);
        canonical_free(&c);
    }
    /* recordings of one sample each (no forecast fits; a segment is capped at the longest
     * recording, so only this refuses): the choice is refused as bad input and leaves the search's
     * law as it was */
    long *rs1 = malloc(sizeof(long) * (n + 1));
    for (int r = 0; r <= n; r++) rs1[r] = r;
    SelectData D1 = {n, 2, 1, s, y, n, rs1, PEND_DT};
    CanonOptions o = canon_defaults();
    o.tolerance = 0;
    SelectOptions so = select_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, s, y, n, &o, &st), 0);
    long before = c.active;
    CanonSelectReport rep;
    assert_int_equal(canonical_select(&c, &lib, &D1, &so, &rep, &st), ST_INPUT);
    print_message("one-sample recordings: %s\n", st.msg);
    assert_non_null(strstr(st.msg, "forecast segment"));
    assert_int_equal(c.active, before);
    assert_int_equal(rep.changed, 0);
    canonical_free(&c);
    free(rs1);
    free(s), free(y), free(xi), free(mask);
    library_free(&lib);
}

/* The pendulum above seen through a bent coordinate: z + c z^3 = (theta - b) / a, c = 0.02 (z from
 * Newton's method; z' and z'' by the chain rule, the 0.5% noise of the target carried along). In z
 * the law needs the warp's own terms (a z (z')^2 among them) besides the sine, so no affine map
 * gives two terms; the forecast choice with its cubic warp must return exactly sin(w u) and du/dt
 * under u = z + c3 z^3 + b', with c3 = c within 5% (the warp's last grid has a step of 3% of it),
 * w c_sin = -g/L and the damping -c within 2%, and the period of a 0.3 rad release mapped into u
 * within 1% of the true law's (a property no change of coordinates alters). */
static void test_pendulum_warp(void **state) {
    (void)state;
    const double cw = 0.02;
    const int n = PEND_REC * PEND_PER;
    double *s, *y, *xi;
    uint8_t *mask;
    Library lib;
    Status st;
    pendulum_law(&lib, &s, &y, &xi, &mask);
    for (int q = 0; q < n; q++) { /* phi = (theta - b) / a, phi', phi'' -> z, z', z'' */
        double phi = s[2 * q], z = phi;
        for (int it = 0; it < 60; it++) z -= (z + cw * z * z * z - phi) / (1 + 3 * cw * z * z);
        double g1 = 1 + 3 * cw * z * z, dz = s[2 * q + 1] / g1;
        y[q] = (y[q] - 6 * cw * z * dz * dz) / g1;
        s[2 * q] = z, s[2 * q + 1] = dz;
    }
    fit_law(&lib, s, y, n, 1e-3, xi, mask);
    Canonical c;
    CanonSelectReport rep;
    long affine;
    find_and_choose(&lib, s, y, xi, mask, canon_defaults().tolerance, &c, &rep, &affine);
    print_message("forecast choice: %ld -> %ld terms, warp %.6g (c = %.6g), %d laws scored\n", affine, c.active,
                  c.c3[0], cw, rep.steps);
    assert_true(affine > 2);
    assert_int_equal(c.status, CANON_FOUND);
    assert_int_equal(c.active, 2);
    assert_close(c.c3[0], cw, 0, 0.05);
    assert_true(rep.warp == c.c3[0]);
    double cs = canon_coef(&c, &lib, "sin(z1)", 0), cd = canon_coef(&c, &lib, "dz1/dt", 0);
    print_message("w c_sin = %.6g (-g/L = %.6g), damping %.6g (-c = %.6g), w %.6g\n", cs * c.w[0], -G0 / LEN, cd,
                  -DAMP, c.w[0]);
    assert_close(cs * c.w[0], -G0 / LEN, 0, 0.02);
    assert_close(cd, -DAMP, 0, 0.02);
    /* the map: z = 0 is theta = b, so u(0) w = b' w must be that angle up to the sine's period */
    CanonicalOde co;
    assert_int_equal(canonical_ode_init(&co, &c, &lib, &st), 0);
    double phi0 = (0.3 - PEND_B) / PEND_A, z0 = phi0;
    for (int it = 0; it < 60; it++) z0 -= (z0 + cw * z0 * z0 * z0 - phi0) / (1 + 3 * cw * z0 * z0);
    double s0[2] = {z0, 0}, u0[2], th0[2] = {0.3, 0}, per_u, per_true;
    canonical_map_state(&c, u0, s0, 1);
    assert_int_equal(verify_period(canonical_ode_rhs, &co, 2, u0, 0, 20, 1e-3, &per_u, &st), 0);
    assert_int_equal(verify_period(pendulum, NULL, 2, th0, 0, 20, 1e-3, &per_true, &st), 0);
    print_message("period: canonical law %.6g s, true law %.6g s\n", per_u, per_true);
    assert_close(per_u, per_true, 0, 0.01);
    /* the bent map's velocity and target are the time derivatives of its state (the chain rule):
     * along z(t) = 2 sin t, central differences (h = 1e-4, error ~1e-8) of u and u' against
     * canonical_map_state's u' and canonical_map_target's u'' */
    for (int q = 0; q < 5; q++) {
        double t = 0.3 + 0.7 * q, h = 1e-4, sv[3][2], uv[3][2], yt = -2 * sin(t), yu;
        for (int m = 0; m < 3; m++) {
            double tm = t + (m - 1) * h;
            sv[m][0] = 2 * sin(tm), sv[m][1] = 2 * cos(tm);
            canonical_map_state(&c, uv[m], sv[m], 1);
        }
        canonical_map_target(&c, &yu, sv[1], &yt, 1);
        assert_close(uv[1][1], (uv[2][0] - uv[0][0]) / (2 * h), 1e-6, 0);
        assert_close(yu, (uv[2][1] - uv[0][1]) / (2 * h), 1e-6, 0);
    }
    /* the map's text names the warp */
    char buf[512];
    canonical_format_map(buf, sizeof buf, &c, 4);
    print_message("%s", buf);
    assert_non_null(strstr(buf, "*z1^3"));
    canonical_ode_free(&co);
    canonical_free(&c);
    free(s), free(y), free(xi), free(mask);
    library_free(&lib);
}

/* ---- linear laws --------------------------------------------------------------------------------- */

/* A linear law x' = diag(-1, -3) x seen in z = R x + d, R a rotation by 30 degrees, d = (2, -1):
 * z' = M (z - d), M = R diag(-1, -3) R^T. Exact derivatives on four trajectories (x(t) = exp(D t) x0).
 * The canonical step must find the modal form, two terms du_i/dt = lambda_i u_i, whose coefficients
 * equal the eigenvalues of M (LAPACK dgeev) to 1e-6: the modal coordinates diagonalise a linear law
 * with distinct real eigenvalues (any linear algebra text), and with exact data the refit is exact
 * to rounding (1e-12), so 1e-6 is a loose bound that still fails for any wrong map. */
static void make_linear(const double *R, double **zs, double **dzs, int *count, double *M) {
    const double lam[2] = {-1, -3}, d[2] = {2, -1};
    double Ri[4];
    assert_int_equal(la_inverse(Ri, R, 2), 0);
    for (int i = 0; i < 2; i++)
        for (int j = 0; j < 2; j++) M[i * 2 + j] = R[i * 2] * lam[0] * Ri[j] + R[i * 2 + 1] * lam[1] * Ri[2 + j];
    const int per = 200, n = 4 * per;
    const double x0[4][2] = {{1, 0.5}, {-0.7, 1}, {0.3, -1.2}, {-1, -0.4}};
    double *z = malloc(sizeof(double) * n * 2), *dz = malloc(sizeof(double) * n * 2);
    for (int r = 0; r < 4; r++)
        for (int i = 0; i < per; i++) {
            double t = 0.01 * i, x[2], dx[2];
            for (int j = 0; j < 2; j++) x[j] = x0[r][j] * exp(lam[j] * t), dx[j] = lam[j] * x[j];
            long q = (long)r * per + i;
            for (int j = 0; j < 2; j++) {
                z[q * 2 + j] = d[j] + R[j * 2] * x[0] + R[j * 2 + 1] * x[1];
                dz[q * 2 + j] = R[j * 2] * dx[0] + R[j * 2 + 1] * dx[1];
            }
        }
    *zs = z, *dzs = dz, *count = n;
}

/* Condition number of the returned map between standardised coordinates, from the samples. */
static double std_cond(const Canonical *c, const double *z, int n) {
    int k = c->k;
    double sz[2] = {0}, mz[2] = {0}, su[2] = {0}, mu[2] = {0};
    for (int q = 0; q < n; q++)
        for (int j = 0; j < k; j++) mz[j] += z[q * k + j] / n;
    for (int q = 0; q < n; q++)
        for (int i = 0; i < k; i++) {
            double u = 0;
            for (int j = 0; j < k; j++) u += c->A[i * k + j] * z[q * k + j];
            mu[i] += u / n;
        }
    for (int q = 0; q < n; q++)
        for (int i = 0; i < k; i++) {
            double u = 0;
            for (int j = 0; j < k; j++) u += c->A[i * k + j] * z[q * k + j];
            su[i] += (u - mu[i]) * (u - mu[i]) / n;
            sz[i] += (z[q * k + i] - mz[i]) * (z[q * k + i] - mz[i]) / n;
        }
    double At[4];
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) At[i * k + j] = c->A[i * k + j] * sqrt(sz[j]) / sqrt(su[i]);
    return la_cond(At, k);
}

static void test_linear_modal(void **state) {
    (void)state;
    double *z, *dz, M[4];
    int n;
    const double ang = M_PI / 6, R[4] = {cos(ang), -sin(ang), sin(ang), cos(ang)};
    make_linear(R, &z, &dz, &n, M);
    LibrarySpec sp = library_spec_default(2, 1);   /* degree 2 with the constant */
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int p = lib.n_terms;
    double *xi = malloc(sizeof(double) * p * 2);
    uint8_t *mask = malloc((size_t)p * 2);
    fit_law(&lib, z, dz, n, 1e-8, xi, mask);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    print_canonical(&c, &lib);
    assert_int_equal(c.status, CANON_FOUND);
    assert_int_equal(c.active, 2);
    double re[2], im[2], V[4];
    assert_int_equal(la_eig(re, im, V, M, 2), 0);
    assert_true(im[0] == 0 && im[1] == 0);
    double d0 = canon_coef(&c, &lib, "z1", 0), d1 = canon_coef(&c, &lib, "z2", 1);
    double lo = fmin(re[0], re[1]), hi = fmax(re[0], re[1]);
    print_message("eigenvalues %.12g %.12g, diagonal %.12g %.12g\n", lo, hi, d0, d1);
    assert_true(fabs(fmin(d0, d1) - lo) <= 1e-6 && fabs(fmax(d0, d1) - hi) <= 1e-6);
    assert_true(std_cond(&c, z, n) <= o.cond_max);
    /* the canonical law as an ODE (canonical_ode_rhs): its fixed point is the image of z = d, where
     * the learned law rests, and its Jacobian there has M's eigenvalues (to 1e-6 as above) */
    CanonicalOde co;
    assert_int_equal(canonical_ode_init(&co, &c, &lib, &st), 0);
    double zs[2] = {2, -1}, u0[2], u[2], ere[2], eim[2];
    canonical_map_state(&c, u0, zs, 1);
    u0[0] += 0.1, u0[1] -= 0.1;   /* a start off the fixed point for the search */
    assert_int_equal(verify_fixed_point(canonical_ode_rhs, &co, 2, u0, u, &st), 0);
    double uz[2];
    canonical_map_state(&c, uz, zs, 1);
    assert_true(fabs(u[0] - uz[0]) <= 1e-6 * (1 + fabs(uz[0])) && fabs(u[1] - uz[1]) <= 1e-6 * (1 + fabs(uz[1])));
    assert_int_equal(verify_jacobian_eigs(canonical_ode_rhs, &co, 2, u, ere, eim, &st), 0);
    print_message("canonical ODE: eigenvalues %.12g %.12g\n", fmin(ere[0], ere[1]), fmax(ere[0], ere[1]));
    assert_true(fabs(fmin(ere[0], ere[1]) - lo) <= 1e-6 && fabs(fmax(ere[0], ere[1]) - hi) <= 1e-6);
    canonical_ode_free(&co);
    canonical_free(&c);
    free(z), free(dz), free(xi), free(mask);
    library_free(&lib);
}

/* The same law in nearly dependent coordinates, z = R x + d with R = [1, 0; 1, 2e-3] (z2 differs
 * from z1 by 0.2% of x2): its modal map has a condition number near 1e3 / (2e-3 / 2) ~ 1e3..1e4
 * between standardised coordinates (measured below). With the default bound 1e3 it
 * is never reported (the result, whatever it is, stays within the bound, checked from the
 * samples); with the bound raised to 1e6 the same data gives the two-term modal form, which shows
 * it is the bound that refuses it. */
static void test_condition_bound(void **state) {
    (void)state;
    double *z, *dz, M[4];
    int n;
    const double R[4] = {1, 0, 1, 2e-3};
    make_linear(R, &z, &dz, &n, M);
    LibrarySpec sp = library_spec_default(2, 1);
    sp.degree = 1;
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int p = lib.n_terms;
    double *xi = malloc(sizeof(double) * p * 2);
    uint8_t *mask = malloc((size_t)p * 2);
    fit_law(&lib, z, dz, n, 1e-8, xi, mask);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    print_canonical(&c, &lib);
    double cond = std_cond(&c, z, n);
    print_message("bound %g: status %s, %ld terms, condition %.4g\n", o.cond_max, canon_status_name(c.status), c.active, cond);
    assert_true(cond <= o.cond_max * (1 + 1e-9));
    assert_true(c.cond <= o.cond_max);
    assert_true(c.active > 2);
    canonical_free(&c);
    o.cond_max = 1e6;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    cond = std_cond(&c, z, n);
    print_message("bound %g: status %s, %ld terms, condition %.4g\n", o.cond_max, canon_status_name(c.status), c.active, cond);
    assert_int_equal(c.active, 2);
    assert_true(cond > 1e3 && cond <= o.cond_max);
    canonical_free(&c);
    free(z), free(dz), free(xi), free(mask);
    library_free(&lib);
}

/* The shift that removes the square term of a cubic (Cardano's depressed cubic; any algebra text):
 * z' = -(z - 2)^3 + (z - 2) has four terms in z (1, z, z^2, z^3) and two in u = z - 2. One latent
 * variable, exact derivatives at 400 points of [0, 4]; the offset b = -2 and the coefficients -1
 * and 1 to 1e-8 (exact data: the refit is exact to rounding). */
static void test_cubic_offset(void **state) {
    (void)state;
    const int n = 400;
    double *z = malloc(sizeof(double) * n), *dz = malloc(sizeof(double) * n);
    for (int i = 0; i < n; i++) {
        z[i] = 4.0 * i / (n - 1);
        double u = z[i] - 2;
        dz[i] = -u * u * u + u;
    }
    LibrarySpec sp = library_spec_default(1, 1);
    sp.degree = 3;
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    double xi[4];
    uint8_t mask[4];
    fit_law(&lib, z, dz, n, 1e-8, xi, mask);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    print_canonical(&c, &lib);
    assert_int_equal(c.status, CANON_FOUND);
    assert_int_equal(c.active_raw, 4);
    assert_int_equal(c.active, 2);
    assert_close(c.A[0], 1, 1e-12, 0);
    assert_close(c.b[0], -2, 1e-8, 0);
    assert_close(canon_coef(&c, &lib, "z1^3", 0), -1, 1e-8, 0);
    assert_close(canon_coef(&c, &lib, "z1", 0), 1, 1e-8, 0);
    canonical_free(&c);
    free(z), free(dz);
    library_free(&lib);
}

/* A law with no active terms: the status says there is nothing to simplify; bad options and bad
 * data are refused with ST_INPUT and a message naming the setting. */
static void test_nothing_and_bad_input(void **state) {
    (void)state;
    const int n = 50;
    double z[2 * 50], dz[2 * 50];
    for (int i = 0; i < 2 * n; i++) z[i] = sin(0.37 * i), dz[i] = cos(0.11 * i);
    LibrarySpec sp = library_spec_default(2, 1);
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    int p = lib.n_terms;
    double xi[12] = {0};
    uint8_t mask[12];
    memset(mask, 1, sizeof mask);
    CanonOptions o = canon_defaults();
    Canonical c;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), 0);
    assert_int_equal(c.status, CANON_NOTHING);
    assert_string_equal(canon_status_name(c.status), "nothing");
    assert_non_null(strstr(c.note, "nothing to simplify"));
    assert_int_equal(c.active, 0);
    canonical_free(&c);
    xi[1] = 1;   /* dz1/dt = z1 */
    o.cond_max = 0.5;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "condition bound"));
    canonical_free(&c);
    o = canon_defaults();
    o.tolerance = -1;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "tolerance"));
    canonical_free(&c);
    o = canon_defaults();
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, p - 1, &o, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "samples"));
    canonical_free(&c);
    z[7] = NAN;
    assert_int_equal(canonical_find(&c, &lib, xi, mask, z, dz, n, &o, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "non-finite"));
    canonical_free(&c);
    library_free(&lib);
}

int main(void) {
    nn_set_threads(2); /* the forecast choice's eliminations run in parallel */
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_polymap_exact),
        cmocka_unit_test(test_lorenz),
        cmocka_unit_test(test_monotone_in_tolerance),
        cmocka_unit_test(test_pendulum),
        cmocka_unit_test(test_pendulum_forecast_choice),
        cmocka_unit_test(test_pendulum_warp),
        cmocka_unit_test(test_linear_modal),
        cmocka_unit_test(test_condition_bound),
        cmocka_unit_test(test_cubic_offset),
        cmocka_unit_test(test_nothing_and_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
