#!/usr/bin/python3
"""Reference check of fit/stats.c against scipy.stats / scipy.special and,
as the arbiter, mpmath at 40 significant digits (Debian python3-scipy,
python3-mpmath).

    ref_stats.py STATS_DRIVER [--perturb REL]

Builds a grid of requests (quantiles, cdfs, special functions, T^2 and Q
limits), runs tests/fit/stats_driver.c on it and compares:

  1. against scipy: relative 1e-9 on the grid p in [1e-6, 1 - 1e-6] with
     degrees of freedom from 0.1 to 1e5. Where scipy and we differ by more,
     mpmath decides: the point passes only if mpmath shows our value is
     accurate to the tolerance of check 2 (scipy 1.10's t quantiles are off
     by up to 5e-9 at most df, its F quantiles by a few 1e-9 at d2 = 1e4 or
     d1 = 1000; such points are printed as notes);
  2. against mpmath: every quantile, including p down to 1e-300 and
     df from 1e-3 to 1e6, is the exact quantile of a probability within
     relative BACKWARD_TOL of the requested one, or within FORWARD_TOL of the
     exact quantile (a quantile whose tail moves little with x, as chi-square
     with df = 0.001, cannot be pinned better than the tail itself), or
     within one unit in the last place of it (1.0 for a beta quantile within
     1e-17 of 1; 0 or +inf for a root below DBL_MIN or above DBL_MAX / e, as
     fit/stats.h documents); chi-square with df < 0.2 gets the looser
     tolerances fit/stats.h documents; every cdf/sf and special function
     value within CDF_TOL relative;
  3. T^2 limits against the published formulas evaluated with scipy;
     Q limits against the Jackson-Mudholkar formula evaluated in Python and
     Box's chi-square against scipy; the Q limits also by Monte Carlo: the
     fraction of Q = sum lambda_j z_j^2 above the limit is close to alpha.

--perturb REL multiplies every value the driver prints by (1 - REL) and
inverts the verdict: the run passes only if the checks catch the damage.
The ctest fit_ref_stats_detects_error runs it with 1e-8, which shows the
comparison can fail.
"""
import math
import subprocess
import sys

import mpmath as mp
import numpy as np
from scipy import special, stats

mp.mp.dps = 40

SCIPY_TOL = 1e-9        # the assignment's figure
FORWARD_TOL = 1e-12     # relative error of a quantile (see check 2)
BACKWARD_TOL = 2e-14    # relative error of the probability it inverts
CDF_TOL = 1e-12         # relative error of a tail probability
N_MC = 200000                  # Monte Carlo draws per spectrum and k
SMALL_DF_FORWARD_TOL = 1e-11   # chi-square with df < 0.2 (see fit/stats.h)
SMALL_DF_BACKWARD_TOL = 1e-12


# ---- high-precision tails (the arbiter) ---------------------------------

def mp_gamma_tails(a, x):
    """P(a, x), Q(a, x) and which of them was formed as 1 - the other:
    A&S 6.5.29 (1F1 series, all terms > 0) below the mean, mpmath's upper
    incomplete gamma above it."""
    a = mp.mpf(a)
    x = mp.mpf(x)
    if x == 0:
        return mp.mpf(0), mp.mpf(1), None
    if x <= a:
        lo = mp.exp(a * mp.log(x) - x - mp.loggamma(a + 1)) * \
            mp.hyp1f1(1, a + 1, x, maxterms=10**7)
        return lo, 1 - lo, "upper"
    up = mp.gammainc(a, x, mp.inf, regularized=True)
    return 1 - up, up, "lower"


def mp_beta_tails(x, y, a, b):
    """I_x(a, b), 1 - I_x(a, b) with x + y = 1, and which of them was formed
    as 1 - the other: A&S 26.5.23 (2F1(a+b, 1; a+1; x), all terms > 0) on
    the smaller of x and y."""
    x, y, a, b = mp.mpf(x), mp.mpf(y), mp.mpf(a), mp.mpf(b)
    if x == 0:
        return mp.mpf(0), mp.mpf(1), None
    if y == 0:
        return mp.mpf(1), mp.mpf(0), None
    lbeta = mp.loggamma(a) + mp.loggamma(b) - mp.loggamma(a + b)
    pre = mp.exp(a * mp.log(x) + b * mp.log(y) - lbeta)
    if x <= y:
        lo = pre / a * mp.hyp2f1(a + b, 1, a + 1, x, maxterms=10**7)
        return lo, 1 - lo, "upper"
    up = pre / b * mp.hyp2f1(a + b, 1, b + 1, y, maxterms=10**7)
    return 1 - up, up, "lower"


def mp_log_beta_xdens(x, y, a, b):
    """ln(x^a y^b / B(a, b))."""
    x, y, a, b = mp.mpf(x), mp.mpf(y), mp.mpf(a), mp.mpf(b)
    return a * mp.log(x) + b * mp.log(y) - \
        (mp.loggamma(a) + mp.loggamma(b) - mp.loggamma(a + b))


def mp_tails(kind, x, par):
    """(lower, upper, x * density) of a distribution at x, to 40 significant
    digits in both tails: where one tail is tiny (it was formed as 1 minus
    the other) the evaluation is repeated with enough extra digits."""
    dps = mp.mp.dps
    for _ in range(5):
        with mp.workdps(dps):
            lo, up, xd, derived = mp_tails_at(kind, x, par)
        # a tail formed as 1 - (the other) keeps dps - (digits lost) digits
        small = lo if derived == "lower" else up if derived == "upper" else 1
        if small > mp.mpf(10) ** (25 - dps):
            break
        dps *= 3
    return +lo, +up, +xd


def mp_tails_at(kind, x, par):
    X = mp.mpf(x)
    if kind == "norm":
        lo = mp.ncdf(X)
        up = mp.ncdf(-X)
        return lo, up, abs(X) * mp.npdf(X), None
    if kind == "chi2":
        a = mp.mpf(par[0]) / 2
        t = X / 2
        lo, up, derived = mp_gamma_tails(a, t)
        return lo, up, mp.exp(a * mp.log(t) - t - mp.loggamma(a)), derived
    if kind == "f":
        d1, d2 = mp.mpf(par[0]), mp.mpf(par[1])
        s = d1 * X + d2
        bx, by = d1 * X / s, d2 / s
        lo, up, derived = mp_beta_tails(bx, by, d1 / 2, d2 / 2)
        return lo, up, mp.exp(mp_log_beta_xdens(bx, by, d1 / 2, d2 / 2)), derived
    if kind == "gamma":
        lo, up, derived = mp_gamma_tails(par[0], X)
        return lo, up, mp.mpf(1), derived
    if kind == "ibeta":
        lo, up, derived = mp_beta_tails(X, 1 - X, par[0], par[1])
        return lo, up, mp.mpf(1), derived
    if kind == "beta":
        a, b = par
        lo, up, derived = mp_beta_tails(X, 1 - X, a, b)
        return lo, up, mp.exp(mp_log_beta_xdens(X, 1 - X, a, b)) / (1 - X), derived
    if kind == "t":
        nu = mp.mpf(par[0])
        s = nu + X * X
        inner, outer, derived = mp_beta_tails(X * X / s, nu / s, mp.mpf(1) / 2, nu / 2)
        lo = (1 + inner) / 2 if X >= 0 else outer / 2
        up = outer / 2 if X >= 0 else (1 + inner) / 2
        dens = mp.exp(mp.loggamma((nu + 1) / 2) - mp.loggamma(nu / 2)) / \
            mp.sqrt(nu * mp.pi) * (1 + X * X / nu) ** (-(nu + 1) / 2)
        if derived is not None:  # the tiny tail of T is outer / 2
            derived = "upper" if (derived == "upper") == (X >= 0) else "lower"
        return lo, up, abs(X) * dens, derived
    raise ValueError(kind)


def quantile_error(kind, x, par, p, upper):
    """(forward, backward) relative error of x as the quantile at lower-tail
    probability p (or upper-tail probability p when upper). Both are 0 when
    the exact quantile lies between x and a neighbouring double (so x is
    correct to one unit in the last place: e.g. a beta quantile within
    1e-200 of 1 is 1.0)."""
    P = mp.mpf(p)
    # compare in the smaller tail, whose probability is known exactly
    use_lower = (not upper and P <= mp.mpf(1) / 2) or (upper and P > mp.mpf(1) / 2)
    target = P if use_lower == (not upper) else 1 - P

    def tail_at(xx):
        if math.isinf(xx):
            return (mp.mpf(1) if use_lower == (xx > 0) else mp.mpf(0)), mp.mpf(0)
        if kind == "beta" and xx >= 1:
            return (mp.mpf(1) if use_lower else mp.mpf(0)), mp.mpf(0)
        if kind in ("chi2", "f", "beta") and xx <= 0:
            return (mp.mpf(0) if use_lower else mp.mpf(1)), mp.mpf(0)
        lo, up, xd = mp_tails(kind, xx, par)
        return (lo if use_lower else up), xd

    tail, xdens = tail_at(x)
    diff = abs(tail - target)
    back = float(diff / target)
    fwd = float(diff / xdens) if xdens > 0 else math.inf
    if fwd > FORWARD_TOL and back > BACKWARD_TOL:
        if x == 0:      # documented: a root below DBL_MIN gives 0
            edges = (0.0, sys.float_info.min)
        elif math.isinf(x):  # and one above DBL_MAX / e gives +inf
            edges = (sys.float_info.max / math.e, math.inf)
        else:
            edges = (math.nextafter(x, -math.inf), math.nextafter(x, math.inf))
        t_dn, _ = tail_at(edges[0])
        t_up, _ = tail_at(edges[1])
        if min(t_dn, t_up) <= target <= max(t_dn, t_up):
            return 0.0, 0.0
    return fwd, back


# ---- the grid --------------------------------------------------------------

P_SCIPY = [1e-6, 1e-5, 1e-4, 1e-3, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5,
           0.75, 0.9, 0.95, 0.975, 0.99, 0.999, 1 - 1e-4, 1 - 1e-5, 1 - 1e-6]
P_SHORT = [1e-6, 1e-4, 0.01, 0.05, 0.3, 0.5, 0.9, 0.95, 0.99, 1 - 1e-4,
           1 - 1e-6]
P_EXTREME = [1e-300, 1e-100, 1e-20, 1e-12, 1 - 1e-10, 1 - 1e-14]
DF_CHI2 = [0.1, 0.5, 1, 2, 3, 4.5, 7, 10, 25, 60, 150, 1000, 1e4, 1e5]
DF_CHI2_MP = [1e-3, 0.02, 1e6]
D1_F = [0.5, 1, 2, 3, 5, 8, 12, 30, 100, 1000]
D2_F = [0.5, 1, 2, 4, 10, 20, 50, 200, 1000, 1e4]
DF_T = [0.5, 1, 2, 3, 5, 10, 30, 100, 1000, 1e5]
AB_BETA = [0.5, 1, 2.5, 10, 100, 1000]

SCIPY_PPF = {
    "chi2": lambda p, par, up: (stats.chi2.isf if up else stats.chi2.ppf)(p, *par),
    "f": lambda p, par, up: (stats.f.isf if up else stats.f.ppf)(p, *par),
    "t": lambda p, par, up: (stats.t.isf if up else stats.t.ppf)(p, *par),
    "beta": lambda p, par, up: (stats.beta.isf if up else stats.beta.ppf)(p, *par),
    "norm": lambda p, par, up: (stats.norm.isf if up else stats.norm.ppf)(p),
}
SCIPY_CDF = {
    "chi2": lambda x, par, up: (stats.chi2.sf if up else stats.chi2.cdf)(x, *par),
    "f": lambda x, par, up: (stats.f.sf if up else stats.f.cdf)(x, *par),
    "t": lambda x, par, up: (stats.t.sf if up else stats.t.cdf)(x, *par),
    "beta": lambda x, par, up: (stats.beta.sf if up else stats.beta.cdf)(x, *par),
    "norm": lambda x, par, up: (stats.norm.sf if up else stats.norm.cdf)(x),
}
# driver request names: (quantile, quantile_upper, cdf, sf)
DRIVER = {
    "chi2": ("chi2_q", "chi2_qu", "chi2_cdf", "chi2_sf"),
    "f": ("f_q", "f_qu", "f_cdf", "f_sf"),
    "t": ("t_q", None, "t_cdf", None),
    "beta": ("beta_q", "beta_qu", "beta_cdf", None),
    "norm": ("norm_q", "norm_qu", "norm_cdf", "norm_sf"),
}


def fmt(*args):
    return " ".join(repr(float(a)) for a in args)


def build_quantile_items():
    """(request, kind, par, p, upper, with_scipy)"""
    items = []

    def add(kind, par, ps, with_scipy):
        qn, qun, _, _ = DRIVER[kind]
        for p in ps:
            items.append((f"{qn} {fmt(p, *par)}", kind, par, p, False, with_scipy))
            if qun:
                items.append((f"{qun} {fmt(p, *par)}", kind, par, p, True, with_scipy))

    add("norm", (), P_SCIPY + P_EXTREME, True)
    for df in DF_CHI2:
        add("chi2", (df,), P_SCIPY, True)
        add("chi2", (df,), P_EXTREME, False)
    for df in DF_CHI2_MP:
        add("chi2", (df,), P_SHORT + P_EXTREME, False)
    for d1 in D1_F:
        for d2 in D2_F:
            add("f", (d1, d2), P_SHORT, True)
    for d1, d2 in [(0.05, 3), (3, 0.05), (2, 1e6), (10, 1e6), (1e5, 1e5)]:
        add("f", (d1, d2), P_SHORT + [1e-300, 1e-20, 1 - 1e-14], False)
    for df in DF_T:
        add("t", (df,), P_SCIPY, True)
    for a in AB_BETA:
        for b in AB_BETA:
            add("beta", (a, b), P_SHORT, True)
    for a, b in [(0.01, 3), (3, 0.01), (5e5, 0.5), (0.5, 5e5), (5e5, 5e5)]:
        add("beta", (a, b), P_SHORT + [1e-100], False)
    return items


def build_cdf_items(rng):
    """(request, kind, par, x, upper, with_scipy): cdf/sf at scipy's own
    quantiles and at random points."""
    items = []
    for kind, pars in [("chi2", [(df,) for df in DF_CHI2]),
                       ("f", [(d1, d2) for d1 in D1_F[::2] for d2 in D2_F[::2]]),
                       ("t", [(df,) for df in DF_T]),
                       ("beta", [(a, b) for a in AB_BETA for b in AB_BETA[::2]]),
                       ("norm", [()])]:
        _, _, cn, sn = DRIVER[kind]
        for par in pars:
            xs = [SCIPY_PPF[kind](p, par, False) for p in (1e-5, 0.02, 0.5, 0.97, 1 - 1e-5)]
            lo_x, hi_x = xs[0], xs[-1]
            xs += list(rng.uniform(lo_x, hi_x, 3))
            for x in xs:
                if kind == "beta" and not 0 < x < 1:
                    continue
                items.append((f"{cn} {fmt(x, *par)}", kind, par, x, False, True))
                if sn:
                    items.append((f"{sn} {fmt(x, *par)}", kind, par, x, True, True))
    return items


def build_special_items(rng):
    """(request, scipy value, mp value) for lgamma, gamma_p/q, beta_inc."""
    items = []
    for x in list(rng.uniform(0.01, 10, 20)) + [0.5, 1, 1.5, 2, 2.5, 1e-3, 30, 171.5, 1e4, 1e7]:
        items.append((f"lgamma {fmt(x)}", special.gammaln(x), mp.loggamma(x), "abs" if x <= 10 else "rel"))
    for a in [0.05, 0.5, 1, 3.3, 20, 500, 1e4]:
        for r in [0.01, 0.3, 0.9, 1.0, 1.1, 2, 5]:
            x = a * r
            lo, up, _ = mp_tails("gamma", x, (a,))
            items.append((f"gamma_p {fmt(a, x)}", special.gammainc(a, x), lo, "rel"))
            items.append((f"gamma_q {fmt(a, x)}", special.gammaincc(a, x), up, "rel"))
    for a in [0.2, 1, 4, 40, 400]:
        for b in [0.3, 2, 25, 700]:
            for x in rng.uniform(0.01, 0.99, 3):
                lo, _, _ = mp_tails("ibeta", x, (a, b))
                items.append((f"beta_inc {fmt(x, a, b)}", special.betainc(a, b, x), lo, "rel"))
    return items


def t2_reference(kind, alpha, p, n):
    """Hotelling T^2 limits from their published formulas with scipy.
    new:   p (n+1)(n-1) / (n (n-p)) F_{1-alpha}(p, n-p)
           (NIST/SEMATECH e-Handbook 6.5.4.3.4)
    train: (n-1)^2 / n Beta_{1-alpha}(p/2, (n-p-1)/2)
           (Tracy, Young & Mason, JQT 1992)
    known: chi-square_{1-alpha}(p)"""
    if kind == "t2_new":
        return p * (n + 1) * (n - 1) / (n * (n - p)) * stats.f.isf(alpha, p, n - p)
    if kind == "t2_train":
        return (n - 1) ** 2 / n * stats.beta.isf(alpha, p / 2, (n - p - 1) / 2)
    return stats.chi2.isf(alpha, p)


def jm_reference(eig, k, alpha):
    """Jackson & Mudholkar (Technometrics 1979) written out as published:
    Q = theta1 [z sqrt(2 theta2 h0^2)/theta1 + 1 + theta2 h0 (h0-1)/theta1^2]^(1/h0);
    q is NaN where it does not apply (h0 <= 0 or the bracket <= 0)."""
    lam = np.asarray(eig[k:], dtype=float)
    t1, t2, t3 = lam.sum(), (lam ** 2).sum(), (lam ** 3).sum()
    h0 = 1 - 2 * t1 * t3 / (3 * t2 ** 2)
    z = stats.norm.isf(alpha)
    inner = z * math.sqrt(2 * t2 * h0 * h0) / t1 + 1 + t2 * h0 * (h0 - 1) / t1 ** 2
    q = t1 * inner ** (1 / h0) if h0 > 0 and inner > 0 else math.nan
    return t1, t2, t3, h0, z, q


def box_reference(eig, k, alpha):
    lam = np.asarray(eig[k:], dtype=float)
    t1, t2 = lam.sum(), (lam ** 2).sum()
    return (t2 / t1) * stats.chi2.isf(alpha, t1 * t1 / t2)


def run_driver(driver, lines, perturb):
    res = subprocess.run([driver], input="\n".join(lines) + "\n",
                         capture_output=True, text=True, check=True)
    out = res.stdout.strip("\n").split("\n")
    if len(out) != len(lines):
        sys.exit(f"FAIL: driver printed {len(out)} lines for {len(lines)} requests")
    vals = []
    for line in out:
        if line.startswith("error"):
            vals.append(line)
        else:
            vals.append([float(v) * (1 - perturb) for v in line.split()])
    return vals


def mp_rel(v, ref):
    """Relative error of the double v against the exact ref; below 1e-290,
    where doubles lose precision or underflow to 0, absolute to 1e-302."""
    d = abs(mp.mpf(v) - ref)
    if abs(ref) < mp.mpf(1e-290):
        return float(d / mp.mpf(1e-290))
    return float(d / abs(ref))


def rel(a, b):
    if a == b:
        return 0.0
    return abs(a - b) / abs(b) if b != 0 else math.inf


def main():
    if len(sys.argv) < 2:
        sys.exit("usage: ref_stats.py STATS_DRIVER [--perturb REL]")
    driver = sys.argv[1]
    perturb = float(sys.argv[3]) if len(sys.argv) > 3 and sys.argv[2] == "--perturb" else 0.0
    rng = np.random.default_rng(20240611)
    failures = []
    notes = []

    q_items = build_quantile_items()
    c_items = build_cdf_items(rng)
    s_items = build_special_items(rng)
    if perturb:  # a fifth of the grid is plenty to show the damage is seen
        q_items, c_items, s_items = q_items[::5], c_items[::5], s_items[::5]

    t2_items = []
    for kind in ("t2_new", "t2_train", "t2_known"):
        for p in (1, 2, 3, 5, 10, 20):
            for n in (p + 2, p + 5, 20, 30, 50, 100, 1000):
                if n <= p + 1:
                    continue
                for alpha in (1e-4, 0.0027, 0.01, 0.05):
                    req = f"{kind} {alpha!r} {p} {n}" if kind != "t2_known" else f"{kind} {alpha!r} {p}"
                    t2_items.append((req, t2_reference(kind, alpha, p, n)))

    spectra = [
        [5, 3, 2, 1, 0.5, 0.3, 0.2],                      # the hand example
        list(0.7 ** np.arange(30) * 10.0),                # geometric decay
        [4.0, 2.0] + [0.01] * 200,                        # long flat tail
        [1.0] + [0.05] * 60 + [0.001] * 100,              # h0 < 0 after k = 0
        sorted(rng.exponential(1.0, 25), reverse=True),   # random
    ]
    q_req = []
    for sp in spectra:
        for k in (0, 1, 2, 5):
            if k >= len(sp):
                continue
            for alpha in (0.05, 0.01, 1e-3, 1e-4):
                tail = " ".join(repr(float(v)) for v in sp)
                q_req.append((f"q_jm {alpha!r} {k} {len(sp)} {tail}", "jm", sp, k, alpha))
                q_req.append((f"q_box {alpha!r} {k} {len(sp)} {tail}", "box", sp, k, alpha))

    lines = [it[0] for it in q_items] + [it[0] for it in c_items] + \
        [it[0] for it in s_items] + [it[0] for it in t2_items] + [it[0] for it in q_req]
    vals = run_driver(driver, lines, perturb)
    pos = 0

    # 1 + 2: quantiles
    worst_sc = worst_fwd = worst_back = 0.0
    for req, kind, par, p, upper, with_scipy in q_items:
        x = vals[pos][0]
        pos += 1
        fwd, back = quantile_error(kind, x, par, p, upper)
        # documented in fit/stats.h: for df < 0.2 the upper chi-square tail
        # below df + 2 is formed as 1 - P, absolute (not relative) 1e-15
        small_df = kind == "chi2" and par[0] < 0.2
        f_tol = SMALL_DF_FORWARD_TOL if small_df else FORWARD_TOL
        b_tol = SMALL_DF_BACKWARD_TOL if small_df else BACKWARD_TOL
        accurate = fwd <= f_tol or back <= b_tol
        if back > b_tol:
            worst_fwd = max(worst_fwd, fwd)
        if fwd > f_tol:
            worst_back = max(worst_back, back)
        if not accurate:
            failures.append(f"{req}: {x!r} is not the quantile (mpmath: forward {fwd:.2e}, backward {back:.2e})")
        if with_scipy:
            ref = float(SCIPY_PPF[kind](p, par, upper))
            r = rel(x, ref)
            if r > SCIPY_TOL:
                if accurate:
                    notes.append(f"{req}: scipy {ref!r} vs ours {x!r} (rel {r:.1e}); mpmath backs ours (forward {fwd:.1e})")
                else:
                    failures.append(f"{req}: {x!r} vs scipy {ref!r} (rel {r:.2e})")
            else:
                worst_sc = max(worst_sc, r)
    print(f"quantiles: {len(q_items)} values; worst relative difference from scipy (where within "
          f"{SCIPY_TOL:g}): {worst_sc:.2e}; against mpmath, worst forward error where the backward "
          f"one is above {BACKWARD_TOL:g}: {worst_fwd:.2e}, worst backward error where the forward "
          f"one is above {FORWARD_TOL:g}: {worst_back:.2e} (df < 0.2: {SMALL_DF_FORWARD_TOL:g} / "
          f"{SMALL_DF_BACKWARD_TOL:g})")

    # 1 + 2: cdf and sf
    worst_sc = worst_mp = 0.0
    for req, kind, par, x, upper, with_scipy in c_items:
        v = vals[pos][0]
        pos += 1
        lo, up, _ = mp_tails(kind, x, par)
        ref_mp = up if upper else lo
        r_mp = mp_rel(v, ref_mp)
        worst_mp = max(worst_mp, r_mp)
        if r_mp > CDF_TOL:
            failures.append(f"{req}: {v!r} vs mpmath {mp.nstr(ref_mp, 17)} (rel {r_mp:.2e})")
        ref = float(SCIPY_CDF[kind](x, par, upper))
        r = rel(v, ref)
        if r > SCIPY_TOL and r_mp > CDF_TOL:
            failures.append(f"{req}: {v!r} vs scipy {ref!r} (rel {r:.2e})")
        elif r > SCIPY_TOL:
            notes.append(f"{req}: scipy {ref!r} vs ours {v!r}; mpmath backs ours")
        else:
            worst_sc = max(worst_sc, r)
    print(f"cdf/sf: {len(c_items)} values; worst relative difference from scipy {worst_sc:.2e}, "
          f"from mpmath {worst_mp:.2e} (tolerance {CDF_TOL:g})")

    # special functions
    worst_sc = worst_mp = 0.0
    for req, ref_sc, ref_mp, mode in s_items:
        v = vals[pos][0]
        pos += 1
        if mode == "abs":
            e_mp = float(abs(mp.mpf(v) - ref_mp))
            e_sc = abs(v - ref_sc)
        else:
            e_mp = mp_rel(v, ref_mp)
            e_sc = rel(v, ref_sc)
        worst_mp = max(worst_mp, e_mp)
        worst_sc = max(worst_sc, e_sc)
        if e_mp > CDF_TOL:
            failures.append(f"{req}: {v!r} vs mpmath {mp.nstr(ref_mp, 17)} ({mode} err {e_mp:.2e})")
        if e_sc > SCIPY_TOL and e_mp > CDF_TOL:
            failures.append(f"{req}: {v!r} vs scipy {ref_sc!r}")
    print(f"lgamma, gamma_p/q, beta_inc: {len(s_items)} values; worst error vs scipy {worst_sc:.2e}, "
          f"vs mpmath {worst_mp:.2e} (lgamma absolute for x <= 10, else relative)")

    # 3: T^2 limits
    worst = 0.0
    for req, ref in t2_items:
        v = vals[pos][0]
        pos += 1
        r = rel(v, ref)
        worst = max(worst, r)
        if r > SCIPY_TOL:
            failures.append(f"{req}: {v!r} vs formula with scipy {ref!r} (rel {r:.2e})")
    print(f"T^2 limits: {len(t2_items)} values; worst relative difference {worst:.2e}")

    # 3: Q limits, formula and Monte Carlo
    worst_jm = worst_box = 0.0
    mc_draws = {}
    for req, kind, sp, k, alpha in q_req:
        v = vals[pos]
        pos += 1
        if kind == "jm":
            t1, t2, t3, h0, z, q = jm_reference(sp, k, alpha)
            refused = isinstance(v, str)
            if refused or math.isnan(q):
                # refused (MB_ERANGE = -14) exactly when the formula does not apply
                if refused and v == "error -14" and math.isnan(q):
                    notes.append(f"jm refused (MB_ERANGE) for h0 = {h0:.3g}, as documented")
                else:
                    failures.append(f"{req[:60]}...: driver gave {v} where h0 = {h0:.3g}")
                continue
            for name, got, want in zip(("theta1", "theta2", "theta3", "h0", "z", "q"), v,
                                       (t1, t2, t3, h0, z, q)):
                r = rel(got, want)
                if name == "q":
                    worst_jm = max(worst_jm, r)
                if r > 1e-12:
                    failures.append(f"{req[:60]}...: {name} {got!r} vs {want!r} (rel {r:.2e})")
        else:
            if isinstance(v, str):
                failures.append(f"{req[:60]}...: driver said {v}")
                continue
            want = box_reference(sp, k, alpha)
            r = rel(v[5], want)
            worst_box = max(worst_box, r)
            if r > SCIPY_TOL:
                failures.append(f"{req[:60]}...: Box limit {v[5]!r} vs {want!r} (rel {r:.2e})")
        # Monte Carlo: the limit is an approximation of the (1 - alpha)
        # quantile of Q = sum_{j>k} lambda_j z_j^2 (z_j standard normal).
        if alpha >= 0.01 and not isinstance(v, str) and not perturb:
            key = (id(sp), k)
            if key not in mc_draws:
                # equal eigenvalues pooled: lambda * chi-square(count)
                vals_u, counts = np.unique(np.asarray(sp[k:], dtype=float), return_counts=True)
                mc_draws[key] = rng.chisquare(counts, (N_MC, counts.size)) @ vals_u
            qs = mc_draws[key]
            n_mc = N_MC
            frac = float(np.mean(qs > v[5]))
            sd = math.sqrt(alpha * (1 - alpha) / n_mc)
            # Both are approximations (JM conservative, Box liberal, by up to
            # a factor ~2 in exceedance on awkward spectra): this catches a
            # wrong formula, z or theta, not the approximation error.
            if not (alpha / 4 - 5 * sd <= frac <= 3 * alpha + 5 * sd):
                failures.append(f"{kind} limit, spectrum {len(sp)} values, k={k}, alpha={alpha}: "
                                f"exceeded by {frac:.4f} of Monte Carlo draws")
            notes.append(f"Monte Carlo {kind} k={k} n_eig={len(sp)} alpha={alpha}: "
                         f"exceedance {frac:.4f}")
    print(f"Q limits: {len(q_req)} values; Jackson-Mudholkar worst rel {worst_jm:.2e}, "
          f"Box worst rel {worst_box:.2e}")

    if perturb:
        # every tolerance above is below 1e-8, so most values must be caught
        caught = len(failures)
        print(f"perturbed by {perturb:g}: {caught} check(s) failed, as they should")
        if caught < len(lines) // 2:
            sys.exit(f"FAIL: only {caught} of {len(lines)} perturbed values were caught")
        print("PASS")
        return
    for n in notes:
        print("note:", n)
    if failures:
        print(f"FAIL: {len(failures)} check(s):")
        for f in failures[:40]:
            print("  " + f)
        sys.exit(1)
    print("PASS")


if __name__ == "__main__":
    main()
