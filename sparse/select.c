/* sparse/select.c: model selection by integrated forecasts (see select.h). */
#include "sparse/select.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "nn/mat.h"
#include "nn/par.h"
#include "sparse/thresh_lsq.h"

SelectOptions select_defaults(void) {
    SelectOptions o = {24, 0.003, 0.5, 0, 3.0, 0, 0.1, 0.05, 8, 2.0};
    return o;
}

void select_path_free(SelectPath *p) {
    if (!p) return;
    free(p->e), free(p->mask), free(p->xi);
    memset(p, 0, sizeof *p);
}

/* The nesting level of a term: polynomial degree (the constant 0), trigonometric terms max + 1. */
static int term_level(const Term *t, int max_degree) {
    if (t->kind == TERM_CONST) return 0;
    if (t->kind != TERM_MONO) return max_degree + 1;
    int deg = 0;
    for (int i = 0; i < t->n_fac; i++) deg += t->pow[i];
    return deg;
}

static int check_data(const Library *lib, const SelectData *D, Status *st) {
    if (D->n_vars != lib->n_vars || D->d != lib->spec.n_latent)
        return status_set(st, ST_INPUT, "selection: the data has %d state values and %d targets, the library %d and %d",
                          D->n_vars, D->d, lib->n_vars, lib->spec.n_latent);
    if (D->n_rec < 1 || !D->rec_start || D->rec_start[0] != 0 || D->rec_start[D->n_rec] != D->N)
        return status_set(st, ST_INPUT, "selection: recording boundaries do not cover the %ld samples", D->N);
    for (int r = 0; r < D->n_rec; r++)
        if (D->rec_start[r + 1] < D->rec_start[r])
            return status_set(st, ST_INPUT, "selection: recording %d ends before it starts", r + 1);
    if (!(D->dt > 0) || !isfinite(D->dt)) return status_set(st, ST_INPUT, "selection: time step %g must be > 0", D->dt);
    for (long i = 0; i < D->N * D->n_vars; i++)
        if (!isfinite(D->state[i])) return status_set(st, ST_INPUT, "selection: non-finite state at sample %ld", i / D->n_vars + 1);
    for (long i = 0; i < D->N * D->d; i++)
        if (!isfinite(D->target[i])) return status_set(st, ST_INPUT, "selection: non-finite target at sample %ld", i / D->d + 1);
    return 0;
}

/* The sum of squared deviations from its mean of latent component j over the data set. */
static double component_sq_dev(const SelectData *D, int j) {
    double m = 0, v = 0;
    for (long i = 0; i < D->N; i++) m += D->state[i * D->n_vars + j];
    m /= (double)D->N;
    for (long i = 0; i < D->N; i++) {
        double e = D->state[i * D->n_vars + j] - m;
        v += e * e;
    }
    return v;
}

/* Standard deviation of z (the first d state values) pooled over components, and the
 * characteristic angular frequency w_c (see select.h). */
static void data_scales(const Library *lib, const SelectData *D, double *sd, double *wc) {
    int d = D->d;
    double q = 0, tq = 0;
    for (int j = 0; j < d; j++) q += component_sq_dev(D, j);
    for (long i = 0; i < D->N * d; i++) tq += D->target[i] * D->target[i];
    *sd = sqrt(q / ((double)D->N * d));
    double ratio = *sd > 0 ? sqrt(tq / ((double)D->N * d)) / *sd : 0;
    *wc = lib->spec.order == 2 ? sqrt(ratio) : ratio;
}

static int resolve_horizon(const Library *lib, const SelectData *D, const SelectOptions *o, int *H, int *S,
                           double *sd, Status *st) {
    double wc;
    data_scales(lib, D, sd, &wc);
    long longest = 0;
    for (int r = 0; r < D->n_rec; r++)
        if (D->rec_start[r + 1] - D->rec_start[r] > longest) longest = D->rec_start[r + 1] - D->rec_start[r];
    int h = o->horizon;
    if (h == 0) {
        double per = wc > 0 ? 2 * M_PI / wc : INFINITY;
        double want = o->periods * per / D->dt;
        h = !isfinite(want) || want > (double)longest ? (int)longest : (int)ceil(want);
        if (h < 8) h = 8 < longest ? 8 : (int)longest;
    }
    if (h < 2 || h > longest)
        return status_set(st, ST_INPUT, "selection: a forecast segment of %d samples does not fit in the longest recording "
                          "(%ld samples)", h, longest);
    *H = h;
    *S = o->stride > 0 ? o->stride : (h / 2 > 0 ? h / 2 : 1);
    if (!(*sd > 0)) return status_set(st, ST_INPUT, "selection: the latent is constant over the data set");
    return 0;
}

/* The terms a law uses, ascending: those mask keeps in some equation, every term when mask is
 * NULL. act (n_terms) receives them; returns their number. */
static int law_terms(const Library *lib, const uint8_t *mask, int d, int *act) {
    int n = 0;
    for (int t = 0; t < lib->n_terms; t++) {
        int on = !mask;
        for (int j = 0; j < d && !on; j++) on = mask[(long)t * d + j] != 0;
        if (on) act[n++] = t;
    }
    return n;
}

/* f(s) for a law whose terms are act (n_act, from law_terms): ds (n_vars); theta (n_terms) work. */
static void law_rhs(const Library *lib, const double *xi, const uint8_t *mask, const int *act, int n_act,
                    const double *s, double *ds, double *theta) {
    int d = lib->spec.n_latent;
    library_eval_terms(lib, theta, s, act, n_act);
    int off = 0;
    if (lib->spec.order == 2) { /* s = (z, z'): z' first */
        for (int j = 0; j < d; j++) ds[j] = s[d + j];
        off = d;
    }
    for (int j = 0; j < d; j++) {
        double a = 0;
        for (int q = 0; q < n_act; q++) {
            int t = act[q];
            if (!mask || mask[(long)t * d + j]) a += xi[(long)t * d + j] * theta[t];
        }
        ds[off + j] = a;
    }
}

/* The standard deviation of each latent component over the data set (sdj (d)). */
static void component_scales(const SelectData *D, double *sdj) {
    for (int j = 0; j < D->d; j++) sdj[j] = sqrt(component_sq_dev(D, j) / (double)D->N);
}

/* The largest distance from 0 a forecast may reach before it counts as lost: 100 standard
 * deviations beyond every state of the data. */
static double lost_bound(const SelectData *D, double sd) {
    double bound = 0;
    for (long i = 0; i < D->N * D->n_vars; i++)
        if (fabs(D->state[i]) > bound) bound = fabs(D->state[i]);
    return bound + 100 * sd;
}

/* One segment's error: the law integrated (RK4, four steps per sample) from sample a + s0 over H
 * samples against the data. *e receives the error pooled over the components relative to sd, ej (d)
 * each component's relative to sdj[j], both capped at cap. act (n_act): the law's terms (law_terms);
 * theta (n_terms) is work. */
static void segment_error(const Library *lib, const SelectData *D, const double *xi, const uint8_t *mask,
                          const int *act, int n_act, long a, long s0, int H, double sd, const double *sdj, double cap, double bound, double *theta,
                          double *e_out, double *ej) {
    int nv = lib->n_vars, d = D->d;
    double y[4 * LIB_MAX_VARS], k1[LIB_MAX_VARS], k2[LIB_MAX_VARS], k3[LIB_MAX_VARS], k4[LIB_MAX_VARS];
    double *tmp = y + LIB_MAX_VARS;
    const int sub = 4;
    double h = D->dt / sub;
    memcpy(y, D->state + (a + s0) * nv, (size_t)nv * sizeof *y);
    double se = 0, sej[LIB_MAX_VARS] = {0};
    int lost = 0;
    for (int k = 1; k < H && !lost; k++) {
        for (int u = 0; u < sub; u++) { /* classic RK4 */
            law_rhs(lib, xi, mask, act, n_act, y, k1, theta);
            for (int i = 0; i < nv; i++) tmp[i] = y[i] + 0.5 * h * k1[i];
            law_rhs(lib, xi, mask, act, n_act, tmp, k2, theta);
            for (int i = 0; i < nv; i++) tmp[i] = y[i] + 0.5 * h * k2[i];
            law_rhs(lib, xi, mask, act, n_act, tmp, k3, theta);
            for (int i = 0; i < nv; i++) tmp[i] = y[i] + h * k3[i];
            law_rhs(lib, xi, mask, act, n_act, tmp, k4, theta);
            for (int i = 0; i < nv; i++) y[i] += h / 6 * (k1[i] + 2 * k2[i] + 2 * k3[i] + k4[i]);
        }
        for (int i = 0; i < nv; i++)
            if (!isfinite(y[i]) || fabs(y[i]) > bound) lost = 1;
        const double *ref = D->state + (a + s0 + k) * nv;
        for (int j = 0; j < d && !lost; j++) {
            double q = (y[j] - ref[j]) * (y[j] - ref[j]);
            se += q, sej[j] += q;
        }
    }
    double e = lost ? cap : sqrt(se / ((double)(H - 1) * d)) / sd;
    *e_out = e < cap ? e : cap;
    for (int j = 0; j < d; j++) {
        double q = lost || !(sdj[j] > 0) ? cap : sqrt(sej[j] / (double)(H - 1)) / sdj[j];
        ej[j] = q < cap ? q : cap;
    }
}

/* The mean segment error pooled over the components (returned), and per component in ej (d) when
 * not NULL: component j's error over a segment divided by its own standard deviation sdj[j], capped
 * like the pooled one. */
static double forecast_error(const Library *lib, const SelectData *D, const double *xi, const uint8_t *mask, int H,
                             int S, double sd, const double *sdj, double cap, double *ej, int *n_seg) {
    int d = D->d;
    double *theta = nn_alloc((size_t)lib->n_terms * sizeof *theta);
    int *act = nn_alloc((size_t)lib->n_terms * sizeof *act);
    int n_act = law_terms(lib, mask, d, act);
    double bound = lost_bound(D, sd);
    double total = 0, tj[LIB_MAX_VARS] = {0};
    int n = 0;
    for (int r = 0; r < D->n_rec; r++) {
        long a = D->rec_start[r], len = D->rec_start[r + 1] - a;
        for (long s0 = 0; s0 + H <= len; s0 += S) {
            double e, eg[LIB_MAX_VARS];
            segment_error(lib, D, xi, mask, act, n_act, a, s0, H, sd, sdj, cap, bound, theta, &e, eg);
            total += e;
            for (int j = 0; j < d; j++) tj[j] += eg[j];
            n++;
        }
    }
    nn_free(theta), nn_free(act);
    *n_seg = n;
    if (ej)
        for (int j = 0; j < d; j++) ej[j] = n ? tj[j] / n : cap;
    return n ? total / n : cap;
}

int select_forecast_error(const Library *lib, const SelectData *data, const double *xi, const uint8_t *mask,
                          const SelectOptions *opt, double *err, int *segments, Status *st) {
    int H, S, n;
    double sd;
    if (check_data(lib, data, st) || resolve_horizon(lib, data, opt, &H, &S, &sd, st)) return st->code;
    double sdj[LIB_MAX_VARS];
    component_scales(data, sdj);
    *err = forecast_error(lib, data, xi, mask, H, S, sd, sdj, opt->cap, NULL, &n);
    if (segments) *segments = n;
    return 0;
}

static int path_push(SelectPath *p, const SelectEntry *e, const uint8_t *mask, const double *xi) {
    long w = (long)p->n_terms * p->d;
    if (p->n == p->cap) {
        int cap = p->cap ? 2 * p->cap : 16;
        SelectEntry *ne = realloc(p->e, (size_t)cap * sizeof *ne);
        if (ne) p->e = ne;
        uint8_t *nm = realloc(p->mask, (size_t)cap * w);
        if (nm) p->mask = nm;
        double *nx = realloc(p->xi, (size_t)cap * w * sizeof *nx);
        if (nx) p->xi = nx;
        if (!ne || !nm || !nx) return -1;
        p->cap = cap;
    }
    p->e[p->n] = *e;
    memcpy(p->mask + p->n * w, mask, (size_t)w);
    memcpy(p->xi + p->n * w, xi, (size_t)w * sizeof *xi);
    p->n++;
    return 0;
}

/* What scoring a candidate needs. */
typedef struct {
    const Library *lib;
    const SelectData *D;
    const SelectOptions *o;
    const double *theta;        /* (N, T) the library on the data */
    double tq;                  /* sum of squared targets */
    int H, S;
    double sd;
    double sdj[LIB_MAX_VARS];   /* (d) each component's standard deviation */
    Status *st;
} Ctx;

/* The complexity of a term in the score: a monomial its degree (the constant 1), a trigonometric
 * term 2. */
static int term_complexity(const Term *t) {
    if (t->kind == TERM_CONST) return 1;
    if (t->kind != TERM_MONO) return 2;
    int deg = 0;
    for (int i = 0; i < t->n_fac; i++) deg += t->pow[i];
    return deg;
}

/* The score of a candidate (see select.h): one latent variable, (e + abs_tol) prod (1 + tol c_t);
 * several, the geometric mean over the equations of (e_j + abs_tol) prod over equation j's terms. */
static double score_of(const Library *lib, const SelectOptions *o, double forecast, const double *ej, const uint8_t *m,
                       int d) {
    double lf = 0;
    for (int j = 0; j < d; j++) {
        double f = (d == 1 ? forecast : ej[j]) + o->abs_tol;
        for (int t = 0; t < lib->n_terms; t++)
            if (m[(long)t * d + j]) f *= 1 + o->tol * term_complexity(&lib->terms[t]);
        if (d == 1) return f;
        lf += log(f);
    }
    return exp(lf / d);
}

int select_score(const Library *lib, const SelectData *data, const double *xi, const uint8_t *mask,
                 const SelectOptions *opt, double *score, double *err, Status *st) {
    int H, S, n;
    double sd;
    if (check_data(lib, data, st) || resolve_horizon(lib, data, opt, &H, &S, &sd, st)) return st->code;
    double sdj[LIB_MAX_VARS], ej[LIB_MAX_VARS];
    component_scales(data, sdj);
    double e = forecast_error(lib, data, xi, mask, H, S, sd, sdj, opt->cap, ej, &n);
    if (err) *err = e;
    *score = score_of(lib, opt, e, ej, mask, data->d);
    return 0;
}

/* Refit the active set m by least squares (x receives the coefficients), score it and append it to
 * the path unless the same set is there already. *idx: the candidate's index in the path (-1 for an
 * empty set or a failed fit). */
static int consider(Ctx *c, SelectPath *p, uint8_t *m, double *x, int level, double thr, int step, int *idx) {
    const SelectData *D = c->D;
    int T = c->lib->n_terms, d = D->d;
    long w = (long)T * d;
    *idx = -1;
    long act = 0;
    for (long i = 0; i < w; i++) act += m[i];
    if (!act) return 0;
    for (int k = 0; k < p->n; k++)
        if (!memcmp(p->mask + k * w, m, (size_t)w)) {
            *idx = k;
            return 0;
        }
    ThreshLsqOptions lo = thresh_lsq_defaults();
    lo.threshold = 0; /* a plain least-squares fit on the active set */
    lo.max_iter = 0;
    uint8_t *m2 = malloc((size_t)w);
    if (!m2) return status_set(c->st, ST_RUNTIME, "out of memory");
    Status s2;
    int rc = thresh_lsq_fit(x, m2, c->theta, D->target, D->N, T, d, m, &lo, NULL, &s2);
    free(m2);
    if (rc) return rc == ST_INPUT ? status_set(c->st, ST_INPUT, "%s", s2.msg) : 0;
    double rss = 0;
    for (long i = 0; i < D->N; i++)
        for (int j = 0; j < d; j++) {
            double a = 0;
            for (int t = 0; t < T; t++) a += c->theta[i * T + t] * x[(long)t * d + j];
            double e = a - D->target[i * d + j];
            rss += e * e;
        }
    SelectEntry e = {0};
    e.active = (int)act;
    e.level = level;
    e.threshold = thr;
    e.step = step;
    e.fit = c->tq > 0 ? sqrt(rss / c->tq) : 0;
    double n = (double)D->N * d, k = (double)act;
    e.aicc = n * log(rss / n > 1e-300 ? rss / n : 1e-300) + 2 * k + (n - k - 1 > 0 ? 2 * k * (k + 1) / (n - k - 1) : INFINITY);
    int nseg = 0;
    double ej[LIB_MAX_VARS];
    e.forecast = forecast_error(c->lib, D, x, m, c->H, c->S, c->sd, c->sdj, c->o->cap, ej, &nseg);
    e.score = score_of(c->lib, c->o, e.forecast, ej, m, d);
    p->segments = nseg;
    if (path_push(p, &e, m, x)) return status_set(c->st, ST_RUNTIME, "out of memory");
    *idx = p->n - 1;
    return 0;
}

int select_law(const Library *lib, const SelectData *D, const uint8_t *allowed, const SelectOptions *o, double *xi,
               uint8_t *mask, SelectPath *out, Status *st) {
    int T = lib->n_terms, d = D->d, nv = lib->n_vars;
    long w = (long)T * d;
    if (o->n_grid < 1 || !(o->thr_min > 0) || !(o->thr_max >= o->thr_min) || !isfinite(o->thr_max))
        return status_set(st, ST_INPUT, "selection: threshold grid of %d from %g to %g", o->n_grid, o->thr_min, o->thr_max);
    if (!(o->tol >= 0) || !(o->abs_tol >= 0) || !(o->cap > 0) || o->horizon < 0 || o->stride < 0 || o->max_steps < 0)
        return status_set(st, ST_INPUT, "selection: bad tolerances or segment settings");
    int H, S;
    double sd;
    if (check_data(lib, D, st) || resolve_horizon(lib, D, o, &H, &S, &sd, st)) return st->code;
    double *theta = malloc((size_t)D->N * T * sizeof *theta);
    uint8_t *allow = malloc((size_t)w), *m = malloc((size_t)w);
    double *x = malloc((size_t)w * sizeof *x);
    SelectPath p = {0};
    p.n_terms = T, p.d = d, p.horizon = H;
    int rc = 0;
    if (!theta || !allow || !m || !x) {
        rc = status_set(st, ST_RUNTIME, "out of memory");
        goto done;
    }
    for (long i = 0; i < D->N; i++) library_eval(lib, theta + i * T, D->state + i * nv, 1);
    int max_deg = lib->spec.degree, top = max_deg + 1;
    int have_trig = 0;
    for (int t = 0; t < T; t++) have_trig |= term_level(&lib->terms[t], max_deg) == top;
    if (!have_trig) top = max_deg;
    double tq = 0;
    for (long i = 0; i < D->N * d; i++) tq += D->target[i] * D->target[i];
    Ctx ctx = {.lib = lib, .D = D, .o = o, .theta = theta, .tq = tq, .H = H, .S = S, .sd = sd, .st = st};
    component_scales(D, ctx.sdj);
    for (int level = 1; level <= top; level++) {
        int any = 0;
        for (int t = 0; t < T; t++)
            for (int j = 0; j < d; j++) {
                int a = (!allowed || allowed[(long)t * d + j]) && term_level(&lib->terms[t], max_deg) <= level;
                allow[(long)t * d + j] = (uint8_t)a;
                any |= a;
            }
        if (!any) continue;
        for (int g = 0; g < o->n_grid; g++) {
            double thr = o->n_grid == 1 ? o->thr_min : o->thr_min * pow(o->thr_max / o->thr_min, (double)g / (o->n_grid - 1));
            ThreshLsqOptions lo = thresh_lsq_defaults();
            lo.threshold = thr;
            lo.relative = 1;
            Status s2;
            if (thresh_lsq_fit(x, m, theta, D->target, D->N, T, d, allow, &lo, NULL, &s2)) {
                if (s2.code == ST_INPUT) { rc = status_set(st, ST_INPUT, "%s", s2.msg); goto done; }
                continue;
            }
            int idx;
            if ((rc = consider(&ctx, &p, m, x, level, thr, 0, &idx))) goto done;
        }
    }
    if (p.n == 0) {
        rc = status_set(st, ST_RUNTIME, "selection: no candidate law has an active term (the targets may be all zero)");
        goto done;
    }
    int pick = 0;
    for (int c = 1; c < p.n; c++)
        if (p.e[c].score < p.e[pick].score) pick = c;
    /* stepwise: add or drop one term while the score falls */
    for (int step = 1; step <= o->max_steps; step++) {
        int best = pick;
        for (long i = 0; i < w; i++) {
            if (!(!allowed || allowed[i]) && !p.mask[pick * w + i]) continue;
            memcpy(m, p.mask + pick * w, (size_t)w);
            m[i] = !m[i];
            int idx;
            if ((rc = consider(&ctx, &p, m, x, 0, 0, step, &idx))) goto done;
            if (idx >= 0 && p.e[idx].score < p.e[best].score) best = idx;
        }
        if (best == pick) break;
        pick = best;
    }
    p.e[pick].chosen = 1;
    memcpy(xi, p.xi + pick * w, (size_t)w * sizeof *xi);
    memcpy(mask, p.mask + pick * w, (size_t)w);
    status_ok(st);
done:
    free(theta), free(allow), free(m), free(x);
    if (!rc && out) *out = p;
    else select_path_free(&p);
    return rc;
}

/* ---- the selection, bagged ------------------------------------------------------------------------ */

/* Indices 0..n-1 ordered by ascending score, ties by index (insertion sort: paths are short). */
static void order_by_score(const SelectPath *p, int *ord) {
    for (int i = 0; i < p->n; i++) {
        int k = i;
        while (k > 0 && p->e[ord[k - 1]].score > p->e[i].score) ord[k] = ord[k - 1], k--;
        ord[k] = i;
    }
}

/* What the members of select_bagged share, and where each puts its choice. */
typedef struct {
    const Library *lib;
    const SelectData *D;
    const SelectOptions *o;
    const uint8_t *pm;          /* (K, T, d) the pool's masks */
    int K, G, H;
    double sd;
    const double *sdj;
    double bound;
    const long *seg_a;          /* (G) first sample of each segment */
    const int *cnt;             /* (members, G) times each member drew each segment */
    const double *theta;        /* (N, T) the library on the data */
    double *coef;               /* (members, T, d) */
    uint8_t *kept;              /* (members, T, d) */
    int *best_of, *failed;      /* (members) the pool index chosen (-1: none; -2: no memory), failed refits */
} BagCtx;

/* Members [lo, hi): each refits every law of the pool on its drawn segments' samples, scores it on
 * those segments and keeps the best. Work of its own per call. */
static void bag_members(void *ctx, long lo, long hi) {
    BagCtx *b = ctx;
    const SelectData *D = b->D;
    int T = b->lib->n_terms, d = D->d, G = b->G, H = b->H;
    long w = (long)T * d, N = D->N;
    double *wt = malloc((size_t)N * sizeof *wt), *thw = malloc((size_t)N * T * sizeof *thw);
    double *yw = malloc((size_t)N * d * sizeof *yw), *x = malloc((size_t)w * sizeof *x);
    double *best_x = malloc((size_t)w * sizeof *best_x), *th1 = malloc((size_t)T * sizeof *th1);
    uint8_t *m2 = malloc((size_t)w);
    int *act = malloc((size_t)T * sizeof *act);
    if (!wt || !thw || !yw || !x || !best_x || !th1 || !m2 || !act) {
        for (long m = lo; m < hi; m++) b->best_of[m] = -2, b->failed[m] = 0;
        goto done;
    }
    ThreshLsqOptions lo_opt = thresh_lsq_defaults();
    lo_opt.threshold = 0; /* plain least squares on the candidate's terms, as select_law refits */
    lo_opt.max_iter = 0;
    for (long m = lo; m < hi; m++) {
        const int *cnt = b->cnt + m * G;
        memset(wt, 0, (size_t)N * sizeof *wt);
        for (int g = 0; g < G; g++)
            for (long i = 0; i < H && cnt[g]; i++) wt[b->seg_a[g] + i] += cnt[g];
        long n_rows = 0;
        for (long i = 0; i < N; i++) {
            if (!(wt[i] > 0)) continue;
            double s = sqrt(wt[i]);
            for (int t = 0; t < T; t++) thw[n_rows * T + t] = s * b->theta[i * T + t];
            for (int j = 0; j < d; j++) yw[n_rows * d + j] = s * D->target[i * d + j];
            n_rows++;
        }
        int best = -1, failed = 0;
        double best_score = INFINITY;
        for (int c = 0; c < b->K; c++) {
            const uint8_t *mc = b->pm + c * w;
            Status s2;
            if (thresh_lsq_fit(x, m2, thw, yw, n_rows, T, d, mc, &lo_opt, NULL, &s2)) {
                failed++;
                continue;
            }
            double tot = 0, tj[LIB_MAX_VARS] = {0};
            int n_act = law_terms(b->lib, mc, d, act);
            for (int g = 0; g < G; g++) {
                if (!cnt[g]) continue;
                double e, ej[LIB_MAX_VARS];
                segment_error(b->lib, D, x, mc, act, n_act, b->seg_a[g], 0, H, b->sd, b->sdj, b->o->cap, b->bound, th1, &e, ej);
                tot += cnt[g] * e;
                for (int j = 0; j < d; j++) tj[j] += cnt[g] * ej[j];
            }
            for (int j = 0; j < d; j++) tj[j] /= G;
            double sc = score_of(b->lib, b->o, tot / G, tj, mc, d);
            if (sc < best_score) best_score = sc, best = c, memcpy(best_x, x, (size_t)w * sizeof *x);
        }
        double *cm = b->coef + m * w;
        uint8_t *km = b->kept + m * w;
        memset(km, 0, (size_t)w);
        for (long i = 0; i < w; i++) cm[i] = 0;
        if (best >= 0)
            for (long i = 0; i < w; i++)
                if (b->pm[best * w + i]) km[i] = 1, cm[i] = best_x[i];
        b->best_of[m] = best, b->failed[m] = failed;
    }
done:
    free(wt), free(thw), free(yw), free(x), free(best_x), free(th1), free(m2), free(act);
}

int select_bagged(const Library *lib, const SelectData *D, const uint8_t *allowed, const SelectOptions *o,
                  const uint8_t *extra, int pool, int members, Rng *rng, double *coef, uint8_t *kept,
                  SelectBagReport *rep, Status *st) {
    memset(rep, 0, sizeof *rep);
    if (pool < 1 || members < 1)
        return status_set(st, ST_INPUT, "selection bagging: pool %d and members %d must be >= 1", pool, members);
    int T = lib->n_terms, d = D->d, nv = lib->n_vars;
    long w = (long)T * d, N = D->N;
    double *xi_sel = malloc((size_t)w * sizeof *xi_sel);
    uint8_t *m_sel = malloc((size_t)w);
    SelectPath p = {0};
    if (!xi_sel || !m_sel) {
        free(xi_sel), free(m_sel);
        return status_set(st, ST_RUNTIME, "out of memory");
    }
    int rc = select_law(lib, D, allowed, o, xi_sel, m_sel, &p, st);
    free(xi_sel);
    if (rc) {
        free(m_sel);
        return rc;
    }
    int H, S;
    double sd, sdj[LIB_MAX_VARS];
    resolve_horizon(lib, D, o, &H, &S, &sd, st); /* succeeded inside select_law */
    component_scales(D, sdj);
    double bound = lost_bound(D, sd);

    /* the pool: the best laws of the path, then extra */
    int *ord = malloc((size_t)p.n * sizeof *ord);
    int K = p.n < pool ? p.n : pool;
    uint8_t *pm = malloc((size_t)(K + 1) * w);
    int G = 0;
    for (int r = 0; r < D->n_rec; r++) {
        long len = D->rec_start[r + 1] - D->rec_start[r];
        for (long s0 = 0; s0 + H <= len; s0 += S) G++;
    }
    long *seg_a = malloc((size_t)(G > 0 ? G : 1) * sizeof *seg_a);
    int *cnt = malloc((size_t)members * (G > 0 ? G : 1) * sizeof *cnt);
    double *theta = malloc((size_t)N * T * sizeof *theta);
    int *best_of = malloc((size_t)members * sizeof *best_of), *failed = malloc((size_t)members * sizeof *failed);
    if (!ord || !pm || !seg_a || !cnt || !theta || !best_of || !failed) {
        rc = status_set(st, ST_RUNTIME, "out of memory");
        goto done;
    }
    order_by_score(&p, ord);
    for (int k = 0; k < K; k++) memcpy(pm + k * w, p.mask + (long)ord[k] * w, (size_t)w);
    rep->selected = -1, rep->extra = -1;
    for (int k = 0; k < K; k++) {
        if (!memcmp(pm + k * w, m_sel, (size_t)w)) rep->selected = k;
        if (extra && !memcmp(pm + k * w, extra, (size_t)w)) rep->extra = k;
    }
    if (extra && rep->extra < 0) {
        long act = 0;
        for (long i = 0; i < w; i++) act += extra[i] != 0;
        if (act) {
            for (long i = 0; i < w; i++) pm[K * w + i] = extra[i] != 0;
            rep->extra = K++;
        }
    }
    G = 0;
    long covered_to = 0, uncovered = 0;
    for (int r = 0; r < D->n_rec; r++) {
        long a = D->rec_start[r], len = D->rec_start[r + 1] - a;
        covered_to = 0;
        for (long s0 = 0; s0 + H <= len; s0 += S) seg_a[G++] = a + s0, covered_to = s0 + H;
        uncovered += len - covered_to;
    }
    rep->candidates = K, rep->segments = G, rep->horizon = H, rep->uncovered = uncovered;
    for (long i = 0; i < N; i++) library_eval(lib, theta + i * T, D->state + i * nv, 1);
    /* the draws first, member after member (the bits do not depend on the threads), then the
     * members in parallel, each with its own work; BLAS and LAPACK single-threaded inside */
    for (int m = 0; m < members; m++) {
        int *cm = cnt + (long)m * G;
        memset(cm, 0, (size_t)G * sizeof *cm);
        for (int k = 0; k < G; k++) cm[rng_below(rng, (uint64_t)G)]++;
    }
    BagCtx bc = {lib, D, o, pm, K, G, H, sd, sdj, bound, seg_a, cnt, theta, coef, kept, best_of, failed};
    int blas = nn_set_blas_threads(1);
    par_for(members, 1, bag_members, &bc);
    nn_set_blas_threads(blas);
    for (int m = 0; m < members; m++)
        if (best_of[m] == -2) {
            rc = status_set(st, ST_RUNTIME, "out of memory");
            goto done;
        }
    for (int m = 0; m < members; m++) {
        rep->failed_fits += failed[m];
        if (best_of[m] < 0) continue;
        rep->agree_selected += best_of[m] == rep->selected;
        rep->agree_extra += best_of[m] == rep->extra;
    }
    status_ok(st);
done:
    free(m_sel), free(ord), free(pm), free(seg_a), free(cnt), free(theta), free(best_of), free(failed);
    select_path_free(&p);
    return rc;
}
