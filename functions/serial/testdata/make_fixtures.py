"""Fixtures for package serial, computed with Debian's numpy and scipy.

Run from this directory:  /usr/bin/python3 make_fixtures.py
Writes fixtures.json. Synthetic data only (fixed seed).

- "workers": simulated standardised residuals (continuous-time AR(1) plus
  noise, irregular gaps) for 60 workers.
- "innov": innovations of those workers under phi=0.6, c=0.5, computed by
  Cholesky whitening u = L^{-1} z with Sigma_ij = c*phi^|t_i-t_j| (i != j),
  Sigma_ii = 1 (an exact, filter-free way to get the same innovations).
- "fit": maximum pairwise likelihood (pairs at lags 1 and 2 within workers,
  bivariate N(0,1) with rho = c*phi^d) by scipy.optimize.minimize (L-BFGS-B).
- "lag1": scipy.stats.pearsonr of consecutive innovations within workers.
- "normal": scipy.stats.normaltest (D'Agostino-Pearson) of all innovations,
  plus scipy.stats.skew / kurtosis; "normal_skewed": the same for a skewed
  sample (shifted exponential) to check p-values away from 1.
- "pearson_corr": pearsonr of a correlated sample.
"""
import json

import numpy as np
import scipy
from scipy import linalg, optimize, stats

rng = np.random.default_rng(20260101)
PHI, C = 0.6, 0.5

workers = []
for w in range(60):
    n = int(rng.integers(2, 9))
    gaps = rng.uniform(0.3, 3.0, size=n - 1)
    t = np.concatenate([[rng.uniform(20, 50)], gaps]).cumsum()
    d = np.abs(t[:, None] - t[None, :])
    sigma = C * PHI ** d
    np.fill_diagonal(sigma, 1.0)
    z = linalg.cholesky(sigma, lower=True) @ rng.standard_normal(n)
    workers.append({"time": t.tolist(), "z": z.tolist()})


def innovations(t, z, phi, c):
    t = np.asarray(t)
    d = np.abs(t[:, None] - t[None, :])
    sigma = c * phi ** d
    np.fill_diagonal(sigma, 1.0)
    L = linalg.cholesky(sigma, lower=True)
    return linalg.solve_triangular(L, np.asarray(z), lower=True)


innov = [innovations(w["time"], w["z"], PHI, C).tolist() for w in workers]

pairs = []
for w in workers:
    t, z = w["time"], w["z"]
    for j in range(len(z) - 1):
        pairs.append((z[j], z[j + 1], t[j + 1] - t[j]))
        if j + 2 < len(z):
            pairs.append((z[j], z[j + 2], t[j + 2] - t[j]))
x, y, dd = (np.array(v) for v in zip(*pairs))


def negll(theta):
    phi, c = theta
    rho = c * phi ** dd
    q = 1 - rho ** 2
    return np.sum(0.5 * np.log(q) + (x ** 2 - 2 * rho * x * y + y ** 2) / (2 * q))


best = min(((negll((p, c)), p, c) for p in np.arange(0.05, 1, 0.05) for c in np.arange(0.05, 1, 0.05)))
fit = optimize.minimize(negll, x0=[best[1], best[2]], method="L-BFGS-B",
                        bounds=[(1e-6, 1 - 1e-6), (1e-6, 1 - 1e-6)], options={"ftol": 1e-14, "gtol": 1e-10})

xs, ys = [], []
for u in innov:
    xs += u[:-1]
    ys += u[1:]
r, p = stats.pearsonr(xs, ys)
allu = np.concatenate(innov)
k2, pn = stats.normaltest(allu)
sk = rng.exponential(size=300) - 1.0
k2s, pns = stats.normaltest(sk)
a = rng.standard_normal(200)
b = 0.2 * a + rng.standard_normal(200)
rc, pc = stats.pearsonr(a, b)

out = {
    "source": "numpy %s, scipy %s; make_fixtures.py" % (np.__version__, scipy.__version__),
    "phi": PHI, "c": C,
    "workers": workers,
    "innov": innov,
    "fit": {"phi": float(fit.x[0]), "c": float(fit.x[1]), "negll": float(fit.fun), "pairs": len(pairs)},
    "lag1": {"r": float(r), "p": float(p), "n": len(xs)},
    "normal": {"k2": float(k2), "p": float(pn), "skew": float(stats.skew(allu)),
               "exkurt": float(stats.kurtosis(allu))},
    "normal_skewed": {"x": sk.tolist(), "k2": float(k2s), "p": float(pns),
                      "skew": float(stats.skew(sk)), "exkurt": float(stats.kurtosis(sk))},
    "pearson_corr": {"x": a.tolist(), "y": b.tolist(), "r": float(rc), "p": float(pc)},
}
with open("fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
print(out["fit"], out["lag1"], out["normal"], {k: out["normal_skewed"][k] for k in ("k2", "p")}, rc, pc)
