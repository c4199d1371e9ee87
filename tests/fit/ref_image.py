"""Shared helpers for the image reference checks (ref_pyramid.py,
ref_otsu.py): binary PGM files, running tests/fit/outline_ref_driver, and
the pyramid level as scipy.ndimage computes it.

Run with /usr/bin/python3 (Debian's numpy, scipy, scikit-image).
"""
import subprocess

import numpy as np
import scipy.ndimage as ndi

BINOMIAL = np.array([1, 4, 6, 4, 1], dtype=np.int64)


def write_pgm(path, img):
    img = np.ascontiguousarray(img, dtype=np.uint8)
    with open(path, "wb") as f:
        f.write(b"P5\n%d %d\n255\n" % (img.shape[1], img.shape[0]))
        f.write(img.tobytes())


def read_pgm(path):
    with open(path, "rb") as f:
        data = f.read()
    fields, i = [], 0
    while len(fields) < 4:  # magic, width, height, maxval
        while data[i:i + 1].isspace():
            i += 1
        j = i
        while not data[j:j + 1].isspace():
            j += 1
        fields.append(data[i:j])
        i = j
    i += 1  # exactly one whitespace byte before the pixels
    if fields[0] != b"P5" or int(fields[3]) != 255:
        raise ValueError(path + ": not an 8-bit binary PGM")
    w, h = int(fields[1]), int(fields[2])
    return np.frombuffer(data[i:i + w * h], dtype=np.uint8).reshape(h, w)


def run(driver, *args):
    out = subprocess.run([driver] + [str(a) for a in args], check=True,
                         stdout=subprocess.PIPE, text=True)
    return out.stdout


def reduce_level(a):
    """One pyramid step as defined in fit/pyramid.h, with scipy.ndimage:
    correlate1d with [1 4 6 4 1] along each axis, mode "nearest" (edge
    pixels repeated), exact in int64; divide by 256 rounding half up; keep
    even rows and columns."""
    s = ndi.correlate1d(a.astype(np.int64), BINOMIAL, axis=0, mode="nearest")
    s = ndi.correlate1d(s, BINOMIAL, axis=1, mode="nearest")
    return ((s + 128) >> 8)[::2, ::2].astype(np.uint8)


def pyramid(a, levels):
    out = [np.asarray(a, dtype=np.uint8)]
    for _ in range(1, levels):
        out.append(reduce_level(out[-1]))
    return out
