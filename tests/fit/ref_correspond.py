"""Reference check: fit/correspond.h against scipy and numpy.

usage: ref_correspond.py CORRESPOND_DRIVER

1. mb_correspond_assign (hole matching) against
   scipy.optimize.linear_sum_assignment: random real costs, integer costs
   with many ties, a wide range of magnitudes, sizes 1 .. 150. Our total
   cost must equal scipy's optimum and our answer must be a permutation.
2. mb_correspond_run on exact copies of one dense part (an uneven lobed
   outer edge with two elliptic holes) under random similarity poses, each
   copy with every outline started at a random vertex, traversed in a
   random direction and its holes in random order. Whatever the starts, the
   corresponded shapes of exact copies must be exact similarity images of
   one another: scipy.spatial.procrustes disparity ~ 0 between every copy
   and the first. Independently with numpy: every landmark lies on its
   input polyline, consecutive landmarks are L / N apart in arc length, the
   reported start is the arc length (in the input's direction) of landmark
   0, and the reported hole sources and directions are the generated ones.
   This runs with plain arc length (arc_smoothing 0), and again with the
   default averaging of the parameter (2.5 px), where the spacing on the
   input may differ from L / N by up to 5 % and the disparity by 1e-6 (the
   copies differ in scale, the averaging window does not).
Then each compared quantity is perturbed in turn to prove the comparison
catches it.
"""
import sys

import numpy as np
import scipy.optimize
import scipy.spatial

from refcheck import Report, finish, prove_checks_can_fail, rot, run_driver


# ---- 1. assignment ---------------------------------------------------------

def assign_cases(rng):
    cases = []
    for _ in range(40):
        n = int(rng.integers(1, 41))
        cases.append(rng.normal(size=(n, n)) * 100.0)
    for _ in range(15):
        n = int(rng.integers(2, 20))
        cases.append(rng.integers(0, 4, size=(n, n)).astype(float))
    for _ in range(5):
        n = int(rng.integers(5, 30))
        cases.append(np.exp(rng.uniform(-10, 12, size=(n, n))))
    cases.append(rng.uniform(0, 1, size=(150, 150)))
    return cases


def assign_text(cases):
    out = [str(len(cases))]
    for c in cases:
        out.append(str(c.shape[0]))
        out.append(" ".join(repr(float(v)) for v in c.ravel()))
    return "\n".join(out) + "\n"


def compare_assign(cases, res):
    rep = Report()
    for i, (c, a) in enumerate(zip(cases, res["assign"])):
        n = c.shape[0]
        a = np.asarray(a, dtype=int)
        if not rep.true(f"assign {i}: a permutation", a.shape == (n,) and
                        sorted(a.tolist()) == list(range(n)), f"got {a.tolist()}"):
            continue
        rows, cols = scipy.optimize.linear_sum_assignment(c)
        want = c[rows, cols].sum()
        got = c[np.arange(n), a].sum()
        rep.close(f"assign {i} (n = {n}) total vs linear_sum_assignment",
                  got, want, rtol=1e-12, atol=1e-12)
    return rep


# ---- 2. correspondence of exact copies ------------------------------------

def base_part(rng):
    """Outer edge and two holes, dense, uneven spacing, positive shoelace
    sum (x right, y down)."""
    def polar(n, f):
        t = np.sort(rng.uniform(0, 2 * np.pi, n))
        r = f(t)
        return np.stack([r * np.cos(t), r * np.sin(t)], 1)

    outer = 100 * polar(700, lambda t: 1 + 0.18 * np.cos(3 * t) + 0.08 * np.sin(2 * t + 0.4))
    h1 = polar(160, lambda t: 12 + 0 * t) * [1.5, 1.0] + [35, -10]
    h2 = polar(140, lambda t: 9 + 0 * t) * [1.0, 1.3] + [-40, 20]
    return [outer, h1, h2]


def shoelace(p):
    q = np.roll(p, -1, axis=0)
    return np.sum(p[:, 0] * q[:, 1] - q[:, 0] * p[:, 1])


def make_copies(rng, base, m):
    parts = []
    for _ in range(m):
        s, a = rng.uniform(0.6, 1.6), rng.uniform(-np.pi, np.pi)
        t = rng.uniform(100, 900, 2)
        order = [0] + list(rng.permutation([1, 2]))
        outlines, rev = [], []
        for g in order:
            p = np.roll(base[g], -int(rng.integers(len(base[g]))), axis=0)
            r = bool(rng.integers(2))
            if r:
                p = p[::-1]
            outlines.append(s * p @ rot(a).T + t)
            rev.append(r)
        parts.append({"outlines": outlines, "gen": order, "reversed": rev})
    return parts


def run_text(parts, budget, minimum, smoothing):
    out = [f"{budget} {minimum} {smoothing!r} {len(parts)}"]
    for p in parts:
        out.append(" ".join([str(len(p["outlines"]))] + [str(len(o)) for o in p["outlines"]]))
        for o in p["outlines"]:
            out.append(" ".join(repr(float(v)) for v in o.ravel()))
    return "\n".join(out) + "\n"


def arc_position(poly, pts):
    """Arc length along the closed polyline (its own direction, from its
    first point) of each point, and its distance from the polyline."""
    q = np.roll(poly, -1, axis=0)
    seg = q - poly
    seglen = np.hypot(seg[:, 0], seg[:, 1])
    cum = np.concatenate([[0.0], np.cumsum(seglen)])
    pos, dist = [], []
    for p in pts:
        f = np.clip(np.einsum("ij,ij->i", p - poly, seg) / seglen ** 2, 0, 1)
        near = poly + f[:, None] * seg
        d = np.hypot(*(near - p).T)
        i = int(np.argmin(d))
        pos.append(cum[i] + f[i] * seglen[i])
        dist.append(d[i])
    return np.array(pos), np.array(dist), cum[-1]


def compare_run(parts, res, exact):
    """exact: plain arc length (arc_smoothing 0); otherwise the spacing is
    measured on a smoothed copy and the copies differ in scale, so spacing
    and disparity are held to looser bounds."""
    rep = Report()
    if not rep.true("run rc", res["rc"] == 0, res.get("err", "")):
        return rep
    rep.true("run converged", res["converged"] == 1, "not converged")
    layout = res["layout"]
    n = sum(layout)
    shapes = [np.asarray(s, dtype=float).reshape(n, 2) for s in res["shapes"]]
    rep.true("run all parts used", len(shapes) == len(parts), f"{len(shapes)} used")
    first = None
    for j, (p, info) in enumerate(zip(parts, res["parts"])):
        x = shapes[info["column"]]
        gen = [p["gen"][s] for s in info["source"]]
        if first is None:
            first = (x, gen)
        else:
            rep.true(f"part {j} hole matching", gen == first[1], f"{gen} vs {first[1]}")
            _, _, disparity = scipy.spatial.procrustes(first[0], x)
            rep.close(f"part {j} procrustes disparity to part 0", disparity, 0.0,
                      atol=1e-9 if exact else 1e-6)
        f = 0
        for k, N in enumerate(layout):
            src = info["source"][k]
            poly = p["outlines"][src]
            rep.true(f"part {j} outline {k} direction",
                     info["reversed"][k] == (shoelace(poly) < 0),
                     f"reported {info['reversed'][k]}")
            pos, dist, L = arc_position(poly, x[f:f + N])
            rep.close(f"part {j} outline {k} landmarks on the input", dist,
                      np.zeros(N), atol=1e-9 * L)
            step = np.mod(np.diff(pos), L)
            if info["reversed"][k]:
                step = np.mod(-np.diff(pos), L)
            rep.close(f"part {j} outline {k} arc-length spacing", step,
                      np.full(N - 1, L / N), atol=(1e-7 if exact else 0.05 / N) * L)
            d0 = np.mod(info["start"][k] - pos[0] + L / 2, L) - L / 2
            rep.close(f"part {j} outline {k} reported start", d0, 0.0, atol=1e-7 * L)
            f += N
    return rep


def main():
    driver = sys.argv[1]
    rng = np.random.default_rng(20240611)
    missed = []

    cases = assign_cases(rng)
    res = run_driver(driver, "assign", assign_text(cases))
    rep = compare_assign(cases, res)
    uniq = [i for i, c in enumerate(cases) if c.shape[0] >= 3 and c.dtype == float
            and len(np.unique(c)) == c.size][:3]

    def swap(i):
        def fn(r):
            a = r["assign"][i]
            a[0], a[1] = a[1], a[0]
        return fn

    missed += prove_checks_can_fail(
        lambda r: compare_assign(cases, r), res,
        [(f"assign {i}: two columns swapped", swap(i)) for i in uniq] +
        [("assign: a repeated column", lambda r: r["assign"][0].__setitem__(1, r["assign"][0][0]))])

    base = base_part(rng)
    for b in base:
        assert shoelace(b) > 0
    parts = make_copies(rng, base, 6)
    res2 = run_driver(driver, "run", run_text(parts, 200, 16, 0.0))
    rep2 = compare_run(parts, res2, True)
    print(f"  layout {res2.get('layout')}")
    # The default averaging window of the parameter (2.5 px).
    res3 = run_driver(driver, "run", run_text(parts, 200, 16, 2.5))
    rep3 = compare_run(parts, res3, False)
    rep2.failures += rep3.failures
    rep2.count += rep3.count

    def bump_shape(r):
        r["shapes"][3][10] += 1e-3

    def bump_start(r):
        r["parts"][2]["start"][0] += 1e-3

    def flip_rev(r):
        r["parts"][4]["reversed"][1] ^= 1

    def swap_src(r):
        s = r["parts"][5]["source"]
        s[1], s[2] = s[2], s[1]

    missed += prove_checks_can_fail(
        lambda r: compare_run(parts, r, True), res2,
        [("run: a landmark moved 1e-3 px", bump_shape),
         ("run: a start moved 1e-3 px", bump_start),
         ("run: a direction flag flipped", flip_rev),
         ("run: two hole sources swapped", swap_src)])

    rep.failures += rep2.failures
    rep.count += rep2.count
    finish("ref_correspond", rep, missed)


if __name__ == "__main__":
    main()
