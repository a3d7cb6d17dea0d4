/* tests/test_stencil.c: derivative stencils (sparse/stencil.h). */
#include "tests/testutil.h"

#include "sparse/stencil.h"

/* Polynomial sum_k c[k] t^k and its first two derivatives. */
static void poly_eval(const double *c, int deg, double t, double out[3]) {
    out[0] = out[1] = out[2] = 0;
    for (int k = deg; k >= 0; k--) {
        out[2] = out[2] * t + 2 * out[1];
        out[1] = out[1] * t + out[0];
        out[0] = out[0] * t + c[k];
    }
}

/* Apply to polynomials of every degree up to the stencil's order with a non-unit dt and an offset
 * origin: the estimate must be exact up to rounding. */
static void check_exact_on_polynomials(const Stencil *s, int max_deg_d1, int max_deg_d2) {
    double dt = 0.05, t0 = 0.3;
    enum { N = 2 * STENCIL_MAX_HALF + 9 };
    double x[N * 2];   /* (N, 2): two channels */
    for (int deg = 0; deg <= max_deg_d1 || deg <= max_deg_d2; deg++) {
        double c[2][12];
        for (int k = 0; k <= deg; k++) c[0][k] = 1.0 + 0.5 * k, c[1][k] = (k % 2 ? -0.7 : 0.4) * (k + 1);
        int n = 2 * s->m + 5;
        for (int i = 0; i < n; i++)
            for (int ch = 0; ch < 2; ch++) {
                double v[3];
                poly_eval(c[ch], deg, t0 + i * dt, v);
                x[i * 2 + ch] = v[0];
            }
        for (long i = s->m; i < n - s->m; i++) {
            double d1[2], d2[2];
            stencil_apply(s, dt, x, 2, i, d1, d2);
            for (int ch = 0; ch < 2; ch++) {
                double v[3];
                poly_eval(c[ch], deg, t0 + i * dt, v);
                if (deg <= max_deg_d1) assert_close(d1[ch], v[1], 1e-7, 1e-8);
                if (deg <= max_deg_d2) assert_close(d2[ch], v[2], 1e-5, 1e-8);
            }
        }
    }
}

/* Central differences are exact for polynomials up to degree 2 (x') and 3 (x''): the Taylor
 * remainders start at x''' h^2/6 and x'''' h^2/12 (common practice: Taylor expansion with
 * remainder). */
static void test_central_exact(void **state) {
    (void)state;
    Stencil s;
    stencil_central(&s);
    assert_int_equal(s.m, 1);
    check_exact_on_polynomials(&s, 2, 3);
}

/* Savitzky-Golay of degree p is exact for polynomials of degree <= p ("Smoothing and
 * Differentiation of Data by Simplified Least Squares Procedures", Analytical Chemistry 36(8),
 * 1964: a least-squares polynomial fit reproduces any polynomial of its degree). */
static void test_savgol_exact(void **state) {
    (void)state;
    int cases[][2] = {{5, 2}, {5, 3}, {7, 4}, {9, 4}, {11, 5}, {21, 6}, {31, 8}};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        Stencil s;
        Status st;
        assert_int_equal(stencil_savgol(&s, cases[c][0], cases[c][1], &st), 0);
        check_exact_on_polynomials(&s, s.degree, s.degree);
    }
}

/* Error bound for a stencil exact to degree p on x(t) = sin(w t): the Taylor remainder of degree p
 * about the centre satisfies |R(j h)| <= (w |j| h)^(p+1) / (p+1)!, and the stencil maps
 * polynomials exactly, so |error of x^(d)| <= h^-d sum_j |w_d[j]| (w |j| h)^(p+1) / (p+1)!
 * (common practice: Taylor expansion with Lagrange remainder). For central differences this is
 * h^2 w^3 / 6 and h^2 w^4 / 12. */
static double taylor_bound(const double *wts, int m, int p, double h, double w, int d) {
    double fact = 1, b = 0;
    for (int k = 2; k <= p + 1; k++) fact *= k;
    for (int j = -m; j <= m; j++) b += fabs(wts[j + m]) * pow(w * fabs((double)j) * h, p + 1) / fact;
    return b / pow(h, d);
}

static void check_sin(const Stencil *s, int p1, int p2) {
    double w = 2.3, h = 0.02;
    enum { N = 200 };
    double x[N];   /* (N, 1) */
    for (int i = 0; i < N; i++) x[i] = sin(w * i * h);
    double b1 = taylor_bound(s->w1, s->m, p1, h, w, 1), b2 = taylor_bound(s->w2, s->m, p2, h, w, 2);
    double e1 = 0, e2 = 0;
    for (long i = s->m; i < N - s->m; i++) {
        double d1, d2, t = i * h;
        stencil_apply(s, h, x, 1, i, &d1, &d2);
        e1 = fmax(e1, fabs(d1 - w * cos(w * t)));
        e2 = fmax(e2, fabs(d2 + w * w * sin(w * t)));
    }
    if (!(e1 <= b1 * 1.0000001 + 1e-11)) fail_msg("x' error %g exceeds bound %g (m %d)", e1, b1, s->m);
    if (!(e2 <= b2 * 1.0000001 + 1e-8)) fail_msg("x'' error %g exceeds bound %g (m %d)", e2, b2, s->m);
    /* The bound is not vacuous: the error is within a factor 10 of it for central differences. */
    if (s->kind == STENCIL_CENTRAL) assert_true(e1 > b1 / 10 && e2 > b2 / 10);
}

static void test_sin_truncation(void **state) {
    (void)state;
    Stencil s;
    Status st;
    stencil_central(&s);
    /* central: x' exact to degree 2, x'' exact to degree 3 (symmetry). */
    check_sin(&s, 2, 3);
    assert_close(taylor_bound(s.w1, 1, 2, 0.02, 2.3, 1), 0.02 * 0.02 * pow(2.3, 3) / 6, 0, 1e-12);
    assert_close(taylor_bound(s.w2, 1, 3, 0.02, 2.3, 2), 0.02 * 0.02 * pow(2.3, 4) / 12, 0, 1e-12);
    assert_int_equal(stencil_savgol(&s, 7, 3, &st), 0);
    check_sin(&s, 3, 3);
    assert_int_equal(stencil_savgol(&s, 9, 4, &st), 0);
    check_sin(&s, 4, 4);
}

/* Published convolution weights: first derivative, quadratic, 5 points: (-2, -1, 0, 1, 2) / 10;
 * second derivative, quadratic, 5 points: (2, -1, -2, -1, 2) / 7 ("Smoothing and Differentiation
 * of Data by Simplified Least Squares Procedures", Analytical Chemistry 36(8), 1964, derivative
 * tables). */
static void test_savgol_published(void **state) {
    (void)state;
    Stencil s;
    Status st;
    assert_int_equal(stencil_savgol(&s, 5, 2, &st), 0);
    double d1[5] = {-2, -1, 0, 1, 2}, d2[5] = {2, -1, -2, -1, 2};
    for (int k = 0; k < 5; k++) {
        assert_close(s.w1[k], d1[k] / 10, 1e-14, 0);
        assert_close(s.w2[k], d2[k] / 7, 1e-14, 0);
    }
}

/* Against scipy.signal.savgol_coeffs (SciPy, Debian python3-scipy), through the fixture written by
 * tests/reference/make_savgol.py. SciPy fits in unscaled offsets, so for the widest windows the two
 * agree to about 1e-9 relative; hence rtol 1e-7. */
static void test_savgol_vs_scipy(void **state) {
    (void)state;
    FILE *f = fopen("tests/reference/savgol_coeffs.txt", "r");
    assert_non_null(f);
    char line[8192];
    int cases = 0;
    while (fgets(line, sizeof line, f)) {
        if (line[0] == '#') continue;
        char *p = line, *e;
        int window = (int)strtol(p, &e, 10); p = e;
        int degree = (int)strtol(p, &e, 10); p = e;
        int deriv = (int)strtol(p, &e, 10); p = e;
        Stencil s;
        Status st;
        assert_int_equal(stencil_savgol(&s, window, degree, &st), 0);
        const double *w = deriv == 1 ? s.w1 : s.w2;
        for (int k = 0; k < window; k++) {
            double ref = strtod(p, &e);
            assert_true(e != p);
            p = e;
            assert_close(w[k], ref, 1e-11, 1e-7);
        }
        cases++;
    }
    fclose(f);
    assert_true(cases >= 20);
}

/* Weights of a derivative sum to zero; x' weights are odd, x'' weights even (common practice:
 * symmetric least-squares window). */
static void test_symmetry(void **state) {
    (void)state;
    Stencil s;
    Status st;
    assert_int_equal(stencil_savgol(&s, 13, 4, &st), 0);
    double s1 = 0, s2 = 0;
    for (int k = 0; k <= 2 * s.m; k++) {
        s1 += s.w1[k], s2 += s.w2[k];
        assert_close(s.w1[k], -s.w1[2 * s.m - k], 1e-14, 0);
        assert_close(s.w2[k], s.w2[2 * s.m - k], 1e-14, 0);
    }
    assert_close(s1, 0, 1e-13, 0);
    assert_close(s2, 0, 1e-13, 0);
}

/* Bad parameters give ST_INPUT and name the value (common practice). */
static void test_bad_params(void **state) {
    (void)state;
    Stencil s;
    Status st;
    assert_int_equal(stencil_savgol(&s, 6, 2, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "window 6"));
    assert_int_equal(stencil_savgol(&s, 5, 5, &st), ST_INPUT);
    assert_non_null(strstr(st.msg, "degree 5"));
    assert_int_equal(stencil_savgol(&s, 5, 1, &st), ST_INPUT);
    assert_int_equal(stencil_savgol(&s, 1, 0, &st), ST_INPUT);
    assert_int_equal(stencil_savgol(&s, 2 * STENCIL_MAX_HALF + 3, 3, &st), ST_INPUT);
    assert_int_equal(stencil_kind_from_name("savgol"), STENCIL_SAVGOL);
    assert_int_equal(stencil_kind_from_name("central"), STENCIL_CENTRAL);
    assert_int_equal(stencil_kind_from_name("spline"), STENCIL_KIND_COUNT);
}

/* stencil_apply_all matches stencil_apply sample by sample, and stencil_valid counts n - 2m. */
static void test_apply_all(void **state) {
    (void)state;
    Stencil s;
    Status st;
    assert_int_equal(stencil_savgol(&s, 5, 2, &st), 0);
    enum { R = 12, C = 3 };
    double x[R * C], d1[R * C], d2[R * C];   /* (R, C); outputs (R - 4, C) */
    for (int i = 0; i < R * C; i++) x[i] = sin(0.37 * i) + 0.01 * i * i;
    assert_int_equal(stencil_valid(&s, R), R - 4);
    assert_int_equal(stencil_valid(&s, 4), 0);
    stencil_apply_all(&s, 0.1, x, R, C, d1, d2);
    for (long i = 2; i < R - 2; i++) {
        double a1[C], a2[C];
        stencil_apply(&s, 0.1, x, C, i, a1, a2);
        for (int c = 0; c < C; c++) {
            assert_close(d1[(i - 2) * C + c], a1[c], 0, 0);
            assert_close(d2[(i - 2) * C + c], a2[c], 0, 0);
        }
    }
}

/* The response of central differences to a sampled sinusoid of theta rad per sample is
 * sin(theta) / theta and (2 - 2 cos theta) / theta^2 (trigonometric identities: common practice). */
static void test_response_central(void **state) {
    (void)state;
    Stencil s;
    stencil_central(&s);
    for (double th = 0.05; th < 3; th += 0.37) {
        double g1, g2, n1, n2;
        stencil_response(&s, th, &g1, &g2, &n1, &n2);
        assert_close(g1, sin(th) / th, 1e-14, 1e-13);
        assert_close(g2, (2 - 2 * cos(th)) / (th * th), 1e-14, 1e-13);
        assert_close(n1, sqrt(0.5), 1e-15, 0); /* w1 = [-1/2, 0, 1/2] */
        assert_close(n2, sqrt(6.0), 1e-15, 0); /* w2 = [1, -2, 1] */
    }
}

/* stencil_auto: applied to samples of sin(theta k), the stencil chosen gives x' and x'' within the
 * tolerance of the exact theta cos and -theta^2 sin (sampled at the centre, where both are largest
 * in turn); and no feasible stencil of the candidates is quieter. */
static void test_auto(void **state) {
    (void)state;
    const double tol = 0.02;
    const double thetas[] = {0.05, 0.15, 0.33, 0.6};
    for (size_t i = 0; i < sizeof thetas / sizeof thetas[0]; i++) {
        double th = thetas[i];
        Stencil s;
        Status st;
        assert_int_equal(stencil_auto(&s, th, 2, tol, 13, &st), 0);
        assert_true(2 * s.m + 1 <= 13);
        double x[STENCIL_MAX_LEN], d1, d2;
        for (int k = 0; k <= 2 * s.m; k++) x[k] = cos(th * (k - s.m)); /* x'(0) = 0, x''(0) = -th^2 */
        stencil_apply(&s, 1.0, x, 1, s.m, &d1, &d2);
        double g2 = -d2 / (th * th);
        for (int k = 0; k <= 2 * s.m; k++) x[k] = sin(th * (k - s.m)); /* x'(0) = th */
        stencil_apply(&s, 1.0, x, 1, s.m, &d1, NULL);
        double g1 = d1 / th;
        if (th <= 0.6) { /* feasible at these frequencies */
            assert_true(fabs(g1 - 1) <= tol + 1e-12);
            assert_true(fabs(g2 - 1) <= tol + 1e-12);
        }
        double n2;
        stencil_response(&s, th, NULL, NULL, NULL, &n2);
        for (int deg = 3; deg <= 7; deg += 2)
            for (int w = deg + 2; w <= 13; w += 2) {
                Stencil c;
                assert_int_equal(stencil_savgol(&c, w, deg, &st), 0);
                double a1, a2, m2;
                stencil_response(&c, th, &a1, &a2, NULL, &m2);
                if (fabs(a1 - 1) <= tol && fabs(a2 - 1) <= tol) assert_true(n2 <= m2 + 1e-12);
            }
    }
    Stencil s;
    Status st;
    assert_int_equal(stencil_auto(&s, 0, 2, tol, 13, &st), ST_INPUT);
    assert_int_equal(stencil_auto(&s, 0.3, 2, tol, 3, &st), ST_INPUT);
}

/* The rms frequency of a sampled sinusoid is its frequency: the central difference of
 * A sin(theta k) has the variance A^2 sin^2(theta) / 2 (common practice), so asin recovers theta
 * up to the end effects of a finite record (a few 1e-3 over tens of periods). Two recordings of
 * different amplitude and phase; the jump at their junction must not count. */
static void test_rms_frequency(void **state) {
    (void)state;
    enum { N = 2000 };
    static double x[2 * N];
    const double th = 0.33;
    for (int r = 0; r < 2; r++)
        for (int k = 0; k < N; k++) x[r * N + k] = (1 + r) * sin(th * k + 1.7 * r);
    long rs[3] = {0, N, 2 * N};
    double got = stencil_rms_frequency(x, 2 * N, 1, rs, 2);
    assert_close(got, th, 0, 3e-3);
    assert_true(stencil_rms_frequency(x, 2 * N, 1, (long[]){0, 2 * N}, 1) > got); /* the junction counts */
    double c[10] = {0};
    assert_true(stencil_rms_frequency(c, 10, 1, (long[]){0, 10}, 1) == 0);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_central_exact),   cmocka_unit_test(test_savgol_exact),
        cmocka_unit_test(test_sin_truncation),  cmocka_unit_test(test_savgol_published),
        cmocka_unit_test(test_savgol_vs_scipy), cmocka_unit_test(test_symmetry),
        cmocka_unit_test(test_bad_params),      cmocka_unit_test(test_apply_all),
        cmocka_unit_test(test_response_central), cmocka_unit_test(test_auto),
        cmocka_unit_test(test_rms_frequency),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
