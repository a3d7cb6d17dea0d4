/* demo/battery.c: see battery.h. */
#include "demo/battery.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "sparse/integrate.h"

enum { SC_SPRING, SC_COLONY, SC_PULSE, SC_PUCK };

const BatteryScenario battery_scenarios[] = {
    {"spring", "a weight bobbing on a coil spring, side view, 25 fps: a damped linear oscillator (docs/battery.md)",
     32, 12, 200, 25.0, 2, "t,y,y_dot", 2, 1},
    {"colony", "a colony growing by the logistic law in a dish, time-lapse at 10 frames per hour (docs/battery.md)",
     32, 10, 80, 10.0, 1, "t,A", 1, 1},
    {"pulse", "a ring pulsing on a limit cycle (van der Pol), 30 fps (docs/battery.md)", 40, 10, 240, 30.0, 2,
     "t,x,x_dot", 2, 1},
    {"puck", "a puck on two pairs of springs seen from above, 24 fps: two latent variables (docs/battery.md)", 48, 12,
     192, 24.0, 4, "t,u1,u1_dot,u2,u2_dot", 2, 2},
};
const int battery_count = (int)(sizeof battery_scenarios / sizeof battery_scenarios[0]);

static int index_of(const BatteryScenario *s) { return (int)(s - battery_scenarios); }

const BatteryScenario *battery_find(const char *name) {
    for (int i = 0; i < battery_count; i++)
        if (!strcmp(battery_scenarios[i].name, name)) return &battery_scenarios[i];
    return NULL;
}

BatteryPhysics battery_physics_default(void) {
    BatteryPhysics p;
    memset(&p, 0, sizeof p);
    p.w0 = 2 * M_PI * 1.3, p.zeta = 0.03;
    p.r = 0.6, p.K = 1.0;
    p.mu = 1.0, p.w = 2 * M_PI / 1.6;
    p.f1 = 0.8, p.f2 = 1.5, p.z1 = 0.02, p.z2 = 0.03, p.axis_deg = 30;
    return p;
}

void battery_rhs(double t, const double *y, double *dydt, void *ctx) {
    (void)t;
    const BatteryCtx *c = ctx;
    const BatteryPhysics *p = c->p;
    switch (index_of(c->s)) {
    case SC_SPRING:
        dydt[0] = y[1];
        dydt[1] = -p->w0 * p->w0 * y[0] - 2 * p->zeta * p->w0 * y[1];
        break;
    case SC_COLONY: dydt[0] = p->r * y[0] * (1 - y[0] / p->K); break;
    case SC_PULSE:
        dydt[0] = y[1];
        dydt[1] = p->mu * p->w * (1 - y[0] * y[0]) * y[1] - p->w * p->w * y[0];
        break;
    default: {
        double w1 = 2 * M_PI * p->f1, w2 = 2 * M_PI * p->f2;
        dydt[0] = y[1];
        dydt[1] = -w1 * w1 * y[0] - 2 * p->z1 * w1 * y[1];
        dydt[2] = y[3];
        dydt[3] = -w2 * w2 * y[2] - 2 * p->z2 * w2 * y[3];
    }
    }
}

/* n (<= BATTERY_MAX_RECORDINGS) values spread evenly over [lo, hi], dealt out in a random order. */
static void spread(int n, double lo, double hi, Rng *r, double *out) {
    long order[BATTERY_MAX_RECORDINGS];
    for (int k = 0; k < n; k++) order[k] = k;
    rng_shuffle(r, order, n);
    for (int k = 0; k < n; k++) out[k] = n > 1 ? lo + (hi - lo) * order[k] / (n - 1) : 0.5 * (lo + hi);
}

void battery_initial_states(const BatteryScenario *s, const BatteryPhysics *p, int n, Rng *r, double *y0) {
    int ns = s->n_state;
    double amp[BATTERY_MAX_RECORDINGS], amp2[BATTERY_MAX_RECORDINGS];
    int m = n < BATTERY_MAX_RECORDINGS ? n : BATTERY_MAX_RECORDINGS;
    switch (index_of(s)) {
    case SC_SPRING: /* amplitudes 1.2 to 4.2 cm, a random phase of the swing */
        spread(m, 1.2, 4.2, r, amp);
        for (int k = 0; k < n; k++) {
            double a = amp[k % m], ph = 2 * M_PI * rng_uniform(r);
            y0[k * ns] = a * cos(ph), y0[k * ns + 1] = -a * p->w0 * sin(ph);
        }
        break;
    case SC_COLONY: /* two in three start small (0.05 to 0.4 K), one in three above K (1.4 to 1.9 K) */
        spread(m, 0.0, 1.0, r, amp);
        for (int k = 0; k < n; k++)
            y0[k] = k % 3 == 2 ? p->K * (1.4 + 0.5 * amp[k % m]) : p->K * (0.05 + 0.35 * amp[k % m]);
        break;
    case SC_PULSE: /* half start inside the cycle (0.2 to 0.8), half outside (2.2 to 3.0) */
        spread(m, 0.0, 1.0, r, amp);
        for (int k = 0; k < n; k++) {
            double a = k % 2 ? 2.2 + 0.8 * amp[k % m] : 0.2 + 0.6 * amp[k % m], ph = 2 * M_PI * rng_uniform(r);
            y0[k * ns] = a * cos(ph), y0[k * ns + 1] = -a * p->w * sin(ph);
        }
        break;
    default: /* amplitudes 1 to 3 cm along each axis, random phases */
        spread(m, 1.0, 3.0, r, amp);
        spread(m, 1.0, 3.0, r, amp2);
        for (int k = 0; k < n; k++) {
            double w1 = 2 * M_PI * p->f1, w2 = 2 * M_PI * p->f2;
            double p1 = 2 * M_PI * rng_uniform(r), p2 = 2 * M_PI * rng_uniform(r);
            y0[k * ns] = amp[k % m] * cos(p1), y0[k * ns + 1] = -amp[k % m] * w1 * sin(p1);
            y0[k * ns + 2] = amp2[k % m] * cos(p2), y0[k * ns + 3] = -amp2[k % m] * w2 * sin(p2);
        }
    }
}

int battery_simulate(const BatteryScenario *s, const BatteryPhysics *p, const double *y0, int n_frames, int substeps,
                     double *out, Status *st) {
    if (n_frames < 1 || substeps < 1)
        return status_set(st, ST_INPUT, "%s: need frames >= 1 and substeps >= 1 (got %d, %d)", s->name, n_frames,
                          substeps);
    int ns = s->n_state;
    for (int i = 0; i < ns; i++)
        if (!isfinite(y0[i])) return status_set(st, ST_INPUT, "%s: the initial state is not finite", s->name);
    double *t = nn_alloc(sizeof(double) * (size_t)n_frames), *y = nn_alloc(sizeof(double) * (size_t)n_frames * ns);
    for (int k = 0; k < n_frames; k++) t[k] = k / s->fps;
    OdeOptions o = ode_defaults();
    o.method = ODE_RK4;
    o.h = 1 / (s->fps * substeps);
    OdeReport rep;
    BatteryCtx ctx = {s, p};
    int code = ode_solve(battery_rhs, &ctx, ns, 0, y0, t, n_frames, y, NULL, &o, &rep, st);
    for (int k = 0; !code && k < n_frames; k++) {
        out[(long)k * (ns + 1)] = t[k];
        for (int i = 0; i < ns; i++) out[(long)k * (ns + 1) + 1 + i] = y[(long)k * ns + i];
    }
    nn_free(t);
    nn_free(y);
    return code;
}

static double clamp01(double v) { return v < 0 ? 0 : v > 1 ? 1 : v; }

/* Coverage of a pixel centred at distance dist inside an edge at `edge` (anti-aliased). */
static double cover(double edge, double dist) { return clamp01(edge + 0.5 - dist); }

static double dist_segment(double x, double y, double ax, double ay, double bx, double by) {
    double dx = bx - ax, dy = by - ay, l2 = dx * dx + dy * dy;
    double u = l2 > 0 ? ((x - ax) * dx + (y - ay) * dy) / l2 : 0;
    u = u < 0 ? 0 : u > 1 ? 1 : u;
    double ex = x - (ax + u * dx), ey = y - (ay + u * dy);
    return sqrt(ex * ex + ey * ey);
}

void battery_render(const BatteryScenario *s, int size, double noise, const double *state, Rng *r, uint8_t *px) {
    double W = size;
    int sc = index_of(s);
    /* spring: the mass hangs 0.55 W below the top at rest, 1 cm = W / 16 px; the coil runs from the
     * anchor (0.06 W) to the mass's top in 7 turns of half-width 0.1 W */
    double cm = W / 16, my = 0.55 * W + (sc == SC_SPRING ? state[0] * cm : 0), mh = 0.09 * W, mw = 0.14 * W;
    double top = 0.06 * W, coil_end = my - mh;
    /* pulse: the ring's radius; colony: the colony's */
    double ring = 0.25 * W + 0.055 * W * (sc == SC_PULSE ? state[0] : 0);
    double col = 0.30 * W * sqrt(sc == SC_COLONY && state[0] > 0 ? state[0] : 0);
    /* puck: centre at the frame's centre plus the displacement turned by the axes' angle */
    double ca = cos(30 * M_PI / 180), sa = sin(30 * M_PI / 180);
    double ux = sc == SC_PUCK ? state[0] : 0, uy = sc == SC_PUCK ? state[2] : 0;
    double pxc = 0.5 * W + (ca * ux - sa * uy) * W / 16, pyc = 0.5 * W + (sa * ux + ca * uy) * W / 16;
    for (int i = 0; i < size; i++) {
        double y = i + 0.5;
        for (int j = 0; j < size; j++) {
            double x = j + 0.5, v;
            switch (sc) {
            case SC_SPRING: {
                v = 0.25 + 0.06 * sin(0.7 * x * 32 / W) * cos(0.45 * y * 32 / W) + 0.08 * y / W; /* wall */
                /* the coil: a zigzag of 14 segments between the anchor and the mass */
                double best = INFINITY;
                for (int k = 0; k < 14; k++) {
                    double y0 = top + (coil_end - top) * k / 14.0, y1 = top + (coil_end - top) * (k + 1) / 14.0;
                    double x0 = 0.5 * W + (k % 2 ? 0.1 : -0.1) * W * (k ? 1 : 0);
                    double x1 = 0.5 * W + (k % 2 ? -0.1 : 0.1) * W * (k + 1 < 14 ? 1 : 0);
                    double d = dist_segment(x, y, x0, y0, x1, y1);
                    if (d < best) best = d;
                }
                v += cover(0.35, best) * (0.60 - v);
                double dx = fabs(x - 0.5 * W) / mw, dy = fabs(y - my) / mh; /* a rounded block */
                double e = pow(pow(dx, 4) + pow(dy, 4), 0.25);
                v += clamp01((1 - e) * fmin(mw, mh) + 0.5) * (0.88 - v);
                break;
            }
            case SC_COLONY: {
                double rr = hypot(x - 0.5 * W, y - 0.5 * W);
                v = 0.08 + 0.08 * (x + y) / (2 * W) + /* the bench, lit from one side, and the dish */
                    cover(0.46 * W, rr) * (0.18 + 0.05 * cos(0.5 * x * 32 / W) * cos(0.5 * y * 32 / W));
                v += (0.45 + 0.04 * sin(1.3 * x * 32 / W + 0.7 * y * 32 / W)) / (1 + exp((rr - col) / 0.7));
                break;
            }
            case SC_PULSE: {
                double rr = hypot(x - 0.5 * W, y - 0.5 * W);
                v = 0.2 + 0.1 * x / W + 0.05 * sin(0.9 * y * 40 / W);
                v += 0.6 * exp(-((rr - ring) / (0.0325 * W)) * ((rr - ring) / (0.0325 * W)));
                break;
            }
            default: {
                double gx = fmod(x, W / 6), gy = fmod(y, W / 6);  /* the table's faint grid */
                v = 0.26 + 0.08 * y / W + 0.05 * (gx < 0.8 || gy < 0.8); /* lit from the far side */
                double rr = hypot(x - pxc, y - pyc);
                v += cover(0.07 * W, rr) * (0.90 - v);
                v += cover(0.025 * W, rr) * (0.45 - v);  /* a dark cap in the puck's centre */
            }
            }
            if (noise > 0) v += noise * rng_normal(r);
            px[(long)i * size + j] = (uint8_t)lrint(255 * clamp01(v));
        }
    }
}

int battery_physics_json(const BatteryScenario *s, const BatteryPhysics *p, char *buf, size_t n) {
    switch (index_of(s)) {
    case SC_SPRING:
        return snprintf(buf, n, "\"equation\": \"y'' = -w0^2 y - 2 zeta w0 y'\", \"w0\": %.17g, \"zeta\": %.17g", p->w0,
                        p->zeta);
    case SC_COLONY:
        return snprintf(buf, n, "\"equation\": \"A' = r A (1 - A / K)\", \"r\": %.17g, \"K\": %.17g", p->r, p->K);
    case SC_PULSE:
        return snprintf(buf, n, "\"equation\": \"x'' = mu w (1 - x^2) x' - w^2 x\", \"mu\": %.17g, \"w\": %.17g", p->mu,
                        p->w);
    default:
        return snprintf(buf, n,
                        "\"equation\": \"u1'' = -w1^2 u1 - 2 z1 w1 u1', u2'' = -w2^2 u2 - 2 z2 w2 u2', w = 2 pi f\", "
                        "\"f1\": %.17g, \"f2\": %.17g, \"z1\": %.17g, \"z2\": %.17g, \"axis_deg\": %.17g",
                        p->f1, p->f2, p->z1, p->z2, p->axis_deg);
    }
}
