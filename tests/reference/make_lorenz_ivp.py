#!/usr/bin/python3
"""Writes tests/reference/lorenz_ivp.txt: a short horizon of the Lorenz system solved by SciPy.

System: "Deterministic Nonperiodic Flow", Journal of the Atmospheric Sciences, 1963, with
sigma = 10, rho = 28, beta = 8/3:  x' = sigma (y - x),  y' = x (rho - z) - y,  z' = x y - beta z.
Start (1, 1, 1) at t = 0; outputs at t = 0, 0.05, ..., 2.
Solver: scipy.integrate.solve_ivp (Debian package python3-scipy) with method='DOP853',
rtol = 1e-13, atol = 1e-13, so the reference is far more accurate than the checks that use it.
Run from the repository root:  python3 tests/reference/make_lorenz_ivp.py
Line format: t x y z   (repr floats, one output time per line).
"""
import os

import numpy as np
import scipy
from scipy.integrate import solve_ivp

SIGMA, RHO, BETA = 10.0, 28.0, 8.0 / 3.0


def lorenz(t, s):
    x, y, z = s
    return [SIGMA * (y - x), x * (RHO - z) - y, x * y - BETA * z]


t_eval = np.linspace(0.0, 2.0, 41)
sol = solve_ivp(lorenz, (0.0, 2.0), [1.0, 1.0, 1.0], method="DOP853", t_eval=t_eval, rtol=1e-13,
                atol=1e-13)
assert sol.success, sol.message

here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "lorenz_ivp.txt"), "w") as f:
    f.write("# Lorenz (sigma 10, rho 28, beta 8/3) from (1, 1, 1): scipy.integrate.solve_ivp DOP853, "
            "rtol = atol = 1e-13, SciPy %s\n" % scipy.__version__)
    f.write("# t x y z\n")
    for i, t in enumerate(sol.t):
        f.write("%s %s %s %s\n" % (repr(float(t)), repr(float(sol.y[0, i])), repr(float(sol.y[1, i])),
                                   repr(float(sol.y[2, i]))))
