#!/usr/bin/python3
"""Fixture for veer/functions/rules: an independent re-implementation, in
plain Python with numpy (Debian python3-numpy), of the per-worker exam
variables and of a few history rules, on a synthetic sheet.

Run from this directory:  /usr/bin/python3 make_fixtures.py
It writes linked_fixture.csv, which the Go tests read (they never run
Python). Each expected column is computed here from the definitions in
the package documentation, not from the Go code:

  exam        1-based position of the exam among the worker's exams,
              ordered by time, ties in input-row order
  exams       number of the worker's exams in the sheet
  gap         time minus the previous exam's time; 0 on the first exam
  prev_z      z of the previous exam; NaN on the first
  prev_value  value of the previous exam; NaN on the first
  ysfs        time minus the time of the worker's first signalling exam
              at or before this one (in exam order); NaN if none yet
  n_last5     number of the worker's exams up to and including this one
              with time >= this time - 5
  three_of_4  at least 3 of the last 4 z (up to and including this exam)
              are above 2
  mean_last3  mean of the last 3 z (fewer if fewer exams so far)
  max_values  largest value so far
  rise_rate   (z - prev_z) / gap when there is a previous exam and gap > 0,
              else -1000
  n_signals   number of signalling exams so far
"""
import csv
import math

import numpy as np

SEED = 20240601


def main():
    rng = np.random.default_rng(SEED)
    rows = []
    for w in range(40):
        n = int(rng.integers(1, 13))
        drift = 2.2 if w % 5 == 0 else 0.0  # some workers sit high, so 3-of-4 happens
        t = 20.0 + 30.0 * rng.random()
        for j in range(n):
            if j > 0:
                # irregular gaps; 1 in 10 repeats the previous time (a tie)
                t += 0.0 if rng.random() < 0.1 else float(np.round(0.2 + 3.0 * rng.random(), 3))
            z = float(np.round(drift + rng.normal(), 4))
            rows.append({
                "worker": "W%02d" % w,
                "time": float(np.round(t, 3)),
                "z": z,
                "value": float(np.round(120.0 + 15.0 * z, 3)),
                "signal": z > 1.5,
            })
    order = rng.permutation(len(rows))
    rows = [rows[i] for i in order]
    for i, r in enumerate(rows):
        r["row"] = i

    by_worker = {}
    for r in rows:
        by_worker.setdefault(r["worker"], []).append(r)
    for ws in by_worker.values():
        ws.sort(key=lambda r: (r["time"], r["row"]))  # stable: ties keep input order
        first_signal = math.nan
        for j, r in enumerate(ws):
            hist = ws[: j + 1]
            r["exam"] = j + 1
            r["exams"] = len(ws)
            if j == 0:
                r["gap"], r["prev_z"], r["prev_value"] = 0.0, math.nan, math.nan
            else:
                r["gap"] = r["time"] - ws[j - 1]["time"]
                r["prev_z"], r["prev_value"] = ws[j - 1]["z"], ws[j - 1]["value"]
            if r["signal"] and math.isnan(first_signal):
                first_signal = r["time"]
            r["ysfs"] = r["time"] - first_signal if not math.isnan(first_signal) else math.nan
            r["n_last5"] = sum(1 for h in hist if h["time"] >= r["time"] - 5.0)
            last4 = [h["z"] for h in hist[-4:]]
            r["three_of_4"] = sum(1 for v in last4 if v > 2.0) >= 3
            r["mean_last3"] = float(np.mean([h["z"] for h in hist[-3:]]))
            r["max_values"] = max(h["value"] for h in hist)
            if j > 0 and r["gap"] > 0:
                r["rise_rate"] = (r["z"] - r["prev_z"]) / r["gap"]
            else:
                r["rise_rate"] = -1000.0
            r["n_signals"] = sum(1 for h in hist if h["signal"])

    cols = ["worker", "time", "z", "value", "signal", "exam", "exams", "gap", "prev_z",
            "prev_value", "ysfs", "n_last5", "three_of_4", "mean_last3", "max_values",
            "rise_rate", "n_signals"]

    def fmt(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, float):
            return "NaN" if math.isnan(v) else repr(v)
        return str(v)

    with open("linked_fixture.csv", "w", newline="") as f:
        f.write("# written by make_fixtures.py (numpy default_rng(%d)); do not edit\n" % SEED)
        w = csv.writer(f, lineterminator="\n")
        w.writerow(cols)
        for r in rows:
            w.writerow([fmt(r[c]) for c in cols])


if __name__ == "__main__":
    main()
