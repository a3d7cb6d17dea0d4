/* nn/pca.h: the leading principal directions of a data set, for initialising the first layer of an
 * encoder (common practice: principal component analysis, the eigenvectors of the covariance matrix
 * with the largest eigenvalues).
 *
 *     Pca p;  pca_begin(&p, n);
 *     for each batch: pca_add(&p, x (B, n), B);
 *     pca_finish(&p, r, vecs (r, n), vals (r), st);   // largest first
 *
 * The covariance is accumulated in double with a symmetric rank-k update (cblas_dsyrk), and the top
 * r eigenpairs come from LAPACK's dsyevr (OpenBLAS). Memory: n^2 doubles (42 MB for the 2304 values of a 48 x 48 frame).
 *
 * With fewer samples N than values n, pca_begin_gram keeps the samples (floats) and takes the
 * eigenpairs of their N x N Gram matrix G = Xc Xc^T / N instead: G u = lambda u gives
 * cov (Xc^T u) = lambda Xc^T u with |Xc^T u|^2 = N lambda, so the same nonzero eigenvalues and the
 * directions v = Xc^T u / sqrt(N lambda) (any linear algebra text: X^T X and X X^T share their
 * nonzero eigenvalues). Memory N^2 doubles and N n floats, time O(N^2 n + N^3) instead of
 * O(N n^2 + n^3): for 256 x 256 frames and 2000 samples, 0.55 GB instead of 34 GB. */
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
    int gram;       /* 1: the Gram path (the samples kept in x, cov and sum unused) */
    long cap;       /* Gram path: the samples x holds */
    float *x;       /* Gram path: (cap, n) */
} Pca;

/* Frames with more values than this take the Gram path whenever they have fewer samples (the
 * covariance's n^3 eigen-decomposition takes minutes there); below it the covariance path stays
 * unless its n^2 matrix does not fit. */
#define PCA_GRAM_MIN_N 8192

void pca_begin(Pca *p, int n);
/* The Gram path for at most N samples (pca_finish gives ST_RUNTIME when more were added). */
void pca_begin_gram(Pca *p, int n, long N);
/* Bytes the accumulators of each path hold (gram 0: covariance; 1: Gram matrix and samples). */
double pca_bytes(int n, long N, int gram);
/* 1 when the Gram path is the one to take for n values and N samples under a memory budget in bytes:
 * only with N < n, and then past PCA_GRAM_MIN_N values or when the covariance does not fit. */
int pca_use_gram(int n, long N, double budget);
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
