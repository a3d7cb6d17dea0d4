/* nn/mat.h: row-major float32 matrices and the matrix product.
 *
 * A Mat is a view: it does not own its data. Element (i, j) is d[i * cols + j]. */
#ifndef NN_MAT_H
#define NN_MAT_H

typedef struct {
    float *d;
    int rows, cols;
} Mat;

static inline Mat mat_view(float *d, int rows, int cols) { Mat m = {d, rows, cols}; return m; }
static inline long mat_size(Mat m) { return (long)m.rows * m.cols; }
static inline float *mat_row(Mat m, int i) { return m.d + (long)i * m.cols; }

/* C (M, N) = alpha * op(A) op(B) + beta * C, op(X) = X or X^T. Through cblas_sgemm; with a pool of
 * two or more threads (nn/par.h) a large product is split into blocks of C's rows (or columns when
 * it has more of them), each a cblas_sgemm over the whole of k. The result is the same bits from call
 * to call at a given thread count; across thread counts OpenBLAS's kernels may round the last bits
 * differently for blocks of other sizes (as with its own threading). Called from inside a par_for,
 * it runs whole on its caller. */
void mat_gemm(int trans_a, int trans_b, float alpha, Mat a, Mat b, float beta, Mat c);
/* The size (m n k multiply-adds) from which mat_gemm splits a product; INFINITY: never. Returns the
 * previous value. Default 1e6. */
double mat_set_split_min(double madds);
/* The same with a plain triple loop in double accumulation: the reference in tests. */
void mat_gemm_ref(int trans_a, int trans_b, float alpha, Mat a, Mat b, float beta, Mat c);

/* Threads of a training step: the pool of nn/par.h, which also splits the large products of
 * mat_gemm into blocks (each a single-threaded cblas_sgemm), so that no OpenBLAS thread spins
 * against the pool's; OpenBLAS's own threading stays at 1. nn_get_threads returns the pool's size. */
void nn_set_threads(int n);
int nn_get_threads(void);
/* Threads of OpenBLAS's own calls (LAPACK, level-3 products called directly rather than through
 * mat_gemm). Returns the previous count. nn_blas_wide sets it to the pool's size around a direct
 * call from outside any par_for (nn/pca.c, nn/isomap.c) and returns the previous count for
 * nn_set_blas_threads. */
int nn_set_blas_threads(int n);
int nn_blas_wide(void);
const char *nn_blas_corename(void);
const char *nn_blas_config(void);   /* OpenBLAS's build configuration line */

#endif
