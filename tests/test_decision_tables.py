"""Tests of atlas.decision_tables and the tail-table and size-table commands.

Source of every expected value: "definition", the minimum n recomputed by atlas.tail_min_n /
atlas.size_min_n (themselves checked at every n in test_decisions.py).
"""

import json

import pytest

import atlas
from atlas.cli import main
from atlas.decision_tables import size_table, tail_table


def test_tail_table_cells_are_the_minimum_n():
    table = tail_table([0.5, 0.2], [0.2, 0.5], n_max=400, dense_to=400)
    for p, row in zip(table.ps, table.cells, strict=True):
        for tol, cell in zip(table.limits, row, strict=True):
            expected = atlas.tail_min_n(p, 0.01, tol, n_max=400, dense_to=400)  # definition
            assert (cell.n, cell.previous) == (expected.n, expected.previous)
    header, rows = table.to_rows()
    assert header == ["p", "0.5", "0.2"]
    assert rows[1][0] == "0.5"
    assert table.notes() == [
        "Each n: every integer from it to 400 is within the limit (each evaluated, or above "
        "400 covered by a proven bound) and the one before is not; > 400: not met at 400. "
        "Computed exactly on demand."
    ]


def test_size_table_text_forms():
    table = size_table([0.06, 0.055], [0.1], alternative="greater", n_max=3000, dense_to=100)
    cells = table.cells[0]
    for limit, cell in zip(table.limits, cells, strict=True):
        expected = atlas.size_min_n(
            0.1, 0.05, max_size=limit, alternative="greater", n_max=3000, dense_to=100
        )  # definition
        assert (cell.n, cell.previous) == (expected.n, expected.previous)
    csv_text = table.render("csv")
    assert csv_text.splitlines()[0] == "p,0.06,0.055"
    record = json.loads(table.render("json"))
    assert record["rows"][0]["min_n"] == [c.n for c in cells]
    md = table.render("md")
    assert "| p \\ largest size | 0.06 | 0.055 |" in md
    assert "covered by a proven bound" in md and "*" not in md.replace("**", "")
    assert record["rows"][0]["previous"] == [c.previous for c in cells]


def test_not_met_cell():
    table = tail_table([1e-4], [0.1], n_max=50, dense_to=50)
    assert table.to_rows()[1][0][1] == "> 50"


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: tail_table([], [0.1]), r"^`rel_tols` must hold at least one value"),
        (lambda: tail_table([0.1], []), r"^`ps` must hold at least one value"),
        (lambda: tail_table([-1], [0.1]), r"^`rel_tol` must be a positive finite number"),
        (lambda: size_table([1.5], [0.1]), r"^`max_sizes` must be in the open interval"),
        (lambda: size_table([0.06], [0.1]).render("xml"), r"^`format` must be one of"),
    ],
)
def test_errors(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_commands(capsys, tmp_path):
    target = tmp_path / "t.csv"
    argv = ["tail-table", "--p", "0.5", "--rel-tol", "50%,0.2", "--n-max", "300", "--format",
            "csv", "-o", str(target)]  # fmt: skip
    assert main(argv) == 0
    assert capsys.readouterr().out.strip() == str(target)
    expected = [atlas.tail_min_n(0.5, 0.01, t, n_max=300).n for t in (0.5, 0.2)]  # definition
    assert target.read_text().splitlines()[1] == f"0.5,{expected[0]},{expected[1]}"
    assert main(argv) == 2  # exists, no --force
    assert "pass --force" in capsys.readouterr().err
    assert main(["size-table", "--p0", "0.1", "--max-size", "0.055", "--n-max", "200",
                 "--alternative", "greater", "--format", "json"]) == 0  # fmt: skip
    record = json.loads(capsys.readouterr().out)
    assert record["rows"][0]["min_n"] == [
        atlas.size_min_n(0.1, 0.05, max_size=0.055, alternative="greater", n_max=200).n
    ]
    assert main(["size-table", "--format", "xml"]) == 2
    assert "`--format` must be one of 'csv', 'md', 'json'; got 'xml'." in capsys.readouterr().err
