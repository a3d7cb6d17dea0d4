/* sparse/ensemble.h: ensembles by bagging of the sparse law, inclusion probabilities, coefficient
 * intervals and forecast bands (pure computation: no files, no terminal).
 *
 * The method is that of ensembles of sparse regressions in the low-data, high-noise limit
 * (Proceedings of the Royal Society A, 2022): fit the law by sequentially thresholded least squares
 * (sparse/thresh_lsq.h) on many bootstrap resamples of the samples ("bagging"), optionally also
 * dropping library terms at random per fit ("library bagging"), and read off how often each term
 * survives. The resamples here are made of whole blocks of consecutive samples (the moving-block
 * bootstrap of "The jackknife and the bootstrap for general stationary observations", The Annals
 * of Statistics, 1989, cited from memory): neighbouring samples of a trajectory are correlated
 * (their derivative estimates share stencil frames), and resampling single samples would make the
 * members look more alike than the data allow.
 *
 * Samples and blocks. Sample i has a recording id rec[i] and a time step step[i] (integer, the
 * order in time). Sorted by (rec, step), the samples fall into segments: maximal runs of one
 * recording with consecutive steps (step + 1). A block is `block` consecutive samples of one
 * segment, so it never crosses a recording boundary (nor a gap in time). A resample draws
 * ceil(N / block) blocks uniformly among every block position of every segment long enough, and
 * keeps the first N samples (the last block may be cut short). Samples of segments shorter than
 * the block are never drawn (EnsembleReport.unreachable counts them).
 *
 * Per member m = 0..M-1, in this order, from the caller's generator: the blocks, then (library
 * bagging) the dropped terms: floor(drop_fraction * T) distinct terms, uniformly, removed from
 * every equation of that member. The fit of a member is thresh_lsq_fit on the resampled rows with
 * the remaining terms allowed. All random draws happen in one thread in member order, so the
 * result is the same bits for a given seed whatever the thread count.
 *
 * Per term t and equation j, over the members whose library offered t ("offered", all of them
 * without library bagging):
 *     prob[t, j]   = (members that kept t in equation j) / offered
 *     median, q05, q95 of the member coefficients (0 where a member pruned the term), by the
 *                  sample quantile of definition 6 in "Sample quantiles in statistical packages"
 *                  (The American Statistician, 1996): position p (n + 1) in the sorted values,
 *                  linear between neighbours, clamped to the extremes. The k-th of n sorted draws
 *                  sits on average at the k / (n + 1) quantile of their distribution (common
 *                  practice), so [q05, q95] holds a further member with probability 0.90; this is
 *                  the bootstrap percentile interval ("Bootstrap methods: another look at the
 *                  jackknife", The Annals of Statistics, 1979).
 * The ensemble law keeps the terms with prob >= inclusion and refits them by least squares on all
 * samples (no threshold pass).
 *
 * Forecast bands: integrate one start state with the law of each of the first n members (every
 * member's own coefficients and kept terms), and give per output time and variable the median and
 * the 5-95% band (same quantile definition). */
#ifndef SPARSE_ENSEMBLE_H
#define SPARSE_ENSEMBLE_H

#include <stdint.h>

#include "nn/core.h"
#include "nn/rng.h"
#include "sparse/integrate.h"
#include "sparse/library.h"
#include "sparse/select.h"
#include "sparse/thresh_lsq.h"

#define ENSEMBLE_MAX_MEMBERS 100000

typedef struct {
    int members;            /* M >= 1 */
    long block;             /* samples per block, >= 1 */
    int library_bagging;    /* 1: each member drops a random subset of the terms */
    double drop_fraction;   /* with library bagging: fraction of the terms dropped, [0, 1) */
    double inclusion;       /* keep terms with inclusion probability >= this, (0, 1] */
    ThreshLsqOptions lsq;   /* each member's fit (and ridge / normalize of the refit) */
} EnsembleOptions;

/* 100 members, block 1, no library bagging (drop fraction 0.2 when switched on), inclusion 0.5,
 * thresh_lsq_defaults(). */
EnsembleOptions ensemble_defaults(void);

/* Checks the options alone; ST_INPUT naming the parameter (members, block, drop_fraction,
 * inclusion, threshold ...). */
int ensemble_check_options(const EnsembleOptions *o, Status *st);

/* ---- blocks ------------------------------------------------------------------------------------ */

typedef struct {
    long N;                 /* samples */
    long block;
    long *order;            /* (N) sample indices sorted by (rec, step) */
    int n_seg;              /* segments */
    long *seg_first;        /* (n_seg) position in order of each segment's first sample */
    long *seg_len;          /* (n_seg) */
    long *win_cum;          /* (n_seg + 1) block positions before each segment: win_cum[n_seg] total */
    long longest;           /* the longest segment */
    long unreachable;       /* samples in segments shorter than the block */
    int block_too_long;     /* after a failed block_plan_init: 1 when the block is longer than every
                               segment (longest and block then say by how much), else 0 */
} BlockPlan;

/* Segments of the samples and the block positions. ST_INPUT naming "block" when it is < 1 or
 * longer than every segment (then bp->block_too_long is 1); also for N < 1. On failure bp holds
 * nothing to free. */
int block_plan_init(BlockPlan *bp, const int *rec, const long *step, long N, long block, Status *st);
void block_plan_free(BlockPlan *bp);
/* Blocks per resample: ceil(N / block). */
long block_plan_blocks(const BlockPlan *bp);
/* One resample: idx (N) sample indices; starts (block_plan_blocks) receives the position in
 * bp->order of each block's first sample when non-NULL. */
void block_plan_draw(const BlockPlan *bp, Rng *rng, long *idx, long *starts);

/* ---- the ensemble ------------------------------------------------------------------------------ */

typedef struct {
    int members, n_terms, n_out;
    long n_samples;
    double *coef;           /* (M, T, d) member coefficients; 0 where pruned or dropped */
    uint8_t *kept;          /* (M, T, d) 1 where the member kept the term */
    uint8_t *offered;       /* (M, T) 1 where the member's library had the term */
    int *n_offered;         /* (T) members whose library had the term */
    double *prob;           /* (T, d) inclusion probability (0 for a term no member was offered) */
    double *median;         /* (T, d) median coefficient (NaN for a term no member was offered) */
    double *q05, *q95;      /* (T, d) the 90% interval */
    double *xi;             /* (T, d) the ensemble law: terms at or above the inclusion threshold, refit */
    uint8_t *mask;          /* (T, d) its terms */
    long unreachable;       /* samples no block can reach (segments shorter than the block) */
    int segments;
    long longest;           /* the longest segment, in samples */
    int rank_deficient;     /* member solves with dependent columns (ThreshLsqReport), summed */
    int unconverged;        /* members whose threshold passes had not settled at max_iter */
    int block_too_long;     /* after a failed fit: 1 when the block is longer than every run of
                               consecutive samples (longest says the longest), so that a caller can
                               name its own key for the block; else 0 */
    int by_selection;       /* 1: fitted by ensemble_fit_select (bag says how) */
    SelectBagReport bag;
} Ensemble;

/* The reason of a block longer than every run of consecutive samples, without a prefix ("block 200
 * samples is longer than every recording (...); use a shorter block"); the fit's message is
 * "ensemble: " and this. */
void ensemble_block_too_long_text(char *buf, size_t n, long block, long longest);

/* Fit the ensemble on theta (N, T) (the library evaluated at each sample's state) and targets
 * dx (N, d), with rec (N) and step (N) as above. rng is advanced. Returns 0, ST_INPUT (bad options
 * or data, naming the parameter or sample) or ST_RUNTIME (LAPACK failed). On failure e holds
 * nothing to free. */
int ensemble_fit_theta(Ensemble *e, const double *theta, const double *dx, const int *rec, const long *step,
                       long N, int T, int d, const EnsembleOptions *o, Rng *rng, Status *st);

/* The same from the library's states s (N, lib->n_vars): theta = Theta(s). */
int ensemble_fit(Ensemble *e, const Library *lib, const double *s, const double *dx, const int *rec,
                 const long *step, long N, const EnsembleOptions *o, Rng *rng, Status *st);

/* The ensemble of the forecast-scored selection (select_bagged in sparse/select.h): each member is
 * the selection bagged over its forecast segments, choosing among the `pool` best laws of the
 * full-data path and law_mask (n_terms, d; the trained law, or NULL). The statistics and the
 * ensemble law are then as above (theta = Theta(D->state), targets D->target); e->bag reports the
 * pool, the segments and how many members chose the full-data selection and law_mask;
 * e->unreachable counts the samples in no segment, e->segments the segments. Library bagging is not
 * offered here (ST_INPUT naming library_bagging). */
int ensemble_fit_select(Ensemble *e, const Library *lib, const SelectData *D, const SelectOptions *so,
                        const uint8_t *law_mask, int pool, const EnsembleOptions *o, Rng *rng, Status *st);

void ensemble_free(Ensemble *e);

/* Sample quantile of definition 6 (see above) of v (n), which is sorted in place. Values may be
 * -inf / +inf; NaN for n = 0. */
double ensemble_quantile(double *v, int n, double p);

/* ---- forecast bands ---------------------------------------------------------------------------- */

typedef struct {
    int n_out, n_vars, members;     /* members integrated */
    double *median;         /* (n_out, n_vars) over the members still running; NaN when fewer than half are */
    double *q05, *q95;      /* (n_out, n_vars) 5-95% band; a member that stopped counts as beyond
                             * both edges, so an edge is -inf / +inf once more than 5% have stopped */
    int *alive;             /* (n_out) members still running at each output time */
    double *width;          /* (n_out) |q95 - q05| (2-norm over the first width_vars variables) / scale */
    double exceeds_at;      /* first output time with width > bound; NaN when never */
    int stopped;            /* members whose integration stopped before the last output time */
    double *traj;           /* (members, n_out, n_vars) each member's trajectory; NaN after a stop */
} EnsembleBands;

/* Integrate y0 (lib->n_vars) from t0 to the output times t_out (n_out, increasing, >= t0) with the
 * law of each of the first n_members members (0 or more than e->members: all of them), using the
 * integrator options opt (a member that leaves opt->bound or turns non-finite stops; see
 * sparse/integrate.h). The width compares the first width_vars variables (1..n_vars), divided by
 * scale (> 0), with bound (> 0). ST_INPUT for bad arguments. */
int ensemble_bands(EnsembleBands *b, const Ensemble *e, const Library *lib, const double *y0, double t0,
                   const double *t_out, int n_out, int n_members, const OdeOptions *opt, int width_vars,
                   double scale, double bound, Status *st);
void ensemble_bands_free(EnsembleBands *b);

#endif
