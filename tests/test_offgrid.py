"""Region and minimum-n answers of the embedded default atlas against the engine off the grid.

Thousands of random (n, p) with p off the grid (inside its range) and integer n between grid n
are drawn; at each, the engine's error + accuracy must not contradict the answer. The draws
lean towards where a contradiction would show: cells beside unsafe ones, the rules' boundaries,
the integers just above a minimum n. A larger run: build_scripts/check_offgrid.py.
"""

import numpy as np
import pytest

import atlas
from atlas.regions import admitted_runs, cell_edges
from atlas.rules import CLASSIC_RULES, parse_rule
from atlas.tables import rule_audit


@pytest.fixture(scope="module")
def default():
    return atlas.open_atlas()


def _upper(n, p, method="normal_cc", metric="interval"):
    error, accuracy = atlas.worst_error(n, p, method=method, metric=metric, return_accuracy=True)
    return np.asarray(error) + np.asarray(accuracy)


def _off_grid(rng, lo, hi, grid_p, size):
    """Random p in [lo, hi], uniform in log-odds, none of them a grid p."""
    t = rng.uniform(np.log(lo / (1 - lo)), np.log(hi / (1 - hi)), size=size)
    p = 1.0 / (1.0 + np.exp(-t))
    assert not np.isin(p, grid_p).any()
    return p


def test_safe_region_holds_off_the_grid(default):
    method, metric, tol = "normal_cc", "interval", 0.01
    region = default.safe_region(tol, method=method, metric=metric).values
    n_axis, p_axis = default.n, default.p
    edges = cell_edges(p_axis)
    stop = np.append(n_axis[1:], n_axis[-1] + 1)
    unsafe = ~region
    beside = np.zeros_like(region)
    beside[:, :-1] |= unsafe[:, 1:]
    beside[:, 1:] |= unsafe[:, :-1]
    beside[:-1] |= unsafe[1:]
    beside[1:] |= unsafe[:-1]
    rng = np.random.default_rng(1010)
    checked = 0
    for mask, size in ((region & beside, 1200), (region, 400)):
        i, j = np.nonzero(mask)
        pick = rng.integers(0, i.size, size=size)
        i, j = i[pick], j[pick]
        n = rng.integers(n_axis[i], stop[i])
        p = rng.uniform(edges[j], edges[j + 1])
        p = np.where(np.isin(p, p_axis), np.nextafter(p, 1.0), p)
        assert (n_axis[i] < n).sum() > 50  # many n between grid n
        upper = _upper(n, p, method, metric)
        assert not (upper > tol).any(), list(zip(n[upper > tol], p[upper > tol], strict=True))
        checked += size
    assert checked == 1600


def test_rule_audit_holds_off_the_grid(default):
    audit = rule_audit(default, methods=["normal_cc"], metrics=["interval"], tols=[0.01],
                       rules=CLASSIC_RULES)  # fmt: skip
    rng = np.random.default_rng(1011)
    n_axis, p_axis = default.n, default.p
    for rule_text, row in zip(CLASSIC_RULES, audit.rows, strict=True):
        rule = parse_rule(rule_text)
        assert row.checked is not None and row.worst_error is not None
        p = _off_grid(rng, p_axis[0], p_axis[-1], p_axis, 40)
        ns, ps = [], []
        for x in p.tolist():
            runs = admitted_runs(rule, n_axis, x)
            if not runs:
                continue
            first, last = runs[0]
            # The boundary (the first admitted integers) and integers spread over the run.
            ns += [first + k for k in range(6) if first + k <= last]
            spread = np.exp(rng.uniform(np.log(first), np.log(last), size=6)).astype(np.int64)
            ns += spread.tolist()
            ps += [x] * (len(ns) - len(ps))
        n, p = np.array(ns), np.array(ps)
        assert rule(n, p).all() and n.size > 300
        errors = atlas.worst_error(n, p, method="normal_cc", metric="interval")
        assert float(errors.max()) <= row.worst_error * (1 + 2.0**-23) + 1e-12, rule_text


@pytest.mark.parametrize(("p", "tol"), [(0.0123, 0.01), (0.2718, 0.001), (0.8765, 0.005)])
def test_min_n_holds_off_the_grid(default, p, tol):
    answer = default.threshold(p, tol, runs=False)
    assert answer.exact and answer.upto is None and p not in default.p
    n_star = answer.n
    # The integer below N fails; integers from N on (near N, and spread up to 1e8) are within.
    assert _upper(n_star - 1, p) > tol
    rng = np.random.default_rng(int(p * 1e4))
    near = n_star + np.arange(0, 200)
    far = np.exp(rng.uniform(np.log(n_star), np.log(1e8), size=200)).astype(np.int64)
    n = np.concatenate([near, far])
    assert not (_upper(n, p) > tol).any()


def test_min_n_over_holds_off_the_grid(default):
    lo, hi = float(default.p[60]), float(default.p[63])  # about 0.038 and 0.05
    answer = default.threshold_over(lo, hi, 0.005)
    rng = np.random.default_rng(1012)
    p = _off_grid(rng, lo, hi, default.p, 300)
    n = answer.n + rng.integers(0, 2000, size=300)
    assert not (_upper(n, p) > 0.005).any()
    # The answer is needed: at the p that decides it, the integer below fails.
    assert _upper(answer.n - 1, answer.worst_p) > 0.005


def test_issue_examples_of_minimum_n(default):
    # Every integer from N on within tol, the integer below not: the issue's examples, found by
    # evaluating every integer with the engine (issue 10 of this project).
    assert default.min_n(0.01, 0.01) == 9376
    assert default.min_n(0.05, 0.005) == 6456
    assert default.min_n(0.3, 0.001) == 7127
