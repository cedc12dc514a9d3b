"""Tests of atlas.approximations: G(k) of every method against formulas, references and examples.

Sources are named beside each check: "mpmath reference" values come from
tests/data/reference_values.json, written by build_scripts/make_reference_values.py (40-digit
mpmath implementations of the formulas in REFERENCES.md, the project's reference notes; no code
shared with atlas).
"""

import json
import math
import pathlib
import re
from collections import defaultdict

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats

import atlas
from atlas.approximations import approximate_cdf

REFERENCE_FILE = pathlib.Path(__file__).parent / "data" / "reference_values.json"
REFERENCE = json.loads(REFERENCE_FILE.read_text()) if REFERENCE_FILE.exists() else None

# p = m / 2^20 keeps 1 - p exact in float64 (mirror identities hold up to rounding only)
dyadic_p = st.integers(1, 2**20 - 1).map(lambda m: m / 2**20)


def _spot_groups():
    if REFERENCE is None:
        return []
    groups = defaultdict(list)
    for row in REFERENCE["approximation_values"]:
        groups[(row["method"], row["n"], row["p"])].append(row)
    return [
        pytest.param(m, n, p, rows, id=f"{m}-n{n}-p{p}")
        for (m, n, p), rows in sorted(groups.items())
    ]


@pytest.mark.parametrize(("method", "n", "p", "rows"), _spot_groups())
def test_matches_mpmath_formulas(method, n, p, rows):
    # source: build_scripts/make_reference_values.py (mpmath, 40 digits; Poisson by the
    # regularized incomplete gamma function). Tolerance: float64 evaluation; in the far tails
    # Phi(x) amplifies the rounding of x by about |x|^2, hence rtol 5e-12 (observed <= 5.3e-13 at
    # G ~ 1e-196), atol 1e-14 (observed <= 4.4e-15).
    k = np.array([r["k"] for r in rows])
    ref = np.array([float(r["G"]) for r in rows])
    assert_allclose(approximate_cdf(k, n, p, method), ref, rtol=5e-12, atol=1e-14)


def test_output_shape_follows_k():
    # source: API contract, G(k) for an integer array k
    k = np.arange(-1, 11).reshape(3, 4)
    for method in atlas.METHODS:
        assert approximate_cdf(k, 10, 0.3, method).shape == (3, 4)


def test_unknown_method_rejected():
    # source: STYLE.md error wording
    valid = ", ".join(repr(m) for m in atlas.METHODS)
    with pytest.raises(
        ValueError, match=r"`method` must be one of " + re.escape(valid) + r"; got 'bogus'\."
    ):
        approximate_cdf(np.arange(3), 10, 0.5, "bogus")


# ------------------------------------------------------------------------------------------
# End values and the Poisson mirroring


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 10**6), p=st.floats(1e-9, 1 - 1e-9))
def test_camp_paulson_and_peizer_pratt_end_values(n, p):
    # source: REFERENCES.md, "G(n) = 1 exactly for methods that define G only for k < n", and
    # G(-1) = 0 (API contract)
    for method in ("camp_paulson", "peizer_pratt"):
        g = approximate_cdf(np.array([-1, n]), n, p, method)
        assert g[0] == 0.0 and g[1] == 1.0


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 5000), p=st.floats(1e-6, 1 - 1e-6))
@example(n=5000, p=0.45505864563318077)  # found by hypothesis in CI: the far lower tail
def test_poisson_definition(n, p):
    # source: REFERENCES.md, "Poisson(np) CDF at k; for p > 1/2 apply it to the count of failures,
    # n - X" (common practice): G(k) = P(Y >= n - k), Y ~ Poisson(n q). Checked against
    # scipy.stats.poisson. For p <= 1/2 the same call, but scipy gets the mean n p rounded to
    # float64 while G uses the exact product (G(mean) = G(rounded) - error pmf): relative 1e-13
    # covers ulp(n p)/2 times pmf/G in the lower tail (1.1e-14 seen). For p > 1/2 this test takes
    # the failures' mean as n (1 - p), exact to rounding; a mean formed as n - n p (as the
    # engine does) is off by up to ulp(n p)/2 <= 1.2e-16 n, which moves G by at most that times
    # the largest Poisson pmf (<= 1): atol 2.3e-16 n. (Relative agreement in the far tails is
    # then lost, e.g. 1e-9 at n = 9, p = 0.999999, G ~ 1e-57.)
    k = np.arange(-1, n + 1)
    g = approximate_cdf(k, n, p, "poisson")
    if p <= 0.5:
        assert g[0] == 0.0
        # In the far lower tail the CDF is about the pmf at k, whose relative change with the
        # mean is (k / mu - 1) d mu; with d mu <= ulp(mu) / 2 that is |k - mu| 2^-53 (1.25e-13
        # seen at n = 5000, p = 0.455, k = 786, G ~ 8e-287).
        mu = n * p
        rtol = 1e-13 + np.abs(k - mu) * 2.0**-53 * 2
        want = stats.poisson.cdf(k, mu)
        assert np.all(np.abs(g - want) <= rtol * np.abs(want) + 1e-300)
    else:
        assert g[-1] == 1.0
        assert_allclose(g, stats.poisson.sf(n - k - 1, n * (1 - p)), rtol=1e-13, atol=2.3e-16 * n)


def test_poisson_at_one_half_uses_successes():
    # source: API contract, "G(-1) = 0 when p <= 1/2"
    k = np.arange(-1, 21)
    assert_allclose(approximate_cdf(k, 20, 0.5, "poisson"), stats.poisson.cdf(k, 10.0), rtol=1e-14)


# ------------------------------------------------------------------------------------------
# Structure of the formulas


# Mirror identity G(k; n, p) = 1 - G(n-1-k; n, 1-p): z -> -z for the continuity-corrected normal
# and Edgeworth forms (He3, He5 and z phi(z) are odd, g1^2 and g2 even in q - p), d -> -d with
# S <-> T for Peizer-Pratt, r -> 1/r with a <-> b for Camp-Paulson, and by construction for the
# mirrored Poisson. Tolerances: float64 rounding; Peizer-Pratt's d = k + 2/3 - (n + 1/3) p cancels
# to |d| and loses about log10(n / |d|) digits (observed 7.6e-14 at n = 1317, k = n - 1).
MIRROR_ATOL = {
    "normal_cc": 1e-15,
    "edgeworth_cc": 1e-15,
    "edgeworth2_cc": 1e-15,
    "camp_paulson": 1e-13,
    "peizer_pratt": 1e-11,
    "poisson": 1e-15,
}


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 3000), p=dyadic_p, method=st.sampled_from(sorted(MIRROR_ATOL)))
def test_mirror_identity(n, p, method):
    # source: algebra of the REFERENCES.md formulas (see MIRROR_ATOL)
    k = np.arange(-1, n + 1)
    total = approximate_cdf(k, n, p, method) + approximate_cdf(n - 1 - k, n, 1 - p, method)
    assert_allclose(total, 1.0, rtol=0, atol=MIRROR_ATOL[method])


@settings(max_examples=30, deadline=None)
@given(
    n=st.integers(1, 5000),
    p=st.floats(1e-6, 1 - 1e-6),
    method=st.sampled_from(["normal_cc", "normal", "poisson"]),
)
def test_monotone_in_k(n, p, method):
    # source: each is a CDF (normal or Poisson) of an argument increasing in k
    g = approximate_cdf(np.arange(-1, n + 1), n, p, method)
    assert np.all(np.diff(g) >= 0)


@settings(max_examples=20, deadline=None)
@given(n=st.integers(1, 5000))
def test_edgeworth_equals_normal_cc_at_one_half(n):
    # source: REFERENCES.md formulas: the skewness q - p vanishes at p = 1/2
    k = np.arange(-1, n + 1)
    assert_array_equal(
        approximate_cdf(k, n, 0.5, "edgeworth_cc"), approximate_cdf(k, n, 0.5, "normal_cc")
    )


def test_edgeworth2_lattice_term():
    # source: REFERENCES.md, edgeworth2_cc row: "CDF error at n=100, p=0.5 is 3.97e-4 without it,
    # 2.77e-6 with it" (computed, regression values; half a unit in the last printed digit).
    # The lattice term is z phi(z) / (24 sigma^2).
    n, p = 100, 0.5
    k = np.arange(0, n + 1)
    sigma = math.sqrt(n * p * (1 - p))
    z = (k + 0.5 - n * p) / sigma
    with_term = approximate_cdf(k, n, p, "edgeworth2_cc")
    without = with_term - z * stats.norm.pdf(z) / (24 * sigma**2)
    exact = stats.binom.cdf(k, n, p)
    assert_allclose(np.abs(exact - with_term).max(), 2.77e-6, atol=5e-9)
    assert_allclose(np.abs(exact - without).max(), 3.97e-4, atol=5e-7)


# ------------------------------------------------------------------------------------------
# Worked examples (REFERENCES.md; textbook figures from memory)


def _interval(n, p, a, b, method):
    """The approximation to P(a <= X <= b) as a textbook forms it: a lower tail P(X <= b) is
    G(b), an upper tail P(X >= a) is 1 - G(a - 1), anything else G(b) - G(a - 1).

    (For a = 0 the atlas's interval definition uses G(b) - G(-1), which for the normal curve
    also drops the mass below -1/2; the textbook figures do not.)
    """
    upper = 1.0 if b == n else float(approximate_cdf(np.array([b]), n, p, method)[0])
    lower = 0.0 if a == 0 else float(approximate_cdf(np.array([a - 1]), n, p, method)[0])
    return upper - lower


WORKED = [
    # (n, p, a, b, exact (REFERENCES.md), normal_cc (REFERENCES.md))
    (50, 0.1, 0, 2, 0.111729, 0.119296),  # Bin(50, 0.1), P(X <= 2)
    (40, 0.5, 20, 20, 0.125371, 0.125633),  # Bin(40, 0.5), P(X = 20)
    (450, 0.3, 151, 450, 0.056517, 0.055416),  # Bin(450, 0.3), P(X >= 151)
]


@pytest.mark.parametrize(("n", "p", "a", "b", "exact", "approx"), WORKED)
def test_worked_examples(n, p, a, b, exact, approx):
    # source: REFERENCES.md worked examples, unrounded values to 6 decimals (tolerance half a unit)
    got_exact = stats.binom.cdf(b, n, p) - stats.binom.cdf(a - 1, n, p)
    assert_allclose(got_exact, exact, atol=5e-7)
    assert_allclose(_interval(n, p, a, b, "normal_cc"), approx, atol=5e-7)


def test_worked_examples_against_mpmath():
    # source: build_scripts/make_reference_values.py (mpmath, 40 digits); float64 tolerance 1e-14
    for row in REFERENCE["worked_examples"]:
        n, p, a, b = row["n"], row["p"], row["a"], row["b"]
        got_exact = stats.binom.cdf(b, n, p) - stats.binom.cdf(a - 1, n, p)
        assert_allclose(got_exact, float(row["exact"]), rtol=0, atol=1e-14, err_msg=row["case"])
        assert_allclose(
            _interval(n, p, a, b, "normal_cc"), float(row["normal_cc"]), rtol=0, atol=1e-14
        )


def test_worked_examples_printed_figures():
    # source: textbook figures as recalled in REFERENCES.md (memory): Montgomery & Runger print
    # 0.112 and 0.119 for Bin(50, 0.1), P(X <= 2); Ross prints 0.1254 (exact) and 0.1272 for
    # Bin(40, 0.5), P(X = 20), and 0.0559 for Bin(450, 0.3), P(X >= 151). The exact values and
    # Montgomery's normal figure round to the printed digits; Ross's normal figures come from a
    # z table: z rounded to two decimals, Phi to four.
    assert round(float(stats.binom.cdf(2, 50, 0.1)), 3) == 0.112
    assert round(float(_interval(50, 0.1, 0, 2, "normal_cc")), 3) == 0.119
    assert round(float(stats.binom.pmf(20, 40, 0.5)), 4) == 0.1254

    def table_phi(z):
        return round(float(stats.norm.cdf(round(z, 2))), 4)

    z = 0.5 / math.sqrt(10)  # (20.5 - 20) / sqrt(40 * 0.25)
    assert round(table_phi(z) - table_phi(-z), 4) == 0.1272
    z = (150.5 - 135) / math.sqrt(94.5)  # (150.5 - 450 * 0.3) / sqrt(450 * 0.3 * 0.7)
    assert round(1 - table_phi(z), 4) == 0.0559


@pytest.mark.parametrize("n, p", [(50, 0.3), (2000, 0.01), (2000, 0.97), (10**6, 1e-4)])
def test_peizer_pratt_parts_are_monotone_in_k(n, p):
    # The engine bounds peizer_pratt's G outside a core from the parts at a range's ends: d
    # rises with k, g(S/(n p)) and g(T/(n q)) fall (g falls: the proof in peizer_pratt_parts).
    # Checked at every k to n - 1 (to 5000 at n = 10^6), and the parts give the score.
    from atlas.approximations import peizer_pratt_parts, peizer_pratt_score

    k = np.arange(0, min(n, 5000))
    d, g1, g2 = peizer_pratt_parts(k, n, p)
    assert (np.diff(d) > 0).all()
    assert (np.diff(g1) < 0).all() and (np.diff(g2) > 0).all()  # T/(n q) falls as k rises
    q = 1.0 - p
    spread = (1.0 + q * g1 + p * g2) / ((n + 1.0 / 6.0) * p * q)
    assert_allclose(d * np.sqrt(spread), peizer_pratt_score(k, n, p), rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("n, p", [(50, 0.3), (2000, 0.01), (2000, 0.97), (1680, 2.6e-4)])
def test_camp_paulson_parts_are_monotone_in_k(n, p):
    # The engine's bounds outside a core rest on these: the numerator, r^(1/3) and a rise with k,
    # b falls; the score they give need not be monotone (n = 1680, p = 2.6e-4 falls near k = n:
    # computed, found by a random search over n and p).
    from atlas.approximations import camp_paulson_parts, camp_paulson_score

    k = np.arange(0, n)
    numerator, b, r3, a = camp_paulson_parts(k, n, p)
    assert (np.diff(numerator) > 0).all() and (np.diff(r3) > 0).all()
    assert (np.diff(a) > 0).all() and (np.diff(b) < 0).all()
    assert_array_equal(numerator / np.sqrt(b * r3 * r3 + a), camp_paulson_score(k, n, p))
    if p < 1e-3:
        assert (np.diff(camp_paulson_score(k, n, p)) < 0).any()


def test_peizer_pratt_series_same_in_python_floats_and_numpy():
    # A few points take the series in Python floats (_PP_SCALAR), more in numpy: the same Horner
    # steps in IEEE double, so the same bits (1 - t within 1/4 of 0, both signs).
    from atlas import approximations

    rng = np.random.default_rng(3)
    t = 1.0 - rng.uniform(-0.25, 0.25, 20_000)
    whole = approximations._pp_g(t)
    assert t.size > approximations._PP_SCALAR
    pieces = np.concatenate([approximations._pp_g(t[i : i + 8]) for i in range(0, t.size, 8)])
    np.testing.assert_array_equal(pieces, whole)
