"""Reference check: mb_gpa_align against scipy.

usage: ref_gpa.py REF_DRIVER

Data sets: lobed parts with random deformations and poses (with and without
the tangent-space projection), random star-shaped blobs, and copies of one
ellipse under known poses. Checks:
- an independent GPA whose rotations come from
  scipy.linalg.orthogonal_procrustes (refcheck.gpa_reference; Gower,
  Psychometrika 1975, as in Cootes et al., CVIU 61(1) 1995): the mean and
  every aligned shape to 1e-9, and the same iteration count (+-1);
- scipy.spatial.procrustes(mean, shape_j): its disparity equals
  1 - cos^2 of the angle between our aligned shape j and the mean;
- the returned pose j maps aligned shape j back onto input shape j;
- ellipses: the analytic answer (every aligned shape equals the first shape
  standardised; pose j is the known pose relative to shape 0).
Then every compared quantity is perturbed in turn to prove it is caught.
"""
import sys

import numpy as np
import scipy.spatial

from refcheck import (Report, apply_pose, finish, gpa_reference, numbers,
                      part_shapes, prove_checks_can_fail, rot, run_driver,
                      standardise)


def blobs(rng, m, n):
    t = 2 * np.pi * np.arange(n) / n
    base = 1 + 0.3 * rng.uniform(size=n)
    out = []
    for _ in range(m):
        r = base + 0.05 * rng.normal(size=n)
        p = np.stack([r * np.cos(t), r * np.sin(t)], 1)
        out.append(p @ rot(rng.uniform(-np.pi, np.pi)).T * rng.uniform(1, 9) + rng.uniform(-9, 9, 2))
    return np.array(out)


def ellipses(rng, m, n):
    t = 2 * np.pi * np.arange(n) / n + 0.1
    e = np.stack([3 * np.cos(t), np.sin(t)], 1)
    poses = [{"scale": rng.uniform(0.5, 5), "angle": rng.uniform(-np.pi, np.pi),
              "tx": rng.uniform(-100, 100), "ty": rng.uniform(-100, 100)} for _ in range(m)]
    return np.array([apply_pose(p, e) for p in poses]), e, poses


def compare(sets, results):
    rep = Report()
    for (name, shapes, tangent, known), res in zip(sets, results):
        m, n, _ = shapes.shape
        mean = np.reshape(res["mean"], (n, 2))
        aligned = np.reshape(res["aligned"], (m, n, 2))
        ref_aligned, ref_mean, ref_it = gpa_reference(shapes, tangent=tangent)
        rep.close(f"{name}: mean vs reference GPA (orthogonal_procrustes)", mean, ref_mean, atol=1e-9)
        rep.close(f"{name}: aligned vs reference GPA (orthogonal_procrustes)", aligned, ref_aligned,
                  atol=1e-9)
        rep.true(f"{name}: iterations vs reference GPA", abs(res["iterations"] - ref_it) <= 1,
                 f"{res['iterations']} vs {ref_it}")
        rep.true(f"{name}: converged", res["converged"] == 1 and res["last_change"] < 1e-10)
        for j in range(m):
            # scipy.spatial.procrustes standardises both sets and fits
            # scale + rotation: disparity = 1 - cos^2(angle to the mean).
            _, _, disparity = scipy.spatial.procrustes(mean, shapes[j])
            cos = np.sum(aligned[j] * mean) / np.linalg.norm(aligned[j])
            rep.close(f"{name}: shape {j} disparity vs scipy.spatial.procrustes",
                      1 - cos ** 2, disparity, rtol=1e-8, atol=1e-13)
            back = apply_pose(res["poses"][j], aligned[j])
            rep.close(f"{name}: pose {j} maps aligned back onto the input", back, shapes[j],
                      atol=1e-9 * np.abs(shapes[j]).max())
        if known is not None:  # analytic: ellipse e under known poses
            e, poses = known
            expect = standardise(e) @ rot(poses[0]["angle"]).T
            rep.close(f"{name}: analytic mean", mean, expect, atol=1e-12)
            rep.close(f"{name}: analytic aligned shapes", aligned, np.broadcast_to(expect, aligned.shape),
                      atol=1e-12)
            for j, p in enumerate(poses):
                got = res["poses"][j]
                rep.close(f"{name}: analytic pose {j} scale", got["scale"],
                          p["scale"] * np.linalg.norm(e), rtol=1e-12)
                d_angle = np.remainder(got["angle"] - (p["angle"] - poses[0]["angle"]) + np.pi,
                                       2 * np.pi) - np.pi
                rep.close(f"{name}: analytic pose {j} angle", d_angle, 0.0, atol=1e-12)
                rep.close(f"{name}: analytic pose {j} translation", [got["tx"], got["ty"]],
                          [p["tx"], p["ty"]], atol=1e-10)
    return rep


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(7)
    parts = part_shapes(rng, 25, 40)
    e_shapes, e, e_poses = ellipses(rng, 8, 30)
    sets = [("parts, tangent", parts, True, None),
            ("parts, no tangent", parts, False, None),
            ("blobs, tangent", blobs(rng, 12, 15), True, None),
            ("ellipses", e_shapes, True, (e, e_poses))]
    results = []
    for name, shapes, tangent, _ in sets:
        m, n, _ = shapes.shape
        text = numbers(n, m, int(tangent), 1e-10, 100) + numbers(shapes)
        results.append(run_driver(driver, "gpa", text))
    rep = compare(sets, results)

    def bump(k, key, idx=None, rel=1e-6):
        def fn(rs):
            if idx is None:
                rs[k][key] = rs[k][key] * (1 + rel)
            else:
                obj = rs[k][key]
                for i in idx[:-1]:
                    obj = obj[i]
                obj[idx[-1]] = obj[idx[-1]] * (1 + rel) + rel
        return fn

    perts = []
    for k in range(len(sets)):
        perts.append((f"set {k} mean", bump(k, "mean", [5])))
        perts.append((f"set {k} aligned", bump(k, "aligned", [3, 8])))
        for key in ("scale", "angle", "tx", "ty"):
            perts.append((f"set {k} pose {key}", bump(k, "poses", [2, key])))

    def more_iterations(rs):
        rs[0]["iterations"] += 3
    perts.append(("set 0 iteration count", more_iterations))

    def not_converged(rs):
        rs[1]["converged"] = 0
    perts.append(("set 1 converged flag", not_converged))
    missed = prove_checks_can_fail(lambda rs: compare(sets, rs), results, perts)
    finish("ref_gpa", rep, missed)


if __name__ == "__main__":
    main()
