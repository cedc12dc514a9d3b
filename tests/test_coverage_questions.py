"""Tests of atlas.coverage_questions: verdicts, the minimum n, the shortest interval.

Sources: the answers are checked against atlas.confidence.min_coverage (itself checked against
the mpmath brute force in tests/test_confidence.py) evaluated directly; literal values are
"computed, regression value" unless a theorem is named.
"""

import pytest

from atlas.confidence import mean_width, min_coverage
from atlas.coverage_questions import check_coverage, coverage_min_n, shortest_interval


def test_check_coverage_wilson_at_40():
    # The question: the 95% Wilson interval, 93% for every p in [0.05, 0.5] at n = 40.
    v = check_coverage(40, 0.05, 0.5, 0.93, interval="wilson")
    m = min_coverage(40, 0.05, 0.5, interval="wilson", detail=True)
    assert (v.min_coverage, v.worst_p, v.approach) == (m.value, m.p, m.approach)
    assert v.holds is False and v.margin == m.value - 0.93
    assert abs(v.min_coverage - 0.92776445354699) < 1e-12  # computed, regression value
    assert "does NOT cover at least 0.93" in v.explain()
    assert "0.927764" in v.explain() and "as p rises to p = 0.200845" in v.explain()
    assert check_coverage(40, 0.05, 0.5, 0.92, interval="wilson").holds is True
    assert v.to_dict()["explain"] == v.explain()


def test_check_coverage_clopper_pearson_holds_at_nominal():
    # Theorem (Clopper and Pearson 1934): never below the nominal level.
    for n in (1, 9, 40, 333):
        assert check_coverage(n, 0.001, 0.999, 0.95, interval="clopper_pearson").holds


def test_coverage_min_n_checks_every_n():
    r = coverage_min_n(0.05, 0.5, 0.93, interval="wilson", n_max=150)
    direct = [min_coverage(n, 0.05, 0.5, interval="wilson") >= 0.93 for n in range(1, 151)]
    holds = [any(a <= n <= b for a, b in r.runs) for n in range(1, 151)]
    assert holds == direct
    # computed, regression value: the floor holds, fails and holds again (not monotone in n).
    assert r.runs == ((43, 51), (56, 61), (116, 150))
    assert (r.min_n, r.last_failure) == (116, 115)
    text = r.explain()
    assert "from n = 116 on, up to n = 150" in text
    assert "every integer n from 1 to 150 checked, none beyond" in text
    assert "43..51, 56..61, 116..150" in text
    assert r.to_dict()["runs"] == [[43, 51], [56, 61], [116, 150]]


def test_coverage_min_n_when_the_limit_fails():
    r = coverage_min_n(0.05, 0.5, 0.93, interval="wilson", n_max=100)
    assert r.min_n is None and r.last_failure == 100 and r.runs == ((43, 51), (56, 61))
    assert "not at n = 100" in r.explain()
    never = coverage_min_n(0.001, 0.01, 0.9, interval="wald", n_max=20)
    assert never.runs == () and never.min_n is None
    assert "at no n up to 20" in never.explain()


def test_shortest_interval_picks_the_narrowest_that_meets():
    choice = shortest_interval(40, 0.05, 0.5, 0.94)
    widths = [r["mean_width"] for r in choice.rows]
    assert widths == sorted(widths)
    for row in choice.rows:
        assert row["mean_width"] == mean_width(40, 0.05, 0.5, interval=row["interval"])
        assert row["meets"] == (row["min_coverage"] >= 0.94)
    meeting = [r for r in choice.rows if r["meets"]]
    assert choice.best == meeting[0]["interval"]
    assert choice.best == "wilson_cc"  # computed, regression value
    assert "is wilson_cc (mean expected width 0.2724)" in choice.explain()


def test_shortest_interval_always_has_clopper_pearson_at_the_nominal_floor():
    # Theorem: Clopper-Pearson keeps the nominal level, so a floor <= level is always met.
    for n, band in ((5, (0.01, 0.99)), (60, (0.3, 0.3)), (200, (0.001, 0.02))):
        choice = shortest_interval(n, *band, 0.95)
        assert choice.best is not None
    none = shortest_interval(10, 0.1, 0.9, 0.999, intervals=["wald", "wilson"])
    assert none.best is None and "no interval" in none.explain()


def test_errors_name_the_argument():
    with pytest.raises(
        ValueError, match=r"^`floor` must be in the open interval \(0, 1\); got 1\.5\.$"
    ):
        check_coverage(40, 0.05, 0.5, 1.5)
    with pytest.raises(
        ValueError, match=r"^`n_max` must be an integer from 1 to 100000; got 1000000\.$"
    ):
        coverage_min_n(0.05, 0.5, 0.9, n_max=10**6)
    with pytest.raises(ValueError, match=r"^`n_max` must be an integer >= 1; got 0\.$"):
        coverage_min_n(0.05, 0.5, 0.9, n_max=0)
    with pytest.raises(
        ValueError, match=r"^`p_lo` must be <= `p_hi`; got p_lo=0\.5 > p_hi=0\.05\.$"
    ):
        check_coverage(40, 0.5, 0.05, 0.9)
    with pytest.raises(ValueError, match=r"^`interval` must be one of 'wald', .*; got 'bogus'\.$"):
        shortest_interval(40, 0.05, 0.5, 0.9, intervals=["wilson", "bogus"])
    with pytest.raises(
        ValueError, match=r"^`intervals` must name at least one interval; got none\.$"
    ):
        shortest_interval(40, 0.05, 0.5, 0.9, intervals=[])
    with pytest.raises(
        ValueError, match=r"^`level` must be in the open interval \(0, 1\); got 0\.$"
    ):
        shortest_interval(40, 0.05, 0.5, 0.9, level=0)
