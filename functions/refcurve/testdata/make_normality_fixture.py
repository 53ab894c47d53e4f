"""Regenerates normality_fixture.json, the outside check of
refcurve.DAgostinoPearson: scipy.stats.normaltest (D'Agostino-Pearson K2)
with its two parts scipy.stats.skewtest and scipy.stats.kurtosistest, on
seeded samples of several shapes and sizes.

Run from this directory with the Debian python (python3-scipy):
    /usr/bin/python3 make_normality_fixture.py
"""
import json
import sys

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(20240612)
samples = {
    "normal n=20": rng.normal(0, 1, 20),
    "normal n=300": rng.normal(5, 2, 300),
    "student t 5 df n=1000": rng.standard_t(5, 1000),
    "lognormal n=500": rng.lognormal(0, 0.6, 500),
    "uniform n=200": rng.uniform(-1, 1, 200),
    "left-skewed n=4000": -rng.gamma(4.0, 1.0, 4000),
    "near-normal mixture n=5000": np.concatenate([rng.normal(0, 1, 4800), rng.normal(0.5, 1.3, 200)]),
}
cases = []
for name, x in samples.items():
    k2, p = stats.normaltest(x)
    zs, _ = stats.skewtest(x)
    zk, _ = stats.kurtosistest(x)
    cases.append({
        "name": name,
        "data": [float(v) for v in x],
        "statistic": float(k2),
        "p_value": float(p),
        "z_skewness": float(zs),
        "z_kurtosis": float(zk),
        "skewness": float(stats.skew(x)),
        "excess_kurtosis": float(stats.kurtosis(x)),
    })
out = {
    "source": "scipy %s (numpy %s, Python %s): scipy.stats.normaltest, skewtest, kurtosistest, "
              "skew, kurtosis (biased moments); script make_normality_fixture.py"
              % (scipy.__version__, np.__version__, sys.version.split()[0]),
    "cases": cases,
}
with open("normality_fixture.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
