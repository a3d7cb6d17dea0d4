/* sparse/verify.c: coordinate-free properties of a model (see verify.h). */
#include "sparse/verify.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

enum { VMAX = 64 };

/* One classical RK4 step of size h. */
static void rk4(OdeFn f, void *ctx, int n, double t, double *y, double h) {
    double k1[VMAX], k2[VMAX], k3[VMAX], k4[VMAX], w[VMAX];
    f(t, y, k1, ctx);
    for (int j = 0; j < n; j++) w[j] = y[j] + 0.5 * h * k1[j];
    f(t + 0.5 * h, w, k2, ctx);
    for (int j = 0; j < n; j++) w[j] = y[j] + 0.5 * h * k2[j];
    f(t + 0.5 * h, w, k3, ctx);
    for (int j = 0; j < n; j++) w[j] = y[j] + h * k3[j];
    f(t + h, w, k4, ctx);
    for (int j = 0; j < n; j++) y[j] += h / 6 * (k1[j] + 2 * k2[j] + 2 * k3[j] + k4[j]);
}

static int finite_state(const double *y, int n) {
    for (int j = 0; j < n; j++)
        if (!isfinite(y[j])) return 0;
    return 1;
}

/* The trajectory of y[i] sampled every step: (steps + 1) values. */
static int trace(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double **out,
                 long *count, Status *st) {
    if (n > VMAX || i < 0 || i >= n || h <= 0 || t_max <= 0)
        return status_set(st, ST_INPUT, "verify: bad arguments (n %d, component %d, step %g, t_max %g)", n, i, h, t_max);
    long steps = (long)ceil(t_max / h);
    double *v = malloc((size_t)(steps + 1) * sizeof *v), y[VMAX];
    if (!v) return status_set(st, ST_RUNTIME, "out of memory");
    memcpy(y, y0, (size_t)n * sizeof *y);
    v[0] = y[i];
    for (long k = 0; k < steps; k++) {
        rk4(f, ctx, n, (double)k * h, y, h);
        if (!finite_state(y, n)) {
            free(v);
            return status_set(st, ST_RUNTIME, "verify: the state became non-finite at t = %g", (double)(k + 1) * h);
        }
        v[k + 1] = y[i];
    }
    *out = v;
    *count = steps + 1;
    return 0;
}

/* Level halfway between the extremes of v over its first `span` samples. */
static double mid_level(const double *v, long span) {
    double lo = v[0], hi = v[0];
    for (long k = 1; k < span; k++) {
        if (v[k] < lo) lo = v[k];
        if (v[k] > hi) hi = v[k];
    }
    return 0.5 * (lo + hi);
}

int verify_period(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *period,
                  Status *st) {
    double *v;
    long cnt;
    if (trace(f, ctx, n, y0, i, t_max, h, &v, &cnt, st)) return st->code;
    double level = mid_level(v, cnt);
    double first = NAN, last = NAN;
    long crossings = 0;
    for (long k = 0; k + 1 < cnt; k++) {
        if (v[k] < level && v[k + 1] >= level) { /* upward crossing, linear interpolation */
            double tc = ((double)k + (level - v[k]) / (v[k + 1] - v[k])) * h;
            if (crossings == 0) first = tc;
            last = tc;
            crossings++;
        }
    }
    free(v);
    if (crossings < 2) return status_set(st, ST_RUNTIME, "verify: no oscillation (%ld upward crossings in %g s)", crossings, t_max);
    *period = (last - first) / (double)(crossings - 1);
    return 0;
}

int verify_swing_period(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *period,
                        Status *st) {
    double *v;
    long cnt;
    if (trace(f, ctx, n, y0, i, t_max, h, &v, &cnt, st)) return st->code;
    /* the direction of the first move, then the first sample where the motion turns back */
    long k0 = 1;
    while (k0 < cnt && v[k0] == v[0]) k0++;
    double dir = k0 < cnt && v[k0] > v[0] ? 1.0 : -1.0;
    for (long k = k0; k + 1 < cnt; k++) {
        if ((v[k + 1] - v[k]) * dir < 0) { /* v[k] is the extreme sample: refine by a parabola */
            double den = v[k - 1] - 2 * v[k] + v[k + 1], off = den != 0 ? 0.5 * (v[k - 1] - v[k + 1]) / den : 0;
            *period = 2 * ((double)k + off) * h;
            free(v);
            return 0;
        }
    }
    free(v);
    return status_set(st, ST_RUNTIME, "verify: no turning point within %g s of the release", t_max);
}

int verify_decay_rate(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *rate,
                      Status *st) {
    double *v;
    long cnt;
    if (trace(f, ctx, n, y0, i, t_max, h, &v, &cnt, st)) return st->code;
    /* peak-to-peak amplitudes: each maximum less the minimum that follows it. For A exp(-r t) times
     * an oscillation this is proportional to exp(-r t_max) whatever the equilibrium level. */
    double sx = 0, sy = 0, sxx = 0, sxy = 0, vmax = NAN, tmax = 0;
    long np = 0;
    for (long k = 1; k + 1 < cnt; k++) {
        if (v[k] > v[k - 1] && v[k] >= v[k + 1]) {
            vmax = v[k];
            tmax = (double)k * h;
        } else if (v[k] < v[k - 1] && v[k] <= v[k + 1] && isfinite(vmax) && vmax > v[k]) {
            double l = log(vmax - v[k]);
            sx += tmax, sy += l, sxx += tmax * tmax, sxy += tmax * l;
            np++;
            vmax = NAN;
        }
    }
    free(v);
    if (np < 3) return status_set(st, ST_RUNTIME, "verify: too few swings to measure a decay (%ld)", np);
    *rate = -(np * sxy - sx * sy) / (np * sxx - sx * sx);
    return 0;
}

int verify_lyapunov(OdeFn f, void *ctx, int n, const double *y0, double t_transient, double t_total, double h,
                    double renorm, double *lambda, Status *st) {
    if (n > VMAX || h <= 0 || renorm < h || t_total <= 0)
        return status_set(st, ST_INPUT, "verify: bad Lyapunov arguments");
    double y[VMAX], z[VMAX], t = 0;
    memcpy(y, y0, (size_t)n * sizeof *y);
    long skip = (long)ceil(t_transient / h);
    for (long k = 0; k < skip; k++, t += h) rk4(f, ctx, n, t, y, h);
    const double d0 = 1e-8;
    memcpy(z, y, (size_t)n * sizeof *z);
    z[0] += d0;
    long per = (long)llround(renorm / h), blocks = (long)ceil(t_total / renorm);
    double sum = 0;
    for (long b = 0; b < blocks; b++) {
        for (long k = 0; k < per; k++, t += h) {
            rk4(f, ctx, n, t, y, h);
            rk4(f, ctx, n, t, z, h);
        }
        if (!finite_state(y, n) || !finite_state(z, n))
            return status_set(st, ST_RUNTIME, "verify: the state became non-finite at t = %g", t);
        double d = 0;
        for (int j = 0; j < n; j++) d += (z[j] - y[j]) * (z[j] - y[j]);
        d = sqrt(d);
        if (d == 0) return status_set(st, ST_RUNTIME, "verify: the trajectories merged at t = %g", t);
        sum += log(d / d0);
        for (int j = 0; j < n; j++) z[j] = y[j] + (z[j] - y[j]) * d0 / d;
    }
    *lambda = sum / ((double)blocks * (double)per * h);
    return 0;
}

/* Central-difference Jacobian J (n, n), row i the derivatives of f_i. */
static void jacobian(OdeFn f, void *ctx, int n, const double *y, double *J) {
    double yp[VMAX], fp[VMAX], fm[VMAX];
    for (int j = 0; j < n; j++) {
        double e = 1e-6 * (1 + fabs(y[j]));
        memcpy(yp, y, (size_t)n * sizeof *yp);
        yp[j] = y[j] + e;
        f(0, yp, fp, ctx);
        yp[j] = y[j] - e;
        f(0, yp, fm, ctx);
        for (int i = 0; i < n; i++) J[i * n + j] = (fp[i] - fm[i]) / (2 * e);
    }
}

/* LAPACK (Fortran calling convention): LU factorisation and solve; general eigenvalues. */
extern void dgesv_(const int *n, const int *nrhs, double *a, const int *lda, int *ipiv, double *b, const int *ldb,
                   int *info);
extern void dgeev_(const char *jobvl, const char *jobvr, const int *n, double *a, const int *lda, double *wr,
                   double *wi, double *vl, const int *ldvl, double *vr, const int *ldvr, double *work,
                   const int *lwork, int *info);

int verify_fixed_point(OdeFn f, void *ctx, int n, const double *y0, double *y, Status *st) {
    if (n < 1 || n > VMAX) return status_set(st, ST_INPUT, "verify: %d state values (1 to %d)", n, VMAX);
    double J[VMAX * VMAX], Jt[VMAX * VMAX], r[VMAX];
    int ipiv[VMAX];
    memcpy(y, y0, (size_t)n * sizeof *y);
    f(0, y, r, ctx);
    double r0 = 0, rn = 0;
    for (int i = 0; i < n; i++) r0 = fmax(r0, fabs(r[i]));
    for (int it = 0; it < 50; it++) {
        f(0, y, r, ctx);
        rn = 0;
        for (int i = 0; i < n; i++) rn = fmax(rn, fabs(r[i]));
        if (!finite_state(y, n) || !isfinite(rn)) break;
        if (rn <= 1e-9 * (1 + r0)) return 0;
        jacobian(f, ctx, n, y, J);
        for (int i = 0; i < n; i++) /* column-major for LAPACK */
            for (int j = 0; j < n; j++) Jt[j * n + i] = J[i * n + j];
        int one = 1, info = 0;
        dgesv_(&n, &one, Jt, &n, ipiv, r, &n, &info);
        if (info != 0) return status_set(st, ST_RUNTIME, "verify: the Jacobian is singular at the Newton iterate");
        for (int i = 0; i < n; i++) y[i] -= r[i];
    }
    return status_set(st, ST_RUNTIME, "verify: no fixed point found near the start (residual %.3g)", rn);
}

int verify_jacobian_eigs(OdeFn f, void *ctx, int n, const double *y, double *re, double *im, Status *st) {
    if (n < 1 || n > VMAX) return status_set(st, ST_INPUT, "verify: %d state values (1 to %d)", n, VMAX);
    double J[VMAX * VMAX], Jt[VMAX * VMAX], work[8 * VMAX], dummy[1];
    jacobian(f, ctx, n, y, J);
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) Jt[j * n + i] = J[i * n + j];
    int one = 1, lwork = 8 * VMAX, info = 0;
    dgeev_("N", "N", &n, Jt, &n, re, im, dummy, &one, dummy, &one, work, &lwork, &info);
    if (info != 0) return status_set(st, ST_RUNTIME, "verify: LAPACK dgeev failed (info %d)", info);
    for (int a = 1; a < n; a++) /* insertion sort by (im, re) */
        for (int b = a; b > 0 && (im[b] < im[b - 1] || (im[b] == im[b - 1] && re[b] < re[b - 1])); b--) {
            double t = re[b]; re[b] = re[b - 1], re[b - 1] = t;
            t = im[b], im[b] = im[b - 1], im[b - 1] = t;
        }
    return 0;
}

int verify_cycle(OdeFn f, void *ctx, int n, const double *y0, int i, double t_settle, double t_measure, double h,
                 double *period, double *range, Status *st) {
    if (n > VMAX || i < 0 || i >= n || !(h > 0) || !(t_settle >= 0) || !(t_measure > 0))
        return status_set(st, ST_INPUT, "verify: bad arguments (n %d, component %d, step %g)", n, i, h);
    double y[VMAX];
    memcpy(y, y0, (size_t)n * sizeof *y);
    long skip = (long)ceil(t_settle / h);
    for (long k = 0; k < skip; k++) {
        rk4(f, ctx, n, (double)k * h, y, h);
        if (!finite_state(y, n)) return status_set(st, ST_RUNTIME, "verify: the state became non-finite at t = %g", (double)(k + 1) * h);
    }
    double *v;
    long cnt;
    if (trace(f, ctx, n, y, i, t_measure, h, &v, &cnt, st)) return st->code;
    double lo = v[0], hi = v[0];
    for (long k = 1; k < cnt; k++) lo = fmin(lo, v[k]), hi = fmax(hi, v[k]);
    free(v);
    *range = hi - lo;
    return verify_period(f, ctx, n, y, i, t_measure, h, period, st);
}
