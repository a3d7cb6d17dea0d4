/* nn/pca.h: the leading principal directions of a data set, for initialising the first layer of an
 * encoder (common practice: principal component analysis, the eigenvectors of the covariance matrix
 * with the largest eigenvalues).
 *
 *     Pca p;  pca_begin(&p, n);
 *     for each batch: pca_add(&p, x (B, n), B);
 *     pca_finish(&p, r, vecs (r, n), vals (r), st);   // largest first
 *
 * The covariance is accumulated in double with a symmetric rank-k update (cblas_dsyrk), and the top
 * r eigenpairs come from LAPACK's dsyevr (OpenBLAS). Memory: n^2 doubles (42 MB for the 2304 values of a 48 x 48 frame). */
#ifndef NN_PCA_H
#define NN_PCA_H

#include "nn/core.h"

typedef struct {
    int n;
    long count;
    double *sum;    /* (n) */
    double *cov;    /* (n, n) sum of x x^T, lower triangle */
    double *work;   /* (chunk, n) a batch in double */
    int chunk;
} Pca;

void pca_begin(Pca *p, int n);
void pca_add(Pca *p, const float *x, int B);
/* The mean (n) and the r leading eigenvectors (r, n, rows of unit length) and eigenvalues (r) of
 * the covariance, largest first. ST_INPUT when r > n or fewer than 2 samples; ST_RUNTIME when LAPACK
 * fails. Frees the accumulators. */
int pca_finish(Pca *p, int r, double *mean, double *vecs, double *vals, Status *st);
/* The same, and *total the covariance's trace (the variance summed over the n values), so that
 * sum(vals) / total is the share of the variance the r directions carry. */
int pca_finish_total(Pca *p, int r, double *mean, double *vecs, double *vals, double *total, Status *st);
void pca_free(Pca *p);

#endif
