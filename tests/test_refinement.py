"""Tests for atlas.refinement: adaptive bisection in log-odds between the checked p of a band.

The minimum n here are planted functions of log-odds (invented: a jump, a narrow bump, a smooth
rise), so what the bisection must find is known.
"""

import numpy as np
import pytest

from atlas.refinement import refine


def _solver(f):
    calls = []

    def solve(x):
        calls.append(np.asarray(x).tolist())
        return [f(v) for v in np.asarray(x).tolist()]

    return solve, calls


def _start(f, lo=0.0, hi=1.0):
    return [{lo: f(lo), (lo + hi) / 2: f((lo + hi) / 2), hi: f(hi)}]


def test_a_planted_steep_change_is_bisected_to_the_full_depth():
    def jump(x):
        return 1000 if x < 0.3 else 1500

    solve, calls = _solver(jump)
    r = refine([0.0], [1.0], _start(jump), solve, depth=5, budget=100)
    xs = sorted(r.points[0])
    # The neighbours across the jump end 2^-5 apart: the jump is pinned within 1/32.
    below = max(x for x in xs if x < 0.3)
    above = min(x for x in xs if x >= 0.3)
    assert above - below == pytest.approx(1 / 32)
    assert min(np.diff(xs)) >= 1 / 32 - 1e-12  # never deeper than asked
    assert r.deepest() == 5 and r.exhausted == 0
    assert all(len(c) <= 2 for c in calls)  # per round: at most 2 pairs of the band
    assert r.largest_rise() == 0.0  # a jump is no bump: no new p exceeds both neighbours


def test_a_planted_bump_between_checked_points_is_found():
    # Flat at 500 but 600 on (0.55, 0.62): the ends and the midpoint see 500 only; the pairs
    # at the band's top are bisected until a new p lands in the bump.
    def bump(x):
        return 600 if 0.55 < x < 0.62 else 500

    solve, _ = _solver(bump)
    r = refine([0.0], [1.0], _start(bump), solve, depth=4, budget=16)
    assert max(r.points[0].values()) == 600
    assert r.largest_rise() == pytest.approx(0.2)  # 600 / 500 - 1
    assert r.points[0][0.5625] == 600  # 9/16, a depth-4 point, lies in the bump


def test_the_budget_and_the_depth_are_respected():
    def rise(x):
        return int(1000 * np.exp(2 * x))  # steep everywhere: every pair qualifies

    solve, _ = _solver(rise)
    starts = _start(rise) + _start(rise, 1.0, 2.0)
    r = refine([0.0, 1.0], [1.0, 2.0], starts, solve, depth=6, budget=5)
    assert r.added.tolist() == [5, 5] and r.exhausted == 2
    # With room to spare the depth stops it: 2^3 - 2 new p make neighbours 1/8 apart.
    r = refine([0.0, 1.0], [1.0, 2.0], starts, solve, depth=3, budget=100)
    assert r.added.tolist() == [6, 6] and r.exhausted == 0 and r.deepest() == 3
    assert np.diff(sorted(r.points[1])) == pytest.approx([1 / 8] * 8)


def test_flat_pairs_far_below_the_top_are_left_alone():
    def two_levels(x):
        return 500 if x < 0.5 else 1000

    solve, _ = _solver(two_levels)
    r = refine([0.0], [1.0], _start(two_levels), solve, depth=4, budget=50)
    # (0, 0.5) is steep (500, 1000) and is bisected once; (0, 0.25) is neither steep (500,
    # 500) nor near the top (1000): nothing is added in it.
    assert r.points[0][0.25] == 500 and r.added[0] > 1
    assert not any(0.0 < x < 0.25 for x in r.points[0])


def test_a_band_with_no_answer_is_not_refined():
    solve, calls = _solver(lambda x: 10)
    r = refine([0.0], [1.0], [{0.0: 10, 0.5: None, 1.0: 10}], solve)
    assert r.added.tolist() == [0] and calls == [] and r.largest_rise() is None


def test_pairs_next_to_fixed_points_are_not_bisected():
    # A steep pair whose end is fixed is left alone; a point solve() fixes stops its pairs.
    solve, _ = _solver(lambda x: 100 if x < 0.4 else 300)
    r = refine([0.0], [1.0], [{0.0: 100, 0.5: 300, 1.0: 300}], solve, fixed={0.5}, budget=10)
    assert r.added.tolist() == [0]
    fixed = set()

    def fixing(x):
        fixed.update(x.tolist())  # every new p is answered "at a smaller tolerance"
        return [300] * len(x)

    r = refine([0.0], [1.0], [{0.0: 100, 0.5: 300, 1.0: 300}], fixing, fixed=fixed, budget=10)
    assert r.added.tolist() == [2] and r.rounds == 1


def test_bad_arguments():
    with pytest.raises(ValueError, match="`depth`, `budget`, `per_round` and `spread` must be"):
        refine([0.0], [1.0], [{0.0: 1, 1.0: 1}], lambda x: [], budget=-1)
    with pytest.raises(ValueError, match="`points` must hold both ends of band 0; got"):
        refine([0.0], [1.0], [{0.0: 1}], lambda x: [])
