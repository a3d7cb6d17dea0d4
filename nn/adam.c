/* nn/adam.c: Adam, Algorithm 1 of "Adam: A Method for Stochastic Optimization" (ICLR 2015). */
#include "nn/adam.h"

#include <math.h>

void adam_step(ParamSet *ps, const AdamCfg *c) {
    ps->step++;
    /* bias corrections in double: 1 - beta^t loses digits in float for small t */
    double bc1 = 1.0 - pow(c->beta1, (double)ps->step);
    double bc2 = 1.0 - pow(c->beta2, (double)ps->step);
    float step_size = (float)(c->lr / bc1);
    float inv_sqrt_bc2 = (float)(1.0 / sqrt(bc2));
    float b1 = c->beta1, b2 = c->beta2, eps = c->eps;
    float *restrict w = ps->val, *restrict g = ps->grad, *restrict m = ps->m, *restrict v = ps->v;
    for (size_t i = 0; i < ps->n; i++) {
        m[i] = b1 * m[i] + (1 - b1) * g[i];
        v[i] = b2 * v[i] + (1 - b2) * g[i] * g[i];
        /* lr m_hat / (sqrt(v_hat) + eps) with m_hat = m/bc1, v_hat = v/bc2 */
        w[i] -= step_size * m[i] / (sqrtf(v[i]) * inv_sqrt_bc2 + eps);
    }
}
