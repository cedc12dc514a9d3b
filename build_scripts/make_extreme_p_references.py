"""Regenerate ``tests/data/extreme_p_references.json``: worst-case errors at tiny p, in mpmath.

For p from 1e-18 down to the smallest double, the mean n p is below 1e-3 for every n used here,
so the binomial mass sits on k = 0, 1, 2, ...: F(k) = sum_{j <= k} C(n, j) p^j q^(n-j) is summed
exactly for k = 0..K (K = 12; the omitted mass is below (n p)^13 / 13!, under 1e-45), and
D(k) = F(k) - G(k) is evaluated at k = -1..min(K, n) and at k = n - 1 and n. For K < k < n - 1,
F(k) = 1 to 45 digits and every G(k) increases to 1 in k (the normal curves and Poisson at once;
Camp-Paulson and Peizer-Pratt through their z' increasing in k), so |D| there is at most
|1 - G(K + 1)|, recorded as ``beyond_bound``. G comes from the mpmath formulas of
``make_reference_values.py`` (nothing of the ``atlas`` package is imported); p is the exact
binary value of the double.

Run from the repository root (a few seconds)::

    .venv/bin/python build_scripts/make_extreme_p_references.py
"""

import os
import sys

import mpmath
from mpmath import mp, mpf

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from make_large_n_references import write_json_atomic  # noqa: E402
from make_reference_values import ALL_METHODS, Cell, approximation_single  # noqa: E402

DPS = 60
K = 12
N_VALUES = (1, 10, 1000, 10**6, 10**15)
P_VALUES = (1e-18, 1e-83, 1e-155, 1e-206, 1e-300, 3e-305, 1e-308, 6e-309, 1e-310, 5e-324)


def cell(n, p):
    c = Cell(n, p)
    pm, qm = c.p, c.q
    ks = sorted({-1, *range(0, min(K, n) + 1), n - 1, n})
    f = {}
    total = mpf(0)
    for j in range(0, min(K, n) + 1):
        total += mp.binomial(n, j) * pm**j * qm ** (n - j)
        f[j] = total
    f[-1] = mpf(0)
    f[n] = mpf(1)
    if n - 1 not in f:
        f[n - 1] = 1 - pm**n  # F(n - 1) = 1 - p^n
    rows = []
    for method in ALL_METHODS:
        d = {k: f[k] - approximation_single(method, k, c) for k in ks}
        k_max = max(d, key=lambda k: d[k])
        k_min = min(d, key=lambda k: d[k])
        cdf = max(abs(d[k]) for k in ks if k >= 0)
        beyond = mpf(0)
        if K + 1 < n - 1:
            beyond = abs(1 - approximation_single(method, K + 1, c))
        rows.append(
            {
                "n": n,
                "p": p,
                "method": method,
                "interval": mpmath.nstr(d[k_max] - d[k_min], 20),
                "cdf": mpmath.nstr(cdf, 20),
                "beyond_bound": mpmath.nstr(beyond, 3),
            }
        )
    return rows


def main():
    mp.dps = DPS
    here = os.path.dirname(os.path.abspath(__file__))
    out = os.path.normpath(
        os.path.join(here, os.pardir, "tests", "data", "extreme_p_references.json")
    )
    cells = [row for n in N_VALUES for p in P_VALUES for row in cell(n, p)]
    payload = {
        "description": (
            "Worst-case errors of every method at tiny p, computed in mpmath from exact sums; "
            "see build_scripts/make_extreme_p_references.py for the method."
        ),
        "generated_by": "build_scripts/make_extreme_p_references.py",
        "mpmath_version": mpmath.__version__,
        "dps": DPS,
        "cells": cells,
    }
    write_json_atomic(out, payload)
    print(f"wrote {out}: {len(cells)} cells")
    return 0


if __name__ == "__main__":
    sys.exit(main())
