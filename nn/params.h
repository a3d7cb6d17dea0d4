/* nn/params.h: trainable parameters. One flat buffer each for values, gradients and the two Adam
 * moments; every tensor (a layer's W, b, the sparse coefficients Xi) is a named view into them.
 * Zeroing gradients, the Adam step and checkpointing are then one loop or one memcpy. */
#ifndef NN_PARAMS_H
#define NN_PARAMS_H

#include <stddef.h>
#include "nn/mat.h"

#define PARAM_NAME_MAX 32

typedef struct {
    char name[PARAM_NAME_MAX];
    int rows, cols;
    size_t off;                 /* offset into the flat buffers, in floats */
} ParamView;

typedef struct {
    float *val, *grad, *m, *v;  /* (n) each, one allocation each */
    size_t n;                   /* total floats */
    ParamView *views;
    int n_views, cap_views;
    long step;                  /* Adam step count t */
} ParamSet;

void params_init(ParamSet *ps);
/* Declare a tensor before params_alloc; returns its index. */
int params_add(ParamSet *ps, const char *name, int rows, int cols);
/* Allocate the four flat buffers (zeroed) once every tensor is declared. */
void params_alloc(ParamSet *ps);
void params_free(ParamSet *ps);
void params_zero_grad(ParamSet *ps);

Mat params_val(const ParamSet *ps, int idx);
Mat params_grad(const ParamSet *ps, int idx);
int params_find(const ParamSet *ps, const char *name);   /* -1 when absent */

#endif
