/* nn/act.c: activations and their first three derivatives (closed forms, common practice). */
#include "nn/act.h"

#include <math.h>
#include <string.h>

static void act_none(float x, float d[4]) { d[0] = x; d[1] = 1; d[2] = 0; d[3] = 0; }

/* s = 1/(1+e^-x) (act_sigmoid_value); s' = s(1-s); s'' = s'(1-2s); s''' = s'(1-6s+6s^2). */
static void sigmoid_from_out(float s, float d[4]) {
    float s1 = s * (1 - s);
    d[0] = s;
    d[1] = s1;
    d[2] = s1 * (1 - 2 * s);
    d[3] = s1 * (1 - 6 * s + 6 * s * s);
}

static void act_sigmoid(float x, float d[4]) { sigmoid_from_out(act_sigmoid_value(x), d); }

/* t = tanh x; t' = 1-t^2; t'' = -2t(1-t^2); t''' = -2(1-t^2)(1-3t^2). */
static void tanh_from_out(float t, float d[4]) {
    float t1 = 1 - t * t;
    d[0] = t;
    d[1] = t1;
    d[2] = -2 * t * t1;
    d[3] = -2 * t1 * (1 - 3 * t * t);
}

static void act_tanh(float x, float d[4]) { tanh_from_out(tanhf(x), d); }

/* softplus = log(1+e^x); derivatives are those of the sigmoid shifted by one order. */
static void act_softplus(float x, float d[4]) {
    float s = x >= 0 ? 1.0f / (1.0f + expf(-x)) : expf(x) / (1.0f + expf(x));
    float s1 = s * (1 - s);
    d[0] = x > 20 ? x : log1pf(expf(x));
    d[1] = s;
    d[2] = s1;
    d[3] = s1 * (1 - 2 * s);
}

/* silu = x s(x); silu' = s + x s'; silu'' = 2 s' + x s''; silu''' = 3 s'' + x s'''. */
static void act_silu(float x, float d[4]) {
    float sg[4];
    act_sigmoid(x, sg);
    d[0] = x * sg[0];
    d[1] = sg[0] + x * sg[1];
    d[2] = 2 * sg[1] + x * sg[2];
    d[3] = 3 * sg[2] + x * sg[3];
}

const ActInfo act_table[] = {
    [ACT_NONE] = {"linear", act_none, act_none},
    [ACT_SIGMOID] = {"sigmoid", act_sigmoid, sigmoid_from_out},
    [ACT_TANH] = {"tanh", act_tanh, tanh_from_out},
    [ACT_SOFTPLUS] = {"softplus", act_softplus, NULL},
    [ACT_SILU] = {"silu", act_silu, NULL},
};
_Static_assert(sizeof act_table / sizeof act_table[0] == ACT_COUNT, "one row per activation");

ActId act_from_name(const char *name) {
    for (int i = 0; i < ACT_COUNT; i++)
        if (!strcmp(name, act_table[i].name)) return (ActId)i;
    return ACT_COUNT;
}
