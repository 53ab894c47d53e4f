"""Chart statistics computed independently with numpy, straight from the
published recursions, for package chart's tests.

Run from this directory:  /usr/bin/python3 make_fixtures.py   (writes fixtures.json)

CUSUM (Page 1954):  Up_j = max(0, Up_{j-1} + u_j - k),  Down_j = max(0, Down_{j-1} - u_j - k),
started at hs*h (Lucas & Crosier 1982).
EWMA (Roberts 1959) with gap-aware weight w_j = 1 - (1-lambda)**(gap_j/unit) (w_1 = lambda),
E_j = (1-w_j) E_{j-1} + w_j u_j, reported divided by sqrt(lambda/(2-lambda)); one-sided
versions reflected at 0.
Restart: after a signal (stat > h) the sums go back to their start.
Synthetic data only (fixed seed).
"""
import json

import numpy as np

rng = np.random.default_rng(7)
n = 40
u = (rng.standard_normal(n) + np.where(np.arange(n) >= 20, 1.0, 0.0)).tolist()
gaps = [0.0] + rng.uniform(0.2, 3.0, n - 1).tolist()


def cusum(side, k, h, hs, restart):
    up = hs * h if side != "down" else 0.0
    dn = hs * h if side != "up" else 0.0
    out = []
    for x in u:
        if side != "down":
            up = max(0.0, up + x - k)
        if side != "up":
            dn = max(0.0, dn - x - k)
        stat = max(up if side != "down" else 0.0, dn if side != "up" else 0.0)
        sig = stat > h
        out.append([up if side != "down" else 0.0, dn if side != "up" else 0.0, stat, bool(sig)])
        if sig and restart:
            up = hs * h if side != "down" else 0.0
            dn = hs * h if side != "up" else 0.0
    return out


def ewma(side, lam, unit, h, hs, restart):
    sd = np.sqrt(lam / (2 - lam))
    e = hs * h if side != "both" else 0.0
    out = []
    for j, x in enumerate(u):
        w = lam if j == 0 else 1 - (1 - lam) ** (gaps[j] / unit)
        if side == "both":
            e = (1 - w) * e + w * x / sd
            upv, dnv = max(e, 0.0), max(-e, 0.0)
        elif side == "up":
            e = max(0.0, (1 - w) * e + w * x / sd)
            upv, dnv = e, 0.0
        else:
            e = max(0.0, (1 - w) * e - w * x / sd)
            upv, dnv = 0.0, e
        stat = max(upv, dnv)
        sig = stat > h
        out.append([upv, dnv, stat, bool(sig)])
        if sig and restart:
            e = hs * h if side != "both" else 0.0
    return out


cases = []
for side in ("up", "down", "both"):
    for k, h, hs, restart in ((0.5, 4.0, 0.0, False), (0.25, 3.0, 0.5, True), (1.0, 2.0, 0.0, True)):
        cases.append({"kind": "cusum", "side": side, "k": k, "lambda": 0, "unit": 1, "h": h, "hs": hs,
                      "restart": restart, "points": cusum(side, k, h, hs, restart)})
    for lam, unit, h, hs, restart in ((0.1, 1.0, 2.7, 0.0, False), (0.3, 2.0, 2.0, 0.5, True), (1.0, 1.0, 3.0, 0.0, False)):
        if side == "both" and hs > 0:
            hs = 0.0
        cases.append({"kind": "ewma", "side": side, "k": 0, "lambda": lam, "unit": unit, "h": h, "hs": hs,
                      "restart": restart, "points": ewma(side, lam, unit, h, hs, restart)})

with open("fixtures.json", "w") as f:
    json.dump({"source": "numpy %s; make_fixtures.py" % np.__version__, "u": u, "gaps": gaps, "cases": cases}, f, indent=1)
