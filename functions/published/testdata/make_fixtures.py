"""Check values for package published's interpolation between table ages.

Run from this folder with Debian's Python (python3-scipy, python3-numpy):
    /usr/bin/python3 make_fixtures.py        (writes interp_scipy.csv)

For a table of values at irregular ages (with a peak, a flat stretch and
a steep fall, where interpolants overshoot if they can), the values at
ages between the rows by
  - scipy.interpolate.PchipInterpolator: the monotone piecewise cubic of
    Fritsch & Butland (1984) with SciPy's one-sided three-point end
    slopes, the interpolant the package calls "cubic";
  - numpy.interp: linear interpolation, the package's "linear".
"""
import csv

import numpy as np
from scipy.interpolate import PchipInterpolator

ages = np.array([18.0, 20.0, 25.0, 27.5, 30.0, 40.0, 45.0, 50.0, 60.0, 61.0, 70.0, 85.0])
vals = np.array([3.10, 3.40, 3.90, 3.95, 3.95, 3.95, 3.70, 3.30, 2.70, 2.68, 2.10, 1.40])
at = np.unique(np.concatenate([ages, np.linspace(18.0, 85.0, 135), [18.001, 84.999, 60.5, 27.6]]))
cubic = PchipInterpolator(ages, vals)(at)
linear = np.interp(at, ages, vals)
with open("interp_scipy.csv", "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["kind", "age", "value"])
    for a, v in zip(ages, vals):
        w.writerow(["knot", repr(float(a)), repr(float(v))])
    for a, c, l in zip(at, cubic, linear):
        w.writerow(["cubic", repr(float(a)), repr(float(c))])
        w.writerow(["linear", repr(float(a)), repr(float(l))])
print("wrote", len(at) * 2 + len(ages), "rows to interp_scipy.csv")
