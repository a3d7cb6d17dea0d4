/* tests/test_isomap.c: the Isomap embedding against arc length known in closed form.
 *
 * Points on a circular arc of radius R, isometrically placed in a higher-dimensional space: the
 * geodesic distance between angles a and b along the arc is R |a - b| (common practice), and
 * Isomap's 1-D coordinate is that arc length up to shift, scale and sign (J. B. Tenenbaum, V. de
 * Silva, J. C. Langford, Science 290, 2000, the asymptotic convergence argument of its note 18).
 * The graph path over neighbours sums chords 2R sin(h/2) = R h (1 - h^2/24 + ...), so with steps
 * h <= 0.02 rad the embedding is affine in the angle to about 1e-5. */
#include "nn/isomap.h"
#include "tests/testutil.h"

/* An arc of `span` radians sampled at n angles (uneven spacing when `uneven`), on a plane rotated
 * into `dim` dimensions (two orthonormal vectors built from sines), plus a constant offset. */
static void arc(float *x, double *ang, long n, int dim, double span, int uneven) {
    double u[64], v[64], nu = 0, nv = 0, uv = 0;
    for (int i = 0; i < dim; i++) u[i] = sin(1.0 + 0.7 * i), v[i] = cos(0.3 + 1.3 * i);
    for (int i = 0; i < dim; i++) nu += u[i] * u[i];
    for (int i = 0; i < dim; i++) u[i] /= sqrt(nu);
    for (int i = 0; i < dim; i++) uv += u[i] * v[i];
    for (int i = 0; i < dim; i++) v[i] -= uv * u[i];
    for (int i = 0; i < dim; i++) nv += v[i] * v[i];
    for (int i = 0; i < dim; i++) v[i] /= sqrt(nv);
    for (long p = 0; p < n; p++) {
        double s = (double)p / (double)(n - 1);
        if (uneven) s = s * s * (3 - 2 * s); /* dense at the ends, like a pendulum's turning points */
        /* the samples are shuffled (every 7th index mod n, n prime to 7) so order carries no hint */
        long q = (p * 7) % n;
        ang[q] = span * (s - 0.5);
        for (int i = 0; i < dim; i++) x[q * dim + i] = (float)(2.0 * (cos(ang[q]) * u[i] + sin(ang[q]) * v[i]) + 0.1 * i);
    }
}

static void check_affine(const double *y, const double *ang, long n, double tol) {
    double ma = 0, my = 0, saa = 0, say = 0;
    for (long i = 0; i < n; i++) ma += ang[i], my += y[i];
    ma /= (double)n, my /= (double)n;
    for (long i = 0; i < n; i++) saa += (ang[i] - ma) * (ang[i] - ma), say += (ang[i] - ma) * (y[i] - my);
    double slope = say / saa, worst = 0, sd = sqrt(saa / (double)n);
    for (long i = 0; i < n; i++) {
        double e = fabs(y[i] - my - slope * (ang[i] - ma));
        if (e > worst) worst = e;
    }
    assert_close(my, 0.0, 1e-9, 0);
    assert_close(fabs(slope) * sd, 1.0, 1e-6, 0); /* unit variance */
    if (worst > tol) fail_msg("embedding departs from the arc length by %g (tolerance %g)", worst, tol);
}

static void test_isomap_arc_length(void **state) {
    (void)state;
    enum { N = 401, DIM = 12 };
    static float x[N * DIM];
    static double ang[N], y[N];
    Status st;
    int k = 0;
    /* 300 degrees: the arc nearly closes, so the straight-line (PCA) coordinate folds back on itself */
    arc(x, ang, N, DIM, 300 * M_PI / 180, 0);
    assert_int_equal(isomap_embed(x, N, DIM, 1, 0, y, &k, NULL, &st), 0);
    assert_int_equal(k, 4); /* evenly spaced: the 4 nearest are the 2 on each side, already connected */
    check_affine(y, ang, N, 1e-4);
    arc(x, ang, N, DIM, 300 * M_PI / 180, 1);
    assert_int_equal(isomap_embed(x, N, DIM, 1, 0, y, &k, NULL, &st), 0);
    check_affine(y, ang, N, 1e-3);
    /* the sign convention: the entry of largest magnitude is positive */
    double big = 0;
    for (long i = 0; i < N; i++)
        if (fabs(y[i]) > fabs(big)) big = y[i];
    assert_true(big > 0);
}

/* A short cut: with too many neighbours, the ends of a nearly closed arc join and the coordinate
 * is no longer the arc length: the automatic choice must avoid that. */
static void test_isomap_shortcut(void **state) {
    (void)state;
    enum { N = 200, DIM = 3 };
    static float x[N * DIM];
    static double ang[N], y[N];
    Status st;
    int k = 0;
    arc(x, ang, N, DIM, 340 * M_PI / 180, 0); /* gap of 20 degrees: 11 steps of 1.7 degrees */
    assert_int_equal(isomap_embed(x, N, DIM, 1, 0, y, &k, NULL, &st), 0);
    check_affine(y, ang, N, 1e-3);
    assert_int_equal(isomap_embed(x, N, DIM, 1, 30, y, &k, NULL, &st), 0); /* 30 neighbours bridge the gap */
    double ma = 0, my = 0, saa = 0, syy = 0, say = 0;
    for (long i = 0; i < N; i++) ma += ang[i], my += y[i];
    ma /= N, my /= N;
    for (long i = 0; i < N; i++)
        saa += (ang[i] - ma) * (ang[i] - ma), syy += (y[i] - my) * (y[i] - my), say += (ang[i] - ma) * (y[i] - my);
    assert_true(fabs(say) / sqrt(saa * syy) < 0.9);
}

/* Two groups far apart on a line (x in [0, 0.39] and [100, 100.39]), which no neighbour graph of
 * 32 joins: with k chosen automatically, one bridge between their closest samples makes the
 * geodesic distance the distance along the line, so the 1-D embedding is affine in x (classical
 * scaling of distances that are exactly those of points on a line recovers the line: Torgerson,
 * Psychometrika, 1952, from memory) to rounding. */
static void test_isomap_bridges_groups(void **state) {
    (void)state;
    enum { N = 80, DIM = 2 };
    float x[N * DIM];
    double y[N];
    Status st;
    int k = 0, nb = -1;
    for (int p = 0; p < N; p++) x[p * 2] = (float)(p % 40) * 0.01f + (p < 40 ? 0.0f : 100.0f), x[p * 2 + 1] = 0;
    assert_int_equal(isomap_embed(x, N, DIM, 1, 0, y, &k, &nb, &st), 0);
    assert_int_equal(nb, 1);
    assert_int_equal(k, ISOMAP_KBRIDGE);
    double mx = 0, my = 0, sxx = 0, syy = 0, sxy = 0;
    for (int p = 0; p < N; p++) mx += x[p * 2], my += y[p];
    mx /= N, my /= N;
    for (int p = 0; p < N; p++)
        sxx += (x[p * 2] - mx) * (x[p * 2] - mx), syy += (y[p] - my) * (y[p] - my), sxy += (x[p * 2] - mx) * (y[p] - my);
    assert_close(fabs(sxy) / sqrt(sxx * syy), 1.0, 1e-9, 0);
}

static void test_isomap_bad_input(void **state) {
    (void)state;
    enum { N = 80, DIM = 2 };
    float x[N * DIM];
    double y[N];
    Status st;
    int k = 0;
    for (int p = 0; p < N; p++) x[p * 2] = (float)(p % 40) * 0.01f + (p < 40 ? 0.0f : 100.0f), x[p * 2 + 1] = 0;
    /* two clusters of 40 far apart, not connected by the 32 nearest, at a k the caller gives: refused */
    assert_int_equal(isomap_embed(x, N, DIM, 1, 5, y, &k, NULL, &st), ST_INPUT);
    assert_int_equal(isomap_embed(x, 2, DIM, 1, 0, y, &k, NULL, &st), ST_INPUT);
    assert_int_equal(isomap_embed(x, N, DIM, 0, 0, y, &k, NULL, &st), ST_INPUT);
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_isomap_arc_length),
        cmocka_unit_test(test_isomap_shortcut),
        cmocka_unit_test(test_isomap_bridges_groups),
        cmocka_unit_test(test_isomap_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
