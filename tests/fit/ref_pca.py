"""Reference check: mb_pca_compute and the shape model's project,
reconstruct, T^2 and SPE against numpy and scikit-learn.

usage: ref_pca.py REF_DRIVER

Data sets: d <= m (covariance route) and m < d (Gram route), each also run
through the other route on the same data, with k chosen by a variance
fraction or fixed; and a full model build (GPA + PCA) of realistic parts.
Checks (relative tolerance 1e-9 unless said):
- numpy.linalg.eigh of numpy.cov: the n_eig = min(d, m-1) eigenvalues,
  largest first, and the total variance (trace);
- sklearn.decomposition.PCA(svd_solver="full"): explained_variance_,
  explained_variance_ratio_, mean_, components_ (sign-insensitive),
  transform (scores, sign-insensitive), inverse_transform(transform(X))
  (reconstruction); Hotelling T^2 = sum score^2 / explained_variance_;
  SPE = |X - reconstruction|^2; the number of modes that
  PCA(n_components=fraction) keeps;
- our sign convention: each mode's largest-magnitude component positive;
- the model build against refcheck.gpa_reference (rotations by
  scipy.linalg.orthogonal_procrustes) followed by sklearn PCA.
Then every compared quantity is perturbed in turn to prove it is caught.
"""
import sys

import numpy as np
from sklearn.decomposition import PCA

from refcheck import (Report, finish, gpa_reference, numbers, part_shapes,
                      prove_checks_can_fail, run_driver)

ROUTES = {0: "auto", 1: "covariance", 2: "Gram"}


def spectrum_data(rng, d, m):
    q, _ = np.linalg.qr(rng.normal(size=(d, 8)))
    b = rng.normal(size=(m, 8)) * (2.0 / (1 + np.arange(8)))
    return 1 + 0.01 * np.arange(d) + b @ q.T + 0.01 * rng.normal(size=(m, d))


def aligned_signs(ours, theirs):
    """Flip each row of theirs to agree in sign with ours (rows = modes)."""
    s = np.sign(np.sum(ours * theirs, axis=1))
    s[s == 0] = 1
    return theirs * s[:, None], s


def compare_pca(name, x, res, fraction, fixed, rep):
    m, d = x.shape
    k, n_eig = res["n_modes"], res["n_eig"]
    eig = np.array(res["eig"])
    modes = np.array(res["modes"])  # k x d (one row per mode)
    scale = np.abs(x).max()
    rep.true(f"{name}: n_eig", n_eig == min(d, m - 1), f"{n_eig}")
    if fixed == 0:
        kept = PCA(n_components=fraction, svd_solver="full").fit(x).n_components_
        rep.true(f"{name}: k for fraction {fraction} vs sklearn", k == kept, f"{k} vs {kept}")
    else:
        rep.true(f"{name}: fixed k", k == min(fixed, n_eig), f"{k}")
    if not rep.true(f"{name}: {k} modes returned", modes.shape == (k, d), f"{modes.shape}"):
        return
    # numpy.linalg.eigh of the sample covariance (ddof 1)
    cov = np.cov(x, rowvar=False)
    lam = np.linalg.eigh(cov)[0][::-1]
    rep.close(f"{name}: eigenvalues vs numpy.linalg.eigh", eig, lam[:n_eig], rtol=1e-9,
              atol=1e-12 * lam[0])
    rep.close(f"{name}: total variance vs trace(numpy.cov)", res["total_var"], np.trace(cov),
              rtol=1e-12)
    rep.close(f"{name}: explained ratio = eig / total", res["explained_ratio"],
              eig / np.trace(cov), rtol=1e-9)
    # sklearn.decomposition.PCA with our k
    pca = PCA(n_components=k, svd_solver="full").fit(x)
    rep.close(f"{name}: explained_variance_ vs sklearn", eig[:k], pca.explained_variance_, rtol=1e-9)
    rep.close(f"{name}: explained_variance_ratio_ vs sklearn", np.array(res["explained_ratio"])[:k],
              pca.explained_variance_ratio_, rtol=1e-9)
    rep.close(f"{name}: mean_ vs sklearn", res["mean"], pca.mean_, atol=1e-12 * scale)
    comps, signs = aligned_signs(modes, pca.components_)
    rep.close(f"{name}: components_ vs sklearn (sign-insensitive)", modes, comps, atol=1e-8)
    scores_sk = pca.transform(x) * signs[None, :]
    rep.close(f"{name}: scores vs sklearn transform", res["scores"], scores_sk, atol=1e-9 * scale)
    rec_sk = pca.inverse_transform(pca.transform(x))
    rep.close(f"{name}: reconstruction vs sklearn inverse_transform", res["reconstruction"], rec_sk,
              atol=1e-9 * scale)
    t2 = np.sum(pca.transform(x) ** 2 / pca.explained_variance_, axis=1)
    rep.close(f"{name}: Hotelling T^2 vs sklearn scores", res["t2"], t2, rtol=1e-9)
    spe = np.sum((x - rec_sk) ** 2, axis=1)
    rep.close(f"{name}: SPE vs |x - sklearn reconstruction|^2", res["spe"], spe, rtol=1e-7,
              atol=1e-14 * scale ** 2)
    big = np.argmax(np.abs(modes), axis=1)
    rep.true(f"{name}: sign convention", np.all(modes[np.arange(k), big] > 0))


def compare_build(name, shapes, res, rep):
    aligned, _, _ = gpa_reference(shapes, tangent=True)
    x = aligned.reshape(len(aligned), -1)
    k = res["n_modes"]
    pca = PCA(n_components=k, svd_solver="full").fit(x)
    eig = np.array(res["eig"])
    rep.close(f"{name}: mean vs reference GPA + sklearn", res["mean"], pca.mean_, atol=1e-9)
    rep.close(f"{name}: eigenvalues vs reference GPA + sklearn", eig[:k], pca.explained_variance_,
              rtol=1e-7)
    lam = np.linalg.eigh(np.cov(x, rowvar=False))[0][::-1][:res["n_eig"]]
    rep.close(f"{name}: all eigenvalues vs reference GPA + numpy.linalg.eigh", eig, lam,
              rtol=1e-6, atol=1e-9 * lam[0])
    comps, _ = aligned_signs(np.array(res["modes"]), pca.components_)
    rep.close(f"{name}: modes vs reference GPA + sklearn", res["modes"], comps, atol=1e-6)
    kept = PCA(n_components=0.98, svd_solver="full").fit(x).n_components_
    rep.true(f"{name}: k for 0.98 vs sklearn", k == kept, f"{k} vs {kept}")


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(99)
    tall = spectrum_data(rng, 20, 60)   # d <= m
    wide = spectrum_data(rng, 80, 30)   # m < d
    runs = []  # (name, x, route, fraction, fixed)
    for label, x in (("d=20 m=60", tall), ("d=80 m=30", wide)):
        for route in (0, 1, 2):
            runs.append((f"{label} {ROUTES[route]} 0.98", x, route, 0.98, 0))
        runs.append((f"{label} auto 0.9", x, 0, 0.9, 0))
        runs.append((f"{label} auto fixed 5", x, 0, 0.98, 5))
    results = []
    for name, x, route, fraction, fixed in runs:
        m, d = x.shape
        text = numbers(d, m, route, fraction, fixed) + numbers(x)
        results.append(run_driver(driver, "pca", text))
    parts = part_shapes(rng, 40, 32)
    build = run_driver(driver, "build", numbers(32, 40, 0.98) + numbers(parts))

    def compare(rs):
        rep = Report()
        for (name, x, _, fraction, fixed), res in zip(runs, rs[0]):
            compare_pca(name, x, res, fraction, fixed, rep)
        compare_build("build (GPA + PCA) of 40 parts", parts, rs[1], rep)
        # Both routes on the same data give the same model.
        for a, b in ((0, 2), (5, 6)):
            ra, rb = rs[0][a], rs[0][b]
            rep.close(f"routes agree: {runs[a][0]} vs {runs[b][0]} eigenvalues", ra["eig"], rb["eig"],
                      rtol=1e-9, atol=1e-12 * ra["eig"][0])
            rep.close(f"routes agree: {runs[a][0]} vs {runs[b][0]} modes", ra["modes"], rb["modes"],
                      atol=1e-8)
        return rep

    rs = [results, build]
    rep = compare(rs)

    def bump(path, rel=1e-6):
        def fn(r):
            obj = r
            for key in path[:-1]:
                obj = obj[key]
            obj[path[-1]] = obj[path[-1]] * (1 + rel) + rel * 1e-3
        return fn

    def add_mode(r):
        r[0][3]["n_modes"] += 1

    perts = [("n_modes", add_mode)]
    for i in (0, 2, 5, 6, 9):
        for key, idx in (("eig", [0]), ("eig", [4]), ("explained_ratio", [1]), ("mean", [3]),
                         ("modes", [1, 7]), ("scores", [2, 1]), ("reconstruction", [4, 9]),
                         ("t2", [5]), ("spe", [6]), ("total_var", None)):
            path = [0, i, key] + (idx or [])
            perts.append((f"run {i} ({runs[i][0]}) {key}{idx or ''}", bump(path)))
    for key, idx in (("eig", [0]), ("eig", [10]), ("mean", [5]), ("modes", [0, 3])):
        perts.append((f"build {key}{idx}", bump([1, key] + idx, 1e-4)))
    missed = prove_checks_can_fail(compare, rs, perts)
    finish("ref_pca", rep, missed)


if __name__ == "__main__":
    main()
