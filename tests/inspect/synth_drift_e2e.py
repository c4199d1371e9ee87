#!/usr/bin/python3
"""tests/inspect/synth_drift_e2e.py - the synthetic line's slow drift is
flagged by the EWMA chart before the first reject (issue 7).

usage: synth_drift_e2e.py MODEBAND DRIFT_DRIVER SCRATCH

Teach a ring from 30 good frames; inspect them again to set the size
chart's target and sigma (the usual phase-I estimate from an in-control
run); then make 250 parts with `modeband synth --drift 1e-4` (each part
0.01 % larger than the one before), inspect them, and run the size values
through inspect/drift.h (lambda 0.2, L 3). Checks: the chart's EWMA and
limits equal a numpy recursion (NIST/SEMATECH e-Handbook 6.3.2.4); the
chart signals "up"; the first size reject comes later than the signal; no
false signal on the good run itself.
"""
import json
import os
import shutil
import subprocess
import sys

import numpy as np


def inspect(mb, model, folder):
    imgs = sorted(os.path.join(folder, f) for f in os.listdir(folder) if f.endswith(".pgm"))
    out = subprocess.run([mb, "inspect", "--model", model, "--json"] + imgs,
                         capture_output=True, text=True)
    rows = [json.loads(l) for l in out.stdout.splitlines() if l.strip()]
    assert len(rows) == len(imgs), "inspect gave %d results for %d images" % (len(rows), len(imgs))
    return rows


def chart(driver, target, sigma, x):
    res = subprocess.run([driver, "0.2", "3", "10", repr(target), repr(sigma)],
                         input="\n".join(repr(v) for v in x), capture_output=True,
                         text=True, check=True)
    return [l.split() for l in res.stdout.splitlines()]


def main():
    mb, driver, tmp = sys.argv[1:4]
    shutil.rmtree(tmp, ignore_errors=True)
    os.makedirs(tmp)
    run = lambda *a: subprocess.run(list(a), check=True, capture_output=True)
    run(mb, "synth", "--family", "ring", "--count", "30", "--seed", "21",
        "--size", "640x512", "--out", os.path.join(tmp, "good"))
    model = os.path.join(tmp, "model.json")
    run(mb, "teach", "--images", os.path.join(tmp, "good"), "--out", model, "--mm-per-px", "0.1")
    good = inspect(mb, model, os.path.join(tmp, "good"))
    s0 = np.array([r["size_mm"] for r in good])
    target, sigma = float(s0.mean()), float(s0.std(ddof=1))
    run(mb, "synth", "--family", "ring", "--count", "250", "--seed", "22",
        "--size", "640x512", "--drift", "0.0001", "--out", os.path.join(tmp, "drift"))
    rows = inspect(mb, model, os.path.join(tmp, "drift"))
    x = np.array([r["size_mm"] if r.get("size_mm") is not None else np.nan for r in rows])
    fails = []
    if np.isnan(x).any():
        fails.append("some parts have no size")
    out = chart(driver, target, sigma, x)
    # numpy recursion
    lam, L, z = 0.2, 3.0, target
    for t, (v, line) in enumerate(zip(x, out), 1):
        z = lam * v + (1 - lam) * z
        h = L * sigma * np.sqrt(lam / (2 - lam) * (1 - (1 - lam) ** (2 * t)))
        if abs(float(line[1]) - z) > 1e-9 or abs(float(line[3]) - (target + h)) > 1e-9:
            fails.append("EWMA differs from numpy at part %d" % t)
            break
    signals = [int(l[0]) for l in out if l[4] == "1"]
    first_signal = signals[0] if signals else None
    if first_signal is None:
        fails.append("the drift was never flagged")
    elif float(out[first_signal - 1][1]) <= target:
        fails.append("the first signal is not upward")
    size_rejects = [i + 1 for i, r in enumerate(rows) if r["verdict"] != "pass"
                    and any(q.get("name", q.get("reason", "")) == "size" or "size" in json.dumps(q)
                            for q in r["reasons"])]
    rejects = [i + 1 for i, r in enumerate(rows) if r["verdict"] != "pass"]
    first_reject = rejects[0] if rejects else None
    good_chart = chart(driver, target, sigma, s0)
    if any(l[4] == "1" for l in good_chart):
        fails.append("false signal on the good teaching run")
    print("size chart: target %.4f mm, sigma %.4f mm; first signal at part %s "
          "(began at part %s); first reject at part %s (%d rejects, %d by size)"
          % (target, sigma, first_signal,
             out[first_signal - 1][5] if first_signal else None,
             first_reject, len(rejects), len(size_rejects)))
    if first_reject is None:
        fails.append("no reject in 250 drifting parts: the drift is too slow to test")
    elif first_signal is not None and first_signal >= first_reject:
        fails.append("signal at %d is not before the first reject at %d" % (first_signal, first_reject))
    for f in fails:
        print("FAIL:", f)
    sys.exit(1 if fails else 0)


if __name__ == "__main__":
    main()
