"""Reference check of `modeband repeatability`'s table against numpy/scipy.

usage: ref_repeatability.py OUTPUT_OF_REPEATABILITY_VERBOSE TOLERANCES

The input is the output of `modeband repeatability --verbose`: one line per
image, "IMAGE (part KEY): NAME = MM; NAME = MM ...", then the table. From
the readings, grouped by part, this script computes independently:
  - the repeatability sd as the within-group root mean square of a one-way
    analysis of variance, sqrt(SS_within / (N - k)), with numpy;
  - its upper 95 % bound sd * sqrt(df / chi2.ppf(0.05, df)) with
    scipy.stats.chi2 (the chi-square lower 5 % quantile);
  - %GRR = 100 * 6 sd / tolerance (AIAG MSA, 4th edition).
and checks them against the table's sd, sd95 and %GRR columns (printed to
6 decimals, 2 for %GRR; the readings to 6 decimals). TOLERANCES is
"NAME=WIDTH,NAME=WIDTH" (the gauge's tol_hi - tol_lo, mm).
As a cross-check of the ANOVA arithmetic, scipy.stats.f_oneway's F must
equal MS_between / MS_within computed here.
"""

import re
import sys

import numpy as np
from scipy import stats


def main():
    text = open(sys.argv[1]).read().splitlines()
    tol = dict(kv.split("=") for kv in sys.argv[2].split(","))
    readings = {}  # gauge -> part -> list
    for line in text:
        m = re.match(r"^\S+ \(part (\S+)\): (.*)$", line)
        if not m:
            continue
        part = m.group(1)
        for item in m.group(2).split(";"):
            name, value = item.rsplit(" = ", 1)
            readings.setdefault(name.strip(), {}).setdefault(part, []).append(float(value))
    table = {}  # the name is the first 16 columns (it may hold spaces)
    for line in text:
        for name in readings:
            if line[:17] == name[:16].ljust(16) + " ":
                table[name] = ["name"] + line[17:].split()
    failures = 0
    for name, parts in readings.items():
        groups = [np.array(v) for v in parts.values()]
        n = sum(len(g) for g in groups)
        k = len(groups)
        ss_within = sum(((g - g.mean()) ** 2).sum() for g in groups)
        df = n - k
        sd = np.sqrt(ss_within / df)
        grand = np.concatenate(groups).mean()
        ss_between = sum(len(g) * (g.mean() - grand) ** 2 for g in groups)
        f_ours = (ss_between / (k - 1)) / (ss_within / df)
        f_scipy = stats.f_oneway(*groups).statistic
        sd95 = sd * np.sqrt(df / stats.chi2.ppf(0.05, df))
        grr = 600.0 * sd / float(tol[name])
        row = table.get(name)
        if row is None:
            print(f"FAIL: gauge {name} not in the table")
            failures += 1
            continue
        t_sd, t_sd95, t_grr = float(row[5]), float(row[6]), float(row[8])
        print(f"{name}: {k} parts, {n} readings, df {df}; sd numpy {sd:.7f} table {t_sd:.6f}; "
              f"sd95 scipy {sd95:.7f} table {t_sd95:.6f}; %GRR {grr:.3f} table {t_grr:.2f}; "
              f"F ours {f_ours:.2f} scipy {f_scipy:.2f}")
        # table rounding (5e-7) plus the readings' rounding (5e-7 each,
        # about 3e-7 on a pooled sd)
        checks = [
            (abs(sd - t_sd) <= 1.5e-6, "sd"),
            (abs(sd95 - t_sd95) <= 2.5e-6, "sd95"),
            (abs(grr - t_grr) <= 0.006 + 600e-6 / float(tol[name]), "%GRR"),
            (abs(f_ours / f_scipy - 1) < 1e-9, "F"),
            (int(row[2]) == k and int(row[3]) == n, "counts"),
        ]
        for ok, what in checks:
            if not ok:
                print(f"FAIL: gauge {name}: {what}")
                failures += 1
    if not readings:
        print("FAIL: no readings")
        failures += 1
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
