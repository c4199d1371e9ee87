"""Reference check: Otsu's threshold (mb_outline_threshold, and the one the
outliner uses on its working pyramid level) against
skimage.filters.threshold_otsu.

usage: ref_otsu.py OUTLINE_REF_DRIVER

How the two are compared. For an integer image skimage builds one
histogram bin per grey value from the image's minimum to its maximum
(skimage.exposure.histogram with source_range="image"), returns the bin
centre t of the best split, and the foreground is `image > t`; its best
split is numpy.argmax over the thresholds, i.e. the first maximum. Ours
puts grey <= t in the dark class and grey > t in the bright class and also
keeps the first maximum. So the two t are the same integer and give the
same partition of the pixels; no half-bin shift is involved. The only
allowed difference is a floating-point tie: then skimage's own
between-class variance (w1 w2 (m1 - m2)^2, computed here the way skimage
computes it) must be equal at both thresholds to 1e-12.

Images: skimage.data.camera() and coins() (published test images shipped
with scikit-image), rendered dark and bright discs on fields with noise,
Gaussian mixtures, uniform noise, narrow-range and two-valued images. Then
the outliner's threshold on pyramid level 2 is compared with
threshold_otsu of that level computed with scipy.ndimage
(ref_image.reduce_level). A shifted threshold is shown to be caught.
"""
import os
import sys
import tempfile

import numpy as np
import skimage.data
from skimage.filters import threshold_otsu

from ref_image import pyramid, run, write_pgm


def skimage_between(img, t):
    """Between-class variance of the split at t, as skimage computes it."""
    v = img.ravel().astype(np.int64)
    lo, hi = v[v <= t], v[v > t]
    if lo.size == 0 or hi.size == 0:
        return -1.0
    return float(lo.size) * hi.size * (lo.mean() - hi.mean()) ** 2


def agree(ours, ref, img):
    if ours == ref:
        return True
    a, b = skimage_between(img, ours), skimage_between(img, ref)
    return abs(a - b) <= 1e-12 * max(a, b)


def disc(rng, h, w, part, back, noise):
    yy, xx = np.mgrid[0:h, 0:w]
    cx, cy, r = rng.uniform(0.3 * w, 0.7 * w), rng.uniform(0.3 * h, 0.7 * h), 0.25 * min(h, w)
    img = np.where((xx - cx) ** 2 + (yy - cy) ** 2 < r * r, part, back).astype(float)
    return np.clip(np.rint(img + rng.normal(0, noise, img.shape)), 0, 255).astype(np.uint8)


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(1979)
    images = [("camera", skimage.data.camera()), ("coins", skimage.data.coins())]
    for k in range(4):
        images.append(("dark disc %d" % k, disc(rng, 200, 240, 22 + 10 * k, 215, 2 + k)))
        images.append(("bright disc %d" % k, disc(rng, 180, 260, 150, 72 + 5 * k, 2 + 2 * k)))
    for k in range(6):
        n = 20000
        w = rng.uniform(0.05, 0.95)
        m0, m1 = rng.uniform(10, 120), rng.uniform(130, 245)
        v = np.where(rng.random(n) < w, rng.normal(m0, rng.uniform(2, 25), n),
                     rng.normal(m1, rng.uniform(2, 25), n))
        images.append(("mixture %d" % k,
                       np.clip(np.rint(v), 0, 255).astype(np.uint8).reshape(100, 200)))
    images.append(("uniform noise", rng.integers(0, 256, (90, 110), dtype=np.uint8)))
    images.append(("narrow range", rng.integers(100, 111, (64, 64), dtype=np.uint8)))
    two = np.full((50, 60), 40, np.uint8)
    two[10:30, 5:40] = 190
    images.append(("two values", two))

    failures = 0
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "in.pgm")
        for name, img in images:
            write_pgm(src, img)
            ours = int(run(driver, "otsu", src).split()[0])
            ref = int(threshold_otsu(img))
            ok = agree(ours, ref, img)
            print("%-16s ours %3d  skimage %3d  %s" % (name, ours, ref,
                                                     "same" if ours == ref else
                                                     ("tie" if ok else "DIFFERENT")))
            failures += not ok
            # the comparison notices a threshold one grey level off (where
            # that moves any pixel)
            if np.any(img == ref) and np.any(img > ref + 1):
                assert not agree(ref + 1, ref, img) or not agree(ref - 1, ref, img), \
                    "Otsu comparison cannot fail"
            if min(img.shape) >= 64:
                # the outliner's threshold is Otsu of its working level 2
                rc, t2 = [int(v) for v in run(driver, "outline", src, 2).split()[:2]]
                lv = pyramid(img, 3)[2]
                if lv.min() == lv.max():
                    continue
                ref2 = int(threshold_otsu(lv))
                ok = agree(t2, ref2, lv)
                print("%-16s level 2: ours %3d  skimage %3d  %s (outliner result %d)"
                      % (name, t2, ref2, "same" if t2 == ref2 else
                         ("tie" if ok else "DIFFERENT"), rc))
                failures += not ok
    if failures:
        print("ref_otsu: %d comparisons FAILED" % failures)
        return 1
    print("ref_otsu: every threshold equals skimage.filters.threshold_otsu")
    return 0


if __name__ == "__main__":
    sys.exit(main())
