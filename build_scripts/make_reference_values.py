"""Regenerate ``tests/data/reference_values.json``: high-precision worst-case errors.

The values written here are the independent check on ``atlas.engine``. Nothing in this script
imports or copies the ``atlas`` package: the exact binomial CDF and every approximation G(k) are
implemented again, from the definitions in REFERENCES.md (the project's reference notes), in
mpmath arithmetic at ``DPS`` decimal digits.

Method of computation (also stored in the JSON under ``"computation"``):

* Exact F(k) = P(X <= k), X ~ Bin(n, p). The pmf at the mode m = floor((n + 1) p) is
  exp(lnGamma(n+1) - lnGamma(m+1) - lnGamma(n-m+1) + m ln p + (n-m) ln q) (mpmath ``loggamma``);
  the other terms follow from the ratio recurrence
  f(k+1) = f(k) (n-k)/(k+1) p/q going up and f(k-1) = f(k) k/(n-k+1) q/p going down.
  F is the running sum of f from the left end of the summation range.
* Summation range. For n <= ``FULL_SUM_MAX_N`` every term k = 0..n is summed. Beyond that only
  the window mu +- ``WINDOW_SIGMAS`` sigma (+- ``WINDOW_EXTRA`` absolute) is summed. The omitted
  mass on each side is bounded by the Chernoff bound P(X <= a n) <= exp(-n KL(a || p)) for
  a < p (and the mirror image for a > p), KL(a || p) = a ln(a/p) + (1-a) ln((1-a)/q). The bound is
  recorded per cell and the script refuses to write the file unless it is below ``TAIL_LIMIT``.
* D(k) = F(k) - G(k) is evaluated at *every* integer k of the summation range, plus k = -1 and
  k = n (where F is exactly 0 and 1). Outside the window |D(k)| <= omitted mass + |G| there; G
  is evaluated at the first integer beyond each window edge and that tail bound is recorded too
  (the approximations are monotone in the far tails, so the edge value bounds the rest).
  Interval error = max D - min D over k = -1..n; CDF error = max |D(k)| over k = 0..n.
* Poisson G(k): running sum of the Poisson(lambda) pmf by the recurrence
  g(j+1) = g(j) lambda/(j+1), started from the regularized incomplete gamma function
  P(Y <= j0) = Q(j0 + 1, lambda) (mpmath ``gammainc``); the end of the running sum is checked
  against ``gammainc`` again and the difference recorded. For p > 1/2 the count of failures
  n - X is used: G(k) = P(Y >= n - k), Y ~ Poisson(n q).
* p is taken as the exact binary value of the IEEE double the engine receives (mpf(float(p))).

Run from the repository root::

    /work/venv/bin/python build_scripts/make_reference_values.py            # full set
    /work/venv/bin/python build_scripts/make_reference_values.py --max-n 1000 --output /tmp/r.json

The work is spread over ``multiprocessing`` with one process by default (the machine is shared).
"""

from __future__ import annotations

import argparse
import json
import multiprocessing
import os
import platform
import sys
import tempfile
import time

import mpmath
from mpmath import mp, mpf

DPS = 40
FULL_SUM_MAX_N = 5000
WINDOW_SIGMAS = 45
WINDOW_EXTRA = 60
TAIL_LIMIT = mpf("1e-30")
SIG_DIGITS = 20

NORMAL_FAMILY = ("normal_cc", "edgeworth_cc", "edgeworth2_cc")
ALL_METHODS = (
    "normal_cc",
    "edgeworth_cc",
    "edgeworth2_cc",
    "normal",
    "poisson",
    "camp_paulson",
    "peizer_pratt",
)

P_VALUES = (1e-4, 0.001, 0.01, 0.1, 0.3, 0.5, 0.7, 0.99, 0.9999)
N_VALUES = (1, 2, 3, 5, 10, 20, 50, 100, 1000, 10**4, 10**5, 10**6, 10**7, 10**8)
# Which methods are computed for which n. normal_cc, edgeworth_cc and edgeworth2_cc share
# Phi(z) and phi(z), so the last costs almost nothing extra; the other methods each need one more
# erfc per point and stop at n = 10^6, plus a few cells beyond, to keep the run within ~15
# minutes. The cells at p near 1 are cheap (small sigma) and test the rounding of n p.
OTHER_METHODS = ("normal", "poisson", "camp_paulson", "peizer_pratt")
OTHER_MAX_N = 10**6
OTHER_EXTRA_CELLS = (
    (10**7, 1e-4),
    (10**7, 0.01),
    (10**7, 0.5),
    (10**7, 0.99),
    (10**7, 0.9999),
    (10**8, 1e-4),
    (10**8, 0.9999),
)

# Binomial CDF points at large n, to measure the accuracy of scipy.stats.binom.cdf.
CDF_CHECK_N = (10**6, 10**7, 10**8)
CDF_CHECK_P = (1e-4, 0.3, 0.5)
CDF_CHECK_SIGMAS = (-8, -5, -3, -1, 0, 1, 3, 5, 8)

# Spot values of G(k) for tests/test_approximations.py.
SPOT_CELLS = ((1, 0.3), (10, 0.5), (20, 0.3), (50, 0.1), (50, 0.7), (100, 0.99), (1000, 0.01))


def nstr(x, digits=SIG_DIGITS):
    """Decimal string of an mpf with ``digits`` significant digits."""
    return mpmath.nstr(x, digits, min_fixed=-4, max_fixed=6)


# --------------------------------------------------------------------------------------------
# Standard normal CDF and density: Phi(x) = erfc(-x / sqrt 2) / 2, phi(x) = exp(-x^2/2)/sqrt(2 pi)


def _phi_cdf(x):
    if abs(x) > 10**6:  # mpmath's erfc overflows for huge arguments; Phi is 0 or 1 there
        return mpf(0) if x < 0 else mpf(1)
    return mp.erfc(-x / mp.sqrt(2)) / 2


def _phi_pdf(x):
    return mp.exp(-x * x / 2) / mp.sqrt(2 * mp.pi)


# --------------------------------------------------------------------------------------------
# The approximations, one per method, G(k) for a single integer k in -1..n (REFERENCES.md table).


class Cell:
    """Constants of one (n, p) shared by the approximation formulas."""

    def __init__(self, n, p):
        self.n = int(n)
        self.p_float = float(p)
        self.p = mpf(self.p_float)  # exact binary value of the double
        self.q = 1 - self.p
        self.mu = self.n * self.p
        self.sigma = mp.sqrt(self.mu * self.q)
        self.g1 = (self.q - self.p) / self.sigma  # skewness
        self.g2 = (1 - 6 * self.p * self.q) / self.sigma**2  # excess kurtosis
        self.sqrt2 = mp.sqrt(2)
        self.inv_sqrt2pi = 1 / mp.sqrt(2 * mp.pi)


def normal_family(k, c):
    """(normal_cc, edgeworth_cc, edgeworth2_cc) at k, sharing Phi(z) and phi(z).

    z = (k + 1/2 - mu)/sigma; edgeworth_cc = Phi(z) - g1/6 (z^2 - 1) phi(z);
    edgeworth2_cc = edgeworth_cc - phi(z) [g2/24 He3(z) + g1^2/72 He5(z)] + z phi(z)/(24 sigma^2).
    """
    z = (k + mpf("0.5") - c.mu) / c.sigma
    big_phi = _phi_cdf(z)
    small_phi = mp.exp(-z * z / 2) * c.inv_sqrt2pi
    z2 = z * z
    e1 = big_phi - c.g1 / 6 * (z2 - 1) * small_phi
    he3 = z * (z2 - 3)
    he5 = z * (z2 * z2 - 10 * z2 + 15)
    e2 = (
        e1
        - small_phi * (c.g2 / 24 * he3 + c.g1 * c.g1 / 72 * he5)
        + z * small_phi / (24 * c.sigma**2)
    )
    return big_phi, e1, e2


def normal_plain(k, c):
    """Phi((k - mu)/sigma), no continuity correction."""
    return _phi_cdf((k - c.mu) / c.sigma)


def camp_paulson(k, c):
    """Camp (1951) / Paulson (1942) cube-root form; G(-1) = 0 and G(n) = 1 by definition."""
    n = c.n
    if k < 0:
        return mpf(0)
    if k >= n:
        return mpf(1)
    r = (k + 1) * c.q / (c.p * (n - k))
    a = mpf(1) / (9 * (n - k))
    b = mpf(1) / (9 * (k + 1))
    r13 = mp.cbrt(r)
    x = ((1 - b) * r13 - (1 - a)) / mp.sqrt(b * r13 * r13 + a)
    return _phi_cdf(x)


def _pp_g(t):
    """g(t) = (1 - t^2 + 2 t ln t)/(1 - t)^2, g(1) = 0.

    Near t = 1 the numerator is -(t-1)^3/3 + ..., so about 2 log10(1/|t-1|) digits cancel: the
    working precision is raised by that much.
    """
    if t == 1:
        return mpf(0)
    e = abs(t - 1)
    extra = 10 + (2 * int(-mp.log10(e)) if e < 1 else 0)
    with mp.extradps(extra):
        t = +t
        return (1 - t * t + 2 * t * mp.log(t)) / (1 - t) ** 2


def peizer_pratt(k, c):
    """Peizer & Pratt (1968) normalizing transform; G(-1) = 0 and G(n) = 1 by definition."""
    n, p, q = c.n, c.p, c.q
    if k < 0:
        return mpf(0)
    if k >= n:
        return mpf(1)
    s = k + mpf("0.5")
    t = n - k - mpf("0.5")
    d = (
        k
        + mpf(2) / 3
        - (n + mpf(1) / 3) * p
        + mpf("0.02") * (q / (k + 1) - p / (n - k) + (q - mpf("0.5")) / (n + 1))
    )
    # For t = S/(n p) >> 1 (tiny p), g(t) = -1 + 2 ln t / t + ..., so 1 + q g cancels to
    # about 1/t: the working precision is raised by log10 t digits (and likewise for T/(n q)).
    big = max(s / (n * p), t / (n * q), mpf(1))
    with mp.extradps(20 + int(mp.log10(big))):
        num = 1 + q * _pp_g(s / (n * p)) + p * _pp_g(t / (n * q))
        x = d * mp.sqrt(num / ((n + mpf(1) / 6) * p * q))
    return _phi_cdf(x)


def poisson_cdf_single(j, lam):
    """P(Y <= j), Y ~ Poisson(lam), by the regularized upper incomplete gamma Q(j+1, lam)."""
    if j < 0:
        return mpf(0)
    return mp.gammainc(j + 1, lam, mp.inf, regularized=True)


def poisson_single(k, c):
    """Poisson G(k) at one k by gammainc (independent of the running sum used in the cells)."""
    if c.p_float <= 0.5:
        return poisson_cdf_single(k, c.mu)
    # mirrored: G(k) = P(Y >= n - k) = 1 - P(Y <= n - k - 1), Y ~ Poisson(n q)
    return 1 - poisson_cdf_single(c.n - k - 1, c.n * c.q)


def approximation_single(method, k, c):
    """G(k) of any method at one k (used for spot values and window-edge tail checks)."""
    if method in NORMAL_FAMILY:
        return normal_family(k, c)[NORMAL_FAMILY.index(method)]
    return {
        "normal": normal_plain,
        "poisson": poisson_single,
        "camp_paulson": camp_paulson,
        "peizer_pratt": peizer_pratt,
    }[method](k, c)


# --------------------------------------------------------------------------------------------
# Exact binomial side


def kl_bernoulli(a, p):
    """KL(a || p) for Bernoulli laws, with 0 ln 0 = 0."""
    q = 1 - p
    out = mpf(0)
    if a > 0:
        out += a * mp.log(a / p)
    if a < 1:
        out += (1 - a) * mp.log((1 - a) / q)
    return out


def summation_range(c):
    """(lo, hi): the k range whose pmf terms are summed."""
    n = c.n
    if n <= FULL_SUM_MAX_N:
        return 0, n
    half = WINDOW_SIGMAS * c.sigma + WINDOW_EXTRA
    lo = max(0, int(mp.floor(c.mu - half)))
    hi = min(n, int(mp.ceil(c.mu + half)))
    return lo, hi


def chernoff_tails(c, lo, hi):
    """Chernoff bounds on P(X < lo) and P(X > hi)."""
    n = c.n
    left = mpf(0)
    right = mpf(0)
    if lo > 0:
        a = mpf(lo - 1) / n
        if not a < c.p:
            raise RuntimeError(f"left window edge above the mean at n={n}, p={c.p_float}")
        left = mp.exp(-n * kl_bernoulli(a, c.p))
    if hi < n:
        a = mpf(hi + 1) / n
        if not a > c.p:
            raise RuntimeError(f"right window edge below the mean at n={n}, p={c.p_float}")
        right = mp.exp(-n * kl_bernoulli(a, c.p))
    return left, right


def binomial_pmf_range(c, lo, hi):
    """pmf f(k) for k = lo..hi, from the mode by the ratio recurrence."""
    n, p, q = c.n, c.p, c.q
    mode = min(max(int(mp.floor((n + 1) * p)), lo), hi)
    # lnGamma(n+1) ~ n ln n: at n = 10^8 its absolute rounding error at DPS digits would be
    # ~1e-31, a relative error of the whole pmf; 20 guard digits keep it at ~1e-50.
    with mp.extradps(20):
        log_fm = (
            mp.loggamma(n + 1)
            - mp.loggamma(mode + 1)
            - mp.loggamma(n - mode + 1)
            + mode * mp.log(p)
            + (n - mode) * mp.log(q)
        )
        f_mode = mp.exp(log_fm)
    pmf = [mpf(0)] * (hi - lo + 1)
    pmf[mode - lo] = +f_mode
    up = p / q
    down = q / p
    f = pmf[mode - lo]
    for k in range(mode, hi):  # f(k+1) = f(k) (n-k)/(k+1) p/q
        f = f * (n - k) / (k + 1) * up
        pmf[k + 1 - lo] = f
    f = pmf[mode - lo]
    for k in range(mode, lo, -1):  # f(k-1) = f(k) k/(n-k+1) q/p
        f = f * k / (n - k + 1) * down
        pmf[k - 1 - lo] = f
    return pmf


def poisson_cdf_range(lam, j0, j1):
    """P(Y <= j) for j = j0..j1 by a running sum; also |end - gammainc| as a check."""
    out = []
    h = poisson_cdf_single(j0, lam)
    out.append(h)
    j = j0 + 1
    if j < 0:
        # the negative part contributes nothing; jump to j = 0
        out.extend([mpf(0)] * (min(j1, -1) - j0))
        j = max(j0 + 1, 0)
        h = mpf(0)
    if j <= j1:
        g = mp.exp(-lam + j * mp.log(lam) - mp.loggamma(j + 1))
        h = h + g
        out.append(h)
        for jj in range(j, j1):
            g = g * lam / (jj + 1)
            h = h + g
            out.append(h)
    check = abs(out[-1] - poisson_cdf_single(j1, lam))
    assert len(out) == j1 - j0 + 1
    return out, check


# --------------------------------------------------------------------------------------------
# One (n, p): every requested method


def compute_cell(task):
    """Worst-case errors of the requested methods at one (n, p)."""
    n, p, methods, cdf_check_k = task
    mp.dps = DPS
    t0 = time.time()
    c = Cell(n, p)
    lo, hi = summation_range(c)
    tail_left, tail_right = chernoff_tails(c, lo, hi)
    pmf = binomial_pmf_range(c, lo, hi)
    window_mass = mp.fsum(pmf)

    # F(k) for k = lo..hi (running sum; the omitted left mass is below tail_left)
    cdf = []
    acc = mpf(0)
    for f in pmf:
        acc += f
        cdf.append(acc)

    # Poisson G over the range lo-1..hi+1 (plus the fixed end values)
    poisson_g = None
    poisson_check = None
    if "poisson" in methods:
        ks_lo, ks_hi = lo - 1, hi + 1
        if c.p_float <= 0.5:
            h, poisson_check = poisson_cdf_range(c.mu, ks_lo, ks_hi)
            poisson_g = dict(zip(range(ks_lo, ks_hi + 1), h, strict=True))
        else:
            lam = c.n * c.q
            # G(k) = 1 - H(n - k - 1), k = ks_lo..ks_hi  <=>  j = n-ks_hi-1 .. n-ks_lo-1
            j0, j1 = c.n - ks_hi - 1, c.n - ks_lo - 1
            h, poisson_check = poisson_cdf_range(lam, j0, j1)
            poisson_g = {c.n - j - 1: 1 - hj for j, hj in zip(range(j0, j1 + 1), h, strict=True)}

    def g_values(k):
        """Tuple of G(k), one per requested method, sharing the normal-family terms."""
        vals = []
        fam = None
        for m in methods:
            if m in NORMAL_FAMILY:
                if fam is None:
                    fam = normal_family(k, c)
                vals.append(fam[NORMAL_FAMILY.index(m)])
            elif m == "poisson":
                g = poisson_g.get(k)
                vals.append(poisson_single(k, c) if g is None else g)
            else:
                vals.append(approximation_single(m, k, c))
        return vals

    nm = len(methods)
    d_max = [None] * nm
    d_min = [None] * nm
    k_max = [None] * nm
    k_min = [None] * nm
    cdf_max = [mpf(0)] * nm
    k_cdf = [None] * nm

    def visit(k, fk):
        gs = g_values(k)
        for i in range(nm):
            d = fk - gs[i]
            if d_max[i] is None or d > d_max[i]:
                d_max[i], k_max[i] = d, k
            if d_min[i] is None or d < d_min[i]:
                d_min[i], k_min[i] = d, k
            if k >= 0 and abs(d) > cdf_max[i]:
                cdf_max[i], k_cdf[i] = abs(d), k

    visit(-1, mpf(0))  # F(-1) = 0 exactly
    for k in range(lo, hi + 1):
        visit(k, cdf[k - lo])
    if hi < n:
        visit(n, mpf(1))  # F(n) = 1 exactly

    # Tail bounds outside the window: |D(k)| <= omitted mass + |G(k)| (or |1 - G(k)|)
    tail_bounds = [mpf(0)] * nm
    if lo > 0:
        gs = g_values(lo - 1)
        for i in range(nm):
            tail_bounds[i] = max(tail_bounds[i], tail_left + abs(gs[i]))
    if hi < n - 1:
        gs = g_values(hi + 1)
        for i in range(nm):
            tail_bounds[i] = max(tail_bounds[i], tail_right + abs(1 - gs[i]))

    rows = []
    for i, m in enumerate(methods):
        if tail_bounds[i] >= TAIL_LIMIT:
            raise RuntimeError(f"tail bound {tail_bounds[i]} too large at n={n}, p={p}, {m}")
        rows.append(
            {
                "n": n,
                "p": c.p_float,
                "method": m,
                "interval": nstr(d_max[i] - d_min[i]),
                "cdf": nstr(cdf_max[i]),
                "d_max": nstr(d_max[i]),
                "d_min": nstr(d_min[i]),
                "k_max": k_max[i],
                "k_min": k_min[i],
                "k_cdf": k_cdf[i],
                "summed_k_range": [lo, hi],
                "omitted_mass_bound": mpmath.nstr(tail_left + tail_right, 5),
                "outside_window_abs_d_bound": mpmath.nstr(tail_bounds[i], 5),
            }
        )
    if poisson_check is not None:
        for r in rows:
            if r["method"] == "poisson":
                r["poisson_running_sum_vs_gammainc"] = mpmath.nstr(poisson_check, 5)

    # Exact CDF values for the scipy accuracy check
    cdf_points = []
    for k in cdf_check_k:
        if not lo <= k <= hi:
            continue
        fk = cdf[k - lo]
        sf = mp.fsum(
            pmf[k + 1 - lo :]
        )  # upper tail summed from the right end, full relative accuracy
        cdf_points.append({"n": n, "p": c.p_float, "k": k, "cdf": nstr(fk, 25), "sf": nstr(sf, 25)})

    meta = {
        "n": n,
        "p": c.p_float,
        "methods": list(methods),
        "points": hi - lo + 1,
        "seconds": round(time.time() - t0, 2),
        "one_minus_window_mass": mpmath.nstr(1 - window_mass, 5),
        "omitted_mass_bound": mpmath.nstr(tail_left + tail_right, 5),
    }
    if abs(1 - window_mass) > TAIL_LIMIT:
        raise RuntimeError(f"window mass off by {1 - window_mass} at n={n}, p={p}")
    return rows, cdf_points, meta


# --------------------------------------------------------------------------------------------
# Extras: worked examples and spot values of G


def worked_examples():
    """The three textbook cases of REFERENCES.md, exact and normal_cc, at DPS digits."""
    mp.dps = DPS
    out = []

    def exact_cdf(n, p, k):
        c = Cell(n, p)
        pmf = binomial_pmf_range(c, 0, n)
        return mp.fsum(pmf[: k + 1]), pmf

    def g_cc(n, p, k):
        c = Cell(n, p)
        return normal_family(k, c)[0]

    # Bin(50, 0.1), P(X <= 2)
    f2, _ = exact_cdf(50, 0.1, 2)
    out.append(
        {
            "case": "Bin(50, 0.1), P(X <= 2)",
            "n": 50,
            "p": 0.1,
            "a": 0,
            "b": 2,
            "exact": nstr(f2),
            "normal_cc": nstr(g_cc(50, 0.1, 2)),
        }
    )
    # Bin(40, 0.5), P(X = 20)
    _, pmf = exact_cdf(40, 0.5, 20)
    out.append(
        {
            "case": "Bin(40, 0.5), P(X = 20)",
            "n": 40,
            "p": 0.5,
            "a": 20,
            "b": 20,
            "exact": nstr(pmf[20]),
            "normal_cc": nstr(g_cc(40, 0.5, 20) - g_cc(40, 0.5, 19)),
        }
    )
    # Bin(450, 0.3), P(X >= 151)
    _, pmf = exact_cdf(450, 0.3, 150)
    out.append(
        {
            "case": "Bin(450, 0.3), P(X >= 151)",
            "n": 450,
            "p": 0.3,
            "a": 151,
            "b": 450,
            "exact": nstr(mp.fsum(pmf[151:])),
            "normal_cc": nstr(1 - g_cc(450, 0.3, 150)),
        }
    )
    return out


def spot_values():
    """G(k) of every method at a few k of a few small cells (gammainc for Poisson)."""
    mp.dps = DPS
    out = []
    for n, p in SPOT_CELLS:
        c = Cell(n, p)
        mode = int(mp.floor((n + 1) * c.p))
        ks = sorted({k for k in (-1, 0, 1, mode - 1, mode, mode + 1, n - 1, n) if -1 <= k <= n})
        for m in ALL_METHODS:
            for k in ks:
                out.append(
                    {
                        "n": n,
                        "p": float(p),
                        "method": m,
                        "k": k,
                        "G": nstr(approximation_single(m, k, c)),
                    }
                )
    return out


# --------------------------------------------------------------------------------------------


def build_tasks(max_n):
    """One task per (n, p): the methods to compute there and the CDF-check k values."""
    mp.dps = DPS
    tasks = []
    extra = set(OTHER_EXTRA_CELLS)
    for n in N_VALUES:
        if n > max_n:
            continue
        for p in P_VALUES:
            methods = list(NORMAL_FAMILY)
            if n <= OTHER_MAX_N or (n, p) in extra:
                methods += list(OTHER_METHODS)
            ks = []
            if n in CDF_CHECK_N and p in CDF_CHECK_P:
                c = Cell(n, p)
                ks = sorted({int(mp.nint(c.mu + s * c.sigma)) for s in CDF_CHECK_SIGMAS})
                ks = [k for k in ks if 0 <= k <= n]
            tasks.append((n, p, tuple(methods), tuple(ks)))
    return tasks


def scipy_measurement(cdf_points):
    """Compare scipy.stats.binom.cdf / sf with the exact values (the engine's exact side)."""
    import numpy as np
    import scipy
    from scipy import stats

    out = []
    for pt in cdf_points:
        exact_cdf = mpf(pt["cdf"])
        exact_sf = mpf(pt["sf"])
        s_cdf = float(stats.binom.cdf(pt["k"], pt["n"], pt["p"]))
        s_sf = float(stats.binom.sf(pt["k"], pt["n"], pt["p"]))
        row = dict(pt)
        row["scipy_cdf"] = repr(s_cdf)
        row["scipy_sf"] = repr(s_sf)
        row["scipy_cdf_abs_err"] = mpmath.nstr(abs(mpf(s_cdf) - exact_cdf), 3)
        row["scipy_sf_rel_err"] = mpmath.nstr(
            abs(mpf(s_sf) - exact_sf) / exact_sf if exact_sf > 0 else mpf(0), 3
        )
        out.append(row)
    return out, {"scipy": scipy.__version__, "numpy": np.__version__}


def write_json_atomic(path, payload):
    """Write JSON to a temporary file in the same directory, then rename it into place."""
    directory = os.path.dirname(os.path.abspath(path))
    os.makedirs(directory, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".reference_values.", suffix=".tmp", dir=directory)
    try:
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; the data file is an ordinary file
        with os.fdopen(fd, "w") as fh:
            json.dump(payload, fh, indent=1)
            fh.write("\n")
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def main(argv=None):
    here = os.path.dirname(os.path.abspath(__file__))
    default_out = os.path.join(here, os.pardir, "tests", "data", "reference_values.json")
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--output", default=os.path.normpath(default_out))
    parser.add_argument("--max-n", type=int, default=max(N_VALUES))
    parser.add_argument("--processes", type=int, default=1)
    args = parser.parse_args(argv)

    mp.dps = DPS
    t_start = time.time()
    tasks = build_tasks(args.max_n)
    # cheap cells first so that the log shows progress early
    tasks.sort(key=lambda t: (t[0], abs(t[1] - 0.5)))
    cells, cdf_points, metas = [], [], []
    with multiprocessing.Pool(processes=args.processes) as pool:
        for rows, pts, meta in pool.imap(compute_cell, tasks):
            cells.extend(rows)
            cdf_points.extend(pts)
            metas.append(meta)
            print(
                f"[{time.time() - t_start:7.1f}s] n={meta['n']:<10d} p={meta['p']:<7g} "
                f"points={meta['points']:<7d} {meta['seconds']:6.2f}s "
                f"1-mass={meta['one_minus_window_mass']} tail<={meta['omitted_mass_bound']}",
                flush=True,
            )
    cells.sort(key=lambda r: (ALL_METHODS.index(r["method"]), r["n"], r["p"]))
    cdf_points.sort(key=lambda r: (r["n"], r["p"], r["k"]))
    scipy_rows, scipy_versions = scipy_measurement(cdf_points)
    elapsed = time.time() - t_start

    payload = {
        "description": (
            "Worst-case errors of the binomial approximations, computed in mpmath independently "
            "of the atlas package. interval = max D - min D over k = -1..n, cdf = max |D| over "
            "k = 0..n, D(k) = F(k) - G(k). Decimal strings, 20 significant digits."
        ),
        "generated_by": "build_scripts/make_reference_values.py",
        "mpmath_version": mpmath.__version__,
        "mpmath_backend": mpmath.libmp.BACKEND,
        "python_version": platform.python_version(),
        "dps": DPS,
        "computation": {
            "exact_cdf": (
                "running sum of the binomial pmf; pmf at the mode m = floor((n+1)p) from mpmath "
                "loggamma, other terms by the ratio recurrence f(k+1) = f(k)(n-k)/(k+1) p/q "
                "outwards from the mode"
            ),
            "summation_range": (
                f"k = 0..n for n <= {FULL_SUM_MAX_N}; otherwise mu +- {WINDOW_SIGMAS} sigma "
                f"+- {WINDOW_EXTRA}, clipped to 0..n"
            ),
            "truncation": (
                "omitted mass bounded by the Chernoff bound exp(-n KL(a || p)) on each side, "
                "recorded per cell as omitted_mass_bound; every bound is < "
                f"{mpmath.nstr(TAIL_LIMIT, 3)}"
            ),
            "search": (
                "D evaluated at every integer of the summation range and at k = -1 and k = n; "
                "outside the range |D| <= outside_window_abs_d_bound"
            ),
            "approximations": (
                "REFERENCES.md formulas in mpmath: Phi(x) = erfc(-x/sqrt 2)/2, phi(x) = "
                "exp(-x^2/2)/sqrt(2 pi); poisson by running pmf sum started and checked with "
                "the regularized incomplete gamma function"
            ),
            "p": "the exact binary value of the IEEE double p",
        },
        "elapsed_seconds": round(elapsed, 1),
        "processes": args.processes,
        "cells": cells,
        "cell_runs": metas,
        "worked_examples": worked_examples(),
        "binom_cdf_checks": scipy_rows,
        "binom_cdf_checks_versions": scipy_versions,
        "approximation_values": spot_values(),
    }
    write_json_atomic(args.output, payload)
    print(f"wrote {args.output}: {len(cells)} cells in {elapsed:.1f}s", flush=True)
    worst_abs = max(mpf(r["scipy_cdf_abs_err"]) for r in scipy_rows) if scipy_rows else None
    if worst_abs is not None:
        print(f"scipy.stats.binom.cdf largest absolute error: {mpmath.nstr(worst_abs, 3)}")
        for r in scipy_rows:
            print(
                f"  n={r['n']:<10d} p={r['p']:<7g} k={r['k']:<10d} cdf={r['cdf'][:12]:<14s}"
                f" abs_err={r['scipy_cdf_abs_err']:<10s} sf_rel_err={r['scipy_sf_rel_err']}"
            )
    return 0


if __name__ == "__main__":
    sys.exit(main())
