/* nn/mat.c: the matrix product through CBLAS, and its plain reference. */
#include "nn/mat.h"

#include <cblas.h>

#include "nn/core.h"
#include "nn/par.h"

/* OpenBLAS extensions (declared in its cblas.h on Debian; repeated here for other headers). */
extern void openblas_set_num_threads(int num_threads);
extern int openblas_get_num_threads(void);
extern char *openblas_get_corename(void);
extern char *openblas_get_config(void);

static void gemm_shapes(int ta, int tb, Mat a, Mat b, Mat c, int *m, int *n, int *k) {
    int am = ta ? a.cols : a.rows, ak = ta ? a.rows : a.cols;
    int bk = tb ? b.cols : b.rows, bn = tb ? b.rows : b.cols;
    NN_CHECK(ak == bk && c.rows == am && c.cols == bn,
             "matmul: op(a) (%d,%d) x op(b) (%d,%d) -> c (%d,%d) does not fit", am, ak, bk, bn, c.rows,
             c.cols);
    *m = am;
    *n = bn;
    *k = ak;
}

void mat_gemm(int ta, int tb, float alpha, Mat a, Mat b, float beta, Mat c) {
    int m, n, k;
    gemm_shapes(ta, tb, a, b, c, &m, &n, &k);
    if (m == 0 || n == 0) return;
    cblas_sgemm(CblasRowMajor, ta ? CblasTrans : CblasNoTrans, tb ? CblasTrans : CblasNoTrans, m, n, k,
                alpha, a.d, a.cols, b.d, b.cols, beta, c.d, c.cols);
}

void mat_gemm_ref(int ta, int tb, float alpha, Mat a, Mat b, float beta, Mat c) {
    int m, n, k;
    gemm_shapes(ta, tb, a, b, c, &m, &n, &k);
    for (int i = 0; i < m; i++)
        for (int j = 0; j < n; j++) {
            double s = 0;
            for (int p = 0; p < k; p++) {
                float x = ta ? a.d[(long)p * a.cols + i] : a.d[(long)i * a.cols + p];
                float y = tb ? b.d[(long)j * b.cols + p] : b.d[(long)p * b.cols + j];
                s += (double)x * y;
            }
            float *cij = &c.d[(long)i * c.cols + j];
            *cij = (float)(alpha * s + (beta == 0 ? 0.0 : (double)beta * *cij));
        }
}

void nn_set_threads(int n) {
    openblas_set_num_threads(n < 1 ? 1 : n);
    par_set_threads(n);
}
int nn_get_threads(void) { return openblas_get_num_threads(); }
int nn_set_blas_threads(int n) {
    int was = openblas_get_num_threads();
    openblas_set_num_threads(n < 1 ? 1 : n);
    return was;
}
const char *nn_blas_corename(void) { return openblas_get_corename(); }
const char *nn_blas_config(void) { return openblas_get_config(); }
