"""Tests of atlas.decision_rules: rules of thumb audited on tail errors and test sizes.

Sources: "definition" (the worst value recomputed from atlas.tail_error / atlas.test_size over
the admitted cells, both tested against mpmath in test_tails.py and test_sizes.py); "issue 11"
(5.8% at n = 50, p0 = 0.1, upper one-sided test at 5%).
"""

import json

import numpy as np
import pytest

import atlas
import atlas.grid
import atlas.rules
from atlas.cli import main
from atlas.decision_rules import size_rule_audit, tail_rule_audit

N_GRID = "1:40,log:40:3000:6"
P_GRID = "0.01,0.1,0.3,0.5,0.8"


def test_tail_audit_against_definition():
    rule = "n*p >= 5 and n*q >= 5"
    rows = tail_rule_audit(rule, alpha=[0.05, 0.001], n=N_GRID, p=P_GRID)
    n = atlas.grid.parse_n(N_GRID)
    p = atlas.grid.parse_p(P_GRID)
    nn, pp = np.meshgrid(n, p, indexing="ij")
    # Admission as the rule parser decides it (comparisons with its 1e-12 relative tolerance,
    # so that n p = 5 counts although 50 * 0.1 rounds to 5.000000000000001).
    admitted = atlas.rules.parse_rule(rule)(nn, pp)
    for row, alpha in zip(rows, [0.05, 0.001], strict=True):
        errors = atlas.tail_error(nn[admitted], pp[admitted], alpha)  # definition
        assert row.cells == int(admitted.sum())
        assert row.worst == errors.max()
        assert atlas.tail_error(row.worst_n, row.worst_p, alpha) == row.worst
        assert row.name == "np >= 5 and nq >= 5"  # the textbook name of the classic rule
    # A larger level admits fewer tails: the worst cannot grow.
    assert rows[0].worst <= rows[1].worst


def test_size_audit_against_definition_and_issue_figure():
    rows = size_rule_audit("n*p >= 5", alpha=0.05, alternative="greater", n="50", p="0.1")
    assert round(rows[0].worst, 3) == 0.058  # issue 11: 5.8%
    t = atlas.test_size(50, 0.1, 0.05, alternative="greater")  # definition
    assert (rows[0].worst, rows[0].exact_size) == (t.size, t.exact_size)
    assert rows[0].explain() == (
        "n*p >= 5 admits normal_cc greater test sizes up to 5.79% at nominal 5% (exact test "
        "there: 2.45%; at n = 50, p = 0.1; 1 cells)"
    )


def test_rule_admitting_nothing():
    row = tail_rule_audit("n > 10**6", alpha=0.01, n="1:5", p="0.5")[0]
    assert row.cells == 0 and row.worst is None
    assert row.explain().startswith("n > 10**6 admits no cell of the grid (")


@pytest.mark.parametrize(
    ("call", "kind", "message"),
    [
        (
            lambda: tail_rule_audit([]),
            ValueError,
            r"^`rules` must hold at least one rule; got an empty sequence\.$",
        ),
        (lambda: tail_rule_audit("n*p"), ValueError, r"^`rules` must be a condition"),
        (
            lambda: tail_rule_audit("n > 1", alpha=1.5),
            ValueError,
            r"^`alpha` must be in the open interval \(0, 1\); got 1\.5\.$",
        ),
        (
            lambda: size_rule_audit("n > 1", alternative="up"),
            ValueError,
            r"^`alternative` must be one of",
        ),
        (lambda: tail_rule_audit("n > 1", n="x"), ValueError, r"^`n` items must be"),
    ],
)
def test_errors(call, kind, message):
    with pytest.raises(kind, match=message):
        call()


def test_commands(capsys):
    argv = ["tail-rules", "--rule", "n*p >= 5", "--alpha", "0.01", "--n-grid", "10:20",
            "--p-grid", "0.5", "--json"]  # fmt: skip
    assert main(argv) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["rows"][0]["worst"] == max(
        atlas.tail_error(n, 0.5, 0.01)
        for n in range(10, 21)  # definition
    )
    assert main(["size-rules", "--rule", "n*p >= 5", "--alpha", "5%", "--alternative",
                 "greater", "--n-grid", "50", "--p-grid", "0.1"]) == 0  # fmt: skip
    out = capsys.readouterr().out.splitlines()
    assert out[0] == "audit grid: n: 1 value, 50; p: 1 value, 0.1; 1 (n, p) point"
    assert out[1].startswith("n*p >= 5 admits normal_cc greater test sizes up to 5.79%")
    assert main(["tail-rules", "--rule", "import os"]) == 2
    assert "approx-atlas: error: `--rule` is not a valid expression" in capsys.readouterr().err
