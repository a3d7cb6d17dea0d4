/* nn/pca.c: leading principal directions (see pca.h). */
#include "nn/pca.h"

#include <cblas.h>
#include <string.h>

/* LAPACK (Fortran interface, in OpenBLAS): eigenpairs of a symmetric matrix, by index range. */
extern void dsyevr_(const char *jobz, const char *range, const char *uplo, const int *n, double *a, const int *lda,
                    const double *vl, const double *vu, const int *il, const int *iu, const double *abstol, int *m,
                    double *w, double *z, const int *ldz, int *isuppz, double *work, const int *lwork, int *iwork,
                    const int *liwork, int *info);

void pca_begin(Pca *p, int n) {
    memset(p, 0, sizeof *p);
    p->n = n;
    p->chunk = 256;
    p->sum = nn_calloc((size_t)n, sizeof(double));
    p->cov = nn_calloc((size_t)n * n, sizeof(double));
    p->work = nn_alloc((size_t)p->chunk * n * sizeof(double));
}

void pca_add(Pca *p, const float *x, int B) {
    int n = p->n;
    for (int b0 = 0; b0 < B; b0 += p->chunk) {
        int nb = B - b0 < p->chunk ? B - b0 : p->chunk;
        for (long i = 0; i < (long)nb * n; i++) p->work[i] = x[(long)b0 * n + i];
        for (int b = 0; b < nb; b++)
            for (int j = 0; j < n; j++) p->sum[j] += p->work[(long)b * n + j];
        /* cov (lower, row-major) += work^T work */
        cblas_dsyrk(CblasRowMajor, CblasLower, CblasTrans, n, nb, 1.0, p->work, n, 1.0, p->cov, n);
        p->count += nb;
    }
}

void pca_free(Pca *p) {
    nn_free(p->sum);
    nn_free(p->cov);
    nn_free(p->work);
    memset(p, 0, sizeof *p);
}

int pca_finish(Pca *p, int r, double *mean, double *vecs, double *vals, Status *st) {
    return pca_finish_total(p, r, mean, vecs, vals, NULL, st);
}

int pca_finish_total(Pca *p, int r, double *mean, double *vecs, double *vals, double *total, Status *st) {
    int n = p->n, rc = 0;
    if (r < 1 || r > n) {
        pca_free(p);
        return status_set(st, ST_INPUT, "pca: %d directions asked of %d values", r, n);
    }
    if (p->count < 2) {
        pca_free(p);
        return status_set(st, ST_INPUT, "pca: fewer than 2 samples");
    }
    double N = (double)p->count;
    for (int j = 0; j < n; j++) mean[j] = p->sum[j] / N;
    /* covariance = sum x x^T / N - mean mean^T (lower triangle, row-major = upper, column-major) */
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++) p->cov[(long)i * n + j] = p->cov[(long)i * n + j] / N - mean[i] * mean[j];
    if (total) { /* the trace: the variance summed over the values */
        double tr = 0;
        for (int i = 0; i < n; i++) tr += p->cov[(long)i * n + i];
        *total = tr;
    }
    /* row-major lower == column-major upper */
    int il = n - r + 1, iu = n, m = 0, info = 0, lwork = -1, liwork = -1, iwq = 0;
    double vl = 0, vu = 0, abstol = 0, wq = 0;
    double *w = nn_alloc((size_t)n * sizeof(double)), *z = nn_alloc((size_t)n * r * sizeof(double));
    int *isuppz = nn_alloc((size_t)2 * r * sizeof(int));
    dsyevr_("V", "I", "U", &n, p->cov, &n, &vl, &vu, &il, &iu, &abstol, &m, w, z, &n, isuppz, &wq, &lwork, &iwq,
            &liwork, &info);
    lwork = (int)wq;
    liwork = iwq;
    double *work = nn_alloc((size_t)lwork * sizeof(double));
    int *iwork = nn_alloc((size_t)liwork * sizeof(int));
    dsyevr_("V", "I", "U", &n, p->cov, &n, &vl, &vu, &il, &iu, &abstol, &m, w, z, &n, isuppz, work, &lwork, iwork,
            &liwork, &info);
    if (info != 0 || m != r) {
        rc = status_set(st, ST_RUNTIME, "pca: LAPACK dsyevr failed (info %d, %d of %d eigenpairs)", info, m, r);
    } else {
        /* ascending from dsyevr: reverse to largest first; column k of z (column-major) is vector k */
        for (int k = 0; k < r; k++) {
            int src = r - 1 - k;
            vals[k] = w[src];
            memcpy(vecs + (long)k * n, z + (long)src * n, (size_t)n * sizeof(double));
        }
    }
    nn_free(w);
    nn_free(z);
    nn_free(isuppz);
    nn_free(work);
    nn_free(iwork);
    pca_free(p);
    return rc;
}
