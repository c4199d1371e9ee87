"""Reference check: the Gaussian pyramid and the samplers of fit/pyramid.h
against scipy.ndimage.

usage: ref_pyramid.py OUTLINE_REF_DRIVER

- Levels: on random images of odd, even, tiny and frame-like sizes, and on
  a smooth ramp with noise, every level must equal, pixel for pixel,
  scipy.ndimage.correlate1d with the kernel [1 4 6 4 1] along both axes
  (mode "nearest": edge pixels repeated), rounded as (sum + 128) >> 8, and
  decimated to the even rows and columns (ref_image.reduce_level).
- Sampling: at random real points on every level, inside and a little
  outside the image, the bilinear grey must equal
  scipy.ndimage.map_coordinates(level, order=1, mode="nearest"), and the
  gradient must equal map_coordinates of the central differences
  scipy.ndimage.correlate1d(level, [-0.5, 0, 0.5], mode="nearest") along x
  and y, both to 1e-9 grey levels.
- Each comparison is shown to fail on a one-grey-level change of one pixel
  or a 1e-6 change of one sample.
"""
import os
import sys
import tempfile

import numpy as np
import scipy.ndimage as ndi

from ref_image import pyramid, read_pgm, run, write_pgm

LEVELS = 4


def levels_equal(ours, ref):
    return all(a.shape == b.shape and np.array_equal(a, b) for a, b in zip(ours, ref))


def samples_close(ours, ref):
    return ours.shape == ref.shape and np.max(np.abs(ours - ref)) <= 1e-9


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(20240)
    images = []
    for h, w in [(1, 1), (3, 2), (5, 7), (16, 16), (17, 33), (77, 101), (13, 250),
                 (480, 640)]:
        images.append(("random %dx%d" % (w, h), rng.integers(0, 256, (h, w), dtype=np.uint8)))
    yy, xx = np.mgrid[0:301, 0:403]
    ramp = 30 + 0.4 * xx + 0.2 * yy + rng.normal(0, 2, xx.shape)
    images.append(("ramp 403x301", np.clip(np.rint(ramp), 0, 255).astype(np.uint8)))

    failures = 0
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "in.pgm")
        pts = os.path.join(tmp, "points.txt")
        for name, img in images:
            write_pgm(src, img)
            run(driver, "pyramid", src, LEVELS, tmp)
            ours = [read_pgm(os.path.join(tmp, "level%d.pgm" % l)) for l in range(1, LEVELS)]
            ref = pyramid(img, LEVELS)[1:]
            ok = levels_equal(ours, ref)
            worst = max(int(np.max(np.abs(a.astype(int) - b.astype(int)))) if a.shape == b.shape
                        else 999 for a, b in zip(ours, ref))
            print("%-14s levels 1-%d: %s (largest difference %d grey levels)"
                  % (name, LEVELS - 1, "equal" if ok else "DIFFERENT", worst))
            failures += not ok
            # the comparison notices one pixel one grey level off
            bad = [a.copy() for a in ours]
            bad[-1].flat[bad[-1].size // 2] ^= 1
            assert not levels_equal(bad, ref), "pyramid comparison cannot fail"

            # samples and gradients at real points of every level
            levels = [img] + ref
            rows = []
            for l, lv in enumerate(levels):
                h, w = lv.shape
                n = 40
                xs = rng.uniform(-1.5, w + 0.5, n)
                ys = rng.uniform(-1.5, h + 0.5, n)
                xs[:4] = [0, w - 1, 0.5, w - 1]  # corners and a half pixel
                ys[:4] = [0, h - 1, 0.25, 0]
                rows += [(l, x, y) for x, y in zip(xs, ys)]
            with open(pts, "w") as f:
                f.writelines("%d %r %r\n" % r for r in rows)
            got = np.array([[float(v) for v in line.split()]
                            for line in run(driver, "sample", src, LEVELS, pts).splitlines()])
            want = []
            for l, x, y in rows:
                lv = levels[l].astype(float)
                gx = ndi.correlate1d(lv, [-0.5, 0.0, 0.5], axis=1, mode="nearest")
                gy = ndi.correlate1d(lv, [-0.5, 0.0, 0.5], axis=0, mode="nearest")
                c = [[y], [x]]
                want.append([ndi.map_coordinates(a, c, order=1, mode="nearest")[0]
                             for a in (lv, gx, gy)])
            want = np.array(want)
            ok = samples_close(got, want)
            print("%-14s %d samples and gradients: %s (largest difference %.2e)"
                  % (name, len(rows), "match" if ok else "DIFFERENT",
                     np.max(np.abs(got - want)) if got.shape == want.shape else np.inf))
            failures += not ok
            bad = got.copy()
            bad[len(rows) // 2, 1] += 1e-6
            assert not samples_close(bad, want), "sample comparison cannot fail"
    if failures:
        print("ref_pyramid: %d comparisons FAILED" % failures)
        return 1
    print("ref_pyramid: all levels equal scipy.ndimage exactly; samples to 1e-9")
    return 0


if __name__ == "__main__":
    sys.exit(main())
