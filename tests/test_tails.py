"""Tests of atlas.tails (tail relative error) and atlas.complements (upper tails of each method).

Sources of the expected values, named beside each check:

- "by hand": small cases worked in the comments from the definitions (issue 11, the project's
  contract) with Phi written through math.erfc.
- "mpmath reference": tests/data/tail_references.json, written by
  build_scripts/make_tail_references.py (40-digit mpmath, every k = 0..n, no code of atlas).
- "issue 11": the figures quoted in the issue, computed to its definitions (not published).
- "every k": the definition evaluated at every count with scipy.stats.binom and the method's
  formula (no window, no shortcut).
"""

import json
import math
import pathlib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import stats

import atlas
from atlas import tail_error
from atlas.approximations import METHODS, approximate_cdf
from atlas.complements import approximate_upper
from atlas.tails import FLOOR, Side, cell_tail_errors

REFERENCE_FILE = pathlib.Path(__file__).parent / "data" / "tail_references.json"
REFERENCE = json.loads(REFERENCE_FILE.read_text())

# |computed - reference| <= REL (1 + reference): the returned error's documented accuracy,
# (1 + r) 1e-12 (module notes of atlas.tails), with room for the float64 formulas.
REL = 1e-10


def _phi_cdf(x):
    """Phi(x) through erfc, for the hand-worked cases."""
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def every_k(n, p, alpha, method):
    """lower(alpha), upper(alpha) by the definition at every k (scipy.stats.binom)."""
    k = np.arange(n + 1)
    low = stats.binom.cdf(k, n, p)
    up = np.where(k == 0, 1.0, stats.binom.sf(np.maximum(k - 1, 0), n, p))
    g = approximate_cdf(k, n, p, method)
    gu = approximate_upper(k, n, p, method)
    with np.errstate(divide="ignore", invalid="ignore"):  # tails that underflow: not admitted
        return (
            np.abs(g / low - 1.0)[low >= alpha].max(),
            np.abs(gu / up - 1.0)[up >= alpha].max(),
        )


# --- hand-checkable cases -------------------------------------------------------------------


def test_one_trial_by_hand():
    # n = 1, p = 1/2, normal_cc: mu = 1/2, sigma = 1/2, z(k) = (k + 1/2 - 1/2) / (1/2) = 2k.
    # Lower: L(0) = 1/2, G(0) = Phi(0) = 1/2 (r = 0); L(1) = 1, G(1) = Phi(2) (r = 1 - Phi(2)).
    # Upper: U(0) = 1, 1 - G(-1) = 1 - Phi(-2) = Phi(2) (r = 1 - Phi(2)); U(1) = 1/2,
    # 1 - G(0) = 1/2 (r = 0). Every level below 1 admits k = 1 (lower) and k = 0 (upper).
    expected = 1.0 - _phi_cdf(2.0)  # by hand
    for alpha in (0.01, 0.5, 0.9):
        for tail in ("lower", "upper", "both"):
            assert_allclose(tail_error(1, 0.5, alpha, tail=tail), expected, rtol=1e-14)


def test_two_trials_by_hand():
    # n = 2, p = 1/2, normal_cc: mu = 1, sigma = 1/sqrt 2, z(k) = (k - 1/2) sqrt 2.
    # L = 1/4, 3/4, 1; G = Phi(-1/sqrt 2), Phi(1/sqrt 2), Phi(3/sqrt 2).
    # r(0) = 1 - 4 Phi(-0.7071) = 0.0410, r(1) = (4/3) Phi(0.7071) - 1 = 0.0137,
    # r(2) = 1 - Phi(2.1213) = 0.0169. alpha = 0.2 admits all three; 1/4 < alpha <= 3/4
    # leaves k = 1, 2.
    s = 1.0 / math.sqrt(2.0)
    r0 = 1.0 - 4.0 * _phi_cdf(-s)
    r1 = 4.0 / 3.0 * _phi_cdf(s) - 1.0
    r2 = 1.0 - _phi_cdf(3.0 * s)
    assert_allclose(tail_error(2, 0.5, 0.2, tail="lower"), max(r0, r1, r2), rtol=1e-13)
    assert_allclose(tail_error(2, 0.5, 0.3, tail="lower"), max(r1, r2), rtol=1e-13)
    # p = 1/2 and normal_cc are symmetric: the upper tails give the same numbers.
    assert_allclose(tail_error(2, 0.5, 0.3, tail="upper"), max(r1, r2), rtol=1e-13)


def test_three_trials_upper_by_hand():
    # n = 3, p = 0.2: b = 0.512, 0.384, 0.096, 0.008; U(k) = 1, 0.488, 0.104, 0.008.
    # normal_cc: mu = 0.6, sigma = sqrt(0.48); 1 - G(k - 1) = Phi(-(k - 1/2 - 0.6) / sigma).
    # At alpha = 0.1 the upper tails admitted are k = 0, 1, 2 (U(3) = 0.008 < 0.1).
    sigma = math.sqrt(0.48)
    u = [1.0, 0.488, 0.104]
    r = [abs(_phi_cdf(-(k - 0.5 - 0.6) / sigma) / u[k] - 1.0) for k in range(3)]
    assert_allclose(tail_error(3, 0.2, 0.1, tail="upper"), max(r), rtol=1e-12)


# --- the issue's figure ---------------------------------------------------------------------


def test_issue_figure_lower_tail():
    # issue 11: at n = 100, p = 0.1 normal_cc gives 0.0062 for P(X <= 2) = 0.0019, relative
    # error 2.19 among the tails of at least 0.001; the mpmath reference has 2.19281933752...
    assert round(tail_error(100, 0.1, 0.001, tail="lower"), 2) == 2.19
    k = 2
    assert round(float(stats.binom.cdf(k, 100, 0.1)), 4) == 0.0019
    assert round(float(approximate_cdf(k, 100, 0.1, "normal_cc")), 4) == 0.0062


# --- the mpmath references ------------------------------------------------------------------


def _reference_cases():
    for cell in REFERENCE["cells"]:
        for method, values in cell["methods"].items():
            yield pytest.param(cell["n"], cell["p"], method, values["tail_error"],
                               id=f"{method}-n{cell['n']}-p{cell['p']}")  # fmt: skip


@pytest.mark.parametrize(("n", "p", "method", "levels"), list(_reference_cases()))
def test_against_mpmath(n, p, method, levels):
    alphas = [float(a) for a in levels]
    lower, upper = cell_tail_errors(n, p, method, alphas)
    for i, a in enumerate(levels):
        ref_lower = float(levels[a]["lower"])  # mpmath reference
        ref_upper = float(levels[a]["upper"])  # mpmath reference
        assert abs(lower[i] - ref_lower) <= REL * (1.0 + ref_lower)
        assert abs(upper[i] - ref_upper) <= REL * (1.0 + ref_upper)


def test_exact_tails_relative_accuracy():
    # mpmath reference: exact tails down to 1e-300 and below; the float64 tails must hold
    # their relative accuracy there (atlas.tails module notes: about 1e-13).
    for row in REFERENCE["far_tails"]:
        n, p, k = row["n"], row["p"], row["k"]
        low = float(Side(n, p, "normal_cc", False).exact(k))
        up = float(Side(n, p, "normal_cc", True).exact(n - k))
        for got, ref in ((low, float(row["lower"])), (up, float(row["upper"]))):
            if ref > 1e-300:
                assert abs(got / ref - 1.0) <= 1e-12, (n, p, k, got, ref)


# --- exactness: the shortcut against every k ------------------------------------------------


@pytest.mark.parametrize("method", METHODS)
def test_matches_every_k_small_n(method):
    rng = np.random.default_rng(11)
    for _ in range(25):
        n = int(rng.integers(1, 400))
        p = float(rng.uniform(0.002, 0.998))
        alphas = 10.0 ** rng.uniform(-14, -0.05, size=3)
        lower, upper = cell_tail_errors(n, p, method, alphas)
        for i, a in enumerate(alphas):
            ref_lower, ref_upper = every_k(n, p, a, method)  # every k
            assert abs(lower[i] - ref_lower) <= 1e-12 * (1.0 + ref_lower)
            assert abs(upper[i] - ref_upper) <= 1e-12 * (1.0 + ref_upper)


@pytest.mark.parametrize(
    ("n", "p", "method"),
    [
        (10**5, 0.3, "normal_cc"),
        (10**5, 0.002, "edgeworth_cc"),
        (3 * 10**4, 0.9, "poisson"),
        (2 * 10**5, 0.5, "peizer_pratt"),
        (5 * 10**4, 0.05, "camp_paulson"),
        (10**6, 0.5, "peizer_pratt"),  # accurate to rounding: the floor ends the scan
        (10**6, 0.5, "edgeworth2_cc"),
    ],  # fmt: skip
)
def test_shortcut_matches_full_scan_large_n(n, p, method):
    # full=True evaluates every admitted count (tens of thousands here); the default stops by
    # the bound c / T(j) of the module notes, or at the noise floor. They must agree exactly
    # above the floor.
    alphas = np.array([0.3, 0.05, 0.01, 1e-4, 1e-9])
    fast = cell_tail_errors(n, p, method, alphas)
    full = cell_tail_errors(n, p, method, alphas, full=True)
    # Equal where the error exceeds the noise floor; within it (1e-11 absolute) below.
    assert_allclose(fast, full, rtol=0, atol=FLOOR)
    big = np.asarray(full) > 1e-9
    assert (np.asarray(fast)[big] == np.asarray(full)[big]).all()


# --- laws -----------------------------------------------------------------------------------

_SYMMETRIC = [m for m in METHODS if m != "normal"]  # the uncorrected curve is not symmetric


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(1, 3000),
    num=st.integers(1, 1023),
    method=st.sampled_from(_SYMMETRIC),
    alpha=st.floats(1e-12, 0.9),
)
def test_symmetry_lower_upper(n, num, method, alpha):
    # For every symmetric method, 1 - G(k - 1; n, p) = G(n - k; n, 1 - p) and U(k; p) =
    # L(n - k; 1 - p), so lower(n, p) = upper(n, 1 - p). p = num/1024 makes 1 - p exact.
    # The Poisson method mirrors at p = 1/2 itself only on one side: skip it there.
    p = num / 1024.0
    if method == "poisson" and num == 512:
        return
    a = tail_error(n, p, alpha, method=method, tail="lower")
    b = tail_error(n, 1.0 - p, alpha, method=method, tail="upper")
    assert abs(a - b) <= 1e-9 * (1.0 + a)


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(1, 20000),
    p=st.floats(1e-4, 1 - 1e-4),
    method=st.sampled_from(METHODS),
    alphas=st.lists(st.floats(1e-15, 0.99), min_size=2, max_size=5),
)
def test_monotone_in_alpha(n, p, method, alphas):
    # A larger alpha admits fewer tails: the maximum over a smaller set cannot be larger.
    alphas = np.sort(np.array(alphas))
    for tail in ("lower", "upper", "both"):
        got = tail_error(n, p, alphas, method=method, tail=tail)
        assert (np.diff(got) <= 0).all()


def test_both_is_the_larger():
    lower = tail_error(100, 0.1, [0.05, 0.001], tail="lower")
    upper = tail_error(100, 0.1, [0.05, 0.001], tail="upper")
    both = tail_error(100, 0.1, [0.05, 0.001])
    assert_allclose(both, np.maximum(lower, upper), rtol=0)


def test_broadcasting_shape_and_values():
    got = tail_error([[50], [100]], [0.1, 0.5, 0.3], [0.01, 0.001, 0.05])
    assert got.shape == (2, 3)
    assert got[1, 0] == tail_error(100, 0.1, 0.01)
    assert got[0, 2] == tail_error(50, 0.3, 0.05)
    assert isinstance(tail_error(50, 0.1, 0.01), float)


def test_public_name():
    assert atlas.tail_error is tail_error
    assert "tail_error" in atlas.__all__


# --- errors ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"alpha": 1.5}, r"^`alpha` must be in the open interval \(0, 1\); got 1\.5\.$"),
        ({"alpha": 0}, r"^`alpha` must be in the open interval \(0, 1\); got 0\.0\.$"),
        ({"alpha": float("nan")}, r"^`alpha` must be in the open interval \(0, 1\); got nan\.$"),
        ({"alpha": "x"}, r"^`alpha` must be in the open interval \(0, 1\); got 'x'\.$"),
        ({"alpha": True}, r"^`alpha` must be in the open interval \(0, 1\); got True\.$"),
        ({"tail": "middle"}, r"^`tail` must be one of 'lower', 'upper', 'both'; got 'middle'\.$"),
        ({"method": "bogus"}, r"^`method` must be one of 'normal_cc', .*; got 'bogus'\.$"),
        ({"n": 0}, r"^`n` must be an integer >= 1; got 0\.$"),
        ({"p": 1.5}, r"^`p` must be in the open interval \(0, 1\); got 1\.5\.$"),
    ],
)
def test_errors(kwargs, message):
    args = {"n": 100, "p": 0.1, "alpha": 0.01} | kwargs
    with pytest.raises(ValueError, match=message):
        tail_error(args.pop("n"), args.pop("p"), args.pop("alpha"), **args)


# --- atlas.complements ----------------------------------------------------------------------


@pytest.mark.parametrize("method", METHODS)
def test_complement_equals_one_minus_g(method):
    # Where 1 - G(k - 1) is not small, the subtraction is accurate: both agree to rounding.
    for n, p in ((1, 0.3), (7, 0.8), (50, 0.1), (1000, 0.73), (4000, 0.5)):
        k = np.arange(0, n + 2)
        direct = approximate_upper(k, n, p, method)
        subtracted = 1.0 - approximate_cdf(k - 1, n, p, method)
        assert_allclose(direct, subtracted, rtol=0, atol=5e-16)


@pytest.mark.parametrize("method", _SYMMETRIC)
def test_complement_mirror_relative(method):
    # For p > 1/2, 1 - p is exact and 1 - G(k - 1; n, p) = G(n - k; n, 1 - p) holds in
    # relative terms down to the smallest tails: the complement has the lower tail's accuracy.
    # (Relative 1e-11: Phi's own relative error grows like |z| times the rounding of z.)
    for n, p in ((7, 0.8), (1000, 0.73), (10**6, 0.6), (300, 0.99)):
        k = np.arange(0, n + 1) if n < 5000 else np.arange(590000, 610000)
        upper = approximate_upper(k, n, p, method)
        mirror = approximate_cdf(n - k, n, 1.0 - p, method)
        keep = np.abs(mirror) > 1e-290
        assert_allclose(upper[keep], mirror[keep], rtol=1e-11, atol=0)
