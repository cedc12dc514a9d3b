"""Tests of atlas.thresholds: exact minimum n for every integer, and what the answers say.

Sources of the expected values, named beside each check:

- "brute force": the engine (:func:`atlas.worst_error`, :func:`atlas.engine.evaluate`) at every
  integer of a window, independently of the bisection and the bounds.
- "independent audit, from the issue": the minimum n for every integer that an independent
  check found (issue 10: its own G from the formulas, an F free of Boost); each is also
  confirmed here by brute force.
"""

import numpy as np
import pytest

import atlas
from atlas.engine import evaluate, worst_error
from atlas.thresholds import minimum_n


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


def test_min_n_trusts_a_stored_value_only_beyond_its_accuracy():
    # A column whose value at n = 60 sits just below tol in float32, with an accuracy that
    # leaves its side of tol open: it is computed again (float64, accuracy ~1e-16), and N then
    # follows the engine. Values: the engine's W(n, 0.5) for normal_cc (computed, regression).
    grid_n = np.arange(1, 101, dtype=np.int64)
    exact = np.array([atlas.worst_error(int(n), 0.5) for n in grid_n])
    tol = float(exact[59]) * (1 - 1e-9)  # W(60) just above tol in float64
    stored = exact.copy()
    stored[59] = tol * (1 - 2.0**-25)  # "float32": below tol by less than its accuracy
    accuracy = np.full(grid_n.size, 2.0**-23) * stored
    answer = minimum_n(grid_n, stored, 0.5, tol, method="normal_cc", metric="interval",
                       accuracy=accuracy)  # fmt: skip
    assert answer.evaluated >= 1 and answer.failing is not None
    brute = int(np.flatnonzero(exact > tol)[-1]) + 2  # first n after the last one above tol
    assert answer.n == brute >= 61


def test_threshold_says_when_n_minus_one_fails_on_its_accuracy():
    grid_n = np.arange(1, 101, dtype=np.int64)
    exact = np.array([atlas.worst_error(int(n), 0.5) for n in grid_n])
    last_above = int(np.flatnonzero(exact > 0.002)[-1])
    tol = float(exact[last_above])  # the value equals tol: within tol, but not with accuracy
    answer = minimum_n(grid_n, exact, 0.5, tol, method="normal_cc", metric="interval",
                       accuracy=np.full(grid_n.size, 1e-15))  # fmt: skip
    assert answer.n == last_above + 2 and not answer.resolved
    assert "below the resolution of the exact side" in answer.basis()
