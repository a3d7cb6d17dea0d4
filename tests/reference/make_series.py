#!/usr/bin/python3
"""Writes the .npy fixtures of tests/test_series.c with NumPy (Debian python3-numpy).

Source of the format: NumPy's own writer, numpy.lib.format.write_array / numpy.save.
Every array holds v[r, c] = 10 r + c + 0.25 (r, c from 0), so the test knows the values.
Run from the repository root:  python3 tests/reference/make_series.py
"""
import os

import numpy as np

here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "series")
os.makedirs(here, exist_ok=True)


def grid(rows, cols):
    r, c = np.meshgrid(np.arange(rows), np.arange(cols), indexing="ij")
    return 10.0 * r + c + 0.25


def save(name, arr, version=None):
    with open(os.path.join(here, name), "wb") as f:
        np.lib.format.write_array(f, arr, version=version)


save("f8_4x3.npy", grid(4, 3).astype("<f8"), (1, 0))   # plain 2-D, format 1.0
save("f4_5x2.npy", grid(5, 2).astype("<f4"), (1, 0))   # single precision
save("f8_6.npy", grid(6, 1)[:, 0].astype("<f8"), (1, 0))   # 1-D: one channel
save("f8_4x3_fortran.npy", np.asfortranarray(grid(4, 3)), (1, 0))   # fortran_order True
save("f8_4x3_v2.npy", grid(4, 3).astype("<f8"), (2, 0))   # format 2.0 (4-byte header length)
save("i8_3x2.npy", (10 * grid(3, 2)).astype("<i8"), (1, 0))   # integers: 10 v truncated
with open(os.path.join(here, "README.txt"), "w") as f:
    f.write("Written by make_series.py with NumPy %s; v[r, c] = 10 r + c + 0.25.\n" % np.__version__)
