/* sparse/coef.h: coefficients Xi (n_terms, n_out) of the sparse model, their 0/1 mask, and
 * sequential thresholding.
 *
 * The model is  dz/dt (or d2z/dt2) = Theta(s) (Xi * M):  column j of Xi holds the coefficients of
 * output j (z_{j+1}), row t those of term t of the library; M is the mask, 1 where a term is still
 * active. Thresholding zeroes every active coefficient with |Xi| < threshold and masks it out for
 * good: a masked coefficient stays zero and masked in every later pass.
 *
 * The kernels are pure functions of (out, in, sizes) over flat arrays of n = n_terms * n_out
 * values; out may equal in (in place). The float versions serve training (Xi lives in the
 * ParamSet); the double versions serve least squares, integration and the equations. */
#ifndef SPARSE_COEF_H
#define SPARSE_COEF_H

#include <stdint.h>

/* xi_out (n) = xi (n) where mask (n) = 1 and |xi| >= threshold, else 0;
 * mask_out (n) = mask and |xi| >= threshold. Returns the number of active coefficients after. */
long coef_threshold_f(float *xi_out, uint8_t *mask_out, const float *xi, const uint8_t *mask, long n,
                      float threshold);
long coef_threshold(double *xi_out, uint8_t *mask_out, const double *xi, const uint8_t *mask, long n,
                    double threshold);

/* out (n) = xi (n) * mask (n). */
void coef_apply_mask_f(float *out, const float *xi, const uint8_t *mask, long n);
void coef_apply_mask(double *out, const double *xi, const uint8_t *mask, long n);

/* Number of ones in mask (n). */
long coef_active(const uint8_t *mask, long n);

/* Active coefficients of output column j of a (n_terms, n_out) mask. */
int coef_active_in_column(const uint8_t *mask, int n_terms, int n_out, int j);

/* A model's coefficients in double, with their mask: one allocation each. */
typedef struct {
    int n_terms, n_out;
    double *xi;     /* (n_terms, n_out) */
    uint8_t *mask;  /* (n_terms, n_out) */
} Coef;

/* Xi = 0 and M = 1 everywhere. */
void coef_init(Coef *c, int n_terms, int n_out);
void coef_free(Coef *c);
/* From training's float Xi (n_terms, n_out) and mask (NULL: all active); masked entries become 0. */
void coef_from_float(Coef *c, const float *xi, const uint8_t *mask);

#endif
