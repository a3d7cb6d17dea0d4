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

/* One product split into blocks of C's rows (or columns) for par_for: each block is an independent
 * single-threaded cblas_sgemm over the whole of k, so there are no partial sums to combine and the
 * result does not depend on which thread takes which block. */
typedef struct {
    int ta, tb, m, n, k, by_rows;
    float alpha, beta;
    Mat a, b, c;
} GemmJob;

static void gemm_block(void *ctx, long lo, long hi) {
    const GemmJob *j = ctx;
    const float *a = j->a.d, *b = j->b.d;
    float *c = j->c.d;
    int m = j->m, n = j->n;
    if (j->by_rows) {
        a += j->ta ? lo : lo * (long)j->a.cols;
        c += lo * (long)j->c.cols;
        m = (int)(hi - lo);
    } else {
        b += j->tb ? lo * (long)j->b.cols : lo;
        c += lo;
        n = (int)(hi - lo);
    }
    cblas_sgemm(CblasRowMajor, j->ta ? CblasTrans : CblasNoTrans, j->tb ? CblasTrans : CblasNoTrans, m, n, j->k,
                j->alpha, a, j->a.cols, b, j->b.cols, j->beta, c, j->c.cols);
}

/* Products below this many multiply-adds run whole on the calling thread: at about 40 GFLOP/s a
 * thread they take under 50 us, where the hand-over to the pool's worker (a few us awake, far more
 * asleep) and the blocks' own packing of op(B) start to count. A round figure, not tuned. */
static double split_min = 1000000.0;
double mat_set_split_min(double madds) {
    double was = split_min;
    split_min = madds;
    return was;
}

void mat_gemm(int ta, int tb, float alpha, Mat a, Mat b, float beta, Mat c) {
    int m, n, k;
    gemm_shapes(ta, tb, a, b, c, &m, &n, &k);
    if (m == 0 || n == 0) return;
    int P = par_threads();
    if (P > 1 && (double)m * n * k >= split_min && (m >= 64 || n >= 64)) {
        GemmJob j = {ta, tb, m, n, k, m >= n, alpha, beta, a, b, c};
        /* one block a thread: each block packs op(B) (or op(A)) again, which costs more than the
         * finer balance of 2 a thread gains (L16, L1, S, V16 and V 3-8% faster at two threads) */
        long len = m >= n ? m : n, blocks = P;
        long grain = (len + blocks - 1) / blocks;
        grain = (grain + 15) / 16 * 16; /* blocks a multiple of 16 long, like the kernels' tiles */
        par_for(len, grain, gemm_block, &j);
        return;
    }
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
    openblas_set_num_threads(1);
    par_set_threads(n);
}
int nn_get_threads(void) { return par_threads(); }
int nn_blas_wide(void) { return nn_set_blas_threads(par_threads()); }
int nn_set_blas_threads(int n) {
    int was = openblas_get_num_threads();
    openblas_set_num_threads(n < 1 ? 1 : n);
    return was;
}
const char *nn_blas_corename(void) { return openblas_get_corename(); }
const char *nn_blas_config(void) { return openblas_get_config(); }
