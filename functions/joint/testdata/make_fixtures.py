"""Fixtures for functions/joint, from pandas/numpy/statsmodels (Debian's
python3-pandas, python3-numpy, python3-statsmodels).

Run from this directory:  /usr/bin/python3 make_fixtures.py
Writes:
  corr_data.csv  a synthetic reference sample: worker, time and three
                 markers' values (blank where a marker was not measured),
                 drawn here with numpy from a fixed seed; workers' values
                 share a personal level, so exams of a worker are dependent.
  corr_want.csv  for each pair of markers: the pairwise-complete Pearson
                 correlation (pandas DataFrame.corr), the number of exams and
                 workers behind it, and its worker-level sandwich standard
                 error from statsmodels: r is the ratio estimator
                 sum(w)/sum(v) with w = x~ y~ and v = (x~^2 + y~^2)/2 (x~, y~
                 standardised with the pairwise-complete means and SDs), i.e.
                 the weighted least-squares slope of w on v through the
                 origin with weights 1/v, whose cluster-robust (by worker)
                 covariance, with statsmodels' default small-sample factor
                 G/(G-1) (N-1)/(N-K), K = 1, is the sandwich from the
                 influence function of r.
"""
import numpy as np
import pandas as pd
import statsmodels.api as sm

rng = np.random.default_rng(20261213)
rows = []
corr_level = np.array([[1, 0.6, -0.3], [0.6, 1, -0.2], [-0.3, -0.2, 1]])
corr_noise = np.array([[1, 0.2, 0.1], [0.2, 1, -0.4], [0.1, -0.4, 1]])
ll = np.linalg.cholesky(corr_level)
ln = np.linalg.cholesky(corr_noise)
for w in range(80):
    n = rng.integers(2, 9)
    t = 25 + 30 * rng.random() + np.cumsum(rng.uniform(0.5, 3, n))
    level = ll @ rng.standard_normal(3) * np.sqrt(0.7)
    for j in range(n):
        v = level + ln @ rng.standard_normal(3) * np.sqrt(0.3) + np.array([0.1, -0.2, 0.05])
        v = v * np.array([1.0, 1.3, 0.8])
        miss = rng.random(3) < np.array([0.05, 0.3, 0.2])
        rows.append([f"w{w:02d}", round(t[j], 4)] + [None if miss[k] else round(v[k], 6) for k in range(3)])
df = pd.DataFrame(rows, columns=["worker", "time", "a", "b", "c"])
df.to_csv("corr_data.csv", index=False)

df = pd.read_csv("corr_data.csv")
pearson = df[["a", "b", "c"]].corr()  # pairwise complete
out = []
for x, y in [("a", "b"), ("a", "c"), ("b", "c")]:
    d = df[["worker", x, y]].dropna()
    xs = (d[x] - d[x].mean()) / d[x].std(ddof=0)
    ys = (d[y] - d[y].mean()) / d[y].std(ddof=0)
    w = xs * ys
    v = (xs ** 2 + ys ** 2) / 2
    fit = sm.WLS(w.values, v.values[:, None], weights=1 / v.values).fit(
        cov_type="cluster", cov_kwds={"groups": pd.factorize(d["worker"])[0]})
    assert abs(fit.params[0] - pearson.loc[x, y]) < 1e-12
    out.append({"a": x, "b": y, "r": f"{pearson.loc[x, y]:.12g}", "se": f"{fit.bse[0]:.12g}",
                 "exams": len(d), "workers": d["worker"].nunique(),
                 "source": f"pandas {pd.__version__} DataFrame.corr; statsmodels {sm.__version__} WLS cluster-robust SE"})
pd.DataFrame(out).to_csv("corr_want.csv", index=False)
print("wrote corr_data.csv and corr_want.csv")
