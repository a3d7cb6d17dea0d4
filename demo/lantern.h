/* demo/lantern.h: the `lantern` demo scenario: a lantern on a rigid rod hanging from a wall
 * bracket, swinging, filmed side-on by a fixed camera at 30 frames per second. docs/lantern.md is
 * the user's page.
 *
 * Physics (the damped rigid pendulum, any mechanics text), theta from the downward vertical,
 * positive towards +x (to the right in the frame):
 *     theta'' = -(g / L) sin(theta) - c theta'
 * with g = 9.80665 m/s^2 (standard gravity), L = 0.5 m, c = 0.1 1/s by default. The energy per unit
 * m L^2, E = theta'^2 / 2 + (g/L) (1 - cos theta), obeys dE/dt = -c theta'^2, so for small swings
 * E decays as exp(-c t) and the amplitude as exp(-c t / 2).
 * Integrated by classical RK4 (sparse/integrate.h) with DEMO_SUBSTEPS equal steps per frame
 * interval and sampled at the frame times t_k = k / fps.
 *
 * Camera (frame side W pixels; pixel (i, j), row i from the top, covers [j, j+1) x [i, i+1), centre
 * (j + 0.5, i + 0.5)): the pivot is at (W/2, py) with the rod of length R = 0.40 W pixels, so the
 * lantern's centre is at (W/2 + R sin theta, py + R cos theta). py = 0.5 W - 0.5 (1 - cos 30deg) R
 * centres the vertical extent of a 150-degree swing (which rises R cos 30deg above the pivot);
 * every swing up to 180 degrees stays in the frame with its whole disk. Scene: background 0.10,
 * bracket hub (disk of radius 0.025 W at the pivot) 0.35, rod (half-width max(0.5, 0.012 W) px)
 * 0.40, lantern (disk of radius 0.06 W) 0.95, each drawn with anti-aliased coverage
 * clamp(edge + 0.5 - distance, 0, 1) (pixels, distance from the pixel centre to the segment or the
 * disk centre) over what lies below it. The lens darkens towards the corners (vignetting
 * 1 - 0.25 (r / r_corner)^2, r from the frame centre), then Gaussian sensor noise of standard
 * deviation `noise` (fraction of full scale) is added, and the value is clamped to [0, 1] and
 * rounded to 8 bits. */
#ifndef DEMO_LANTERN_H
#define DEMO_LANTERN_H

#include <stdint.h>

#include "nn/core.h"
#include "nn/rng.h"

#define DEMO_SUBSTEPS 20            /* RK4 steps per frame interval, both scenarios */
#define LANTERN_FPS 30.0
#define LANTERN_G 9.80665           /* standard gravity, m/s^2 */
#define LANTERN_AMP_MIN_DEG 10.0    /* the recordings' amplitudes span [min, max] degrees */
#define LANTERN_AMP_MAX_DEG 150.0

typedef struct {
    double g;   /* m/s^2 */
    double L;   /* rod length (pivot to the lantern's centre), m */
    double c;   /* damping, 1/s */
} LanternPhysics;

/* g 9.80665, L 0.5, c 0.1. */
LanternPhysics lantern_physics_default(void);

/* OdeFn on y = (theta, theta'): dydt = (theta', -(g/L) sin theta - c theta'). ctx: LanternPhysics. */
void lantern_rhs(double t, const double *y, double *dydt, void *ctx);

/* Energy per unit m L^2: theta'^2 / 2 + (g/L) (1 - cos theta), in 1/s^2. */
double lantern_energy(const LanternPhysics *p, double theta, double theta_dot);

/* Period of the undamped swing with amplitude amp (radians, |amp| < pi): 4 sqrt(L/g) K(sin^2(amp/2))
 * (demo/elliptic.h). Small swings: 2 pi sqrt(L/g). */
double lantern_period(const LanternPhysics *p, double amp);

/* Initial states of n recordings. Amplitudes (the largest angle the undamped swing would reach,
 * from the energy) are spaced evenly over [10, 150] degrees (80 for n = 1) and dealt out in a
 * random order; each recording starts at a random phase of its swing: theta0 = amp cos(phi), phi
 * uniform in [0, 2 pi), and theta_dot0 = -sign(sin phi) sqrt(2 (g/L) (cos theta0 - cos amp)).
 * Damping only lowers the energy, so no recording reaches a full turn. Outputs (n) each; amp may
 * be NULL. */
void lantern_initial_states(const LanternPhysics *p, int n, Rng *r, double *theta0, double *theta_dot0,
                            double *amp);

/* Integrate from (theta0, theta_dot0) at t = 0 and write out (n_frames, 3) rows (t, theta,
 * theta_dot) at t_k = k / fps, with `substeps` RK4 steps per frame interval. ST_INPUT when an
 * argument is out of range or the swing goes over the top (|theta| >= pi at a frame) - the message
 * says when; ST_RUNTIME when the integration fails. */
int lantern_simulate(const LanternPhysics *p, double theta0, double theta_dot0, double fps, int n_frames,
                     int substeps, double *out, Status *st);

typedef struct {
    int size;           /* frame side W, pixels */
    double noise;       /* sensor noise standard deviation, fraction of full scale */
    double pivot_x, pivot_y;   /* pixels */
    double rod_px;      /* R: rod length, pixels */
    double rod_half;    /* rod half-width, pixels */
    double bob_r;       /* lantern disk radius, pixels */
    double hub_r;       /* bracket hub radius, pixels */
    double level_bg, level_hub, level_rod, level_bob;   /* scene brightness in [0, 1] */
    double vignette;    /* brightness falls by this fraction at the corners */
} LanternCamera;

/* The camera above for a W x W frame (W >= 8). */
LanternCamera lantern_camera(int size, double noise);

/* Where the lantern's centre appears for angle theta: pixel coordinates (x right, y down). */
void lantern_camera_project(const LanternCamera *cam, double theta, double *x, double *y);

/* Render one frame px (size, size), row-major from the top-left. r supplies the noise (it may be
 * NULL when cam->noise is 0). */
void lantern_render(const LanternCamera *cam, double theta, Rng *r, uint8_t *px);

#endif
