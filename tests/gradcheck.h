/* tests/gradcheck.h: gradient checks by central finite differences, shared by the suites.
 *
 * Every tensor that wants a gradient is a parameter of one ParamSet; `build` records the graph on
 * the tape and returns the scalar loss node. The analytic gradient comes from tape_backward; the
 * numerical one from (L(p + h) - L(p - h)) / 2h, one element at a time, at most `max_checked`
 * elements per tensor spread evenly over it (common practice, as in every autodiff test harness).
 *
 * Error measure: |analytic - numeric| / (|analytic| + |numeric| + floor), which stays sane near zero
 * (the floor keeps tiny gradients from failing on rounding noise). Elements closer than 2h to a
 * kink of the op (callback `at_kink`) are skipped explicitly. */
#ifndef GRADCHECK_H
#define GRADCHECK_H

#include "nn/params.h"
#include "nn/tape.h"
#include "tests/testutil.h"

typedef Node *(*GcBuild)(Tape *t, ParamSet *ps, void *ctx);

typedef struct {
    float h;            /* step */
    float tol;          /* largest error measure allowed */
    float floor;        /* floor in the error measure */
    int max_checked;    /* per tensor */
    int (*at_kink)(float value, float h);
} GcOpts;

static inline float gc_loss(Tape *t, ParamSet *ps, GcBuild build, void *ctx) {
    tape_reset(t);
    Node *loss = build(t, ps, ctx);
    return loss->val.d[0];
}

/* Returns the worst error measure seen; fails the test when it exceeds opts->tol. */
static inline double gradcheck(Tape *t, ParamSet *ps, GcBuild build, void *ctx, const GcOpts *o) {
    tape_reset(t);
    params_zero_grad(ps);
    Node *loss = build(t, ps, ctx);
    tape_backward(t, loss);
    float *an = malloc(ps->n * sizeof(float));
    memcpy(an, ps->grad, ps->n * sizeof(float));
    double worst = 0;
    for (int v = 0; v < ps->n_views; v++) {
        const ParamView *pv = &ps->views[v];
        long n = (long)pv->rows * pv->cols;
        long stride = n > o->max_checked ? n / o->max_checked : 1;
        for (long i = 0; i < n; i += stride) {
            float *p = &ps->val[pv->off + i];
            float keep = *p;
            if (o->at_kink && o->at_kink(keep, o->h)) continue;
            *p = keep + o->h;
            double lp = gc_loss(t, ps, build, ctx);
            *p = keep - o->h;
            double lm = gc_loss(t, ps, build, ctx);
            *p = keep;
            double num = (lp - lm) / (2.0 * o->h), a = an[pv->off + i];
            double err = fabs(a - num) / (fabs(a) + fabs(num) + o->floor);
            if (err > worst) worst = err;
            if (err > o->tol) {
                free(an);
                fail_msg("gradient of %s[%ld]: analytic %.7g, numeric %.7g (error %.3g > %.3g)", pv->name, i, a,
                         num, err, (double)o->tol);
            }
        }
    }
    free(an);
    return worst;
}

#endif
