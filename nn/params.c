/* nn/params.c: the flat parameter buffers and their named views. */
#include "nn/params.h"

#include <stdio.h>
#include <string.h>

#include "nn/core.h"

void params_init(ParamSet *ps) { memset(ps, 0, sizeof *ps); }

int params_add(ParamSet *ps, const char *name, int rows, int cols) {
    NN_CHECK(!ps->val, "params_add(%s): parameters already allocated", name);
    NN_CHECK(rows > 0 && cols > 0, "params_add(%s): bad shape (%d,%d)", name, rows, cols);
    NN_CHECK(params_find(ps, name) < 0, "params_add: duplicate name %s", name);
    if (ps->n_views == ps->cap_views) {
        int cap = ps->cap_views ? 2 * ps->cap_views : 16;
        ParamView *v = nn_alloc((size_t)cap * sizeof *v);
        if (ps->n_views) memcpy(v, ps->views, (size_t)ps->n_views * sizeof *v);
        nn_free(ps->views);
        ps->views = v;
        ps->cap_views = cap;
    }
    ParamView *v = &ps->views[ps->n_views];
    memset(v, 0, sizeof *v); /* no stray bytes after the name: checkpoints are byte-reproducible */
    snprintf(v->name, sizeof v->name, "%s", name);
    v->rows = rows;
    v->cols = cols;
    /* keep every view 16-float (64-byte) aligned */
    v->off = (ps->n + 15) & ~(size_t)15;
    ps->n = v->off + (size_t)rows * cols;
    return ps->n_views++;
}

void params_alloc(ParamSet *ps) {
    NN_CHECK(!ps->val, "params_alloc: already allocated");
    ps->val = nn_calloc(ps->n, sizeof(float));
    ps->grad = nn_calloc(ps->n, sizeof(float));
    ps->m = nn_calloc(ps->n, sizeof(float));
    ps->v = nn_calloc(ps->n, sizeof(float));
    ps->step = 0;
}

void params_free(ParamSet *ps) {
    nn_free(ps->val);
    nn_free(ps->grad);
    nn_free(ps->m);
    nn_free(ps->v);
    nn_free(ps->views);
    memset(ps, 0, sizeof *ps);
}

void params_zero_grad(ParamSet *ps) { memset(ps->grad, 0, ps->n * sizeof(float)); }

Mat params_val(const ParamSet *ps, int idx) {
    NN_CHECK(idx >= 0 && idx < ps->n_views && ps->val, "params_val: bad index %d", idx);
    const ParamView *v = &ps->views[idx];
    return mat_view(ps->val + v->off, v->rows, v->cols);
}

Mat params_grad(const ParamSet *ps, int idx) {
    NN_CHECK(idx >= 0 && idx < ps->n_views && ps->grad, "params_grad: bad index %d", idx);
    const ParamView *v = &ps->views[idx];
    return mat_view(ps->grad + v->off, v->rows, v->cols);
}

int params_find(const ParamSet *ps, const char *name) {
    for (int i = 0; i < ps->n_views; i++)
        if (!strcmp(ps->views[i].name, name)) return i;
    return -1;
}
