"""Region answers between the grid's points: random off-grid (n, p) against the engine."""

import numpy as np
import pytest

import atlas
from atlas import build_atlas
from atlas.query import Atlas
from atlas.regions import RuleWorst, admitted_runs, cell_edges, gap_certified
from atlas.rules import parse_rule
from atlas.tables import rule_audit


@pytest.fixture(scope="module")
def small():
    return Atlas(build_atlas(n="1:60,80,100,150,200", p="lin:0.05:0.95:19", methods="normal_cc",
                             progress=False))  # fmt: skip


def test_admitted_runs_scan_gaps():
    rule = parse_rule("n*p >= 5")
    # n*p >= 5 at p = 0.3 first holds at n = 17 (5 / 0.3 = 16.7), inside the gap 10..100.
    assert admitted_runs(rule, np.array([1, 10, 100]), 0.3) == [(17, 100)]
    assert admitted_runs(parse_rule("n < 0"), np.array([1, 10]), 0.3) == []


def test_open_gaps_merge_into_runs_at_one_p():
    # Adjacent open gaps at one p are one run in the JSON; a gap after a hole, or at another p,
    # starts a new one.
    worst = RuleWorst("normal_cc", "interval")
    worst.open_gaps = [(0.1, 10, 20), (0.1, 20, 30), (0.1, 40, 50), (0.2, 50, 60)]
    assert worst.open_runs() == [[0.1, 10, 30], [0.1, 40, 50], [0.2, 50, 60]]
    assert worst.as_dict()["open_gaps"] == worst.open_runs()
    assert "4 gap(s) between n = 10 and 60" in worst.checked()


def test_cell_edges_are_log_odds_midpoints():
    # logit(0.25) = (logit(0.1) + logit(0.5)) / 2 since logit(0.5) = 0 and logit(0.1) = -logit(0.9)
    # would give 0.25 only approximately: computed, regression value.
    edges = cell_edges(np.array([0.1, 0.5, 0.9]))
    assert edges[0] == 0.1 and edges[-1] == 0.9
    assert edges[1] == pytest.approx(0.25, abs=1e-12)


def test_audit_worst_not_contradicted_off_grid(small):
    rule = "n*p >= 5 and n*q >= 5"
    row = rule_audit(small, [rule], metrics=["interval"]).rows[0]  # off the grid by default
    assert row.checked is not None and row.checked.p_checked >= 19
    assert row.checked.as_dict()["open_gaps"] == []  # every gap certified or bisected here
    grid_row = rule_audit(small, [rule], metrics=["interval"], between=False).rows[0]
    assert row.worst_error >= grid_row.worst_error
    parsed = parse_rule(rule)
    rng = np.random.default_rng(10)
    n = rng.integers(1, 201, size=3000)
    p = rng.uniform(0.05, 0.95, size=3000)
    keep = parsed(n, p)
    n, p = n[keep], p[keep]
    assert n.size > 1000
    values = atlas.worst_error(n, p, method="normal_cc", metric="interval")
    assert float(values.max()) <= row.worst_error * (1 + 1e-9)


def test_safe_region_between_not_contradicted_off_grid(small):
    region = small.safe_region(0.01)  # off the grid by default
    assert "claim" in region.attrs and "checked" in region.attrs
    grid_only = small.safe_region(0.01, between=False)
    # The claim over whole cells is never weaker than the grid-point one.
    assert not bool((region.values & ~grid_only.values).any())
    edges = cell_edges(small.p)
    stop = np.append(small.n[1:], small.n[-1] + 1)
    rng = np.random.default_rng(11)
    i, j = np.nonzero(region.values)
    pick = rng.integers(0, i.size, size=2000)
    n = rng.integers(small.n[i[pick]], stop[i[pick]])  # any integer of the cell's n-range
    assert (n > small.n[i[pick]]).sum() > 100
    p = rng.uniform(edges[j[pick]], edges[j[pick] + 1])
    error, accuracy = atlas.worst_error(n, p, method="normal_cc", metric="interval",
                                        return_accuracy=True)  # fmt: skip
    assert float((error + accuracy).max()) <= 0.01


def test_gap_certified_follows_the_one_step_bound():
    # W(a + m) <= W(a) + 2 E + 2 m rho: with rho from atlas.bounds, the largest m certified.
    from atlas.bounds import step_bound

    a, p, upper, level = 10**6, 0.3, 0.0001, 0.001
    rho = float(step_bound("normal_cc", [a], p)[0])
    most = int((level - upper - 2e-12) / (2 * rho))  # E = 0 for normal_cc (monotone G)
    got = gap_certified("normal_cc", "interval", [a, a], [most, most + 2], p, [upper, upper],
                        level)  # fmt: skip
    assert got.tolist() == [True, False]
    assert gap_certified("camp_paulson", "interval", [a], [5], p, [0.0], 1.0).tolist() == [False]
    assert gap_certified("camp_paulson", "interval", [a], [0], p, [0.0], 1.0).tolist() == [True]


def test_safe_cells_count_cells_left_unchecked_without_a_step_bound():
    at = Atlas(build_atlas(n="1:20,40,80", p="0.3,0.5", methods="peizer_pratt", progress=False))
    region = at.safe_region(0.05, method="peizer_pratt")
    assert region.attrs["unchecked_cells"] >= 1
    assert "not checked for peizer_pratt" in region.attrs["checked"]


def test_safe_region_between_refuses_bad_tol(small):
    with pytest.raises(ValueError, match=r"`tol` must be a positive finite number; got -1\."):
        small.safe_region(-1, between=True)
