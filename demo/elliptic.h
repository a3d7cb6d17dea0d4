/* demo/elliptic.h: the complete elliptic integral of the first kind, for the exact period of a
 * pendulum at any amplitude below a full turn.
 *
 *   K(m) = integral_0^{pi/2} dphi / sqrt(1 - m sin^2 phi),     m = k^2 < 1 (the parameter; k is the
 *                                                              modulus, m = sin^2 alpha)
 *
 * computed by the arithmetic-geometric mean (Abramowitz and Stegun, Handbook of Mathematical
 * Functions, 1964, chapter 17, 17.6): a0 = 1, b0 = sqrt(1 - m), a_{n+1} = (a_n + b_n) / 2,
 * b_{n+1} = sqrt(a_n b_n), until a and b agree to machine precision; then K = pi / (2 a_N). The
 * iteration converges quadratically (under 10 rounds for m <= 1 - 1e-15). Accurate to a few units in
 * the last place against A&S table 17.1 (tests/test_demo.c).
 *
 * The period of an undamped pendulum theta'' = -(g/L) sin(theta) swinging with amplitude theta0
 * (|theta0| < pi) is T = 4 sqrt(L/g) K(sin^2(theta0 / 2)) (any mechanics text): note the argument
 * is the parameter m = k^2 with the modulus k = sin(theta0 / 2). lantern_period (demo/lantern.h)
 * wraps it. */
#ifndef DEMO_ELLIPTIC_H
#define DEMO_ELLIPTIC_H

/* K(m) for m < 1; +infinity at m = 1; NaN for m > 1 or NaN. */
double ellip_k(double m);

#endif
