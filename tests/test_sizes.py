"""Tests of atlas.sizes: the size of the test with an approximation's p-value, and the exact one.

Sources of the expected values, named beside each check:

- "by hand": small cases worked in the comments from the definitions (issue 11).
- "mpmath reference": tests/data/tail_references.json, written by
  build_scripts/make_tail_references.py (40-digit mpmath, every k = 0..n, no code of atlas).
- "issue 11": the figure quoted in the issue, computed to its definitions (not published).
- "theorem": the exact test rejects only counts whose exact p-value is <= alpha, so its size,
  the probability of those counts under H0, is at most alpha (for the two-sided test, at most
  alpha/2 on each side).
- "every k": the sums of the definition at every count with scipy.stats.binom.
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
from atlas import sizes
from atlas.approximations import METHODS, approximate_cdf
from atlas.complements import approximate_upper

REFERENCE_FILE = pathlib.Path(__file__).parent / "data" / "tail_references.json"
REFERENCE = json.loads(REFERENCE_FILE.read_text())
ALTERNATIVES = ("two-sided", "less", "greater")


def every_k(n, p, alpha, method, alternative):
    """(size, exact size) by the sums of the definition at every k."""
    k = np.arange(n + 1)
    b = stats.binom.pmf(k, n, p)
    low = stats.binom.cdf(k, n, p)
    up = np.where(k == 0, 1.0, stats.binom.sf(np.maximum(k - 1, 0), n, p))
    g = approximate_cdf(k, n, p, method)
    gu = approximate_upper(k, n, p, method)
    if alternative == "less":
        return b[g <= alpha].sum(), b[low <= alpha].sum()
    if alternative == "greater":
        return b[gu <= alpha].sum(), b[up <= alpha].sum()
    h = alpha / 2
    return b[(g <= h) | (gu <= h)].sum(), b[(low <= h) | (up <= h)].sum()


def test_three_trials_by_hand():
    # n = 3, p0 = 0.2: b = 0.512, 0.384, 0.096, 0.008; P(X >= k) = 1, 0.488, 0.104, 0.008.
    # normal_cc: mu = 0.6, sigma = sqrt(0.48) = 0.6928; the upper p-value of k is
    # 1 - G(k - 1) = Phi(-(k - 1/2 - 0.6)/sigma): k = 2 gives Phi(-1.299) = 0.0970,
    # k = 3 gives Phi(-2.742) = 0.0031.
    # At alpha = 0.1 the shortcut rejects k = 2, 3 (size 0.104); the exact test only k = 3
    # (P(X >= 2) = 0.104 > 0.1), size 0.008. At alpha = 0.05 both reject k = 3 only.
    t = sizes.test_size(3, 0.2, [0.1, 0.05], alternative="greater")
    assert_allclose(t.size, [0.104, 0.008], rtol=1e-13)  # by hand
    assert_allclose(t.exact_size, [0.008, 0.008], rtol=1e-13)  # by hand


def test_one_trial_two_sided_by_hand():
    # n = 1, p0 = 0.3, normal_cc: sigma = sqrt(0.21) = 0.4583. Lower p-values G(0) =
    # Phi(0.2/0.4583) = 0.669, G(1) = 0.99...; upper p-values 1 - G(-1) = Phi(0.8/0.4583) =
    # 0.960 at k = 0 and 1 - G(0) = 0.331 at k = 1. At alpha = 0.8 (alpha/2 = 0.4) only k = 1
    # is rejected (upper p-value 0.331): size b(1) = 0.3. Exact: P(X >= 1) = 0.3 <= 0.4 rejects
    # k = 1; F(0) = 0.7 > 0.4 keeps k = 0: size 0.3 as well.
    sigma = math.sqrt(0.21)
    assert 0.5 * math.erfc(0.2 / sigma / math.sqrt(2)) < 0.4  # 1 - G(0) = 0.331: rejected
    t = sizes.test_size(1, 0.3, 0.8)
    assert_allclose([t.size, t.exact_size], [0.3, 0.3], rtol=1e-14)  # by hand


def test_issue_figure():
    # issue 11: at n = 50, p0 = 0.1 the upper one-sided test at nominal 5% rejects a true null
    # 5.8% of the time (mpmath reference 0.0578672...); the exact test 2.45%.
    t = sizes.test_size(50, 0.1, 0.05, alternative="greater")
    assert round(t.size, 3) == 0.058
    assert t.exact_size <= 0.05  # theorem


def _reference_cases():
    for cell in REFERENCE["cells"]:
        for method, values in cell["methods"].items():
            yield pytest.param(cell["n"], cell["p"], method, values["test_size"],
                               id=f"{method}-n{cell['n']}-p{cell['p']}")  # fmt: skip


@pytest.mark.parametrize(("n", "p", "method", "levels"), list(_reference_cases()))
def test_against_mpmath(n, p, method, levels):
    for alternative in ALTERNATIVES:
        alphas = [float(a) for a in levels]
        t = sizes.test_size(n, p, alphas, method=method, alternative=alternative)
        for i, a in enumerate(levels):
            ref = levels[a][alternative]  # mpmath reference
            # Both sums keep the relative accuracy of their terms (module notes: 1e-12).
            assert_allclose(t.size[i], float(ref["size"]), rtol=1e-11, atol=1e-300)
            assert_allclose(t.exact_size[i], float(ref["exact_size"]), rtol=1e-11, atol=1e-300)


@pytest.mark.parametrize("method", METHODS)
def test_matches_every_k(method):
    rng = np.random.default_rng(12)
    for trial in range(30):
        n = int(rng.integers(1, 8)) if trial % 3 == 0 else int(rng.integers(1, 2500))
        p = float(rng.uniform(0.002, 0.998))
        # Small levels, and levels near 1, where the two one-sided sets can meet.
        alphas = np.r_[10.0 ** rng.uniform(-12, -0.5, size=2), rng.uniform(0.5, 0.999)]
        for alternative in ALTERNATIVES:
            t = sizes.test_size(n, p, alphas, method=method, alternative=alternative)
            for i, a in enumerate(alphas):
                size, exact = every_k(n, p, a, method, alternative)  # every k
                assert_allclose(t.size[i], size, rtol=1e-12, atol=1e-300)
                assert_allclose(t.exact_size[i], exact, rtol=1e-12, atol=1e-300)


@pytest.mark.parametrize(
    ("n", "p", "method"),
    [
        (10**5, 0.3, "normal_cc"),
        (10**5, 0.002, "edgeworth_cc"),
        (3 * 10**4, 0.9, "poisson"),
        (5 * 10**4, 0.05, "camp_paulson"),
    ],  # fmt: skip
)
def test_large_n_every_k(n, p, method):
    # The sums of atlas.sizes skip the counts whose decision is certain; here every count of
    # n up to 10^5 is evaluated instead, and both must agree.
    alphas = [0.1, 0.01, 1e-6]
    for alternative in ALTERNATIVES:
        t = sizes.test_size(n, p, alphas, method=method, alternative=alternative)
        for i, a in enumerate(alphas):
            size, exact = every_k(n, p, a, method, alternative)  # every k
            assert_allclose(t.size[i], size, rtol=1e-11)
            assert_allclose(t.exact_size[i], exact, rtol=1e-11)


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(1, 10**6),
    p=st.floats(1e-5, 1 - 1e-5),
    alpha=st.floats(1e-10, 0.999),
    alternative=st.sampled_from(ALTERNATIVES),
    method=st.sampled_from(METHODS),
)
def test_exact_size_at_most_alpha(n, p, alpha, alternative, method):
    # theorem: the exact test's size never exceeds its level.
    t = sizes.test_size(n, p, alpha, method=method, alternative=alternative)
    assert t.exact_size <= alpha
    assert 0.0 <= t.size <= 1.0


def test_result_object():
    t = sizes.test_size([50, 100], 0.1, 0.05, alternative="less")
    assert isinstance(t, sizes.TestSize)
    assert t.size.shape == (2,) and t.exact_size.shape == (2,)
    assert t.alternative == "less" and t.method == "normal_cc"
    assert_allclose(t.alpha, [0.05, 0.05])
    assert atlas.test_size is sizes.test_size and atlas.TestSize is sizes.TestSize
    one = sizes.test_size(50, 0.1, 0.05)
    assert isinstance(one.size, float) and isinstance(one.exact_size, float)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"alpha": 1.5}, r"^`alpha` must be in the open interval \(0, 1\); got 1\.5\.$"),
        ({"p0": 0.0}, r"^`p0` must be in the open interval \(0, 1\); got 0\.0\.$"),
        ({"n": 2.5}, r"^`n` must be an integer >= 1; got 2\.5\.$"),
        (
            {"alternative": "bigger"},
            r"^`alternative` must be one of 'two-sided', 'less', 'greater'; got 'bigger'\.$",
        ),
        ({"method": "bogus"}, r"^`method` must be one of 'normal_cc', .*; got 'bogus'\.$"),
    ],
)
def test_errors(kwargs, message):
    args = {"n": 50, "p0": 0.1, "alpha": 0.05} | kwargs
    with pytest.raises(ValueError, match=message):
        sizes.test_size(args.pop("n"), args.pop("p0"), args.pop("alpha"), **args)


@pytest.mark.parametrize("method", METHODS)
def test_all_alternatives_at_once(method):
    # cell_all_sizes shares one pass per side between the alternatives; it must give what
    # each alternative gives alone (up to the order of the sums), and what every k gives.
    alphas = np.array([0.1, 0.05, 0.01, 0.001])
    for n, p in ((3000, 0.3), (20000, 0.02), (5000, 0.97)):
        together = sizes.cell_all_sizes(n, p, method, alphas)
        for alternative in ALTERNATIVES:
            alone = sizes.cell_sizes(n, p, method, alphas, alternative)
            assert_allclose(together[alternative], alone, rtol=1e-13, atol=1e-300)
            for i, a in enumerate(alphas):
                size, exact = every_k(n, p, a, method, alternative)  # every k
                assert_allclose(together[alternative][0][i], size, rtol=1e-11, atol=1e-300)
                assert_allclose(together[alternative][1][i], exact, rtol=1e-11, atol=1e-300)
