/* sparse/polymap.h: a polynomial law under an affine change of variables, computed exactly.
 *
 * A law y = sum_t Theta_t(s) coef[t, :] whose terms are monomials (and the constant) of the state
 * s (n_vars values). Substituting s = Q (sigma - c), with Q (n_vars, n_vars) and c (n_vars), gives
 * a polynomial of the same total degree in sigma: every monomial prod_f s_{v_f}^{p_f} becomes
 * prod_f (L_{v_f}(sigma))^{p_f} with the affine forms L_v(sigma) = sum_w Q[v, w] sigma_w - (Q c)_v.
 * Polynomial libraries are therefore closed under affine maps, and the new coefficients follow
 * from the old ones with no data: out (n_basis, m) in the complete basis of the new variables.
 *
 * The complete basis of degree D is the library of the same latent size and order with the
 * constant, every monomial of degree 1..D and nothing else, in the library's term order
 * (docs/sparse.md), so its term names are the library's. */
#ifndef SPARSE_POLYMAP_H
#define SPARSE_POLYMAP_H

#include "nn/core.h"
#include "sparse/library.h"

#define POLYMAP_MAX_TERMS 2000   /* a complete basis larger than this is refused */

typedef struct {
    Library basis;       /* the complete basis: constant and monomials of degree 1..degree */
    int n_vars, degree, n_terms;
    int *deg;            /* (n_terms) total degree of each term */
    int *mul;            /* (n_terms, n_vars) index of term r times variable v; -1 above the degree */
    int *parent, *pvar;  /* (n_terms) term r = term parent[r] times variable pvar[r] (r >= 1) */
    double *work;        /* (3 n_terms) expansion buffers */
} PolyBasis;

/* The complete basis of a latent size, order and degree (0..LIB_MAX_DEGREE). 0 or ST_INPUT. */
int polybasis_init(PolyBasis *pb, int n_latent, int order, int degree, Status *st);
void polybasis_free(PolyBasis *pb);

/* theta (B, n_terms) = the basis at sigma (B, n_vars): each term as its parent times one variable,
 * one product per term (the same values as library_eval on pb->basis, up to rounding). */
void polybasis_eval(const PolyBasis *pb, double *theta, const double *sigma, long B);

/* Index in the basis of a constant or monomial term; -1 for sin / cos or a degree above it. */
int polybasis_index(const PolyBasis *pb, const Term *t);

/* out (n_basis, m) = coefficients in sigma of sum_t Theta_t(Q (sigma - c)) coef[t, :], over the
 * library's constant and monomial terms (sin / cos terms are skipped: they are not closed).
 * coef (lib->n_terms, m), Q (n_vars, n_vars), c (n_vars) or NULL for 0. */
void polymap_apply(PolyBasis *pb, double *out, const Library *lib, const double *coef, int m, const double *Q,
                   const double *c);

#endif
