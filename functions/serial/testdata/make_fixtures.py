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
- "sandwich": worker-level sandwich standard errors H^-1 J H^-1 at the scipy
  optimum, with H and each worker's score by central differences of the
  pairwise log-likelihood (an implementation independent of the Go one).
- "ttest": the test of no correlation between consecutive exams,
  scipy.stats.ttest_1samp(U, 0, alternative="greater") of the per-worker
  sums U = sum_j z_j z_{j+1}.
- "independent": 80 workers with independent readings (c = 0) and the
  scipy L-BFGS-B maximum of their pairwise likelihood from every point of
  a grid, with its value, so that an estimate at the edge of the
  parameter space can be checked to be at least as good.
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

# Sandwich standard errors by central differences, per worker.
def worker_pairs(ws):
    out = []
    for w in ws:
        t, z = w["time"], w["z"]
        ps = []
        for j in range(len(z) - 1):
            ps.append((z[j], z[j + 1], t[j + 1] - t[j]))
            if j + 2 < len(z):
                ps.append((z[j], z[j + 2], t[j + 2] - t[j]))
        if ps:
            out.append(tuple(np.array(v) for v in zip(*ps)))
    return out


def ll_pairs(theta, px, py, pd):
    phi, c = theta
    rho = c * phi ** pd
    q = 1 - rho ** 2
    return np.sum(-0.5 * np.log(q) - (px ** 2 - 2 * rho * px * py + py ** 2) / (2 * q))


th = np.array(fit.x)
h = 1e-5
wp = worker_pairs(workers)
scores = np.zeros((len(wp), 2))
for k, (px, py, pd) in enumerate(wp):
    for a_ in range(2):
        e = np.zeros(2)
        e[a_] = h
        scores[k, a_] = (ll_pairs(th + e, px, py, pd) - ll_pairs(th - e, px, py, pd)) / (2 * h)
J = scores.T @ scores
H = np.zeros((2, 2))
for a_ in range(2):
    for b_ in range(2):
        ea = np.zeros(2); ea[a_] = 1e-4
        eb = np.zeros(2); eb[b_] = 1e-4
        H[a_, b_] = (-negll(th + ea + eb) + negll(th + ea - eb) + negll(th - ea + eb) - negll(th - ea - eb)) / (4e-8)
Hinv = np.linalg.inv(H)
V = Hinv @ J @ Hinv
sandwich = {"phi": float(th[0]), "c": float(th[1]), "se_phi": float(np.sqrt(V[0, 0])), "se_c": float(np.sqrt(V[1, 1]))}

# Test of no correlation between consecutive exams.
U = [float(np.dot(w["z"][:-1], w["z"][1:])) for w in workers if len(w["z"]) >= 2]
tt = stats.ttest_1samp(U, 0.0, alternative="greater")

# Independent readings: the maximum may sit at the edge c = 0.
indep = []
for w in range(80):
    n = int(rng.integers(3, 8))
    gaps = rng.uniform(0.3, 3.0, size=n - 1)
    t = np.concatenate([[rng.uniform(20, 50)], gaps]).cumsum()
    indep.append({"time": t.tolist(), "z": rng.standard_normal(n).tolist()})
ip = worker_pairs(indep)
ix, iy, idd = (np.concatenate([p_[i] for p_ in ip]) for i in range(3))


def negll_indep(theta):
    return -ll_pairs(theta, ix, iy, idd)


ibest = None
for p0 in np.arange(0.05, 1, 0.1):
    for c0 in np.arange(0.05, 1, 0.1):
        r_ = optimize.minimize(negll_indep, x0=[p0, c0], method="L-BFGS-B",
                               bounds=[(1e-9, 1 - 1e-9), (0, 1)], options={"ftol": 1e-15, "gtol": 1e-12})
        if ibest is None or r_.fun < ibest.fun:
            ibest = r_

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
    "sandwich": sandwich,
    "ttest": {"workers": len(U), "t": float(tt.statistic), "p": float(tt.pvalue)},
    "independent": {"workers": indep, "phi": float(ibest.x[0]), "c": float(ibest.x[1]),
                    "negll": float(ibest.fun), "negll_none": float(negll_indep([0.5, 0.0]))},
}
with open("fixtures.json", "w") as f:
    json.dump(out, f, indent=1)
print(out["sandwich"], out["ttest"], {k: v for k, v in out["independent"].items() if k != "workers"})
print(out["fit"], out["lag1"], out["normal"], {k: out["normal_skewed"][k] for k in ("k2", "p")}, rc, pc)
