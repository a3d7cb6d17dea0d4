/* sparse/canonfold.c: a trained model rewritten in the canonical coordinates of its law (see
 * canonfold.h). */
#include "sparse/canonfold.h"

#include <math.h>
#include <string.h>

void canonical_fold_scales(const Canonical *c, const Library *lib, double *scale) {
    int k = c->k;
    for (int t = 0; t < lib->n_terms; t++) {
        const Term *tm = &lib->terms[t];
        double f = 1;
        if (tm->kind == TERM_MONO)
            for (int i = 0; i < tm->n_fac; i++) f *= pow(c->w[tm->var[i] % k], tm->pow[i]);
        for (int j = 0; j < k; j++) scale[(long)t * k + j] = c->w[j] / f;
    }
}

/* Inverse of the k x k matrix a (row-major) by Gauss-Jordan elimination with partial pivoting;
 * 0, or -1 when a pivot is below 1e-12 of the largest entry (singular for this purpose). */
static int invert(int k, const double *a, double *inv) {
    double m[CANON_MAX_K][2 * CANON_MAX_K], big = 0;
    for (int i = 0; i < k; i++)
        for (int j = 0; j < 2 * k; j++) {
            m[i][j] = j < k ? a[i * k + j] : (j - k == i);
            if (j < k && fabs(a[i * k + j]) > big) big = fabs(a[i * k + j]);
        }
    for (int col = 0; col < k; col++) {
        int p = col;
        for (int i = col + 1; i < k; i++)
            if (fabs(m[i][col]) > fabs(m[p][col])) p = i;
        if (!(fabs(m[p][col]) > 1e-12 * big)) return -1;
        for (int j = 0; j < 2 * k; j++) {
            double t = m[col][j];
            m[col][j] = m[p][j], m[p][j] = t;
        }
        double d = m[col][col];
        for (int j = 0; j < 2 * k; j++) m[col][j] /= d;
        for (int i = 0; i < k; i++) {
            if (i == col || m[i][col] == 0) continue;
            double f = m[i][col];
            for (int j = 0; j < 2 * k; j++) m[i][j] -= f * m[col][j];
        }
    }
    for (int i = 0; i < k; i++)
        for (int j = 0; j < k; j++) inv[i * k + j] = m[i][k + j];
    return 0;
}

int canonical_fold(const Canonical *c, Model *m, ParamSet *ps, const uint8_t *mask, Status *st) {
    int k = c->k, T = m->lib.n_terms;
    if (c->status != CANON_FOUND && c->status != CANON_UNCHANGED)
        return status_set(st, ST_INPUT, "canonical form %s: no map to train in", canon_status_name(c->status));
    if (k != m->n_latent || c->order != m->order || c->n_terms != T)
        return status_set(st, ST_INPUT, "canonical form of %d variables, order %d, %d terms; the model has %d, %d, %d",
                          k, c->order, c->n_terms, m->n_latent, m->order, T);
    double M[CANON_MAX_K * CANON_MAX_K], Minv[CANON_MAX_K * CANON_MAX_K], cv[CANON_MAX_K];
    for (int i = 0; i < k; i++) {
        if (!(c->w[i] > 0) || !isfinite(c->w[i]))
            return status_set(st, ST_INPUT, "canonical form: frequency w%d = %g is not positive", i + 1, c->w[i]);
        cv[i] = c->b[i] * c->w[i];
        for (int j = 0; j < k; j++) M[i * k + j] = c->A[j * k + i] * c->w[j]; /* A^T diag(w) */
    }
    if (invert(k, M, Minv)) return status_set(st, ST_INPUT, "canonical form: the map is singular");
    const uint8_t *keep = mask ? mask : c->mask;

    /* encoder, last layer: W (h, k) <- W M, bias (1, k) <- bias M + c */
    int L = m->enc.n_layers - 1;
    Mat W = params_val(ps, m->enc.W[L]), bias = params_val(ps, m->enc.b[L]);
    double row[CANON_MAX_K];
    for (int r = 0; r <= W.rows; r++) {
        float *x = r < W.rows ? W.d + (long)r * k : bias.d; /* the last "row" is the bias */
        for (int j = 0; j < k; j++) {
            double s = r < W.rows ? 0 : cv[j];
            for (int i = 0; i < k; i++) s += (double)x[i] * M[i * k + j];
            row[j] = s;
        }
        for (int j = 0; j < k; j++) x[j] = (float)row[j];
    }
    /* decoder, first layer: W (k, h) <- M^-1 W, bias (1, h) <- bias - c M^-1 W (the new W) */
    Mat D = params_val(ps, m->dec.W[0]), db = params_val(ps, m->dec.b[0]);
    int h = D.cols;
    for (int col = 0; col < h; col++) {
        double old[CANON_MAX_K];
        for (int i = 0; i < k; i++) old[i] = D.d[(long)i * h + col];
        double shift = 0;
        for (int i = 0; i < k; i++) {
            double s = 0;
            for (int j = 0; j < k; j++) s += Minv[i * k + j] * old[j];
            D.d[(long)i * h + col] = (float)s;
            shift += cv[i] * s;
        }
        db.d[col] = (float)((double)db.d[col] - shift);
    }
    /* the law */
    double *scale = nn_alloc((size_t)T * k * sizeof *scale);
    canonical_fold_scales(c, &m->lib, scale);
    float *xi = params_val(ps, m->xi).d;
    for (long i = 0; i < (long)T * k; i++) {
        m->mask[i] = keep[i] ? 1 : 0;
        m->maskf[i] = m->mask[i] ? 1.0f : 0.0f;
        xi[i] = m->mask[i] ? (float)(c->xi[i] * scale[i]) : 0.0f;
    }
    nn_free(scale);
    memset(ps->m, 0, (size_t)ps->n * sizeof *ps->m);
    memset(ps->v, 0, (size_t)ps->n * sizeof *ps->v);
    ps->step = 0;
    return 0;
}
