"""Tests for atlas.guarantees: threshold bands over p and the constants of rule families."""

import json
import math

import numpy as np
import pytest

from atlas import Atlas, build_atlas, save_atlas, worst_error
from atlas.cli import main
from atlas.guarantees import (
    FAMILIES,
    INSIDE,
    parse_family,
    rule_constants,
    threshold_bands,
)
from atlas.notation import bound_up

TOL = 0.01
P_AXIS = "0.2,0.3,0.4,0.5,0.6,0.7,0.8"


@pytest.fixture(scope="module")
def small():
    return Atlas(build_atlas(n="1:300", p=P_AXIS, methods="normal_cc,edgeworth_cc",
                             progress=False))  # fmt: skip


@pytest.fixture(scope="module")
def bands(small):
    return threshold_bands(small, TOL)


@pytest.fixture(scope="module")
def constants(small, bands):
    return rule_constants(small, TOL, bands=bands)


def _limit(bands, p):
    """The threshold a point is checked with: the largest of the bands it belongs to."""
    inside = (bands.edges[:-1] <= p) & (p <= bands.edges[1:])
    return int(bands.n_min[inside].max())


def test_bands_are_the_largest_exact_minimum_n_of_their_points(small, bands):
    # Each band's threshold is the largest of Atlas.min_n at its ends, its inside point and the
    # p the refinement added, times 1 + margin rounded up.
    added = bands.refinement.added
    assert len(bands.points) == 7 + 6 * INSIDE + int(added.sum())
    assert bands.edges.tolist() == small.p.tolist()
    assert added.sum() > 0 and (added <= bands.refinement.budget).all()
    for j in range(6):
        inside = [t for t in bands.points if bands.edges[j] <= t.p <= bands.edges[j + 1]]
        assert len(inside) == 2 + INSIDE + added[j]
        expected = max(small.min_n(t.p, TOL) for t in inside)
        assert bands.n_min[j] == math.ceil(expected * (1 + bands.margin))
    assert bands.n_max.tolist() == [0] * 6  # every band reached beyond the end (Berry-Esseen)


def test_refinement_only_raises_thresholds_and_says_so(small, bands):
    # budget=0 checks the grid p and one midpoint per band (no refinement): the refined bands
    # check those and more, so no threshold falls; the words state the budget and the depth.
    plain = threshold_bands(small, TOL, budget=0)
    assert len(plain.points) == 7 + 6 * INSIDE and plain.refinement.added.sum() == 0
    assert (bands.n_min >= plain.n_min).all()
    text = bands.checked()
    assert f"{int(bands.refinement.added.sum())} added by bisection in log-odds" in text
    assert "at most 4 per band and 3 bisections deep" in text
    assert "the p between the points checked are not computed" in text
    # Planted margin: 5% on every band's largest N, rounded up.
    wide = threshold_bands(small, TOL, margin=0.05)
    for j in range(6):
        inside = [t.n for t in wide.points if wide.edges[j] <= t.p <= wide.edges[j + 1]]
        assert wide.n_min[j] == math.ceil(max(inside) * 1.05)
    assert "times 1.05 (the safety margin)" in wide.checked()
    with pytest.raises(ValueError, match=r"`margin` must be None or a number in \[0, 1\); got -1"):
        threshold_bands(small, TOL, margin=-1)


def test_bands_never_call_an_unsafe_pair_safe(small, bands):
    # Random off-grid (n, p) with n near each band's threshold: every pair called safe is within
    # tol by the engine (error plus its accuracy).
    rng = np.random.default_rng(13)
    p = 1.0 / (1.0 + np.exp(-rng.uniform(np.log(0.2 / 0.8), np.log(0.8 / 0.2), 2000)))
    n = rng.integers(1, 400, p.size)
    called = bands.within(n, p)
    err = worst_error(n, p, return_accuracy=True)
    assert called.any() and not (called & (err.error + err.accuracy > TOL)).any()
    # Below a band's threshold is refused, and so is p outside the atlas's range.
    assert not bands.within(bands.n_min - 1, bands.edges[:-1]).any()
    assert not bands.within(10**6, [0.1, 0.9, float("nan")]).any()


def test_npq_constant_is_the_closed_form(constants, bands):
    # n p q >= c admits no n below the band's threshold N at p iff c > (N - 1) p q: the
    # constant is the largest (N - 1) p q over the points checked, rounded up to 3 digits.
    # (Each point is checked with the larger N of the bands it ends.)
    worst = max((_limit(bands, t.p) - 1) * t.p * (1 - t.p) for t in bands.points)
    row = constants.rows[0]
    assert row.family.text == "n*p*q >= c"
    expected = bound_up(worst, 3)
    assert row.constant == (expected if expected > worst else bound_up(expected * 1.001, 3))


def test_family_pairs_written_two_ways_agree(constants):
    by_name = {row.family.name: row for row in constants.rows}
    assert [name for _, name in FAMILIES] == list(by_name)
    assert by_name["npq >= c"].constant == by_name["n >= c/(pq)"].constant
    assert by_name["np >= c and nq >= c"].constant == by_name["n min(p, q) >= c"].constant


def test_constants_guarantee_and_give_away(constants, small):
    skewness = constants.rows[4]
    # At p = 1/2 the skewness is 0 for every n, so the family admits n = 6 there whatever c;
    # the band [0.4, 0.5] needs n >= 23: no c guarantees tol (c -> 0 would admit nothing).
    assert skewness.family.name.startswith("n > 5 and |q - p|") and skewness.constant is None
    assert skewness.worst is None and skewness.guaranteed is None
    for row in constants.rows[:4] + constants.rows[5:]:
        assert row.guaranteed and row.worst.worst <= TOL
        assert row.at_points <= row.constant  # the points' own thresholds need no more
        assert 0.0 < row.refused < 1.0
        # One step looser (the last digit) is not a guarantee at the points checked.
        looser = row.family.at(row.constant * (1 - 2e-3))
        checks = [(_limit(constants.bands, t.p) - 1, t.p) for t in constants.bands.points]
        assert looser(*np.array(checks).T).any()
    assert 0.0 <= constants.bands_refused < constants.rows[0].refused
    assert "| n > 5 and |q - p|/sqrt(npq) < c | none |" in constants.to_markdown()


def test_a_family_that_admits_more_as_c_grows(small, bands, constants):
    # n p q >= 1/c admits more as c grows: the largest c that guarantees tol, rounded down;
    # the same rule as n p q >= c' with c' = 1/c, so 1/c is c' within their rounding.
    out = rule_constants(small, TOL, bands=bands, families=["n*p*q >= 1/c"])
    row = out.rows[0]
    assert row.stricter == "smaller" and row.guaranteed
    assert 1 / row.constant == pytest.approx(constants.rows[0].constant, rel=3e-3)
    rule = row.family.at(row.constant)
    for t in bands.points:
        assert not rule(np.arange(1, _limit(bands, t.p)), t.p).any()
    looser = row.family.at(row.constant * 1.003)
    assert any(looser(np.arange(1, _limit(bands, t.p)), t.p).any() for t in bands.points)


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("n*p >= 5", "`family` must hold the constant c"),
        ("n*p >= c +", "`family` is not a valid expression"),
        ("n*k >= c", "`family` may not contain the name 'k'"),
        ("n*p*c", "`family` must be a condition"),
    ],
)
def test_bad_families(text, message):
    with pytest.raises(ValueError, match=message):
        parse_family(text)


def test_bad_family_type_and_direction(small, bands):
    with pytest.raises(TypeError, match="`family` must be a str; got int"):
        parse_family(5)
    with pytest.raises(ValueError, match="`family` must admit more or fewer cells"):
        rule_constants(small, TOL, bands=bands, families=["n > 0 or c > 1e9"])
    with pytest.raises(ValueError, match="`bands` must answer the same question"):
        rule_constants(small, 0.005, bands=bands)


def test_cli_rule_constants(small, tmp_path, capsys):
    path = tmp_path / "small.nc"
    save_atlas(small.dataset, path)
    assert main(["rule-constants", "--tol", "0.01", "--atlas", str(path), "--json",
                 "--family", "n*p*q >= c"]) == 0  # fmt: skip
    record = json.loads(capsys.readouterr().out)
    assert record["rows"][0]["rule"] == f"n * p * q >= {record['rows'][0]['constant']}"
    assert record["rows"][0]["guaranteed"] is True
    assert main(["rule-constants", "--tol", "0.01", "--atlas", str(path)]) == 0
    text = capsys.readouterr().out
    assert "| npq >= c |" in text and "Caution:" in text
    assert main(["rule-constants", "--tol", "0.01", "--atlas", str(path),
                 "--family", "n > 5"]) == 2  # fmt: skip
    err = capsys.readouterr().err
    assert err.startswith("approx-atlas: error: `--family` must hold the constant c") and (
        err.count("\n") == 1
    )
    assert main(["rule-constants", "--tol", "-1", "--atlas", str(path)]) == 2
    assert "`--tol`" in capsys.readouterr().err


# ---- the metrics of tail p-values and tests (atlas.decision_constants) ----


def test_tail_constant_is_the_closed_form_on_the_audit_grid():
    from atlas.decision_constants import decision_rule_constants
    from atlas.decisions import tail_min_n

    ps = (0.2, 0.5)
    rows = decision_rule_constants("tail", 0.05, 0.1, families=["n*p*q >= c"], n="1:60",
                                   p=",".join(map(str, ps)), n_max=60)  # fmt: skip
    # n p q >= c admits no n below N(p) iff c > (N - 1) p q: the largest, rounded up.
    worst = max((tail_min_n(x, 0.05, 0.1, n_max=60).n - 1) * x * (1 - x) for x in ps)
    assert rows[0].constant == bound_up(worst * (1 + 1e-12), 3)
    assert rows[0].worst <= 0.1 and 0.0 < rows[0].refused < 1.0
    assert "every integer to 2,048 evaluated" in rows[0].checked
    assert "the rule checked at every integer n below each threshold" in rows[0].checked


@pytest.mark.parametrize("metric", ["tail", "size"])
def test_decision_constants_against_every_integer(metric):
    # Thresholds above dense_to (where the old ladder skipped integers): the constants of two
    # families equal the closed forms from the minimum n found by evaluating every integer n.
    from atlas.decision_constants import decision_rule_constants
    from atlas.sizes import test_size
    from atlas.tails import tail_error

    ps, n_max, alpha = (0.1, 0.3), 400, 0.05
    limit = 0.1 if metric == "tail" else 0.052
    rows = decision_rule_constants(metric, alpha, limit, n="1:400", p="0.1,0.3", n_max=n_max,
                                   dense_to=16, alternative="greater",
                                   families=["n*p*q >= c", "n*p >= c and n*q >= c"])  # fmt: skip
    worst_npq = worst_np = 0.0
    for x in ps:
        if metric == "tail":
            values = [tail_error(n, x, alpha) for n in range(1, n_max + 1)]
        else:
            values = [test_size(n, x, alpha, alternative="greater").size
                      for n in range(1, n_max + 1)]  # fmt: skip
        bad = [n for n, v in enumerate(values, 1) if not v <= limit]
        assert bad and bad[-1] < n_max and bad[-1] > 16  # a threshold above dense_to
        worst_npq = max(worst_npq, bad[-1] * x * (1 - x))  # c > (N - 1) p q at every p
        worst_np = max(worst_np, bad[-1] * min(x, 1 - x))
    assert rows[0].constant == bound_up(worst_npq * (1 + 1e-12), 3)
    assert rows[1].constant == bound_up(worst_np * (1 + 1e-12), 3)
    assert all(r.worst <= limit for r in rows)


def test_decision_constant_errors_and_cli(capsys):
    from atlas.decision_constants import decision_rule_constants

    with pytest.raises(ValueError, match="`metric` must be one of 'tail', 'size'; got 'cdf'"):
        decision_rule_constants("cdf", 0.05, 0.1)
    with pytest.raises(ValueError, match="`limit` must be given for the tail metric"):
        decision_rule_constants("tail", 0.05)
    assert main(["rule-constants", "--tol", "0.1", "--metric", "size"]) == 2
    assert capsys.readouterr().err == (
        "approx-atlas: error: `--alpha` must be given with --metric size.\n"
    )
    assert main(["rule-constants", "--tol", "0.1", "--metric", "tail", "--alpha", "2"]) == 2
    assert capsys.readouterr().err.startswith("approx-atlas: error: `--alpha` must be")
