#!/usr/bin/python3
"""The plain OpenCV inspection an integrator would otherwise write, on the
frames bench_inspect.c writes: taught from the same good frames, judged
against the generator's labels (io/labels_file.h).

Per frame (OpenCV 4 Python API, docs.opencv.org: cv2.threshold with
THRESH_OTSU, cv2.findContours with RETR_CCOMP, cv2.contourArea, cv2.moments,
cv2.HuMoments):
  - global Otsu threshold (part dark on a bright field when back-lit, bright
    on a darker belt when front-lit);
  - contours in two levels (RETR_CCOMP: outer edges and their holes); specks
    under MIN_AREA px are ignored;
  - the part = the largest outer contour; a second outer contour of more
    than a tenth of the taught area = two parts (reject); none = no part;
  - the number of holes of the part must equal the taught number;
  - features: outer area, total hole area, and the seven Hu moments of the
    part's region (filled outer contour minus holes), log-scaled as
    -sign(h) log10|h| (the usual way to bring them to comparable ranges);
    each must lie within mean +- k sd of the teaching frames, with k chosen
    so that a normal feature falls outside with probability 0.005 / F (F
    features), i.e. about 0.5 % false rejects overall by a normal (and
    Bonferroni) assumption: k = norm.ppf(1 - 0.005 / (2 F)) (scipy.stats).
Timing: time.perf_counter (wall) and time.thread_time (CPU time of the
thread) around the per-frame work with the image already decoded;
cv2.setNumThreads(1) for one core.

Prints a summary for bench_inspect.c to parse:
  cv_result good=.. fr=.. defect=.. esc=.. defect05=.. esc05=.. med=.. p99=..
            cpu_med=.. cpu_p99=.. part_p99=.. part_cpu_p99=.. (p99 of the
            frames with a part: an empty frame makes Otsu split the lit
            field into hundreds of contours, which is slow)
  cv_types nick 0/11 flash 2/11 ...
"""
import argparse
import glob
import json
import math
import os
import sys
import time

import cv2
import numpy as np
from scipy.stats import norm

MIN_AREA = 20.0  # px^2 (0.2 mm^2 at 0.1 mm/px): sensor-noise specks
FR_TARGET = 0.005


def region_features(img, dark_part):
    """(n_parts, n_holes, features) of one frame, or (0, 0, None)."""
    flags = cv2.THRESH_OTSU | (cv2.THRESH_BINARY_INV if dark_part else cv2.THRESH_BINARY)
    _, bw = cv2.threshold(img, 0, 255, flags)
    contours, hier = cv2.findContours(bw, cv2.RETR_CCOMP, cv2.CHAIN_APPROX_NONE)
    if hier is None or not contours:
        return 0, 0, None
    hier = hier[0]
    outers = [(cv2.contourArea(c), i) for i, c in enumerate(contours)
              if hier[i][3] < 0]
    outers = [o for o in outers if o[0] >= MIN_AREA]
    if not outers:
        return 0, 0, None
    outers.sort(reverse=True)
    area, best = outers[0]
    n_parts = 1 + sum(1 for a, _ in outers[1:] if a > 0.1 * area)
    holes = []
    child = hier[best][2]
    while child >= 0:
        a = cv2.contourArea(contours[child])
        if a >= MIN_AREA:
            holes.append(child)
        child = hier[child][0]
    hole_area = sum(cv2.contourArea(contours[h]) for h in holes)
    # moments of the region: outer contour's moments minus the holes'
    m = cv2.moments(contours[best])
    for h in holes:
        mh = cv2.moments(contours[h])
        for key in ("m00", "m10", "m01", "m20", "m11", "m02", "m30", "m21", "m12", "m03"):
            m[key] -= mh[key]
    region = _central_moments(m)
    hu = cv2.HuMoments(region).ravel()
    loghu = [-math.copysign(1.0, h) * math.log10(abs(h)) if h != 0 else 0.0 for h in hu]
    return n_parts, len(holes), np.array([area, hole_area] + loghu)


def _central_moments(m):
    """Normalised central moments (the keys cv2.HuMoments reads) from the raw
    moments m00..m03, by the usual formulas (Hu 1962)."""
    m00 = m["m00"]
    if m00 <= 0:
        m00 = 1e-12
    xc, yc = m["m10"] / m00, m["m01"] / m00
    mu = {
        "mu20": m["m20"] - xc * m["m10"],
        "mu11": m["m11"] - xc * m["m01"],
        "mu02": m["m02"] - yc * m["m01"],
        "mu30": m["m30"] - 3 * xc * m["m20"] + 2 * xc * xc * m["m10"],
        "mu21": m["m21"] - 2 * xc * m["m11"] - yc * m["m20"] + 2 * xc * xc * m["m01"],
        "mu12": m["m12"] - 2 * yc * m["m11"] - xc * m["m02"] + 2 * yc * yc * m["m10"],
        "mu03": m["m03"] - 3 * yc * m["m02"] + 2 * yc * yc * m["m01"],
    }
    out = dict(m)
    out["m00"] = m00
    for k, v in mu.items():
        p, q = int(k[2]), int(k[3])
        out["nu" + k[2:]] = v / m00 ** (1 + (p + q) / 2.0)
        out[k] = v
    return out


def med_p99(v):
    """median and 99th percentile (nearest rank), as bench_inspect.c."""
    v = sorted(v)
    return float(np.median(v)), v[max(0, int(math.ceil(0.99 * len(v))) - 1)]


def load(paths):
    imgs = []
    for p in paths:
        img = cv2.imread(p, cv2.IMREAD_GRAYSCALE)
        if img is None:
            sys.exit("bench_inspect_opencv: cannot read %s" % p)
        imgs.append(img)
    return imgs


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--teach", required=True)
    ap.add_argument("--test", required=True)
    ap.add_argument("--lighting", choices=("back", "front"), required=True)
    a = ap.parse_args()
    cv2.setNumThreads(1)
    dark = a.lighting == "back"

    teach = load(sorted(glob.glob(os.path.join(a.teach, "*.pgm"))))
    feats, holes = [], []
    for img in teach:
        n_parts, n_holes, f = region_features(img, dark)
        if n_parts != 1 or f is None:
            continue  # the integrator drops a teaching frame it cannot read
        feats.append(f)
        holes.append(n_holes)
    if len(feats) < 5:
        sys.exit("bench_inspect_opencv: only %d usable teaching frames" % len(feats))
    n_holes_taught = max(set(holes), key=holes.count)
    feats = np.array([f for f, h in zip(feats, holes) if h == n_holes_taught])
    mean, sd = feats.mean(axis=0), feats.std(axis=0, ddof=1)
    sd = np.maximum(sd, 1e-9 * np.maximum(np.abs(mean), 1.0))
    k = norm.ppf(1.0 - FR_TARGET / (2.0 * len(mean)))
    lo, hi = mean - k * sd, mean + k * sd

    labels = []
    with open(os.path.join(a.test, "labels.jsonl")) as fh:
        for line in fh:
            if line.strip():
                labels.append(json.loads(line))
    imgs = load([os.path.join(a.test, r["image"]) for r in labels])

    times, cpu = [], []
    verdicts = []
    for img in imgs:
        c0 = time.thread_time()
        t0 = time.perf_counter()
        n_parts, n_holes, f = region_features(img, dark)
        ok = (n_parts == 1 and f is not None and n_holes == n_holes_taught
              and bool(np.all((f >= lo) & (f <= hi))))
        times.append(1e3 * (time.perf_counter() - t0))
        cpu.append(1e3 * (time.thread_time() - c0))
        verdicts.append(ok)

    good = fr = defect = esc = defect05 = esc05 = 0
    by_type = {}
    for r, ok in zip(labels, verdicts):
        t = r["defect"]["type"]
        if r["good"]:
            good += 1
            fr += not ok
            continue
        big = t == "empty" or r["defect"]["size_mm"] >= 0.5
        defect += 1
        esc += ok
        defect05 += big
        esc05 += big and ok
        e, n = by_type.get(t, (0, 0))
        by_type[t] = (e + ok, n + 1)
    med, p99 = med_p99(times)
    cpu_med, cpu_p99 = med_p99(cpu)
    present = [r["present"] for r in labels]
    _, part_p99 = med_p99([t for t, p in zip(times, present) if p])
    _, part_cpu_p99 = med_p99([t for t, p in zip(cpu, present) if p])
    print("  opencv: taught from %d of %d frames, %d holes, k = %.2f sd on %d features"
          % (len(feats), len(teach), n_holes_taught, k, len(mean)))
    print("cv_result good=%d fr=%d defect=%d esc=%d defect05=%d esc05=%d med=%.4f p99=%.4f"
          " cpu_med=%.4f cpu_p99=%.4f part_p99=%.4f part_cpu_p99=%.4f"
          % (good, fr, defect, esc, defect05, esc05, med, p99, cpu_med, cpu_p99,
             part_p99, part_cpu_p99))
    print("cv_types " + " ".join("%s %d/%d" % (t, e, n) for t, (e, n) in sorted(by_type.items())))


if __name__ == "__main__":
    main()
