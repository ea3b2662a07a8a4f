#!/usr/bin/env python3
"""Reference values for the planner's alias-margin tests (OrderUnfold.Tests/Planning/ReferenceValueTests.cs).

Computed independently of the C# code: the margin is sampled on a dense grid (numpy), each grid minimum is
refined with a bounded scalar minimiser and each threshold crossing with a bracketing root finder (scipy), and
the common period comes from Python's exact rational arithmetic (fractions). Not a runtime dependency: run it
by hand (python3 with numpy and scipy) and commit the CSV it writes next to itself.

Definitions (as in docs/planning.md): misfit_k(D) = distance from D to the nearest multiple of FSR_k divided by
the linewidth FSR_k / finesse_k; margin(D) = max_k misfit_k(D).
"""
import csv
import os
from fractions import Fraction

import numpy as np
from scipy.optimize import brentq, minimize_scalar

C = 299_792_458.0  # m/s, exact


def fsr_from_length(length_m, geometry):
    return C / ((2.0 if geometry == "planar" else 4.0) * length_m)


def margin(d, insts):
    d = np.abs(np.asarray(d, dtype=float))
    out = np.zeros_like(d)
    for fsr, finesse in insts:
        r = np.mod(d, fsr)
        out = np.maximum(out, np.minimum(r, fsr - r) / (fsr / finesse))
    return out


def grid(insts, a, b):
    lw = min(f / fi for f, fi in insts)
    n = int(np.ceil((b - a) / (lw / 200))) + 1
    return np.linspace(a, b, n)


def refine_min(insts, x, i):
    # minimise over the offset u from the grid point, so the minimiser's relative tolerance acts on u, not on D
    h = x[1] - x[0]
    x0 = x[i]
    lo, hi = max(x[0], x0 - 2 * h) - x0, min(x[-1], x0 + 2 * h) - x0
    f = lambda u: float(margin([x0 + u], insts)[0])
    res = minimize_scalar(f, bounds=(lo, hi), method="bounded", options={"xatol": 1e-5})
    cands = [(f(lo), x0 + lo), (f(hi), x0 + hi), (res.fun, x0 + res.x), (f(0.0), x0)]
    return min(cands)


def minimum(insts, a, b):
    x = grid(insts, a, b)
    m = margin(x, insts)
    # refine every grid point within a small distance of the lowest value (ties between distant minima)
    best = (np.inf, np.nan)
    for i in np.argsort(m)[:20]:
        best = min(best, refine_min(insts, x, i))
    return best


def lowest_alias(insts, a, b):
    x = grid(insts, a, b)
    m = margin(x, insts)
    i = 0
    while i + 1 < len(m) and m[i + 1] >= m[i]:
        i += 1
    if i + 1 == len(m):
        return (m[-1], x[-1])
    return minimum(insts, x[i], b)


def first_below(insts, t, a, b):
    x = grid(insts, a, b)
    m = margin(x, insts)
    idx = np.nonzero(m < t)[0]
    if len(idx) == 0:
        return None
    j = idx[0]
    if j == 0:
        return a
    # the grid may step over a narrow dip: look for the first grid interval whose refined minimum is below t
    g = lambda s: float(margin([s], insts)[0]) - t
    for k in range(j):
        if m[k + 1] < m[k] and k + 2 < len(m) and m[k + 2] > m[k + 1]:
            val, pos = refine_min(insts, x, k + 1)
            if val < t:
                return brentq(g, x[k], pos, xtol=1e-4)
    return brentq(g, x[j - 1], x[j], xtol=1e-4)




DESIGNS = [
    # name, instruments as (fsr_hz, finesse), range start, range end, threshold, exact ratio (FSR1/FSR_k) or None
    ("hand_1.0_1.1GHz", [(1.0e9, 100.0), (1.1e9, 110.0)], 0.1e9, 10.5e9, 3.0, [Fraction(10, 11)]),
    ("planar_100_92.9mm", [(fsr_from_length(0.1, "planar"), 150.0), (fsr_from_length(0.0929, "planar"), 150.0)],
     2 * 3 * fsr_from_length(0.1, "planar") / 150.0, 20e9, 3.0, [Fraction(929, 1000)]),
    ("planar_160_150mm", [(fsr_from_length(0.16, "planar"), 150.0), (fsr_from_length(0.15, "planar"), 150.0)],
     0.05e9, 20e9, 3.0, [Fraction(15, 16)]),
    ("three_mixed", [(fsr_from_length(0.1, "planar"), 150.0), (fsr_from_length(0.0929, "planar"), 150.0),
                     (fsr_from_length(0.0713, "confocal"), 80.0)],
     0.06e9, 50e9, 3.0, [Fraction(929, 1000), Fraction(4 * 713, 2 * 1000)]),
    ("fsr_given", [(2.0e9, 200.0), (2.37e9, 120.0)], 0.1e9, 60e9, 2.0, [Fraction(200, 237)]),
]


def main():
    rows = []
    for name, insts, a, b, t, ratios in DESIGNS:
        mv, mx = minimum(insts, a, b)
        lv, lx = lowest_alias(insts, a, b)
        fb = first_below(insts, t, a, b)
        # common period: n = lcm of the denominators of FSR_k/FSR1 written as p/q -> n*FSR1 = multiple of FSR_k
        n = 1
        for r in ratios:  # r = FSR1/FSR_k = p/q in lowest terms -> repeat at q*FSR1
            n = n * r.denominator // np.gcd(n, r.denominator)
        rows.append({
            "design": name,
            "fsr_hz": ";".join(repr(f) for f, _ in insts),
            "finesse": ";".join(repr(fi) for _, fi in insts),
            "from_hz": repr(a), "to_hz": repr(b), "threshold": repr(t),
            "minimum_linewidths": repr(float(mv)), "minimum_delta_hz": repr(float(mx)),
            "lowest_alias_linewidths": repr(float(lv)), "lowest_alias_delta_hz": repr(float(lx)),
            "first_below_hz": "" if fb is None else repr(float(fb)),
            "repeat_multiple": str(int(n)),
        })
        print(name, rows[-1]["minimum_linewidths"], rows[-1]["lowest_alias_linewidths"], rows[-1]["first_below_hz"], n)
    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "plan_margin_reference.csv")
    with open(out, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0].keys()))
        w.writeheader()
        w.writerows(rows)


if __name__ == "__main__":
    main()
