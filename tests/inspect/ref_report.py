#!/usr/bin/python3
"""tests/inspect/ref_report.py - `modeband report` against numpy on the same
generated shift logs.

usage: ref_report.py MODEBAND GEN_SHIFTLOG SCRATCH

The logs come from gen_shiftlog (known gauge statistics, a slow drift of
the "od" gauge, drift records from inspect/drift.h as the station would
write them). The report's terminal figures (counts, Pareto, gauge mean, sd,
Cp, Cpk, rejects per hour) are compared with numpy on the report's own CSV
and with the generator's parameters; every drift signal the report lists is
recomputed with a plain numpy EWMA (NIST/SEMATECH e-Handbook 6.3.2.4:
z_t = lambda x_t + (1 - lambda) z_{t-1}, z_0 = target, limits target +-
L sigma sqrt(lambda / (2 - lambda) (1 - (1 - lambda)^(2t)))).
"""
import csv
import os
import re
import shutil
import subprocess
import sys

import numpy as np

FAILS = []


def check(cond, msg):
    if not cond:
        FAILS.append(msg)
        print("FAIL:", msg)


def main():
    modeband, gen, scratch = sys.argv[1:4]
    shutil.rmtree(scratch, ignore_errors=True)
    os.makedirs(scratch)
    logs = os.path.join(scratch, "logs")
    subprocess.run([gen, logs, "--shifts", "3", "--parts", "4000", "--seed", "7",
                    "--drift-from", "2500", "--drift-per-part", "0.00004",
                    "--full-precision"], check=True)
    out_csv = os.path.join(scratch, "parts.csv")
    res = subprocess.run([modeband, "report", "--logs", logs, "--csv", out_csv],
                         check=True, capture_output=True, text=True)
    text = res.stdout
    # the files read two at a time (partial reports merged) say the same
    res2 = subprocess.run([modeband, "report", "--logs", logs, "--threads", "2"],
                          check=True, capture_output=True, text=True)
    strip = lambda t: [l for l in t.splitlines() if not l.startswith("CSV:")]
    check(strip(res2.stdout) == strip(text), "--threads 2 summary differs from the sequential one")
    rows = list(csv.DictReader(open(out_csv)))
    check(len(rows) == 12000, "CSV has %d rows, expected 12000" % len(rows))

    verdict = np.array([r["verdict"] for r in rows])
    m = re.search(r"parts (\d+)\s+passes (\d+)\s+rejects (\d+)\s+faults (\d+)\s+yield ([\d.]+) %", text)
    check(m is not None, "no totals line")
    parts, passes, rejects, faults, yld = m.groups()
    check(int(parts) == len(rows), "parts")
    check(int(passes) == int(np.sum(verdict == "pass")), "passes")
    check(int(rejects) == int(np.sum(verdict == "reject")), "rejects")
    check(int(faults) == int(np.sum(verdict == "fault")), "faults")
    check(abs(float(yld) - 100.0 * np.mean(verdict == "pass")) < 0.006, "yield")

    # Pareto: counts, percent, cumulative percent of primary reasons
    reasons = [r["reason"] for r in rows if r["verdict"] != "pass"]
    names, counts = np.unique(reasons, return_counts=True)
    order = sorted(zip(-counts, names))
    total = counts.sum()
    cum = 0
    for negc, name in order:
        c = -negc
        cum += c
        mm = re.search(r"^\s+%s\s+(\d+)\s+([\d.]+)%%\s+([\d.]+)%%" % re.escape(name), text, re.M)
        check(mm is not None, "Pareto row %s missing" % name)
        if mm:
            check(int(mm.group(1)) == c, "Pareto count %s" % name)
            check(abs(float(mm.group(2)) - 100.0 * c / total) < 0.006, "Pareto percent %s" % name)
            check(abs(float(mm.group(3)) - 100.0 * cum / total) < 0.006, "Pareto cumulative %s" % name)

    # gauges: numpy mean, sd (ddof=1), Cp, Cpk with the generator's tolerances
    spec = {"od": (40.0, -0.1, 0.1), "id": (30.0, -0.08, 0.08)}
    for g, (nom, lo, hi) in spec.items():
        x = np.array([float(r[g + "_mm"]) for r in rows])
        mean, sd = x.mean(), x.std(ddof=1)
        lsl, usl = nom + lo, nom + hi
        cp = (usl - lsl) / (6 * sd)
        cpk = min(usl - mean, mean - lsl) / (3 * sd)
        mm = re.search(r"^\s+%s\s+(\d+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+(\d+)" % g, text, re.M)
        check(mm is not None, "gauge row %s missing" % g)
        if not mm:
            continue
        n, rmean, rsd, rlsl, rusl, rcp, rcpk, rout = mm.groups()
        check(int(n) == len(x), "gauge %s n" % g)
        check(abs(float(rmean) - mean) < 6e-7, "gauge %s mean %s vs %.9f" % (g, rmean, mean))
        check(abs(float(rsd) - sd) < 6e-8, "gauge %s sd %s vs %.9f" % (g, rsd, sd))
        check(abs(float(rcp) - cp) < 6e-5, "gauge %s Cp %s vs %.6f" % (g, rcp, cp))
        check(abs(float(rcpk) - cpk) < 6e-5, "gauge %s Cpk %s vs %.6f" % (g, rcpk, cpk))
        check(abs(float(rlsl) - lsl) < 1e-4 and abs(float(rusl) - usl) < 1e-4, "gauge %s limits" % g)
        check(int(rout) == int(np.sum((x < lsl) | (x > usl))), "gauge %s out of tolerance" % g)
        # the generator's parameters: id has sd 0.015 and no drift
        if g == "id":
            check(abs(sd - 0.015) < 0.0006 and abs(mean - 30.0) < 0.0006, "id statistics off the generator's")

    # rejects per hour
    hours = {}
    for r in rows:
        key = r["time"][:10] + " " + r["time"][11:13] + ":00"
        p, rj = hours.get(key, (0, 0))
        hours[key] = (p + 1, rj + (r["verdict"] == "reject"))
    for key, (p, rj) in hours.items():
        mm = re.search(r"^\s+%s\s+parts\s+(\d+)\s+rejects\s+(\d+)" % re.escape(key), text, re.M)
        check(mm is not None and int(mm.group(1)) == p and int(mm.group(2)) == rj,
              "rejects per hour %s" % key)

    # drift signals: recompute the EWMA of "od" / "id" with numpy, per shift
    lam, L = 0.2, 3.0
    sig = {"od": (40.0, 0.02), "id": (30.0, 0.015)}
    shift_of = [r["shift"] for r in rows]
    starts = [i for i in range(len(rows)) if i == 0 or shift_of[i] != shift_of[i - 1]]
    sigs = re.findall(r"gauge:(\w+)\s+signal\s+(up|down)\s+ewma ([-\d.]+) limits \[([-\d.]+), ([-\d.]+)\] since seq (\d+).* at part (\d+)", text)
    check(len(sigs) >= 3, "expected drift signals, found %d" % len(sigs))
    first_signal = {}
    for g, direction, ewma, lcl, ucl, since_seq, at in sigs:
        k = int(at) - 1  # 0-based row of the part that signalled
        s0 = max(i for i in starts if i <= k)
        target, sigma = sig[g]
        x = np.array([float(r[g + "_mm"]) for r in rows[s0:k + 1]])
        w = lam * (1 - lam) ** np.arange(len(x))[::-1]
        z = target * (1 - lam) ** len(x) + np.sum(w * x)
        t = len(x)
        h = L * sigma * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * t)))
        check(abs(z - float(ewma)) < 2e-6, "EWMA %s at part %s: %s vs numpy %.7f" % (g, at, ewma, z))
        check(abs(target + h - float(ucl)) < 2e-6 and abs(target - h - float(lcl)) < 2e-6,
              "EWMA limits %s at part %s" % (g, at))
        check((z > target + h) if direction == "up" else (z < target - h),
              "EWMA %s at part %s is not outside its limits" % (g, at))
        first_signal.setdefault((g, s0), k)
    # the first signal of each chart in each shift is numpy's first crossing
    for (g, s0), k in first_signal.items():
        target, sigma = sig[g]
        s1 = min([i for i in starts if i > s0] + [len(rows)])
        x = np.array([float(r[g + "_mm"]) for r in rows[s0:s1]])
        z, first = target, None
        for t, v in enumerate(x, 1):
            z = lam * v + (1 - lam) * z
            h = L * sigma * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * t)))
            if abs(z - target) > h:
                first = s0 + t - 1
                break
        check(first == k, "first %s signal in the shift at row %s, numpy says %s" % (g, k, first))
    # the drift of "od" is flagged before the shift's first "od" gauge reject
    # after the drift began (the point of the warning)
    for s0 in starts:
        s1 = min([i for i in starts if i > s0] + [len(rows)])
        od = np.array([float(r["od_mm"]) for r in rows[s0:s1]])
        out = np.nonzero(od[2500:] > 40.1)[0]
        ups = [int(at) - 1 for g, d, *_rest, at in sigs if g == "od" and d == "up" and s0 + 2500 <= int(at) - 1 < s1]
        if len(out):
            check(len(ups) > 0 and ups[0] < s0 + 2500 + out[0],
                  "drift of od not flagged before its first out-of-tolerance part in shift at %d" % s0)

    if FAILS:
        print("%d check(s) failed" % len(FAILS))
        sys.exit(1)
    print("report matches numpy: counts, Pareto, %d gauges, %d hours, %d drift signals"
          % (len(spec), len(hours), len(sigs)))


if __name__ == "__main__":
    main()
