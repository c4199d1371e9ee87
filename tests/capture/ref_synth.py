#!/usr/bin/python3
"""Reference check of the synthetic line's ground truth against OpenCV and
scikit-image (Debian's python3-opencv, python3-skimage), through the real
`modeband synth` command: noise-free, unblurred, evenly lit back-lit frames,
written as PGM and PNG with labels.jsonl.

From each frame the part's coverage is a = (B - I) / (B - P) (B, P the grey
levels in the labels). Checked against the truth polygons of the label:
  * OpenCV image moments of a (cv2.moments on the float image, pixel centres
    at integers) against OpenCV contour moments of the truth outlines (outer
    edge minus holes): area to 0.05 %, centroid to 0.01 px, second central
    moments to 0.1 % after removing the pixel's own box variance, area/12
    per axis (each pixel's mass is spread over a unit square, whose variance
    about its centre is 1/12);
  * scikit-image regionprops of the half-coverage mask: area to 0.5 %,
    centroid to 0.1 px (a thresholded mask loses the sub-pixel edge), and
    the major axis direction to 0.3 degrees on elongated parts (eigenvalue
    ratio above 1.2).
The last check shifts a truth outline by 0.25 px and must see it.
usage: ref_synth.py MODEBAND SCRATCH"""
import json
import os
import shutil
import subprocess
import sys

import cv2
import numpy as np
from skimage import measure

modeband, scratch = sys.argv[1], sys.argv[2]
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def poly_moments(outlines, shift=0.0):
    """Spatial moments of the part: outer edge minus the holes (cv2 contour
    moments are always those of a positive area)."""
    tot = None
    for k, o in enumerate(outlines):
        c = np.array(o, dtype=np.float64)
        c[:, 0] += shift
        m = cv2.moments(c.astype(np.float32).reshape(-1, 1, 2))
        v = np.array([m[n] for n in ("m00", "m10", "m01", "m20", "m11", "m02")])
        tot = v if tot is None else (tot - v if k > 0 else tot + v)
    return tot


def central(v):
    m00, m10, m01, m20, m11, m02 = v
    cx, cy = m10 / m00, m01 / m00
    return m00, cx, cy, m20 - cx * m10, m11 - cx * m01, m02 - cy * m01


shutil.rmtree(scratch, ignore_errors=True)
os.makedirs(scratch)
worst = {"area": 0.0, "centroid": 0.0, "mu": 0.0, "sk_area": 0.0, "sk_c": 0.0, "axis": 0.0}
last = None
for fam, fmt in (("ring", "pgm"), ("flange", "png"), ("hose", "pgm"), ("lipseal", "png")):
    out = os.path.join(scratch, fam)
    r = subprocess.run([modeband, "synth", "--family", fam, "--count", "5", "--size", "640x512",
                        "--noise", "0", "--blur", "0", "--illumination", "0", "--seed", "77",
                        "--format", fmt, "--out", out], capture_output=True, text=True)
    check(r.returncode == 0, f"modeband synth --family {fam} --format {fmt} exits 0 {r.stderr.strip()}")
    with open(os.path.join(out, "labels.jsonl")) as f:
        labels = [json.loads(line) for line in f]
    check(len(labels) == 5 and all(os.path.exists(os.path.join(out, l["image"])) for l in labels),
          f"{fam}: 5 labels, each naming a written {fmt} file")
    for lab in labels:
        im = cv2.imread(os.path.join(out, lab["image"]), cv2.IMREAD_UNCHANGED).astype(np.float64)
        B, P = lab["grey"]["background"], lab["grey"]["part"]
        a = (B - im) / (B - P)
        m = cv2.moments(a.astype(np.float32))
        img = central(np.array([m[n] for n in ("m00", "m10", "m01", "m20", "m11", "m02")]))
        tru = central(poly_moments(lab["outlines"]))
        worst["area"] = max(worst["area"], abs(img[0] - tru[0]) / tru[0])
        worst["centroid"] = max(worst["centroid"], np.hypot(img[1] - tru[1], img[2] - tru[2]))
        box = tru[0] / 12.0
        for i, corr in ((3, box), (4, 0.0), (5, box)):
            worst["mu"] = max(worst["mu"], abs(img[i] - (tru[i] - corr)) / (tru[3] + tru[5]))
        # scikit-image on the half-coverage mask
        props = measure.regionprops((a > 0.5).astype(np.uint8))
        check(len(props) == 1, f"{lab['image']}: one region at half coverage")
        p = props[0]
        worst["sk_area"] = max(worst["sk_area"], abs(p.area - tru[0]) / tru[0])
        worst["sk_c"] = max(worst["sk_c"], np.hypot(p.centroid[1] - tru[1], p.centroid[0] - tru[2]))
        mu20, mu11, mu02 = tru[3], tru[4], tru[5]
        ev = np.linalg.eigvalsh([[mu20, mu11], [mu11, mu02]])
        if ev[1] / ev[0] > 1.2:
            th = 0.5 * np.arctan2(2 * mu11, mu20 - mu02)  # from the x axis
            axis_xy = np.array([np.cos(th), np.sin(th)])
            o = p.orientation  # from the row axis (skimage convention)
            axis_sk = np.array([np.sin(o), np.cos(o)])  # as (x, y)
            ang = np.degrees(np.arccos(min(1.0, abs(axis_xy @ axis_sk))))
            worst["axis"] = max(worst["axis"], ang)
        last = (a, lab)

print("worst: area %.5f %%, centroid %.4f px, second moments %.5f %%; "
      "skimage: area %.4f %%, centroid %.4f px, axis %.4f deg"
      % (100 * worst["area"], worst["centroid"], 100 * worst["mu"], 100 * worst["sk_area"],
         worst["sk_c"], worst["axis"]))
check(worst["area"] < 5e-4, "cv2 image moments: area within 0.05 % of the truth polygons")
check(worst["centroid"] < 0.01, "cv2 image moments: centroid within 0.01 px")
check(worst["mu"] < 1e-3, "cv2 image moments: second central moments within 0.1 %")
check(worst["sk_area"] < 5e-3, "skimage regionprops: area within 0.5 %")
check(worst["sk_c"] < 0.1, "skimage regionprops: centroid within 0.1 px")
check(worst["axis"] < 0.3, "skimage regionprops: major axis within 0.3 degrees")
# the comparison can fail: a truth shifted by 0.25 px is seen
a, lab = last
m = cv2.moments(a.astype(np.float32))
shifted = central(poly_moments(lab["outlines"], shift=0.25))
check(abs(m["m10"] / m["m00"] - shifted[1]) > 0.1, "a truth shifted by 0.25 px is told apart")
sys.exit(1 if failures else 0)
