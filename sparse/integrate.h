/* sparse/integrate.h: integration of ordinary differential equations in double precision.
 *
 * Any first-order system y' = f(t, y) is integrated by
 *   ODE_RK4     the classical fourth-order Runge-Kutta method with a fixed step h;
 *   ODE_DOPRI5  the embedded Runge-Kutta pair of order 5(4) of "A family of embedded Runge-Kutta
 *               formulae" (Journal of Computational and Applied Mathematics, 1980), with the step
 *               size control of "Solving Ordinary Differential Equations I: Nonstiff Problems"
 *               (Springer, 2nd ed. 1993, section II.4): a step is accepted when
 *                   err = sqrt(mean_i (e_i / (atol + rtol max(|y_i|, |y_new_i|)))^2) <= 1,
 *               and the next step is h min(5, max(0.2, 0.9 err^(-1/5))).
 * A second-order system x'' = a(t, x, x') is integrated as the first-order system on
 * y = (x, x'), y' = (x', a) (ode_second_order_rhs).
 *
 * The solution is reported at caller-given output times t_out[0..n_out-1] (increasing, >= t0):
 * steps are shortened so that they land exactly on each output time, so no interpolation is
 * involved. RK4 divides each interval between output times into ceil(interval / h) equal steps.
 *
 * After every step the state is checked: a non-finite component or one with |y_i| > bound stops
 * the integration with a report (time, state) instead of running on; the outputs filled so far
 * stay valid. */
#ifndef SPARSE_INTEGRATE_H
#define SPARSE_INTEGRATE_H

#include <stdint.h>

#include "nn/core.h"
#include "sparse/library.h"

/* dydt (n) = f(t, y (n)). ctx is the caller's. */
typedef void (*OdeFn)(double t, const double *y, double *dydt, void *ctx);

typedef enum { ODE_RK4, ODE_DOPRI5, ODE_METHOD_COUNT } OdeMethod;
extern const char *const ode_method_names[];    /* "rk4", "dopri5" */
OdeMethod ode_method_from_name(const char *name);               /* ODE_METHOD_COUNT if unknown */

typedef struct {
    OdeMethod method;
    double h;           /* RK4: the step; DOPRI5: the first step (0: chosen automatically) */
    double rtol, atol;  /* DOPRI5 tolerances */
    double h_min;       /* DOPRI5: stop when the step would fall below this (0: 1e-12 |t|-relative) */
    double h_max;       /* DOPRI5: largest step (0: no limit) */
    double bound;       /* stop when some |y_i| > bound (0: no bound, only non-finite values stop) */
    long max_steps;     /* stop after this many steps (0: no limit) */
} OdeOptions;

/* dopri5, h 0 (automatic), rtol 1e-6, atol 1e-9, no h_max, bound 0, max_steps 0. */
OdeOptions ode_defaults(void);

typedef enum {
    ODE_DONE,           /* reached the last output time */
    ODE_NONFINITE,      /* a state component became NaN or infinite */
    ODE_OUT_OF_BOUND,   /* a state component left [-bound, bound] */
    ODE_STEP_TOO_SMALL, /* DOPRI5 could not meet the tolerance with a step above h_min */
    ODE_MAX_STEPS,      /* step limit reached */
    ODE_STOP_COUNT
} OdeStop;
extern const char *const ode_stop_names[]; /* ODE_STOP_COUNT */

typedef struct {
    OdeStop stop;
    int n_out;          /* output rows filled (all of them when stop == ODE_DONE) */
    double t;           /* time of the last accepted, valid state */
    double t_bad;       /* time at which the state went bad (when stopped for that) */
    long steps, rejected, evals;
    char msg[512];      /* one line: why and where it stopped, with the state */
} OdeReport;

/* Integrate y' = f(t, y) from (t0, y0 (n)) and write y (n_out, n) at t_out (n_out). Returns 0 when
 * it reached the last output time; ST_RUNTIME when it stopped early (rep says why; st->msg holds
 * the same line); ST_INPUT for bad arguments. The final state goes to y_end (n) when non-NULL:
 * the last valid state when it stopped early. */
int ode_solve(OdeFn f, void *ctx, int n, double t0, const double *y0, const double *t_out, int n_out,
              double *y_out, double *y_end, const OdeOptions *opt, OdeReport *rep, Status *st);

/* A second-order system x'' = a(t, x, x') with x of size n/2. */
typedef void (*OdeAccelFn)(double t, const double *x, const double *v, double *a, void *ctx);
typedef struct {
    OdeAccelFn accel;
    void *ctx;
    int n_pos;          /* size of x */
} OdeSecondOrder;
/* OdeFn for y = (x, v) (2 n_pos): y' = (v, accel(t, x, v)). ctx is an OdeSecondOrder. */
void ode_second_order_rhs(double t, const double *y, double *dydt, void *ctx);

/* A learned sparse model as an OdeFn. The state y is the library's s: z for a first-order model
 * (y' = Theta(z) (Xi * M)) and (z, z') for a second-order one (y' = (z', Theta(z, z') (Xi * M))).
 * xi and mask (n_terms, n_latent) are the caller's (mask may be NULL). */
typedef struct {
    const Library *lib;
    const double *xi;       /* (n_terms, n_latent) */
    const uint8_t *mask;    /* (n_terms, n_latent) or NULL */
    double *theta;          /* (n_terms) work */
} LearnedOde;

void learned_ode_init(LearnedOde *m, const Library *lib, const double *xi, const uint8_t *mask);
void learned_ode_free(LearnedOde *m);
/* OdeFn: ctx is a LearnedOde; y and dydt have lib->n_vars values. */
void learned_ode_rhs(double t, const double *y, double *dydt, void *ctx);

#endif
