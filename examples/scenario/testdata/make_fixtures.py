#!/usr/bin/python3
"""Outside check of the demo scenario's generating model.

Reads the committed demo files (examples/data/*.csv), re-implements the
documented reference curves independently of the Go code, and writes
fixtures.json beside this script with:

  - the curves (mean, sd) for both markers and groups at ages 20..65;
  - per group, marker and 5-year age band of the reference cohort: number of
    exams, mean and sd of the standardised residual z, and a cluster-robust
    (by worker) standard error of the mean;
  - the serial-correlation parameters phi and c, fitted by nonlinear least
    squares (scipy.optimize.curve_fit) of z_j * z_{j+1} = c * phi**d over
    consecutive pairs of reference exams, with their standard errors;
  - the same-exam correlation of the SBP and FEV1 residuals;
  - the skewness (scipy.stats.skew) of FEV1 divided by its reference median;
  - ordinary least squares fits (statsmodels, cluster-robust covariance by
    worker) of each marker on a cubic in age per group, with predictions and
    their standard errors at ages 25, 35, 45, 55;
  - gap-mixture shares, exams per worker and truth summaries, including the
    documented drift re-implemented here (mean of z - drift after onset);
  - the fixed cut-off rule "any reading beyond the reference 97.5th centile
    (2.5th for FEV1)" under the documented curves, scored against the truth
    independently of the Go code: cases, early signals, detections, median
    delay, false signals per 100 worker-years at risk among non-cases, and
    the Kaplan-Meier curve of years from onset to signal (statsmodels
    SurvfuncRight; an undetected case is censored at last exam - onset).

Run from anywhere:  /usr/bin/python3 examples/scenario/testdata/make_fixtures.py
Tools: Debian python3 with numpy, scipy and statsmodels.
"""
import csv
import hashlib
import json
import math
import os

import numpy as np
import scipy
import scipy.optimize
import scipy.stats
import statsmodels
import statsmodels.api as sm
from statsmodels.duration.survfunc import SurvfuncRight

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.normpath(os.path.join(HERE, "..", "..", "data"))


def curve(marker, group, age):
    """Documented curves (package comment of veer/examples/scenario)."""
    u = age - 40.0
    if marker == "sbp":
        if group == "tower":
            return 121 + 0.45 * u + 0.006 * u * u, 11 + 0.12 * u
        return 124 + 0.50 * u + 0.006 * u * u, 12 + 0.12 * u
    if group == "tower":
        return math.log(4.05 - 0.030 * u - 0.0004 * u * u), 0.12 + 0.0012 * u
    return math.log(3.80 - 0.028 * u - 0.0004 * u * u), 0.13 + 0.0012 * u


def drift(onset, slope, plateau, age):
    """Documented drift: 0 up to onset, then grows at |slope| SD a year up to
    |plateau| SD and stays there; the sign is the plateau's."""
    if age <= onset:
        return 0.0
    d = min(abs(slope) * (age - onset), abs(plateau))
    return -d if plateau < 0 else d


def km_median(times, probs, last):
    """Median of a Kaplan-Meier curve by R's survival rule (quantile.survfit):
    the first event time with S <= 0.5; when S is exactly 0.5 there, the
    midpoint with the next event time, or with the last observed time
    `last` when no event follows (statsmodels' quantile uses the strict
    S < 0.5, so it gives that next time); infinity when S never reaches
    0.5."""
    eps = 1e-12
    for i, (t, p) in enumerate(zip(times, probs)):
        if p > 0.5 + eps:
            continue
        if p >= 0.5 - eps:
            return (t + (times[i + 1] if i + 1 < len(times) else last)) / 2
        return t
    return math.inf


def cutoff_rule(ex, truth_rows, marker, zcut):
    """Scores the fixed cut-off rule against the truth, exam by exam."""
    onset = {r["worker"]: float(r["onset_" + marker]) for r in truth_rows if r["affected_" + marker] == "1"}
    workers = {}
    for e in ex:
        workers.setdefault(e["worker"], []).append(e)
    out = {"workers": 0, "cases": 0, "flagged": 0, "true_flagged": 0, "early": 0, "detected": 0,
           "false_signals": 0, "years_at_risk": 0.0}
    delays, times, status = [], [], []
    for w, rows in workers.items():
        rows = sorted(rows, key=lambda e: e["age"])
        sig = [(e["z_" + marker] > zcut) if marker == "sbp" else (e["z_" + marker] < -zcut) for e in rows]
        first = next((e["age"] for e, s in zip(rows, sig) if s), None)
        out["workers"] += 1
        if first is not None:
            out["flagged"] += 1
        if w in onset:
            t0 = onset[w]
            out["cases"] += 1
            if first is not None:
                out["true_flagged"] += 1
            if first is not None and first < t0:
                out["early"] += 1
                continue
            hit = next((e["age"] for e, s in zip(rows, sig) if s and e["age"] >= t0), None)
            if hit is not None:
                out["detected"] += 1
                delays.append(hit - t0)
                times.append(hit - t0)
                status.append(1)
            else:
                times.append(max(0.0, rows[-1]["age"] - t0))
                status.append(0)
            continue
        end = rows[-1]["age"] if first is None else first
        if first is not None:
            out["false_signals"] += 1
        out["years_at_risk"] += end - rows[0]["age"]
    out["false_per_100"] = 100 * out["false_signals"] / out["years_at_risk"]
    out["median_delay_detected"] = float(np.median(delays))
    sf = SurvfuncRight(np.array(times), np.array(status))
    st, sp = [float(t) for t in sf.surv_times], [float(p) for p in sf.surv_prob]
    med = km_median(st, sp, max(times))
    # JSON has no infinity: a median that is not reached is written as null.
    out["km_median_reached"] = not math.isinf(med)
    out["km_median"] = None if math.isinf(med) else med
    q = float(sf.quantile(0.5))
    out["km_median_strict_statsmodels"] = None if math.isnan(q) else q
    out["km_detected_by"] = {str(y): 1 - next((p for t, p in reversed(list(zip(st, sp))) if t <= y), 1.0)
                             for y in (1, 2, 3, 5)}
    out["km_times"], out["km_surv"] = st, sp
    return out


def zscore(marker, group, age, y):
    m, s = curve(marker, group, age)
    if marker == "fev1":
        y = math.log(y)
    return (y - m) / s


def read(name):
    path = os.path.join(DATA, name)
    with open(path, "rb") as f:
        raw = f.read()
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    return rows, hashlib.sha256(raw).hexdigest()


def exams(rows):
    out = []
    for r in rows:
        age = float(r["age"])
        out.append({
            "worker": r["worker"], "group": r["group"], "age": age,
            "sbp": float(r["sbp"]), "fev1": float(r["fev1"]),
            "z_sbp": zscore("sbp", r["group"], age, float(r["sbp"])),
            "z_fev1": zscore("fev1", r["group"], age, float(r["fev1"])),
        })
    return out


def cluster_mean(vals, workers):
    """Mean and cluster-robust standard error (clusters = workers)."""
    vals = np.asarray(vals)
    n = len(vals)
    mean = vals.mean()
    sums = {}
    for v, w in zip(vals, workers):
        sums[w] = sums.get(w, 0.0) + (v - mean)
    g = len(sums)
    var = sum(s * s for s in sums.values()) / (n * n) * g / (g - 1)
    return float(mean), float(math.sqrt(var))


def pairs(ex, key):
    d, p = [], []
    for a, b in zip(ex, ex[1:]):
        if a["worker"] == b["worker"]:
            d.append(b["age"] - a["age"])
            p.append(a[key] * b[key])
    return np.array(d), np.array(p)


def main():
    ref_rows, ref_sha = read("reference.csv")
    wf_rows, wf_sha = read("workforce.csv")
    truth_rows, truth_sha = read("truth.csv")
    ref = exams(ref_rows)
    wf = exams(wf_rows)

    out = {
        "source": "examples/scenario/testdata/make_fixtures.py with numpy %s, scipy %s, statsmodels %s"
                  % (np.__version__, scipy.__version__, statsmodels.__version__),
        "sha256": {"reference.csv": ref_sha, "workforce.csv": wf_sha, "truth.csv": truth_sha},
    }

    out["curves"] = [
        {"marker": m, "group": g, "age": a, "mean": curve(m, g, a)[0], "sd": curve(m, g, a)[1]}
        for m in ("sbp", "fev1") for g in ("tower", "workshop") for a in range(20, 66, 5)
    ]

    bands = []
    for m in ("sbp", "fev1"):
        for g in ("tower", "workshop"):
            for lo in range(20, 65, 5):
                hi = lo + 5
                sel = [e for e in ref if e["group"] == g and lo <= e["age"] < hi or
                       (e["group"] == g and hi == 65 and e["age"] == 65)]
                z = [e["z_" + m] for e in sel]
                mean, se = cluster_mean(z, [e["worker"] for e in sel])
                bands.append({"marker": m, "group": g, "lo": lo, "hi": hi, "n": len(z),
                              "mean_z": mean, "se_mean_z": se, "sd_z": float(np.std(z, ddof=1))})
    out["bands"] = bands

    serial = {}
    for m in ("sbp", "fev1"):
        d, p = pairs(ref, "z_" + m)
        popt, pcov = scipy.optimize.curve_fit(lambda d, c, phi: c * phi ** d, d, p, p0=(0.5, 0.5),
                                              bounds=([0, 1e-6], [2, 1]))
        serial[m] = {"pairs": int(len(d)), "c": float(popt[0]), "phi": float(popt[1]),
                     "se_c": float(math.sqrt(pcov[0, 0])), "se_phi": float(math.sqrt(pcov[1, 1]))}
    out["serial"] = serial

    zs = np.array([e["z_sbp"] for e in ref])
    zf = np.array([e["z_fev1"] for e in ref])
    out["cross_corr"] = float(np.corrcoef(zs, zf)[0, 1])

    ratio = [e["fev1"] / math.exp(curve("fev1", e["group"], e["age"])[0]) for e in ref]
    out["fev1_ratio_skewness"] = float(scipy.stats.skew(ratio))
    out["z_fev1_skewness"] = float(scipy.stats.skew(zf))

    fits = []
    for m in ("sbp", "fev1"):
        for g in ("tower", "workshop"):
            sel = [e for e in ref if e["group"] == g]
            u = np.array([e["age"] - 40 for e in sel])
            y = np.array([e[m] if m == "sbp" else math.log(e[m]) for e in sel])
            X = np.column_stack([np.ones_like(u), u, u ** 2, u ** 3])
            groups = np.unique([e["worker"] for e in sel], return_inverse=True)[1]
            res = sm.OLS(y, X).fit(cov_type="cluster", cov_kwds={"groups": groups})
            for a in (25, 35, 45, 55):
                ua = a - 40.0
                pred = res.get_prediction(np.array([[1, ua, ua ** 2, ua ** 3]]))
                fits.append({"marker": m, "group": g, "age": a,
                             "pred": float(pred.predicted_mean[0]), "se": float(pred.se_mean[0])})
    out["ols_cubic"] = fits

    def gaps(ex):
        g = [b["age"] - a["age"] for a, b in zip(ex, ex[1:]) if a["worker"] == b["worker"]]
        g = np.array(g)
        return {"n": int(len(g)), "mean": float(g.mean()),
                "adhoc_share": float(np.mean(g < 0.65)),
                "periodic_share": float(np.mean((g >= 0.65) & (g < 1.75))),
                "missed_share": float(np.mean(g >= 1.75)),
                "min": float(g.min()), "max": float(g.max())}

    def cohort(ex):
        workers = {}
        for e in ex:
            workers.setdefault(e["worker"], []).append(e)
        counts = [len(v) for v in workers.values()]
        return {"workers": len(workers), "exams": len(ex), "min_exams": min(counts),
                "tower_share": float(np.mean([v[0]["group"] == "tower" for v in workers.values()])),
                "min_age": min(e["age"] for e in ex), "max_age": max(e["age"] for e in ex),
                "gaps": gaps(ex)}

    out["reference"] = cohort(ref)
    out["workforce"] = cohort(wf)

    span = {}
    for e in wf:
        lo, hi = span.get(e["worker"], (e["age"], e["age"]))
        span[e["worker"]] = (min(lo, e["age"]), max(hi, e["age"]))
    truth = {}
    for m in ("sbp", "fev1"):
        aff = [r for r in truth_rows if r["affected_" + m] == "1"]
        inside = sum(1 for r in aff if span[r["worker"]][0] < float(r["onset_" + m]) < span[r["worker"]][1])
        onset = {r["worker"]: (float(r["onset_" + m]), float(r["slope_" + m]), float(r["plateau_" + m])) for r in aff}
        late = [e["z_" + m] for e in wf if e["worker"] in onset and e["age"] >= onset[e["worker"]][0] + 2]
        after = [e for e in wf if e["worker"] in onset and e["age"] > onset[e["worker"]][0]]
        resid = [e["z_" + m] - drift(*onset[e["worker"]], e["age"]) for e in after]
        rmean, rse = cluster_mean(resid, [e["worker"] for e in after])
        healthy = [e["z_" + m] for e in wf if e["worker"] not in onset]
        sign = 1 if m == "sbp" else -1
        plateaus = [sign * float(r["plateau_" + m]) for r in aff]
        ramps = [float(r["plateau_" + m]) / float(r["slope_" + m]) for r in aff]
        truth[m] = {"affected": len(aff), "share": len(aff) / len(truth_rows), "onsets_inside_span": inside,
                    "mean_z_2y_after_onset": float(np.mean(late)), "exams_2y_after_onset": len(late),
                    "mean_z_minus_drift_after_onset": rmean, "se_mean_z_minus_drift_after_onset": rse,
                    "exams_after_onset": len(after),
                    "plateau_min": min(plateaus), "plateau_max": max(plateaus),
                    "ramp_min": min(ramps), "ramp_max": max(ramps),
                    "mean_z_unaffected": float(np.mean(healthy))}
    out["truth"] = truth

    # The fixed cut-off rule under the documented curves: beyond the 97.5th
    # (SBP, upward) or 2.5th (FEV1, downward) centile of N(0, 1).
    zcut = float(scipy.stats.norm.ppf(0.975))
    out["cutoff"] = {"z": zcut}
    for m in ("sbp", "fev1"):
        out["cutoff"][m] = cutoff_rule(wf, truth_rows, m, zcut)

    with open(os.path.join(HERE, "fixtures.json"), "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
