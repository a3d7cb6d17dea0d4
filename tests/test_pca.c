/* tests/test_pca.c: leading principal directions against a covariance known in closed form.
 * Four points (+-3, 0, 0) and (0, +-1, 0), rotated by an orthogonal Q: mean 0 and covariance
 * (1/4)(2 * 9 q1 q1^T + 2 * 1 q2 q2^T) = 4.5 q1 q1^T + 0.5 q2 q2^T (the definition of the
 * population covariance, common practice), so the eigenvalues are 4.5, 0.5, 0 with eigenvectors
 * q1, q2 (up to sign). */
#include "nn/pca.h"
#include "tests/testutil.h"

static void test_pca_known_covariance(void **state) {
    (void)state;
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
    pca_begin(&pc, 3);
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
}

int main(void) {
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pca_known_covariance),
        cmocka_unit_test(test_pca_bad_requests),
    };
    return cmocka_run_group_tests_name("principal directions", tests, NULL, NULL);
}
