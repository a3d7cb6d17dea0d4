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
extern const char *const stencil_kind_names[]; /* STENCIL_KIND_COUNT */
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

/* The stencil's response to a sampled sinusoid of theta radians per sample (0 < theta < pi): the
 * ratio of its estimate to the exact derivative, g1 = sum_k w1[k] sin(theta j_k) / theta and
 * g2 = -sum_k w2[k] cos(theta j_k) / theta^2 (j_k = k - m; the weights are odd and even about the
 * centre). 1 for an exact stencil; central differences give sin(theta) / theta and
 * (2 - 2 cos theta) / theta^2. The noise gains sqrt(sum w1^2) and sqrt(sum w2^2) (per unit dt and
 * dt^2) say how much white noise of unit variance the estimates carry. Any of the outputs may be NULL. */
void stencil_response(const Stencil *s, double theta, double *g1, double *g2, double *noise1, double *noise2);

/* data.derivative.method "auto": the Savitzky-Golay stencil (degree 3, 5 or 7, odd window up to
 * max_window) whose responses at theta stay within tol of 1 for both derivatives and whose noise
 * gain for the derivative the model uses (order 1: first, 2: second) is the smallest. When no
 * stencil meets tol (theta too high: the data are barely sampled), the one closest to exact.
 * Returns 0, or ST_INPUT for theta outside (0, pi) or max_window < 5. */
int stencil_auto(Stencil *s, double theta, int order, double tol, int max_window, Status *st);

/* The root-mean-square angular frequency of series, in radians per sample: asin of
 * sqrt(mean((x[i+1] - x[i-1])^2 / 4) / var(x)) (the central difference of a sinusoid of theta has
 * the variance sin^2(theta) var), pooled over the cols channels of x (rows, cols) and over the
 * recordings [rec_start[r], rec_start[r + 1]) (differences never cross a boundary). 0 when the
 * series is constant. */
double stencil_rms_frequency(const double *x, long rows, int cols, const long *rec_start, int n_rec);

#endif
