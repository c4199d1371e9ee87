"""Reference check: grey-level profile models (fit/profile.h) against numpy
and scipy, recomputed from the pyramid level images alone.

usage: ref_profile.py PROFILE_DRIVER

The driver (tests/fit/profile_driver.c) teaches a profile model from 6
rendered ring frames (3 levels, k = 3, shrink 0.2, floor 3e-5) and writes
the level images, the landmarks, our normals, the model and our matching
costs of profiles 0, +-1, +-2 samples off the outline of a 7th frame.

Sources of the method: Cootes, Taylor, Cooper, Graham, "Active Shape
Models - Their Training and Application", CVIU 61(1), 1995, section 5
(normalised derivative profiles, mean and covariance per landmark,
Mahalanobis matching). Checks:
- normals: unit, perpendicular to the chord between the two neighbours on
  the same outline, pointing from the part into the background (away from
  the ring's centre on the outer edge, towards it on the bore);
- the training profiles, recomputed with scipy.ndimage.map_coordinates
  (order=1, mode="nearest": bilinear with the edge clamped, the sampling of
  fit/pyramid.h), differenced and normalised by the sum of absolute values;
  their numpy mean, and numpy.cov (ddof=1) regularised as
  (1 - shrink) S + (shrink trace(S) / p + floor) I, against the model's
  means and covariances;
- every cost against scipy.spatial.distance.mahalanobis(g, mean, inv(S'))
  squared (scipy returns the square root of the quadratic form);
- the taught grey levels (map_coordinates 4 px either side of each
  landmark on level 0), area (shoelace, outer minus bore) and size (norm of
  the centred landmarks), averaged over the frames.
Then every compared quantity is perturbed in turn to prove it is caught.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import scipy.ndimage
import scipy.spatial.distance

from refcheck import Report, finish, prove_checks_can_fail


def profile(img, x, y, nx, ny, k):
    t = np.arange(2 * k + 2) - k - 0.5
    g = scipy.ndimage.map_coordinates(img, [y + t * ny, x + t * nx], order=1,
                                      mode="nearest")
    d = np.diff(g)
    s = np.abs(d).sum()
    return d / s if s > 0 else d


def compare(res, images):
    rep = Report()
    m, levels, k = res["m"], res["levels"], res["k"]
    p = 2 * k + 1
    counts = res["counts"]
    n = sum(counts)
    xy = np.array(res["landmarks"]).reshape(m + 1, n, 2)
    nrm = np.array(res["normals"]).reshape(m + 1, n, 2)

    # normals
    want = np.zeros_like(nrm)
    for j in range(m + 1):
        first = 0
        for o, c in enumerate(counts):
            q = xy[j, first:first + c]
            chord = np.roll(q, -1, axis=0) - np.roll(q, 1, axis=0)
            cand = np.stack([chord[:, 1], -chord[:, 0]], axis=1)
            cand /= np.linalg.norm(cand, axis=1)[:, None]
            out = np.sign(np.einsum("ij,ij->i", cand, q - q.mean(axis=0)))
            sign = out if o == 0 else -out  # into the background
            want[j, first:first + c] = cand * sign[:, None]
            first += c
    rep.close("normals", nrm, want, atol=1e-12)

    # training profiles, mean and regularised covariance
    means = np.array(res["means"]).reshape(levels, n, p)
    covs = np.array(res["covs"]).reshape(levels, n, p, p).transpose(0, 1, 3, 2)
    prof = np.zeros((levels, n, m, p))
    for lev in range(levels):
        down = 1.0 / 2 ** lev
        for j in range(m):
            img = images[(j, lev)]
            for i in range(n):
                prof[lev, i, j] = profile(img, xy[j, i, 0] * down, xy[j, i, 1] * down,
                                          want[j, i, 0], want[j, i, 1], k)
    ref_mean = prof.mean(axis=2)
    rep.close("profile means", means, ref_mean, atol=1e-11)
    ref_cov = np.zeros((levels, n, p, p))
    for lev in range(levels):
        for i in range(n):
            s = np.cov(prof[lev, i].T, ddof=1)
            ref_cov[lev, i] = ((1 - res["shrink"]) * s +
                               (res["shrink"] * np.trace(s) / p + res["floor"]) * np.eye(p))
    rep.close("regularised covariances", covs, ref_cov, rtol=1e-8, atol=1e-14)

    # Mahalanobis costs on the test frame
    costs = np.array(res["costs"])
    got, ref = [], []
    for lev, i, s, c in costs:
        lev, i, s = int(lev), int(i), int(s)
        down = 1.0 / 2 ** lev
        x = xy[m, i, 0] * down + s * want[m, i, 0]
        y = xy[m, i, 1] * down + s * want[m, i, 1]
        g = profile(images[(m, lev)], x, y, want[m, i, 0], want[m, i, 1], k)
        vi = np.linalg.inv(ref_cov[lev, i])
        d = scipy.spatial.distance.mahalanobis(g, ref_mean[lev, i], vi)
        got.append(c)
        ref.append(d * d)
    rep.close("Mahalanobis costs", got, ref, rtol=1e-8)
    # the true position should usually win: not a correctness check of the
    # arithmetic, but a sign that the profiles are sampled the right way
    cs = costs[:, 3].reshape(levels, n, 5)
    wins = np.mean(np.argmin(cs, axis=2) == 2)
    rep.true("true position best at most landmarks", wins > 0.8, f"{wins:.2f}")

    # taught grey levels, area, size
    st = res["stats"]
    part = back = area = size = 0.0
    for j in range(m):
        img = images[(j, 0)]
        q, nn = xy[j], want[j]
        part += scipy.ndimage.map_coordinates(img, [q[:, 1] - 4 * nn[:, 1], q[:, 0] - 4 * nn[:, 0]],
                                              order=1, mode="nearest").mean()
        back += scipy.ndimage.map_coordinates(img, [q[:, 1] + 4 * nn[:, 1], q[:, 0] + 4 * nn[:, 0]],
                                              order=1, mode="nearest").mean()
        first = 0
        for o, c in enumerate(counts):
            r = q[first:first + c]
            a = 0.5 * abs(np.sum(r[:, 0] * np.roll(r[:, 1], -1) - np.roll(r[:, 0], -1) * r[:, 1]))
            area += a if o == 0 else -a
            first += c
        size += np.linalg.norm(q - q.mean(axis=0))
    rep.close("part grey", st["part_grey"], part / m, rtol=1e-10)
    rep.close("background grey", st["back_grey"], back / m, rtol=1e-10)
    rep.close("area", st["area"], area / m, rtol=1e-10)
    rep.close("size", st["size"], size / m, rtol=1e-10)
    rep.true("frames", st["n_samples"] == m, str(st["n_samples"]))
    return rep


def main():
    driver = sys.argv[1]
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([driver, tmp], check=True)
        with open(os.path.join(tmp, "out.json")) as f:
            res = json.load(f)
        images = {}
        for j in range(res["m"] + 1):
            for lev, (w, h) in enumerate(res["sizes"]):
                raw = np.fromfile(os.path.join(tmp, f"f{j}_l{lev}.raw"), dtype=np.uint8)
                images[(j, lev)] = raw.reshape(h, w).astype(float)
    rep = compare(res, images)

    def bump(key, index, rel=0.0, add=0.0):
        def fn(r):
            a = r[key]
            for q in index[:-1]:
                a = a[q]
            a[index[-1]] = a[index[-1]] * (1 + rel) + add
        return fn

    def bump_stat(name, rel):
        def fn(r):
            r["stats"][name] *= 1 + rel
        return fn

    def bump_cost(i, rel):
        def fn(r):
            r["costs"][i][3] *= 1 + rel
        return fn

    perturbations = [
        ("a normal turned by 1e-6", bump("normals", [2, 17], add=1e-6)),
        ("a mean profile sample + 1e-9", bump("means", [100, 3], add=1e-9)),
        ("a covariance entry x (1 + 1e-6)", bump("covs", [40, 24], rel=1e-6)),
        ("a cost x (1 + 1e-6)", bump_cost(123, 1e-6)),
        ("part grey x (1 + 1e-8)", bump_stat("part_grey", 1e-8)),
        ("background grey x (1 + 1e-8)", bump_stat("back_grey", 1e-8)),
        ("area x (1 + 1e-8)", bump_stat("area", 1e-8)),
        ("size x (1 + 1e-8)", bump_stat("size", 1e-8)),
    ]
    missed = prove_checks_can_fail(lambda r: compare(r, images), res, perturbations)
    finish("ref_profile", rep, missed)


if __name__ == "__main__":
    main()
