/* sparse/stencil.c: central differences and Savitzky-Golay derivative weights (see stencil.h). */
#include "sparse/stencil.h"

#include <math.h>
#include <string.h>

const char *const stencil_kind_names[] = {"central", "savgol"};
_Static_assert(sizeof stencil_kind_names / sizeof stencil_kind_names[0] == STENCIL_KIND_COUNT, "one name per stencil");

StencilKind stencil_kind_from_name(const char *name) {
    for (int k = 0; k < STENCIL_KIND_COUNT; k++)
        if (!strcmp(name, stencil_kind_names[k])) return (StencilKind)k;
    return STENCIL_KIND_COUNT;
}

void stencil_central(Stencil *s) {
    memset(s, 0, sizeof *s);
    s->kind = STENCIL_CENTRAL;
    s->m = 1;
    s->degree = 2;
    s->w1[0] = -0.5, s->w1[1] = 0.0, s->w1[2] = 0.5;
    s->w2[0] = 1.0, s->w2[1] = -2.0, s->w2[2] = 1.0;
}

/* Householder QR of a (n, p) row-major, n >= p, in place: on return the upper triangle of a holds
 * R. Reflection k is H_k = I - 2 v v^T / (v^T v), with v stored unnormalised in column k of
 * v (n, p), rows k..n-1, and its squared norm v^T v in vv[k]. */
static void householder_qr(double *a, int n, int p, double *v, double *vv) {
    for (int k = 0; k < p; k++) {
        double norm = 0;
        for (int i = k; i < n; i++) norm += a[i * p + k] * a[i * p + k];
        norm = sqrt(norm);
        double alpha = a[k * p + k] > 0 ? -norm : norm;
        double s = 0;
        for (int i = k; i < n; i++) {
            v[i * p + k] = a[i * p + k] - (i == k ? alpha : 0.0);
            s += v[i * p + k] * v[i * p + k];
        }
        vv[k] = s;
        if (s == 0) continue;
        for (int j = k; j < p; j++) {
            double dot = 0;
            for (int i = k; i < n; i++) dot += v[i * p + k] * a[i * p + j];
            double f = 2.0 * dot / s;
            for (int i = k; i < n; i++) a[i * p + j] -= f * v[i * p + k];
        }
    }
}

/* Row d of pinv(A) = R^{-1} Q^T, i.e. out (n) = Q R^{-T} e_d. */
static void pinv_row(const double *r, const double *v, const double *vv, int n, int p, int d,
                     double *out) {
    double z[STENCIL_MAX_LEN];  /* (p) solves R^T z = e_d by forward substitution */
    for (int i = 0; i < p; i++) {
        double s = (i == d) ? 1.0 : 0.0;
        for (int k = 0; k < i; k++) s -= r[k * p + i] * z[k];
        z[i] = s / r[i * p + i];
    }
    for (int i = 0; i < n; i++) out[i] = i < p ? z[i] : 0.0;
    /* Q = H_0 H_1 ... H_{p-1}: apply the last reflection first. */
    for (int k = p - 1; k >= 0; k--) {
        if (vv[k] == 0) continue;
        double dot = 0;
        for (int i = k; i < n; i++) dot += v[i * p + k] * out[i];
        double f = 2.0 * dot / vv[k];
        for (int i = k; i < n; i++) out[i] -= f * v[i * p + k];
    }
}

int stencil_savgol(Stencil *s, int window, int degree, Status *st) {
    if (window < 3 || window % 2 == 0)
        return status_set(st, ST_INPUT, "Savitzky-Golay window %d must be odd and at least 3", window);
    if (window > STENCIL_MAX_LEN)
        return status_set(st, ST_INPUT, "Savitzky-Golay window %d is wider than the maximum %d", window,
                          STENCIL_MAX_LEN);
    if (degree < 2 || degree >= window)
        return status_set(st, ST_INPUT,
                          "Savitzky-Golay degree %d must be at least 2 (for the second derivative) and "
                          "less than the window %d",
                          degree, window);
    memset(s, 0, sizeof *s);
    s->kind = STENCIL_SAVGOL;
    s->m = window / 2;
    s->degree = degree;
    int n = window, p = degree + 1, m = s->m;
    double a[STENCIL_MAX_LEN * STENCIL_MAX_LEN];   /* (n, p) Vandermonde in u = j / m */
    double v[STENCIL_MAX_LEN * STENCIL_MAX_LEN];   /* (n, p) reflection vectors */
    double vv[STENCIL_MAX_LEN];                     /* (p) their squared norms */
    for (int i = 0; i < n; i++) {
        double u = (double)(i - m) / m, pw = 1.0;
        for (int k = 0; k < p; k++) a[i * p + k] = pw, pw *= u;
    }
    householder_qr(a, n, p, v, vv);
    /* p(u) = sum c_k u^k fitted by least squares; with u = j / m, d/dj = (1/m) d/du, so at the
     * centre x' = c_1 / m and x'' = 2 c_2 / m^2 per unit sample spacing. */
    pinv_row(a, v, vv, n, p, 1, s->w1);
    pinv_row(a, v, vv, n, p, 2, s->w2);
    for (int i = 0; i < n; i++) {
        s->w1[i] /= m;
        s->w2[i] *= 2.0 / ((double)m * m);
    }
    return 0;
}

int stencil_make(Stencil *s, StencilKind kind, int window, int degree, Status *st) {
    switch (kind) {
    case STENCIL_CENTRAL: stencil_central(s); return 0;
    case STENCIL_SAVGOL: return stencil_savgol(s, window, degree, st);
    default: return status_set(st, ST_INPUT, "unknown stencil kind %d", (int)kind);
    }
}

void stencil_apply(const Stencil *s, double dt, const double *x, int cols, long i, double *d1,
                   double *d2) {
    int len = 2 * s->m + 1;
    const double *x0 = x + (i - s->m) * (long)cols;   /* first sample of the window */
    double inv1 = 1.0 / dt, inv2 = 1.0 / (dt * dt);
    for (int c = 0; c < cols; c++) {
        double a1 = 0, a2 = 0;
        for (int k = 0; k < len; k++) {
            double xv = x0[(long)k * cols + c];
            a1 += s->w1[k] * xv;
            a2 += s->w2[k] * xv;
        }
        if (d1) d1[c] = a1 * inv1;
        if (d2) d2[c] = a2 * inv2;
    }
}

void stencil_apply_all(const Stencil *s, double dt, const double *x, long rows, int cols, double *d1,
                       double *d2) {
    long nv = stencil_valid(s, rows);
    for (long r = 0; r < nv; r++)
        stencil_apply(s, dt, x, cols, r + s->m, d1 ? d1 + r * cols : NULL, d2 ? d2 + r * cols : NULL);
}

void stencil_response(const Stencil *s, double theta, double *g1, double *g2, double *noise1, double *noise2) {
    double a1 = 0, a2 = 0, q1 = 0, q2 = 0;
    for (int k = 0; k <= 2 * s->m; k++) {
        double j = k - s->m;
        a1 += s->w1[k] * sin(theta * j);
        a2 += s->w2[k] * cos(theta * j);
        q1 += s->w1[k] * s->w1[k];
        q2 += s->w2[k] * s->w2[k];
    }
    if (g1) *g1 = a1 / theta;
    if (g2) *g2 = -a2 / (theta * theta);
    if (noise1) *noise1 = sqrt(q1);
    if (noise2) *noise2 = sqrt(q2);
}

int stencil_auto(Stencil *s, double theta, int order, double tol, int max_window, Status *st) {
    if (!(theta > 0 && theta < M_PI))
        return status_set(st, ST_INPUT, "derivative stencil: frequency %g rad per sample outside (0, pi)", theta);
    if (max_window < 5 || max_window > STENCIL_MAX_LEN)
        return status_set(st, ST_INPUT, "derivative stencil: largest window %d outside [5, %d]", max_window,
                          STENCIL_MAX_LEN);
    static const int degrees[] = {3, 5, 7};
    double best_noise = INFINITY, best_err = INFINITY;
    int found = 0, bw = 0, bd = 0, ew = 0, ed = 0;
    for (size_t i = 0; i < sizeof degrees / sizeof degrees[0]; i++) {
        int d = degrees[i];
        for (int w = d + 2 - (d % 2 == 0); w <= max_window; w += 2) {
            Stencil c;
            Status s2;
            if (w < 3 || stencil_savgol(&c, w, d, &s2)) continue;
            double g1, g2, n1, n2;
            stencil_response(&c, theta, &g1, &g2, &n1, &n2);
            double err = fmax(fabs(g1 - 1), fabs(g2 - 1)), noise = order == 1 ? n1 : n2;
            if (err <= tol && noise < best_noise) best_noise = noise, bw = w, bd = d, found = 1;
            if (err < best_err) best_err = err, ew = w, ed = d;
        }
    }
    if (!found) bw = ew, bd = ed;
    return stencil_savgol(s, bw, bd, st);
}

double stencil_rms_frequency(const double *x, long rows, int cols, const long *rec_start, int n_rec) {
    double dq = 0, vq = 0;
    for (int c = 0; c < cols; c++) {
        double sum = 0;
        long n = 0;
        for (long i = 0; i < rows; i++) sum += x[i * cols + c], n++;
        double mean = n ? sum / n : 0;
        for (long i = 0; i < rows; i++) vq += (x[i * cols + c] - mean) * (x[i * cols + c] - mean);
        for (int r = 0; r < n_rec; r++)
            for (long i = rec_start[r] + 1; i + 1 < rec_start[r + 1]; i++) {
                double e = 0.5 * (x[(i + 1) * cols + c] - x[(i - 1) * cols + c]);
                dq += e * e;
            }
    }
    long nd = 0;
    for (int r = 0; r < n_rec; r++) nd += rec_start[r + 1] - rec_start[r] > 2 ? rec_start[r + 1] - rec_start[r] - 2 : 0;
    if (!(vq > 0) || nd == 0) return 0;
    double ratio = (dq / (double)nd) / (vq / (double)rows);
    return asin(ratio < 1 ? sqrt(ratio) : 1.0);
}
