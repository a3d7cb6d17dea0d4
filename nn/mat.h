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

/* C (M, N) = alpha * op(A) op(B) + beta * C, op(X) = X or X^T. Through cblas_sgemm. */
void mat_gemm(int trans_a, int trans_b, float alpha, Mat a, Mat b, float beta, Mat c);
/* The same with a plain triple loop in double accumulation: the reference in tests. */
void mat_gemm_ref(int trans_a, int trans_b, float alpha, Mat a, Mat b, float beta, Mat c);

/* Threads used by the matrix products (OpenBLAS). */
void nn_set_threads(int n);
int nn_get_threads(void);
/* Threads of the matrix products alone (OpenBLAS; the pool of nn/par.h keeps its size): 1 around a
 * par_for whose chunks call BLAS or LAPACK themselves, so that those calls do not split again.
 * Returns the previous count. */
int nn_set_blas_threads(int n);
const char *nn_blas_corename(void);
const char *nn_blas_config(void);   /* OpenBLAS's build configuration line */

#endif
