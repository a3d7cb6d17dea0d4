/* nn/adam.c: Adam, Algorithm 1 of "Adam: A Method for Stochastic Optimization" (ICLR 2015). */
#include "nn/adam.h"

#include <math.h>

/* Built with -fno-math-errno (Makefile): sqrtf may set errno (for a negative argument, which v
 * never is), and the library call that keeps errno blocks the loop's vectorisation; without errno
 * it is the same correctly rounded instruction, so the results do not change by a bit. */

#include "nn/par.h"

typedef struct {
    float *w, *g, *m, *v;
    float b1, b2, eps, step_size, inv_sqrt_bc2;
} AdamPass;

/* elementwise, so any split over threads gives the same bits */
static void adam_range(void *vc, long lo, long hi) {
    const AdamPass *c = vc;
    float *restrict w = c->w, *restrict g = c->g, *restrict m = c->m, *restrict v = c->v;
    float b1 = c->b1, b2 = c->b2, eps = c->eps, step_size = c->step_size, inv_sqrt_bc2 = c->inv_sqrt_bc2;
    for (long i = lo; i < hi; i++) {
        m[i] = b1 * m[i] + (1 - b1) * g[i];
        v[i] = b2 * v[i] + (1 - b2) * g[i] * g[i];
        /* lr m_hat / (sqrt(v_hat) + eps) with m_hat = m/bc1, v_hat = v/bc2 */
        w[i] -= step_size * m[i] / (sqrtf(v[i]) * inv_sqrt_bc2 + eps);
    }
}

void adam_step(ParamSet *ps, const AdamCfg *c) {
    ps->step++;
    /* bias corrections in double: 1 - beta^t loses digits in float for small t */
    double bc1 = 1.0 - pow(c->beta1, (double)ps->step);
    double bc2 = 1.0 - pow(c->beta2, (double)ps->step);
    AdamPass p = {ps->val, ps->grad, ps->m, ps->v, c->beta1, c->beta2, c->eps, (float)(c->lr / bc1),
                  (float)(1.0 / sqrt(bc2))};
    par_for((long)ps->n, 65536, adam_range, &p);
}
