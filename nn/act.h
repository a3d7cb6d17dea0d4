/* nn/act.h: smooth activations with the derivatives the tangent rule needs.
 *
 * The dense layer with tangents needs s, s' and s'' forward, and s''' for the backward of the
 * second tangent. Each activation is one row of a table; ACT_NONE is the identity. */
#ifndef NN_ACT_H
#define NN_ACT_H

#include <math.h>

typedef enum { ACT_NONE, ACT_SIGMOID, ACT_TANH, ACT_SOFTPLUS, ACT_SILU, ACT_COUNT } ActId;

/* d[0..3] = s(x), s'(x), s''(x), s'''(x). */
typedef void (*ActFn)(float x, float d[4]);
/* The same derivatives from the output y = s(x) alone (d[0] = y), for activations whose derivatives
 * are functions of their value: the backward of a fused layer then needs no exp. Bit-identical to
 * the ActFn's d[1..3] at y = d[0] of that ActFn. */
typedef void (*ActFromOut)(float y, float d[4]);

typedef struct {
    const char *name;
    ActFn fn;
    ActFromOut from_out;    /* NULL when the derivatives need x */
} ActInfo;

extern const ActInfo act_table[]; /* ACT_COUNT rows */

/* c ? a : b by bit masks, without a branch: compilers then vectorise the loops around it (a select
 * of floats becomes a branch around trapping float operations, which blocks vectorisation). */
static inline float act_select(int c, float a, float b) {
    union { float f; unsigned u; } x = {a}, y = {b}, r;
    unsigned m = 0u - (unsigned)(c != 0);
    r.u = (x.u & m) | (y.u & ~m);
    return r.f;
}

/* exp(t) for t <= 0 without a library call, so that loops over it vectorise: the classic float
 * scheme (as in Cephes' expf): n = round(t / ln 2) by the 1.5 * 2^23 rounding trick, r = t - n ln 2
 * with ln 2 in two parts, exp(r) by a degree-7 polynomial, times 2^n built in the exponent bits.
 * Within 1 ulp of exp on [-87, 0] (every float there checked once; tests/test_nn_ops.c samples it);
 * exp(-87) = 1.6e-38 below -87; NaN stays NaN. */
static inline float act_exp_nonpos(float t) {
    t = act_select(t < -87.0f, -87.0f, t);
    float n = (t * 1.44269504088896341f + 12582912.0f) - 12582912.0f;
    float r = t - n * 0.693359375f - n * -2.12194440e-4f;
    float p = 1.9875691500e-4f;
    p = p * r + 1.3981999507e-3f;
    p = p * r + 8.3334519073e-3f;
    p = p * r + 4.1665795894e-2f;
    p = p * r + 1.6666665459e-1f;
    p = p * r + 5.0000001201e-1f;
    p = p * (r * r) + r + 1.0f;
    union { unsigned u; float f; } scale;
    scale.u = (unsigned)((int)n + 127) << 23;
    return p * scale.f;
}

/* The logistic sigmoid 1 / (1 + e^-x) from e = exp(-|x|): 1 / (1 + e) for x >= 0, e / (1 + e)
 * below (no overflow on either side). */
static inline float act_sigmoid_value(float x) {
    float e = act_exp_nonpos(-fabsf(x));
    float s = 1.0f / (1.0f + e);
    return act_select(x >= 0, s, e * s);
}

/* ACT_COUNT when the name is unknown. */
ActId act_from_name(const char *name);

#endif
