"""Tests of atlas.confidence: interval endpoints, coverage and its exact minimum over a band.

Sources of the expected values, named beside each check:

- "mpmath reference": tests/data/coverage_references.json, written by
  build_scripts/make_coverage_references.py (40-digit mpmath, every interval recomputed from its
  definition, coverage summed over every x by testing membership, the band minimum found by
  brute force over every piece; no code shared with atlas).
- "BCD 2001": Brown, Cai and DasGupta (2001), Interval estimation for a binomial proportion,
  Statistical Science 16(2), 101-133. The p = 0.005 figures are quoted in issue 12; the others
  are recalled from the paper ("memory"), given to the three digits the paper prints.
- Theorems: Clopper-Pearson coverage is never below the nominal level (Clopper and Pearson
  1934; it inverts two one-sided exact tests of size (1 - level)/2 each).
"""

import json
import pathlib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import integrate, stats

import atlas
from atlas import confidence
from atlas.confidence import INTERVALS, coverage, expected_width, mean_width, min_coverage

REFERENCE = json.loads(
    (pathlib.Path(__file__).parent / "data" / "coverage_references.json").read_text()
)
SYMMETRIC = INTERVALS  # every interval of the table satisfies lo(x) = 1 - hi(n - x)


def _brute_coverage(n, p, interval, level=0.95):
    """C(n, p) summed over every x = 0..n, membership tested for each (no run assumed)."""
    lo, hi = confidence.interval_endpoints(n, interval=interval, level=level)
    x = np.arange(n + 1)
    covers = (lo <= p) & (p <= hi)
    return float(stats.binom.pmf(x[covers], n, p).sum())


# --- reference values ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "case", REFERENCE["endpoints"], ids=lambda c: f"{c['interval']}-n{c['n']}-{c['level']}"
)
def test_endpoints_match_mpmath(case):
    # mpmath reference; 1e-13 absolute covers float64 rounding of the closed forms and of
    # Boost's incomplete-beta inverse for n <= 30.
    lo, hi = confidence.interval_endpoints(
        case["n"], interval=case["interval"], level=case["level"]
    )
    assert_allclose(lo, [float(v) for v in case["lo"]], rtol=0, atol=1e-13)
    assert_allclose(hi, [float(v) for v in case["hi"]], rtol=0, atol=1e-13)


def test_coverage_matches_mpmath():
    # mpmath reference; 1e-13 absolute: a sum of at most 31 pmf terms, each to ~1e-16.
    for case in REFERENCE["coverage"]:
        got = coverage(case["n"], case["p"], interval=case["interval"], level=case["level"])
        assert abs(got - float(case["coverage"])) < 1e-13, case


def test_min_coverage_matches_mpmath_brute_force():
    # mpmath reference: brute-force minimum over every piece between endpoints, both ends.
    for case in REFERENCE["min_coverage"]:
        got = min_coverage(
            case["n"],
            case["p_lo"],
            case["p_hi"],
            interval=case["interval"],
            level=case["level"],
            detail=True,
        )
        assert abs(got.value - float(case["min_coverage"])) < 1e-13, case
        # A band symmetric about 1/2 has its worst p twice (p and 1 - p): either will do.
        worst = float(case["p_worst"])
        symmetric = case["p_lo"] + case["p_hi"] == 1.0
        assert min(abs(got.p - worst), abs(got.p - (1 - worst)) if symmetric else 1) < 1e-13, case


def test_wald_at_p_0005_brown_cai_dasgupta():
    # BCD 2001, Example 1 (quoted in issue 12): the nominal 95% Wald interval at p = 0.005
    # covers 0.945 at n = 591 and 0.792 at n = 592. Printed to 3 digits, hence 5e-4.
    assert abs(coverage(591, 0.005) - 0.945) < 5e-4
    assert abs(coverage(592, 0.005) - 0.792) < 5e-4
    # And to 1e-12 against the mpmath reference (the same cells, 30 digits).
    refs = {c["n"]: float(c["coverage"]) for c in REFERENCE["coverage"] if c["n"] in (591, 592)}
    assert_allclose(coverage([591, 592], 0.005), [refs[591], refs[592]], rtol=0, atol=1e-12)


def test_wald_other_values_brown_cai_dasgupta():
    # BCD 2001 (memory): at p = 0.5 the 95% Wald interval covers 0.919 at n = 40 (Example 2);
    # at p = 0.2 it covers 0.946 at n = 30 (Example 3). Three printed digits, hence 5e-4.
    assert abs(coverage(40, 0.5) - 0.919) < 5e-4
    assert abs(coverage(30, 0.2) - 0.946) < 5e-4


def test_wald_coverage_is_not_monotone_in_n():
    # BCD 2001's point (the p = 0.005 example above): a larger n can cover much less.
    assert coverage(592, 0.005) < coverage(591, 0.005) - 0.1


def test_clopper_pearson_never_below_nominal():
    # Theorem (Clopper and Pearson 1934): the exact interval covers at least the nominal level
    # at every n and p. 1e-12 allows for float64 rounding of the sum.
    ns = np.arange(1, 151)
    ps = np.linspace(0.001, 0.999, 499)
    for level in (0.9, 0.95, 0.99):
        values = coverage(ns[:, None], ps[None, :], interval="clopper_pearson", level=level)
        assert values.min() >= level - 1e-12
        # Its exact minimum over a wide band too, which sampling cannot promise.
        mins = min_coverage(ns[::7], 0.001, 0.999, interval="clopper_pearson", level=level)
        assert mins.min() >= level - 1e-12


# --- the run lemma and the fast paths -----------------------------------------------------------


@pytest.mark.parametrize("interval", INTERVALS)
def test_covering_x_form_one_run(interval):
    # The module's lemma on the computed endpoints: for every p in (0, 1), {x: lo(x) <= p} is an
    # initial run and {x: hi(x) >= p} a final run. Equivalently, every lo(x) is at most
    # max(lo(y), 0) for y > x, and every hi(x) at least min(hi(y), 1) for y < x; and lo <= hi.
    for level in (0.5, 0.8, 0.9, 0.95, 0.99, 0.999):
        for n in [*range(1, 121), 250, 1000, 4999, 20000]:
            lo, hi = confidence.interval_endpoints(n, interval=interval, level=level)
            assert np.all(np.maximum.accumulate(lo) <= np.maximum(lo, 0.0)), (n, level)
            assert np.all(np.minimum.accumulate(hi[::-1])[::-1] >= np.minimum(hi, 1.0)), (n, level)
            assert np.all(lo <= hi) and np.isfinite(lo).all() and np.isfinite(hi).all()


@pytest.mark.parametrize("interval", INTERVALS)
def test_coverage_equals_the_sum_over_every_x(interval):
    # Bisection over x against membership tested for every x (scipy.stats.binom.pmf).
    rng = np.random.default_rng(12)
    for n in (1, 2, 3, 7, 40, 333, 2000):
        for p in rng.uniform(0.0005, 0.9995, 25):
            assert abs(coverage(n, p, interval=interval) - _brute_coverage(n, p, interval)) < 1e-12


@pytest.mark.parametrize("interval", ["wald", "wilson", "agresti_coull"])
def test_coverage_at_large_n_equals_the_full_sum(interval):
    n = 200_000
    for p in (1e-4, 0.03, 0.5):
        assert abs(coverage(n, p, interval=interval) - _brute_coverage(n, p, interval)) < 1e-11


def test_coverage_at_an_endpoint_counts_the_closed_interval():
    # p exactly at hi(x) is covered by x: the Wilson interval at n = 10, x = 3 ends at hi(3).
    lo, hi = confidence.interval_endpoints(10, interval="wilson")
    p = float(hi[3])
    first, last = confidence.covering_run(10, p, interval="wilson")
    assert int(first) == 3
    assert abs(coverage(10, p, interval="wilson") - _brute_coverage(10, p, "wilson")) < 1e-15
    assert coverage(10, np.nextafter(p, 1.0), interval="wilson") < coverage(
        10, p, interval="wilson"
    )


def test_a_tie_is_decided_by_the_float64_endpoint():
    # wald_cc at n = 5: hi(0) = 1/(2n) evaluates to the double 0.1, so p = 0.1 is covered by x = 0
    # (closed intervals), as for p = 1/10 exactly; the mpmath references avoid such ties.
    _, hi = confidence.interval_endpoints(5, interval="wald_cc")
    assert hi[0] == 0.1
    assert confidence.covering_run(5, 0.1, interval="wald_cc")[0] == 0
    # x = 0..3 cover (lo(3) = 0.0706 <= 0.1 < lo(4)): 1 - 5 (0.1^4) 0.9 - 0.1^5 = 0.99954
    # (arithmetic).
    assert abs(coverage(5, 0.1, interval="wald_cc") - 0.99954) < 1e-15


def test_coverage_broadcasts():
    values = coverage(np.array([[10], [20], [30]]), np.array([0.1, 0.5]), interval="jeffreys")
    assert values.shape == (3, 2)
    assert values[1, 1] == coverage(20, 0.5, interval="jeffreys")
    assert isinstance(coverage(10, 0.1), float)


def test_endpoint_table_values():
    # Definitions of the table: wald_cc is the Wald interval widened by 1/(2n); Wald at x = 0 is
    # [0, 0]; jeffreys, clopper_pearson and the score intervals have lo(0) = 0 and hi(n) = 1.
    lo, hi = confidence.interval_endpoints(25, interval="wald")
    lo_cc, hi_cc = confidence.interval_endpoints(25, interval="wald_cc")
    assert_allclose(lo - lo_cc, 1 / 50, rtol=1e-12)
    assert_allclose(hi_cc - hi, 1 / 50, rtol=1e-12)
    assert (lo[0], hi[0]) == (0.0, 0.0)
    for interval in ("wilson", "wilson_cc", "jeffreys", "clopper_pearson"):
        lo, hi = confidence.interval_endpoints(25, interval=interval)
        assert lo[0] == 0.0 and hi[-1] == 1.0, interval
    # Not clipped: Agresti-Coull's lo(0) is below 0 (the definition has no clipping).
    lo, _ = confidence.interval_endpoints(25, interval="agresti_coull")
    assert lo[0] < 0


# --- the exact minimum --------------------------------------------------------------------------


@pytest.mark.parametrize("interval", INTERVALS)
def test_min_coverage_is_the_limit_at_the_worst_p(interval):
    # The infimum is approached at m.p from the side it names: C one ulp-scale step away on that
    # side is within the slope times the step; and no sample of the band is lower.
    for n, p_lo, p_hi in ((40, 0.05, 0.5), (7, 0.01, 0.99), (300, 0.2, 0.21)):
        m = min_coverage(n, p_lo, p_hi, interval=interval, detail=True)
        step = {"from below": -1e-11, "from above": 1e-11, "attained": 0.0}[m.approach]
        near = coverage(n, m.p + step, interval=interval)
        assert abs(near - m.value) < 1e-7 * max(n, 10)
        ps = np.linspace(p_lo, p_hi, 4001)
        assert coverage(n, ps, interval=interval).min() >= m.value - 1e-12


def test_min_coverage_of_wilson_at_40_band():
    # computed, regression value (README example); the mpmath brute force agrees at n = 10.
    m = min_coverage(40, 0.05, 0.5, interval="wilson", detail=True)
    assert abs(m.value - 0.92776445354699) < 1e-12
    assert m.approach == "from below" and (m.first, m.last) == (4, 12)


def test_min_coverage_degenerate_and_empty_bands():
    # A band of one p is the coverage there; Wald's x = 0 interval [0, 0] covers no p > 0.
    assert min_coverage(30, 0.2, 0.2, interval="wilson") == coverage(30, 0.2, interval="wilson")
    assert min_coverage(1, 0.001, 0.002, interval="wald") == 0.0


def test_min_coverage_broadcasts():
    values = min_coverage([10, 20, 30], 0.05, [0.5, 0.6, 0.7], interval="wilson")
    assert values.shape == (3,)
    assert values[2] == min_coverage(30, 0.05, 0.7, interval="wilson")


# --- properties ---------------------------------------------------------------------------------

_interval = st.sampled_from(INTERVALS)
_level = st.sampled_from([0.8, 0.9, 0.95, 0.99])
_p = st.floats(0.001, 0.999)


@settings(max_examples=150, deadline=None)
@given(n=st.integers(1, 400), p=_p, interval=_interval, level=_level)
def test_coverage_symmetric_in_p(n, p, interval, level):
    # lo(x) = 1 - hi(n - x) for every interval of the table, so C(n, p) = C(n, 1 - p) (up to
    # float64 rounding of the endpoints, which matters only at p exactly on an endpoint).
    a = coverage(n, p, interval=interval, level=level)
    b = coverage(n, 1 - p, interval=interval, level=level)
    assert abs(a - b) < 1e-12 or abs(_brute_coverage(n, p, interval, level) - a) < 1e-12


@settings(max_examples=100, deadline=None)
@given(n=st.integers(1, 300), a=_p, b=_p, c=st.floats(0, 1), interval=_interval, level=_level)
def test_min_coverage_is_a_lower_bound_and_splits(n, a, b, c, interval, level):
    p_lo, p_hi = min(a, b), max(a, b)
    p_mid = p_lo + c * (p_hi - p_lo)
    whole = min_coverage(n, p_lo, p_hi, interval=interval, level=level)
    assert whole <= coverage(n, p_mid, interval=interval, level=level) + 1e-15
    left = min_coverage(n, p_lo, p_mid, interval=interval, level=level)
    right = min_coverage(n, p_mid, p_hi, interval=interval, level=level)
    assert abs(whole - min(left, right)) < 1e-14


# --- widths -------------------------------------------------------------------------------------


@pytest.mark.parametrize("interval", INTERVALS)
def test_expected_width_is_the_pmf_weighted_sum(interval):
    for n, p in ((1, 0.3), (25, 0.07), (400, 0.6)):
        lo, hi = confidence.interval_endpoints(n, interval=interval)
        direct = float(stats.binom.pmf(np.arange(n + 1), n, p) @ (hi - lo))
        assert abs(expected_width(n, p, interval=interval) - direct) < 1e-13


def test_expected_width_beyond_the_full_sum_window():
    # n > 20 000 sums mu +- (12 sigma + 12) only; against the full sum.
    n, p = 30_000, 0.01
    lo, hi = confidence.interval_endpoints(n, interval="wilson")
    direct = float(stats.binom.pmf(np.arange(n + 1), n, p) @ (hi - lo))
    assert abs(expected_width(n, p, interval="wilson") - direct) < 1e-14


def test_mean_width_is_the_band_average():
    # The closed form against numerical quadrature of expected_width over the band.
    for interval in ("wald", "clopper_pearson"):
        quad, _ = integrate.quad(
            lambda p, i=interval: expected_width(30, p, interval=i),
            0.1,
            0.4,
            epsabs=1e-12,
            limit=200,
        )
        assert abs(mean_width(30, 0.1, 0.4, interval=interval) - quad / 0.3) < 1e-9
    assert mean_width(30, 0.2, 0.2) == expected_width(30, 0.2)


def test_wider_intervals_cost_width():
    # Clopper-Pearson is wider than Wilson on average (the price of its guarantee).
    assert mean_width(50, 0.05, 0.5, interval="clopper_pearson") > mean_width(
        50, 0.05, 0.5, interval="wilson"
    )


# --- errors -------------------------------------------------------------------------------------


def test_errors_name_the_argument():
    names = (
        "'wald', 'wald_cc', 'wilson', 'wilson_cc', 'agresti_coull', 'jeffreys', 'clopper_pearson'"
    )
    with pytest.raises(ValueError, match=rf"^`interval` must be one of {names}; got 'bogus'\.$"):
        coverage(10, 0.1, interval="bogus")
    with pytest.raises(
        ValueError, match=r"^`level` must be in the open interval \(0, 1\); got 1\.5\.$"
    ):
        coverage(10, 0.1, level=1.5)
    with pytest.raises(
        ValueError, match=r"^`level` must be in the open interval \(0, 1\); got 'x'\.$"
    ):
        min_coverage(10, 0.1, 0.2, level="x")
    with pytest.raises(ValueError, match=r"^`n` must be an integer >= 1; got 0\.$"):
        coverage(0, 0.1)
    with pytest.raises(ValueError, match=r"^`n` must be an integer >= 1; got 2\.5\.$"):
        expected_width([3, 2.5], 0.1)
    with pytest.raises(
        ValueError, match=r"^`p` must be in the open interval \(0, 1\); got 1\.5\.$"
    ):
        coverage(10, 1.5)
    with pytest.raises(
        ValueError, match=r"^`p_hi` must be in the open interval \(0, 1\); got 1\.0\.$"
    ):
        min_coverage(10, 0.1, 1.0)
    with pytest.raises(
        ValueError, match=r"^`p_lo` must be <= `p_hi`; got p_lo=0\.5 > p_hi=0\.2\.$"
    ):
        min_coverage(10, 0.5, 0.2)
    with pytest.raises(
        ValueError, match=r"^`p_lo` must be <= `p_hi`; got p_lo=0\.5 > p_hi=0\.2\.$"
    ):
        mean_width(10, 0.5, 0.2)
    with pytest.raises(ValueError, match=r"^`n` must be a single integer with detail=True"):
        min_coverage([10, 20], 0.1, 0.2, detail=True)


def test_public_names():
    assert atlas.coverage is coverage and atlas.min_coverage is min_coverage
    assert atlas.INTERVALS == INTERVALS
