/* sparse/stencil.h: derivative stencils for sampled time series (pure computation, no files).
 *
 * A stencil of half-width m estimates the first and second time derivative at sample i from the
 * 2m+1 samples x[i-m .. i+m], equally spaced by dt:
 *
 *     x'(t_i)  ~ (1 / dt)   * sum_{k=0}^{2m} w1[k] * x[i - m + k]
 *     x''(t_i) ~ (1 / dt^2) * sum_{k=0}^{2m} w2[k] * x[i - m + k]
 *
 * The weights are stored "per unit dt" (as if dt = 1); the caller divides by dt and dt^2.
 * Samples i with i < m or i > n - 1 - m have no estimate: a stencil never reaches past the ends of
 * a recording, so a recording of n samples yields n - 2m derivative samples (stencil_valid).
 *
 * Kinds:
 *   STENCIL_CENTRAL   central finite differences of second order (m = 1):
 *                         w1 = [-1/2, 0, 1/2],  w2 = [1, -2, 1]
 *                     truncation error h^2/6 x''' and h^2/12 x'''' (Taylor expansion).
 *   STENCIL_SAVGOL    Savitzky-Golay: the least-squares polynomial of degree `degree` through the
 *                     `window` = 2m+1 samples, differentiated at the window centre. Weights are
 *                     computed in double by Householder QR of the Vandermonde matrix in the scaled
 *                     offset u = j / m (j = -m..m), so they stay accurate for wide windows.
 *                     Exact for polynomials of degree <= `degree`; requires an odd window >= 3,
 *                     2 <= degree < window and m <= STENCIL_MAX_HALF.
 *
 * Every weight vector of a derivative sums to zero, so an affine rescaling x -> a x + b of the
 * samples scales the derivative estimate by a and ignores b.
 *
 * Example (first and second derivative of a (rows, cols) series at sample i):
 *     Stencil s; Status st;
 *     if (stencil_savgol(&s, 7, 3, &st)) return st.code;
 *     stencil_apply(&s, dt, x, cols, i, d1, d2);      // needs s.m <= i < rows - s.m
 */
#ifndef SPARSE_STENCIL_H
#define SPARSE_STENCIL_H

#include "nn/core.h"

#define STENCIL_MAX_HALF 32
#define STENCIL_MAX_LEN (2 * STENCIL_MAX_HALF + 1)

typedef enum { STENCIL_CENTRAL, STENCIL_SAVGOL, STENCIL_KIND_COUNT } StencilKind;

/* Names used by configs and messages: "central", "savgol". */
extern const char *const stencil_kind_names[STENCIL_KIND_COUNT];
/* STENCIL_KIND_COUNT when the name is unknown. */
StencilKind stencil_kind_from_name(const char *name);

typedef struct {
    StencilKind kind;
    int m;                          /* half-width; the stencil reads 2m+1 samples */
    int degree;                     /* polynomial degree it is exact for (2 for central) */
    double w1[STENCIL_MAX_LEN];     /* (2m+1) first-derivative weights per unit dt, rest zero */
    double w2[STENCIL_MAX_LEN];     /* (2m+1) second-derivative weights per unit dt^2, rest zero */
} Stencil;

/* Second-order central differences (m = 1). Cannot fail. */
void stencil_central(Stencil *s);

/* Savitzky-Golay weights for an odd `window` and polynomial `degree`. Returns 0, or ST_INPUT with a
 * one-line message naming the bad value. */
int stencil_savgol(Stencil *s, int window, int degree, Status *st);

/* By kind: `window` and `degree` are ignored for STENCIL_CENTRAL. */
int stencil_make(Stencil *s, StencilKind kind, int window, int degree, Status *st);

/* Number of samples with a derivative estimate in a recording of n samples: max(0, n - 2m). The
 * valid sample indices are m .. n - 1 - m. */
static inline long stencil_valid(const Stencil *s, long n) { return n > 2L * s->m ? n - 2L * s->m : 0; }

/* Derivatives of every channel of a row-major series x (rows, cols) at sample i, where
 * s->m <= i < rows - s->m (checked by the caller). d1, d2 (cols) receive x' and x''; either may be
 * NULL. */
void stencil_apply(const Stencil *s, double dt, const double *x, int cols, long i, double *d1,
                   double *d2);

/* The same for every valid sample: d1, d2 (rows - 2m, cols), row r holding sample r + m. Either
 * may be NULL. rows must be > 2m. */
void stencil_apply_all(const Stencil *s, double dt, const double *x, long rows, int cols, double *d1,
                       double *d2);

#endif
