/* sparse/thresh_lsq.c: sequentially thresholded least squares (see thresh_lsq.h). */
#include "sparse/thresh_lsq.h"

#include <limits.h>
#include <math.h>
#include <string.h>

/* LAPACK (Fortran calling convention, 32-bit integers as in Debian's OpenBLAS): the minimum-norm
 * least-squares solution by the singular value decomposition, divide and conquer. Column-major. */
extern void dgelsd_(const int *m, const int *n, const int *nrhs, double *a, const int *lda, double *b,
                    const int *ldb, double *s, const double *rcond, int *rank, double *work,
                    const int *lwork, int *iwork, int *info);

/* Singular values below RCOND times the largest count as zero. With unit-norm columns the largest
 * singular value is at least 1, so this drops directions that are dependent to about 1e-12. */
#define RCOND 1e-12

ThreshLsqOptions thresh_lsq_defaults(void) {
    ThreshLsqOptions o = {0.1, 0.0, 10, 1, 0};
    return o;
}

typedef struct {
    long N;
    int p;
    const double *an;   /* (p, N) column-major normalised Theta: column t at an + t N */
    double *a;          /* (cap_rows, p) column-major work matrix */
    double *b;          /* (cap_rows) right-hand side / solution */
    double *sv;         /* (p) singular values */
    double *work;
    int *iwork;
    int lwork, liwork;
} Solver;

/* Least squares of y (N) on the columns of an listed in cols (q of them), with ridge; the
 * normalised coefficients go to c (q). Returns the LAPACK info; *rank receives the rank. */
static int solve_subset(Solver *s, const int *cols, int q, const double *y, double ridge, double *c,
                        int *rank) {
    long N = s->N;
    int rows = (int)N + (ridge > 0 ? q : 0);
    for (int k = 0; k < q; k++) {
        double *col = s->a + (long)k * rows;
        memcpy(col, s->an + (long)cols[k] * N, (size_t)N * sizeof *col);
        if (ridge > 0) {
            memset(col + N, 0, (size_t)q * sizeof *col);
            col[N + k] = sqrt(ridge);
        }
    }
    memcpy(s->b, y, (size_t)N * sizeof *y);
    if (ridge > 0) memset(s->b + N, 0, (size_t)q * sizeof *s->b);
    int one = 1, info = 0, lda = rows, ldb = rows;
    double rcond = RCOND;
    dgelsd_(&rows, &q, &one, s->a, &lda, s->b, &ldb, s->sv, &rcond, rank, s->work, &s->lwork, s->iwork,
            &info);
    if (info == 0) memcpy(c, s->b, (size_t)q * sizeof *c);
    return info;
}

int thresh_lsq_fit(double *xi, uint8_t *mask, const double *theta, const double *dx, long N, int p, int m,
              const uint8_t *allowed, const ThreshLsqOptions *opt, ThreshLsqReport *rep, Status *st) {
    ThreshLsqReport r = {0, 1, 0, 0};
    if (p < 1 || m < 1 || N < 1)
        return status_set(st, ST_INPUT, "least squares: empty problem (%ld samples, %d terms, %d outputs)",
                          N, p, m);
    if (N < p)
        return status_set(st, ST_INPUT,
                          "least squares: the library has %d terms but there are only %ld samples; "
                          "it needs at least as many samples as terms (lower the degree, exclude terms "
                          "or give more samples)",
                          p, N);
    if (N + p >= INT_MAX / 2)
        return status_set(st, ST_INPUT, "least squares: %ld samples are too many for one solve", N);
    if (!(opt->threshold >= 0) || !isfinite(opt->threshold))
        return status_set(st, ST_INPUT, "least squares: threshold %g must be finite and >= 0", opt->threshold);
    if (!(opt->ridge >= 0) || !isfinite(opt->ridge))
        return status_set(st, ST_INPUT, "least squares: ridge %g must be finite and >= 0", opt->ridge);
    if (opt->max_iter < 0)
        return status_set(st, ST_INPUT, "least squares: max_iter %d must be >= 0", opt->max_iter);
    for (long i = 0; i < N; i++) {
        for (int t = 0; t < p; t++)
            if (!isfinite(theta[i * p + t]))
                return status_set(st, ST_INPUT, "least squares: non-finite library value at sample %ld, term %d",
                                  i + 1, t + 1);
        for (int j = 0; j < m; j++)
            if (!isfinite(dx[i * m + j]))
                return status_set(st, ST_INPUT, "least squares: non-finite target at sample %ld, output %d",
                                  i + 1, j + 1);
    }

    double *scale = nn_calloc((size_t)p, sizeof *scale);            /* (p) column norms */
    double *an = nn_alloc((size_t)N * p * sizeof *an);             /* (p, N) column-major */
    double *y = nn_alloc((size_t)N * sizeof *y);                   /* (N) one target column */
    for (long i = 0; i < N; i++)
        for (int t = 0; t < p; t++) scale[t] += theta[i * p + t] * theta[i * p + t];
    double *norm = nn_alloc((size_t)p * sizeof *norm);              /* (p) column 2-norms */
    for (int t = 0; t < p; t++) {
        scale[t] = norm[t] = sqrt(scale[t]);
        if (!opt->normalize || scale[t] == 0) scale[t] = 1.0;
    }
    for (int t = 0; t < p; t++)
        for (long i = 0; i < N; i++) an[(long)t * N + i] = theta[i * p + t] / scale[t];

    Solver s = {N, p, an, NULL, NULL, NULL, NULL, NULL, 0, 0};
    long cap_rows = N + p;
    s.a = nn_alloc((size_t)cap_rows * p * sizeof *s.a);
    s.b = nn_alloc((size_t)cap_rows * sizeof *s.b);
    s.sv = nn_alloc((size_t)p * sizeof *s.sv);
    {   /* workspace query for the largest problem; smaller ones need no more */
        int rows = (int)cap_rows, one = 1, info = 0, rank = 0, lq = -1, iq = 0;
        double wq = 0, rcond = RCOND;
        dgelsd_(&rows, &p, &one, s.a, &rows, s.b, &rows, s.sv, &rcond, &rank, &wq, &lq, &iq, &info);
        s.lwork = (int)wq + 64;
        /* LAPACK documents LIWORK >= 3 min(M,N) NLVL + 11 min(M,N), NLVL <= log2(min) + 1 */
        int nlvl = 1;
        while ((1L << nlvl) < p) nlvl++;
        s.liwork = 3 * p * (nlvl + 2) + 11 * p + 64;
        if (iq > s.liwork) s.liwork = iq;
    }
    s.work = nn_alloc((size_t)s.lwork * sizeof *s.work);
    s.iwork = nn_alloc((size_t)s.liwork * sizeof *s.iwork);
    int *cols = nn_alloc((size_t)p * sizeof *cols);       /* (q) active column indices */
    double *c = nn_alloc((size_t)2 * p * sizeof *c);      /* (q) normalised coefficients; (p) weights */
    uint8_t *act = nn_alloc((size_t)p);                   /* (p) active set of one output */

    int code = 0;
    for (int j = 0; j < m && !code; j++) {
        double ynorm = 0;
        for (long i = 0; i < N; i++) y[i] = dx[i * m + j], ynorm += y[i] * y[i];
        ynorm = sqrt(ynorm);
        /* what the threshold is compared with: |xi_t|, or its contribution |xi_t| |Theta_t| / |y| */
        double *wt = c + p;
        for (int t = 0; t < p; t++) wt[t] = !opt->relative ? 1.0 : ynorm > 0 ? norm[t] / ynorm : 0.0;
        for (int t = 0; t < p; t++) act[t] = allowed ? allowed[(long)t * m + j] != 0 : 1;
        int pass = 0;
        for (;;) {
            int q = 0;
            for (int t = 0; t < p; t++)
                if (act[t]) cols[q++] = t;
            for (int t = 0; t < p; t++) xi[(long)t * m + j] = 0.0;
            if (q > 0) {
                int rank = 0;
                int info = solve_subset(&s, cols, q, y, opt->ridge, c, &rank);
                if (info != 0) {
                    code = status_set(st, ST_RUNTIME, "least squares: LAPACK dgelsd failed (info %d) for output %d",
                                      info, j + 1);
                    break;
                }
                if (rank < q) r.rank_deficient++;
                for (int k = 0; k < q; k++) xi[(long)cols[k] * m + j] = c[k] / scale[cols[k]];
            }
            if (pass == opt->max_iter) {
                if (q > 0) {   /* did the last pass still change anything? */
                    for (int t = 0; t < p; t++)
                        if (act[t] && fabs(xi[(long)t * m + j]) * wt[t] < opt->threshold) r.converged = 0;
                }
                break;
            }
            int changed = 0;
            for (int t = 0; t < p; t++)
                if (act[t] && fabs(xi[(long)t * m + j]) * wt[t] < opt->threshold) act[t] = 0, changed = 1;
            if (!changed) break;
            pass++;
            if (pass > r.passes) r.passes = pass;
        }
        for (int t = 0; t < p; t++) {
            mask[(long)t * m + j] = act[t];
            if (!act[t]) xi[(long)t * m + j] = 0.0;
        }
    }
    if (!code) {
        for (long i = 0; i < (long)p * m; i++) r.active += mask[i] != 0;
        status_ok(st);
    }
    nn_free(scale), nn_free(norm), nn_free(an), nn_free(y), nn_free(s.a), nn_free(s.b), nn_free(s.sv);
    nn_free(s.work), nn_free(s.iwork), nn_free(cols), nn_free(c), nn_free(act);
    if (rep) *rep = r;
    return code;
}
