"""Regenerates boxcox_fixture.json, the outside check of
transform.BoxCoxLambda and transform.BoxCoxLogLik: for a few seeded
samples, scipy.stats.boxcox_normmax(x, method='mle') and
scipy.stats.boxcox_llf at several lambdas.

Run from this directory with the Debian python (python3-scipy):
    /usr/bin/python3 make_boxcox_fixture.py
"""
import json
import sys

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(20240611)
samples = {
    "lognormal sigma 0.5 (n=200)": rng.lognormal(mean=1.0, sigma=0.5, size=200),
    "gamma shape 3 (n=500)": rng.gamma(shape=3.0, scale=10.0, size=500),
    "left-skewed beta x 100 (n=300)": 100 * rng.beta(5.0, 1.5, size=300),
    "normal 100 sd 10 (n=1000)": rng.normal(100.0, 10.0, size=1000),
    "chi-square 1 df (n=150)": rng.chisquare(1.0, size=150),
    "triglyceride-like lognormal (n=2000)": rng.lognormal(mean=0.3, sigma=0.45, size=2000),
}
lambdas = [-2.0, -1.0, -0.3, 0.0, 0.5, 1.0, 2.5]
cases = []
for name, x in samples.items():
    cases.append({
        "name": name,
        "data": [float(v) for v in x],
        "lambda_mle": float(stats.boxcox_normmax(x, method="mle")),
        "llf": [{"lambda": l, "value": float(stats.boxcox_llf(l, x))} for l in lambdas],
    })
out = {
    "source": "scipy %s (numpy %s, Python %s): scipy.stats.boxcox_normmax(x, method='mle'), "
              "scipy.stats.boxcox_llf(lambda, x); script make_boxcox_fixture.py"
              % (scipy.__version__, np.__version__, sys.version.split()[0]),
    "cases": cases,
}
with open("boxcox_fixture.json", "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
