/* sparse/ensemble.c: ensembles by bagging (see ensemble.h). */
#include "sparse/ensemble.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

EnsembleOptions ensemble_defaults(void) {
    EnsembleOptions o;
    o.members = 100;
    o.block = 1;
    o.library_bagging = 0;
    o.drop_fraction = 0.2;
    o.inclusion = 0.5;
    o.lsq = thresh_lsq_defaults();
    return o;
}

int ensemble_check_options(const EnsembleOptions *o, Status *st) {
    if (o->members < 1 || o->members > ENSEMBLE_MAX_MEMBERS)
        return status_set(st, ST_INPUT, "ensemble: members %d must be 1..%d", o->members, ENSEMBLE_MAX_MEMBERS);
    if (o->block < 1) return status_set(st, ST_INPUT, "ensemble: block %ld must be >= 1 sample", o->block);
    if (!(o->inclusion > 0 && o->inclusion <= 1))
        return status_set(st, ST_INPUT, "ensemble: inclusion threshold %g must be in (0, 1]", o->inclusion);
    if (o->library_bagging && !(o->drop_fraction >= 0 && o->drop_fraction < 1))
        return status_set(st, ST_INPUT, "ensemble: drop_fraction %g must be in [0, 1)", o->drop_fraction);
    if (!(o->lsq.threshold >= 0) || !isfinite(o->lsq.threshold))
        return status_set(st, ST_INPUT, "ensemble: threshold %g must be finite and >= 0", o->lsq.threshold);
    if (!(o->lsq.ridge >= 0) || !isfinite(o->lsq.ridge))
        return status_set(st, ST_INPUT, "ensemble: ridge %g must be finite and >= 0", o->lsq.ridge);
    if (o->lsq.max_iter < 0) return status_set(st, ST_INPUT, "ensemble: max_iter %d must be >= 0", o->lsq.max_iter);
    status_ok(st);
    return 0;
}

/* ---- blocks ------------------------------------------------------------------------------------ */

/* qsort has no context argument: sort (rec, step, index) triples instead. */
typedef struct {
    int rec;
    long step, i;
} Key;

static int key_cmp(const void *a, const void *b) {
    const Key *x = a, *y = b;
    if (x->rec != y->rec) return x->rec < y->rec ? -1 : 1;
    if (x->step != y->step) return x->step < y->step ? -1 : 1;
    return x->i < y->i ? -1 : x->i > y->i;
}

void ensemble_block_too_long_text(char *buf, size_t n, long block, long longest) {
    snprintf(buf, n,
             "block %ld samples is longer than every recording (the longest run of consecutive samples has %ld); "
             "use a shorter block",
             block, longest);
}

void block_plan_free(BlockPlan *bp) {
    nn_free(bp->order);
    nn_free(bp->seg_first);
    nn_free(bp->seg_len);
    nn_free(bp->win_cum);
    memset(bp, 0, sizeof *bp);
}

int block_plan_init(BlockPlan *bp, const int *rec, const long *step, long N, long block, Status *st) {
    memset(bp, 0, sizeof *bp);
    if (N < 1) return status_set(st, ST_INPUT, "ensemble: no samples");
    if (block < 1) return status_set(st, ST_INPUT, "ensemble: block %ld must be >= 1 sample", block);
    Key *k = nn_alloc((size_t)N * sizeof *k);
    for (long i = 0; i < N; i++) k[i] = (Key){rec[i], step[i], i};
    qsort(k, (size_t)N, sizeof *k, key_cmp);
    for (long i = 1; i < N; i++)
        if (k[i].rec == k[i - 1].rec && k[i].step == k[i - 1].step) {
            long a = k[i - 1].i, b = k[i].i;
            nn_free(k);
            return status_set(st, ST_INPUT, "ensemble: samples %ld and %ld have the same recording %d and step %ld",
                              a + 1, b + 1, rec[a], step[a]);
        }
    bp->N = N;
    bp->block = block;
    bp->order = nn_alloc((size_t)N * sizeof *bp->order);
    int n_seg = 0;
    for (long i = 0; i < N; i++) {
        bp->order[i] = k[i].i;
        if (i == 0 || k[i].rec != k[i - 1].rec || k[i].step != k[i - 1].step + 1) n_seg++;
    }
    bp->n_seg = n_seg;
    bp->seg_first = nn_alloc((size_t)n_seg * sizeof *bp->seg_first);
    bp->seg_len = nn_alloc((size_t)n_seg * sizeof *bp->seg_len);
    bp->win_cum = nn_alloc((size_t)(n_seg + 1) * sizeof *bp->win_cum);
    int g = -1;
    for (long i = 0; i < N; i++) {
        if (i == 0 || k[i].rec != k[i - 1].rec || k[i].step != k[i - 1].step + 1) {
            g++;
            bp->seg_first[g] = i;
            bp->seg_len[g] = 0;
        }
        bp->seg_len[g]++;
    }
    nn_free(k);
    bp->win_cum[0] = 0;
    for (int s = 0; s < n_seg; s++) {
        long len = bp->seg_len[s];
        if (len > bp->longest) bp->longest = len;
        if (len < block) bp->unreachable += len;
        bp->win_cum[s + 1] = bp->win_cum[s] + (len >= block ? len - block + 1 : 0);
    }
    if (bp->win_cum[n_seg] == 0) {
        long longest = bp->longest;
        block_plan_free(bp);
        bp->block = block, bp->longest = longest, bp->block_too_long = 1;
        char why[200];
        ensemble_block_too_long_text(why, sizeof why, block, longest);
        return status_set(st, ST_INPUT, "ensemble: %s", why);
    }
    status_ok(st);
    return 0;
}

long block_plan_blocks(const BlockPlan *bp) { return (bp->N + bp->block - 1) / bp->block; }

void block_plan_draw(const BlockPlan *bp, Rng *rng, long *idx, long *starts) {
    long total = bp->win_cum[bp->n_seg], nb = block_plan_blocks(bp), filled = 0;
    for (long b = 0; b < nb; b++) {
        long w = (long)rng_below(rng, (uint64_t)total);
        int lo = 0, hi = bp->n_seg - 1; /* the segment s with win_cum[s] <= w < win_cum[s + 1] */
        while (lo < hi) {
            int mid = (lo + hi + 1) / 2;
            if (bp->win_cum[mid] <= w) lo = mid;
            else hi = mid - 1;
        }
        long first = bp->seg_first[lo] + (w - bp->win_cum[lo]);
        if (starts) starts[b] = first;
        for (long j = 0; j < bp->block && filled < bp->N; j++) idx[filled++] = bp->order[first + j];
    }
}

/* ---- quantiles --------------------------------------------------------------------------------- */

static int dcmp(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

double ensemble_quantile(double *v, int n, double p) {
    if (n < 1) return NAN;
    qsort(v, (size_t)n, sizeof *v, dcmp);
    double h = p * (n + 1); /* 1-based position */
    if (h <= 1) return v[0];
    if (h >= n) return v[n - 1];
    int k = (int)floor(h);  /* 1 <= k < n */
    double f = h - k, a = v[k - 1], b = v[k];
    if (f == 0 || a == b) return a;
    if (isinf(a) || isinf(b)) return isinf(a) ? a : b; /* an infinite neighbour wins */
    return a + f * (b - a);
}

/* ---- the ensemble ------------------------------------------------------------------------------ */

void ensemble_free(Ensemble *e) {
    nn_free(e->coef);
    nn_free(e->kept);
    nn_free(e->offered);
    nn_free(e->n_offered);
    nn_free(e->prob);
    nn_free(e->median);
    nn_free(e->q05);
    nn_free(e->q95);
    nn_free(e->xi);
    nn_free(e->mask);
    memset(e, 0, sizeof *e);
}

/* The arrays of an ensemble of M members, T terms and d equations (coefficients, kept and offered
 * flags zeroed). */
static void ensemble_alloc(Ensemble *e, int M, int T, int d) {
    long Td = (long)T * d;
    e->coef = nn_calloc((size_t)M * Td, sizeof *e->coef);
    e->kept = nn_calloc((size_t)M * Td, 1);
    e->offered = nn_calloc((size_t)M * T, 1);
    e->n_offered = nn_calloc((size_t)T, sizeof *e->n_offered);
    e->prob = nn_calloc((size_t)Td, sizeof *e->prob);
    e->median = nn_alloc((size_t)Td * sizeof *e->median);
    e->q05 = nn_alloc((size_t)Td * sizeof *e->q05);
    e->q95 = nn_alloc((size_t)Td * sizeof *e->q95);
    e->xi = nn_calloc((size_t)Td, sizeof *e->xi);
    e->mask = nn_calloc((size_t)Td, 1);
}

/* From the members' coefficients and kept terms in e: the inclusion probabilities, the medians and
 * intervals, and the ensemble law refitted on every sample (theta (N, T), dx (N, d)). On failure e is
 * freed. */
static int summarize(Ensemble *e, const double *theta, const double *dx, long N, const EnsembleOptions *o,
                     Status *st) {
    int M = e->members, T = e->n_terms, d = e->n_out;
    long Td = (long)T * d;
    double *v = nn_alloc((size_t)M * sizeof *v); /* (M) one term's coefficients over members */
    for (int t = 0; t < T; t++) {
        for (int m = 0; m < M; m++) e->n_offered[t] += e->offered[(long)m * T + t];
        for (int j = 0; j < d; j++) {
            long tj = (long)t * d + j;
            int n = 0, kept = 0;
            for (int m = 0; m < M; m++) {
                if (!e->offered[(long)m * T + t]) continue;
                v[n++] = e->coef[(long)m * Td + tj];
                kept += e->kept[(long)m * Td + tj] != 0;
            }
            e->prob[tj] = n ? (double)kept / n : 0.0;
            e->median[tj] = ensemble_quantile(v, n, 0.5); /* sorts v; the next two reuse it sorted */
            e->q05[tj] = ensemble_quantile(v, n, 0.05);
            e->q95[tj] = ensemble_quantile(v, n, 0.95);
        }
    }
    nn_free(v);

    /* the ensemble law: the terms at or above the inclusion threshold, plain least squares on all samples */
    uint8_t *allowed = nn_alloc((size_t)Td);
    for (long tj = 0; tj < Td; tj++) allowed[tj] = e->prob[tj] >= o->inclusion;
    ThreshLsqOptions ref = o->lsq;
    ref.max_iter = 0;
    ref.threshold = 0;
    int code = thresh_lsq_fit(e->xi, e->mask, theta, dx, N, T, d, allowed, &ref, NULL, st);
    nn_free(allowed);
    if (code) ensemble_free(e);
    return code;
}

int ensemble_fit_theta(Ensemble *e, const double *theta, const double *dx, const int *rec, const long *step,
                       long N, int T, int d, const EnsembleOptions *o, Rng *rng, Status *st) {
    memset(e, 0, sizeof *e);
    if (ensemble_check_options(o, st)) return st->code;
    if (T < 1 || d < 1) return status_set(st, ST_INPUT, "ensemble: empty problem (%d terms, %d equations)", T, d);
    if (N < T)
        return status_set(st, ST_INPUT,
                          "ensemble: the library has %d terms but there are only %ld samples; it needs at "
                          "least as many samples as terms",
                          T, N);
    for (long i = 0; i < N; i++) {
        for (int t = 0; t < T; t++)
            if (!isfinite(theta[i * T + t]))
                return status_set(st, ST_INPUT, "ensemble: non-finite library value at sample %ld, term %d", i + 1, t + 1);
        for (int j = 0; j < d; j++)
            if (!isfinite(dx[i * d + j]))
                return status_set(st, ST_INPUT, "ensemble: non-finite target at sample %ld, equation %d", i + 1, j + 1);
    }
    BlockPlan bp;
    if (block_plan_init(&bp, rec, step, N, o->block, st)) {
        if (bp.block_too_long) e->block_too_long = 1, e->longest = bp.longest;
        return st->code;
    }

    int M = o->members;
    long Td = (long)T * d;
    e->members = M, e->n_terms = T, e->n_out = d, e->n_samples = N;
    e->segments = bp.n_seg, e->longest = bp.longest, e->unreachable = bp.unreachable;
    ensemble_alloc(e, M, T, d);

    long *idx = nn_alloc((size_t)N * sizeof *idx);              /* (N) one resample */
    double *th = nn_alloc((size_t)N * T * sizeof *th);          /* (N, T) its library rows */
    double *y = nn_alloc((size_t)N * d * sizeof *y);            /* (N, d) its targets */
    uint8_t *allowed = nn_alloc((size_t)Td);                    /* (T, d) */
    int *perm = nn_alloc((size_t)T * sizeof *perm);             /* (T) for the dropped terms */
    int n_drop = o->library_bagging ? (int)floor(o->drop_fraction * T) : 0;
    if (n_drop > T - 1) n_drop = T - 1;
    int code = 0;
    for (int m = 0; m < M && !code; m++) {
        block_plan_draw(&bp, rng, idx, NULL);
        uint8_t *off = e->offered + (long)m * T;
        memset(off, 1, (size_t)T);
        if (n_drop > 0) { /* the first n_drop of a partial Fisher-Yates shuffle */
            for (int t = 0; t < T; t++) perm[t] = t;
            for (int i = 0; i < n_drop; i++) {
                int r = i + (int)rng_below(rng, (uint64_t)(T - i));
                int tmp = perm[i];
                perm[i] = perm[r], perm[r] = tmp;
                off[perm[i]] = 0;
            }
        }
        for (int t = 0; t < T; t++)
            for (int j = 0; j < d; j++) allowed[(long)t * d + j] = off[t];
        for (long i = 0; i < N; i++) {
            memcpy(th + i * T, theta + idx[i] * T, (size_t)T * sizeof *th);
            memcpy(y + i * d, dx + idx[i] * d, (size_t)d * sizeof *y);
        }
        ThreshLsqReport rep;
        code = thresh_lsq_fit(e->coef + (long)m * Td, e->kept + (long)m * Td, th, y, N, T, d, allowed, &o->lsq,
                              &rep, st);
        if (code) break;
        e->rank_deficient += rep.rank_deficient;
        e->unconverged += !rep.converged;
    }
    nn_free(idx);
    nn_free(th);
    nn_free(y);
    nn_free(perm);
    block_plan_free(&bp);
    if (code) {
        nn_free(allowed);
        ensemble_free(e);
        return code;
    }

    nn_free(allowed);
    int rc = summarize(e, theta, dx, N, o, st);
    if (!rc) status_ok(st);
    return rc;
}

int ensemble_fit(Ensemble *e, const Library *lib, const double *s, const double *dx, const int *rec,
                 const long *step, long N, const EnsembleOptions *o, Rng *rng, Status *st) {
    memset(e, 0, sizeof *e);
    if (N < 1) return status_set(st, ST_INPUT, "ensemble: no samples");
    int T = lib->n_terms;
    double *theta = nn_alloc((size_t)N * T * sizeof *theta); /* (N, T) */
    library_eval(lib, theta, s, N);
    int rc = ensemble_fit_theta(e, theta, dx, rec, step, N, T, lib->spec.n_latent, o, rng, st);
    nn_free(theta);
    return rc;
}

int ensemble_fit_select(Ensemble *e, const Library *lib, const SelectData *D, const SelectOptions *so,
                        const uint8_t *law_mask, int pool, const EnsembleOptions *o, Rng *rng, Status *st) {
    memset(e, 0, sizeof *e);
    if (ensemble_check_options(o, st)) return st->code;
    if (o->library_bagging)
        return status_set(st, ST_INPUT, "ensemble: library_bagging goes with members fitted by thresholding, not by selection");
    int M = o->members, T = lib->n_terms, d = lib->spec.n_latent;
    long N = D->N;
    if (N < 1) return status_set(st, ST_INPUT, "ensemble: no samples");
    e->members = M, e->n_terms = T, e->n_out = d, e->n_samples = N, e->by_selection = 1;
    ensemble_alloc(e, M, T, d);
    memset(e->offered, 1, (size_t)M * T);
    int rc = select_bagged(lib, D, NULL, so, law_mask, pool, M, rng, e->coef, e->kept, &e->bag, st);
    if (rc) {
        ensemble_free(e);
        return rc;
    }
    e->segments = e->bag.segments, e->unreachable = e->bag.uncovered;
    for (int r = 0; r < D->n_rec; r++)
        if (D->rec_start[r + 1] - D->rec_start[r] > e->longest) e->longest = D->rec_start[r + 1] - D->rec_start[r];
    double *theta = nn_alloc((size_t)N * T * sizeof *theta); /* (N, T) */
    library_eval(lib, theta, D->state, N);
    rc = summarize(e, theta, D->target, N, o, st);
    nn_free(theta);
    if (!rc) status_ok(st);
    return rc;
}

/* ---- forecast bands ---------------------------------------------------------------------------- */

void ensemble_bands_free(EnsembleBands *b) {
    nn_free(b->median);
    nn_free(b->q05);
    nn_free(b->q95);
    nn_free(b->alive);
    nn_free(b->width);
    nn_free(b->traj);
    memset(b, 0, sizeof *b);
}

int ensemble_bands(EnsembleBands *b, const Ensemble *e, const Library *lib, const double *y0, double t0,
                   const double *t_out, int n_out, int n_members, const OdeOptions *opt, int width_vars,
                   double scale, double bound, Status *st) {
    memset(b, 0, sizeof *b);
    int nv = lib->n_vars, T = lib->n_terms, d = lib->spec.n_latent;
    if (e->members < 1 || e->n_terms != T || e->n_out != d)
        return status_set(st, ST_INPUT, "ensemble bands: the ensemble (%d members, %d terms, %d equations) does not "
                                        "match the library (%d terms, %d equations)",
                          e->members, e->n_terms, e->n_out, T, d);
    if (n_members < 0) return status_set(st, ST_INPUT, "ensemble bands: members %d must be >= 0", n_members);
    if (n_out < 1) return status_set(st, ST_INPUT, "ensemble bands: no output times");
    if (width_vars < 1 || width_vars > nv)
        return status_set(st, ST_INPUT, "ensemble bands: width_vars %d must be 1..%d", width_vars, nv);
    if (!(scale > 0) || !isfinite(scale))
        return status_set(st, ST_INPUT, "ensemble bands: scale %g must be finite and > 0", scale);
    if (!(bound > 0)) return status_set(st, ST_INPUT, "ensemble bands: bound %g must be > 0", bound);
    for (int i = 0; i < nv; i++)
        if (!isfinite(y0[i])) return status_set(st, ST_INPUT, "ensemble bands: start state component %d is not finite", i + 1);
    if (t_out[0] < t0) return status_set(st, ST_INPUT, "ensemble bands: output times start before t0");
    for (int i = 1; i < n_out; i++)
        if (!(t_out[i] > t_out[i - 1])) return status_set(st, ST_INPUT, "ensemble bands: output times must increase");
    int K = n_members == 0 || n_members > e->members ? e->members : n_members;
    long Td = (long)T * d;
    b->n_out = n_out, b->n_vars = nv, b->members = K;
    b->median = nn_alloc((size_t)n_out * nv * sizeof *b->median);
    b->q05 = nn_alloc((size_t)n_out * nv * sizeof *b->q05);
    b->q95 = nn_alloc((size_t)n_out * nv * sizeof *b->q95);
    b->alive = nn_calloc((size_t)n_out, sizeof *b->alive);
    b->width = nn_alloc((size_t)n_out * sizeof *b->width);
    b->traj = nn_alloc((size_t)K * n_out * nv * sizeof *b->traj);
    b->exceeds_at = NAN;
    for (long i = 0; i < (long)K * n_out * nv; i++) b->traj[i] = NAN;
    for (int m = 0; m < K; m++) {
        LearnedOde lo;
        learned_ode_init(&lo, lib, e->coef + (long)m * Td, e->kept + (long)m * Td);
        OdeReport rep;
        Status s2;
        double *tr = b->traj + (long)m * n_out * nv;
        int rc = ode_solve(learned_ode_rhs, &lo, nv, t0, y0, t_out, n_out, tr, NULL, opt, &rep, &s2);
        learned_ode_free(&lo);
        if (rc == ST_INPUT) {
            ensemble_bands_free(b);
            return status_set(st, ST_INPUT, "ensemble bands: %s", s2.msg);
        }
        int good = rc ? rep.n_out : n_out;
        if (rc) b->stopped++;
        for (int i = good; i < n_out; i++)
            for (int j = 0; j < nv; j++) tr[(long)i * nv + j] = NAN;
        for (int i = 0; i < good; i++) b->alive[i]++;
    }
    double *v = nn_alloc((size_t)K * sizeof *v);
    for (int i = 0; i < n_out; i++) {
        double w2 = 0;
        for (int j = 0; j < nv; j++) {
            int n = 0;
            for (int m = 0; m < K; m++) {
                double x = b->traj[((long)m * n_out + i) * nv + j];
                if (!isnan(x)) v[n++] = x;
            }
            long ij = (long)i * nv + j;
            b->median[ij] = 2 * n >= K ? ensemble_quantile(v, n, 0.5) : NAN;
            for (int k = n; k < K; k++) v[k] = -INFINITY; /* a stopped member: beyond the lower edge */
            b->q05[ij] = ensemble_quantile(v, K, 0.05);
            for (int k = 0; k < K - n; k++) v[k] = INFINITY; /* sorted: the -inf are first; now beyond the upper */
            b->q95[ij] = ensemble_quantile(v, K, 0.95);
            if (j < width_vars) {
                double w = b->q95[ij] - b->q05[ij];
                w2 += w * w;
            }
        }
        b->width[i] = isfinite(w2) ? sqrt(w2) / scale : INFINITY;
        if (isnan(b->exceeds_at) && b->width[i] > bound) b->exceeds_at = t_out[i];
    }
    nn_free(v);
    status_ok(st);
    return 0;
}
