/* demo/battery.h: the battery of demo scenarios beyond the lantern and the convection cell: systems
 * of different classes, each filmed by a camera of its own (frame sizes from 32 to 48 pixels, some
 * with fewer than 20 frames per period, sensor noise, backgrounds that are not flat), on which
 * framelaw's defaults are measured (docs/battery.md). The data is invented, for the demo only; the
 * physics of each is integrated by classical RK4 with DEMO_SUBSTEPS steps per frame interval.
 *
 *   spring   a weight bobbing on a coil spring, side view: the damped linear oscillator
 *            y'' = -w0^2 y - 2 zeta w0 y' (y in cm, positive downwards), w0 = 2 pi 1.3 rad/s,
 *            zeta = 0.03; 32 x 32 px at 25 fps (19.2 frames per period). Order 2, latent 1.
 *   colony   a colony seen from above in a dish, its area growing or shrinking by the logistic law
 *            A' = r A (1 - A / K), r = 0.6 per hour, K = 1 (area in units of the carrying capacity);
 *            time-lapse at 10 frames per hour, 32 x 32 px. Order 1, latent 1.
 *   pulse    a pulsing ring whose radius follows the van der Pol oscillator
 *            x'' = mu w (1 - x^2) x' - w^2 x, mu = 1, w = 2 pi / 1.6 rad/s (a limit cycle of period
 *            6.6633 / w = 1.697 s); 40 x 40 px at 30 fps. Order 2, latent 1.
 *   puck     a puck on an air table held by two pairs of springs of unequal stiffness along axes
 *            turned 30 degrees from the camera's, seen from above: two independent damped
 *            oscillators along the axes, f = 0.8 and 1.5 Hz, zeta = 0.02 and 0.03; 48 x 48 px at
 *            24 fps (16 frames per period of the faster). Order 2, latent 2.
 *
 * Each scenario: initial states of n recordings from a seeded generator, the truth at the frame
 * times (t and the state per row), and a renderer of one frame from the state. */
#ifndef DEMO_BATTERY_H
#define DEMO_BATTERY_H

#include <stddef.h>
#include <stdint.h>

#include "nn/core.h"
#include "nn/rng.h"

#define BATTERY_MAX_STATE 4
#define BATTERY_MAX_RECORDINGS 1000

typedef struct {
    double w0, zeta;            /* spring: rad/s, damping ratio */
    double r, K;                /* colony: growth rate per hour, carrying capacity */
    double mu, w;               /* pulse: van der Pol parameter, time scale rad/s */
    double f1, f2, z1, z2, axis_deg;   /* puck: frequencies Hz, damping ratios, axis angle */
} BatteryPhysics;

typedef struct {
    const char *name;
    const char *about;          /* one line for --help */
    int def_size, def_recordings, def_frames;
    double fps;
    int n_state;                /* state values per truth row (after t) */
    const char *truth_header;   /* "t,y,v" */
    int order, latent;          /* what a user would set: model.order, model.latent */
} BatteryScenario;

/* The scenarios, NULL-terminated by count. */
extern const BatteryScenario battery_scenarios[];
extern const int battery_count;
/* The scenario of that name, or NULL. */
const BatteryScenario *battery_find(const char *name);

/* The default physics (the values of the table above). */
BatteryPhysics battery_physics_default(void);

/* OdeFn of scenario s on its state (ctx: a BatteryCtx). */
typedef struct {
    const BatteryScenario *s;
    const BatteryPhysics *p;
} BatteryCtx;
void battery_rhs(double t, const double *y, double *dydt, void *ctx);

/* Initial states of n (<= BATTERY_MAX_RECORDINGS) recordings (n, s->n_state), drawn from r (documented per scenario in
 * battery.c and docs/battery.md). */
void battery_initial_states(const BatteryScenario *s, const BatteryPhysics *p, int n, Rng *r, double *y0);

/* Integrate from y0 and write out (n_frames, 1 + n_state) rows (t, state) at t_k = k / fps.
 * ST_INPUT for bad arguments; ST_RUNTIME when the integration fails. */
int battery_simulate(const BatteryScenario *s, const BatteryPhysics *p, const double *y0, int n_frames,
                     int substeps, double *out, Status *st);

/* Render one frame px (size, size) of the state (n_state values). r supplies the noise (may be NULL
 * when noise is 0). */
void battery_render(const BatteryScenario *s, int size, double noise, const double *state, Rng *r, uint8_t *px);

/* The physics as a JSON object's members (no braces), for demo.json: e.g.
 * "\"equation\": \"...\", \"w0\": 8.1681". Returns what snprintf returns. */
int battery_physics_json(const BatteryScenario *s, const BatteryPhysics *p, char *buf, size_t n);

#endif
