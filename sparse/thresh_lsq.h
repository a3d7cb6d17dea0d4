/* sparse/thresh_lsq.h: sequentially thresholded least squares, as published in "Discovering governing
 * equations from data by sparse identification of nonlinear dynamical systems" (PNAS 2016), in
 * double precision through LAPACK (dgelsd, SVD-based, from OpenBLAS).
 *
 * Given Theta (N, p), one row per sample and one column per library term, and the targets
 * dX (N, m) (time derivatives, one column per output), for each output j independently:
 *
 *     active = allowed[:, j]
 *     xi     = least squares of dX[:, j] on the active columns (0 elsewhere)
 *     repeat up to max_iter times:
 *         shrink = active and |xi| >= threshold
 *         if shrink == active: stop                 (every survivor is above the threshold)
 *         active = shrink; xi = least squares on the active columns
 *
 * Columns are normalised to unit 2-norm before each solve (normalize = 1) and the coefficients are
 * mapped back (xi_t = c_t / |Theta[:, t]|), so the threshold is compared with coefficients in the
 * units of the data, the same units the equations are written in. The optional ridge term adds
 * ridge |c|^2 on the normalised coefficients c (scale-free: the same ridge suits any units);
 * it is solved as least squares on Theta stacked over sqrt(ridge) I.
 *
 * Bad input (status ST_INPUT): fewer samples than terms, a non-finite value, bad options. */
#ifndef SPARSE_THRESH_LSQ_H
#define SPARSE_THRESH_LSQ_H

#include <stdint.h>

#include "nn/core.h"

typedef struct {
    double threshold;   /* prune |xi| < threshold, in data units; >= 0 */
    double ridge;       /* >= 0; 0 is ordinary least squares */
    int max_iter;       /* threshold passes, >= 0 (the published algorithm uses 10) */
    int normalize;      /* 1: unit-norm columns for the solve */
    int relative;       /* 1: the threshold applies to each term's contribution |xi_t| |Theta_t| / |y_j|
                         * (2-norms over the samples: rms(term) / rms(target)), the same in any units;
                         * 0: to |xi_t| in the units of the data */
} ThreshLsqOptions;

/* threshold 0.1, ridge 0, max_iter 10, normalize 1, relative 0. */
ThreshLsqOptions thresh_lsq_defaults(void);

typedef struct {
    int passes;         /* largest number of threshold passes over the outputs */
    int converged;      /* 1 when every output stopped because its active set no longer changed */
    int rank_deficient; /* solves whose active columns were numerically dependent */
    long active;        /* active coefficients in the result */
} ThreshLsqReport;

/* xi (p, m) and mask (p, m) out. theta (N, p), dx (N, m) row-major. allowed (p, m) or NULL (all
 * terms allowed). rep may be NULL. Returns 0, ST_INPUT (bad data or options) or ST_RUNTIME (LAPACK
 * failed), with a one-line message in st. */
int thresh_lsq_fit(double *xi, uint8_t *mask, const double *theta, const double *dx, long N, int p, int m,
              const uint8_t *allowed, const ThreshLsqOptions *opt, ThreshLsqReport *rep, Status *st);

#endif
