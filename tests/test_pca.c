/* tests/test_pca.c: leading principal directions against a covariance known in closed form.
 * Four points (+-3, 0, 0) and (0, +-1, 0), rotated by an orthogonal Q: mean 0 and covariance
 * (1/4)(2 * 9 q1 q1^T + 2 * 1 q2 q2^T) = 4.5 q1 q1^T + 0.5 q2 q2^T (the definition of the
 * population covariance, common practice), so the eigenvalues are 4.5, 0.5, 0 with eigenvectors
 * q1, q2 (up to sign). Both paths: the covariance, and the Gram matrix of the samples (nn/pca.h),
 * which must give the same directions; on a larger case the two are compared with each other. */
#include "nn/pca.h"
#include "tests/testutil.h"

static void test_pca_known_covariance(void **state) {
    (void)state;
    for (int gram = 0; gram < 2; gram++) {
    /* Q: rotation by 30 degrees about z, then 45 degrees about x */
    double c1 = cos(M_PI / 6), s1 = sin(M_PI / 6), c2 = cos(M_PI / 4), s2 = sin(M_PI / 4);
    double Rz[3][3] = {{c1, -s1, 0}, {s1, c1, 0}, {0, 0, 1}}, Rx[3][3] = {{1, 0, 0}, {0, c2, -s2}, {0, s2, c2}};
    double Q[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            Q[i][j] = 0;
            for (int k = 0; k < 3; k++) Q[i][j] += Rx[i][k] * Rz[k][j];
        }
    double pts[4][3] = {{3, 0, 0}, {-3, 0, 0}, {0, 1, 0}, {0, -1, 0}};
    float x[4 * 3];
    for (int p = 0; p < 4; p++)
        for (int i = 0; i < 3; i++) {
            double v = 0;
            for (int k = 0; k < 3; k++) v += Q[i][k] * pts[p][k];
            x[p * 3 + i] = (float)(v + 0.25 * (i + 1)); /* and a mean of (0.25, 0.5, 0.75) */
        }
    Pca pc;
    if (gram) pca_begin_gram(&pc, 3, 4);
    else pca_begin(&pc, 3);
    pca_add(&pc, x, 2);
    pca_add(&pc, x + 6, 2);
    double mean[3], vecs[2 * 3], vals[2], total = 0;
    Status st;
    assert_int_equal(pca_finish_total(&pc, 2, mean, vecs, vals, &total, &st), 0);
    assert_close(total, 5.0, 1e-5, 0); /* the trace: 4.5 + 0.5 + 0 */
    for (int i = 0; i < 3; i++) assert_close(mean[i], 0.25 * (i + 1), 1e-7, 0);
    /* float inputs: 1e-7 relative rounding of x gives ~1e-6 in the covariance */
    assert_close(vals[0], 4.5, 1e-5, 0);
    assert_close(vals[1], 0.5, 1e-5, 0);
    for (int k = 0; k < 2; k++) {
        double dot = 0;
        for (int i = 0; i < 3; i++) dot += vecs[k * 3 + i] * Q[i][k]; /* column k of Q is q_(k+1) */
        assert_close(fabs(dot), 1.0, 1e-6, 0);
    }
    }
}

/* 40 samples of 600 values (a rank-5 signal plus 1% noise): the Gram path's eigenvalues, trace,
 * mean and directions (up to sign) equal the covariance path's. Both are exact computations of the
 * same quantities in double, so they agree to rounding: 1e-9 relative to the largest eigenvalue. */
static void test_pca_gram_matches(void **state) {
    (void)state;
    enum { N = 40, n = 600, r = 5 };
    float *x = malloc(sizeof(float) * N * n);
    unsigned long long u = 88172645463325252ull; /* xorshift64 (Marsaglia, J. Stat. Softw. 2003) */
    double basis[r][n];
    for (int k = 0; k < r; k++)
        for (int j = 0; j < n; j++) basis[k][j] = sin(0.01 * (k + 1) * j + k);
    for (int i = 0; i < N; i++)
        for (int j = 0; j < n; j++) {
            double v = 0.5;
            for (int k = 0; k < r; k++) v += cos(0.3 * i * (k + 1) + k) * (r - k) * basis[k][j];
            u ^= u << 13, u ^= u >> 7, u ^= u << 17;
            x[i * n + j] = (float)(v + 0.01 * ((double)(u >> 11) / 9007199254740992.0 - 0.5));
        }
    double mean[2][n], vecs[2][r * n], vals[2][r], total[2];
    Status st;
    for (int gram = 0; gram < 2; gram++) {
        Pca pc;
        if (gram) pca_begin_gram(&pc, n, N);
        else pca_begin(&pc, n);
        pca_add(&pc, x, 15);
        pca_add(&pc, x + 15 * n, N - 15);
        assert_int_equal(pca_finish_total(&pc, r, mean[gram], vecs[gram], vals[gram], &total[gram], &st), 0);
    }
    double tol = 1e-9 * vals[0][0];
    assert_close(total[1], total[0], tol, 0);
    for (int j = 0; j < n; j++) assert_close(mean[1][j], mean[0][j], 1e-12, 0);
    for (int k = 0; k < r; k++) {
        print_message("eigenvalue %d: covariance %.12g, Gram %.12g\n", k, vals[0][k], vals[1][k]);
        assert_close(vals[1][k], vals[0][k], tol, 0);
        double dot = 0, nn1 = 0;
        for (int j = 0; j < n; j++) dot += vecs[0][k * n + j] * vecs[1][k * n + j], nn1 += vecs[1][k * n + j] * vecs[1][k * n + j];
        assert_close(nn1, 1.0, 1e-9, 0);
        assert_close(fabs(dot), 1.0, 1e-8, 0);
    }
    free(x);
    /* the choice: only with fewer samples than values; past PCA_GRAM_MIN_N values, or when the
     * covariance (8 n^2 bytes) does not fit the budget */
    assert_false(pca_use_gram(600, 40, 1e12));
    assert_true(pca_use_gram(600, 40, 8.0 * 600 * 600 - 1));
    assert_false(pca_use_gram(600, 600, 1.0));
    assert_true(pca_use_gram(PCA_GRAM_MIN_N + 1, 100, 1e15));
    assert_false(pca_use_gram(PCA_GRAM_MIN_N, 100, 1e15));
    assert_close(pca_bytes(600, 40, 1), 8.0 * 40 * 40 + 4.0 * 40 * 600, 0, 0);
}

static void test_pca_bad_requests(void **state) {
    (void)state;
    Pca pc;
    Status st;
    double mean[2], vecs[6], vals[3];
    float x[2] = {1, 2};
    pca_begin(&pc, 2);
    pca_add(&pc, x, 1);
    assert_int_equal(pca_finish(&pc, 1, mean, vecs, vals, &st), ST_INPUT); /* one sample */
    pca_begin(&pc, 2);
    assert_int_equal(pca_finish(&pc, 3, mean, vecs, vals, &st), ST_INPUT); /* 3 of 2 */
    float y[6] = {1, 2, 3, 4, 5, 7};
    pca_begin_gram(&pc, 2, 2);
    pca_add(&pc, y, 3); /* three samples, room for two */
    assert_int_equal(pca_finish(&pc, 1, mean, vecs, vals, &st), ST_RUNTIME);
    assert_non_null(strstr(st.msg, "3 samples added, room for 2"));
    pca_begin_gram(&pc, 2, 2);
    pca_add(&pc, y, 2);
    assert_int_equal(pca_finish(&pc, 2, mean, vecs, vals, &st), 0);
    pca_begin_gram(&pc, 3, 2);
    pca_add(&pc, y, 2);
    assert_int_equal(pca_finish(&pc, 3, mean, vecs, vals, &st), ST_INPUT); /* 3 directions of 2 samples */
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pca_known_covariance),
        cmocka_unit_test(test_pca_gram_matches),
        cmocka_unit_test(test_pca_bad_requests),
    };
    return cmocka_run_group_tests_name("principal directions", tests, NULL, NULL);
}
