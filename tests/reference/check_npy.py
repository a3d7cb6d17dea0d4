"""Read a trajectory back with NumPy and compare it with its CSV twin (used by tests/test_results.c).

Usage: /usr/bin/python3 check_npy.py FILE.npy FILE.csv
Exit status 0 when NumPy reads the .npy file (the published .npy format, version 1.0), its shape
matches the CSV's and every value agrees with the CSV (written with 12 significant digits) to 1e-8
relative; 1 otherwise, with the reason on stderr.
"""
import sys

import numpy as np


def main():
    a = np.load(sys.argv[1], allow_pickle=False)
    b = np.loadtxt(sys.argv[2], delimiter=",", skiprows=1, ndmin=2)
    if a.dtype != np.float64 or a.shape != b.shape:
        print(f"dtype {a.dtype} shape {a.shape} against CSV shape {b.shape}", file=sys.stderr)
        return 1
    if not np.allclose(a, b, rtol=1e-8, atol=1e-12):
        print(f"largest difference {np.max(np.abs(a - b))}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
