/* demo/convection.c: see convection.h. */
#include "demo/convection.h"

#include <math.h>

#include "sparse/integrate.h"

LorenzParams lorenz_params_default(void) {
    LorenzParams p = {10.0, 28.0, 8.0 / 3.0};
    return p;
}

void convection_rhs(double t, const double *y, double *dydt, void *ctx) {
    (void)t;
    const LorenzParams *p = ctx;
    dydt[0] = p->sigma * (y[1] - y[0]);
    dydt[1] = y[0] * (p->rho - y[2]) - y[1];
    dydt[2] = y[0] * y[1] - p->beta * y[2];
}

void convection_initial_states(int n, Rng *r, double *xyz) {
    for (int k = 0; k < n; k++) {
        xyz[3 * k] = -15 + 30 * rng_uniform(r);
        xyz[3 * k + 1] = -15 + 30 * rng_uniform(r);
        xyz[3 * k + 2] = 5 + 35 * rng_uniform(r);
    }
}

int convection_simulate(const LorenzParams *p, const double *y0, double fps, int n_frames, int substeps,
                        double *out, Status *st) {
    if (!(p->sigma > 0 && p->rho > 0 && p->beta > 0 && isfinite(p->sigma + p->rho + p->beta)))
        return status_set(st, ST_INPUT, "convection: need sigma, rho, beta > 0 (got %g, %g, %g)", p->sigma, p->rho,
                          p->beta);
    if (!(fps > 0 && isfinite(fps)) || n_frames < 1 || substeps < 1)
        return status_set(st, ST_INPUT, "convection: need fps > 0, frames >= 1, substeps >= 1 (got %g, %d, %d)", fps,
                          n_frames, substeps);
    double *t = nn_alloc(sizeof(double) * (size_t)n_frames);
    double *y = nn_alloc(sizeof(double) * 3 * (size_t)n_frames);   /* (n_frames, 3) */
    for (int k = 0; k < n_frames; k++) t[k] = k / fps;
    OdeOptions o = ode_defaults();
    o.method = ODE_RK4;
    o.h = 1 / (fps * substeps);
    o.bound = 1e6;
    OdeReport rep;
    LorenzParams pc = *p;
    int code = ode_solve(convection_rhs, &pc, 3, 0, y0, t, n_frames, y, NULL, &o, &rep, st);
    for (int k = 0; !code && k < n_frames; k++) {
        out[4 * k] = t[k];
        for (int i = 0; i < 3; i++) out[4 * k + 1 + i] = y[3 * k + i];
    }
    nn_free(t);
    nn_free(y);
    return code;
}

double convection_temperature(const LorenzParams *p, const double *xyz, double xh, double zh) {
    double a = CONVECTION_ASPECT;
    double dev = M_SQRT2 * xyz[1] * cos(M_PI * a * xh) * sin(M_PI * zh) - xyz[2] * sin(2 * M_PI * zh);
    return 1 - zh + dev / (M_PI * p->rho);
}

double convection_velocity(const double *xyz, double xh, double zh) {
    return M_SQRT2 * xyz[0] * cos(M_PI * CONVECTION_ASPECT * xh) * sin(M_PI * zh);
}

ConvectionCamera convection_camera(int height, double noise) {
    ConvectionCamera c;
    c.height = height;
    c.panel_w = (int)lrint(height * M_SQRT2);
    c.gap = (int)lrint(height / 16.0);
    if (c.gap < 1) c.gap = 1;
    c.width = 2 * c.panel_w + c.gap;
    c.noise = noise;
    c.temp_gain = 2.0;
    c.vel_scale = 20.0;
    return c;
}

static uint8_t to_u8(double v, double noise, Rng *r) {
    if (noise > 0) v += noise * rng_normal(r);
    v = v < 0 ? 0 : v > 1 ? 1 : v;
    return (uint8_t)lrint(255 * v);
}

void convection_render(const ConvectionCamera *cam, const LorenzParams *p, const double *xyz, Rng *r,
                       uint8_t *px) {
    int n = cam->height, pw = cam->panel_w, w = cam->width;
    double cell = 1 / CONVECTION_ASPECT;   /* cell width / H */
    for (int i = 0; i < n; i++) {
        double zh = 1 - (i + 0.5) / n;
        uint8_t *row = px + (long)i * w;
        for (int j = 0; j < pw; j++) {
            double xh = (j + 0.5) / pw * cell;
            double tv = convection_temperature(p, xyz, xh, zh);
            double wv = convection_velocity(xyz, xh, zh);
            row[j] = to_u8(0.5 + 0.5 * tanh(cam->temp_gain * (tv - 0.5)), cam->noise, r);
            row[pw + cam->gap + j] = to_u8(0.5 + 0.5 * tanh(wv / cam->vel_scale), cam->noise, r);
        }
        for (int j = pw; j < pw + cam->gap; j++) row[j] = 0;
    }
}
