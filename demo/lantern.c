/* demo/lantern.c: see lantern.h. */
#include "demo/lantern.h"

#include <math.h>

#include "demo/elliptic.h"
#include "sparse/integrate.h"

LanternPhysics lantern_physics_default(void) {
    LanternPhysics p = {LANTERN_G, 0.5, 0.1};
    return p;
}

void lantern_rhs(double t, const double *y, double *dydt, void *ctx) {
    (void)t;
    const LanternPhysics *p = ctx;
    dydt[0] = y[1];
    dydt[1] = -(p->g / p->L) * sin(y[0]) - p->c * y[1];
}

double lantern_energy(const LanternPhysics *p, double theta, double theta_dot) {
    return 0.5 * theta_dot * theta_dot + (p->g / p->L) * (1 - cos(theta));
}

double lantern_period(const LanternPhysics *p, double amp) {
    double k = sin(0.5 * amp);
    return 4 * sqrt(p->L / p->g) * ellip_k(k * k);
}

void lantern_initial_states(const LanternPhysics *p, int n, Rng *r, double *theta0, double *theta_dot0,
                            double *amp) {
    const double deg = M_PI / 180;
    long *order = nn_alloc(sizeof *order * (size_t)(n > 0 ? n : 1));
    for (int k = 0; k < n; k++) order[k] = k;
    rng_shuffle(r, order, n);
    for (int k = 0; k < n; k++) {
        double frac = n > 1 ? (double)order[k] / (n - 1) : 0.5;
        double a = (LANTERN_AMP_MIN_DEG + frac * (LANTERN_AMP_MAX_DEG - LANTERN_AMP_MIN_DEG)) * deg;
        double phi = 2 * M_PI * rng_uniform(r);
        double th = a * cos(phi);
        double speed = sqrt(fmax(0, 2 * (p->g / p->L) * (cos(th) - cos(a))));
        theta0[k] = th;
        theta_dot0[k] = sin(phi) >= 0 ? -speed : speed;
        if (amp) amp[k] = a;
    }
    nn_free(order);
}

int lantern_simulate(const LanternPhysics *p, double theta0, double theta_dot0, double fps, int n_frames,
                     int substeps, double *out, Status *st) {
    if (!(p->g > 0 && p->L > 0 && p->c >= 0 && isfinite(p->g + p->L + p->c)))
        return status_set(st, ST_INPUT, "lantern: need g > 0, L > 0, c >= 0 (got %g, %g, %g)", p->g, p->L, p->c);
    if (!(fps > 0 && isfinite(fps)) || n_frames < 1 || substeps < 1)
        return status_set(st, ST_INPUT, "lantern: need fps > 0, frames >= 1, substeps >= 1 (got %g, %d, %d)", fps,
                          n_frames, substeps);
    if (!(fabs(theta0) < M_PI && isfinite(theta_dot0)))
        return status_set(st, ST_INPUT, "lantern: start angle %g rad is not inside (-pi, pi)", theta0);
    double *t = nn_alloc(sizeof(double) * (size_t)n_frames);
    double *y = nn_alloc(sizeof(double) * 2 * (size_t)n_frames);   /* (n_frames, 2) */
    for (int k = 0; k < n_frames; k++) t[k] = k / fps;
    OdeOptions o = ode_defaults();
    o.method = ODE_RK4;
    o.h = 1 / (fps * substeps);
    OdeReport rep;
    double y0[2] = {theta0, theta_dot0};
    LanternPhysics pc = *p;
    int code = ode_solve(lantern_rhs, &pc, 2, 0, y0, t, n_frames, y, NULL, &o, &rep, st);
    for (int k = 0; !code && k < n_frames; k++) {
        if (!(fabs(y[2 * k]) < M_PI)) {
            code = status_set(st, ST_INPUT,
                              "lantern: the swing from theta %g rad, theta' %g rad/s goes over the top at t = %g s",
                              theta0, theta_dot0, t[k]);
            break;
        }
        out[3 * k] = t[k];
        out[3 * k + 1] = y[2 * k];
        out[3 * k + 2] = y[2 * k + 1];
    }
    nn_free(t);
    nn_free(y);
    return code;
}

LanternCamera lantern_camera(int size, double noise) {
    LanternCamera c;
    double w = size;
    c.size = size;
    c.noise = noise;
    c.rod_px = 0.40 * w;
    c.pivot_x = 0.5 * w;
    c.pivot_y = 0.5 * w - 0.5 * (1 - cos(M_PI / 6)) * c.rod_px;
    c.rod_half = fmax(0.5, 0.012 * w);
    c.bob_r = 0.06 * w;
    c.hub_r = 0.025 * w;
    c.level_bg = 0.10;
    c.level_hub = 0.35;
    c.level_rod = 0.40;
    c.level_bob = 0.95;
    c.vignette = 0.25;
    return c;
}

void lantern_camera_project(const LanternCamera *cam, double theta, double *x, double *y) {
    *x = cam->pivot_x + cam->rod_px * sin(theta);
    *y = cam->pivot_y + cam->rod_px * cos(theta);
}

static double clamp01(double v) { return v < 0 ? 0 : v > 1 ? 1 : v; }

/* Distance from (x, y) to the segment (ax, ay)-(bx, by). */
static double dist_segment(double x, double y, double ax, double ay, double bx, double by) {
    double dx = bx - ax, dy = by - ay, l2 = dx * dx + dy * dy;
    double s = l2 > 0 ? ((x - ax) * dx + (y - ay) * dy) / l2 : 0;
    s = s < 0 ? 0 : s > 1 ? 1 : s;
    double ex = x - (ax + s * dx), ey = y - (ay + s * dy);
    return sqrt(ex * ex + ey * ey);
}

void lantern_render(const LanternCamera *cam, double theta, Rng *r, uint8_t *px) {
    int w = cam->size;
    double bx, by;
    lantern_camera_project(cam, theta, &bx, &by);
    double cx = 0.5 * w, cy = 0.5 * w, rc2 = 2 * cx * cx;   /* frame centre; squared corner radius */
    for (int i = 0; i < w; i++) {
        double y = i + 0.5;
        for (int j = 0; j < w; j++) {
            double x = j + 0.5;
            double v = cam->level_bg;
            double cov = clamp01(cam->hub_r + 0.5 - hypot(x - cam->pivot_x, y - cam->pivot_y));
            v += cov * (cam->level_hub - v);
            cov = clamp01(cam->rod_half + 0.5 - dist_segment(x, y, cam->pivot_x, cam->pivot_y, bx, by));
            v += cov * (cam->level_rod - v);
            cov = clamp01(cam->bob_r + 0.5 - hypot(x - bx, y - by));
            v += cov * (cam->level_bob - v);
            v *= 1 - cam->vignette * ((x - cx) * (x - cx) + (y - cy) * (y - cy)) / rc2;
            if (cam->noise > 0) v += cam->noise * rng_normal(r);
            px[(long)i * w + j] = (uint8_t)lrint(255 * clamp01(v));
        }
    }
}
