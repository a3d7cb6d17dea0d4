#!/usr/bin/python3
"""The period of the van der Pol limit cycle x'' = mu (1 - x^2) x' - x for mu = 1, with SciPy's
solve_ivp (DOP853, rtol 1e-12): the mean time between upward zero crossings after 100 time units,
over 20 cycles. Writes tests/reference/vdp_period.txt (used by tests/test_verify.c).
Run with Debian's Python: /usr/bin/python3 tests/reference/make_vdp_period.py"""
import numpy as np
from scipy.integrate import solve_ivp

def rhs(t, y, mu=1.0):
    return [y[1], mu * (1 - y[0] ** 2) * y[1] - y[0]]

crossings = []
def event(t, y):
    return y[0]
event.direction = 1
sol = solve_ivp(rhs, (0, 250), [0.5, 0.0], method="DOP853", rtol=1e-12, atol=1e-12, events=event, dense_output=True)
t = sol.t_events[0]
t = t[t > 100][:21]
period = (t[-1] - t[0]) / (len(t) - 1)
with open("tests/reference/vdp_period.txt", "w") as f:
    f.write("# van der Pol, mu = 1: limit-cycle period (SciPy solve_ivp DOP853, rtol 1e-12)\n")
    f.write("%.12f\n" % period)
print(period)
