/* sparse/canonical_select.c: the canonical law's terms chosen by the forecast score (see
 * canonical_select.h). */
#include "sparse/canonical_select.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "nn/mat.h"
#include "nn/par.h"
#include "sparse/optim.h"
#include "sparse/thresh_lsq.h"

enum { GRID = 17, FINE = 9 };
#define SPAN 3.0
#define W_SPAN_MIN 1.5
#define W_SPAN_MAX 20.0

typedef struct {
    const Library *lib;
    const SelectData *D;
    const SelectOptions *o;
    long N;
    int k, nv, T;
    double *us, *uy;            /* (N, nv), (N, k): the samples in u */
    double *vs, *vy, *theta;    /* work: the samples in v, the library on them */
    uint8_t *m2;
    double umax[CANON_MAX_K];   /* largest |u_i| over the samples: the frequencies' range */
} Ctx;

/* The variable (0..k-1) whose w scales term t, -1 for a term without trig. */
static int trig_var(const Ctx *C, int t) {
    const Term *tm = &C->lib->terms[t];
    if (tm->kind != TERM_SIN && tm->kind != TERM_COS) return -1;
    return tm->var[0] % C->k;
}

/* Fit (least squares on mask's terms, in v) and score the law at frequencies w; xv (T, k) receives
 * the coefficients in v. INFINITY when the fit fails. */
static double trial(Ctx *C, const double *w, const uint8_t *mask, double *xv, double *err) {
    int k = C->k, nv = C->nv, T = C->T;
    for (long r = 0; r < C->N; r++) {
        for (int j = 0; j < nv; j++) C->vs[r * nv + j] = w[j % k] * C->us[r * nv + j];
        for (int i = 0; i < k; i++) C->vy[r * k + i] = w[i] * C->uy[r * k + i];
    }
    library_eval(C->lib, C->theta, C->vs, C->N);
    ThreshLsqOptions lo = thresh_lsq_defaults();
    lo.threshold = 0; /* plain least squares on the law's terms, as select_law refits */
    lo.max_iter = 0;
    Status s2;
    if (thresh_lsq_fit(xv, C->m2, C->theta, C->vy, C->N, T, k, mask, &lo, NULL, &s2)) return INFINITY;
    for (long q = 0; q < (long)T * k; q++)
        if (!mask[q]) xv[q] = 0;
    SelectData Dv = *C->D;
    Dv.state = C->vs, Dv.target = C->vy;
    double sc, e;
    if (select_score(C->lib, &Dv, xv, mask, C->o, &sc, &e, &s2)) return INFINITY;
    if (err) *err = e;
    return sc;
}

/* The frequencies for mask: w (k) in: the start, out: the best found; xv the best law's
 * coefficients. Returns its score. */
static double fit_w(Ctx *C, const uint8_t *mask, double *w, double *xv, double *err) {
    int k = C->k, T = C->T;
    int has[CANON_MAX_K] = {0}, n_trig = 0;
    for (int t = 0; t < T; t++) {
        int v = trig_var(C, t);
        if (v < 0) continue;
        for (int i = 0; i < k; i++)
            if (mask[(long)t * k + i]) has[v] = 1;
    }
    for (int i = 0; i < k; i++) n_trig += has[i];
    double *x = nn_alloc((size_t)T * k * sizeof *x), e;
    double best = trial(C, w, mask, xv, err);
    for (int sweep = 0; sweep < (n_trig > 1 ? 2 : n_trig); sweep++)
        for (int i = 0; i < k; i++) {
            if (!has[i]) continue;
            double wt[CANON_MAX_K];
            memcpy(wt, w, sizeof wt);
            double c0 = log(w[i]), half = log(SPAN), at = c0;
            /* the grid, then two finer ones around the best point */
            for (int level = 0; level < 3; level++) {
                int n = level ? FINE : GRID;
                double lo = at - half, step = 2 * half / (n - 1);
                for (int g = 0; g < n; g++) {
                    wt[i] = exp(lo + step * g);
                    /* a sine whose argument spans less than 1.5 radians over the data is nearly a
                     * polynomial in disguise (u - sin(e u) / e ~ e^2 u^3 / 6); beyond 20 radians
                     * it resolves no shape the samples show */
                    if (wt[i] * C->umax[i] < W_SPAN_MIN || wt[i] * C->umax[i] > W_SPAN_MAX) continue;
                    double s = trial(C, wt, mask, x, &e);
                    if (s < best) {
                        best = s, w[i] = wt[i];
                        memcpy(xv, x, (size_t)T * k * sizeof *x);
                        if (err) *err = e;
                    }
                }
                at = log(w[i]);
                half = step;
            }
        }
    nn_free(x);
    return best;
}

/* Coefficients in v to coefficients in u: xu = xv g_t / w_i, g_t = prod w^p over a monomial's
 * variables (1 for the constant and trig terms). */
static void to_u(const Ctx *C, const double *w, const double *xv, double *xu) {
    int k = C->k;
    for (int t = 0; t < C->T; t++) {
        const Term *tm = &C->lib->terms[t];
        double g = 1;
        if (tm->kind == TERM_MONO)
            for (int f = 0; f < tm->n_fac; f++) g *= pow(w[tm->var[f] % k], tm->pow[f]);
        for (int i = 0; i < k; i++) xu[(long)t * k + i] = xv[(long)t * k + i] * g / w[i];
    }
}

/* c's relative residual per equation (in u) and in total (in z: A^-1 r_u, or r_u / g'(z) with a
 * cubic warp) for its current law. */
static void refresh_errors(Canonical *c, const Library *lib, const Ctx *C, const SelectData *D) {
    int k = c->k, T = C->T;
    double *th = nn_alloc((size_t)T * sizeof *th), Ai[CANON_MAX_K * CANON_MAX_K];
    la_inverse(Ai, c->A, k);
    double a[CANON_MAX_K] = {0}, e[CANON_MAX_K] = {0}, az = 0, ez = 0;
    for (long r = 0; r < C->N; r++) {
        canonical_eval(c, lib, th, C->us + r * C->nv, 1);
        double ru[CANON_MAX_K];
        for (int i = 0; i < k; i++) {
            double p = 0;
            for (int t = 0; t < T; t++)
                if (c->mask[(long)t * k + i]) p += c->xi[(long)t * k + i] * th[t];
            ru[i] = C->uy[r * k + i] - p;
            a[i] += C->uy[r * k + i] * C->uy[r * k + i], e[i] += ru[i] * ru[i];
        }
        for (int j = 0; j < k; j++) {
            double rz = 0;
            for (int i = 0; i < k; i++) rz += Ai[j * k + i] * ru[i];
            if (k == 1 && c->c3[0] != 0) {
                double z = D->state[r * C->nv];
                rz = ru[0] / (c->A[0] + 3 * c->c3[0] * z * z);
            }
            ez += rz * rz, az += D->target[r * k + j] * D->target[r * k + j];
        }
    }
    for (int i = 0; i < k; i++) c->err[i] = a[i] > 0 ? sqrt(e[i] / a[i]) : 0;
    c->err_total = az > 0 ? sqrt(ez / az) : 0;
    nn_free(th);
}

/* The best law of one elimination path. */
typedef struct {
    double score, forecast;
    double w[CANON_MAX_K];
    uint8_t *m;                 /* (T, k) */
    double *x;                  /* (T, k) in v */
    long n;
    double a;                   /* the cubic warp it was scored with */
} Best;

/* The samples in u for the map of c (its warp included). */
static void set_samples(Ctx *C, const Canonical *c) {
    canonical_map_state(c, C->us, C->D->state, C->N);
    canonical_map_target(c, C->uy, C->D->state, C->D->target, C->N);
    for (int i = 0; i < C->k; i++) {
        C->umax[i] = 0;
        for (long r = 0; r < C->N; r++) C->umax[i] = fmax(C->umax[i], fabs(C->us[r * C->nv + i]));
    }
}

/* Backward elimination by the score from m0 (frequencies from w0), each score times pen; the best
 * law along the way in *b (when better than b->score). Returns the laws scored. */
static int eliminate(Ctx *C, const uint8_t *m0, const double *w0, double pen, Best *b) {
    int k = C->k, T = C->T, steps = 0;
    long W = (long)T * k;
    uint8_t *cur = nn_alloc((size_t)W), *trial_m = nn_alloc((size_t)W), *step_m = nn_alloc((size_t)W);
    double *xv = nn_alloc((size_t)W * sizeof *xv), *step_x = nn_alloc((size_t)W * sizeof *step_x);
    double w[CANON_MAX_K], e;
    memcpy(cur, m0, (size_t)W);
    memcpy(w, w0, sizeof w);
    double s = pen * fit_w(C, cur, w, xv, &e);
    steps++;
    for (;;) {
        if (s < b->score) {
            b->score = s, b->forecast = e, b->n = 0;
            memcpy(b->m, cur, (size_t)W);
            memcpy(b->x, xv, (size_t)W * sizeof *xv);
            memcpy(b->w, w, sizeof w);
            for (long q = 0; q < W; q++) b->n += cur[q];
        }
        int cnt[CANON_MAX_K] = {0};
        for (int t = 0; t < T; t++)
            for (int i = 0; i < k; i++) cnt[i] += cur[(long)t * k + i];
        double step_s = INFINITY, step_e = 0, step_w[CANON_MAX_K];
        for (long q = 0; q < W; q++) {
            if (!cur[q] || cnt[q % k] < 2) continue;
            memcpy(trial_m, cur, (size_t)W);
            trial_m[q] = 0;
            double wt[CANON_MAX_K];
            memcpy(wt, w, sizeof wt);
            double st = pen * fit_w(C, trial_m, wt, xv, &e);
            steps++;
            if (st < step_s) {
                step_s = st, step_e = e;
                memcpy(step_m, trial_m, (size_t)W);
                memcpy(step_x, xv, (size_t)W * sizeof *xv);
                memcpy(step_w, wt, sizeof wt);
            }
        }
        if (!isfinite(step_s)) break;
        memcpy(cur, step_m, (size_t)W);
        memcpy(xv, step_x, (size_t)W * sizeof *xv);
        memcpy(w, step_w, sizeof w);
        s = step_s, e = step_e;
    }
    nn_free(cur), nn_free(trial_m), nn_free(step_m), nn_free(xv), nn_free(step_x);
    return steps;
}

/* 1 when u = A z + b + a z^3 is increasing over the data's z, with a margin: g' >= A / 5. */
static int warp_ok(const Canonical *c, double a, double zmax) {
    return c->A[0] + 3 * a * zmax * zmax >= 0.2 * c->A[0] && (a >= 0 || c->A[0] > 0);
}

/* The eliminations at the maps of a grid, one path each, in parallel: path g uses the warp a[g]
 * (0: the affine map) with its score times pen[g]; its best law goes to best[g], its count of laws
 * scored to steps[g]. Then, for the warped paths whose best law is not bettered by another path
 * with the same terms, the warp is refined for that law (two finer grids around a[g]: a law of few
 * terms is the one most sensitive to it), again in parallel. Each path has work of its own and a
 * Best of its own (score INFINITY at the start), so the paths are independent; the caller takes the
 * best in grid order, which is what one thread running the paths one after the other would keep. */
typedef struct {
    const Canonical *c;
    const Library *lib;
    const SelectData *D;
    const SelectOptions *o;
    const uint8_t *m0;
    const double *a, *pen;
    double zmax;                /* largest |z| over the data (warp_ok) */
    Best *best;
    int *steps;
    const int *refine;          /* the refinement's paths (phase 2) */
} PathJob;

/* A Ctx on the data with work buffers of its own (one per thread; ctx_free releases them). */
static Ctx ctx_new(const Library *lib, const SelectData *D, const SelectOptions *o, int k) {
    int nv = lib->n_vars, T = lib->n_terms;
    long N = D->N;
    Ctx C = {lib, D, o, N, k, nv, T, NULL, NULL, NULL, NULL, NULL, NULL, {0}};
    C.us = nn_alloc((size_t)N * nv * sizeof *C.us);
    C.uy = nn_alloc((size_t)N * k * sizeof *C.uy);
    C.vs = nn_alloc((size_t)N * nv * sizeof *C.vs);
    C.vy = nn_alloc((size_t)N * k * sizeof *C.vy);
    C.theta = nn_alloc((size_t)N * T * sizeof *C.theta);
    C.m2 = nn_alloc((size_t)T * k);
    return C;
}

static void ctx_free(Ctx *C) {
    nn_free(C->us), nn_free(C->uy), nn_free(C->vs), nn_free(C->vy), nn_free(C->theta), nn_free(C->m2);
}

static void path_eliminate(void *ctx, long lo, long hi) {
    PathJob *J = ctx;
    Ctx C = ctx_new(J->lib, J->D, J->o, J->c->k);
    for (long g = lo; g < hi; g++) {
        Canonical cw = *J->c; /* shares c's arrays, which map_* do not read */
        cw.c3[0] = J->a[g];
        set_samples(&C, &cw);
        J->steps[g] = eliminate(&C, J->m0, J->c->w, J->pen[g], &J->best[g]);
        J->best[g].a = J->a[g];
    }
    ctx_free(&C);
}

static void path_refine(void *ctx, long lo, long hi) {
    PathJob *J = ctx;
    Ctx C = ctx_new(J->lib, J->D, J->o, J->c->k);
    long W = (long)C.T * C.k;
    double *xv = nn_alloc((size_t)W * sizeof *xv), e;
    for (long i = lo; i < hi; i++) {
        int g = J->refine[i];
        Best *b = &J->best[g];
        Canonical cw = *J->c;
        double half = 0.5 * fabs(J->a[g]);
        for (int level = 0; level < 2; level++, half /= 4) {
            double centre = b->a;
            for (int q = -4; q <= 4; q++) {
                cw.c3[0] = centre + half * q / 4;
                if (q == 0 || cw.c3[0] == 0 || !warp_ok(J->c, cw.c3[0], J->zmax)) continue;
                set_samples(&C, &cw);
                double wt[CANON_MAX_K];
                memcpy(wt, b->w, sizeof wt);
                double sc = J->pen[g] * fit_w(&C, b->m, wt, xv, &e);
                J->steps[g]++;
                if (sc < b->score) {
                    b->score = sc, b->forecast = e, b->a = cw.c3[0];
                    memcpy(b->x, xv, (size_t)W * sizeof *xv);
                    memcpy(b->w, wt, sizeof wt);
                }
            }
        }
    }
    nn_free(xv);
    ctx_free(&C);
}

int canonical_select(Canonical *c, const Library *lib, const SelectData *data, const SelectOptions *opt,
                     CanonSelectReport *rep, Status *st) {
    memset(rep, 0, sizeof *rep);
    rep->active_start = c->active;
    if (c->status != CANON_FOUND && c->status != CANON_UNCHANGED) {
        status_ok(st);
        return 0;
    }
    int k = c->k, nv = lib->n_vars, T = lib->n_terms;
    long N = data->N, W = (long)T * k;
    if (data->d != k || data->n_vars != nv || T != c->n_terms)
        return status_set(st, ST_INPUT, "canonical selection: the data has %d state values and %d targets, the law %d and %d",
                          data->n_vars, data->d, nv, k);
    Ctx C = ctx_new(lib, data, opt, k);
    Canonical cw = *c; /* the map with a trial warp (shares c's arrays, which map_* do not read) */
    cw.c3[0] = 0;
    set_samples(&C, &cw);
    uint8_t *m0 = nn_alloc((size_t)W);
    double *xv = nn_alloc((size_t)W * sizeof *xv), e;
    Best b = {INFINITY, 0, {0}, nn_alloc((size_t)W), nn_alloc((size_t)W * sizeof(double)), 0, 0};
    for (long q = 0; q < W; q++) m0[q] = c->mask[q] != 0;
    int rc = 0;
    double s0 = trial(&C, c->w, m0, xv, &e);
    if (!isfinite(s0)) {
        /* the selection refuses the data (say, a segment longer than every recording): say why */
        double sc;
        rc = select_score(lib, data, c->xi, m0, opt, &sc, NULL, st);
        if (!rc) rc = status_set(st, ST_RUNTIME, "canonical selection: the canonical law could not be refitted");
        goto done;
    }
    rep->score_start = s0;
    /* path 0: the map as found; one latent variable: the cubic warp, a coarse grid of a z_rms^2 with
     * an elimination at each, then the warp refined for the paths' laws (PathJob above); the warp
     * costs what a cubic term costs */
    static const double R[] = {-0.15, -0.11, -0.08, -0.06, -0.04, -0.03, -0.02, -0.015, -0.01, -0.0075, -0.005, -0.0025,
                               0.0025, 0.005, 0.0075, 0.01, 0.015, 0.02, 0.03, 0.04, 0.06, 0.08, 0.11, 0.15};
    enum { NR = sizeof R / sizeof R[0] };
    double zq = 0, zmax = 0;
    for (long r = 0; k == 1 && r < N; r++) {
        double z = data->state[r * nv];
        zq += z * z, zmax = fmax(zmax, fabs(z));
    }
    double zr2 = zq / (double)N, wpen = 1 + 3 * opt->tol;
    double pa[1 + NR] = {0}, ppen[1 + NR] = {1};
    int n_path = 1;
    for (int g = 0; k == 1 && zr2 > 0 && g < NR; g++)
        if (warp_ok(c, R[g] / zr2, zmax)) pa[n_path] = R[g] / zr2, ppen[n_path++] = wpen;
    Best pb[1 + NR];
    int psteps[1 + NR];
    for (int g = 0; g < n_path; g++)
        pb[g] = (Best){INFINITY, 0, {0}, nn_alloc((size_t)W), nn_alloc((size_t)W * sizeof(double)), 0, 0};
    int refine[1 + NR], n_refine = 0;
    PathJob job = {c, lib, data, opt, m0, pa, ppen, zmax, pb, psteps, refine};
    int blas = nn_set_blas_threads(1);
    par_for(n_path, 1, path_eliminate, &job);
    for (int g = 1; g < n_path; g++) {
        int beaten = !isfinite(pb[g].score);
        for (int h = 1; h < n_path && !beaten; h++)
            beaten = h != g && !memcmp(pb[h].m, pb[g].m, (size_t)W) &&
                     (pb[h].score < pb[g].score || (pb[h].score == pb[g].score && h < g));
        if (!beaten) refine[n_refine++] = g;
    }
    par_for(n_refine, 1, path_refine, &job);
    nn_set_blas_threads(blas);
    double best_a = 0;
    for (int g = 0; g < n_path; g++) {
        rep->steps += psteps[g];
        if (pb[g].score < b.score) {
            b.score = pb[g].score, b.forecast = pb[g].forecast, b.n = pb[g].n, best_a = pb[g].a;
            memcpy(b.m, pb[g].m, (size_t)W);
            memcpy(b.x, pb[g].x, (size_t)W * sizeof(double));
            memcpy(b.w, pb[g].w, sizeof b.w);
        }
        nn_free(pb[g].m), nn_free(pb[g].x);
    }
    rep->score = b.score, rep->forecast = b.forecast, rep->warp = best_a;
    if (b.n < c->active) {
        cw.c3[0] = best_a;
        set_samples(&C, &cw);
        to_u(&C, b.w, b.x, c->xi);
        memcpy(c->mask, b.m, (size_t)W);
        memcpy(c->w, b.w, sizeof c->w);
        if (k == 1) c->c3[0] = best_a;
        c->active = b.n;
        refresh_errors(c, lib, &C, data);
        /* fewer terms than c's law, so fewer than the learned law's */
        snprintf(c->note, sizeof c->note, "%ld terms instead of %ld, chosen by the forecast score%s%s", c->active,
                 c->active_raw, best_a != 0 ? " with a cubic warp of the map" : "",
                 c->status == CANON_FOUND || best_a != 0 ? "" : " (the learned coordinates)");
        c->status = CANON_FOUND;
        rep->changed = 1;
    }
    status_ok(st);
done:
    ctx_free(&C);
    nn_free(m0), nn_free(xv), nn_free(b.m), nn_free(b.x);
    return rc;
}
