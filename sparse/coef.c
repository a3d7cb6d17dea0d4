/* sparse/coef.c: coefficients, mask and thresholding (see coef.h). */
#include "sparse/coef.h"

#include <math.h>
#include <string.h>

#include "nn/core.h"

long coef_threshold_f(float *xi_out, uint8_t *mask_out, const float *xi, const uint8_t *mask, long n,
                      float threshold) {
    long active = 0;
    for (long i = 0; i < n; i++) {
        int keep = mask[i] && fabsf(xi[i]) >= threshold;
        xi_out[i] = keep ? xi[i] : 0.0f;
        mask_out[i] = (uint8_t)keep;
        active += keep;
    }
    return active;
}

long coef_threshold(double *xi_out, uint8_t *mask_out, const double *xi, const uint8_t *mask, long n,
                    double threshold) {
    long active = 0;
    for (long i = 0; i < n; i++) {
        int keep = mask[i] && fabs(xi[i]) >= threshold;
        xi_out[i] = keep ? xi[i] : 0.0;
        mask_out[i] = (uint8_t)keep;
        active += keep;
    }
    return active;
}

void coef_apply_mask_f(float *out, const float *xi, const uint8_t *mask, long n) {
    for (long i = 0; i < n; i++) out[i] = mask[i] ? xi[i] : 0.0f;
}

void coef_apply_mask(double *out, const double *xi, const uint8_t *mask, long n) {
    for (long i = 0; i < n; i++) out[i] = mask[i] ? xi[i] : 0.0;
}

long coef_active(const uint8_t *mask, long n) {
    long a = 0;
    for (long i = 0; i < n; i++) a += mask[i] != 0;
    return a;
}

int coef_active_in_column(const uint8_t *mask, int n_terms, int n_out, int j) {
    int a = 0;
    for (int t = 0; t < n_terms; t++) a += mask[(long)t * n_out + j] != 0;
    return a;
}

void coef_init(Coef *c, int n_terms, int n_out) {
    long n = (long)n_terms * n_out;
    c->n_terms = n_terms;
    c->n_out = n_out;
    c->xi = nn_calloc((size_t)(n > 0 ? n : 1), sizeof *c->xi);
    c->mask = nn_calloc((size_t)(n > 0 ? n : 1), sizeof *c->mask);
    memset(c->mask, 1, (size_t)n);
}

void coef_free(Coef *c) {
    if (c->xi) nn_free(c->xi);
    if (c->mask) nn_free(c->mask);
    c->xi = NULL;
    c->mask = NULL;
}

void coef_from_float(Coef *c, const float *xi, const uint8_t *mask) {
    long n = (long)c->n_terms * c->n_out;
    for (long i = 0; i < n; i++) {
        int on = mask ? mask[i] != 0 : 1;
        c->mask[i] = (uint8_t)on;
        c->xi[i] = on ? xi[i] : 0.0;
    }
}
