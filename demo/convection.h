/* demo/convection.h: the `convection` demo scenario: a laboratory convection cell (a layer of fluid
 * heated from below, one convection roll wide) seen side-on, rendered as one two-panel frame. Left: a
 * thermal camera's view of the temperature; right: a map of the signed vertical flow velocity
 * (mid-gray: still fluid, brighter: rising). docs/convection.md is the user's page.
 *
 * Physics: the three-mode truncation of Rayleigh-Benard convection between free-slip plates, which
 * gives the Lorenz system ("Deterministic Nonperiodic Flow", J. Atmos. Sci. 20, 1963; the modes
 * follow "Finite Amplitude Free Convection as an Initial Value Problem", J. Atmos. Sci. 19, 1962):
 *     X' = sigma (Y - X),   Y' = X (rho - Z) - Y,   Z' = X Y - beta Z,
 * sigma = 10, rho = 28, beta = 8/3, time in the dimensionless units of that paper. With the layer
 * depth H, x horizontal, z upward from the hot bottom plate (0 <= z <= H), a = 1/sqrt(2), the fields
 * of the truncation are
 *     a / (1 + a^2) psi / kappa        = sqrt(2) X sin(pi a x / H) sin(pi z / H)
 *     pi (Ra / Rc) theta / dT          = sqrt(2) Y cos(pi a x / H) sin(pi z / H) - Z sin(2 pi z / H)
 * with psi the stream function (u = -dpsi/dz, w = dpsi/dx), theta the departure of the temperature
 * from the linear conduction profile, dT the temperature difference across the layer, kappa the
 * thermal diffusivity and Ra / Rc = rho. The cell spans 0 <= x <= H / a (one roll). In the units the
 * frames use:
 *     temperature  T(x, z) = (T - T_top) / dT = 1 - z/H + theta / dT
 *                          = 1 - z/H + [sqrt(2) Y cos(pi a x/H) sin(pi z/H) - Z sin(2 pi z/H)] / (pi rho)
 *     velocity     w(x, z) = sqrt(2) X cos(pi a x / H) sin(pi z / H)     (units pi (1 + a^2) kappa / H)
 * X > 0 with Y > 0 is warm fluid rising on the left.
 * Integrated by classical RK4 (sparse/integrate.h), DEMO_SUBSTEPS steps per frame interval, sampled
 * every 0.01 time units; one time unit is one second of "video" (CONVECTION_FPS = 100).
 *
 * Camera: frame height N pixels (the layer depth), each panel P = round(N sqrt(2)) pixels wide (the
 * cell's aspect 1/a), panels separated by a black gap of G = max(1, round(N / 16)) columns: the
 * frame is N x (2 P + G). Pixel (i, j) of a panel samples the fields at its centre,
 * x = (j + 0.5) / P * H / a, z = H (1 - (i + 0.5) / N) (top row: the cold plate). Response (a
 * saturating camera): temperature 0.5 + 0.5 tanh(2 (T - 0.5)); velocity 0.5 + 0.5 tanh(w / 20).
 * Then Gaussian sensor noise of standard deviation `noise` (fraction of full scale), clamp to [0, 1],
 * round to 8 bits. */
#ifndef DEMO_CONVECTION_H
#define DEMO_CONVECTION_H

#include <stdint.h>

#include "nn/core.h"
#include "nn/rng.h"

#define CONVECTION_FPS 100.0        /* frames per time unit (dt = 0.01); one time unit = one second */
#define CONVECTION_ASPECT 0.70710678118654752440   /* a = 1 / sqrt(2) */

typedef struct {
    double sigma, rho, beta;
} LorenzParams;

/* sigma 10, rho 28, beta 8/3. */
LorenzParams lorenz_params_default(void);

/* OdeFn on y = (X, Y, Z). ctx: LorenzParams. */
void convection_rhs(double t, const double *y, double *dydt, void *ctx);

/* Initial states of n recordings, xyz (n, 3): X, Y uniform in [-15, 15], Z uniform in [5, 40]. */
void convection_initial_states(int n, Rng *r, double *xyz);

/* Integrate from y0 (3) at t = 0 and write out (n_frames, 4) rows (t, X, Y, Z) at t_k = k / fps
 * (fps: frames per time unit, CONVECTION_FPS for the demo), with `substeps` RK4 steps per frame
 * interval. ST_INPUT for arguments out of range; ST_RUNTIME when the state leaves |.| <= 1e6 or
 * stops being finite. */
int convection_simulate(const LorenzParams *p, const double *y0, double fps, int n_frames, int substeps,
                        double *out, Status *st);

/* The fields at (x / H, z / H) for the state (X, Y, Z), in the units above. */
double convection_temperature(const LorenzParams *p, const double *xyz, double xh, double zh);
double convection_velocity(const double *xyz, double xh, double zh);

typedef struct {
    int height;         /* N, pixels */
    int panel_w;        /* P */
    int gap;            /* G */
    int width;          /* 2 P + G */
    double noise;       /* sensor noise standard deviation, fraction of full scale */
    double temp_gain;   /* 2: temperature response 0.5 + 0.5 tanh(gain (T - 0.5)) */
    double vel_scale;   /* 20: velocity response 0.5 + 0.5 tanh(w / scale) */
} ConvectionCamera;

/* The camera above for a panel height N (N >= 4). */
ConvectionCamera convection_camera(int height, double noise);

/* Render one frame px (height, width), row-major from the top-left. r supplies the noise (NULL
 * allowed when cam->noise is 0). */
void convection_render(const ConvectionCamera *cam, const LorenzParams *p, const double *xyz, Rng *r,
                       uint8_t *px);

#endif
