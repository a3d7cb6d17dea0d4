/* tests/test_select.c: model selection by integrated forecasts (sparse/select.h).
 *
 * The data are exact solutions with their exact derivatives, so the right law forecasts with an
 * error at the integrator's rounding, and any other law does worse:
 * - the damped linear oscillator z'' = -w0^2 z - 2 sigma z' (closed-form solution
 *   z = exp(-sigma t) (A cos(wd t) + B sin(wd t)), wd = sqrt(w0^2 - sigma^2): any mechanics text,
 *   e.g. Thornton and Marion, Classical Dynamics of Particles and Systems, 5th ed., 2004, sec. 3.5);
 * - the same oscillator seen through a warped coordinate is not a law of the library, and the
 *   selection still returns a law (the one that forecasts best, simplest within tolerance);
 * - the Lorenz system (sigma 10, rho 28, beta 8/3, "Deterministic nonperiodic flow", Journal of the
 *   Atmospheric Sciences, 1963), integrated finely by RK4 with the derivatives from the equations.
 * Recording boundaries: two recordings whose junction would be a jump; forecasts that crossed it
 * would show an error far above the integrator's. */
#include "tests/testutil.h"

#include "nn/mat.h"
#include "sparse/library.h"
#include "sparse/select.h"

enum { NREC = 4, NT = 200 };

static void oscillator(double w0, double sg, double dt, double *state, double *target, long *rs) {
    double wd = sqrt(w0 * w0 - sg * sg);
    for (int r = 0; r < NREC; r++) {
        double A = 0.5 + 0.4 * r, B = 0.3 - 0.2 * r;
        rs[r] = (long)r * NT;
        for (int i = 0; i < NT; i++) {
            double t = i * dt, e = exp(-sg * t), c = cos(wd * t), s = sin(wd * t);
            double z = e * (A * c + B * s);
            double v = e * ((-sg * A + wd * B) * c + (-sg * B - wd * A) * s);
            long k = (long)r * NT + i;
            state[2 * k] = z, state[2 * k + 1] = v;
            target[k] = -w0 * w0 * z - 2 * sg * v;
        }
    }
    rs[NREC] = (long)NREC * NT;
}

/* The oscillator's data seen in the coordinate u = z + 0.3 z^2: u' = (1 + 0.6 z) z',
 * u'' = 0.6 z'^2 + (1 + 0.6 z) z''. */
static void warp(double *state, double *target) {
    for (long k = 0; k < NREC * NT; k++) {
        double a = 0.3, z = state[2 * k], v = state[2 * k + 1], acc = target[k];
        state[2 * k] = z + a * z * z;
        state[2 * k + 1] = (1 + 2 * a * z) * v;
        target[k] = 2 * a * v * v + (1 + 2 * a * z) * acc;
    }
}

static Library make_lib(int latent, int order, int degree, int trig) {
    LibrarySpec sp = library_spec_default(latent, order);
    sp.degree = degree;
    sp.trig = trig;
    Library lib;
    Status st;
    assert_int_equal(library_init(&lib, &sp, &st), 0);
    return lib;
}

static void test_linear_oscillator(void **state_) {
    (void)state_;
    double dt = 0.04, w0 = 8.27, sg = 0.25;
    static double state[2 * NREC * NT], target[NREC * NT];
    long rs[NREC + 1];
    oscillator(w0, sg, dt, state, target, rs);
    Library lib = make_lib(1, 2, 3, 1);
    SelectData D = {NREC * NT, 2, 1, state, target, NREC, rs, dt};
    SelectOptions o = select_defaults();
    double xi[64];
    uint8_t mask[64];
    SelectPath p;
    Status st;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, mask, &p, &st), 0);
    int iz = library_find(&lib, "z1"), iv = library_find(&lib, "dz1/dt");
    long active = 0;
    for (int t = 0; t < lib.n_terms; t++) active += mask[t];
    assert_int_equal(active, 2);
    assert_true(mask[iz] && mask[iv]);
    /* exact derivatives: least squares recovers the coefficients to rounding */
    assert_close(xi[iz], -w0 * w0, 1e-9, 1e-9);
    assert_close(xi[iv], -2 * sg, 1e-9, 1e-9);
    int chosen = -1;
    for (int c = 0; c < p.n; c++)
        if (p.e[c].chosen) chosen = c;
    assert_true(chosen >= 0);
    /* RK4 at h = dt / 4: phase error per step (w0 h)^5 / 120 (common practice for RK4 on an oscillator),
     * 3e-8 here, 2.6e-5 after the 800 steps of a whole recording */
    assert_true(p.e[chosen].forecast < 1e-4);
    /* horizon: 3 periods of w_c = sqrt(rms(z'') / std(z)) at dt */
    assert_true(p.horizon >= 8 && p.horizon <= NT);
    select_path_free(&p);
    library_free(&lib);
}

/* The same motion in the coordinate u = z + 0.3 z^2 (monotone on the data's range): no law of the
 * library is exact. The selection must still pick the law of the smallest score among every
 * candidate it reports, and no single added or dropped term may lower that score. */
static void test_warped_coordinate(void **state_) {
    (void)state_;
    double dt = 0.04, w0 = 8.27, sg = 0.25;
    static double state[2 * NREC * NT], target[NREC * NT];
    long rs[NREC + 1];
    oscillator(w0, sg, dt, state, target, rs);
    warp(state, target);
    Library lib = make_lib(1, 2, 3, 0);
    SelectData D = {NREC * NT, 2, 1, state, target, NREC, rs, dt};
    SelectOptions o = select_defaults();
    double xi[64];
    uint8_t mask[64];
    SelectPath p;
    Status st;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, mask, &p, &st), 0);
    int chosen = -1;
    for (int c = 0; c < p.n; c++)
        if (p.e[c].chosen) chosen = c;
    assert_true(chosen >= 0);
    for (int c = 0; c < p.n; c++) {
        /* the score as documented in sparse/select.h: each active term multiplies by 1 + tol c, c its
         * degree (constant 1, sin / cos 2) */
        double want = p.e[c].forecast + o.abs_tol;
        for (int t = 0; t < lib.n_terms; t++)
            for (int j = 0; j < p.d; j++) {
                if (!p.mask[((long)c * lib.n_terms + t) * p.d + j]) continue;
                const Term *tm = &lib.terms[t];
                int cx = tm->kind == TERM_CONST ? 1 : tm->kind == TERM_MONO ? 0 : 2;
                for (int i = 0; tm->kind == TERM_MONO && i < tm->n_fac; i++) cx += tm->pow[i];
                want *= 1 + o.tol * cx;
            }
        assert_close(p.e[c].score, want, 0, 1e-12);
        assert_true(p.e[chosen].score <= p.e[c].score);
    }
    /* every neighbour of the choice (one term more or less) was scored and is no better */
    for (int t = 0; t < lib.n_terms; t++) {
        int found = 0;
        for (int c = 0; c < p.n && !found; c++) {
            int diff = 0;
            for (int u = 0; u < lib.n_terms; u++) diff += p.mask[c * lib.n_terms + u] != p.mask[chosen * lib.n_terms + u];
            found = diff == 1 && p.mask[c * lib.n_terms + t] != p.mask[chosen * lib.n_terms + t];
        }
        int empty = p.e[chosen].active == 1 && p.mask[chosen * lib.n_terms + t];
        assert_true(found || empty);
    }
    select_path_free(&p);
    library_free(&lib);
}

static void lorenz(const double *y, double *f) {
    f[0] = 10 * (y[1] - y[0]);
    f[1] = y[0] * (28 - y[2]) - y[1];
    f[2] = y[0] * y[1] - 8.0 / 3.0 * y[2];
}

static void test_lorenz(void **state_) {
    (void)state_;
    enum { R = 3, N = 300 };
    double dt = 0.01;
    static double state[3 * R * N], target[3 * R * N];
    long rs[R + 1];
    for (int r = 0; r < R; r++) {
        double y[3] = {1.0 + 3 * r, 1.0 - 2 * r, 20.0 + r}, k1[3], k2[3], k3[3], k4[3], tmp[3];
        for (int i = 0; i < 500; i++) { /* onto the attractor, h = dt / 10 */
            double h = dt / 10;
            lorenz(y, k1);
            for (int j = 0; j < 3; j++) tmp[j] = y[j] + h / 2 * k1[j];
            lorenz(tmp, k2);
            for (int j = 0; j < 3; j++) tmp[j] = y[j] + h / 2 * k2[j];
            lorenz(tmp, k3);
            for (int j = 0; j < 3; j++) tmp[j] = y[j] + h * k3[j];
            lorenz(tmp, k4);
            for (int j = 0; j < 3; j++) y[j] += h / 6 * (k1[j] + 2 * k2[j] + 2 * k3[j] + k4[j]);
        }
        rs[r] = (long)r * N;
        for (int i = 0; i < N; i++) {
            long k = (long)r * N + i;
            memcpy(state + 3 * k, y, sizeof y);
            lorenz(y, target + 3 * k);
            for (int s = 0; s < 10; s++) {
                double h = dt / 10;
                lorenz(y, k1);
                for (int j = 0; j < 3; j++) tmp[j] = y[j] + h / 2 * k1[j];
                lorenz(tmp, k2);
                for (int j = 0; j < 3; j++) tmp[j] = y[j] + h / 2 * k2[j];
                lorenz(tmp, k3);
                for (int j = 0; j < 3; j++) tmp[j] = y[j] + h * k3[j];
                lorenz(tmp, k4);
                for (int j = 0; j < 3; j++) y[j] += h / 6 * (k1[j] + 2 * k2[j] + 2 * k3[j] + k4[j]);
            }
        }
    }
    rs[R] = (long)R * N;
    Library lib = make_lib(3, 1, 2, 0);
    SelectData D = {R * N, 3, 3, state, target, R, rs, dt};
    SelectOptions o = select_defaults();
    o.horizon = 50; /* half a time unit: chaos separates longer forecasts whatever the law */
    double xi[64 * 3];
    uint8_t mask[64 * 3];
    Status st;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, mask, NULL, &st), 0);
    const char *terms[7][2] = {{"z1", "0"}, {"z2", "0"}, {"z1", "1"}, {"z2", "1"}, {"z1*z3", "1"}, {"z1*z2", "2"}, {"z3", "2"}};
    const double want[7] = {-10, 10, 28, -1, -1, 1, -8.0 / 3.0};
    long active = 0;
    for (int i = 0; i < lib.n_terms * 3; i++) active += mask[i];
    assert_int_equal(active, 7);
    for (int k = 0; k < 7; k++) {
        int t = library_find(&lib, terms[k][0]), j = terms[k][1][0] - '0';
        assert_true(t >= 0);
        assert_true(mask[t * 3 + j]);
        /* derivatives exact, states from RK4 at h = 1e-3: coefficients to 1e-6 relative */
        assert_close(xi[t * 3 + j], want[k], 1e-6, 1e-6);
    }
    library_free(&lib);
}

/* A normal deviate from a 64-bit linear congruential generator (Knuth's MMIX constants) and the
 * Box-Muller transform (common practice). */
static double gauss(uint64_t *s) {
    double u[2];
    for (int i = 0; i < 2; i++) {
        *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
        u[i] = ((double)(*s >> 11) + 0.5) / 9007199254740992.0; /* (0, 1) */
    }
    return sqrt(-2 * log(u[0])) * cos(2 * M_PI * u[1]);
}

/* Two independent damped oscillators seen as two latent variables, the second through noise (20% of
 * its spread on z2 and dz2/dt, as when one mode is filmed less sharply): mode 1's damping carries
 * about 4% of its acceleration, and the noise of mode 2 sets the forecast error of every law.
 * Pooled over both equations, the error that leaving out mode 1's damping adds is lost in mode 2's
 * (with the score on the pooled error the selection dropped that term); on each equation's own
 * error it is not. Closed-form solution as in test_linear_oscillator (Thornton and Marion 2004,
 * sec. 3.5); the frequencies and damping rates are of our own choosing. */
static void test_weak_term_of_one_equation(void **state_) {
    (void)state_;
    enum { R = 6, N = 400 };
    double dt = 0.04, w1 = 5.0, s1 = 0.1, w2 = 9.4, s2 = 0.28;
    static double state[4 * R * N], target[2 * R * N];
    long rs[R + 1];
    for (int mode = 0; mode < 2; mode++)
        for (int r = 0; r < R; r++) {
            double w0 = mode ? w2 : w1, sg = mode ? s2 : s1, wd = sqrt(w0 * w0 - sg * sg);
            double A = mode ? 1.9 + 0.12 * r : 1.0 - 0.12 * r, B = 0.4 * (r % 3) - 0.3;
            for (int i = 0; i < N; i++) {
                double t = i * dt, e = exp(-sg * t), c = cos(wd * t), s = sin(wd * t);
                double z = e * (A * c + B * s);
                double v = e * ((-sg * A + wd * B) * c + (-sg * B - wd * A) * s);
                long k = (long)r * N + i;
                state[4 * k + mode] = z; /* state (z1, z2, dz1/dt, dz2/dt) */
                state[4 * k + 2 + mode] = v;
                target[2 * k + mode] = -w0 * w0 * z - 2 * sg * v;
            }
            rs[r] = (long)r * N;
        }
    rs[R] = (long)R * N;
    double sz = 0, sv = 0; /* the spread of z2 and dz2/dt */
    for (long k = 0; k < (long)R * N; k++) sz += state[4 * k + 1] * state[4 * k + 1], sv += state[4 * k + 3] * state[4 * k + 3];
    sz = sqrt(sz / (R * N)), sv = sqrt(sv / (R * N));
    uint64_t seed = 12345;
    for (long k = 0; k < (long)R * N; k++) {
        state[4 * k + 1] += 0.2 * sz * gauss(&seed);
        state[4 * k + 3] += 0.2 * sv * gauss(&seed);
    }
    Library lib = make_lib(2, 2, 1, 0);
    SelectData D = {(long)R * N, 4, 2, state, target, R, rs, dt};
    SelectOptions o = select_defaults();
    double xi[64];
    uint8_t mask[64];
    Status st;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, mask, NULL, &st), 0);
    int iz1 = library_find(&lib, "z1"), iv1 = library_find(&lib, "dz1/dt");
    assert_true(iz1 >= 0 && iv1 >= 0);
    long active1 = 0;
    for (int t = 0; t < lib.n_terms; t++) active1 += mask[t * 2];
    assert_int_equal(active1, 2); /* equation 1: exactly z1 and dz1/dt */
    assert_true(mask[iz1 * 2] && mask[iv1 * 2]);
    /* mode 1's data are exact: -w1^2 and the damping -2 sigma1 to 1e-6 */
    assert_close(xi[iz1 * 2], -w1 * w1, 1e-6, 1e-6);
    assert_close(xi[iv1 * 2], -2 * s1, 1e-6, 1e-6);
    library_free(&lib);
}

/* ---- the selection, bagged (select_bagged) ---------------------------------------------------- */

/* The damped oscillator (closed form as in test_linear_oscillator, Thornton and Marion 2004, sec.
 * 3.5) with white noise of 3% of the targets' rms on z'' (as a derivative stencil leaves): every
 * member must choose the two true terms, with coefficient intervals that hold the closed-form values
 * -w0^2 and -2 sigma; the trained law given as `extra` is chosen by every member when it is the true
 * one, and by none when it is a stand-in (z^3 alone), which joins the pool all the same. Same seed,
 * same bits, at one thread or two; another seed, other coefficients. */
static void test_bagged_oscillator(void **state_) {
    (void)state_;
    double dt = 0.04, w0 = 8.27, sg = 0.25;
    static double state[2 * NREC * NT], target[NREC * NT];
    long rs[NREC + 1];
    oscillator(w0, sg, dt, state, target, rs);
    double rms = 0;
    for (long k = 0; k < NREC * NT; k++) rms += target[k] * target[k];
    rms = sqrt(rms / (NREC * NT));
    uint64_t gs = 7;
    for (long k = 0; k < NREC * NT; k++) target[k] += 0.03 * rms * gauss(&gs);
    Library lib = make_lib(1, 2, 3, 1);
    int T = lib.n_terms, M = 60;
    SelectData D = {NREC * NT, 2, 1, state, target, NREC, rs, dt};
    SelectOptions o = select_defaults();
    int iz = library_find(&lib, "z1"), iv = library_find(&lib, "dz1/dt"), i3 = library_find(&lib, "z1^3");
    assert_true(iz >= 0 && iv >= 0 && i3 >= 0);
    uint8_t truth[64] = {0}, standin[64] = {0};
    truth[iz] = truth[iv] = 1;
    standin[i3] = 1;
    double *coef = malloc((size_t)M * T * sizeof *coef), *coef2 = malloc((size_t)M * T * sizeof *coef2);
    uint8_t *kept = malloc((size_t)M * T), *kept2 = malloc((size_t)M * T);
    SelectBagReport rep, rep2;
    Status st;
    Rng rng;
    rng_seed(&rng, 11);
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, truth, 8, M, &rng, coef, kept, &rep, &st), 0);
    assert_int_equal(rep.agree_extra, M);
    assert_int_equal(rep.agree_selected, M);
    assert_int_equal(rep.selected, 0); /* the full-data choice is the best of the pool */
    assert_true(rep.segments >= NREC && rep.horizon >= 8 && rep.candidates <= 8 && rep.failed_fits == 0);
    double cz[200], cv[200];
    for (int m = 0; m < M; m++) {
        for (int t = 0; t < T; t++) assert_int_equal(kept[(long)m * T + t], t == iz || t == iv);
        cz[m] = coef[(long)m * T + iz], cv[m] = coef[(long)m * T + iv];
    }
    /* the range of the members' coefficients holds the closed-form values (the noise is white, so
     * the refits on drawn segments scatter around them) */
    double lo_z = cz[0], hi_z = cz[0], lo_v = cv[0], hi_v = cv[0];
    for (int m = 1; m < M; m++) {
        lo_z = fmin(lo_z, cz[m]), hi_z = fmax(hi_z, cz[m]);
        lo_v = fmin(lo_v, cv[m]), hi_v = fmax(hi_v, cv[m]);
    }
    assert_true(lo_z <= -w0 * w0 && -w0 * w0 <= hi_z);
    assert_true(lo_v <= -2 * sg && -2 * sg <= hi_v);
    assert_true(hi_z - lo_z < 0.01 * w0 * w0);         /* and they are tight: 3% noise, 800 samples */
    /* determinism, also at another thread count (the refits call LAPACK) */
    int threads = nn_get_threads();
    nn_set_threads(threads == 1 ? 2 : 1);
    rng_seed(&rng, 11);
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, truth, 8, M, &rng, coef2, kept2, &rep2, &st), 0);
    nn_set_threads(threads);
    assert_memory_equal(coef, coef2, (size_t)M * T * sizeof *coef);
    assert_memory_equal(kept, kept2, (size_t)M * T);
    rng_seed(&rng, 12);
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, truth, 8, M, &rng, coef2, kept2, &rep2, &st), 0);
    assert_true(memcmp(coef, coef2, (size_t)M * T * sizeof *coef) != 0);
    /* a stand-in law as the trained one: in the pool, chosen by no member */
    rng_seed(&rng, 11);
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, standin, 8, M, &rng, coef2, kept2, &rep2, &st), 0);
    assert_int_equal(rep2.extra, rep2.candidates - 1);
    assert_int_equal(rep2.agree_extra, 0);
    assert_int_equal(rep2.agree_selected, M);
    /* bad arguments */
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, NULL, 0, M, &rng, coef2, kept2, &rep2, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "pool"));
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, NULL, 4, 0, &rng, coef2, kept2, &rep2, &st), ST_INPUT);
    free(coef), free(coef2), free(kept), free(kept2);
    library_free(&lib);
}

/* The oscillator seen through the warped coordinate u = z + 0.3 z^2 (test_warped_coordinate): no
 * law of the library is exact, several forecast about alike, and members may differ. Whatever they
 * choose must be one of the K best laws of the full-data path (by score), never an empty law. */
static void test_bagged_members_choose_from_the_pool(void **state_) {
    (void)state_;
    double dt = 0.04, w0 = 8.27, sg = 0.25;
    static double state[2 * NREC * NT], target[NREC * NT];
    long rs[NREC + 1];
    oscillator(w0, sg, dt, state, target, rs);
    warp(state, target);
    Library lib = make_lib(1, 2, 3, 0);
    int T = lib.n_terms, M = 30, K = 6;
    SelectData D = {NREC * NT, 2, 1, state, target, NREC, rs, dt};
    SelectOptions o = select_defaults();
    double xi[64];
    uint8_t mask[64];
    SelectPath p;
    Status st;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, mask, &p, &st), 0);
    double *coef = malloc((size_t)M * T * sizeof *coef);
    uint8_t *kept = malloc((size_t)M * T);
    SelectBagReport rep;
    Rng rng;
    rng_seed(&rng, 5);
    assert_int_equal(select_bagged(&lib, &D, NULL, &o, NULL, K, M, &rng, coef, kept, &rep, &st), 0);
    assert_int_equal(rep.candidates, p.n < K ? p.n : K);
    assert_int_equal(rep.extra, -1);
    for (int m = 0; m < M; m++) {
        int in_pool = 0, any = 0;
        for (int c = 0; c < p.n && !in_pool; c++) {
            int rank = 0; /* candidates of the path scoring better than c */
            for (int c2 = 0; c2 < p.n; c2++)
                rank += p.e[c2].score < p.e[c].score || (p.e[c2].score == p.e[c].score && c2 < c);
            in_pool = rank < K && !memcmp(p.mask + (long)c * T, kept + (long)m * T, (size_t)T);
        }
        for (int t = 0; t < T; t++) any |= kept[(long)m * T + t];
        assert_true(in_pool && any);
    }
    free(coef), free(kept);
    select_path_free(&p);
    library_free(&lib);
}

static void test_boundaries_and_bad_input(void **state_) {
    (void)state_;
    double dt = 0.04, w0 = 8.27, sg = 0.25;
    static double state[2 * NREC * NT], target[NREC * NT];
    long rs[NREC + 1];
    oscillator(w0, sg, dt, state, target, rs);
    Library lib = make_lib(1, 2, 1, 0);
    double xi[3] = {0, -w0 * w0, -2 * sg};
    uint8_t mask[3] = {0, 1, 1};
    SelectData D = {NREC * NT, 2, 1, state, target, NREC, rs, dt};
    SelectOptions o = select_defaults();
    o.horizon = NT; /* whole recordings: each segment starts where a recording starts */
    double err;
    int nseg;
    Status st;
    assert_int_equal(select_forecast_error(&lib, &D, xi, mask, &o, &err, &nseg, &st), 0);
    assert_int_equal(nseg, NREC);
    assert_true(err < 1e-4); /* RK4's phase error, as above */
    /* one long recording made of the four: a segment that crosses a junction meets a jump */
    long one[2] = {0, NREC * NT};
    SelectData J = {NREC * NT, 2, 1, state, target, 1, one, dt};
    o.stride = NT / 2;
    assert_int_equal(select_forecast_error(&lib, &J, xi, mask, &o, &err, &nseg, &st), 0);
    assert_true(err > 1e-3);
    /* bad input */
    o = select_defaults();
    o.horizon = NT + 1;
    uint8_t m2[3];
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, m2, NULL, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "does not fit"));
    o = select_defaults();
    o.n_grid = 0;
    assert_int_equal(select_law(&lib, &D, NULL, &o, xi, m2, NULL, &st), ST_INPUT);
    long bad[NREC + 1] = {0, 10, 5, 20, NREC * NT};
    SelectData B = {NREC * NT, 2, 1, state, target, NREC, bad, dt};
    o = select_defaults();
    assert_int_equal(select_law(&lib, &B, NULL, &o, xi, m2, NULL, &st), ST_INPUT);
    library_free(&lib);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_linear_oscillator),
        cmocka_unit_test(test_warped_coordinate),
        cmocka_unit_test(test_lorenz),
        cmocka_unit_test(test_weak_term_of_one_equation),
        cmocka_unit_test(test_boundaries_and_bad_input),
        cmocka_unit_test(test_bagged_oscillator),
        cmocka_unit_test(test_bagged_members_choose_from_the_pool),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
