"""Reference check: mb_procrustes_fit against scipy.

usage: ref_procrustes.py REF_DRIVER

Pairs of point sets: random similar pairs with noise, unrelated random
pairs, mirror images, and ellipses under a known similarity. Checks:
- scipy.linalg.orthogonal_procrustes on the centred sets: where its best
  orthogonal matrix is a rotation, our rotation, scale (sum of singular
  values / |src|^2), translation, residual and mapped points must match it;
  where it is a reflection, ours must be the best proper rotation (the SVD
  with the last singular vector flipped, Umeyama, IEEE TPAMI 13(4), 1991)
  and its residual no smaller than scipy's reflected one;
- scipy.spatial.procrustes on the standardised sets (centred, unit
  Frobenius norm, as scipy itself standardises): its disparity equals our
  residual and its transformed second set our mapped points (rotation
  cases);
- ellipses: the known pose (analytic).
Then every compared quantity is perturbed in turn (1e-6 relative) to prove
the comparison catches it.
"""
import sys

import numpy as np
import scipy.linalg
import scipy.spatial

from refcheck import (Report, apply_pose, finish, numbers, prove_checks_can_fail,
                      rot, run_driver, standardise)


def make_cases(rng):
    cases = []  # (kind, src (n,2), dst (n,2), known pose or None)
    for _ in range(15):  # similar + noise
        n = int(rng.integers(3, 60))
        src = rng.normal(size=(n, 2)) * rng.uniform(1, 50) + rng.uniform(-100, 100, 2)
        pose = {"scale": rng.uniform(0.2, 5), "angle": rng.uniform(-np.pi, np.pi),
                "tx": rng.uniform(-300, 300), "ty": rng.uniform(-300, 300)}
        dst = apply_pose(pose, src) + 0.05 * rng.normal(size=src.shape)
        cases.append(("similar", src, dst, None))
    for _ in range(10):  # unrelated: some best orthogonal maps are reflections
        n = int(rng.integers(3, 12))
        cases.append(("random", rng.normal(size=(n, 2)), rng.normal(size=(n, 2)), None))
    for _ in range(5):  # mirror images: scipy reflects, we must not
        n = int(rng.integers(4, 30))
        src = rng.normal(size=(n, 2)) * 10
        pose = {"scale": rng.uniform(0.5, 2), "angle": rng.uniform(-np.pi, np.pi),
                "tx": rng.uniform(-50, 50), "ty": rng.uniform(-50, 50)}
        cases.append(("mirror", src, apply_pose(pose, src * [-1, 1]), None))
    for _ in range(5):  # ellipses with known rotation/scale/offset
        n = int(rng.integers(8, 100))
        t = 2 * np.pi * np.arange(n) / n + rng.uniform(0, 1)
        src = np.stack([rng.uniform(2, 5) * np.cos(t), rng.uniform(0.5, 1.5) * np.sin(t)], 1)
        src += rng.uniform(-20, 20, 2)
        pose = {"scale": rng.uniform(0.1, 10), "angle": rng.uniform(-np.pi, np.pi),
                "tx": rng.uniform(-500, 500), "ty": rng.uniform(-500, 500)}
        cases.append(("ellipse", src, apply_pose(pose, src), pose))
    # The standardised version of every pair, for scipy.spatial.procrustes.
    cases += [("std-" + k, standardise(s), standardise(d), None) for k, s, d, _ in list(cases)]
    return cases


def compare(cases, res):
    rep = Report()
    reflections = 0
    for i, ((kind, src, dst, known), r) in enumerate(zip(cases, res["pairs"])):
        name = f"pair {i} ({kind})"
        p = r["pose"]
        a = src - src.mean(axis=0)
        b = dst - dst.mean(axis=0)
        scale_b = max(1.0, np.abs(dst).max())
        # scipy.linalg.orthogonal_procrustes: R minimising |a R - b|, rows as points.
        R, sv_sum = scipy.linalg.orthogonal_procrustes(a, b)
        ours = rot(p["angle"]).T  # our rotation acting on row vectors
        if np.linalg.det(R) > 0:
            s_ref = sv_sum / np.sum(a * a)
            rep.close(f"{name} rotation vs orthogonal_procrustes", ours, R, atol=1e-9)
            rep.close(f"{name} scale vs orthogonal_procrustes", p["scale"], s_ref, rtol=1e-9)
            fit = s_ref * a @ R + dst.mean(axis=0)
            rep.close(f"{name} residual vs orthogonal_procrustes", r["residual"],
                      np.sum((fit - dst) ** 2), rtol=1e-9, atol=1e-20 * scale_b ** 2)
            rep.close(f"{name} mapped points vs orthogonal_procrustes",
                      np.reshape(r["mapped"], (-1, 2)), fit, atol=1e-9 * scale_b)
        else:
            reflections += 1
            # Best proper rotation (Umeyama 1991): flip the last singular vector.
            u, s, vt = np.linalg.svd(a.T @ b)
            dflip = np.diag([1.0, np.sign(np.linalg.det(u @ vt))])
            Rp = u @ dflip @ vt
            s_p = np.trace(np.diag(s) @ dflip) / np.sum(a * a)
            rep.close(f"{name} rotation vs best proper rotation", ours, Rp, atol=1e-9)
            rep.close(f"{name} scale vs best proper rotation", p["scale"], s_p, rtol=1e-9)
            reflected = np.sum((sv_sum / np.sum(a * a) * a @ R - b) ** 2)
            rep.true(f"{name} no better than scipy's reflection",
                     r["residual"] >= reflected - 1e-12 * np.sum(b * b),
                     f"{r['residual']} < {reflected}")
        rep.true(f"{name} proper rotation", np.linalg.det(ours) > 0)
        t_ref = dst.mean(axis=0) - p["scale"] * rot(p["angle"]) @ src.mean(axis=0)
        rep.close(f"{name} translation", [p["tx"], p["ty"]], t_ref, atol=1e-9 * scale_b)
        if known is not None:  # analytic answer
            rep.close(f"{name} known scale", p["scale"], known["scale"], rtol=1e-10)
            rep.close(f"{name} known angle",
                      np.remainder(p["angle"] - known["angle"] + np.pi, 2 * np.pi) - np.pi,
                      0.0, atol=1e-10)
            rep.close(f"{name} known translation", [p["tx"], p["ty"]],
                      [known["tx"], known["ty"]], atol=1e-9 * scale_b)
        if kind.startswith("std-"):
            # scipy.spatial.procrustes(dst, src): disparity = our residual of
            # the standardised sets when its map is a rotation.
            m1, m2, disparity = scipy.spatial.procrustes(dst, src)
            if np.linalg.det(R) > 0:
                rep.close(f"{name} residual vs scipy.spatial.procrustes disparity",
                          r["residual"], disparity, rtol=1e-9, atol=1e-15)
                rep.close(f"{name} mapped vs scipy.spatial.procrustes mtx2",
                          np.reshape(r["mapped"], (-1, 2)), m2, atol=1e-9)
            else:
                rep.true(f"{name} residual >= scipy.spatial.procrustes disparity",
                         r["residual"] >= disparity - 1e-12)
    rep.true("some cases are reflections in scipy", reflections >= 5, f"{reflections}")
    return rep


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(20240611)
    cases = make_cases(rng)
    text = numbers(len(cases))
    for _, src, dst, _ in cases:
        text += numbers(len(src), src, dst)
    res = run_driver(driver, "procrustes", text)
    rep = compare(cases, res)

    def bump(path, rel=1e-6):
        def fn(r):
            obj = r
            for key in path[:-1]:
                obj = obj[key]
            v = obj[path[-1]]
            obj[path[-1]] = v * (1 + rel) + (rel if v == 0 else 0)
        return fn

    def bump_pair(i, key):
        def fn(r):
            r["pairs"][i]["pose"][key] += 1e-6 * max(1.0, abs(r["pairs"][i]["pose"][key]))
        return fn

    perts = []
    for i, kind in [(0, "similar"), (16, "random"), (26, "mirror"), (31, "ellipse"), (35, "std")]:
        for key in ("scale", "angle", "tx", "ty"):
            perts.append((f"pair {i} {kind} {key}", bump_pair(i, key)))
    perts.append(("pair 0 residual", bump(["pairs", 0, "residual"], 1e-6)))
    perts.append(("pair 35 residual (scipy.spatial)", bump(["pairs", 35, "residual"], 1e-6)))
    perts.append(("pair 0 mapped point", bump(["pairs", 0, "mapped", 3], 1e-6)))
    perts.append(("pair 40 mapped point (scipy.spatial)", bump(["pairs", 40, "mapped", 0], 1e-6)))
    missed = prove_checks_can_fail(lambda r: compare(cases, r), res, perts)
    finish("ref_procrustes", rep, missed)


if __name__ == "__main__":
    main()
