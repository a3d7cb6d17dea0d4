/* sparse/canonical_select.h: the canonical law's terms chosen by the forecast score of model selection.
 *
 * canonical_find (sparse/canonical.h) keeps a term when leaving it out costs more than the tolerance
 * in fit error. A fit error cannot tell a weak but real term (a small damping) from a term that only
 * pays for a warp of the learned coordinate, and the latter is what keeps the lantern's canonical law
 * at four or five terms (docs/canonical.md). canonical_select judges the terms the way the training's
 * selection judges a law (sparse/select.h): by the forecast of the law integrated over segments of
 * the recordings, times the parsimony factors of its terms.
 *
 * In the canonical coordinates of c (the map A, b is kept): starting from c's law, backward
 * elimination by that score: at each step every law with one term fewer (every equation keeps at
 * least one term) is refitted by least squares on the samples and scored, and the best is taken; the
 * step goes on to a single term per equation. Each law's trig frequencies w_i are fitted by the
 * score too (a log grid of 17 values over [w / 3, 3 w] around the parent's w_i, then two finer
 * grids around the best; coordinate by coordinate, two sweeps with several trig variables; only
 * where w_i max|u_i| is 1.5 to 20 radians, below which a sine is nearly a cubic): leaving out a
 * linear term moves the frequency of the sine that remains. The law of smallest score along
 * the path is reported when it has fewer terms than c's law; else c is left as it was.
 *
 * One latent variable: the map may also bend, u = A z + b + a z^3 (c->c3): a warp of the learned
 * coordinate shows in its law as extra terms (z = theta + e theta^3 turns theta'' = f(theta, theta')
 * into one with a term in z (z')^2, besides the sine turned into z and sin z), which no affine map
 * removes. The elimination is repeated at a coarse grid of 24 values of a z_rms^2 from +-0.0025 to
 * +-0.15 (only maps with g' >= A / 5 over the data); then, for each set of terms that is the best law
 * of some warped path, a is refined on two finer grids around the warp of the path that scored it
 * best (a law of few terms is the one most sensitive to the warp: on one lantern run the two-term
 * law's forecast error fell from 4.9% to 1.5% of the spread). The warp costs the parsimony factor
 * of a cubic term (1 + 3 tol). The state maps to u = g(z), u' = g'(z) z', the target to
 * u'' = g'(z) z'' + g''(z) z'^2 (canonical_map_state, canonical_map_target).
 *
 * Why a law in u with sin(f w u) can use the selection unchanged: in v_i = w_i u_i the canonical
 * trig terms are the library's sin(f v_i), every monomial of u is a monomial of v times a constant
 * (prod w^p), and the target is w_i u_i''; the law is fitted and scored in v, its coefficients mapped
 * back to u. The score does not depend on the scale of a variable (errors relative to its standard
 * deviation), so w only acts through the trig terms.
 *
 * The eliminations (the affine map's and one per trial warp) are independent: they run in parallel
 * over par_threads() (OpenBLAS single-threaded inside each) and are merged in grid order, so the
 * result has the same bits at every thread count.
 *
 * Pure computation, deterministic. */
#ifndef SPARSE_CANONICAL_SELECT_H
#define SPARSE_CANONICAL_SELECT_H

#include "sparse/canonical.h"
#include "sparse/select.h"

typedef struct {
    int steps;                  /* laws scored along the path (each with its frequency scan) */
    double score_start;         /* the score of c's law as canonical_find gave it (its w) */
    double score, forecast;     /* the chosen law's score and forecast error */
    long active_start;          /* c's terms before */
    double warp;                /* one latent variable: the cubic warp chosen (c->c3; 0: none) */
    int changed;                /* 1: c now holds the law chosen by the score */
} CanonSelectReport;

/* c: a result of canonical_find (status found or unchanged; others are left alone); lib the
 * library it was found with; data the encoded samples in the learned coordinates z (the same
 * samples canonical_find saw, in recording order, with their recordings and time step); opt the
 * selection's options. Returns 0 (rep filled), ST_INPUT for data the selection refuses, ST_RUNTIME. */
int canonical_select(Canonical *c, const Library *lib, const SelectData *data, const SelectOptions *opt,
                     CanonSelectReport *rep, Status *st);

#endif
