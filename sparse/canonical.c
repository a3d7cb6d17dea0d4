/* sparse/canonical.c: the canonical-form search (see canonical.h and docs/canonical.md).
 *
 * Why this search. The number of terms is a count, so no single smooth objective finds it; and the
 * affine maps of k variables form a space of k^2 + k dimensions whose interesting points (where
 * many coefficients vanish at once) are isolated. The search therefore combines:
 *   - structured starts that are right for common cases: the learned coordinates, and at each fixed
 *     point of the law the modal (real Jordan) coordinates of its linearisation, which are the
 *     sparsest form of a linear law with distinct real eigenvalues;
 *   - seeded random starts, each taken down a smoothed count of the terms of highest degree by BFGS:
 *     those terms do not depend on the offset b, so the first stage searches A alone (for Lorenz's
 *     system about one start in four reaches the two quadratic terms of the published form);
 *   - for a found A, offsets b that zero whole coefficients: the fixed points of the law (no constant
 *     terms) and the solutions of k of the coefficients of the next lower degree, which are affine
 *     in b (the classical shift that removes the z^2 term of a cubic is one of them);
 *   - a greedy descent in the count with exact zeros: force one more coefficient to zero by
 *     Levenberg-Marquardt on the exactly transformed coefficients; of the smallest few, take the one
 *     whose law refitted on the samples stays nearest its reference (a choice that does not depend
 *     on the tolerance, so a looser tolerance follows the same path and stops later), while that
 *     law is within the tolerance. This is also what makes the result precise (a smoothed
 *     objective only comes near the zeros). Every law on the way is a candidate, and every
 *     candidate is refitted on every sample: the sparsest within the tolerance there is reported.
 * Everything is deterministic: the random starts come from a seeded generator. */
#include "sparse/canonical.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cblas.h>

#include "nn/rng.h"
#include "sparse/equation.h"
#include "sparse/optim.h"
#include "sparse/polymap.h"
#include "sparse/thresh_lsq.h"

#define KMAX CANON_MAX_K
#define MAX_FIXED 8        /* fixed points kept */
#define N_CONTRIB 256      /* samples for the size of each term in the exact objective */
#define TRIG_GRID 160      /* frequencies scanned per variable */
#define GREEDY_TRIES 6     /* coefficients tried per greedy step, smallest first */
#define BCAND_MAX 2000     /* offset systems tried per map in stage 2 */
#define ZERO_PATTERN 0.01  /* relative contribution below which a coefficient starts as zero */

CanonOptions canon_defaults(void) {
    CanonOptions o = {0.05, 1e3, 1e-6, 12, 5000, 1};
    return o;
}

const char *canon_status_name(CanonStatus s) {
    static const char *names[] = {"found", "unchanged", "nothing", "skipped"};
    return (unsigned)s < 4 ? names[s] : "unknown";
}

/* ---- the problem ----------------------------------------------------------------------------- */

typedef struct {
    double A[KMAX * KMAX], b[KMAX], w[KMAX];
} Map;

typedef struct {
    const Library *lib;
    const CanonOptions *opt;
    int k, order, nv, p, trig, top;
    double *xi;              /* (p, k) the learned law, masked */
    uint8_t *raw_on;         /* (p, k) its active terms */
    long raw_active;
    long N;
    const double *s, *y;     /* (N, nv), (N, k) every sample */
    double *rz;              /* (N, k) the learned law's residual */
    long Ns;
    double *ss, *ys, *rs;    /* (Ns, nv), (Ns, k), (Ns, k): the search samples */
    double zmean[KMAX], zstd[KMAX], corr[KMAX * KMAX];
    double L[KMAX * KMAX], Li[KMAX * KMAX];   /* Cholesky factor of the covariance of z, its inverse */
    double yscale;           /* rms of the target */
    double fixed[MAX_FIXED][KMAX];
    int n_fixed;
    /* sample fits on the search samples */
    double *sig, *theta, *thtmp, *yu, *ru, *G, *g, *cn;   /* (Ns, nv) (Ns, p) (p) (Ns, k) (Ns, k) (p, p) (p, k) (p) */
    /* the polynomial search */
    int has_pb, nb, nA;
    PolyBasis pb;
    int *lib2b;              /* (p) basis row of each library term */
    uint8_t *inlib;          /* (nb) 1 when basis row r is a term of the library */
    long Nc;
    double *sig_c, *th_c, *C, *K, *XA, *pred;   /* (Nc, nv) (Nc, nb) (nb, k) (nb, k) (p, k) (Nc, k) */
    int obj_kind;            /* stage 1: 0 sqrt(K^2 + eps^2), 1 log(1 + K^2 / eps^2) */
    double eps;
    uint8_t *off;            /* (nb, k) stage 3: coefficients forced to zero */
    uint8_t *top_off;        /* (nb, k) stage 1 polish: top-degree coefficients forced to zero */
    int self_term[KMAX];     /* library index of the monomial z_i (-1 when absent) */
    int soft;                /* stage 1: the condition bound is a penalty, not a wall */
    long vp_rows;            /* search samples the variable projection uses */
    double *sigs;            /* (starts, nb k) signatures of the stage-1 results */
    int n_sigs;
} Prob;

static void prob_free(Prob *P) {
    void *ptrs[] = {P->xi, P->raw_on, P->rz, P->ss, P->ys, P->rs, P->sig, P->theta, P->thtmp, P->yu, P->ru,
                    P->G, P->g, P->cn, P->lib2b, P->inlib, P->sig_c, P->th_c, P->C, P->K, P->XA, P->pred,
                    P->off, P->top_off, P->sigs};
    for (size_t i = 0; i < sizeof ptrs / sizeof ptrs[0]; i++)
        if (ptrs[i]) nn_free(ptrs[i]);
    if (P->has_pb) polybasis_free(&P->pb);
    memset(P, 0, sizeof *P);
}

/* Learned prediction Theta(s) xi at one state (theta: (p) work). */
static void learned_rhs(const Prob *P, const double *s, double *theta, double *out) {
    library_eval(P->lib, theta, s, 1);
    for (int j = 0; j < P->k; j++) {
        double acc = 0;
        for (int t = 0; t < P->p; t++) acc += theta[t] * P->xi[(long)t * P->k + j];
        out[j] = acc;
    }
}

/* ---- maps ------------------------------------------------------------------------------------ */

static void map_identity(Map *m, int k) {
    memset(m, 0, sizeof *m);
    for (int i = 0; i < k; i++) m->A[i * k + i] = 1.0, m->w[i] = 1.0;
}

/* sigma (B, nv) = (A z + b, A z') of s (B, nv). */
static void map_state(int k, int order, const Map *m, double *sig, const double *s, long B) {
    int nv = k * order;
    for (long r = 0; r < B; r++) {
        const double *x = s + r * nv;
        double *o = sig + r * nv;
        for (int blk = 0; blk < order; blk++)
            for (int i = 0; i < k; i++) {
                double acc = blk ? 0.0 : m->b[i];
                for (int j = 0; j < k; j++) acc += m->A[i * k + j] * x[blk * k + j];
                o[blk * k + i] = acc;
            }
    }
}

/* yu (B, k) = y (B, k) A^T. */
static void map_target(int k, const Map *m, double *yu, const double *y, long B) {
    for (long r = 0; r < B; r++)
        for (int i = 0; i < k; i++) {
            double acc = 0;
            for (int j = 0; j < k; j++) acc += m->A[i * k + j] * y[r * k + j];
            yu[r * k + i] = acc;
        }
}

/* theta (B, p) = the library at sigma, trig terms of variable v at w[v mod k] sigma_v. tmp (p). */
static void eval_terms(const Library *lib, int k, const double *w, double *theta, const double *sig, long B,
                       double *tmp) {
    library_eval(lib, theta, sig, B);
    int trig = 0;
    for (int t = 0; t < lib->n_terms && !trig; t++) trig = lib->terms[t].kind == TERM_SIN || lib->terms[t].kind == TERM_COS;
    if (!trig) return;
    int nv = lib->n_vars;
    double sw[LIB_MAX_VARS];
    for (long r = 0; r < B; r++) {
        for (int v = 0; v < nv; v++) sw[v] = sig[r * nv + v] * w[v % k];
        library_eval(lib, tmp, sw, 1);
        for (int t = 0; t < lib->n_terms; t++)
            if (lib->terms[t].kind == TERM_SIN || lib->terms[t].kind == TERM_COS) theta[r * lib->n_terms + t] = tmp[t];
    }
}

/* Condition number of A between standardised coordinates: D_u^-1 A D_z, D = standard deviations. */
static double map_cond(const Prob *P, const double *A) {
    int k = P->k;
    double At[KMAX * KMAX];
    for (int i = 0; i < k; i++) {
        double su = 0;   /* var(u_i) = (A D_z)_i corr (A D_z)_i^T */
        for (int a = 0; a < k; a++)
            for (int c = 0; c < k; c++)
                su += A[i * k + a] * P->zstd[a] * P->corr[a * k + c] * A[i * k + c] * P->zstd[c];
        su = sqrt(su > 0 ? su : 0);
        for (int j = 0; j < k; j++) At[i * k + j] = su > 0 ? A[i * k + j] * P->zstd[j] / su : 0.0;
    }
    return k == 1 ? (At[0] != 0 && isfinite(At[0]) ? 1.0 : HUGE_VAL) : la_cond(At, k);
}

/* ---- least squares on the samples ------------------------------------------------------------ */

/* Cholesky solve of a (q, q) (overwritten) c = rhs; -1 when not positive definite. */
static int chol_solve(double *a, double *c, int q) {
    for (int j = 0; j < q; j++) {
        double d = a[j * q + j];
        for (int l = 0; l < j; l++) d -= a[j * q + l] * a[j * q + l];
        if (!(d > 0)) return -1;
        d = sqrt(d);
        a[j * q + j] = d;
        for (int i = j + 1; i < q; i++) {
            double v = a[i * q + j];
            for (int l = 0; l < j; l++) v -= a[i * q + l] * a[j * q + l];
            a[i * q + j] = v / d;
        }
    }
    for (int i = 0; i < q; i++) {
        double v = c[i];
        for (int l = 0; l < i; l++) v -= a[i * q + l] * c[l];
        c[i] = v / a[i * q + i];
    }
    for (int i = q - 1; i >= 0; i--) {
        double v = c[i];
        for (int l = i + 1; l < q; l++) v -= a[l * q + i] * c[l];
        c[i] = v / a[i * q + i];
    }
    return 0;
}

/* The normalised Gram matrix of the search samples under map m: P->G (p, p), P->g (p, k),
 * P->cn (p) column norms, yy (k) and the learned law's residual norms rr (k), both squared. */
static void gram_build_n(Prob *P, const Map *m, double *yy, double *rr, long Ns) {
    int k = P->k, p = P->p;
    map_state(k, P->order, m, P->sig, P->ss, Ns);
    if (P->has_pb) {   /* polynomial library: the basis by products, then the library's columns */
        double *tb = P->th_c;   /* (Nc, nb) work, reused in chunks */
        for (long r0 = 0; r0 < Ns; r0 += P->Nc) {
            long nr = Ns - r0 < P->Nc ? Ns - r0 : P->Nc;
            polybasis_eval(&P->pb, tb, P->sig + r0 * P->nv, nr);
            for (long r = 0; r < nr; r++)
                for (int t = 0; t < p; t++) P->theta[(r0 + r) * p + t] = tb[r * P->nb + P->lib2b[t]];
        }
    } else {
        eval_terms(P->lib, k, m->w, P->theta, P->sig, Ns, P->thtmp);
    }
    map_target(k, m, P->yu, P->ys, Ns);
    map_target(k, m, P->ru, P->rs, Ns);
    for (int t = 0; t < p; t++) {
        double s = 0;
        for (long r = 0; r < Ns; r++) s += P->theta[r * p + t] * P->theta[r * p + t];
        P->cn[t] = s > 0 && isfinite(s) ? sqrt(s) : 1.0;
    }
    for (long r = 0; r < Ns; r++)
        for (int t = 0; t < p; t++) P->theta[r * p + t] /= P->cn[t];
    cblas_dsyrk(CblasRowMajor, CblasUpper, CblasTrans, p, (int)Ns, 1.0, P->theta, p, 0.0, P->G, p);
    for (int a = 0; a < p; a++)
        for (int c = 0; c < a; c++) P->G[a * p + c] = P->G[c * p + a];
    cblas_dgemm(CblasRowMajor, CblasTrans, CblasNoTrans, p, k, (int)Ns, 1.0, P->theta, p, P->yu, k, 0.0, P->g, k);
    for (int i = 0; i < k; i++) {
        double a = 0, b = 0;
        for (long r = 0; r < Ns; r++) a += P->yu[r * k + i] * P->yu[r * k + i], b += P->ru[r * k + i] * P->ru[r * k + i];
        yy[i] = a;
        rr[i] = b;
    }
}

static void gram_build(Prob *P, const Map *m, double *yy, double *rr) { gram_build_n(P, m, yy, rr, P->Ns); }

/* Is a relative residual e acceptable against the learned law's e0? */
static int within(const Prob *P, double e, double e0) {
    return e <= (1 + P->opt->tolerance) * e0 + P->opt->err_floor;
}

/* Least squares of equation i on the terms in idx (q) from the Gram: normalised coefficients into
 * c (q), returns the squared relative residual (or HUGE_VAL when singular). a: (q, q) work. */
static double gram_solve(const Prob *P, int i, const int *idx, int q, double yy, double *c, double *a) {
    int p = P->p, k = P->k;
    if (yy <= 0) return 0;
    if (q == 0) return 1;
    for (int u = 0; u < q; u++) {
        for (int v = 0; v < q; v++) a[u * q + v] = P->G[idx[u] * p + idx[v]];
        a[u * q + u] += 1e-12;
        c[u] = P->g[idx[u] * k + i];
    }
    if (chol_solve(a, c, q)) return HUGE_VAL;
    double res = yy;
    for (int u = 0; u < q; u++) {
        res -= 2 * c[u] * P->g[idx[u] * k + i];
        for (int v = 0; v < q; v++) res += c[u] * c[v] * P->G[idx[u] * p + idx[v]];
    }
    return (res > 0 ? res : 0) / yy;
}

/* The reference error of equation i: the better of the learned law's fit (rr) and the fit of every
 * term of the library in the same coordinates (from the Gram), relative. A term that matters in the
 * new coordinates is thus kept even when the learned law was a poorer fit. idx, c, a: work. */
static double reference_err(const Prob *P, int i, double yy, double rr, int *idx, double *c, double *a) {
    if (!(yy > 0)) return 0;
    for (int t = 0; t < P->p; t++) idx[t] = t;
    double full = sqrt(gram_solve(P, i, idx, P->p, yy, c, a));
    double raw = sqrt(rr / yy);
    return full < raw ? full : raw;
}

/* Fit on the search samples with the terms in support (p, k); per-equation relative errors err and
 * the reference errors ref (k). Returns 1 when every equation is within the tolerance. */
static int fit_support(Prob *P, const Map *m, const uint8_t *support, double *err, double *ref) {
    int p = P->p, k = P->k;
    double yy[KMAX], rr[KMAX];
    gram_build(P, m, yy, rr);
    int *idx = nn_alloc((size_t)p * sizeof *idx);
    double *c = nn_alloc((size_t)p * sizeof *c), *a = nn_alloc((size_t)p * p * sizeof *a);
    int ok = 1;
    for (int i = 0; i < k; i++) {
        ref[i] = reference_err(P, i, yy[i], rr[i], idx, c, a);
        int q = 0;
        for (int t = 0; t < p; t++)
            if (support[t * k + i]) idx[q++] = t;
        double e2 = gram_solve(P, i, idx, q, yy[i], c, a);
        err[i] = sqrt(e2);
        if (!within(P, err[i], ref[i])) ok = 0;
    }
    nn_free(idx), nn_free(c), nn_free(a);
    return ok;
}

/* Backward elimination on the Gram of gram_build: per equation, drop the term whose removal
 * raises the residual least, while the law stays within the tolerance. support (p, k) out; returns
 * the number of terms, or -1 when even all the terms are not within the tolerance. sum_err gets
 * the sum of the relative errors. */
static long backward_elim(Prob *P, const double *yy, const double *rr, uint8_t *support, double *sum_err) {
    int p = P->p, k = P->k;
    int *idx = nn_alloc((size_t)p * sizeof *idx);
    double *c = nn_alloc((size_t)p * sizeof *c), *a = nn_alloc((size_t)p * p * sizeof *a);
    double *inv = nn_alloc((size_t)p * p * sizeof *inv), *gs = nn_alloc((size_t)p * p * sizeof *gs);
    long total = 0;
    *sum_err = 0;
    for (int i = 0; i < k && total >= 0; i++) {
        double e0 = reference_err(P, i, yy[i], rr[i], idx, c, a);
        int q = 0;
        for (int t = 0; t < p; t++) idx[q++] = t;
        double e2 = gram_solve(P, i, idx, q, yy[i], c, a);
        if (!within(P, sqrt(e2), e0)) {
            total = -1;
            break;
        }
        for (;;) {
            /* the cost of dropping term u is c_u^2 / (G_S^-1)_uu (normalised units) */
            for (int u = 0; u < q; u++) {
                for (int v = 0; v < q; v++) gs[u * q + v] = P->G[idx[u] * p + idx[v]];
                gs[u * q + u] += 1e-12;
            }
            if (q == 0 || la_inverse(inv, gs, q)) break;
            int best = -1;
            double bcost = HUGE_VAL;
            for (int u = 0; u < q; u++) {
                double cost = inv[u * q + u] > 0 ? c[u] * c[u] / inv[u * q + u] : HUGE_VAL;
                if (cost < bcost) bcost = cost, best = u;
            }
            if (best < 0) break;
            int removed = idx[best];
            memmove(idx + best, idx + best + 1, (size_t)(q - best - 1) * sizeof *idx);
            double ne2 = gram_solve(P, i, idx, q - 1, yy[i], c, a);
            if (!within(P, sqrt(ne2), e0)) {   /* put it back and stop: the last acceptable set */
                memmove(idx + best + 1, idx + best, (size_t)(q - best - 1) * sizeof *idx);
                idx[best] = removed;
                e2 = gram_solve(P, i, idx, q, yy[i], c, a);
                break;
            }
            q--;
            e2 = ne2;
        }
        for (int t = 0; t < p; t++) support[t * k + i] = 0;
        for (int u = 0; u < q; u++) support[idx[u] * k + i] = 1;
        total += q;
        *sum_err += sqrt(e2);
    }
    nn_free(idx), nn_free(c), nn_free(a), nn_free(inv), nn_free(gs);
    return total;
}

/* ---- fixed points of the learned law --------------------------------------------------------- */

/* F(z) = the learned law at positions z (velocities 0) and its Jacobian J (k, k), J[i, j] = dF_i/dz_j. */
static void law_and_jacobian(const Prob *P, const double *z, double *F, double *J, double *theta, double *dth) {
    int k = P->k, nv = P->nv, p = P->p;
    double s[LIB_MAX_VARS] = {0}, ds[LIB_MAX_VARS];
    for (int i = 0; i < k; i++) s[i] = z[i];
    learned_rhs(P, s, theta, F);
    if (!J) return;
    for (int i = 0; i < k; i++) {
        for (int t = 0; t < p; t++) dth[t] = P->xi[(long)t * k + i];
        for (int v = 0; v < nv; v++) ds[v] = 0;
        library_grad(P->lib, ds, dth, s, 1);
        for (int j = 0; j < k; j++) J[i * k + j] = ds[j];
    }
}

/* Newton's method from the mean and from evenly spaced samples; keeps distinct roots inside ten
 * standard deviations of the data (at most MAX_FIXED). */
static void find_fixed_points(Prob *P) {
    int k = P->k, p = P->p;
    double *theta = nn_alloc((size_t)p * sizeof *theta), *dth = nn_alloc((size_t)p * sizeof *dth);
    double z[KMAX], zn[KMAX], F[KMAX], Fn[KMAX], J[KMAX * KMAX], d[KMAX];
    const int n_starts = 25;
    P->n_fixed = 0;
    for (int st = 0; st < n_starts && P->n_fixed < MAX_FIXED; st++) {
        if (st == 0) memcpy(z, P->zmean, (size_t)k * sizeof *z);
        else {
            long r = (long)(st - 1) * P->Ns / (n_starts - 1);
            for (int i = 0; i < k; i++) z[i] = P->ss[r * P->nv + i];
        }
        int conv = 0;
        for (int it = 0; it < 60 && !conv; it++) {
            law_and_jacobian(P, z, F, J, theta, dth);
            double f0 = 0;
            for (int i = 0; i < k; i++) f0 += F[i] * F[i], d[i] = -F[i];
            if (sqrt(f0) <= 1e-11 * P->yscale) {
                conv = 1;
                break;
            }
            if (la_solve(J, d, k)) break;
            double a = 1;
            int better = 0;
            for (int ls = 0; ls < 30 && !better; ls++, a *= 0.5) {
                for (int i = 0; i < k; i++) zn[i] = z[i] + a * d[i];
                law_and_jacobian(P, zn, Fn, NULL, theta, dth);
                double f1 = 0;
                for (int i = 0; i < k; i++) f1 += Fn[i] * Fn[i];
                if (isfinite(f1) && f1 < f0) better = 1;
            }
            if (!better) break;
            memcpy(z, zn, (size_t)k * sizeof *z);
        }
        if (!conv) continue;
        int inside = 1, dup = 0;
        for (int i = 0; i < k; i++) inside &= fabs(z[i] - P->zmean[i]) <= 10 * P->zstd[i];
        for (int f = 0; f < P->n_fixed && !dup; f++) {
            double dd = 0;
            for (int i = 0; i < k; i++) dd += pow((z[i] - P->fixed[f][i]) / P->zstd[i], 2);
            dup = sqrt(dd) < 1e-6;
        }
        if (inside && !dup) memcpy(P->fixed[P->n_fixed++], z, (size_t)k * sizeof *z);
    }
    nn_free(theta);
    nn_free(dth);
}

/* Modal coordinates at fixed point f: the rows of V^-1, V the real eigenvectors of the Jacobian
 * (a complex pair gives its real and imaginary parts: the real Jordan form). 0 or -1. */
static int modal_map(Prob *P, int f, Map *m) {
    int k = P->k, p = P->p;
    double F[KMAX], J[KMAX * KMAX], re[KMAX], im[KMAX], V[KMAX * KMAX];
    double *theta = nn_alloc((size_t)p * sizeof *theta), *dth = nn_alloc((size_t)p * sizeof *dth);
    law_and_jacobian(P, P->fixed[f], F, J, theta, dth);
    nn_free(theta);
    nn_free(dth);
    if (la_eig(re, im, V, J, k)) return -1;
    map_identity(m, k);
    if (la_inverse(m->A, V, k)) return -1;
    for (int i = 0; i < k; i++) {
        double acc = 0;
        for (int j = 0; j < k; j++) acc -= m->A[i * k + j] * P->fixed[f][j];
        m->b[i] = acc;
    }
    for (int i = 0; i < k * k; i++)
        if (!isfinite(m->A[i])) return -1;
    return 0;
}

/* ---- the exact objective (polynomial libraries) ---------------------------------------------- */

/* x -> map. The search works in whitened positions: w = L^-1 (z - mean), L the Cholesky factor of
 * the covariance of z, so that the data are isotropic whatever the learned coordinates (random
 * starts then cover the directions evenly, and nearly dependent learned variables do not squeeze the
 * landscape). A = rows of x (k, k) normalised to unit length, times L^-1: each u_i has unit
 * variance. b = x[nA..] when with_b, else the centring offset -A mean. Returns -1 when the map is
 * singular or above the condition bound. For k = 1, A = 1 / std and x holds b alone. */
static int x_to_map(const Prob *P, const double *x, int with_b, Map *m) {
    int k = P->k;
    map_identity(m, k);
    if (k == 1) {
        m->A[0] = 1.0 / P->zstd[0];
    } else {
        for (int i = 0; i < k; i++) {
            double nr = 0;
            for (int j = 0; j < k; j++) nr += x[i * k + j] * x[i * k + j];
            nr = sqrt(nr);
            if (!(nr > 0) || !isfinite(nr)) return -1;
            for (int j = 0; j < k; j++) {
                double acc = 0;
                for (int l = 0; l < k; l++) acc += x[i * k + l] * P->Li[l * k + j];
                m->A[i * k + j] = acc / nr;
            }
        }
        double c = map_cond(P, m->A);
        if (!isfinite(c) || (!P->soft && !(c <= P->opt->cond_max))) return -1;
    }
    for (int i = 0; i < k; i++) {
        if (with_b) {
            m->b[i] = x[P->nA + i];
        } else {
            double acc = 0;
            for (int j = 0; j < k; j++) acc -= m->A[i * k + j] * P->zmean[j];
            m->b[i] = acc;
        }
    }
    return 0;
}

/* map -> x (the inverse of x_to_map with b): rows of A L scaled to unit length, b with them. */
static void map_to_x(const Prob *P, const Map *m, double *x) {
    int k = P->k;
    for (int i = 0; i < k; i++) {
        double row[KMAX], nr = 0;
        for (int j = 0; j < k; j++) {
            double acc = 0;
            if (k == 1) acc = m->A[0] * P->zstd[0];
            else
                for (int l = 0; l < k; l++) acc += m->A[i * k + l] * P->L[l * k + j];
            row[j] = acc;
            nr += acc * acc;
        }
        nr = sqrt(nr);
        if (!(nr > 0)) nr = 1;
        if (k > 1)
            for (int j = 0; j < k; j++) x[i * k + j] = row[j] / nr;
        /* the normalised variable is u_i / |row|; for k = 1 x_to_map also fixes the sign (+) */
        double sgn = k == 1 && m->A[0] < 0 ? -1.0 : 1.0;
        x[P->nA + i] = sgn * m->b[i] / nr;
    }
}

/* Exactly transformed coefficients of map m: P->C (nb, k), and their relative contributions
 * P->K = C * rms(term) / rms(prediction) over N_CONTRIB samples (invariant to the scale of each
 * canonical variable). Returns -1 when A is singular. */
static int exact_K(Prob *P, const Map *m) {
    int k = P->k, nv = P->nv, nb = P->nb, p = P->p;
    double Ai[KMAX * KMAX], Q[LIB_MAX_VARS * LIB_MAX_VARS], c[LIB_MAX_VARS];
    if (la_inverse(Ai, m->A, k)) return -1;
    memset(Q, 0, sizeof(double) * nv * nv);
    for (int blk = 0; blk < P->order; blk++)
        for (int i = 0; i < k; i++)
            for (int j = 0; j < k; j++) Q[(blk * k + i) * nv + blk * k + j] = Ai[i * k + j];
    for (int v = 0; v < nv; v++) c[v] = v < k ? m->b[v] : 0.0;
    for (int t = 0; t < p; t++)   /* XA = xi A^T: the outputs mapped */
        for (int i = 0; i < k; i++) {
            double acc = 0;
            for (int j = 0; j < k; j++) acc += P->xi[(long)t * k + j] * m->A[i * k + j];
            P->XA[(long)t * k + i] = acc;
        }
    polymap_apply(&P->pb, P->C, P->lib, P->XA, k, Q, c);
    map_state(k, P->order, m, P->sig_c, P->ss, P->Nc);   /* the first Nc search samples are evenly spread */
    polybasis_eval(&P->pb, P->th_c, P->sig_c, P->Nc);
    cblas_dgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, (int)P->Nc, k, nb, 1.0, P->th_c, nb, P->C, k, 0.0,
                P->pred, k);
    double py[KMAX];
    for (int i = 0; i < k; i++) {
        double a = 0;
        for (long r = 0; r < P->Nc; r++) a += P->pred[r * k + i] * P->pred[r * k + i];
        py[i] = sqrt(a / P->Nc);
        if (!(py[i] > 0)) py[i] = 1;
    }
    for (int r = 0; r < nb; r++) {
        double a = 0;
        for (long q = 0; q < P->Nc; q++) a += P->th_c[q * nb + r] * P->th_c[q * nb + r];
        double tr = sqrt(a / P->Nc);
        for (int i = 0; i < k; i++) P->K[(long)r * k + i] = P->C[(long)r * k + i] * tr / py[i];
    }
    for (long i = 0; i < (long)nb * k; i++)
        if (!isfinite(P->K[i])) return -1;
    return 0;
}

/* Stage 1: the smoothed count of the terms of highest degree (A only; b centres the data). */
static double stage1_obj(const double *x, void *ctx) {
    Prob *P = ctx;
    Map m;
    if (x_to_map(P, x, 0, &m) || exact_K(P, &m)) return HUGE_VAL;
    double f = 0, e2 = P->eps * P->eps, cond = map_cond(P, m.A);
    if (cond > P->opt->cond_max) f += (double)P->nb * P->k * 10 * log(cond / P->opt->cond_max);
    for (int r = 0; r < P->nb; r++) {
        if (P->pb.deg[r] != P->top) continue;
        for (int i = 0; i < P->k; i++) {
            double q = P->K[(long)r * P->k + i];
            f += P->obj_kind ? log1p(q * q / e2) : sqrt(q * q + e2);
        }
    }
    return f;
}

/* Stage 1 polish and stage 3: the forced zeros as residuals (over A, and b when with_b). */
static int zero_res_common(Prob *P, const double *x, int with_b, const uint8_t *off, double *r) {
    Map m;
    if (x_to_map(P, x, with_b, &m) || exact_K(P, &m)) return 1;
    long q = 0;
    for (long e = 0; e < (long)P->nb * P->k; e++)
        if (off[e]) r[q++] = P->K[e];
    return 0;
}
static int top_res(const double *x, double *r, void *ctx) {
    Prob *P = ctx;
    return zero_res_common(P, x, 0, P->top_off, r);
}
static int off_res(const double *x, double *r, void *ctx) {
    Prob *P = ctx;
    return zero_res_common(P, x, 1, P->off, r);
}

static long count_set(const uint8_t *m, long n) {
    long c = 0;
    for (long i = 0; i < n; i++) c += m[i] != 0;
    return c;
}

/* ---- polynomial search: stages 2 and 3 --------------------------------------------------------- */

/* Score of a pattern for stage 2: coefficients above ZERO_PATTERN (ten times for a term outside the
 * library, which the refit cannot keep) plus a little of the smoothed sizes to break ties. */
static double pattern_score(const Prob *P) {
    double sc = 0;
    for (int r = 0; r < P->nb; r++)
        for (int i = 0; i < P->k; i++) {
            double q = fabs(P->K[(long)r * P->k + i]);
            if (q > ZERO_PATTERN) sc += P->inlib[r] ? 1 : 10;
            sc += 1e-3 * log1p(q / ZERO_PATTERN);
        }
    return sc;
}

/* Stage 2: offsets for the A of xa (nA); the best two go to xb (2, k). Returns how many (0..2). */
static int stage2_offsets(Prob *P, const double *xa, const double *extra_b, double *xb) {
    int k = P->k, nA = P->nA;
    double x[OPT_MAX_PARAMS];
    memcpy(x, xa, (size_t)nA * sizeof *x);
    Map m0;
    if (x_to_map(P, x, 0, &m0)) return 0;
    int cap = 3 + MAX_FIXED + BCAND_MAX, nc = 0;
    double *cand = nn_alloc((size_t)cap * k * sizeof *cand);   /* (cap, k) offsets b */
    memcpy(cand + (long)nc++ * k, m0.b, (size_t)k * sizeof(double));   /* centred */
    memset(cand + (long)nc++ * k, 0, (size_t)k * sizeof(double));      /* none */
    if (extra_b) memcpy(cand + (long)nc++ * k, extra_b, (size_t)k * sizeof(double));
    for (int f = 0; f < P->n_fixed; f++, nc++)
        for (int i = 0; i < k; i++) {
            double acc = 0;
            for (int j = 0; j < k; j++) acc -= m0.A[i * k + j] * P->fixed[f][j];
            cand[(long)nc * k + i] = acc;
        }
    if (P->top >= 2) {   /* the coefficients of degree top - 1 are affine in b: zero k of them */
        Map m = m0;
        memset(m.b, 0, sizeof m.b);
        int ne = 0;
        for (int r = 0; r < P->nb; r++) ne += P->pb.deg[r] == P->top - 1 ? k : 0;
        double *C0 = nn_alloc((size_t)ne * sizeof *C0), *Gb = nn_alloc((size_t)ne * k * sizeof *Gb);
        int ok = exact_K(P, &m) == 0;
        for (int r = 0, e = 0; ok && r < P->nb; r++)
            if (P->pb.deg[r] == P->top - 1)
                for (int i = 0; i < k; i++) C0[e++] = P->C[(long)r * k + i];
        for (int j = 0; ok && j < k; j++) {
            memset(m.b, 0, sizeof m.b);
            m.b[j] = 1;
            ok = exact_K(P, &m) == 0;
            for (int r = 0, e = 0; ok && r < P->nb; r++)
                if (P->pb.deg[r] == P->top - 1)
                    for (int i = 0; i < k; i++, e++) Gb[(long)e * k + j] = P->C[(long)r * k + i] - C0[e];
        }
        int comb[KMAX];
        for (int i = 0; i < k; i++) comb[i] = i;
        int tried = 0;
        while (ok && ne >= k && tried < BCAND_MAX) {
            double a[KMAX * KMAX], rhs[KMAX];
            for (int u = 0; u < k; u++) {
                for (int j = 0; j < k; j++) a[u * k + j] = Gb[(long)comb[u] * k + j];
                rhs[u] = -C0[comb[u]];
            }
            if (la_solve(a, rhs, k) == 0) {
                int finite = 1;
                for (int i = 0; i < k; i++) finite &= isfinite(rhs[i]) && fabs(rhs[i]) < 1e6;
                if (finite) memcpy(cand + (long)nc++ * k, rhs, (size_t)k * sizeof(double));
            }
            tried++;
            int u = k - 1;   /* next k-subset in lexicographic order */
            while (u >= 0 && comb[u] == ne - k + u) u--;
            if (u < 0) break;
            comb[u]++;
            for (int v = u + 1; v < k; v++) comb[v] = comb[v - 1] + 1;
        }
        nn_free(C0);
        nn_free(Gb);
    }
    double best[2] = {HUGE_VAL, HUGE_VAL};
    int bi[2] = {-1, -1};
    for (int c = 0; c < nc; c++) {
        memcpy(x + nA, cand + (long)c * k, (size_t)k * sizeof(double));
        Map m;
        if (x_to_map(P, x, 1, &m) || exact_K(P, &m)) continue;
        double sc = pattern_score(P);
        if (sc < best[0]) best[1] = best[0], bi[1] = bi[0], best[0] = sc, bi[0] = c;
        else if (sc < best[1]) {
            int same = 0;
            if (bi[0] >= 0) {
                double d = 0;
                for (int i = 0; i < k; i++) d += fabs(cand[(long)c * k + i] - cand[(long)bi[0] * k + i]);
                same = d < 1e-9;
            }
            if (!same) best[1] = sc, bi[1] = c;
        }
    }
    int n = 0;
    for (int q = 0; q < 2; q++)
        if (bi[q] >= 0) memcpy(xb + (long)n++ * k, cand + (long)bi[q] * k, (size_t)k * sizeof(double));
    nn_free(cand);
    return n;
}

/* The support on the library's terms of the forced zeros P->off. */
static void support_of_off(const Prob *P, uint8_t *support) {
    int k = P->k;
    for (int t = 0; t < P->p; t++)
        for (int i = 0; i < k; i++) support[t * k + i] = P->lib2b[t] >= 0 && !P->off[(long)P->lib2b[t] * k + i];
}

/* Variable projection: with the terms fixed (P->off's complement), each canonical equation is
 * refitted by least squares on the first vp_rows search samples, and the residuals are mapped back to
 * the learned coordinates, R_z = R_u A^-T: the noise of the data lives there, so their sum of squares
 * is the objective whose minimum is the consistent estimate of the map (a relative residual per
 * canonical equation would favour rows that happen to carry less noise). */
static int vp_res(const double *x, double *r, void *ctx) {
    Prob *P = ctx;
    int k = P->k, p = P->p;
    Map m;
    double Ai[KMAX * KMAX];
    if (x_to_map(P, x, 1, &m) || la_inverse(Ai, m.A, k)) return 1;
    double yy[KMAX], rr[KMAX];
    gram_build_n(P, &m, yy, rr, P->vp_rows);
    int *idx = nn_alloc((size_t)p * sizeof *idx);
    double *c = nn_alloc((size_t)p * sizeof *c), *a = nn_alloc((size_t)p * p * sizeof *a);
    int bad = 0;
    for (int i = 0; i < k && !bad; i++) {
        int q = 0;
        for (int t = 0; t < p; t++)
            if (P->lib2b[t] >= 0 && !P->off[(long)P->lib2b[t] * k + i]) idx[q++] = t;
        if (!isfinite(gram_solve(P, i, idx, q, yy[i], c, a))) bad = 1;
        for (long s = 0; s < P->vp_rows; s++) {
            double pr = 0;
            for (int u = 0; u < q; u++) pr += P->theta[s * p + idx[u]] * c[u];
            P->ru[s * k + i] = P->yu[s * k + i] - pr;   /* ru is free here: the residual in u */
        }
    }
    double sc = 1.0 / (P->yscale * sqrt((double)P->vp_rows * k));
    for (long s = 0; s < P->vp_rows; s++)
        for (int j = 0; j < k; j++) {
            double acc = 0;
            for (int i = 0; i < k; i++) acc += Ai[j * k + i] * P->ru[s * k + i];
            r[s * k + j] = acc * sc;
        }
    nn_free(idx), nn_free(c), nn_free(a);
    return bad;
}

/* Variable projection over rows search samples from x (in place). */
static void vp_polish(Prob *P, double *x, long rows, int iters) {
    OptOptions vo = opt_lm_defaults();
    vo.max_iter = iters;
    P->vp_rows = rows;
    opt_lm(vp_res, P, x, P->nA + P->k, (int)(rows * P->k), &vo);
}

/* How far a fit is from its reference: the largest over the equations of (err_i - err_floor) /
 * ref_i. A law is within the tolerance when this is at most 1 + tolerance (as `within`). */
static double excess(const Prob *P, const double *err, const double *ref) {
    double s = 0;
    for (int i = 0; i < P->k; i++) {
        double e = err[i] - P->opt->err_floor, q = e <= 0 ? 0 : ref[i] > 0 ? e / ref[i] : HUGE_VAL;
        s = q > s ? q : s;
    }
    return s;
}

#define POLISH_NEAR 1.5   /* excess up to which the map is refined on the samples */

/* LM with the forced zeros off, from x (in place), on the exactly transformed coefficients.
 * Returns the excess of the law refitted on the search samples with the remaining terms (HUGE_VAL
 * when the map is not valid); err_sum gets the sum of its relative errors. */
static double force_and_check(Prob *P, double *x, uint8_t *support, double *err_sum) {
    int k = P->k, n = P->nA + k;
    long m_res = count_set(P->off, (long)P->nb * k);
    OptOptions lo = opt_lm_defaults();
    if (m_res > 0) opt_lm(off_res, P, x, n, (int)m_res, &lo);
    Map m;
    if (x_to_map(P, x, 1, &m)) return HUGE_VAL;
    support_of_off(P, support);
    double err[KMAX], err0[KMAX];
    fit_support(P, &m, support, err, err0);
    *err_sum = 0;
    for (int i = 0; i < k; i++) *err_sum += err[i];
    return excess(P, err, err0);
}

/* When the law of x is near its reference but above it (excess s in (1, POLISH_NEAR]), the map
 * refined on the sample fit itself (variable projection: with noisy data the coefficients cannot
 * reach exact zeros, and the fit is what counts), kept when the excess falls. Returns the excess.
 * Nothing here depends on the tolerance, so a looser tolerance sees the same maps and the same
 * excesses as a tighter one. */
static double polish_near(Prob *P, double *x, const uint8_t *support, double s, double *err_sum) {
    int k = P->k, n = P->nA + k;
    if (!(s > 1 && s <= POLISH_NEAR)) return s;
    double x1[OPT_MAX_PARAMS], e1[KMAX], r1[KMAX];
    memcpy(x1, x, (size_t)n * sizeof *x);
    vp_polish(P, x1, P->Nc, 20);
    Map m;
    if (x_to_map(P, x1, 1, &m)) return s;
    fit_support(P, &m, support, e1, r1);
    double s1 = excess(P, e1, r1);
    if (!(s1 < s)) return s;
    memcpy(x, x1, (size_t)n * sizeof *x);
    *err_sum = 0;
    for (int i = 0; i < k; i++) *err_sum += e1[i];
    return s1;
}

/* ---- candidates ------------------------------------------------------------------------------- */

/* Is law 1 (count c1, support m1 (p, k), error e1) preferred to law 2? Fewer terms first. Equally
 * sparse laws are not unique (Lorenz's system has several seven-term forms: x' = sigma (y - x) or,
 * with y - x as a variable, x' = sigma u), so the ties go to the form where more equations keep
 * their own linear term u_i in du_i/dt (the form nearest the modal one: every variable has its
 * own rate), then to the smaller largest number of terms in one equation, then to the smaller
 * error. */
static int rank_less(const Prob *P, long c1, const uint8_t *m1, double e1, long c2, const uint8_t *m2, double e2) {
    if (c1 != c2) return c1 < c2;
    int k = P->k, s1 = 0, s2 = 0, x1 = 0, x2 = 0;
    for (int i = 0; i < k; i++) {
        int t = P->self_term[i];
        if (t >= 0) s1 += m1[t * k + i] != 0, s2 += m2[t * k + i] != 0;
        int n1 = 0, n2 = 0;
        for (int u = 0; u < P->p; u++) n1 += m1[u * k + i] != 0, n2 += m2[u * k + i] != 0;
        x1 = n1 > x1 ? n1 : x1;
        x2 = n2 > x2 ? n2 : x2;
    }
    if (s1 != s2) return s1 > s2;
    if (x1 != x2) return x1 < x2;
    return e1 < e2;
}

/* A law the search met: its map, its terms on the search samples, and the keys of rank_less. */
typedef struct {
    Map m;
    uint8_t *support;   /* (p, k) */
    long count;
    double err;
    int self, widest;   /* equations keeping their own linear term; the most terms of one equation */
    int order;          /* when it was met: the last tie-break, so the order does not depend on qsort */
} Cand;

/* Every law the search met (growing): the final choice refits each on every sample. */
typedef struct {
    Cand *c;
    int n, cap;
} CandList;

static void rank_keys(const Prob *P, const uint8_t *m, int *self, int *widest) {
    int k = P->k;
    *self = *widest = 0;
    for (int i = 0; i < k; i++) {
        int t = P->self_term[i], n = 0;
        if (t >= 0) *self += m[t * k + i] != 0;
        for (int u = 0; u < P->p; u++) n += m[u * k + i] != 0;
        *widest = n > *widest ? n : *widest;
    }
}

/* rank_less on the keys of two candidates (a total order: the order met breaks the last ties). */
static int cand_cmp(const void *x, const void *y) {
    const Cand *a = x, *b = y;
    if (a->count != b->count) return a->count < b->count ? -1 : 1;
    if (a->self != b->self) return a->self > b->self ? -1 : 1;
    if (a->widest != b->widest) return a->widest < b->widest ? -1 : 1;
    if (a->err != b->err) return a->err < b->err ? -1 : 1;
    return (a->order > b->order) - (a->order < b->order);
}

static int close_to(double a, double b) { return fabs(a - b) <= 1e-6 * (fabs(a) + fabs(b)); }

/* Adds a law unless the list has it already (the same terms at the same map, as from starts that
 * end at the same point). */
static void cand_add(CandList *L, const Prob *P, const Map *m, const uint8_t *support, long count, double err) {
    if (count < 0) return;
    size_t pk = (size_t)P->p * P->k;
    for (int i = 0; i < L->n; i++) {
        const Cand *o = &L->c[i];
        if (o->count != count || memcmp(o->support, support, pk)) continue;
        int same = 1;
        for (int j = 0; j < P->k * P->k && same; j++) same = close_to(o->m.A[j], m->A[j]);
        for (int j = 0; j < P->k && same; j++) same = close_to(o->m.b[j], m->b[j]) && close_to(o->m.w[j], m->w[j]);
        if (same) return;
    }
    if (L->n == L->cap) {
        int cap = L->cap ? 2 * L->cap : 64;
        Cand *c = nn_alloc((size_t)cap * sizeof *c);
        if (L->n) memcpy(c, L->c, (size_t)L->n * sizeof *c);
        if (L->c) nn_free(L->c);
        L->c = c, L->cap = cap;
    }
    Cand *c = &L->c[L->n];
    c->order = L->n++;
    c->m = *m;
    c->support = nn_alloc(pk);
    memcpy(c->support, support, pk);
    c->count = count;
    c->err = err;
    rank_keys(P, support, &c->self, &c->widest);
}

static void cand_free(CandList *L) {
    for (int i = 0; i < L->n; i++) nn_free(L->c[i].support);
    if (L->c) nn_free(L->c);
    L->c = NULL;
    L->n = L->cap = 0;
}

typedef struct {
    long idx;
    double size;
} Entry;

static int entry_cmp(const void *a, const void *b) {
    const Entry *x = a, *y = b;
    return x->size < y->size ? -1 : x->size > y->size ? 1 : (x->idx > y->idx) - (x->idx < y->idx);
}

/* Stage 3 from x (nA + k, in place): force one more coefficient to zero at a time. Returns the
 * number of terms of the support found (support (p, k) out), or -1. Every accepted step on the way
 * is added to L as well (its map and support): the endpoint was accepted on the search samples,
 * and when its law is not within the tolerance on every sample (the final refit), a step before it
 * may be, and is sparser than the other candidates. */
static long stage3_greedy(Prob *P, double *x, uint8_t *support, double *err_sum, CandList *L) {
    int k = P->k, n = P->nA + k;
    long nbk = (long)P->nb * k;
    Map m;
    if (x_to_map(P, x, 1, &m) || exact_K(P, &m)) return -1;
    double *K0 = nn_alloc((size_t)nbk * sizeof *K0), xx[OPT_MAX_PARAMS];
    uint8_t *off0 = nn_alloc((size_t)nbk), *sup = nn_alloc((size_t)P->p * k);
    Entry *list = nn_alloc((size_t)nbk * sizeof *list);
    memcpy(K0, P->K, (size_t)nbk * sizeof *K0);
    const double thr[3] = {ZERO_PATTERN, 1e-6, -1}, accept = 1 + P->opt->tolerance;
    int ok = 0;
    for (int a = 0; a < 3 && !ok; a++) {
        for (long e = 0; e < nbk; e++) P->off[e] = !P->inlib[e / k] || fabs(K0[e]) < thr[a];
        memcpy(xx, x, (size_t)n * sizeof *xx);
        ok = polish_near(P, xx, sup, force_and_check(P, xx, sup, err_sum), err_sum) <= accept;
    }
    long result = -1;
    if (ok) {
        memcpy(x, xx, (size_t)n * sizeof *x);
        memcpy(support, sup, (size_t)P->p * k);
        double xb[OPT_MAX_PARAMS];
        uint8_t *supb = nn_alloc((size_t)P->p * k);
        long best_e = -1;
        for (;;) {
            if (x_to_map(P, x, 1, &m)) break;
            cand_add(L, P, &m, support, count_set(support, (long)P->p * k), *err_sum);   /* the step reached */
            memcpy(off0, P->off, (size_t)nbk);
            if (exact_K(P, &m)) break;
            long nl = 0;
            for (long e = 0; e < nbk; e++)
                if (!P->off[e]) list[nl].idx = e, list[nl].size = fabs(P->K[e]), nl++;
            qsort(list, (size_t)nl, sizeof *list, entry_cmp);
            /* the step: of the smallest coefficients, the one whose removal leaves the smallest
             * excess (not the first within the tolerance), its map then refined on the samples:
             * the choice does not depend on the tolerance, so a looser tolerance follows the same
             * descent as a tighter one while that one goes on, and only stops later */
            double best_s = HUGE_VAL, best_es = 0;
            best_e = -1;
            for (long q = 0; q < nl && q < GREEDY_TRIES; q++) {
                memcpy(P->off, off0, (size_t)nbk);
                P->off[list[q].idx] = 1;
                memcpy(xx, x, (size_t)n * sizeof *xx);
                double es, sq = force_and_check(P, xx, sup, &es);
                if (sq < best_s) {
                    best_s = sq, best_es = es, best_e = list[q].idx;
                    memcpy(xb, xx, (size_t)n * sizeof *xb);
                    memcpy(supb, sup, (size_t)P->p * k);
                }
            }
            memcpy(P->off, off0, (size_t)nbk);
            if (best_e < 0) break;
            P->off[best_e] = 1;
            best_s = polish_near(P, xb, supb, best_s, &best_es);
            if (!(best_s <= accept)) {
                P->off[best_e] = 0;
                break;
            }
            memcpy(x, xb, (size_t)n * sizeof *x);
            memcpy(support, supb, (size_t)P->p * k);
            *err_sum = best_es;
        }
        nn_free(supb);
        result = count_set(support, (long)P->p * k);
    }
    nn_free(K0), nn_free(off0), nn_free(sup), nn_free(list);
    return result;
}

/* Stages 2 and 3 from the A of xa; candidates into L. */
static void from_A(Prob *P, const double *xa, const double *extra_b, CandList *L) {
    int k = P->k, nA = P->nA;
    double xb[2 * KMAX], x[OPT_MAX_PARAMS];
    int nb = stage2_offsets(P, xa, extra_b, xb);
    uint8_t *sup = nn_alloc((size_t)P->p * k);
    for (int q = 0; q < nb; q++) {
        memcpy(x, xa, (size_t)nA * sizeof *x);
        memcpy(x + nA, xb + (long)q * k, (size_t)k * sizeof *x);
        double es = 0;
        long cnt = stage3_greedy(P, x, sup, &es, L);
        if (cnt >= 0) {   /* the most accurate map for the terms found: the sample fit itself */
            double x0[OPT_MAX_PARAMS], e2[KMAX], e0[KMAX];
            memcpy(x0, x, sizeof x0);
            vp_polish(P, x, P->Ns, 30);
            Map mp;
            if (x_to_map(P, x, 1, &mp) || !fit_support(P, &mp, sup, e2, e0)) memcpy(x, x0, sizeof x0);
        }
        Map m;
        if (cnt >= 0 && x_to_map(P, x, 1, &m) == 0) cand_add(L, P, &m, sup, cnt, es);
    }
    nn_free(sup);
}

static int dbl_cmp(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The polynomial search: every start through stages (1,) 2 and 3. */
static void poly_search(Prob *P, CandList *L) {
    int k = P->k, nA = P->nA;
    double xa[OPT_MAX_PARAMS], xfull[OPT_MAX_PARAMS];
    /* the learned coordinates */
    for (int i = 0; i < nA; i++) xa[i] = P->L[i];   /* A = L L^-1 = I, up to the row scales */
    from_A(P, xa, NULL, L);
    if (k == 1) return;   /* one variable: A is a scale, which never changes the terms */
    /* the modal coordinates at each fixed point, with the fixed point as the offset */
    for (int f = 0; f < P->n_fixed; f++) {
        Map m;
        if (modal_map(P, f, &m)) continue;
        if (!(map_cond(P, m.A) <= P->opt->cond_max)) continue;
        map_to_x(P, &m, xfull);
        from_A(P, xfull, xfull + nA, L);
    }
    /* seeded random starts through stage 1 */
    Rng rng;
    rng_seed(&rng, P->opt->seed);
    OptOptions bo = opt_bfgs_defaults(), lo = opt_lm_defaults();
    const int kinds[3] = {0, 0, 1};
    const double eps[3] = {0.1, 0.01, 0.01};
    for (int s = 0; s < P->opt->starts; s++) {
        P->soft = 1;   /* a start may lie beyond the bound: the penalty brings it back */
        for (int i = 0; i < nA; i++) xa[i] = rng_normal(&rng);
        Map m;
        if (x_to_map(P, xa, 0, &m)) continue;
        for (int st = 0; st < 3; st++) {
            P->obj_kind = kinds[st];
            P->eps = eps[st];
            opt_bfgs(stage1_obj, P, xa, nA, &bo);
        }
        if (x_to_map(P, xa, 0, &m) || exact_K(P, &m)) continue;
        long nt = 0;   /* polish: the small top-degree coefficients to exact zeros */
        for (long e = 0; e < (long)P->nb * k; e++) {
            P->top_off[e] = P->pb.deg[e / k] == P->top && fabs(P->K[e]) < 0.03;
            nt += P->top_off[e];
        }
        if (nt > 0) opt_lm(top_res, P, xa, nA, (int)nt, &lo);
        P->soft = 0;
        /* starts that end at the same pattern (up to scale, sign and order: the sorted sizes of the
         * top-degree contributions) are not searched twice */
        if (x_to_map(P, xa, 0, &m) || exact_K(P, &m)) continue;
        long nsig = 0;
        double *sig = P->sigs + (long)P->n_sigs * P->nb * k;
        for (long e = 0; e < (long)P->nb * k; e++)
            if (P->pb.deg[e / k] == P->top) sig[nsig++] = fabs(P->K[e]);
        qsort(sig, (size_t)nsig, sizeof *sig, dbl_cmp);
        int seen = 0;
        for (int q = 0; q < P->n_sigs && !seen; q++) {
            const double *o = P->sigs + (long)q * P->nb * k;
            double dmax = 0;
            for (long e = 0; e < nsig; e++) dmax = fmax(dmax, fabs(o[e] - sig[e]));
            seen = dmax < 1e-4;
        }
        if (seen) continue;
        P->n_sigs++;
        from_A(P, xa, NULL, L);
    }
    P->soft = 0;
}

/* ---- trig search ------------------------------------------------------------------------------ */

/* The sparsest support at map m by backward elimination; count or -1. */
static long trig_score(Prob *P, const Map *m, uint8_t *support, double *err_sum) {
    double yy[KMAX], rr[KMAX];
    gram_build(P, m, yy, rr);
    return backward_elim(P, yy, rr, support, err_sum);
}

typedef struct {
    Prob *P;
    const uint8_t *support;
    Map base;
} TrigFit;

/* Residuals (Ns k) of the fit with a fixed support at the diagonal map x = (w (k), b (k)). */
static int trig_res(const double *x, double *r, void *ctx) {
    TrigFit *T = ctx;
    Prob *P = T->P;
    int k = P->k, p = P->p;
    Map m = T->base;
    for (int i = 0; i < k; i++) m.w[i] = x[i], m.b[i] = x[k + i];
    double yy[KMAX], rr[KMAX];
    gram_build(P, &m, yy, rr);
    int *idx = nn_alloc((size_t)p * sizeof *idx);
    double *c = nn_alloc((size_t)p * sizeof *c), *a = nn_alloc((size_t)p * p * sizeof *a);
    int bad = 0;
    for (int i = 0; i < k && !bad; i++) {
        int q = 0;
        for (int t = 0; t < p; t++)
            if (T->support[t * k + i]) idx[q++] = t;
        double e2 = gram_solve(P, i, idx, q, yy[i], c, a);
        if (!isfinite(e2)) bad = 1;
        double sc = yy[i] > 0 ? 1 / sqrt(yy[i]) : 0;
        for (long s = 0; s < P->Ns; s++) {
            double pr = 0;
            for (int u = 0; u < q; u++) pr += P->theta[s * p + idx[u]] * c[u];
            r[s * k + i] = (P->yu[s * k + i] - pr) * sc;
        }
    }
    nn_free(idx), nn_free(c), nn_free(a);
    return bad;
}

/* Index of sin / cos (kind) of variable v with multiplier f, or -1. */
static int trig_term(const Library *lib, TermKind kind, int v, int f) {
    for (int t = 0; t < lib->n_terms; t++)
        if (lib->terms[t].kind == kind && lib->terms[t].var[0] == v && lib->terms[t].freq == f) return t;
    return -1;
}

static int better(long c1, double e1, long c0, double e0) {
    if (c1 < 0) return 0;
    if (c0 < 0) return 1;
    return c1 < c0 || (c1 == c0 && e1 < e0 - 1e-12);
}

/* The offset of variable i that turns the fitted c_s sin(f w z) + c_c cos(f w z) = R sin(f w z + phi)
 * into a pure sine of u = z + b: b = phi / (f w) + n pi / (f w), with n putting the data's mean of u
 * nearest 0. The phase is read from the full fit at b_i = 0 in the equation where the pair is
 * largest, with the terms of support (plus the pair; NULL: every term). 1 when found (out set), 0 when the library lacks the pair or the fit fails. */
static int phase_offset(Prob *P, const Map *base, int i, int f0, const uint8_t *support, double *out) {
    int p = P->p, k = P->k;
    int ts = trig_term(P->lib, TERM_SIN, i, f0), tc = trig_term(P->lib, TERM_COS, i, f0);
    if (ts < 0 || tc < 0) return 0;
    Map m = *base;
    m.b[i] = 0;
    double w = m.w[i], yy[KMAX], rr[KMAX];
    gram_build(P, &m, yy, rr);
    int *idx = nn_alloc((size_t)p * sizeof *idx);
    double *c = nn_alloc((size_t)p * sizeof *c), *a = nn_alloc((size_t)p * p * sizeof *a);
    double bestamp = -1, phi = 0;
    for (int j = 0; j < k; j++) {
        int q = 0, qs = -1, qc = -1;
        for (int t = 0; t < p; t++)
            if (!support || support[t * k + j] || t == ts || t == tc) {
                if (t == ts) qs = q;
                if (t == tc) qc = q;
                idx[q++] = t;
            }
        if (!isfinite(gram_solve(P, j, idx, q, yy[j], c, a))) continue;
        double amp = hypot(c[qs], c[qc]);   /* normalised: comparable across equations */
        if (amp > bestamp) bestamp = amp, phi = atan2(c[qc] / P->cn[tc], c[qs] / P->cn[ts]);
    }
    nn_free(idx), nn_free(c), nn_free(a);
    if (!(bestamp > 0) || !(w != 0)) return 0;
    double b0 = phi / (f0 * w), per = M_PI / (f0 * fabs(w));
    *out = b0 + round((-P->zmean[i] - b0) / per) * per;
    return isfinite(*out);
}

/* The diagonal search: u_i = z_i + b_i with frequencies w_i (A = I while searching). */
static void trig_search(Prob *P, CandList *L) {
    int k = P->k, p = P->p;
    Map cur;
    map_identity(&cur, k);
    uint8_t *sup = nn_alloc((size_t)p * k), *best_sup = nn_alloc((size_t)p * k);
    double es, best_e = HUGE_VAL;
    long best_c = trig_score(P, &cur, best_sup, &best_e);
    int f0 = P->lib->spec.n_freq > 0 ? P->lib->spec.freq[0] : 1;
    for (int sweep = 0; sweep < 2; sweep++)
        for (int i = 0; i < k; i++) {
            if (trig_term(P->lib, TERM_SIN, i, f0) < 0 && trig_term(P->lib, TERM_COS, i, f0) < 0) continue;
            double lo = 0.05 / P->zstd[i], hi = 10.0 / P->zstd[i];
            for (int g = -2; g < TRIG_GRID; g++) {
                double w = g == -2 ? 1.0 : g == -1 ? cur.w[i] : lo * exp(log(hi / lo) * g / (TRIG_GRID - 1));
                Map m = cur;
                m.w[i] = w;
                double bc[3 + MAX_FIXED];
                int nbc = 0;
                bc[nbc++] = 0;
                bc[nbc++] = cur.b[i];
                if (phase_offset(P, &m, i, f0, NULL, &bc[nbc])) nbc++;
                for (int f = 0; f < P->n_fixed; f++) bc[nbc++] = -P->fixed[f][i];
                for (int q = 0; q < nbc; q++) {
                    m.b[i] = bc[q];
                    long cnt = trig_score(P, &m, sup, &es);
                    if (better(cnt, es, best_c, best_e)) {
                        best_c = cnt, best_e = es;
                        memcpy(best_sup, sup, (size_t)p * k);
                        cur = m;
                    }
                }
            }
        }
    /* refine: w and b by Levenberg-Marquardt with the terms fixed, then the phase offset at the
     * refined frequency (the grid's frequency is only near, so its phase was too), then the terms
     * again; a few rounds */
    for (int round = 0; round < 3 && best_c >= 0; round++) {
        TrigFit T = {P, best_sup, cur};
        double x[2 * KMAX];
        for (int i = 0; i < k; i++) x[i] = cur.w[i], x[k + i] = cur.b[i];
        OptOptions lo = opt_lm_defaults();
        if (2 * k <= OPT_MAX_PARAMS) opt_lm(trig_res, &T, x, 2 * k, (int)(P->Ns * k), &lo);
        Map m = cur;
        for (int i = 0; i < k; i++) m.w[i] = fabs(x[i]) > 0 ? fabs(x[i]) : cur.w[i], m.b[i] = x[k + i];
        long cnt = trig_score(P, &m, sup, &es);
        if (cnt >= 0 && cnt <= best_c) cur = m, best_c = cnt, best_e = es, memcpy(best_sup, sup, (size_t)p * k);
        for (int i = 0; i < k; i++) {
            m = cur;
            if (!phase_offset(P, &m, i, f0, best_sup, &m.b[i])) continue;
            cnt = trig_score(P, &m, sup, &es);
            if (cnt >= 0 && cnt <= best_c) cur = m, best_c = cnt, best_e = es, memcpy(best_sup, sup, (size_t)p * k);
        }
    }
    if (best_c >= 0) cand_add(L, P, &cur, best_sup, best_c, best_e);
    nn_free(sup);
    nn_free(best_sup);
}

/* ---- the reported map: conventions ------------------------------------------------------------ */

static int term_same(const Term *a, const Term *b) {
    if (a->kind != b->kind) return 0;
    if (a->kind == TERM_CONST) return 1;
    if (a->kind == TERM_MONO) {
        if (a->n_fac != b->n_fac) return 0;
        for (int f = 0; f < a->n_fac; f++)
            if (a->var[f] != b->var[f] || a->pow[f] != b->pow[f]) return 0;
        return 1;
    }
    return a->var[0] == b->var[0] && a->freq == b->freq;
}

/* Library term t with its latent variables renamed old i -> new to[i]; -1 when the library has no
 * such term (edited libraries need not be closed under renaming). */
static int renamed_term(const Library *lib, int t, const int *to) {
    int k = lib->spec.n_latent;
    Term r = lib->terms[t];
    if (r.kind == TERM_MONO) {
        int pw[LIB_MAX_VARS] = {0};
        for (int f = 0; f < r.n_fac; f++) {
            int v = r.var[f];
            pw[(v / k) * k + to[v % k]] += r.pow[f];
        }
        r.n_fac = 0;
        for (int v = 0; v < lib->n_vars; v++)
            if (pw[v]) r.var[r.n_fac] = v, r.pow[r.n_fac] = pw[v], r.n_fac++;
    } else if (r.kind != TERM_CONST) {
        r.var[0] = (r.var[0] / k) * k + to[r.var[0] % k];
    }
    for (int u = 0; u < lib->n_terms; u++)
        if (term_same(&lib->terms[u], &r)) return u;
    return -1;
}

/* Scale rows to the rms standard deviation of the learned variables, make the largest standardised
 * entry of each row positive, order the rows to follow the learned variables. support (p, k) is
 * renamed along; the permutation is skipped when the library is not closed under it. */
static void apply_conventions(const Prob *P, Map *m, uint8_t *support) {
    int k = P->k, p = P->p;
    double sbar = 0;
    for (int j = 0; j < k; j++) sbar += P->zstd[j] * P->zstd[j];
    sbar = sqrt(sbar / k);
    for (int i = 0; i < k; i++) {
        double su = 0;
        for (int a = 0; a < k; a++)
            for (int c = 0; c < k; c++)
                su += m->A[i * k + a] * P->zstd[a] * P->corr[a * k + c] * m->A[i * k + c] * P->zstd[c];
        su = sqrt(su);
        double f = su > 0 ? sbar / su : 1.0;
        int jm = 0;
        for (int j = 1; j < k; j++)
            if (fabs(m->A[i * k + j] * P->zstd[j]) > fabs(m->A[i * k + jm] * P->zstd[jm])) jm = j;
        if (m->A[i * k + jm] < 0) f = -f;
        for (int j = 0; j < k; j++) m->A[i * k + j] *= f;
        m->b[i] *= f;
        if (P->trig) m->w[i] /= fabs(f); /* w only scales trig arguments: 1 without them */
    }
    if (k == 1) return;
    /* the order: new variable j is old row perm[j], maximising sum_j |standardised A[perm[j], j]| */
    int perm[KMAX], bestp[KMAX];
    for (int i = 0; i < k; i++) perm[i] = bestp[i] = i;
    double S[KMAX * KMAX];
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) S[i * k + j] = fabs(m->A[i * k + j] * P->zstd[j]);
    if (k <= 7) {   /* all permutations (Heap's algorithm, iterative) */
        int c[KMAX] = {0};
        double best = 0;
        for (int j = 0; j < k; j++) best += S[perm[j] * k + j];
        int i = 0;
        while (i < k) {
            if (c[i] < i) {
                int sw = i % 2 == 0 ? 0 : c[i];
                int tmp = perm[sw];
                perm[sw] = perm[i];
                perm[i] = tmp;
                double v = 0;
                for (int j = 0; j < k; j++) v += S[perm[j] * k + j];
                if (v > best + 1e-12) best = v, memcpy(bestp, perm, sizeof perm);
                c[i]++;
                i = 0;
            } else {
                c[i] = 0;
                i++;
            }
        }
    } else {   /* greedy: the largest remaining entry first */
        int usedr[KMAX] = {0}, usedc[KMAX] = {0};
        for (int s = 0; s < k; s++) {
            int bi = -1, bj = -1;
            for (int i = 0; i < k; i++)
                for (int j = 0; j < k; j++)
                    if (!usedr[i] && !usedc[j] && (bi < 0 || S[i * k + j] > S[bi * k + bj])) bi = i, bj = j;
            usedr[bi] = usedc[bj] = 1;
            bestp[bj] = bi;
        }
    }
    int ident = 1;
    for (int j = 0; j < k; j++) ident &= bestp[j] == j;
    if (ident) return;
    int to[KMAX];   /* old canonical variable perm[j] becomes new variable j */
    for (int j = 0; j < k; j++) to[bestp[j]] = j;
    uint8_t *ns = nn_calloc((size_t)p * k, 1);
    for (int t = 0; t < p; t++)
        for (int i = 0; i < k; i++) {
            if (!support[t * k + i]) continue;
            int u = renamed_term(P->lib, t, to);
            if (u < 0) {
                nn_free(ns);
                return;
            }
            ns[u * k + to[i]] = 1;
        }
    Map old = *m;
    for (int j = 0; j < k; j++) {
        for (int c2 = 0; c2 < k; c2++) m->A[j * k + c2] = old.A[bestp[j] * k + c2];
        m->b[j] = old.b[bestp[j]];
        m->w[j] = old.w[bestp[j]];
    }
    memcpy(support, ns, (size_t)p * k);
    nn_free(ns);
}

/* ---- the final refit on every sample ---------------------------------------------------------- */

/* Sequentially thresholded least squares restricted to support, along a path of thresholds on the
 * relative contributions; per equation the sparsest result within the tolerance. Fills xi (p, k),
 * mask (p, k), err and err0 (k); returns the number of terms or -1 (not within, or a failure). */
static long final_refit(const Prob *P, const Map *m, const uint8_t *support, double *xi, uint8_t *mask, double *err,
                        double *err0) {
    static const double path[] = {0, 1e-4, 2e-4, 5e-4, 1e-3, 2e-3, 5e-3, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5};
    int k = P->k, p = P->p, nv = P->nv;
    long N = P->N;
    double *sig = nn_alloc((size_t)N * nv * sizeof *sig), *th = nn_alloc((size_t)N * p * sizeof *th);
    double *yu = nn_alloc((size_t)N * k * sizeof *yu), *ru = nn_alloc((size_t)N * k * sizeof *ru);
    double *tmp = nn_alloc((size_t)p * sizeof *tmp), *xs = nn_alloc((size_t)p * k * sizeof *xs);
    uint8_t *ms = nn_alloc((size_t)p * k);
    double *cnt = nn_alloc((size_t)p * sizeof *cnt), ry[KMAX];
    map_state(k, P->order, m, sig, P->s, N);
    eval_terms(P->lib, k, m->w, th, sig, N, tmp);
    map_target(k, m, yu, P->y, N);
    map_target(k, m, ru, P->rz, N);
    for (int t = 0; t < p; t++) {
        double a = 0;
        for (long r = 0; r < N; r++) a += th[r * p + t] * th[r * p + t];
        cnt[t] = a > 0 ? sqrt(a / N) : 1.0;
        for (long r = 0; r < N; r++) th[r * p + t] /= cnt[t];
    }
    for (int i = 0; i < k; i++) {
        double a = 0, b = 0;
        for (long r = 0; r < N; r++) a += yu[r * k + i] * yu[r * k + i], b += ru[r * k + i] * ru[r * k + i];
        ry[i] = a > 0 ? sqrt(a / N) : 1.0;
        err0[i] = a > 0 ? sqrt(b / a) : 0;
        for (long r = 0; r < N; r++) yu[r * k + i] /= ry[i];
    }
    double ref[KMAX];
    {   /* the reference: the better of the learned law and every term of the library, per equation */
        uint8_t *all = nn_alloc((size_t)p * k);
        memset(all, 1, (size_t)p * k);
        ThreshLsqOptions o = thresh_lsq_defaults();
        o.threshold = 0, o.max_iter = 0;
        Status st;
        int bad = thresh_lsq_fit(xs, ms, th, yu, N, p, k, all, &o, NULL, &st);
        nn_free(all);
        for (int i = 0; i < k; i++) {
            double e = 0, yn = 0;
            for (long r = 0; !bad && r < N; r++) {
                double pr = 0;
                for (int t = 0; t < p; t++) pr += th[r * p + t] * xs[t * k + i];
                e += (yu[r * k + i] - pr) * (yu[r * k + i] - pr);
                yn += yu[r * k + i] * yu[r * k + i];
            }
            double full = !bad && yn > 0 ? sqrt(e / yn) : HUGE_VAL;
            ref[i] = full < err0[i] ? full : err0[i];
        }
    }
    int have[KMAX] = {0}, best_n[KMAX];
    long total = 0;
    int failed = 0;
    for (size_t l = 0; l < sizeof path / sizeof path[0] && !failed; l++) {
        ThreshLsqOptions o = thresh_lsq_defaults();
        o.threshold = path[l];
        o.max_iter = path[l] > 0 ? 10 : 0;
        Status st;
        if (thresh_lsq_fit(xs, ms, th, yu, N, p, k, support, &o, NULL, &st)) {
            failed = 1;
            break;
        }
        for (int i = 0; i < k; i++) {
            double e = 0, yn = 0;
            int na = 0;
            for (long r = 0; r < N; r++) {
                double pr = 0;
                for (int t = 0; t < p; t++)
                    if (ms[t * k + i]) pr += th[r * p + t] * xs[t * k + i];
                double d = yu[r * k + i] - pr;
                e += d * d;
                yn += yu[r * k + i] * yu[r * k + i];
            }
            for (int t = 0; t < p; t++) na += ms[t * k + i] && xs[t * k + i] != 0;
            double rel = yn > 0 ? sqrt(e / yn) : 0;
            if (within(P, rel, ref[i]) && (!have[i] || na < best_n[i])) {
                have[i] = 1;
                best_n[i] = na;
                err[i] = rel;
                for (int t = 0; t < p; t++) {
                    int on = ms[t * k + i] && xs[t * k + i] != 0;
                    mask[t * k + i] = (uint8_t)on;
                    xi[t * k + i] = on ? xs[t * k + i] * ry[i] / cnt[t] : 0.0;
                }
            }
        }
    }
    for (int i = 0; i < k && !failed; i++) {
        if (!have[i]) failed = 1;
        else total += best_n[i];
    }
    nn_free(sig), nn_free(th), nn_free(yu), nn_free(ru), nn_free(tmp), nn_free(xs), nn_free(ms), nn_free(cnt);
    return failed ? -1 : total;
}

/* ---- the step --------------------------------------------------------------------------------- */

static int check_options(const CanonOptions *o, Status *st) {
    if (!(o->tolerance >= 0) || !isfinite(o->tolerance))
        return status_set(st, ST_INPUT, "canonical form: tolerance %g must be finite and >= 0", o->tolerance);
    if (!(o->cond_max >= 1) || !isfinite(o->cond_max))
        return status_set(st, ST_INPUT, "canonical form: condition bound %g must be finite and >= 1", o->cond_max);
    if (!(o->err_floor >= 0) || !isfinite(o->err_floor))
        return status_set(st, ST_INPUT, "canonical form: error floor %g must be finite and >= 0", o->err_floor);
    if (o->starts < 0 || o->starts > 1000)
        return status_set(st, ST_INPUT, "canonical form: %d random starts, expected 0..1000", o->starts);
    if (o->max_samples < 16)
        return status_set(st, ST_INPUT, "canonical form: the search needs at least 16 samples (max_samples %ld)",
                          o->max_samples);
    return 0;
}

/* The learned law as the result (unchanged, nothing or skipped). */
static void report_learned(Canonical *out, const Prob *P, CanonStatus status, const char *note) {
    int k = P->k;
    out->status = status;
    snprintf(out->note, sizeof out->note, "%s", note);
    Map id;
    map_identity(&id, k);
    memcpy(out->A, id.A, sizeof out->A);
    memset(out->b, 0, sizeof out->b);
    for (int i = 0; i < k; i++) out->w[i] = 1.0;
    out->cond = 1.0;
    memcpy(out->xi, P->xi, (size_t)P->p * k * sizeof *out->xi);
    memcpy(out->mask, P->raw_on, (size_t)P->p * k);
    out->active = P->raw_active;
    for (int i = 0; i < k; i++) {
        double a = 0, b = 0;
        for (long r = 0; r < P->N; r++) a += P->y[r * k + i] * P->y[r * k + i], b += P->rz[r * k + i] * P->rz[r * k + i];
        out->err[i] = out->err_raw[i] = a > 0 ? sqrt(b / a) : 0;
    }
    out->err_total = out->err_raw_total;
}

static int prob_init(Prob *P, const Library *lib, const double *xi, const uint8_t *mask, const double *s,
                     const double *y, long N, const CanonOptions *opt, Status *st) {
    memset(P, 0, sizeof *P);
    int k = lib->spec.n_latent, order = lib->spec.order, nv = lib->n_vars, p = lib->n_terms;
    P->lib = lib, P->opt = opt, P->k = k, P->order = order, P->nv = nv, P->p = p;
    P->N = N, P->s = s, P->y = y;
    if (N < p || N < 2)
        return status_set(st, ST_INPUT,
                          "canonical form: %ld samples for a library of %d terms (it needs at least as many "
                          "samples as terms)",
                          N, p);
    for (long i = 0; i < N * nv; i++)
        if (!isfinite(s[i])) return status_set(st, ST_INPUT, "canonical form: non-finite state at sample %ld", i / nv + 1);
    for (long i = 0; i < N * k; i++)
        if (!isfinite(y[i])) return status_set(st, ST_INPUT, "canonical form: non-finite target at sample %ld", i / k + 1);
    P->xi = nn_alloc((size_t)p * k * sizeof *P->xi);
    P->raw_on = nn_alloc((size_t)p * k);
    for (long e = 0; e < (long)p * k; e++) {
        int on = (!mask || mask[e]) && xi[e] != 0 && isfinite(xi[e]);
        P->raw_on[e] = (uint8_t)on;
        P->xi[e] = on ? xi[e] : 0.0;
        P->raw_active += on;
    }
    for (int t = 0; t < p; t++) {
        P->trig |= lib->terms[t].kind == TERM_SIN || lib->terms[t].kind == TERM_COS;
        if (lib->terms[t].kind == TERM_MONO) {
            int d = 0;
            for (int f = 0; f < lib->terms[t].n_fac; f++) d += lib->terms[t].pow[f];
            for (int i = 0; i < k; i++)
                if (P->raw_on[t * k + i] && d > P->top) P->top = d;
        }
    }
    for (int i = 0; i < k; i++) {
        P->self_term[i] = -1;
        for (int t = 0; t < p; t++)
            if (lib->terms[t].kind == TERM_MONO && lib->terms[t].n_fac == 1 && lib->terms[t].var[0] == i &&
                lib->terms[t].pow[0] == 1)
                P->self_term[i] = t;
    }
    /* statistics of the positions */
    for (int i = 0; i < k; i++) {
        double a = 0;
        for (long r = 0; r < N; r++) a += s[r * nv + i];
        P->zmean[i] = a / N;
    }
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) {
            double a = 0;
            for (long r = 0; r < N; r++) a += (s[r * nv + i] - P->zmean[i]) * (s[r * nv + j] - P->zmean[j]);
            P->corr[i * k + j] = a / N;
        }
    for (int i = 0; i < k; i++) P->zstd[i] = sqrt(P->corr[i * k + i]) > 0 ? sqrt(P->corr[i * k + i]) : 1.0;
    for (int i = 0; i < k; i++)   /* covariance = L L^T (a constant variable counts as unit variance) */
        for (int j = 0; j <= i; j++) {
            double v = P->corr[i * k + j];
            if (i == j && !(v > 0)) v = 1;
            for (int l = 0; l < j; l++) v -= P->L[i * k + l] * P->L[j * k + l];
            if (i == j) P->L[i * k + i] = v > 1e-300 ? sqrt(v) : 1e-150;
            else P->L[i * k + j] = v / P->L[j * k + j];
        }
    if (la_inverse(P->Li, P->L, k))
        for (int i = 0; i < k * k; i++) P->Li[i] = (i / k == i % k) / P->zstd[i / k];
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) P->corr[i * k + j] /= P->zstd[i] * P->zstd[j];
    /* the learned law's residual, the target's size */
    P->rz = nn_alloc((size_t)N * k * sizeof *P->rz);
    double *theta = nn_alloc((size_t)p * sizeof *theta), pred[KMAX], ys = 0;
    for (long r = 0; r < N; r++) {
        learned_rhs(P, s + r * nv, theta, pred);
        for (int i = 0; i < k; i++) P->rz[r * k + i] = y[r * k + i] - pred[i], ys += y[r * k + i] * y[r * k + i];
    }
    nn_free(theta);
    P->yscale = sqrt(ys / ((double)N * k)) > 0 ? sqrt(ys / ((double)N * k)) : 1.0;
    /* the search samples, evenly spaced */
    long Ns = N < opt->max_samples ? N : opt->max_samples;
    P->Ns = Ns;
    P->ss = nn_alloc((size_t)Ns * nv * sizeof *P->ss);
    P->ys = nn_alloc((size_t)Ns * k * sizeof *P->ys);
    P->rs = nn_alloc((size_t)Ns * k * sizeof *P->rs);
    /* order: first every (Ns / N_CONTRIB)-th pick, so the first Nc rows are spread over the data too */
    long Nc = Ns < N_CONTRIB ? Ns : N_CONTRIB;
    P->Nc = Nc;
    long *pick = nn_alloc((size_t)Ns * sizeof *pick);
    uint8_t *used = nn_calloc((size_t)Ns, 1);
    long q = 0;
    for (long c = 0; c < Nc; c++) {
        long j = c * Ns / Nc;
        pick[q++] = j, used[j] = 1;
    }
    for (long j = 0; j < Ns; j++)
        if (!used[j]) pick[q++] = j;
    for (long a = 0; a < Ns; a++) {
        long r = (long)((double)pick[a] * N / Ns);
        memcpy(P->ss + a * nv, s + r * nv, (size_t)nv * sizeof(double));
        memcpy(P->ys + a * k, y + r * k, (size_t)k * sizeof(double));
        memcpy(P->rs + a * k, P->rz + r * k, (size_t)k * sizeof(double));
    }
    nn_free(pick);
    nn_free(used);
    P->sig = nn_alloc((size_t)Ns * nv * sizeof(double));
    P->theta = nn_alloc((size_t)Ns * p * sizeof(double));
    P->thtmp = nn_alloc((size_t)p * sizeof(double));
    P->yu = nn_alloc((size_t)Ns * k * sizeof(double));
    P->ru = nn_alloc((size_t)Ns * k * sizeof(double));
    P->G = nn_alloc((size_t)p * p * sizeof(double));
    P->g = nn_alloc((size_t)p * k * sizeof(double));
    P->cn = nn_alloc((size_t)p * sizeof(double));
    status_ok(st);
    return 0;
}

/* The polynomial search's buffers; 0, or 1 when the basis is too large (note in st). */
static int prob_init_poly(Prob *P, Status *st) {
    int k = P->k, p = P->p, deg = 0;
    for (int t = 0; t < p; t++)
        if (P->lib->terms[t].kind == TERM_MONO) {
            int d = 0;
            for (int f = 0; f < P->lib->terms[t].n_fac; f++) d += P->lib->terms[t].pow[f];
            if (d > deg) deg = d;
        }
    if (polybasis_init(&P->pb, k, P->order, deg, st)) return 1;
    P->has_pb = 1;
    int nb = P->pb.n_terms;
    P->nb = nb;
    P->nA = k > 1 ? k * k : 0;
    P->lib2b = nn_alloc((size_t)p * sizeof *P->lib2b);
    P->inlib = nn_calloc((size_t)nb, 1);
    for (int t = 0; t < p; t++) {
        P->lib2b[t] = polybasis_index(&P->pb, &P->lib->terms[t]);
        if (P->lib2b[t] >= 0) P->inlib[P->lib2b[t]] = 1;
    }
    P->sig_c = nn_alloc((size_t)P->Nc * P->nv * sizeof(double));
    P->th_c = nn_alloc((size_t)P->Nc * nb * sizeof(double));
    P->C = nn_alloc((size_t)nb * k * sizeof(double));
    P->K = nn_alloc((size_t)nb * k * sizeof(double));
    P->XA = nn_alloc((size_t)p * k * sizeof(double));
    P->pred = nn_alloc((size_t)P->Nc * k * sizeof(double));
    P->off = nn_calloc((size_t)nb * k, 1);
    P->top_off = nn_calloc((size_t)nb * k, 1);
    P->sigs = nn_calloc((size_t)(P->opt->starts + 1) * nb * k, sizeof(double));
    return 0;
}

void canonical_free(Canonical *c) {
    if (c->xi) nn_free(c->xi);
    if (c->mask) nn_free(c->mask);
    c->xi = NULL;
    c->mask = NULL;
}

int canonical_find(Canonical *out, const Library *lib, const double *xi, const uint8_t *mask, const double *s,
                   const double *y, long N, const CanonOptions *opt, Status *st) {
    memset(out, 0, sizeof *out);
    if (check_options(opt, st)) return st->code;
    int k = lib->spec.n_latent, p = lib->n_terms;
    out->k = k, out->order = lib->spec.order, out->n_terms = p, out->n_samples = N;
    out->tolerance = opt->tolerance, out->cond_max = opt->cond_max;
    out->xi = nn_calloc((size_t)p * k, sizeof *out->xi);
    out->mask = nn_calloc((size_t)p * k, 1);
    Prob P;
    if (prob_init(&P, lib, xi, mask, s, y, N, opt, st)) {
        prob_free(&P);
        return st->code;
    }
    out->trig = P.trig;
    out->active_raw = P.raw_active;
    {
        double a = 0, b = 0;
        for (long r = 0; r < N * k; r++) a += y[r] * y[r], b += P.rz[r] * P.rz[r];
        out->err_raw_total = a > 0 ? sqrt(b / a) : 0;
    }
    if (P.raw_active == 0) {
        report_learned(out, &P, CANON_NOTHING, "the learned law has no active terms: nothing to simplify");
        prob_free(&P);
        status_ok(st);
        return 0;
    }
    if (!P.trig && P.top == 0) {
        report_learned(out, &P, CANON_UNCHANGED, "the learned law is constant: no change of coordinates simplifies it");
        prob_free(&P);
        status_ok(st);
        return 0;
    }
    if ((k > 1 ? k * k : 0) + k > OPT_MAX_PARAMS) {
        report_learned(out, &P, CANON_SKIPPED, "more than 7 latent variables: the search is not run");
        prob_free(&P);
        status_ok(st);
        return 0;
    }
    if (!P.trig) {
        Status st2;
        if (prob_init_poly(&P, &st2)) {
            report_learned(out, &P, CANON_SKIPPED, st2.msg);
            prob_free(&P);
            status_ok(st);
            return 0;
        }
    }
    find_fixed_points(&P);
    CandList L = {NULL, 0, 0};
    if (P.trig) trig_search(&P, &L);
    else poly_search(&P, &L);

    /* the learned coordinates, refitted: the reference the search must beat */
    Map id;
    map_identity(&id, k);
    double *bxi = nn_alloc((size_t)p * k * sizeof *bxi), *cxi = nn_alloc((size_t)p * k * sizeof *cxi);
    uint8_t *bmask = nn_alloc((size_t)p * k), *cmask = nn_alloc((size_t)p * k);
    double berr[KMAX], berr0[KMAX], cerr[KMAX], cerr0[KMAX];
    long bcount = final_refit(&P, &id, P.raw_on, bxi, bmask, berr, berr0);
    Map bmap = id;
    int bident = 1;
    double bsum = 0;
    for (int i = 0; i < k; i++) bsum += berr[i];
    /* every law the search met, in the order of rank_less on the search samples, refitted on every
     * sample: the sparsest on the search samples need not stay within the tolerance on all of them,
     * and another law the search met (a step of the same descent, another start) may */
    qsort(L.c, (size_t)L.n, sizeof *L.c, cand_cmp);
    for (int at = 0; at < L.n; at++) {
        Cand c = L.c[at];
        Map m = c.m;
        apply_conventions(&P, &m, c.support);
        double cond = map_cond(&P, m.A);
        long cnt = cond <= opt->cond_max ? final_refit(&P, &m, c.support, cxi, cmask, cerr, cerr0) : -1;
        if (cnt < 0) continue;
        double sum = 0;
        for (int i = 0; i < k; i++) sum += cerr[i];
        int take = bcount < 0;
        if (!take && bident) take = cnt < bcount || (cnt == bcount && rank_less(&P, cnt, cmask, 0, bcount, bmask, 0));
        else if (!take) take = rank_less(&P, cnt, cmask, sum, bcount, bmask, bsum);
        if (take) {
            bcount = cnt, bsum = sum, bmap = m, bident = 0;
            memcpy(bxi, cxi, (size_t)p * k * sizeof *bxi);
            memcpy(bmask, cmask, (size_t)p * k);
            memcpy(berr, cerr, sizeof berr);
            memcpy(berr0, cerr0, sizeof berr0);
        }
    }
    cand_free(&L);
    if (bcount < 0 || bcount >= P.raw_active) {
        report_learned(out, &P, CANON_UNCHANGED,
                       "no change of coordinates within the tolerance gives fewer terms than the learned law");
    } else {
        out->status = CANON_FOUND;
        memcpy(out->A, bmap.A, sizeof out->A);
        memcpy(out->b, bmap.b, sizeof out->b);
        memcpy(out->w, bmap.w, sizeof out->w);
        out->cond = map_cond(&P, bmap.A);
        memcpy(out->xi, bxi, (size_t)p * k * sizeof *bxi);
        memcpy(out->mask, bmask, (size_t)p * k);
        out->active = bcount;
        memcpy(out->err, berr, sizeof berr);
        memcpy(out->err_raw, berr0, sizeof berr0);
        snprintf(out->note, sizeof out->note, "%ld terms instead of %ld%s", bcount, P.raw_active,
                 bident ? " (the learned coordinates, refitted)" : "");
        /* the total error in the learned coordinates: z' = A^-1 u' */
        double Ai[KMAX * KMAX], a = 0, e = 0;
        la_inverse(Ai, out->A, k);
        double *sig = nn_alloc((size_t)P.nv * sizeof *sig), *th = nn_alloc((size_t)p * sizeof *th);
        double *tmp = nn_alloc((size_t)p * sizeof *tmp), pu[KMAX];
        for (long r = 0; r < N; r++) {
            map_state(k, P.order, &bmap, sig, s + r * P.nv, 1);
            eval_terms(lib, k, bmap.w, th, sig, 1, tmp);
            for (int i = 0; i < k; i++) {
                double acc = 0;
                for (int t = 0; t < p; t++) acc += th[t] * out->xi[t * k + i];
                pu[i] = acc;
            }
            for (int j = 0; j < k; j++) {
                double pz = 0;
                for (int i = 0; i < k; i++) pz += Ai[j * k + i] * pu[i];
                double d = y[r * k + j] - pz;
                e += d * d;
                a += y[r * k + j] * y[r * k + j];
            }
        }
        out->err_total = a > 0 ? sqrt(e / a) : 0;
        nn_free(sig), nn_free(th), nn_free(tmp);
    }
    nn_free(bxi), nn_free(cxi), nn_free(bmask), nn_free(cmask);
    prob_free(&P);
    status_ok(st);
    return 0;
}

/* ---- using the result -------------------------------------------------------------------------- */

void canonical_map_state(const Canonical *c, double *sigma, const double *s, long B) {
    Map m;
    memcpy(m.A, c->A, sizeof m.A);
    memcpy(m.b, c->b, sizeof m.b);
    memcpy(m.w, c->w, sizeof m.w);
    map_state(c->k, c->order, &m, sigma, s, B);
    if (c->k != 1 || c->c3[0] == 0) return;
    int nv = c->k * c->order;
    for (long r = 0; r < B; r++) {
        double z = s[r * nv];
        sigma[r * nv] += c->c3[0] * z * z * z;
        if (c->order == 2) sigma[r * nv + 1] += 3 * c->c3[0] * z * z * s[r * nv + 1];
    }
}

void canonical_map_target(const Canonical *c, double *yu, const double *s, const double *y, long B) {
    int k = c->k, nv = k * c->order;
    for (long r = 0; r < B; r++) {
        if (k == 1 && c->c3[0] != 0) {
            double z = s[r * nv], g1 = c->A[0] + 3 * c->c3[0] * z * z;
            yu[r] = g1 * y[r];
            if (c->order == 2) yu[r] += 6 * c->c3[0] * z * s[r * nv + 1] * s[r * nv + 1];
            continue;
        }
        for (int i = 0; i < k; i++) {
            double a = 0;
            for (int j = 0; j < k; j++) a += c->A[i * k + j] * y[r * k + j];
            yu[r * k + i] = a;
        }
    }
}

void canonical_eval(const Canonical *c, const Library *lib, double *theta, const double *sigma, long B) {
    double *tmp = nn_alloc((size_t)lib->n_terms * sizeof *tmp);
    eval_terms(lib, c->k, c->w, theta, sigma, B, tmp);
    nn_free(tmp);
}

int canonical_ode_init(CanonicalOde *o, const Canonical *c, const Library *lib, Status *st) {
    o->c = c, o->lib = lib;
    o->work = nn_alloc(2 * (size_t)lib->n_terms * sizeof *o->work);
    if (!o->work) return status_set(st, ST_RUNTIME, "out of memory");
    status_ok(st);
    return 0;
}

void canonical_ode_free(CanonicalOde *o) {
    nn_free(o->work);
    o->work = NULL;
}

void canonical_ode_rhs(double t, const double *y, double *dydt, void *ctx) {
    (void)t;
    const CanonicalOde *o = ctx;
    const Canonical *c = o->c;
    int k = c->k, T = o->lib->n_terms;
    double *theta = o->work;
    eval_terms(o->lib, k, c->w, theta, y, 1, o->work + T);
    double *out = dydt;
    if (c->order == 2) {
        memcpy(dydt, y + k, (size_t)k * sizeof *y);   /* (u)' = u' */
        out = dydt + k;
    }
    for (int j = 0; j < k; j++) {
        double acc = 0;
        for (int i = 0; i < T; i++)
            if (c->mask[(long)i * k + j]) acc += theta[i] * c->xi[(long)i * k + j];
        out[j] = acc;
    }
}

/* ---- writing ---------------------------------------------------------------------------------- */

typedef struct {
    const Canonical *c;
    const Library *lib;
    int digits;
} NameCtx;

static NameStyle name_style(EqStyle style) { return style == EQ_LATEX ? NAME_LATEX : NAME_TEXT; }

/* Variable v of the canonical coordinates: u1 .. uk, then du1/dt .. (library.c's form, letter u). */
static int var_name(int k, int v, EqStyle style, char *buf, size_t n) {
    int vel = v >= k;
    return library_symbol_name('u', vel ? v - k : v, vel, name_style(style), buf, n);
}

static int canon_var(const void *vctx, int v, NameStyle style, char *buf, size_t n) {
    const NameCtx *ctx = vctx;
    return var_name(ctx->c->k, v, style == NAME_LATEX ? EQ_LATEX : EQ_TEXT, buf, n);
}

/* A trig argument's factor in the canonical variables: f w_i. */
static int canon_freq(const void *vctx, const Term *term, char *buf, size_t n) {
    const NameCtx *ctx = vctx;
    return snprintf(buf, n, "%.*g", ctx->digits, term->freq * ctx->c->w[term->var[0] % ctx->c->k]);
}

/* Term t of the library in the canonical variables (named by library.c's term table): u instead of
 * z, trig arguments f w_i u_i. Returns 1 for the constant. */
static int canon_term_name(const void *vctx, int t, EqStyle style, char *buf, size_t n) {
    const NameCtx *ctx = vctx;
    const Term *term = &ctx->lib->terms[t];
    TermNamer nm = {ctx->c->k, canon_var, canon_freq, ctx};
    library_name_with(term, name_style(style), &nm, buf, n);
    return term->kind == TERM_CONST;
}

/* "du1/dt =", LaTeX "\dot{u}_{1} &=" (align: with the alignment mark) or "\dot{u}_{1} =". */
static void lhs_name(const Canonical *c, int j, EqStyle style, int align, char *buf, size_t n) {
    char u[40];
    library_symbol_name('u', j, c->order, name_style(style), u, sizeof u);
    snprintf(buf, n, style == EQ_LATEX && align ? "%s &=" : "%s =", u);
}

static int clamp_digits(int d) { return d < 1 ? 1 : d > 17 ? 17 : d; }

size_t canonical_format(char *buf, size_t n, EqStyle style, const Canonical *c, const Library *lib, int digits) {
    NameCtx ctx = {c, lib, clamp_digits(digits)};
    size_t len = 0;
    if (n) buf[0] = 0;
#define PUT(...)                                                                                    \
    do {                                                                                            \
        int w_ = snprintf(len < n ? buf + len : NULL, len < n ? n - len : 0, __VA_ARGS__);           \
        len += w_ > 0 ? (size_t)w_ : 0;                                                             \
    } while (0)
    if (style == EQ_LATEX) PUT("\\begin{aligned}\n");
    for (int j = 0; j < c->k; j++) {
        char lhs[64];
        lhs_name(c, j, style, 1, lhs, sizeof lhs);
        size_t w = equation_line_with(len < n ? buf + len : NULL, len < n ? n - len : 0, style, lhs, c->n_terms,
                                      canon_term_name, &ctx, c->xi + j, c->mask + j, c->k, digits);
        len += w;
        PUT("%s", style == EQ_LATEX && j + 1 < c->k ? " \\\\\n" : "\n");
    }
    if (style == EQ_LATEX) PUT("\\end{aligned}\n");
    return len;
}

typedef struct {
    int k;
} MapNameCtx;

static int map_term_name(const void *vctx, int t, EqStyle style, char *buf, size_t n) {
    const MapNameCtx *ctx = vctx;
    if (t == ctx->k) {
        snprintf(buf, n, "1");
        return 1;
    }
    if (t == ctx->k + 1) { /* the cubic warp of one variable */
        char z[24];
        library_symbol_name('z', 0, 0, name_style(style), z, sizeof z);
        snprintf(buf, n, style == EQ_LATEX ? "%s^{3}" : "%s^3", z);
        return 0;
    }
    library_symbol_name('z', t, 0, name_style(style), buf, n);
    return 0;
}

/* Row i of the map as "u1 = 0.5*z1 - 0.2*z2 + 1.3" (text) or LaTeX. */
static size_t map_line(char *buf, size_t n, EqStyle style, const Canonical *c, int i, int digits) {
    double row[KMAX + 2];
    for (int j = 0; j < c->k; j++) row[j] = c->A[i * c->k + j];
    row[c->k] = c->b[i];
    int warp = c->k == 1 && c->c3[0] != 0;
    row[c->k + 1] = warp ? c->c3[0] : 0;
    char u[32], lhs[40];
    library_symbol_name('u', i, 0, name_style(style), u, sizeof u);
    snprintf(lhs, sizeof lhs, style == EQ_LATEX ? "%s &=" : "%s =", u);
    MapNameCtx ctx = {c->k};
    return equation_line_with(buf, n, style, lhs, c->k + 1 + warp, map_term_name, &ctx, row, NULL, 1, digits);
}

size_t canonical_format_map(char *buf, size_t n, const Canonical *c, int digits) {
    size_t len = 0;
    if (n) buf[0] = 0;
    for (int i = 0; i < c->k; i++) {
        len += map_line(len < n ? buf + len : NULL, len < n ? n - len : 0, EQ_TEXT, c, i, digits);
        PUT("\n");
    }
    if (c->trig)
        for (int i = 0; i < c->k; i++) PUT("w%d = %.*g\n", i + 1, clamp_digits(digits), c->w[i]);
    return len;
#undef PUT
}

static cJSON *exact_array(const double *v, int n) {
    cJSON *a = cJSON_CreateArray();
    for (int i = 0; i < n; i++) cJSON_AddItemToArray(a, equation_exact_number(v[i]));
    return a;
}

static char *dup_line(size_t (*fn)(char *, size_t, void *), void *arg) {
    size_t need = fn(NULL, 0, arg);
    char *s = malloc(need + 1);
    if (s) fn(s, need + 1, arg);
    return s;
}

typedef struct {
    const Canonical *c;
    const Library *lib;
    int j, digits;
    EqStyle style;
    int map;
} LineArg;

static size_t line_fn(char *buf, size_t n, void *varg) {
    LineArg *a = varg;
    if (a->map) return map_line(buf, n, a->style, a->c, a->j, a->digits);
    NameCtx ctx = {a->c, a->lib, clamp_digits(a->digits)};
    char lhs[64];
    lhs_name(a->c, a->j, a->style, 0, lhs, sizeof lhs);   /* a line alone: no alignment mark */
    return equation_line_with(buf, n, a->style, lhs, a->c->n_terms, canon_term_name, &ctx, a->c->xi + a->j,
                              a->c->mask + a->j, a->c->k, a->digits);
}

cJSON *canonical_json(const Canonical *c, const Library *lib, int digits) {
    int k = c->k;
    cJSON *o = cJSON_CreateObject();
    cJSON_AddStringToObject(o, "status", canon_status_name(c->status));
    cJSON_AddStringToObject(o, "note", c->note);
    cJSON *mp = cJSON_AddObjectToObject(o, "map");
    cJSON *A = cJSON_AddArrayToObject(mp, "A");
    for (int i = 0; i < k; i++) cJSON_AddItemToArray(A, exact_array(c->A + i * k, k));
    cJSON_AddItemToObject(mp, "b", exact_array(c->b, k));
    cJSON_AddItemToObject(mp, "w", exact_array(c->w, k));
    if (k == 1 && c->c3[0] != 0) cJSON_AddItemToObject(mp, "c3", exact_array(c->c3, k));
    cJSON_AddItemToObject(mp, "cond", equation_exact_number(c->cond));
    cJSON *mt = cJSON_AddArrayToObject(mp, "text");
    for (int i = 0; i < k; i++) {
        LineArg a = {c, lib, i, digits, EQ_TEXT, 1};
        char *s = dup_line(line_fn, &a);
        cJSON_AddItemToArray(mt, cJSON_CreateString(s ? s : ""));
        free(s);
    }
    cJSON *vars = cJSON_AddArrayToObject(o, "variables");
    for (int v = 0; v < k * c->order; v++) {
        char b[32];
        var_name(k, v, EQ_TEXT, b, sizeof b);
        cJSON_AddItemToArray(vars, cJSON_CreateString(b));
    }
    cJSON *terms = cJSON_AddArrayToObject(o, "terms");
    NameCtx ctx = {c, lib, clamp_digits(digits)};
    for (int t = 0; t < c->n_terms; t++) {
        char b[LIB_NAME_MAX * 2];
        canon_term_name(&ctx, t, EQ_TEXT, b, sizeof b);
        cJSON_AddItemToArray(terms, cJSON_CreateString(b));
    }
    cJSON *eqs = cJSON_AddArrayToObject(o, "equations");
    for (int j = 0; j < k; j++) {
        cJSON *e = cJSON_CreateObject();
        char lhs[32];
        library_symbol_name('u', j, c->order, NAME_TEXT, lhs, sizeof lhs);
        cJSON_AddStringToObject(e, "lhs", lhs);
        cJSON *co = cJSON_AddArrayToObject(e, "coefficients"), *ma = cJSON_AddArrayToObject(e, "mask");
        int active = 0;
        for (int t = 0; t < c->n_terms; t++) {
            int on = c->mask[t * k + j] != 0;
            cJSON_AddItemToArray(co, equation_exact_number(on ? c->xi[t * k + j] : 0.0));
            cJSON_AddItemToArray(ma, cJSON_CreateNumber(on));
            active += on && c->xi[t * k + j] != 0;
        }
        cJSON_AddNumberToObject(e, "active", active);
        for (int st = 0; st < 2; st++) {
            LineArg a = {c, lib, j, digits, st ? EQ_LATEX : EQ_TEXT, 0};
            char *s = dup_line(line_fn, &a);
            cJSON_AddStringToObject(e, st ? "latex" : "text", s ? s : "");
            free(s);
        }
        cJSON_AddItemToArray(eqs, e);
    }
    cJSON *fit = cJSON_AddObjectToObject(o, "fit");
    cJSON_AddNumberToObject(fit, "active", (double)c->active);
    cJSON_AddNumberToObject(fit, "active_learned", (double)c->active_raw);
    cJSON_AddItemToObject(fit, "relative_error", exact_array(c->err, k));
    cJSON_AddItemToObject(fit, "relative_error_learned", exact_array(c->err_raw, k));
    cJSON_AddItemToObject(fit, "total_error", equation_exact_number(c->err_total));
    cJSON_AddItemToObject(fit, "total_error_learned", equation_exact_number(c->err_raw_total));
    cJSON_AddItemToObject(fit, "tolerance", equation_exact_number(c->tolerance));
    cJSON_AddItemToObject(fit, "cond_max", equation_exact_number(c->cond_max));
    cJSON_AddNumberToObject(fit, "samples", (double)c->n_samples);
    return o;
}
