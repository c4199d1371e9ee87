#!/usr/bin/python3
"""Reference check of io/image_file against OpenCV (Debian's python3-opencv):
files we write are read by cv2.imread pixel for pixel, and files cv2.imwrite
writes (grey 8 and 16 bit, PGM and PNG, colour with and without alpha) are
read by us as the documented conversion says:
  8-bit grey: unchanged;
  16-bit: round(v * 255 / 65535), i.e. (v * 255 + 32767) // 65535 (the
          halves cannot occur since 65535 is odd);
  colour: Rec. 601 luma; OpenCV's cvtColor(BGR2GRAY) uses the same weights
          (0.299, 0.587, 0.114) in its own fixed point, so we allow 1 grey
          level of rounding difference.
usage: ref_image_file.py DRIVER"""
import os
import subprocess
import sys
import tempfile

import cv2
import numpy as np

driver = sys.argv[1]
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        failures.append(what)


def ours(path):
    out = subprocess.run([driver, "read", path], check=True, capture_output=True,
                         text=True).stdout.split("\n")
    w, h = map(int, out[0].split())
    a = np.array([list(map(int, line.split())) for line in out[1:1 + h]], dtype=np.int64)
    assert a.shape == (h, w)
    return a


with tempfile.TemporaryDirectory() as tmp:
    # ---- ours -> OpenCV
    subprocess.run([driver, "write", tmp], check=True)
    y, x = np.mgrid[0:77, 0:123]
    grey = ((x * 7 + y * 13) ^ (x * y)) & 255
    for name in ("ours.pgm", "ours.png"):
        im = cv2.imread(os.path.join(tmp, name), cv2.IMREAD_UNCHANGED)
        check(im is not None and im.dtype == np.uint8 and im.shape == grey.shape
              and np.array_equal(im, grey), f"cv2 reads our {name} pixel for pixel")
    rgb = np.dstack([(x * 3) & 255, (y * 5) & 255, ((x + y) * 11) & 255])
    im = cv2.imread(os.path.join(tmp, "ours_rgb.png"), cv2.IMREAD_UNCHANGED)
    check(im is not None and im.shape == (77, 123, 3)
          and np.array_equal(im[:, :, ::-1], rgb), "cv2 reads our RGB PNG pixel for pixel")

    # ---- OpenCV -> ours
    rng = np.random.default_rng(20240601)
    g8 = rng.integers(0, 256, (61, 97), dtype=np.uint8)
    g16 = rng.integers(0, 65536, (61, 97), dtype=np.uint16)
    g16[0, :4] = [0, 65535, 32767, 32768]
    for ext in ("png", "pgm"):
        p = os.path.join(tmp, f"cv8.{ext}")
        cv2.imwrite(p, g8)
        check(np.array_equal(ours(p), g8), f"we read cv2's 8-bit {ext} pixel for pixel")
        p = os.path.join(tmp, f"cv16.{ext}")
        cv2.imwrite(p, g16)
        want = (g16.astype(np.int64) * 255 + 32767) // 65535
        got = ours(p)
        check(np.array_equal(got, want),
              f"we read cv2's 16-bit {ext} as round(v*255/65535) "
              f"(max diff {np.abs(got - want).max()})")
    bgr = rng.integers(0, 256, (61, 97, 3), dtype=np.uint8)
    p = os.path.join(tmp, "cvbgr.png")
    cv2.imwrite(p, bgr)
    d = np.abs(ours(p) - cv2.cvtColor(bgr, cv2.COLOR_BGR2GRAY).astype(np.int64))
    check(d.max() <= 1 and d.mean() < 0.5,
          f"colour PNG vs cv2 BGR2GRAY: max diff {d.max()}, mean {d.mean():.3f}")
    bgra = rng.integers(0, 256, (61, 97, 4), dtype=np.uint8)
    p = os.path.join(tmp, "cvbgra.png")
    cv2.imwrite(p, bgra)
    d = np.abs(ours(p) - cv2.cvtColor(bgra, cv2.COLOR_BGRA2GRAY).astype(np.int64))
    check(d.max() <= 1, f"colour + alpha PNG vs cv2 BGRA2GRAY: max diff {d.max()}")
    # the comparison can fail: a one-level change is seen
    check(not np.array_equal(ours(os.path.join(tmp, "cv8.png")), (g8.astype(np.int64) + 1) % 256),
          "a changed image is told apart (the check can fail)")

sys.exit(1 if failures else 0)
