#!/usr/bin/python3
"""The printable sheet against the detector: `modeband target` writes the
SVG, OpenCV (Debian's python3-opencv) rasterises it at 4 px per mm from its
own elements (circles anti-aliased with cv2.circle at 1/16 px, the scale
bar with cv2.line, the text lines with cv2.putText's Hershey font at the
sheet's positions and size, standing in for the printer's font), and
`modeband calibrate` must find the target in the picture and give 0.25 mm
per px. This ties the sheet's geometry (dots, corner marks, pitch code,
quiet zone, text placement) to what the detector expects, for a few grid
sizes and pitches, also seen through a perspective warp (a camera tilted
about 10 degrees, cv2.warpPerspective).
usage: ref_target_svg.py MODEBAND SCRATCH_DIR"""
import os
import re
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET

import cv2
import numpy as np

mb, scratch = sys.argv[1], sys.argv[2]
shutil.rmtree(scratch, ignore_errors=True)
os.makedirs(scratch)
NS = "{http://www.w3.org/2000/svg}"
PPM = 4.0  # px per mm
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def rasterise(svg_path):
    root = ET.parse(svg_path).getroot()
    w = float(root.attrib["width"].removesuffix("mm"))
    h = float(root.attrib["height"].removesuffix("mm"))
    img = np.full((int(round(h * PPM)), int(round(w * PPM))), 225, np.uint8)
    S = 16  # cv2's shift of 4 bits: coordinates in 1/16 px
    for c in root.iter(NS + "circle"):
        x, y, r = (float(c.attrib[k]) for k in ("cx", "cy", "r"))
        # SVG user units are mm with (0, 0) at the corner of the sheet;
        # pixel centres are at integers, so mm x maps to x * PPM - 0.5 px.
        cv2.circle(img, (int(round((x * PPM - 0.5) * S)), int(round((y * PPM - 0.5) * S))),
                   int(round(r * PPM * S)), 25, -1, cv2.LINE_AA, 4)
    for t in root.iter(NS + "text"):
        size = float(t.attrib.get("font-size", "3"))
        cv2.putText(img, t.text, (int(float(t.attrib["x"]) * PPM), int(float(t.attrib["y"]) * PPM)),
                    cv2.FONT_HERSHEY_SIMPLEX, size * PPM / 30.0, 25, 1, cv2.LINE_AA)
    for ln in root.iter(NS + "line"):
        p = [int(round(float(ln.attrib[k]) * PPM)) for k in ("x1", "y1", "x2", "y2")]
        cv2.line(img, (p[0], p[1]), (p[2], p[3]), 25, 1, cv2.LINE_AA)
    return img


def calibrate(frame, rows, cols, pitch):
    out = os.path.join(scratch, "cal.json")
    r = subprocess.run([mb, "calibrate", "--pitch", str(pitch), "--rows", str(rows),
                        "--cols", str(cols), "--radial", "0", "--no-tangential",
                        "--out", out, frame], capture_output=True, text=True)
    rms = scale = None
    m = re.search(r"reprojection RMS ([0-9.]+) px", r.stdout)
    if m:
        rms = float(m.group(1))
    m = re.search(r"  centre .*?: ([0-9.]+) mm/px", r.stdout)
    if m:
        scale = float(m.group(1))
    return r.returncode, rms, scale, r.stderr.strip()


for rows, cols, pitch in ((7, 9, 10.0), (5, 5, 5.0), (12, 16, 12.5), (6, 11, 7.5)):
    svg = os.path.join(scratch, f"t{rows}x{cols}.svg")
    r = subprocess.run([mb, "target", "--pitch", str(pitch), "--rows", str(rows),
                        "--cols", str(cols), "--out", svg], capture_output=True, text=True)
    check(r.returncode == 0, f"{rows}x{cols} at {pitch} mm: target written")
    img = rasterise(svg)
    png = os.path.join(scratch, f"t{rows}x{cols}.png")
    cv2.imwrite(png, img)
    code, rms, scale, err = calibrate(png, rows, cols, pitch)
    check(code == 0 and scale is not None and abs(scale * PPM - 1) < 1e-3 and rms < 0.05,
          f"{rows}x{cols} at {pitch} mm, flat: found, scale {scale} mm/px "
          f"(truth {1 / PPM}), RMS {rms} px {err}")
    # The same seen by a tilted camera: a homography that shrinks the far
    # side by 15 % and turns the sheet 20 degrees.
    hh, ww = img.shape
    src = np.float32([[0, 0], [ww, 0], [ww, hh], [0, hh]])
    dst = np.float32([[0.075 * ww, 0], [0.925 * ww, 0], [ww, hh], [0, hh]])
    Hm = cv2.getPerspectiveTransform(src, dst)
    rot = cv2.getRotationMatrix2D((ww / 2, hh / 2), 20, 1.0)
    Hm = np.vstack([rot, [0, 0, 1]]) @ Hm
    pad = int(0.3 * max(ww, hh))
    T = np.array([[1, 0, pad], [0, 1, pad], [0, 0, 1]], dtype=np.float64)
    warped = cv2.warpPerspective(img, T @ Hm, (ww + 2 * pad, hh + 2 * pad),
                                 flags=cv2.INTER_CUBIC, borderValue=90)
    wpng = os.path.join(scratch, f"w{rows}x{cols}.png")
    cv2.imwrite(wpng, warped)
    code, rms, scale, err = calibrate(wpng, rows, cols, pitch)
    check(code == 0 and rms < 0.1,
          f"{rows}x{cols} at {pitch} mm, tilted and turned: found, RMS {rms} px {err}")
    # A wrong pitch is refused for the sheet as printed.
    code, rms, scale, err = calibrate(png, rows, cols, pitch * 1.2)
    check(code == 1 and "printed with a" in err,
          f"{rows}x{cols}: --pitch {pitch * 1.2:g} refused ({err[:60]}...)")

if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")
