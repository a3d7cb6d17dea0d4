/* sparse/canonfold.h: a trained model rewritten in the canonical coordinates of its law.
 *
 * The canonical step (sparse/canonical.h) finds u = A z + b and frequencies w under which the law is
 * sparsest. Refinement trains on from there, so the model must speak the canonical coordinates
 * itself. Its latent becomes v = w u (each canonical variable times its frequency, so that the
 * library's own terms sin(f v_i) are the canonical law's sin(f w_i u_i)): with M = A^T diag(w) and
 * c = b diag(w) (row vectors, v = z M + c),
 *
 *   encoder, last (linear) layer   W <- W M,        bias <- bias M + c
 *   decoder, first layer           W <- M^-1 W,     bias <- bias - c M^-1 W
 *
 * so that the new encoder gives v for every frame and the new decoder maps v to the same output as
 * the old one mapped z (exactly, up to float rounding). Derivatives follow (v' = z' M), by tangents
 * or by a stencil on the codes. The law: an equation j of u (u_j' or u_j'') is w_j times the one of
 * v, and a monomial of u is the same monomial of v divided by the product of w_i^power of its
 * factors (velocities take the w of their variable); sin / cos terms are unchanged, so
 *
 *   Xi_v[t][j] = Xi_u[t][j] w_j / prod_factors(w_i^p)
 *
 * restricted to the given mask (the canonical law's, or a sparser one to try). Adam's moments are
 * set to zero: the optimiser starts over in the new coordinates. */
#ifndef SPARSE_CANONFOLD_H
#define SPARSE_CANONFOLD_H

#include <stdint.h>

#include "nn/core.h"
#include "nn/params.h"
#include "sparse/canonical.h"
#include "sparse/model.h"

/* Rewrite m's parameters in ps (and m->mask, m->maskf) in the coordinates v of c (status
 * CANON_FOUND or CANON_UNCHANGED). mask (n_terms, k): the terms to keep, NULL for c->mask. ST_INPUT
 * when the map does not fit the model (latent size, order, library) or is singular; nothing is
 * modified then. */
int canonical_fold(const Canonical *c, Model *m, ParamSet *ps, const uint8_t *mask, Status *st);

/* The factor of each term's coefficient under v = w u (scale (n_terms, k)): Xi_v = Xi_u * scale. */
void canonical_fold_scales(const Canonical *c, const Library *lib, double *scale);

#endif
