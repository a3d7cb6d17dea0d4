/* sparse/verify.h: properties of a model that do not depend on its coordinates, for checking a
 * learned law against the physics (docs/lantern.md, docs/convection.md).
 *
 * - The period of an oscillation: the mean time between successive upward crossings of a reference
 *   level by one state component (the level halfway between the component's extremes over the
 *   first swing, so any shift or scale of the coordinate gives the same period).
 * - The period of a swing released at rest: twice the time from the release (a turning point) to
 *   the next turning point of the component (where its derivative changes sign; a monotone change
 *   of coordinate keeps turning points where they are). With damping this is the period at the
 *   swing's own amplitude, before the amplitude has decayed much; the mean period over many swings
 *   would drift towards the small-swing period.
 * - The decay rate of an oscillation: with peak-to-peak amplitudes p_k (a maximum of y_i less the
 *   minimum that follows it, so no equilibrium level is needed) at times t_k, minus the slope of
 *   log p_k against t_k (least squares); for a lightly damped oscillator x'' = -w^2 x - c x' the
 *   amplitude decays as exp(-c t / 2) (common practice: the damped harmonic oscillator).
 * - The largest Lyapunov exponent by the two-trajectory method with renormalisation ("Lyapunov
 *   Characteristic Exponents for smooth dynamical systems ...", Meccanica 1980 describes the
 *   tangent-space method; the renormalised-separation form used here is common practice): a
 *   companion trajectory at distance d0 is integrated alongside, and every `renorm` time units the
 *   log of the separation growth is summed and the companion pulled back to distance d0.
 * All integrate with fixed-step RK4 of step h (sparse/integrate.h). */
#ifndef SPARSE_VERIFY_H
#define SPARSE_VERIFY_H

#include "nn/core.h"
#include "sparse/integrate.h"

/* Mean period of y[i] over [0, t_max] from y0; ST_RUNTIME when fewer than two upward crossings
 * occur or the state blows up (message says which). */
int verify_period(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *period,
                  Status *st);

/* Period of the first swing of y[i] from y0 (a state at rest): twice the time to the first turning
 * point after t = 0, located by a parabola through the three samples around it; searched up to
 * t_max. ST_RUNTIME when there is none or the state blows up. */
int verify_swing_period(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *period,
                        Status *st);

/* Decay rate of the amplitude of y[i] (1/s: amplitude ~ exp(-rate t)) over [0, t_max]. */
int verify_decay_rate(OdeFn f, void *ctx, int n, const double *y0, int i, double t_max, double h, double *rate,
                      Status *st);

/* Largest Lyapunov exponent: skip t_transient, then average over t_total. */
int verify_lyapunov(OdeFn f, void *ctx, int n, const double *y0, double t_transient, double t_total, double h,
                    double renorm, double *lambda, Status *st);

/* A fixed point of y' = f(y) near y0 by Newton's method with a central-difference Jacobian (step
 * 1e-6 (1 + |y_i|)): y (n) receives it. ST_RUNTIME when it does not converge to |f| <= 1e-9 (1 +
 * |f(y0)|) within 50 iterations, or the Jacobian is singular. */
int verify_fixed_point(OdeFn f, void *ctx, int n, const double *y0, double *y, Status *st);

/* Eigenvalues (re, im: n each) of the Jacobian of f at y (central differences as above), by LAPACK
 * dgeev; sorted by imaginary part, then real part. ST_RUNTIME when LAPACK fails. The linearisation
 * of a law at a fixed point does not depend on the coordinates: a smooth change of variables turns
 * the Jacobian into a similar matrix (common practice: the Hartman-Grobman setting). */
int verify_jacobian_eigs(OdeFn f, void *ctx, int n, const double *y, double *re, double *im, Status *st);

/* Period and size of the cycle a trajectory from y0 settles on: integrate t_settle, then measure the
 * mean period of y[i] over t_measure (as verify_period) and the peak-to-peak range of y[i] over that
 * time (*range). ST_RUNTIME when the state blows up or does not oscillate. */
int verify_cycle(OdeFn f, void *ctx, int n, const double *y0, int i, double t_settle, double t_measure, double h,
                 double *period, double *range, Status *st);

#endif
