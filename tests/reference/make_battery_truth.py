#!/usr/bin/python3
"""The pulse scenario's truth, independently of framelaw: the van der Pol oscillator
x'' = mu w (1 - x^2) x' - w^2 x with mu = 1, w = 2 pi / 1.6 (demo/battery.h), from (x, x') = (2.5, 0),
integrated by SciPy's solve_ivp (DOP853, rtol 1e-12) and sampled at 30 frames per second for 120
frames. Writes tests/reference/battery_pulse_truth.txt (t x x_dot per line), read by
tests/test_battery.c. Run with Debian's Python: /usr/bin/python3 tests/reference/make_battery_truth.py"""
import math
import numpy as np
from scipy.integrate import solve_ivp

mu, w, fps, n = 1.0, 2 * math.pi / 1.6, 30.0, 120
t = np.arange(n) / fps
sol = solve_ivp(lambda _, y: [y[1], mu * w * (1 - y[0] ** 2) * y[1] - w * w * y[0]], (0, t[-1]), [2.5, 0.0],
                method="DOP853", rtol=1e-12, atol=1e-12, t_eval=t)
with open("tests/reference/battery_pulse_truth.txt", "w") as f:
    f.write("# t x x_dot: van der Pol, mu 1, w 2 pi / 1.6, from (2.5, 0), SciPy DOP853 rtol 1e-12\n")
    for k in range(n):
        f.write("%.17g %.17g %.17g\n" % (t[k], sol.y[0][k], sol.y[1][k]))
