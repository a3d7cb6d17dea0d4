/* nn/act.h: smooth activations with the derivatives the tangent rule needs.
 *
 * The dense layer with tangents needs s, s' and s'' forward, and s''' for the backward of the
 * second tangent. Each activation is one row of a table; ACT_NONE is the identity. */
#ifndef NN_ACT_H
#define NN_ACT_H

typedef enum { ACT_NONE, ACT_SIGMOID, ACT_TANH, ACT_SOFTPLUS, ACT_SILU, ACT_COUNT } ActId;

/* d[0..3] = s(x), s'(x), s''(x), s'''(x). */
typedef void (*ActFn)(float x, float d[4]);

typedef struct {
    const char *name;
    ActFn fn;
} ActInfo;

extern const ActInfo act_table[ACT_COUNT];

/* ACT_COUNT when the name is unknown. */
ActId act_from_name(const char *name);

#endif
