#!/usr/bin/python3
"""Writes tests/reference/savgol_coeffs.txt: Savitzky-Golay derivative weights from SciPy.

Source: scipy.signal.savgol_coeffs (Debian package python3-scipy), evaluated at the window centre
with use='dot', so that weight k multiplies sample i - m + k, with unit sample spacing.
Run from the repository root:  python3 tests/reference/make_savgol.py
Line format: window degree deriv w_0 ... w_{window-1}   (repr floats, one case per line).
"""
import os

import scipy
from scipy.signal import savgol_coeffs

CASES = [(5, 2), (5, 3), (5, 4), (7, 2), (7, 3), (7, 4), (9, 4), (11, 5), (15, 6), (21, 3),
         (25, 8), (31, 6), (65, 6)]

here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "savgol_coeffs.txt"), "w") as f:
    f.write("# scipy.signal.savgol_coeffs(window, degree, deriv=d, delta=1.0, use='dot'), SciPy %s\n"
            % scipy.__version__)
    f.write("# window degree deriv weights...\n")
    for window, degree in CASES:
        for deriv in (1, 2):
            w = savgol_coeffs(window, degree, deriv=deriv, delta=1.0, use="dot")
            f.write("%d %d %d %s\n" % (window, degree, deriv, " ".join(repr(float(x)) for x in w)))
