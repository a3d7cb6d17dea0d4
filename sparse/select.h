/* sparse/select.h: model selection for the sparse law on an encoded data set.
 *
 * Thresholding a law term by term keeps whatever the data cannot tell apart at that moment: on a
 * trajectory that stays near an energy surface, z (z')^2 and z^3 can stand in for z, and a law built
 * from them fits the derivatives as well as the right one while it forecasts wrongly. Selection
 * judges candidate laws by what a law is for: integrate it.
 *
 * Candidates: sequentially thresholded least squares (sparse/thresh_lsq.h) on the contribution of
 * each term (|xi_t| rms(Theta_t) / rms(target), the same in any units of the latent or of time),
 * along a log grid of thresholds, on nested libraries: the terms up to polynomial degree 1, then up
 * to degree 2, ..., then every term (trigonometric terms count as one degree above the highest
 * polynomial one; the constant belongs to every level). Each distinct active set is one candidate,
 * refitted by least squares.
 *
 * Score: each candidate is integrated (RK4, four steps per sample interval) from the encoded state
 * at the start of segments of `horizon` samples inside each recording (never across a boundary),
 * and compared with the encoded trajectory: the segment's error is the root mean square of
 * z_forecast - z over the segment and the latent components, divided by the standard deviation of
 * z over the whole set (pooled over components), capped at `cap` (a forecast that leaves the data's
 * range by far counts as the cap). The candidate's forecast error is the mean over segments.
 *
 * Choice: the smallest score (e + abs_tol) prod_t (1 + tol c_t) over the active terms t, e the
 * forecast error and c_t the term's complexity (a monomial its degree, the constant 1, a
 * trigonometric term 2): a term earns its place when it makes the forecast better by more than the
 * factor 1 + tol c_t, so a cubic term must buy three times what a linear one must
 * (the parsimony rule of model selection, common practice: the simplest model within the noise of
 * the best; abs_tol keeps errors near zero from buying terms). With several latent variables each
 * equation is judged on its own variable's error: the score is the geometric mean over equations j
 * of (e_j + abs_tol) prod over equation j's terms (1 + tol c_t), e_j the mean segment error of z_j
 * divided by z_j's own standard deviation (capped likewise), so a term must improve the forecast of
 * its own variable, and a weak term of one equation is not lost in another variable's larger error
 * (one variable: the score above, unchanged). The best candidate of the path is
 * then improved stepwise: every law that adds one allowed term to it or drops one of its terms is
 * refitted and scored, the best move is taken while it lowers the score (at most `max_steps`
 * moves); the candidates met on the way join the path. The Akaike information criterion with the
 * small-sample correction (AICc, Hurvich and Tsai, Biometrika 1989) of each candidate's fit is
 * reported beside it, not used for the choice: samples of a trajectory are far from independent,
 * which makes it favour large models.
 *
 * Pure computation: no files, no terminal. Deterministic. */
#ifndef SPARSE_SELECT_H
#define SPARSE_SELECT_H

#include <stdint.h>

#include "nn/core.h"
#include "nn/rng.h"
#include "sparse/library.h"

/* An encoded data set: N samples in recording order, consecutive samples of one recording dt
 * apart. state (N, n_vars) is the library's input (z, or z and z' for second order), target (N, d)
 * its derivative (z' or z''). Recording r holds the samples [rec_start[r], rec_start[r + 1]). */
typedef struct {
    long N;
    int n_vars, d;
    const double *state;        /* (N, n_vars) */
    const double *target;       /* (N, d) */
    int n_rec;
    const long *rec_start;      /* (n_rec + 1), rec_start[0] = 0, rec_start[n_rec] = N */
    double dt;                  /* seconds between consecutive samples */
} SelectData;

typedef struct {
    int n_grid;                 /* thresholds on the log grid, >= 1 */
    double thr_min, thr_max;    /* contribution thresholds, 0 < thr_min <= thr_max */
    int horizon;                /* samples per forecast segment, >= 2 (0: from the data's time scale) */
    double periods;             /* horizon 0: this many characteristic periods 2 pi / w_c, where
                                 * w_c = rms(target) / std(z) (second order: sqrt of it) */
    int stride;                 /* samples between segment starts (0: horizon / 2) */
    double tol, abs_tol;        /* parsimony: the score is (e + abs_tol) prod (1 + tol c_t) */
    int max_steps;              /* stepwise moves after the path (0: none) */
    double cap;                 /* largest error of one segment */
} SelectOptions;

/* 24 thresholds from 0.003 to 0.5, horizon from 3 periods, stride horizon / 2, tol 0.1, abs_tol
 * 0.05, 8 stepwise moves, cap 2. */
SelectOptions select_defaults(void);

typedef struct {
    int active;                 /* terms of the candidate */
    int level;                  /* nested library it came from (1 = degree <= 1, ...) */
    double threshold;           /* the first grid threshold that gave it */
    double fit;                 /* rms(Theta xi - target) / rms(target), pooled over equations */
    double forecast;            /* mean segment error pooled over the variables (see above) */
    double aicc;                /* N log(RSS / N) + 2 k + 2 k (k + 1) / (N - k - 1), k = active */
    double score;               /* (forecast + abs_tol) prod (1 + tol c_t) */
    int step;                   /* 0: from the path; s > 0: found by the s-th stepwise move */
    int chosen;
} SelectEntry;

/* The candidates, in the order found, with their masks and coefficients. */
typedef struct {
    int n, cap;
    int n_terms, d;
    SelectEntry *e;             /* (n) */
    uint8_t *mask;              /* (n, n_terms, d) */
    double *xi;                 /* (n, n_terms, d) */
    int horizon, segments;      /* the horizon used (samples) and the number of segments */
} SelectPath;

void select_path_free(SelectPath *p);

/* Select a law of lib's terms (those allowed (n_terms, d), NULL: all) on data. xi and mask
 * (n_terms, d) receive the choice; path (may be NULL) every candidate. ST_INPUT for bad options or
 * data (fewer samples than terms, non-finite values, a segment longer than every recording). */
int select_law(const Library *lib, const SelectData *data, const uint8_t *allowed, const SelectOptions *opt,
               double *xi, uint8_t *mask, SelectPath *path, Status *st);

/* The forecast error of one law (see above) on data, with the horizon and stride resolved from opt.
 * *segments receives the number of segments (may be NULL). */
int select_forecast_error(const Library *lib, const SelectData *data, const double *xi, const uint8_t *mask,
                          const SelectOptions *opt, double *err, int *segments, Status *st);

/* The score select_law gives the law (xi, mask) on data (see above: the forecast error, per equation
 * with several latent variables, times the parsimony factors of its terms); *err (may be NULL)
 * receives the pooled forecast error. xi is used as given (no refit). */
int select_score(const Library *lib, const SelectData *data, const double *xi, const uint8_t *mask,
                 const SelectOptions *opt, double *score, double *err, Status *st);

/* ---- the selection, bagged -----------------------------------------------------------------------
 *
 * How firmly do the data ask for the law that selection chose? Bag the selection's own units: its
 * forecast segments. Each of `members` members draws as many segments as there are, uniformly with
 * replacement (a block bootstrap whose blocks are the segments; "The jackknife and the bootstrap for
 * general stationary observations", The Annals of Statistics, 1989, cited from memory), refits every
 * candidate of a pool by least squares on the drawn segments' samples (a sample counts once per
 * drawn segment that holds it), integrates each refitted candidate over the drawn segments, scores
 * it with the same rule as select_law (the mean over the draws of the segment errors, then the
 * parsimony factors), and keeps the best. The pool: the `pool` best laws of select_law's path on the
 * whole data set (by score), and the law `extra` when given and not among them (the trained law,
 * which joint training may have moved away from the path). No stepwise moves per member: the pool
 * holds the laws the full-data search met near its optimum.
 *
 * Draws: per member, `segments` draws rng_below(segments), member after member, in one thread;
 * deterministic. */
typedef struct {
    int candidates;             /* laws in the pool */
    int segments, horizon;      /* the units drawn, and their length in samples */
    int selected;               /* index in the pool of select_law's choice on all the data (0) */
    int extra;                  /* index in the pool of extra (-1: none given) */
    int agree_selected;         /* members whose choice is select_law's choice */
    int agree_extra;            /* members whose choice is extra */
    long uncovered;             /* samples in no segment */
    int failed_fits;            /* candidate refits that failed (that candidate skipped for the member) */
} SelectBagReport;

/* coef (members, n_terms, d) and kept (members, n_terms, d) receive each member's choice and its
 * refitted coefficients (0 off its terms). extra (n_terms, d) or NULL. pool >= 1, members >= 1.
 * ST_INPUT as select_law. */
int select_bagged(const Library *lib, const SelectData *data, const uint8_t *allowed, const SelectOptions *opt,
                  const uint8_t *extra, int pool, int members, Rng *rng, double *coef, uint8_t *kept,
                  SelectBagReport *rep, Status *st);

#endif
