"""Tests of atlas.thresholds: the bounds it rests on, and exact minimum n for every integer.

Sources of the expected values, named beside each check:

- "brute force": the engine (:func:`atlas.worst_error`, :func:`atlas.engine.evaluate`) at every
  integer of a window, independently of the bisection and the bounds.
- "independent audit, from the issue": the minimum n for every integer that an independent
  check found (issue 10: its own G from the formulas, an F free of Boost); each is also
  confirmed here by brute force.
- "closed form": a value the formula gives by hand (phi(0) = 1/sqrt(2 pi), He_2(0) = -1, ...).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

import atlas
from atlas import thresholds
from atlas.approximations import approximate_cdf
from atlas.engine import evaluate, worst_error

HERMITE_METHODS = ("normal", "normal_cc", "edgeworth_cc", "edgeworth2_cc")


def test_hermite_sup_closed_forms():
    phi0 = 1.0 / math.sqrt(2.0 * math.pi)
    # closed form: sup|phi| = phi(0); sup|z phi| = phi(1); sup|(z^2-1) phi| = phi(0) (at z = 0);
    # sup|He_4 phi| = 3 phi(0) (at z = 0). The table is raised by 1e-6 relative on purpose.
    for j, value in [(1, phi0), (2, phi0 * math.exp(-0.5)), (3, phi0), (5, 3 * phi0)]:
        assert_allclose(thresholds.hermite_sup(j), value, rtol=2e-6)
        assert thresholds.hermite_sup(j) >= value


@pytest.mark.parametrize("method", HERMITE_METHODS)
def test_hermite_form_is_the_method(method):
    # The representation the step bound is derived from is the method itself (to rounding).
    for n, p in [(10, 0.3), (1000, 0.01), (57, 0.8), (5000, 0.5)]:
        k = np.arange(-3, n + 3)
        form = thresholds.hermite_form(k, n, p, method)
        assert_allclose(form, approximate_cdf(k, n, p, method), rtol=0, atol=1e-15)


@pytest.mark.parametrize("method", HERMITE_METHODS + ("poisson",))
def test_step_bound_holds(method):
    # rho_n >= max over k of |q G_n(k) + p G_n(k-1) - G_{n+1}(k)|, computed at every k (brute
    # force), at random n and p; and rho_n does not grow with n (the sum over a gap uses it).
    rng = np.random.default_rng(7)
    for _ in range(150):
        p = float(np.exp(rng.uniform(np.log(1e-4), np.log(0.9999))))
        n = int(np.exp(rng.uniform(0, np.log(20000))))
        k = np.arange(-1, n + 2)
        q = 1.0 - p
        g = approximate_cdf(k, n, p, method)
        g_before = approximate_cdf(k - 1, n, p, method)
        r = np.abs(q * g + p * g_before - approximate_cdf(k, n + 1, p, method)).max()
        rho = thresholds.step_bound(method, [n, n + 1, 2 * n], p)
        assert r <= rho[0] * (1 + 1e-9) + 1e-15, (method, n, p, r, rho[0])
        assert rho[1] <= rho[0] and rho[2] <= rho[1]


@pytest.mark.parametrize("method", ["normal_cc", "camp_paulson", "peizer_pratt", "poisson"])
def test_numeric_step_is_the_maximum(method):
    # The direct step bound for small sigma is the maximum over every k (brute force, k = -1..n+1).
    p = 0.003
    ns = np.array([5, 50, 400, 2000])
    got = thresholds._numeric_steps(method, ns, p)
    for n, value in zip(ns, got, strict=True):
        k = np.arange(-1, n + 2)
        r = (1 - p) * approximate_cdf(k, n, p, method) + p * approximate_cdf(k - 1, n, p, method)
        r = np.abs(r - approximate_cdf(k, n + 1, p, method)).max()
        assert r <= value <= r + 1e-12


@pytest.mark.parametrize("method", HERMITE_METHODS)
@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_tail_bound_holds(method, metric):
    # Berry-Esseen (Shevtsova 2011) plus the distance of G from the normal curve bounds the
    # error computed by the engine (brute force) at every n tried.
    for p in (0.001, 0.05, 0.3, 0.5, 0.97):
        ns = np.array([3, 30, 300, 3000, 30000, 300000])
        errors = worst_error(ns, p, method=method, metric=metric)
        bound = thresholds.tail_bound(method, ns, p, metric)
        assert np.all(errors <= bound), (p, errors, bound)
        assert np.all(np.diff(bound) <= 0)


def test_extension_bound_covers_the_far_tails():
    # With D_n extended to 200 integers either side of [-1, n] (brute force): the oscillation
    # grows by at most 2 E (interval), and |D| outside [0, n] is at most E (cdf).
    for method in HERMITE_METHODS + ("poisson", "camp_paulson"):
        for n, p in [(5, 0.3), (40, 0.02), (300, 0.5), (1000, 0.001), (80, 0.9), (3, 0.01)]:
            k = np.arange(-200, n + 200)
            f = np.clip(atlas.engine._binom_cdf(k, n, p), 0, 1)
            d = np.where(k < 0, 0.0, np.where(k >= n, 1.0, f)) - approximate_cdf(k, n, p, method)
            inside = (k >= -1) & (k <= n)
            w = d[inside].max() - d[inside].min()
            e = thresholds._extension_bound(method, [n], p, "interval")[0]
            assert d.max() - d.min() <= w + 2 * e + 1e-15, (method, n, p)
            outside = (k < 0) | (k > n)
            e_cdf = thresholds._extension_bound(method, [n], p, "cdf")[0]
            assert np.abs(d[outside]).max() <= e_cdf + 1e-15, (method, n, p)


def _every_integer(n_lo, n_hi, p, method="normal_cc", metric="interval"):
    """The engine's error at every integer n_lo..n_hi (brute force, one call per n)."""
    out = np.empty(n_hi - n_lo + 1)
    for i, n in enumerate(range(n_lo, n_hi + 1)):
        ev = evaluate(n, [p], methods=(method,))
        out[i] = (ev.interval if metric == "interval" else ev.cdf)[0, 0]
    return out


@pytest.fixture(scope="module")
def default():
    opened = atlas.open_atlas()
    yield opened
    opened.close()


def test_example_small_case_against_every_integer():
    # A small atlas with a sparse n axis: the answer agrees with every integer to the end
    # (brute force), and the integer below it fails.
    at = atlas.Atlas(atlas.build_atlas(n="1:20,log:30:3000:6", p="0.3", methods="normal_cc",
                                       progress=False))  # fmt: skip
    errors = _every_integer(1, 3000, 0.3)
    for tol in (0.02, 0.01, 0.005, 0.003, 0.002):
        answer = at.threshold(0.3, tol)
        bad = np.flatnonzero(errors > tol)
        assert answer.n == int(bad[-1]) + 2 and answer.exact and answer.upto is None
        assert answer.failing[0] == answer.n - 1
        assert answer.evaluated < 400  # the bounds spare most of the 3000 integers


@pytest.mark.parametrize(
    "p, tol, grid_answer, expected",
    [
        (0.01, 0.01, 9569, 9376),  # independent audit, from the issue
        (0.05, 0.005, 6470, 6456),  # independent audit, from the issue
        (0.3, 0.001, 7260, 7127),  # independent audit, from the issue
    ],
)
def test_examples_from_the_issue(default, p, tol, grid_answer, expected):
    answer = default.threshold(p, tol)
    assert answer.n == expected and answer.exact and answer.upto is None
    assert default.min_n(p, tol) == expected
    assert expected < grid_answer  # the grid's answer missed integers between grid n
    # brute force just around the answer: n = N - 1 fails, the next integers are within tol
    errors = _every_integer(expected - 1, expected + 300, p)
    assert errors[0] > tol and np.all(errors[1:] <= tol)


@pytest.mark.slow
@pytest.mark.parametrize(
    "p, tol, expected",
    [(0.01, 0.01, 9376), (0.05, 0.005, 6456), (0.3, 0.001, 7127)],  # independent audit, issue
)
def test_examples_from_the_issue_every_integer(default, p, tol, expected):
    # Brute force over every integer from below the grid's answer to 4 N: the last one above
    # tol is N - 1. (Beyond 4 N the error keeps shrinking; the answer's bounds cover it.)
    errors = _every_integer(expected // 2, 4 * expected, p)
    bad = np.flatnonzero(errors > tol)
    assert expected // 2 + int(bad[-1]) + 1 == expected


def test_safe_set_in_stretches_at_tiny_p(default):
    # p = 1e-7: all the probability sits at 0 for small n, so every n up to about 10^3 is within
    # 1e-4, then the error rises past it (W ~ n p) and stays above it to the atlas's end.
    answer = default.threshold(1e-7, 1e-4)
    assert answer.n is None
    first, second = answer.runs
    assert first == (1, 1000, True, True)
    assert second[:3] == (1001, 100_000_000, False)
    # brute force: the ends of the first stretch
    assert worst_error(1000, 1e-7) <= 1e-4 < worst_error(1001, 1e-7)
    lines = answer.describe_runs()
    assert lines[0] == "n = 1 to 1,000: within the tolerance at every integer"
    assert "not within the tolerance" in lines[1]
    assert "not within the tolerance at n = 100,000,000" in answer.basis()


def test_beyond_the_atlas_end(default):
    # p = 0.001, tol = 0.001: N near 10^7, and the large-n bound holds only from about 1.8e9:
    # the n between the atlas's end and there are stepped through and bounded.
    answer = default.threshold(0.001, 0.001, runs=False)
    assert answer.upto is None and answer.exact
    assert "beyond the atlas's end" in answer.beyond and "Berry-Esseen" in answer.beyond
    ns = np.unique(np.exp(np.linspace(np.log(answer.n), np.log(2e9), 60)).astype(np.int64))
    ns = np.maximum(ns, answer.n)
    assert np.all(worst_error(ns, 0.001) <= 0.001)  # brute force at spread-out n
    assert worst_error(answer.n - 1, 0.001) > 0.001


def test_no_step_bound_is_said(default):
    answer = default.threshold(0.3, 0.001, method="camp_paulson", runs=False)
    assert not answer.exact and answer.uncovered
    assert "only the n evaluated are checked" in answer.basis()
    assert answer.upto == 100_000_000  # nothing is claimed beyond the atlas's end


def test_range_states_what_was_checked(default):
    answer = default.threshold_over(0.2, 0.4, 0.005)
    text = answer.checked()
    assert f"the grid's {answer.grid_p}" in text and "log-odds" in text
    assert answer.worst_p == 0.2 or answer.n == max(t.n for t in answer.per_p)
    assert len(answer.per_p) > answer.grid_p  # both ends at least
