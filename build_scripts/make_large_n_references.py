"""Regenerate ``tests/data/large_n_references.json``: the exact side at large n, in mpmath.

At n = 10^15 the binomial CDF cannot be summed term by term, so here it comes from its integral
form, independently of the ``atlas`` package (nothing of it is imported):

* F(k) = P(X <= k) = P(B > p) with B ~ Beta(k + 1, n - k), so
  F(k) = integral from p to 1 of t^k (1 - t)^(n-k-1) / B(k + 1, n - k) dt.
  The integrand is evaluated as exp(k ln t + (n-k-1) ln(1 - t) - ln B) with ln B from mpmath
  ``loggamma`` at 20 extra digits, and integrated by ``mpmath.quad`` (tanh-sinh) over pieces
  split at t0 + j w, j = 0, +-1.5, +-3, +-6, +-10, +-20, +-40, where t0 = k / (n - 1) is the
  mode and w the standard deviation of B; the integral is cut at t0 +- 60 w (the density there
  is below exp(-1700) of its peak).
* The method is checked against exact sums (mpmath ``binomial`` terms summed over k = 0..K)
  at n = 10^3 and 10^4 and stored under ``quad_vs_sum``.

Three sets are written:

``cdf_points``
    F(k) at k = round(mu + z sigma) for several z, at n = 10^4 .. 10^15 and several p, with
    the value of ``scipy.stats.binom.cdf`` beside it: the measured accuracy of the exact side the
    engine uses (Boost's incomplete beta). The same points check the engine's asymptotic F.
``worst``
    The worst-case interval and CDF errors of every method at n = 10^9, 10^10, 10^12 and
    10^15, p = 0.5, 0.3 and 0.001. D(k) = F(k) - G(k), G from the mpmath formulas of
    ``make_reference_values.py`` (same definitions, REFERENCES.md); the Poisson CDF by the same
    quadrature of its Gamma integral, P(Y <= j) = P(T > lambda), T ~ Gamma(j + 1). D is sampled
    at k = round(mu + t sigma), t = -7..7 in steps of 1/2; each sampled local maximum of D and
    of -D is refined by golden-section search over the integers of its bracket down to
    max(3, sigma 1e-4) integers (D is smooth on the scale of sigma, so the value found is within
    1e-8 of the extreme, relatively). Beyond |t| = 7, |D| <= F + G
    (or 1 - F + 1 - G), and both tails fall off like the normal tail.
``expansion_checks``
    F(k) at sigma = 30 .. 10^4 for checking the engine's asymptotic expansion of F.

Run from the repository root (about 15 minutes on one quiet core)::

    .venv/bin/python build_scripts/make_large_n_references.py
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time

import mpmath
from mpmath import mp, mpf

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from make_reference_values import (  # noqa: E402
    ALL_METHODS,
    Cell,
    approximation_single,
    write_json_atomic,  # noqa: E402 - one atomic JSON writer
)

DPS = 40
SPLITS = (-40, -20, -10, -6, -3, -1.5, 0, 1.5, 3, 6, 10, 20, 40)
CUT = 60

CDF_N = tuple(10**e for e in range(4, 16))
CDF_P = (0.5, 0.3, 0.001, 1e-6)
CDF_Z = (-3.0, -1.0, 0.0, 1.0, 3.0)
# Small means at huge n: the asymptotic expansion does not serve there.
SMALL_MEAN_CELLS = ((10**12, 1e-10), (10**15, 1e-13), (10**15, 1e-11), (10**15, 1e-9))

EXPANSION_P = (0.5, 0.3, 0.001)
EXPANSION_SIGMA = (30, 100, 300, 1000, 10000)
EXPANSION_Z = (-4.0, -2.0, -1.0, 0.0, 0.5, 1.0, 2.0, 4.0)

WORST_CELLS = tuple((n, p) for n in (10**15, 10**12, 10**10, 10**9) for p in (0.3, 0.5, 0.001))
SAMPLE_T = tuple(x / 2 for x in range(-14, 15))


def binom_cdf(n, p, k):
    """P(X <= k), X ~ Bin(n, p), by the Beta integral (see the module notes)."""
    p = mpf(p)
    if k < 0:
        return mpf(0)
    if k >= n:
        return mpf(1)
    a, b = k + 1, n - k
    with mp.extradps(20):
        log_beta = mp.loggamma(a) + mp.loggamma(b) - mp.loggamma(a + b)
    t0 = mpf(k) / (n - 1)
    w = mp.sqrt(mpf(a) * b / ((mpf(a) + b) ** 2 * (a + b + 1)))

    def density(t):
        return mp.exp((a - 1) * mp.log(t) + (b - 1) * mp.log1p(-t) - log_beta)

    lo, hi = max(p, t0 - CUT * w), min(mpf(1), t0 + CUT * w)
    if lo >= hi:
        return mpf(0) if p > t0 else mpf(1)
    inner = [t0 + j * w for j in SPLITS if lo < t0 + j * w < hi]
    return mp.quad(density, [lo, *inner, hi])


def poisson_cdf(lam, j):
    """P(Y <= j), Y ~ Poisson(lam), as P(T > lam) with T ~ Gamma(j + 1), by the same quadrature.

    (mpmath ``gammainc`` takes minutes at lam = 10^14.)
    """
    if j < 0:
        return mpf(0)
    a = j + 1
    with mp.extradps(20):
        log_gamma = mp.loggamma(a)
    t0, w = mpf(j), mp.sqrt(mpf(a))

    def density(t):
        return mp.exp(j * mp.log(t) - t - log_gamma)

    lo, hi = max(lam, t0 - CUT * w), t0 + CUT * w
    if lo >= hi:
        return mpf(0) if lam > t0 else mpf(1)
    inner = [t0 + i * w for i in SPLITS if lo < t0 + i * w < hi]
    return mp.quad(density, [lo, *inner, hi])


def approximation(method, k, c):
    """G(k) of ``method``; the Poisson CDF by :func:`poisson_cdf`."""
    if method != "poisson":
        return approximation_single(method, k, c)
    if c.p_float <= 0.5:
        return poisson_cdf(c.mu, k)
    return 1 - poisson_cdf(c.n * c.q, c.n - k - 1)


def binom_cdf_sum(n, p, k):
    """P(X <= k) by the exact sum of binomial terms (small n only)."""
    p = mpf(p)
    return mp.fsum(mp.binomial(n, j) * p**j * (1 - p) ** (n - j) for j in range(k + 1))


def nstr(x, digits=25):
    return mpmath.nstr(x, digits, min_fixed=-4, max_fixed=6)


def point_k(n, p, z):
    mu = n * mpf(p)
    sigma = mp.sqrt(mu * (1 - mpf(p)))
    return int(mp.nint(mu + z * sigma))


def quad_vs_sum():
    rows = []
    for n, p in ((1000, 0.3), (1000, 0.001), (10**4, 0.5), (10**4, 0.01)):
        for z in (-2.0, 0.0, 2.0):
            k = max(point_k(n, p, z), 0)
            a, b = binom_cdf(n, p, k), binom_cdf_sum(n, p, k)
            rows.append({"n": n, "p": p, "k": k, "cdf": nstr(b), "abs_diff": nstr(abs(a - b), 3)})
    for lam, j in ((50, 45), (1000, 1030)):
        a = poisson_cdf(mpf(lam), j)
        b = mp.gammainc(j + 1, lam, mp.inf, regularized=True)
        rows.append({"poisson_lam": lam, "j": j, "cdf": nstr(b), "abs_diff": nstr(abs(a - b), 3)})
    return rows


def cdf_points():
    from scipy import stats

    rows = []
    cells = [(n, p) for n in CDF_N for p in CDF_P if n * p * (1 - p) >= 25]
    for n, p in list(cells) + list(SMALL_MEAN_CELLS):
        for z in CDF_Z:
            k = point_k(n, p, z)
            if not 0 <= k < n:
                continue
            f = binom_cdf(n, p, k)
            boost = float(stats.binom.cdf(k, n, p))
            rows.append(
                {
                    "n": n,
                    "p": p,
                    "k": k,
                    "cdf": nstr(f),
                    "scipy_cdf": repr(boost),
                    "scipy_abs_err": nstr(abs(mpf(boost) - f), 3),
                }
            )
        print(f"cdf points n={n:.0e} p={p:g} done", flush=True)
    return rows


def expansion_checks():
    rows = []
    for p in EXPANSION_P:
        for sigma in EXPANSION_SIGMA:
            n = int(round(sigma * sigma / (p * (1 - p))))
            for z in EXPANSION_Z:
                k = point_k(n, p, z)
                rows.append({"n": n, "p": p, "k": k, "cdf": nstr(binom_cdf(n, p, k))})
    return rows


def refine(f, a, c, stop):
    """An integer maximum of a smooth unimodal f on [a, c], by golden-section search.

    The search stops when the bracket is narrower than ``stop`` integers and then takes the best
    of its ends and middle (every integer when it is at most 3 wide). D is smooth on the scale
    of sigma (its second difference is about D / sigma^2), so with ``stop`` = sigma 1e-4 the
    value found is within 1e-8 of the extreme, relatively.
    """
    golden = (mp.sqrt(5) - 1) / 2
    lo, hi = a, c
    while hi - lo > stop:
        x1 = hi - int(golden * (hi - lo))
        x2 = lo + int(golden * (hi - lo))
        if x1 >= x2:
            x2 = x1 + 1
        if f(x1) >= f(x2):
            hi = x2
        else:
            lo = x1
    candidates = range(lo, hi + 1) if hi - lo <= 3 else (lo, (lo + hi) // 2, hi)
    best = max(candidates, key=f)
    return best, f(best)


def worst_cell(n, p):
    """Worst-case errors of every method at (n, p) by sampling and golden-section refinement."""
    c = Cell(n, p)
    mu, sigma = c.mu, c.sigma
    cache_f = {}
    cache_g = {}

    def d(k, i):
        if k not in cache_f:
            cache_f[k] = binom_cdf(n, p, k)
        key = (k, i)
        if key not in cache_g:
            cache_g[key] = approximation(ALL_METHODS[i], k, c)
        return cache_f[k] - cache_g[key]

    ks = sorted({int(mp.nint(mu + t * sigma)) for t in SAMPLE_T})
    stop = max(3, int(sigma * mpf("1e-4")))
    out = []
    for i, method in enumerate(ALL_METHODS):
        found = {}
        for sign in (1, -1):
            vals = [sign * d(k, i) for k in ks]
            best_val, best_k = None, None
            for j in range(1, len(ks) - 1):
                if not (vals[j] >= vals[j - 1] and vals[j] >= vals[j + 1]):
                    continue
                k, v = refine(lambda k, s=sign, m=i: s * d(k, m), ks[j - 1], ks[j + 1], stop)
                if best_val is None or v > best_val:
                    best_val, best_k = v, k
            if best_val is None:  # monotone samples: take the best sample
                j = max(range(len(ks)), key=lambda j: vals[j])
                best_val, best_k = vals[j], ks[j]
            found[sign] = (sign * best_val, best_k)
        print(f"    {method}: {len(cache_f)} F values so far", flush=True)
        (d_max, k_max), (d_min, k_min) = found[1], found[-1]
        out.append(
            {
                "n": n,
                "p": p,
                "method": method,
                "interval": nstr(d_max - d_min, 20),
                "cdf": nstr(max(abs(d_max), abs(d_min)), 20),
                "d_max": nstr(d_max, 20),
                "d_min": nstr(d_min, 20),
                "k_max": k_max,
                "k_min": k_min,
                "t_max": float((k_max - mu) / sigma),
                "t_min": float((k_min - mu) / sigma),
            }
        )
    return out, len(cache_f)


def main(argv=None):
    here = os.path.dirname(os.path.abspath(__file__))
    default_out = os.path.join(here, os.pardir, "tests", "data", "large_n_references.json")
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--output", default=os.path.normpath(default_out))
    parser.add_argument("--skip-worst", action="store_true", help="only the CDF points")
    args = parser.parse_args(argv)
    mp.dps = DPS
    start = time.time()
    checks = quad_vs_sum()
    worst_check = max(mpf(r["abs_diff"]) for r in checks)
    print(f"quad vs exact sums: largest difference {mpmath.nstr(worst_check, 3)}", flush=True)
    if worst_check > mpf("1e-25"):
        raise RuntimeError("the Beta integral disagrees with the exact sums")
    points = cdf_points()
    expansion = expansion_checks()
    print(f"[{time.time() - start:.0f}s] cdf points and expansion checks done", flush=True)
    worst = []
    runs = []
    write(args.output, start, checks, points, expansion, worst, runs)
    if not args.skip_worst:
        for n, p in WORST_CELLS:
            t0 = time.time()
            rows, count = worst_cell(n, p)
            worst.extend(rows)
            runs.append({"n": n, "p": p, "cdf_evaluations": count})
            print(
                f"[{time.time() - start:.0f}s] worst n={n:.0e} p={p:g}: {count} F values "
                f"in {time.time() - t0:.0f}s",
                flush=True,
            )
            write(args.output, start, checks, points, expansion, worst, runs)
    print(f"wrote {args.output} in {time.time() - start:.0f}s")
    return 0


def write(path, start, checks, points, expansion, worst, runs):
    """Write everything computed so far (the file is complete after the last cell)."""
    import scipy

    payload = {
        "description": (
            "Binomial CDF values and worst-case errors at large n, computed in mpmath from the "
            "Beta integral of the CDF, independently of the atlas package. Decimal strings."
        ),
        "generated_by": "build_scripts/make_large_n_references.py",
        "mpmath_version": mpmath.__version__,
        "scipy_version_of_scipy_cdf": scipy.__version__,
        "python_version": platform.python_version(),
        "dps": DPS,
        "computation": {
            "exact_cdf": (
                "F(k) = integral_p^1 t^k (1-t)^(n-k-1) / B(k+1, n-k) dt by mpmath.quad, split at "
                f"mode + j sd, j in {list(SPLITS)}, cut at mode +- {CUT} sd"
            ),
            "search": (
                "D sampled at k = round(mu + t sigma), t = -7..7 step 1/2; each local extreme "
                "refined by golden section over the integers to a bracket of max(3, 1e-4 sigma)"
            ),
            "approximations": "mpmath formulas of build_scripts/make_reference_values.py",
            "p": "the exact binary value of the IEEE double p",
        },
        "elapsed_seconds": round(time.time() - start, 1),
        "quad_vs_sum": checks,
        "cdf_points": points,
        "expansion_checks": expansion,
        "worst": worst,
        "worst_runs": runs,
    }
    write_json_atomic(path, payload)


if __name__ == "__main__":
    sys.exit(main())
