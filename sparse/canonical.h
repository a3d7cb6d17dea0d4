/* sparse/canonical.h: the sparsest form of a learned law in canonical latent coordinates.
 *
 * The autoencoder may choose any coordinates z for its latent space, so the same dynamics can
 * print as a dense law in one run and a sparse one in another. This step searches the changes of
 * latent coordinates that keep the library's form,
 *
 *     u = A z + b          (positions; for a second-order law the velocities follow: u' = A z')
 *
 * for the one under which the law, refitted on the encoded samples, has the fewest terms while its
 * fit error stays within a tolerance of the learned law's (docs/canonical.md has the whole story).
 *
 * - Polynomial libraries (no sin / cos terms) are closed under affine maps: the law in u follows
 *   exactly from the learned coefficients (sparse/polymap.h), which makes a fast objective. The
 *   search runs from several deterministic starts (the learned coordinates; the modal, real Jordan
 *   form of the linearisation at each fixed point of the law; seeded random maps) in three stages:
 *   (1) BFGS on a smoothed count of the terms of highest degree, which do not depend on b;
 *   (2) offsets b among the fixed points of the law and the solutions that zero k coefficients of
 *       the next lower degree (those are affine in b);
 *   (3) a greedy pass that forces one more coefficient to zero at a time (Levenberg-Marquardt on
 *       the exactly transformed coefficients over A and b): of the smallest coefficients, the one
 *       whose law, refitted on the samples with the remaining terms, stays nearest its reference,
 *       while that law is within the tolerance. Every law on the way is a candidate.
 * - Libraries with sin / cos terms are not closed (sin of a mixture of variables is not a term),
 *   so the map is diagonal there: u_i = a_i z_i + b_i, and the frequency of the trig terms becomes
 *   a fitted parameter: sin(k z_i) is replaced by sin(k w_i u_i). For each variable, w_i is scanned
 *   over a logarithmic grid, the offset b_i comes from the phase of the fitted sine and cosine (the
 *   shift that turns c_s sin + c_c cos into a pure sine) or from a fixed point, each candidate is
 *   scored by backward elimination on the samples, and the best (w, b) is refined by
 *   Levenberg-Marquardt on the fit error with its terms fixed.
 *
 * Every candidate the search met is refitted on every sample by sequentially thresholded least
 * squares (sparse/thresh_lsq.h) restricted to its terms, along a path of thresholds on the relative
 * contribution of each term; the sparsest law within the tolerance is kept.
 *
 * Tolerance: equation by equation, the canonical law's relative residual on the samples must be
 * at most (1 + tolerance) times that of the learned law written in the same coordinates, plus
 * err_floor (the float32 resolution of the codes). Condition bound: a map whose condition number,
 * measured between standardised coordinates (each learned and each canonical variable divided by
 * its standard deviation over the samples), exceeds cond_max is never considered nor reported.
 *
 * Conventions of the reported map: each canonical variable has the root-mean-square standard
 * deviation of the learned variables (so one latent variable keeps its scale: a = 1), the entry of
 * largest size in each standardised row is positive, and the canonical variables are ordered to
 * follow the learned ones (largest standardised diagonal). The frequencies w_i (1 when a variable
 * has no trig terms) carry the rest of the scale: the argument of a sine is k w_i u_i. */
#ifndef SPARSE_CANONICAL_H
#define SPARSE_CANONICAL_H

#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#include "nn/core.h"
#include "sparse/equation.h"
#include "sparse/library.h"

#define CANON_MAX_K LIB_MAX_VARS

typedef struct {
    double tolerance;   /* 0.05: the canonical law's fit error is at most (1 + tolerance) x the learned law's */
    double cond_max;    /* 1e3: bound on the condition number of the map between standardised coordinates */
    double err_floor;   /* 1e-6: relative residual below which two fits count as equal */
    int starts;         /* 12 seeded random starts of the polynomial search (besides the structured ones) */
    long max_samples;   /* 5000: samples the search uses (evenly spaced); the final refit uses all */
    unsigned long long seed;   /* 1: seed of the random starts (the result is deterministic) */
} CanonOptions;

CanonOptions canon_defaults(void);

typedef enum {
    CANON_FOUND,        /* a law with fewer terms than the learned one */
    CANON_UNCHANGED,    /* no change of coordinates gives fewer terms: the learned law is reported */
    CANON_NOTHING,      /* the learned law has no active terms: nothing to simplify */
    CANON_SKIPPED       /* the search does not apply (note says why); the learned law is reported */
} CanonStatus;

const char *canon_status_name(CanonStatus s);   /* "found", "unchanged", "nothing", "skipped" */

typedef struct {
    CanonStatus status;
    char note[256];          /* one line: what was found, or why nothing */
    int k, order, n_terms;   /* latent size, model order, library terms */
    int trig;                /* 1: the library has sin / cos terms (w is fitted) */
    double A[CANON_MAX_K * CANON_MAX_K];   /* (k, k) u = A z + b */
    double b[CANON_MAX_K];   /* (k) */
    double w[CANON_MAX_K];   /* (k) frequency factor of the trig terms of u_i (and du_i/dt): sin(f w_i u_i) */
    double c3[CANON_MAX_K];  /* (k) cubic warp of the map, one latent variable only: u = A z + b + c3 z^3
                              * (0 unless canonical_select chose one, sparse/canonical_select.h) */
    double cond;             /* condition number of A between standardised coordinates (1 for A = I) */
    double *xi;              /* (n_terms, k) the canonical law on the library's terms, in u */
    uint8_t *mask;           /* (n_terms, k) */
    long active_raw, active; /* active terms of the learned law and of the canonical law */
    double err_raw[CANON_MAX_K], err[CANON_MAX_K];   /* per canonical equation, relative residual */
    double err_raw_total, err_total;   /* in the learned coordinates: |Y - Yhat|_F / |Y|_F */
    long n_samples;
    double tolerance, cond_max;        /* the options the search ran with */
} Canonical;

/* The search. lib: the library of the learned law; xi, mask (n_terms, k): the learned law (mask
 * NULL: all active); s (N, n_vars): the library's state per sample (z, or z and z'); y (N, k): the
 * target (z' or z''). out must be canonical_free'd (also after an error). Returns 0 with out->status
 * set, ST_INPUT (bad options or data: too few samples, a non-finite value) or ST_RUNTIME. */
int canonical_find(Canonical *out, const Library *lib, const double *xi, const uint8_t *mask, const double *s,
                   const double *y, long N, const CanonOptions *opt, Status *st);
void canonical_free(Canonical *c);

/* The canonical state sigma (B, n_vars) of learned states s (B, n_vars): u = g(z) = A z + b (+ c3 z^3),
 * u' = g'(z) z' (A z' without the warp). */
void canonical_map_state(const Canonical *c, double *sigma, const double *s, long B);
/* The canonical target yu (B, k) of learned states s and targets y (B, k): u' = g'(z) z' (first
 * order), u'' = g'(z) z'' + g''(z) z'^2 (second); A y without the warp. */
void canonical_map_target(const Canonical *c, double *yu, const double *s, const double *y, long B);
/* The canonical library theta (B, n_terms) at canonical states sigma (B, n_vars): the library's
 * terms with sin(f x) and cos(f x) of variable i taken at f w_i x. */
void canonical_eval(const Canonical *c, const Library *lib, double *theta, const double *sigma, long B);

/* The canonical law as an OdeFn (sparse/integrate.h), for checks that integrate it: the state y is
 * the canonical sigma (u, or u and u'), y' = (u', Theta_w(u, u') (Xi * M)) as learned_ode_rhs does
 * for the learned law. canonical_ode_init allocates the work; c and lib stay the caller's. */
typedef struct {
    const Canonical *c;
    const Library *lib;
    double *work;       /* (2 n_terms) */
} CanonicalOde;
int canonical_ode_init(CanonicalOde *o, const Canonical *c, const Library *lib, Status *st);
void canonical_ode_free(CanonicalOde *o);
void canonical_ode_rhs(double t, const double *y, double *dydt, void *ctx);

/* The canonical law as text (one line per equation: "du1/dt = ..."; variables u1, du1/dt) or as a
 * LaTeX aligned block, snprintf-like; a trig term prints its frequency: sin(0.7071*u1). */
size_t canonical_format(char *buf, size_t n, EqStyle style, const Canonical *c, const Library *lib, int digits);
/* The map as text lines ("u1 = 0.5*z1 - 0.2*z2 + 1.3" and "w1 = 0.71" when trig), snprintf-like. */
size_t canonical_format_map(char *buf, size_t n, const Canonical *c, int digits);
/* The JSON object of docs/canonical.md (status, note, map A b w cond, errors, variables, terms,
 * equations with coefficients, mask, text and LaTeX). The caller cJSON_Delete's it. */
cJSON *canonical_json(const Canonical *c, const Library *lib, int digits);

#endif
