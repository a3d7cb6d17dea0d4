/* nn/pca.c: leading principal directions (see pca.h). */
#include "nn/pca.h"

#include <cblas.h>
#include <math.h>
#include <string.h>

#include "nn/mat.h"

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

void pca_begin_gram(Pca *p, int n, long N) {
    memset(p, 0, sizeof *p);
    p->n = n;
    p->gram = 1;
    p->cap = N;
    p->x = nn_alloc((size_t)N * n * sizeof *p->x);
}

double pca_bytes(int n, long N, int gram) {
    return gram ? 8.0 * (double)N * (double)N + 4.0 * (double)N * n : 8.0 * (double)n * (double)n;
}

int pca_use_gram(int n, long N, double budget) {
    if (N >= n) return 0; /* the Gram matrix would be the larger */
    return n > PCA_GRAM_MIN_N || pca_bytes(n, N, 0) > budget;
}

void pca_add(Pca *p, const float *x, int B) {
    int n = p->n;
    if (p->gram) {
        long room = p->cap - p->count, take = B < room ? B : room;
        if (take > 0) memcpy(p->x + p->count * n, x, (size_t)take * n * sizeof *x);
        p->count += B; /* beyond cap: counted, refused at the finish */
        return;
    }
    int blas = nn_blas_wide(); /* the level-3 updates on every thread of the pool */
    for (int b0 = 0; b0 < B; b0 += p->chunk) {
        int nb = B - b0 < p->chunk ? B - b0 : p->chunk;
        for (long i = 0; i < (long)nb * n; i++) p->work[i] = x[(long)b0 * n + i];
        for (int b = 0; b < nb; b++)
            for (int j = 0; j < n; j++) p->sum[j] += p->work[(long)b * n + j];
        /* cov (lower, row-major) += work^T work */
        cblas_dsyrk(CblasRowMajor, CblasLower, CblasTrans, n, nb, 1.0, p->work, n, 1.0, p->cov, n);
        p->count += nb;
    }
    nn_set_blas_threads(blas);
}

void pca_free(Pca *p) {
    nn_free(p->x);
    nn_free(p->sum);
    nn_free(p->cov);
    nn_free(p->work);
    memset(p, 0, sizeof *p);
}

int pca_finish(Pca *p, int r, double *mean, double *vecs, double *vals, Status *st) {
    return pca_finish_total(p, r, mean, vecs, vals, NULL, st);
}

/* The r largest eigenpairs of the symmetric n x n matrix a (row-major lower == column-major upper;
 * destroyed): vals (r) largest first, vecs (r, n) the matching unit vectors. */
static int top_eigs(double *a, int n, int r, double *vecs, double *vals, Status *st) {
    int rc = 0;
    int il = n - r + 1, iu = n, m = 0, info = 0, lwork = -1, liwork = -1, iwq = 0;
    double vl = 0, vu = 0, abstol = 0, wq = 0;
    double *w = nn_alloc((size_t)n * sizeof(double)), *z = nn_alloc((size_t)n * r * sizeof(double));
    int *isuppz = nn_alloc((size_t)2 * r * sizeof(int));
    dsyevr_("V", "I", "U", &n, a, &n, &vl, &vu, &il, &iu, &abstol, &m, w, z, &n, isuppz, &wq, &lwork, &iwq,
            &liwork, &info);
    lwork = (int)wq;
    liwork = iwq;
    double *work = nn_alloc((size_t)lwork * sizeof(double));
    int *iwork = nn_alloc((size_t)liwork * sizeof(int));
    dsyevr_("V", "I", "U", &n, a, &n, &vl, &vu, &il, &iu, &abstol, &m, w, z, &n, isuppz, work, &lwork, iwork,
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
    return rc;
}

/* The Gram path's finish (see pca.h): columns taken in blocks of GRAM_BLOCK values, centred in
 * double. */
#define GRAM_BLOCK 256
static int finish_gram(Pca *p, int r, double *mean, double *vecs, double *vals, double *total, Status *st) {
    int n = p->n, rc = 0;
    long N = p->count;
    if (N > p->cap) {
        rc = status_set(st, ST_RUNTIME, "pca: %ld samples added, room for %ld", N, p->cap);
        pca_free(p);
        return rc;
    }
    if (r > N) {
        pca_free(p);
        return status_set(st, ST_INPUT, "pca: %d directions asked of %ld samples", r, N);
    }
    for (int j = 0; j < n; j++) mean[j] = 0;
    for (long i = 0; i < N; i++)
        for (int j = 0; j < n; j++) mean[j] += p->x[i * n + j];
    for (int j = 0; j < n; j++) mean[j] /= (double)N;
    int Ni = (int)N;
    double *G = nn_calloc((size_t)N * N, sizeof *G), *W = nn_alloc((size_t)N * GRAM_BLOCK * sizeof *W);
    double *U = nn_alloc((size_t)r * N * sizeof *U), *T = nn_alloc((size_t)r * GRAM_BLOCK * sizeof *T);
    if (!G || !W || !U || !T) {
        rc = status_set(st, ST_RUNTIME, "pca: out of memory for the %ld x %ld Gram matrix", N, N);
        goto done;
    }
    for (int c0 = 0; c0 < n; c0 += GRAM_BLOCK) { /* G (lower) += W W^T / N, W the centred block (N, cb) */
        int cb = n - c0 < GRAM_BLOCK ? n - c0 : GRAM_BLOCK;
        for (long i = 0; i < N; i++)
            for (int j = 0; j < cb; j++) W[i * cb + j] = p->x[i * n + c0 + j] - mean[c0 + j];
        cblas_dsyrk(CblasRowMajor, CblasLower, CblasNoTrans, Ni, cb, 1.0 / (double)N, W, cb, 1.0, G, Ni);
    }
    if (total) {
        double tr = 0;
        for (long i = 0; i < N; i++) tr += G[i * N + i];
        *total = tr;
    }
    if ((rc = top_eigs(G, Ni, r, U, vals, st))) goto done;
    for (int c0 = 0; c0 < n; c0 += GRAM_BLOCK) { /* vecs[:, block] = U W / sqrt(N lambda) */
        int cb = n - c0 < GRAM_BLOCK ? n - c0 : GRAM_BLOCK;
        for (long i = 0; i < N; i++)
            for (int j = 0; j < cb; j++) W[i * cb + j] = p->x[i * n + c0 + j] - mean[c0 + j];
        cblas_dgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, r, cb, Ni, 1.0, U, Ni, W, cb, 0.0, T, cb);
        for (int k = 0; k < r; k++) {
            double s = vals[k] > 0 ? 1.0 / sqrt((double)N * vals[k]) : 0.0; /* a null direction: no vector */
            for (int j = 0; j < cb; j++) vecs[(long)k * n + c0 + j] = T[k * cb + j] * s;
        }
    }
done:
    nn_free(G), nn_free(W), nn_free(U), nn_free(T);
    pca_free(p);
    return rc;
}

static int finish_total(Pca *p, int r, double *mean, double *vecs, double *vals, double *total, Status *st) {
    int n = p->n, rc = 0;
    if (r < 1 || r > n) {
        pca_free(p);
        return status_set(st, ST_INPUT, "pca: %d directions asked of %d values", r, n);
    }
    if (p->count < 2) {
        pca_free(p);
        return status_set(st, ST_INPUT, "pca: fewer than 2 samples");
    }
    if (p->gram) return finish_gram(p, r, mean, vecs, vals, total, st);
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
    rc = top_eigs(p->cov, n, r, vecs, vals, st); /* row-major lower == column-major upper */
    pca_free(p);
    return rc;
}

int pca_finish_total(Pca *p, int r, double *mean, double *vecs, double *vals, double *total, Status *st) {
    int blas = nn_blas_wide(); /* the LAPACK and level-3 calls on every thread of the pool */
    int rc = finish_total(p, r, mean, vecs, vals, total, st);
    nn_set_blas_threads(blas);
    return rc;
}
