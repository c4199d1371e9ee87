"""Shared helpers for the fit/ reference checks (ref_procrustes.py,
ref_gpa.py, ref_pca.py).

- run_driver() feeds numbers to tests/fit/ref_driver and reads its JSON;
- Report collects named comparisons with tolerances;
- prove_checks_can_fail() perturbs the C results one quantity at a time and
  demands that the comparison notices each one, so that no check here can
  pass whatever the C code computes;
- gpa_reference() is an independent GPA (Gower 1975, in the form of Cootes,
  Taylor, Cooper, Graham, CVIU 61(1) 1995) whose rotations come from
  scipy.linalg.orthogonal_procrustes.

Run with /usr/bin/python3 (Debian's numpy, scipy, scikit-learn).
"""
import copy
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import scipy.linalg


def numbers(*parts):
    """Text of numbers (17 significant digits) for the driver's input."""
    out = []
    for p in parts:
        a = np.atleast_1d(np.asarray(p, dtype=float)).ravel()
        out.append(" ".join(repr(float(v)) for v in a))
    return "\n".join(out) + "\n"


def run_driver(driver, mode, text):
    with tempfile.TemporaryDirectory() as tmp:
        src = os.path.join(tmp, "in.txt")
        dst = os.path.join(tmp, "out.json")
        with open(src, "w") as f:
            f.write(text)
        subprocess.run([driver, mode, src, dst], check=True)
        with open(dst) as f:
            return json.load(f)


class Report:
    def __init__(self):
        self.failures = []
        self.count = 0

    def close(self, name, got, want, rtol=0.0, atol=0.0):
        """|got - want| <= atol + rtol |want| everywhere (NaN fails)."""
        self.count += 1
        got = np.asarray(got, dtype=float)
        want = np.asarray(want, dtype=float)
        if got.shape != want.shape:
            self.failures.append(f"{name}: shape {got.shape} != {want.shape}")
            return
        err = np.abs(got - want)
        lim = atol + rtol * np.abs(want)
        ok = err <= lim
        if not np.all(ok):
            i = np.unravel_index(np.argmax(np.where(ok, 0, err - lim)), err.shape)
            self.failures.append(
                f"{name}: got {got[i]!r}, reference {want[i]!r} at {i} "
                f"(error {err[i]:.3g}, allowed {lim[i]:.3g})")

    def true(self, name, cond, detail=""):
        self.count += 1
        if not cond:
            self.failures.append(f"{name}: {detail}")
        return bool(cond)


def prove_checks_can_fail(compare, results, perturbations):
    """compare(results) -> Report. Each perturbation (label, fn) changes a
    deep copy of results in place; its Report must show a failure."""
    missed = []
    for label, fn in perturbations:
        bad = copy.deepcopy(results)
        fn(bad)
        rep = compare(bad)
        if rep.failures:
            print(f"  self-test: {label}: caught ({rep.failures[0][:90]})")
        else:
            missed.append(label)
            print(f"  self-test: {label}: NOT caught")
    return missed


def finish(name, rep, missed):
    print(f"{name}: {rep.count} comparisons, {len(rep.failures)} failed")
    for f in rep.failures:
        print("  FAIL " + f)
    if missed:
        print(f"{name}: perturbations the checks did not catch: {missed}")
    if rep.failures or missed:
        sys.exit(1)
    print(f"{name}: all checks passed and every perturbation was caught")


def rot(angle):
    c, s = np.cos(angle), np.sin(angle)
    return np.array([[c, -s], [s, c]])


def apply_pose(pose, pts):
    """pts (n, 2) -> s R(a) p + t, the similarity of fit/shape.h."""
    return pose["scale"] * pts @ rot(pose["angle"]).T + np.array([pose["tx"], pose["ty"]])


def standardise(pts):
    z = pts - pts.mean(axis=0)
    return z / np.linalg.norm(z)


def gpa_reference(shapes, tangent=True, tol=1e-10, max_iter=100):
    """shapes (m, n, 2). Returns aligned (m, n, 2), mean (n, 2), iterations.
    Rotations by scipy.linalg.orthogonal_procrustes (which may return a
    reflection; for these shapes it must not, and that is asserted)."""
    z = np.array([standardise(s) for s in shapes])
    ref = z[0].copy()
    mean = ref.copy()

    def onto(a, b):
        r, _ = scipy.linalg.orthogonal_procrustes(a, b)
        assert np.linalg.det(r) > 0, "reference rotation is a reflection"
        return a @ r

    it = 0
    while it < max_iter:
        it += 1
        rotated = np.array([onto(s, mean) for s in z])
        if tangent:
            rotated /= np.einsum("jnk,nk->j", rotated, mean)[:, None, None]
        new = onto(rotated.mean(axis=0), ref)
        new /= np.linalg.norm(new)
        change = np.linalg.norm(new - mean)
        mean = new
        if change < tol:
            break
    aligned = np.array([onto(s, mean) for s in z])
    if tangent:
        aligned /= np.einsum("jnk,nk->j", aligned, mean)[:, None, None]
    return aligned, mean, it


def part_shapes(rng, m, n, var=0.05, noise=0.003):
    """m closed lobed outlines of n points with smooth random deformations
    and a random similarity pose each: (m, n, 2)."""
    t = 2 * np.pi * np.arange(n) / n
    out = []
    for _ in range(m):
        r = 1 + 0.15 * np.cos(3 * t) + 0.05 * np.sin(2 * t)
        for f in range(5):
            r = r + var * rng.normal() / (1 + f) * np.cos((f + 2) * t + rng.uniform(0, 2 * np.pi))
        p = np.stack([r * np.cos(t), r * np.sin(t)], axis=1)
        p = p + noise * rng.normal(size=p.shape)
        pose = {"scale": rng.uniform(50, 150), "angle": rng.uniform(-np.pi, np.pi),
                "tx": rng.uniform(100, 600), "ty": rng.uniform(100, 500)}
        out.append(apply_pose(pose, p))
    return np.array(out)
