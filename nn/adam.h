/* nn/adam.h: Adam with bias correction ("Adam: A Method for Stochastic Optimization", ICLR 2015,
 * Algorithm 1):
 *   t <- t + 1
 *   m <- beta1 m + (1 - beta1) g;   v <- beta2 v + (1 - beta2) g^2
 *   m_hat = m / (1 - beta1^t);      v_hat = v / (1 - beta2^t)
 *   theta <- theta - lr m_hat / (sqrt(v_hat) + eps)                                             */
#ifndef NN_ADAM_H
#define NN_ADAM_H

#include "nn/params.h"

typedef struct {
    float lr, beta1, beta2, eps;
} AdamCfg;

static inline AdamCfg adam_defaults(void) { AdamCfg c = {1e-3f, 0.9f, 0.999f, 1e-8f}; return c; }

/* One step over every parameter, using ps->grad. Increments ps->step. */
void adam_step(ParamSet *ps, const AdamCfg *cfg);

#endif
