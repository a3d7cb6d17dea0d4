/* sparse/integrate.c: RK4 and Dormand-Prince 5(4) integration (see integrate.h). */
#include "sparse/integrate.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

const char *const ode_method_names[] = {"rk4", "dopri5"};
_Static_assert(sizeof ode_method_names / sizeof ode_method_names[0] == ODE_METHOD_COUNT, "one name per method");
const char *const ode_stop_names[] = {"done", "non-finite state", "state out of bound",
                                                    "step too small", "step limit"};
_Static_assert(sizeof ode_stop_names / sizeof ode_stop_names[0] == ODE_STOP_COUNT, "one name per stop reason");

OdeMethod ode_method_from_name(const char *name) {
    for (int i = 0; i < ODE_METHOD_COUNT; i++)
        if (!strcmp(name, ode_method_names[i])) return (OdeMethod)i;
    return ODE_METHOD_COUNT;
}

OdeOptions ode_defaults(void) {
    OdeOptions o = {ODE_DOPRI5, 0.0, 1e-6, 1e-9, 0.0, 0.0, 0.0, 0};
    return o;
}

/* Dormand-Prince 5(4) tableau ("A family of embedded Runge-Kutta formulae", J. Comput. Appl.
 * Math. 1980, table 2). The fifth-order weights equal the last stage row (first same as last). */
static const double C2 = 1.0 / 5, C3 = 3.0 / 10, C4 = 4.0 / 5, C5 = 8.0 / 9;
static const double A21 = 1.0 / 5;
static const double A31 = 3.0 / 40, A32 = 9.0 / 40;
static const double A41 = 44.0 / 45, A42 = -56.0 / 15, A43 = 32.0 / 9;
static const double A51 = 19372.0 / 6561, A52 = -25360.0 / 2187, A53 = 64448.0 / 6561, A54 = -212.0 / 729;
static const double A61 = 9017.0 / 3168, A62 = -355.0 / 33, A63 = 46732.0 / 5247, A64 = 49.0 / 176,
                    A65 = -5103.0 / 18656;
static const double A71 = 35.0 / 384, A73 = 500.0 / 1113, A74 = 125.0 / 192, A75 = -2187.0 / 6784,
                    A76 = 11.0 / 84;
/* e = b5 - b4: the error estimate's weights */
static const double E1 = 71.0 / 57600, E3 = -71.0 / 16695, E4 = 71.0 / 1920, E5 = -17253.0 / 339200,
                    E6 = 22.0 / 525, E7 = -1.0 / 40;

/* 0 when every component is finite and within the bound; else the stop reason, *at the index. */
static OdeStop check_state(const double *y, int n, double bound, int *at) {
    for (int i = 0; i < n; i++) {
        if (!isfinite(y[i])) return *at = i, ODE_NONFINITE;
        if (bound > 0 && fabs(y[i]) > bound) return *at = i, ODE_OUT_OF_BOUND;
    }
    return ODE_DONE;
}

static void format_state(char *buf, size_t n, const double *y, int dim) {
    size_t len = 0;
    int shown = dim < 6 ? dim : 6;
    len += (size_t)snprintf(buf, n, "[");
    for (int i = 0; i < shown && len < n; i++)
        len += (size_t)snprintf(buf + len, n - len, "%s%.6g", i ? ", " : "", y[i]);
    if (len < n) snprintf(buf + len, n - len, "%s]", shown < dim ? ", ..." : "");
}

/* Fill rep and st for an early stop. ybad: the offending state (may equal ygood). */
static int stop_report(OdeReport *rep, Status *st, const OdeOptions *opt, OdeStop why, double t_good,
                       double t_bad, const double *ybad, int n, int at) {
    char sb[256];
    format_state(sb, sizeof sb, ybad, n);
    rep->stop = why;
    rep->t = t_good;
    rep->t_bad = t_bad;
    const char *m = ode_method_names[opt->method];
    switch (why) {
    case ODE_NONFINITE:
        snprintf(rep->msg, sizeof rep->msg, "%s: the state became non-finite at t = %.9g (component %d): y = %s",
                 m, t_bad, at + 1, sb);
        break;
    case ODE_OUT_OF_BOUND:
        snprintf(rep->msg, sizeof rep->msg, "%s: the state left the bound %g at t = %.9g (component %d): y = %s",
                 m, opt->bound, t_bad, at + 1, sb);
        break;
    case ODE_STEP_TOO_SMALL:
        snprintf(rep->msg, sizeof rep->msg,
                 "%s: the step fell below its minimum at t = %.9g (the model may blow up there): y = %s", m,
                 t_bad, sb);
        break;
    default:
        snprintf(rep->msg, sizeof rep->msg, "%s: stopped after %ld steps at t = %.9g: y = %s", m, rep->steps,
                 t_bad, sb);
        break;
    }
    return status_set(st, ST_RUNTIME, "%s", rep->msg);
}

/* Scaled RMS norm of v with weights atol + rtol |y|. */
static double wrms(const double *v, const double *y, int n, double rtol, double atol) {
    double s = 0;
    for (int i = 0; i < n; i++) {
        double w = atol + rtol * fabs(y[i]);
        double q = v[i] / w;
        s += q * q;
    }
    return sqrt(s / n);
}

/* First step: "Solving Ordinary Differential Equations I", section II.4, starting step size. */
static double initial_step(OdeFn f, void *ctx, int n, double t0, const double *y0, const double *f0,
                           double *y1, double *f1, const OdeOptions *o, long *evals) {
    double d0 = wrms(y0, y0, n, o->rtol, o->atol), d1 = wrms(f0, y0, n, o->rtol, o->atol);
    double h0 = (d0 < 1e-5 || d1 < 1e-5) ? 1e-6 : 0.01 * d0 / d1;
    for (int i = 0; i < n; i++) y1[i] = y0[i] + h0 * f0[i];
    f(t0 + h0, y1, f1, ctx);
    (*evals)++;
    for (int i = 0; i < n; i++) y1[i] = f1[i] - f0[i];
    double d2 = wrms(y1, y0, n, o->rtol, o->atol) / h0;
    double dm = d1 > d2 ? d1 : d2;
    double h1 = dm <= 1e-15 ? fmax(1e-6, h0 * 1e-3) : pow(0.01 / dm, 1.0 / 5);
    double h = fmin(100 * h0, h1);
    return isfinite(h) && h > 0 ? h : 1e-6;
}

int ode_solve(OdeFn f, void *ctx, int n, double t0, const double *y0, const double *t_out, int n_out,
              double *y_out, double *y_end, const OdeOptions *opt, OdeReport *rep, Status *st) {
    memset(rep, 0, sizeof *rep);
    rep->t = t0;
    if (n < 1 || n_out < 1) return status_set(st, ST_INPUT, "integrate: %d states, %d output times", n, n_out);
    if ((unsigned)opt->method >= ODE_METHOD_COUNT)
        return status_set(st, ST_INPUT, "integrate: unknown method %d", (int)opt->method);
    if (!isfinite(t0)) return status_set(st, ST_INPUT, "integrate: start time is not finite");
    for (int o = 0; o < n_out; o++)
        if (!isfinite(t_out[o]) || t_out[o] < (o ? t_out[o - 1] : t0))
            return status_set(st, ST_INPUT, "integrate: output time %d (%g) is not finite or goes backwards", o + 1,
                              t_out[o]);
    if (opt->method == ODE_RK4 && !(opt->h > 0 && isfinite(opt->h)))
        return status_set(st, ST_INPUT, "integrate: rk4 needs a step h > 0 (got %g)", opt->h);
    if (opt->method == ODE_DOPRI5 &&
        !(opt->rtol >= 0 && opt->atol >= 0 && opt->rtol + opt->atol > 0 && isfinite(opt->rtol + opt->atol)))
        return status_set(st, ST_INPUT, "integrate: dopri5 needs rtol, atol >= 0, not both 0 (got %g, %g)",
                          opt->rtol, opt->atol);
    int at = 0;
    OdeStop why = check_state(y0, n, opt->bound, &at);
    if (why != ODE_DONE)
        return status_set(st, ST_INPUT, "integrate: the initial state is %s (component %d)",
                          why == ODE_NONFINITE ? "not finite" : "out of bound", at + 1);

    double *mem = nn_alloc((size_t)n * 10 * sizeof *mem);
    double *y = mem, *yn = mem + n, *yt = mem + 2 * n;           /* (n) state, new state, stage */
    double *k[7];                                                /* (n) each: stage derivatives */
    for (int i = 0; i < 7; i++) k[i] = mem + (3 + i) * (long)n;
    memcpy(y, y0, (size_t)n * sizeof *y);
    double t = t0;
    int code = 0;

    if (opt->method == ODE_RK4) {
        for (int o = 0; o < n_out && !code; o++) {
            double span = t_out[o] - t;
            long steps = span > 0 ? (long)ceil(span / opt->h - 1e-9) : 0;
            if (span > 0 && steps < 1) steps = 1;
            double h = steps ? span / steps : 0;
            for (long s = 0; s < steps; s++) {
                double tc = t;
                f(tc, y, k[0], ctx);
                for (int i = 0; i < n; i++) yt[i] = y[i] + 0.5 * h * k[0][i];
                f(tc + 0.5 * h, yt, k[1], ctx);
                for (int i = 0; i < n; i++) yt[i] = y[i] + 0.5 * h * k[1][i];
                f(tc + 0.5 * h, yt, k[2], ctx);
                for (int i = 0; i < n; i++) yt[i] = y[i] + h * k[2][i];
                f(tc + h, yt, k[3], ctx);
                rep->evals += 4;
                for (int i = 0; i < n; i++) yn[i] = y[i] + h / 6 * (k[0][i] + 2 * k[1][i] + 2 * k[2][i] + k[3][i]);
                double tn = s + 1 == steps ? t_out[o] : tc + h;   /* land exactly on t_out */
                rep->steps++;
                why = check_state(yn, n, opt->bound, &at);
                if (why != ODE_DONE) {
                    code = stop_report(rep, st, opt, why, t, tn, yn, n, at);
                    break;
                }
                memcpy(y, yn, (size_t)n * sizeof *y);
                t = tn;
                rep->t = t;
                if (opt->max_steps > 0 && rep->steps >= opt->max_steps && !(o + 1 == n_out && s + 1 == steps)) {
                    code = stop_report(rep, st, opt, ODE_MAX_STEPS, t, t, y, n, 0);
                    break;
                }
            }
            if (!code) {
                memcpy(y_out + (long)o * n, y, (size_t)n * sizeof *y);
                rep->n_out = o + 1;
            }
        }
    } else {
        f(t, y, k[0], ctx);
        rep->evals++;
        double h = opt->h > 0 ? opt->h : initial_step(f, ctx, n, t, y, k[0], yn, yt, opt, &rep->evals);
        if (opt->h_max > 0 && h > opt->h_max) h = opt->h_max;
        int after_reject = 0, rhs_bad = 0;
        for (int o = 0; o < n_out && !code; o++) {
            double target = t_out[o];
            while (t < target && !code) {
                double hs = h, left = target - t;
                int last = 0;
                if (hs >= left * (1 - 1e-12)) hs = left, last = 1;
                double *K1 = k[0], *K2 = k[1], *K3 = k[2], *K4 = k[3], *K5 = k[4], *K6 = k[5], *K7 = k[6];
                for (int i = 0; i < n; i++) yt[i] = y[i] + hs * A21 * K1[i];
                f(t + C2 * hs, yt, K2, ctx);
                for (int i = 0; i < n; i++) yt[i] = y[i] + hs * (A31 * K1[i] + A32 * K2[i]);
                f(t + C3 * hs, yt, K3, ctx);
                for (int i = 0; i < n; i++) yt[i] = y[i] + hs * (A41 * K1[i] + A42 * K2[i] + A43 * K3[i]);
                f(t + C4 * hs, yt, K4, ctx);
                for (int i = 0; i < n; i++)
                    yt[i] = y[i] + hs * (A51 * K1[i] + A52 * K2[i] + A53 * K3[i] + A54 * K4[i]);
                f(t + C5 * hs, yt, K5, ctx);
                for (int i = 0; i < n; i++)
                    yt[i] = y[i] + hs * (A61 * K1[i] + A62 * K2[i] + A63 * K3[i] + A64 * K4[i] + A65 * K5[i]);
                f(t + hs, yt, K6, ctx);
                for (int i = 0; i < n; i++)
                    yn[i] = y[i] + hs * (A71 * K1[i] + A73 * K3[i] + A74 * K4[i] + A75 * K5[i] + A76 * K6[i]);
                double tn = last ? target : t + hs;
                f(tn, yn, K7, ctx);
                rep->evals += 6;
                /* error estimate, scaled by atol + rtol max(|y|, |y_new|) */
                double err = 0;
                for (int i = 0; i < n; i++) {
                    double e = hs * (E1 * K1[i] + E3 * K3[i] + E4 * K4[i] + E5 * K5[i] + E6 * K6[i] + E7 * K7[i]);
                    double w = opt->atol + opt->rtol * fmax(fabs(y[i]), fabs(yn[i]));
                    err += (e / w) * (e / w);
                }
                err = sqrt(err / n);
                if (isfinite(err) && err <= 1.0) {
                    rep->steps++;
                    why = check_state(yn, n, opt->bound, &at);
                    if (why != ODE_DONE) {
                        code = stop_report(rep, st, opt, why, t, tn, yn, n, at);
                        break;
                    }
                    double fac = err > 0 ? 0.9 * pow(err, -0.2) : 5.0;
                    fac = fmin(after_reject ? 1.0 : 5.0, fmax(0.2, fac));
                    double hn = hs * fac;
                    h = last ? fmax(h, hn) : hn;
                    if (opt->h_max > 0 && h > opt->h_max) h = opt->h_max;
                    memcpy(y, yn, (size_t)n * sizeof *y);
                    double *tmp = k[0];   /* first same as last */
                    k[0] = k[6], k[6] = tmp;
                    t = tn;
                    rep->t = t;
                    after_reject = 0, rhs_bad = 0;
                    if (opt->max_steps > 0 && rep->steps >= opt->max_steps && !(o + 1 == n_out && t >= target)) {
                        code = stop_report(rep, st, opt, ODE_MAX_STEPS, t, t, y, n, 0);
                        break;
                    }
                } else {
                    rep->rejected++;
                    after_reject = 1;
                    rhs_bad = !isfinite(err);
                    h = hs * (isfinite(err) ? fmax(0.2, 0.9 * pow(err, -0.2)) : 0.2);
                    double hmin = fmax(opt->h_min, 16 * DBL_EPSILON * fmax(fabs(t), 1e-300));
                    if (h < hmin) {
                        if (rhs_bad) {   /* name the first bad component of the trial state */
                            int bad = 0;
                            while (bad < n - 1 && isfinite(yn[bad])) bad++;
                            code = stop_report(rep, st, opt, ODE_NONFINITE, t, t + hs, yn, n, bad);
                        } else {
                            code = stop_report(rep, st, opt, ODE_STEP_TOO_SMALL, t, t, y, n, 0);
                        }
                        break;
                    }
                }
            }
            if (!code) {
                memcpy(y_out + (long)o * n, y, (size_t)n * sizeof *y);
                rep->n_out = o + 1;
            }
        }
    }
    if (y_end) memcpy(y_end, y, (size_t)n * sizeof *y);
    if (!code) {
        rep->stop = ODE_DONE;
        status_ok(st);
    }
    nn_free(mem);
    return code;
}

void ode_second_order_rhs(double t, const double *y, double *dydt, void *ctx) {
    const OdeSecondOrder *s = ctx;
    int n = s->n_pos;
    memcpy(dydt, y + n, (size_t)n * sizeof *y);
    s->accel(t, y, y + n, dydt + n, s->ctx);
}

void learned_ode_init(LearnedOde *m, const Library *lib, const double *xi, const uint8_t *mask) {
    m->lib = lib;
    m->xi = xi;
    m->mask = mask;
    m->theta = nn_alloc((size_t)lib->n_terms * sizeof *m->theta);
}

void learned_ode_free(LearnedOde *m) {
    if (m->theta) nn_free(m->theta);
    m->theta = NULL;
}

void learned_ode_rhs(double t, const double *y, double *dydt, void *ctx) {
    (void)t;
    const LearnedOde *m = ctx;
    const Library *lib = m->lib;
    int k = lib->spec.n_latent, T = lib->n_terms;
    library_eval(lib, m->theta, y, 1);
    double *out = dydt;
    if (lib->spec.order == 2) {
        memcpy(dydt, y + k, (size_t)k * sizeof *y);   /* (z)' = z' */
        out = dydt + k;
    }
    for (int j = 0; j < k; j++) {
        double s = 0;
        for (int i = 0; i < T; i++)
            if (!m->mask || m->mask[(long)i * k + j]) s += m->theta[i] * m->xi[(long)i * k + j];
        out[j] = s;
    }
}
