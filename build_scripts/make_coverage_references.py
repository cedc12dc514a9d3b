"""Regenerate ``tests/data/coverage_references.json``: interval endpoints and coverages in mpmath.

The independent check on ``atlas.confidence``. Nothing here imports the ``atlas`` package: every
interval of the table in ``atlas/confidence.py`` (the definitions of issue 12, with Newcombe's
1998 method 4 for ``wilson_cc``) is computed again in mpmath at ``DPS`` digits:

* z = sqrt(2) erfinv(level) (the (1 + level)/2 normal quantile);
* closed forms (wald, wald_cc, wilson, wilson_cc, agresti_coull) evaluated directly;
* beta quantiles (jeffreys, clopper_pearson) by solving I_t(a, b) = q for t with mpmath's
  ``betainc(..., regularized=True)`` and the bracketing Illinois solver on [0, 1], checked to
  |I_t - q| < 1e-35;
* the coverage at (n, p), at p values at least 1e-9 away from every endpoint, as the sum of
  the binomial pmf over every x = 0..n whose closed interval contains p (membership tested for
  every x, no run assumed);
* the minimum coverage over a band by brute force: every endpoint inside the band splits it into
  pieces, the covering set of each piece is found by testing every x at the piece's midpoint, and
  C is evaluated at both ends of every piece with that set (the one-sided limits); the
  smallest is written. (That C has no interior minimum on a piece is the argument of
  ``atlas/confidence.py``; here it is also checked by evaluating C at 8 interior points of
  every piece and confirming none is lower.)

p and level are taken as the exact binary values of their IEEE doubles (mpf(float(p))). Run
from the repository root (about ten seconds)::

    .venv/bin/python build_scripts/make_coverage_references.py
"""

import os
import platform
import sys

import mpmath
from mpmath import mp, mpf

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from make_reference_values import write_json_atomic  # noqa: E402 - one atomic JSON writer

DPS = 40
SIG = 30
OUT = os.path.join("tests", "data", "coverage_references.json")
INTERVALS = (
    "wald",
    "wald_cc",
    "wilson",
    "wilson_cc",
    "agresti_coull",
    "jeffreys",
    "clopper_pearson",
)
ENDPOINT_CASES = [(n, level) for n in (1, 2, 5, 10, 17, 30) for level in ("0.9", "0.95", "0.99")]
COVERAGE_CASES = [
    (n, p, level)
    for n in (5, 10, 17, 30)
    for p in (0.0123, 0.0517, 0.1093, 0.2011, 0.3037, 0.5, 0.7719)
    for level in ("0.9", "0.95", "0.99")
]
BAND_CASES = [
    (10, 0.05, 0.5, "0.95"),
    (17, 0.1, 0.9, "0.95"),
    (30, 0.01, 0.3, "0.9"),
    (25, 0.2, 0.6, "0.99"),
]
# Brown, Cai and DasGupta (2001), Example 1: the Wald interval at p = 0.005.
LARGE_CASES = [(591, 0.005, "0.95", "wald"), (592, 0.005, "0.95", "wald")]


def z_of(level):
    return mp.sqrt(2) * mpmath.erfinv(mpf(float(level)))


def beta_quantile(a, b, q):
    f = lambda t: mpmath.betainc(a, b, 0, t, regularized=True) - q  # noqa: E731
    t = mp.findroot(f, (mpf(0), mpf(1)), solver="illinois", tol=mpf(10) ** (-2 * DPS + 10))
    assert abs(f(t)) < mpf("1e-35"), (a, b, q)
    return t


def endpoints(n, interval, level):
    z = z_of(level)
    z2 = z * z
    lev = mpf(float(level))
    los, his = [], []
    for x in range(n + 1):
        ph = mpf(x) / n
        if interval in ("wald", "wald_cc"):
            h = z * mp.sqrt(ph * (1 - ph) / n)
            c = mpf(1) / (2 * n) if interval == "wald_cc" else 0
            lo, hi = ph - h - c, ph + h + c
        elif interval == "wilson":
            centre = ph + z2 / (2 * n)
            h = z * mp.sqrt(ph * (1 - ph) / n + z2 / (4 * n * n))
            lo, hi = (centre - h) / (1 + z2 / n), (centre + h) / (1 + z2 / n)
        elif interval == "wilson_cc":
            q = 1 - ph
            if x == 0:
                lo = mpf(0)
            else:
                lo = (
                    2 * n * ph + z2 - 1 - z * mp.sqrt(z2 - 2 - mpf(1) / n + 4 * ph * (n * q + 1))
                ) / (2 * (n + z2))
            if x == n:
                hi = mpf(1)
            else:
                hi = (
                    2 * n * ph + z2 + 1 + z * mp.sqrt(z2 + 2 - mpf(1) / n + 4 * ph * (n * q - 1))
                ) / (2 * (n + z2))
        elif interval == "agresti_coull":
            nt = n + z2
            pt = (x + z2 / 2) / nt
            h = z * mp.sqrt(pt * (1 - pt) / nt)
            lo, hi = pt - h, pt + h
        elif interval == "jeffreys":
            a, b = x + mpf("0.5"), n - x + mpf("0.5")
            lo = mpf(0) if x == 0 else beta_quantile(a, b, (1 - lev) / 2)
            hi = mpf(1) if x == n else beta_quantile(a, b, (1 + lev) / 2)
        else:  # clopper_pearson
            lo = mpf(0) if x == 0 else beta_quantile(x, n - x + 1, (1 - lev) / 2)
            hi = mpf(1) if x == n else beta_quantile(x + 1, n - x, (1 + lev) / 2)
        los.append(lo)
        his.append(hi)
    return los, his


def pmf(x, n, p):
    return mpmath.binomial(n, x) * p**x * (1 - p) ** (n - x)


def covering(los, his, p):
    return [x for x in range(len(los)) if los[x] <= p <= his[x]]


def coverage(los, his, n, p):
    # A p on an endpoint would make the reference depend on how the endpoint rounds (1/(2n) is
    # exact here and not in float64): the cases are chosen to stay clear of every endpoint.
    gap = min(abs(e - p) for e in los + his)
    assert gap > mpf("1e-9"), (n, p, gap)
    return mp.fsum(pmf(x, n, p) for x in covering(los, his, p))


def band_minimum(los, his, n, p_lo, p_hi):
    cuts = sorted({p_lo, p_hi} | {e for e in los + his if p_lo < e < p_hi})
    best, where = None, None
    for left, right in zip(cuts[:-1], cuts[1:], strict=True):
        xs = covering(los, his, (left + right) / 2)
        value = lambda t, xs=xs: mp.fsum(pmf(x, n, t) for x in xs)  # noqa: E731
        ends = [(value(left), left), (value(right), right)]
        inside = min(value(left + (right - left) * k / 9) for k in range(1, 9))
        assert inside >= min(e[0] for e in ends) - mpf("1e-30"), (n, left, right)
        for v, t in ends:
            if best is None or v < best:
                best, where = v, t
    return best, where


def s(value):
    return mpmath.nstr(value, SIG, strip_zeros=False)


def main():
    mp.dps = DPS
    cache = {}

    def get(n, interval, level):
        key = (n, interval, level)
        if key not in cache:
            cache[key] = endpoints(n, interval, level)
        return cache[key]

    record = {
        "description": "Confidence-interval endpoints and coverages for a binomial p, "
        "recomputed in mpmath from the definitions (see the script's docstring).",
        "script": "build_scripts/make_coverage_references.py",
        "computation": __doc__,
        "mpmath_dps": DPS,
        "significant_digits": SIG,
        "mpmath": mpmath.__version__,
        "python": platform.python_version(),
        "endpoints": [],
        "coverage": [],
        "min_coverage": [],
    }
    for n, level in ENDPOINT_CASES:
        for interval in INTERVALS:
            los, his = get(n, interval, level)
            record["endpoints"].append(
                {
                    "n": n,
                    "level": float(level),
                    "interval": interval,
                    "lo": [s(v) for v in los],
                    "hi": [s(v) for v in his],
                }
            )
    for n, p, level in COVERAGE_CASES:
        for interval in INTERVALS:
            los, his = get(n, interval, level)
            record["coverage"].append(
                {
                    "n": n,
                    "p": p,
                    "level": float(level),
                    "interval": interval,
                    "coverage": s(coverage(los, his, n, mpf(p))),
                }
            )
    for n, p, level, interval in LARGE_CASES:
        los, his = get(n, interval, level)
        record["coverage"].append(
            {
                "n": n,
                "p": p,
                "level": float(level),
                "interval": interval,
                "coverage": s(coverage(los, his, n, mpf(p))),
            }
        )
    for n, p_lo, p_hi, level in BAND_CASES:
        for interval in INTERVALS:
            los, his = get(n, interval, level)
            value, where = band_minimum(los, his, n, mpf(p_lo), mpf(p_hi))
            record["min_coverage"].append(
                {
                    "n": n,
                    "p_lo": p_lo,
                    "p_hi": p_hi,
                    "level": float(level),
                    "interval": interval,
                    "min_coverage": s(value),
                    "p_worst": s(where),
                }
            )
        print(f"band n={n} done", file=sys.stderr)
    write_json_atomic(OUT, record)
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
