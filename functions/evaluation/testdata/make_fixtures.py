#!/usr/bin/python3
"""Fixtures for veer/functions/evaluation: a synthetic labelled cohort with
the flags of four made-up methods, scored here independently of the Go
code, with the outside references named beside each figure.

Run from this directory (Debian python3-numpy, python3-scipy,
python3-statsmodels), then the R script for the Kaplan-Meier quantiles:

    /usr/bin/python3 make_fixtures.py && Rscript make_fixtures.R

It writes
  cohort_exams.csv     worker, age, one 0/1 flag column per method
  cohort_outcomes.csv  worker, diagnosed (yes/no), diagnosed_age
  km_input.csv         per method and curve ("lead" or "healthy") the
                       Kaplan-Meier input: time and status (1 = event)
  fixtures.json        the figures below, per method
and the R script writes km_quantiles.csv. The Go tests read only these
files.

Definitions (from the package documentation, re-implemented here):
  - exams at or after the age at diagnosis are left out; a diagnosed
    worker with no exam before the diagnosis is left out;
  - s = age of the first flagged exam among the rest;
  - diagnosed: flagged share K/D with the Wilson 95% interval
    (statsmodels proportion_confint(K, D, alpha=0.05, method="wilson"));
    the lead-time curve is the Kaplan-Meier estimate of Y = s - a, a
    worker never flagged censored at Y = 0 (statsmodels SurvfuncRight:
    surv_times, surv_prob); quantiles from R's survival (the R script);
    the ordinary median of a - s over the flagged (numpy.median);
  - never diagnosed: flagged share F/H (Wilson as above); years at risk
    from the first exam to the first signal or the last exam; false signals
    per 100 worker-years 100 F / years, with the exact Poisson interval of
    Garwood (1936) from scipy.stats.chi2.ppf; the Kaplan-Meier curve of the
    years from the first exam to the first signal, censored at the last
    exam (SurvfuncRight), read at 1, 2, 5 and 10 years.
"""
import csv
import json
import math

import numpy as np
from scipy.stats import chi2
from statsmodels.duration.survfunc import SurvfuncRight
from statsmodels.stats.proportion import proportion_confint

SEED = 20261114
METHODS = ["sparse", "dense", "rising", "eager", "quiet"]


def make_cohort(rng):
    """Workers with irregular exams (ages rounded to 0.1 year so that ties
    occur), 35% later diagnosed; some diagnosed at an exam's age, a few at
    their first exam."""
    exams, outcomes = [], []
    for w in range(400):
        wid = "w%03d" % w
        n = int(rng.integers(1, 13))
        age = round(float(rng.uniform(20, 55)), 1)
        ages = []
        for _ in range(n):
            ages.append(age)
            age = round(age + float(rng.uniform(0.3, 3.0)), 1)
        dx = rng.random() < 0.35
        dx_age = None
        if dx:
            u = rng.random()
            if u < 0.05:
                dx_age = ages[0]  # diagnosed at the first exam
            elif u < 0.25:
                dx_age = ages[int(rng.integers(0, n))]  # at an exam
            else:
                dx_age = round(float(rng.uniform(ages[0], ages[-1] + 2.0)), 1)
                dx_age = max(dx_age, ages[0])
        for a in ages:
            # How close the exam is to the diagnosis drives the "rising"
            # method; the others ignore the outcome.
            near = dx and a < dx_age and dx_age - a < 4
            flags = {
                "sparse": rng.random() < 0.04,
                "dense": rng.random() < 0.25,
                "rising": rng.random() < (0.45 if near else 0.03),
                "eager": rng.random() < (0.75 if dx and a < dx_age else 0.08),
                "quiet": dx and a < dx_age and rng.random() < 0.1,
            }
            exams.append({"worker": wid, "age": a, **flags})
        outcomes.append({"worker": wid, "diagnosed": "yes" if dx else "no", "diagnosed_age": dx_age})
    # Shuffle the exam rows: the order must not matter.
    order = rng.permutation(len(exams))
    return [exams[i] for i in order], outcomes


def km(times, status):
    if not times:
        return [], []
    sf = SurvfuncRight(np.array(times, dtype=float), np.array(status, dtype=float))
    return [float(t) for t in sf.surv_times], [float(p) for p in sf.surv_prob]


def wilson(k, n):
    lo, hi = proportion_confint(k, n, alpha=0.05, method="wilson")
    return [k / n, float(lo), float(hi)]


def score(exams, outcomes, m):
    out = {o["worker"]: o for o in outcomes}
    by = {}
    for e in exams:
        by.setdefault(e["worker"], []).append(e)
    diagnosed = flagged = healthy = healthy_flagged = 0
    at_first = after = 0
    years = 0.0
    y, ys, leads = [], [], []
    ht, hs = [], []
    for w, rows in by.items():
        rows = sorted(rows, key=lambda e: e["age"])
        o = out[w]
        dx = o["diagnosed"] == "yes"
        if dx:
            a = o["diagnosed_age"]
            keep = [e for e in rows if e["age"] < a]
            after += len(rows) - len(keep)
            if not keep:
                at_first += 1
                continue
            diagnosed += 1
            s = next((e["age"] for e in keep if e[m]), None)
            if s is None:
                y.append(0.0)
                ys.append(0)
            else:
                flagged += 1
                y.append(s - a)
                ys.append(1)
                leads.append(a - s)
        else:
            healthy += 1
            s = next((e["age"] for e in rows if e[m]), None)
            end = rows[-1]["age"] if s is None else s
            if s is not None:
                healthy_flagged += 1
            years += end - rows[0]["age"]
            ht.append(end - rows[0]["age"])
            hs.append(0 if s is None else 1)
    lt, lp = km(y, ys)
    hkt, hkp = km(ht, hs)

    def within(t):
        # S(t) of the healthy curve; past the longest follow-up unknown.
        if t > max(ht) and (not hkp or hkp[-1] > 0):
            return None
        s = 1.0
        for tt, p in zip(hkt, hkp):
            if tt <= t:
                s = p
        return 1 - s

    f = healthy_flagged
    e = years / 100
    return {
        "diagnosed": diagnosed, "flagged": flagged, "at_first_exam": at_first, "after_diagnosis": after,
        "flagged_share": wilson(flagged, diagnosed),
        "median_lead_flagged": float(np.median(leads)) if leads else None,
        "lead_km_times": lt, "lead_km_surv": lp,
        "healthy": healthy, "healthy_flagged": f,
        "healthy_flagged_share": wilson(f, healthy),
        "years_at_risk": years,
        "false_per_100": [f / e, float(chi2.ppf(0.025, 2 * f) / 2 / e) if f > 0 else 0.0,
                          float(chi2.ppf(0.975, 2 * f + 2) / 2 / e)],
        "healthy_km_times": hkt, "healthy_km_surv": hkp,
        "flagged_within": {str(t): within(t) for t in (1, 2, 5, 10)},
    }, (y, ys), (ht, hs)


def main():
    rng = np.random.default_rng(SEED)
    exams, outcomes = make_cohort(rng)
    with open("cohort_exams.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["worker", "age"] + METHODS)
        for e in exams:
            w.writerow([e["worker"], repr(e["age"])] + [int(e[m]) for m in METHODS])
    with open("cohort_outcomes.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["worker", "diagnosed", "diagnosed_age"])
        for o in outcomes:
            w.writerow([o["worker"], o["diagnosed"], "" if o["diagnosed_age"] is None else repr(o["diagnosed_age"])])
    fx = {"seed": SEED, "methods": {}}
    with open("km_input.csv", "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["method", "curve", "time", "status"])
        for m in METHODS:
            fx["methods"][m], (y, ys), (ht, hs) = score(exams, outcomes, m)
            for t, s in zip(y, ys):
                w.writerow([m, "lead", repr(t), s])
            for t, s in zip(ht, hs):
                w.writerow([m, "healthy", repr(t), s])
    with open("fixtures.json", "w") as f:
        json.dump(fx, f, indent=1)
        f.write("\n")
    print("wrote cohort_exams.csv, cohort_outcomes.csv, km_input.csv and fixtures.json;"
          " now run: Rscript make_fixtures.R")


if __name__ == "__main__":
    main()
