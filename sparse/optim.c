/* sparse/optim.c: BFGS, Levenberg-Marquardt and small dense linear algebra (see optim.h). */
#include "sparse/optim.h"

#include <math.h>
#include <string.h>

#include "nn/core.h"

/* LAPACK (Fortran calling convention, column-major, 32-bit integers as in Debian's OpenBLAS). */
extern void dgesvd_(const char *jobu, const char *jobvt, const int *m, const int *n, double *a, const int *lda,
                    double *s, double *u, const int *ldu, double *vt, const int *ldvt, double *work,
                    const int *lwork, int *info);
extern void dgeev_(const char *jobvl, const char *jobvr, const int *n, double *a, const int *lda, double *wr,
                   double *wi, double *vl, const int *ldvl, double *vr, const int *ldvr, double *work,
                   const int *lwork, int *info);

OptOptions opt_bfgs_defaults(void) {
    OptOptions o = {200, 1e-6, 1e-12};
    return o;
}

OptOptions opt_lm_defaults(void) {
    OptOptions o = {100, 1e-7, 1e-12};
    return o;
}

/* ---- BFGS ------------------------------------------------------------------------------------ */

static void fd_gradient(OptFn f, void *ctx, double *x, int n, double h, double *g) {
    for (int j = 0; j < n; j++) {
        double x0 = x[j], hj = h * (fabs(x0) > 1 ? fabs(x0) : 1);
        x[j] = x0 + hj;
        double fp = f(x, ctx);
        x[j] = x0 - hj;
        double fm = f(x, ctx);
        x[j] = x0;
        g[j] = isfinite(fp) && isfinite(fm) ? (fp - fm) / (2 * hj) : 0.0;
    }
}

double opt_bfgs(OptFn f, void *ctx, double *x, int n, const OptOptions *o) {
    NN_CHECK(n >= 1 && n <= OPT_MAX_PARAMS, "opt_bfgs: %d parameters, expected 1..%d", n, OPT_MAX_PARAMS);
    double H[OPT_MAX_PARAMS * OPT_MAX_PARAMS];   /* (n, n) inverse Hessian estimate */
    double g[OPT_MAX_PARAMS], gn[OPT_MAX_PARAMS], p[OPT_MAX_PARAMS], xn[OPT_MAX_PARAMS];
    double s[OPT_MAX_PARAMS], y[OPT_MAX_PARAMS], hy[OPT_MAX_PARAMS];
    memset(H, 0, sizeof H);
    for (int i = 0; i < n; i++) H[i * n + i] = 1.0;
    double fx = f(x, ctx);
    if (!isfinite(fx)) return fx;
    fd_gradient(f, ctx, x, n, o->h, g);
    int first = 1;
    for (int it = 0; it < o->max_iter; it++) {
        double gg = 0, gp = 0;
        for (int i = 0; i < n; i++) {
            double acc = 0;
            for (int j = 0; j < n; j++) acc -= H[i * n + j] * g[j];
            p[i] = acc;
            gg += g[i] * g[i];
        }
        for (int i = 0; i < n; i++) gp += g[i] * p[i];
        if (gg == 0) break;
        if (!(gp < 0)) {   /* not a descent direction: restart from steepest descent */
            memset(H, 0, sizeof H);
            for (int i = 0; i < n; i++) H[i * n + i] = 1.0, p[i] = -g[i];
            gp = -gg;
        }
        if (first) {   /* a first step of moderate length: at most 0.1 (|x| + 1) */
            double pn = sqrt(-gp), xn2 = 0;
            for (int i = 0; i < n; i++) xn2 += x[i] * x[i];
            double cap = 0.1 * (sqrt(xn2) + 1);
            if (pn > cap)
                for (int i = 0; i < n; i++) p[i] *= cap / pn;
            gp = 0;
            for (int i = 0; i < n; i++) gp += g[i] * p[i];
        }
        double a = 1.0, fn = HUGE_VAL;
        int ok = 0;
        for (int ls = 0; ls < 50; ls++) {
            for (int i = 0; i < n; i++) xn[i] = x[i] + a * p[i];
            fn = f(xn, ctx);
            if (isfinite(fn) && fn <= fx + 1e-4 * a * gp) {
                ok = 1;
                break;
            }
            a *= 0.5;
        }
        if (!ok) break;
        fd_gradient(f, ctx, xn, n, o->h, gn);
        double sy = 0, yy = 0, ss = 0;
        for (int i = 0; i < n; i++) {
            s[i] = xn[i] - x[i];
            y[i] = gn[i] - g[i];
            sy += s[i] * y[i];
            yy += y[i] * y[i];
            ss += s[i] * s[i];
        }
        double df = fx - fn;
        memcpy(x, xn, (size_t)n * sizeof *x);
        memcpy(g, gn, (size_t)n * sizeof *g);
        fx = fn;
        if (sy > 1e-12 * sqrt(ss * yy)) {
            if (first) {   /* scale the start: H0 = (s.y / y.y) I (Nocedal and Wright, eq. 6.20) */
                for (int i = 0; i < n * n; i++) H[i] *= sy / yy;
            }
            /* H += (sy + y H y) s s^T / sy^2 - (H y s^T + s y^T H) / sy */
            double yhy = 0;
            for (int i = 0; i < n; i++) {
                double acc = 0;
                for (int j = 0; j < n; j++) acc += H[i * n + j] * y[j];
                hy[i] = acc;
                yhy += y[i] * acc;
            }
            for (int i = 0; i < n; i++)
                for (int j = 0; j < n; j++)
                    H[i * n + j] += (sy + yhy) * s[i] * s[j] / (sy * sy) - (hy[i] * s[j] + s[i] * hy[j]) / sy;
        }
        first = 0;
        if (df <= o->tol * (fabs(fx) + o->tol)) break;
    }
    return fx;
}

/* ---- Levenberg-Marquardt --------------------------------------------------------------------- */

static double sumsq(const double *r, int m) {
    double s = 0;
    for (int i = 0; i < m; i++) s += r[i] * r[i];
    return s;
}

double opt_lm(OptResFn rf, void *ctx, double *x, int n, int m, const OptOptions *o) {
    NN_CHECK(n >= 1 && n <= OPT_MAX_PARAMS, "opt_lm: %d parameters, expected 1..%d", n, OPT_MAX_PARAMS);
    if (m < 1) return 0;
    double *r = nn_alloc((size_t)m * sizeof *r), *rn = nn_alloc((size_t)m * sizeof *rn);   /* (m) */
    double *J = nn_alloc((size_t)m * n * sizeof *J);                                       /* (m, n) */
    double JtJ[OPT_MAX_PARAMS * OPT_MAX_PARAMS], a[OPT_MAX_PARAMS * OPT_MAX_PARAMS];
    double g[OPT_MAX_PARAMS], d[OPT_MAX_PARAMS], xn[OPT_MAX_PARAMS];
    double f = HUGE_VAL;
    if (rf(x, r, ctx) == 0) f = sumsq(r, m);
    if (!isfinite(f)) goto done;
    double mu = 1e-3;
    for (int it = 0; it < o->max_iter && f > 0; it++) {
        for (int j = 0; j < n; j++) {   /* forward differences, column j */
            double x0 = x[j], hj = o->h * (fabs(x0) > 1 ? fabs(x0) : 1);
            x[j] = x0 + hj;
            int bad = rf(x, rn, ctx);
            x[j] = x0;
            for (int i = 0; i < m; i++) J[(long)i * n + j] = bad || !isfinite(rn[i]) ? 0.0 : (rn[i] - r[i]) / hj;
        }
        for (int p = 0; p < n; p++) {
            double acc = 0;
            for (int i = 0; i < m; i++) acc += J[(long)i * n + p] * r[i];
            g[p] = acc;
            for (int q = p; q < n; q++) {
                double s = 0;
                for (int i = 0; i < m; i++) s += J[(long)i * n + p] * J[(long)i * n + q];
                JtJ[p * n + q] = JtJ[q * n + p] = s;
            }
        }
        double dmax = 0;
        for (int p = 0; p < n; p++) dmax = JtJ[p * n + p] > dmax ? JtJ[p * n + p] : dmax;
        if (dmax == 0) break;
        int improved = 0;
        for (int tries = 0; tries < 30 && !improved; tries++) {
            memcpy(a, JtJ, sizeof(double) * n * n);
            for (int p = 0; p < n; p++) {
                a[p * n + p] += mu * (JtJ[p * n + p] + 1e-12 * dmax);
                d[p] = -g[p];
            }
            if (la_solve(a, d, n)) {
                mu *= 4;
                continue;
            }
            for (int p = 0; p < n; p++) xn[p] = x[p] + d[p];
            double fn = rf(xn, rn, ctx) == 0 ? sumsq(rn, m) : HUGE_VAL;
            if (isfinite(fn) && fn < f) {
                double df = f - fn;
                memcpy(x, xn, (size_t)n * sizeof *x);
                memcpy(r, rn, (size_t)m * sizeof *r);
                f = fn;
                mu = mu / 3 > 1e-12 ? mu / 3 : 1e-12;
                improved = 1;
                if (df <= o->tol * f) it = o->max_iter;   /* converged */
            } else {
                mu *= 4;
            }
        }
        if (!improved) break;
    }
done:
    nn_free(r);
    nn_free(rn);
    nn_free(J);
    return f;
}

/* ---- linear algebra -------------------------------------------------------------------------- */

int la_solve(double *a, double *b, int n) {
    for (int c = 0; c < n; c++) {
        int piv = c;
        for (int r = c + 1; r < n; r++)
            if (fabs(a[r * n + c]) > fabs(a[piv * n + c])) piv = r;
        double pv = a[piv * n + c];
        if (!(fabs(pv) > 1e-300) || !isfinite(pv)) return -1;
        if (piv != c) {
            for (int k = 0; k < n; k++) {
                double t = a[c * n + k];
                a[c * n + k] = a[piv * n + k];
                a[piv * n + k] = t;
            }
            double t = b[c];
            b[c] = b[piv];
            b[piv] = t;
        }
        for (int r = c + 1; r < n; r++) {
            double fct = a[r * n + c] / pv;
            if (fct == 0) continue;
            for (int k = c; k < n; k++) a[r * n + k] -= fct * a[c * n + k];
            b[r] -= fct * b[c];
        }
    }
    for (int r = n - 1; r >= 0; r--) {
        double acc = b[r];
        for (int k = r + 1; k < n; k++) acc -= a[r * n + k] * b[k];
        b[r] = acc / a[r * n + r];
    }
    for (int r = 0; r < n; r++)
        if (!isfinite(b[r])) return -1;
    return 0;
}

int la_inverse(double *inv, const double *a, int n) {
    double *w = nn_alloc((size_t)n * n * sizeof *w), *col = nn_alloc((size_t)n * sizeof *col);
    int rc = 0;
    for (int j = 0; j < n && !rc; j++) {
        memcpy(w, a, (size_t)n * n * sizeof *w);
        for (int i = 0; i < n; i++) col[i] = i == j;
        rc = la_solve(w, col, n);
        for (int i = 0; i < n; i++) inv[i * n + j] = col[i];
    }
    nn_free(w);
    nn_free(col);
    return rc;
}

int la_singular_values(double *sv, const double *a, int m, int n) {
    /* row-major a (m, n) is column-major a^T (n, m): same singular values */
    int rows = n, cols = m, lda = n, one = 1, info = 0, lwork = -1;
    double *w = nn_alloc((size_t)m * n * sizeof *w), q = 0, dummy = 0;
    memcpy(w, a, (size_t)m * n * sizeof *w);
    for (long i = 0; i < (long)m * n; i++)
        if (!isfinite(w[i])) {
            nn_free(w);
            return -1;
        }
    dgesvd_("N", "N", &rows, &cols, w, &lda, sv, &dummy, &one, &dummy, &one, &q, &lwork, &info);
    lwork = (int)q + 16;
    double *work = nn_alloc((size_t)lwork * sizeof *work);
    dgesvd_("N", "N", &rows, &cols, w, &lda, sv, &dummy, &one, &dummy, &one, work, &lwork, &info);
    nn_free(work);
    nn_free(w);
    return info == 0 ? 0 : -1;
}

double la_cond(const double *a, int n) {
    double sv[64];
    double *s = n <= 64 ? sv : nn_alloc((size_t)n * sizeof *s);
    double c = HUGE_VAL;
    if (la_singular_values(s, a, n, n) == 0 && s[n - 1] > 0 && isfinite(s[0])) c = s[0] / s[n - 1];
    if (s != sv) nn_free(s);
    return c;
}

int la_eig(double *re, double *im, double *vr, const double *a, int n) {
    double *cm = nn_alloc((size_t)n * n * sizeof *cm), *v = nn_alloc((size_t)n * n * sizeof *v);
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) cm[(long)j * n + i] = a[(long)i * n + j];   /* column-major */
    int lda = n, one = 1, info = 0, lwork = -1;
    double q = 0, dummy = 0;
    dgeev_("N", "V", &n, cm, &lda, re, im, &dummy, &one, v, &lda, &q, &lwork, &info);
    lwork = (int)q + 16;
    double *work = nn_alloc((size_t)lwork * sizeof *work);
    dgeev_("N", "V", &n, cm, &lda, re, im, &dummy, &one, v, &lda, work, &lwork, &info);
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) vr[(long)i * n + j] = v[(long)j * n + i];
    nn_free(work);
    nn_free(cm);
    nn_free(v);
    return info == 0 ? 0 : -1;
}
