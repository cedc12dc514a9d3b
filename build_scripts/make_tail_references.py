"""Regenerate ``tests/data/tail_references.json``: tail relative errors and test sizes in mpmath.

The values written here are the independent check on ``atlas.tails`` and ``atlas.sizes``.
Nothing in this script imports or copies the ``atlas`` package: the binomial pmf, the exact
tails and four approximations (normal_cc, edgeworth_cc, camp_paulson, poisson) are written
again from the definitions in REFERENCES.md (the project's reference notes), in mpmath at
``DPS`` decimal digits, and every count k = 0..n is evaluated (n <= 10^4: no window, no search).

Definitions (issue 11, the project's contract): L(k) = F(k), U(k) = P(X >= k);
lower(alpha) = max over k with L(k) >= alpha of |G(k)/L(k) - 1|; upper(alpha) = max over k with
U(k) >= alpha of |(1 - G(k-1))/U(k) - 1|; test sizes: less = sum b(k) over G(k) <= alpha,
greater = sum b(k) over 1 - G(k-1) <= alpha, two-sided = sum b(k) over G(k) <= alpha/2 or
1 - G(k-1) <= alpha/2; exact sizes the same with F and U.

It also records exact tails far out (down to 1e-300) to measure the relative accuracy of the
float64 tails.

Run from the repository root (about a minute)::

    .venv/bin/python build_scripts/make_tail_references.py
"""

import os
import platform
import sys
import time

import mpmath
from mpmath import mp, mpf

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from make_reference_values import write_json_atomic  # noqa: E402 - one atomic JSON writer

DPS = 40
SIG = 20
CELLS = [(1, 0.3), (2, 0.7), (3, 0.2), (20, 0.5), (50, 0.1), (100, 0.1), (500, 0.9),
         (1000, 0.01), (1000, 0.5), (10000, 0.3), (10000, 0.001)]  # fmt: skip
METHODS = ("normal_cc", "edgeworth_cc", "camp_paulson", "poisson")
TAIL_LEVELS = (0.05, 0.01, 0.001, 1e-4, 1e-8)
SIZE_LEVELS = (0.1, 0.05, 0.01, 0.001)
FAR_TAILS = [(10000, 0.3, k) for k in (2400, 2000, 1500, 1000, 3600, 4000, 5000)] + [
    (1000, 0.01, k) for k in (0, 1, 30, 60, 100)
]


def pmf_all(n, p):
    """b(k) for k = 0..n, by the ratio recurrence from b(0) = q^n (exact in mpmath)."""
    p = mpf(p)
    q = 1 - p
    out = [q**n]
    for k in range(n):
        out.append(out[-1] * (n - k) / (k + 1) * p / q)
    return out


def ncdf(x):
    return mpmath.erfc(-x / mpmath.sqrt(2)) / 2


def npdf(x):
    return mpmath.exp(-x * x / 2) / mpmath.sqrt(2 * mpmath.pi)


def approx_cdf(k, n, p, method):
    """G(k) for k = -1..n from the REFERENCES.md formulas."""
    p = mpf(p)
    q = 1 - p
    mu = n * p
    sigma = mpmath.sqrt(n * p * q)
    if method in ("normal_cc", "edgeworth_cc"):
        z = (k + mpf(1) / 2 - mu) / sigma
        g = ncdf(z)
        if method == "edgeworth_cc":
            g -= (q - p) / (6 * sigma) * (z * z - 1) * npdf(z)
        return g
    if method == "camp_paulson":
        if k < 0:
            return mpf(0)
        if k >= n:
            return mpf(1)
        r = (k + 1) * q / (p * (n - k))
        a = mpf(1) / (9 * (n - k))
        b = mpf(1) / (9 * (k + 1))
        r3 = mpmath.cbrt(r)
        return ncdf(((1 - b) * r3 - (1 - a)) / mpmath.sqrt(b * r3 * r3 + a))
    if method == "poisson":
        if p <= mpf(1) / 2:
            if k < 0:
                return mpf(0)
            return mpmath.gammainc(k + 1, mu, mpmath.inf, regularized=True)  # P(Y <= k)
        m = n - k  # P(Y >= m), Y ~ Poisson(n q)
        if m <= 0:
            return mpf(1)
        return mpmath.gammainc(m, 0, n * q, regularized=True)
    raise ValueError(method)


def cell_values(n, p):
    b = pmf_all(n, p)
    lower = []
    s = mpf(0)
    for v in b:
        s += v
        lower.append(s)
    upper = [mpf(0)] * (n + 2)  # upper[k] = P(X >= k)
    for k in range(n, -1, -1):
        upper[k] = upper[k + 1] + b[k]
    out = {"n": n, "p": p, "methods": {}}
    for method in METHODS:
        g = {k: approx_cdf(k, n, p, method) for k in range(-1, n + 1)}
        tails = {}
        for alpha in TAIL_LEVELS:
            a = mpf(alpha)
            lo = max(abs(g[k] / lower[k] - 1) for k in range(n + 1) if lower[k] >= a)
            up = max(abs((1 - g[k - 1]) / upper[k] - 1) for k in range(n + 1) if upper[k] >= a)
            tails[str(alpha)] = {"lower": mpmath.nstr(lo, SIG), "upper": mpmath.nstr(up, SIG)}
        sizes = {}
        for alpha in SIZE_LEVELS:
            a = mpf(alpha)
            h = a / 2
            rec = {}
            rec["less"] = [sum(b[k] for k in range(n + 1) if g[k] <= a),
                           sum(b[k] for k in range(n + 1) if lower[k] <= a)]  # fmt: skip
            rec["greater"] = [sum(b[k] for k in range(n + 1) if 1 - g[k - 1] <= a),
                              sum(b[k] for k in range(n + 1) if upper[k] <= a)]  # fmt: skip
            rec["two-sided"] = [
                sum(b[k] for k in range(n + 1) if g[k] <= h or 1 - g[k - 1] <= h),
                sum(b[k] for k in range(n + 1) if lower[k] <= h or upper[k] <= h),
            ]
            sizes[str(alpha)] = {
                alt: {"size": mpmath.nstr(v[0], SIG), "exact_size": mpmath.nstr(v[1], SIG)}
                for alt, v in rec.items()
            }
        out["methods"][method] = {"tail_error": tails, "test_size": sizes}
    return out


def far_tails():
    rows = []
    cache = {}
    for n, p, k in FAR_TAILS:
        if (n, p) not in cache:
            cache[(n, p)] = pmf_all(n, p)
        b = cache[(n, p)]
        rows.append({
            "n": n, "p": p, "k": k,
            "lower": mpmath.nstr(mpmath.fsum(b[: k + 1]), SIG),  # P(X <= k)
            "upper": mpmath.nstr(mpmath.fsum(b[k:]), SIG),  # P(X >= k)
        })  # fmt: skip
    return rows


def main():
    mp.dps = DPS
    start = time.time()
    cells = [cell_values(n, p) for n, p in CELLS]
    record = {
        "description": "Tail relative errors and test sizes (issue 11 definitions), computed in "
        "mpmath independently of the atlas package, every k = 0..n evaluated; and exact tails "
        f"far out. Decimal strings, {SIG} significant digits.",
        "generated_by": "build_scripts/make_tail_references.py",
        "mpmath_version": mpmath.__version__,
        "python_version": platform.python_version(),
        "dps": DPS,
        "p": "the exact binary value of the IEEE double p (mpf(float(p)))",
        "computation": "pmf by the ratio recurrence from q^n; L and U as running sums; G from "
        "the REFERENCES.md formulas with mpmath erfc, cbrt and the regularized incomplete gamma",
        "elapsed_seconds": None,
        "cells": cells,
        "far_tails": far_tails(),
    }
    record["elapsed_seconds"] = round(time.time() - start, 1)
    target = os.path.join(os.path.dirname(__file__), "..", "tests", "data", "tail_references.json")
    write_json_atomic(target, record)
    print(f"wrote {os.path.normpath(target)} in {record['elapsed_seconds']} s", file=sys.stderr)


if __name__ == "__main__":
    main()
