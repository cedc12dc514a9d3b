"""Tests for atlas.tables: threshold tables and rule audits, their text, and their commands."""

import csv
import io
import json
import os

import numpy as np
import pytest
from numpy.testing import assert_allclose

from atlas import build_atlas, tables
from atlas.cli import main
from atlas.engine import worst_error
from atlas.rules import AUDIT_RULES, CLASSIC_RULES, NP5, SKEWNESS, THREE_SIGMA

TOLS = (0.01, 0.005, 0.001)
PS = (0.01, 0.05, 0.1, 0.3, 0.5)  # all on the chart atlas's p axis


# ---- threshold tables ----


def test_table_is_the_query_api(chart_atlas):
    table = tables.threshold_table(chart_atlas, TOLS, PS, method="edgeworth_cc", metric="cdf")
    assert table.tols == TOLS and table.ps == PS
    for p, row in zip(PS, table.min_n, strict=True):
        for tol, value in zip(TOLS, row, strict=True):
            assert value == chart_atlas.min_n(p, tol, method="edgeworth_cc", metric="cdf")
    assert table.n_max == 100000 and table.dense_n == 30  # the chart atlas's grid


@pytest.mark.parametrize("method", ["normal_cc", "poisson"])
def test_table_against_the_engine(chart_atlas, method):
    # Brute force at the integers around each entry: N - 1 exceeds tol (the engine), N and the
    # integers after it up to 2 N are within it; None when the atlas's end fails (the cube).
    table = tables.threshold_table(chart_atlas, TOLS, PS, method=method)
    ds = chart_atlas.dataset
    for i, (p, row) in enumerate(zip(PS, table.min_n, strict=True)):
        column = ds["interval_error"].sel(approximation=method, p=p).values
        for j, (tol, value) in enumerate(zip(TOLS, row, strict=True)):
            if value is None:
                assert column[-1] > tol
                continue
            if (i, j) in table.partial:
                continue
            ints = np.unique(np.linspace(value, 2 * value, 200).astype(np.int64))
            assert (worst_error(ints, p, method=method) <= tol).all()
            assert value == 1 or worst_error(value - 1, p, method=method) > tol


def test_table_at_one_half_from_the_engine(chart_atlas):
    table = tables.threshold_table(chart_atlas, [0.01], [0.5])
    (n_star,) = table.min_n[0]
    # REFERENCES.md fact 1 (common teaching fact): W(n, 1/2) <= 0.01 for every n >= 10.
    assert n_star <= 10
    # Within the dense part of the grid (every n to 30) n* is exact: the engine, not the cube.
    errors = worst_error(np.arange(1, 31), 0.5, method="normal_cc")
    assert (errors[n_star - 1 :] <= 0.01).all() and errors[n_star - 2] > 0.01


def test_table_formats(chart_atlas):
    table = tables.threshold_table(chart_atlas, TOLS + (1e-4,), PS, method="poisson")
    tols = TOLS + (1e-4,)
    # CSV: one row per (p, tol), and every cell says what it means: min_n is an integer or
    # "> 100000" (not reached on a grid ending at 10^5), basis says on what it rests.
    rows = list(csv.reader(io.StringIO(table.to_csv())))
    assert rows[0] == ["p", "tol", "min_n", "basis"]

    def code(v, where):
        if v is None:
            return "not_reached"
        if where in table.unresolved:
            return "below_resolution"
        if where in table.partial:
            return "evaluated_only"
        return "to_atlas_end" if where in table.bounded else "exact"

    expected = []
    for i, (p, values) in enumerate(zip(PS, table.min_n, strict=True)):
        for j, (tol, v) in enumerate(zip(tols, values, strict=True)):
            shown = "> 100000" if v is None else str(v)
            expected.append([repr(p), repr(tol), shown, code(v, (i, j))])
    assert rows[1:] == expected
    assert all(cell != "" for row in rows for cell in row)
    # normal_cc reaches 0.01 at every integer from its entry on (exact) and never reaches 1e-4
    # at p = 0.01 on a grid ending at 10^5 (the default atlas needs n > 10^5 for 1e-3 there).
    mixed = tables.threshold_table(chart_atlas, [0.01, 1e-4], [0.01, 0.5])
    bases = [row[3] for row in csv.reader(io.StringIO(mixed.to_csv()))][1:]
    assert {"exact", "not_reached"} <= set(bases)
    record = json.loads(table.to_json())
    assert record["min_n"] == [list(r) for r in table.min_n]
    assert record["basis"] == [
        [code(v, (i, j)) for j, v in enumerate(row)] for i, row in enumerate(table.min_n)
    ]
    assert set(record["basis_meanings"]) == {"exact", "evaluated_only", "to_atlas_end",
                                             "below_resolution", "not_reached"}  # fmt: skip
    assert "every integer n from the entry on" in record["basis_meanings"]["exact"]
    assert "100000" in record["basis_meanings"]["not_reached"]
    for row, marks in zip(record["min_n"], record["basis"], strict=True):
        for v, mark in zip(row, marks, strict=True):
            assert (v is None) == (mark == "not_reached")
    assert any(v is None for row in table.min_n for v in row)  # Poisson never reaches 1e-4 here
    assert record["method"] == "poisson" and record["metric"] == "interval"
    assert record["tols"] == list(TOLS) + [1e-4] and record["n_max"] == 100000
    markdown = table.to_markdown()
    assert markdown.startswith("### Minimum n for poisson, interval error\n")
    assert "| p | tol 0.01 | tol 0.005 | tol 0.001 | tol 1e-4 |" in markdown
    assert "> 10⁵" in markdown  # None: not reached on a grid that ends at 10^5
    assert "†" not in markdown and "grid's n" not in markdown
    assert "within the tolerance at every integer n >= N" in markdown
    for i, row in enumerate(table.min_n):
        for j, value in enumerate(row):
            if value is not None:
                mark = " ‡" if (i, j) in table.partial else (" §" if (i, j) in table.bounded
                                                               else "")  # fmt: skip
                assert f"{value:,}{mark} |" in markdown
    assert table.render("md") == markdown
    with pytest.raises(ValueError, match=r"^`format` must be one of 'csv', 'md', 'json'; got "
                                         r"'xml'\.$"):  # fmt: skip
        table.render("xml")


def test_table_writes_p_as_typed(chart_atlas):
    # A p near 1 keeps its digits (0.9999999 is not rounded to 1) in every format.
    table = tables.threshold_table(chart_atlas, [0.01], [1 / 3, 0.9999999])
    assert "\n| 0.9999999 | " in table.to_markdown() and "\n| 1 | " not in table.to_markdown()
    assert "0.3333333333333333" in table.to_markdown()
    assert [row[0] for row in csv.reader(io.StringIO(table.to_csv()))][1:] == [
        "0.3333333333333333", "0.9999999"]  # fmt: skip
    assert json.loads(table.to_json())["ps"] == [1 / 3, 0.9999999]


def test_table_refuses(chart_atlas):
    with pytest.raises(ValueError, match=r"^`tols` must hold numbers in \(0, 1\); got 1\.5\.$"):
        tables.threshold_table(chart_atlas, [0.01, 1.5], PS)
    with pytest.raises(ValueError, match=r"^`ps` must hold at least one number"):
        tables.threshold_table(chart_atlas, TOLS, [])
    with pytest.raises(ValueError, match=r"^`metric` must be one of 'interval', 'cdf'"):
        tables.threshold_table(chart_atlas, TOLS, PS, metric="tail")
    with pytest.raises(ValueError, match=r"^`method` must be one of "):
        tables.threshold_table(chart_atlas, TOLS, PS, method="bogus")


# ---- rule audits ----


def _brute_masks(n, p):
    """The classic rules written out directly in numpy, with the decimal boundaries kept."""
    q = 1.0 - p
    slack = 1e-9  # grid products on a boundary are within 1e-15 of it, others far from it
    return {
        CLASSIC_RULES[0]: (n * p >= 5 - slack) & (n * q >= 5 - slack),
        CLASSIC_RULES[1]: (n * p >= 10 - slack) & (n * q >= 10 - slack),
        CLASSIC_RULES[2]: n * p * q > 9 + slack,
        CLASSIC_RULES[3]: n * p * q >= 5 - slack,
        SKEWNESS: (n > 5) & (np.abs(q - p) / np.sqrt(n * p * q) < 0.3 - slack),
        THREE_SIGMA: (n > 9 * q / p + slack) & (n > 9 * p / q + slack),
        "n*p*q >= 25 or n > 50000": (n * p * q >= 25 - slack) | (n > 50000),
    }


def test_audit_against_brute_force(chart_atlas):
    ds = chart_atlas.dataset
    n = ds["n"].values.astype(float)[:, None]
    p = ds["p"].values[None, :]
    masks = _brute_masks(n, p)
    # The slack is safe only if no product lies between 1e-12 and 1e-9 of a boundary.
    for value in (n * p, n * (1 - p), n * p * (1 - p)):
        for c in (5, 9, 10, 25):
            gap = np.abs(value - c) / c
            assert not ((gap > 1e-12) & (gap < 1e-9)).any()
    audit = tables.rule_audit(chart_atlas, list(masks), tols=TOLS, between=False)  # grid only
    assert len(audit.rows) == len(masks) * 3 * 2
    assert audit.grid_cells == n.size * p.size
    for row in audit.rows:
        mask = np.broadcast_to(masks[row.rule], (n.size, p.size))
        values = ds[f"{row.metric}_error"].sel(approximation=row.method).values
        inside = values[mask]
        assert row.cells == inside.size > 0
        assert row.worst_error == inside.max()
        i, j = np.argwhere(mask & (values == inside.max()))[0]
        assert (row.worst_n, row.worst_p) == (int(n[i, 0]), float(p[0, j]))
        assert_allclose(row.shares, [np.mean(inside <= t) for t in TOLS], rtol=0, atol=0)
    assert [r.name for r in audit.rows[:6]] == ["np >= 5 and nq >= 5"] * 6


def test_audit_known_value():
    ds = build_atlas(n="9,10,20,40", p="0.5", methods="normal_cc", progress=False)
    (row,) = tables.rule_audit(ds, [NP5], metrics="interval").rows
    assert (row.cells, row.worst_n, row.worst_p) == (3, 10, 0.5)  # n = 9 fails np >= 5
    assert_allclose(row.worst_error, 0.005372, atol=5e-7)  # W(10, 1/2), REFERENCES.md fact 1
    assert row.shares == (1.0, 2 / 3, 0.0)  # W(20, 1/2) = 0.002782 (REFERENCES.md); W(40) > 1e-3


def test_audit_of_an_empty_region(chart_atlas):
    audit = tables.rule_audit(chart_atlas, ["n > 1e9"], methods=["poisson"], metrics=["cdf"])
    (row,) = audit.rows
    assert (row.cells, row.worst_error, row.worst_n, row.worst_p) == (0, None, None, None)
    assert row.shares == (None, None, None)
    assert "| n > 1e9 | poisson | cdf | 0 | — | — | — | — | — | — |" in audit.to_markdown()
    record = json.loads(audit.to_json())
    assert record["rows"][0]["worst_error"] is None
    assert record["rows"][0]["share_within"] == {"0.01": None, "0.005": None, "0.001": None}


def test_audit_formats(chart_atlas):
    audit = tables.rule_audit(chart_atlas, methods=["normal_cc"], metrics=["interval"])
    markdown = audit.render("md")
    assert markdown.startswith("### Rules of thumb: the worst error each admits\n")
    assert ("| rule | method | metric | cells | worst error | at n | at p | ≤ 0.01 | ≤ 0.005 | "
            "≤ 0.001 |") in markdown  # fmt: skip
    for row in audit.rows:
        open_mark = " †" if tables._left_open(row) else ""  # integers left unchecked: marked
        name = tables.escape_markdown(row.name)  # the skewness rule's |q - p| is escaped
        assert (f"| {name} | normal_cc | interval | {row.cells:,} | "
                f"{row.worst_error:.3g}{open_mark} |") in markdown  # fmt: skip
    record = json.loads(audit.render("json"))
    assert [r["rule"] for r in record["rows"]] == list(AUDIT_RULES)
    assert record["rows"][2]["name"] == "npq > 9"
    assert record["rows"][4]["source"].startswith("Box, Hunter and Hunter")
    assert "- np - 3 sqrt(npq) > 0 and np + 3 sqrt(npq) < n: common practice, no source." in (
        markdown
    )
    assert record["rows"][0]["worst_error"] == audit.rows[0].worst_error
    with pytest.raises(ValueError, match=r"^`format` must be one of 'md', 'json'; got 'csv'\.$"):
        audit.render("csv")


def test_audit_refuses(chart_atlas):
    with pytest.raises(ValueError, match=r"^`rule` may not contain a function call"):
        tables.rule_audit(chart_atlas, ["abs(n) > 1"])
    with pytest.raises(ValueError, match=r"^`rules` must hold at least one rule"):
        tables.rule_audit(chart_atlas, [])
    with pytest.raises(ValueError, match=r"^`methods` must be one of 'normal_cc', "):
        tables.rule_audit(chart_atlas, methods=["normal"])
    with pytest.raises(ValueError, match=r"^`metric` must be one of"):
        tables.rule_audit(chart_atlas, metrics=["pdf"])
    with pytest.raises(ValueError, match=r"^`tols` must hold numbers in \(0, 1\); got 0\.0\.$"):
        tables.rule_audit(chart_atlas, tols=[0])


# ---- the command line ----


def test_cli_table(chart_atlas, capsys, tmp_path):
    args = ["table", "--atlas", str(chart_atlas.path), "--tol", "0.01,0.001", "--p", "0.1,0.5",
            "--method", "edgeworth_cc"]  # fmt: skip
    assert main([*args, "--format", "csv"]) == 0
    out = capsys.readouterr().out
    expected = tables.threshold_table(chart_atlas, [0.01, 0.001], [0.1, 0.5],
                                      method="edgeworth_cc")  # fmt: skip
    assert out == expected.to_csv()
    assert main([*args, "--format", "json", "-o", str(tmp_path / "t.json")]) == 0
    assert capsys.readouterr().out.strip() == str(tmp_path / "t.json")
    assert json.loads((tmp_path / "t.json").read_text())["min_n"] == [
        list(r) for r in expected.min_n]  # fmt: skip
    assert main([*args]) == 0  # Markdown by default
    assert capsys.readouterr().out == expected.to_markdown()


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["table", "--format", "xml"], "`--format` must be one of 'csv', 'md', 'json'; got 'xml'."),
        (["table", "--tol", "0.01,x"],
         "`--tol` must be comma-separated numbers such as 0.01,0.005; got '0.01,x'."),
        (["table", "--p", "0.5,1.5"], "`--p` must hold numbers in (0, 1); got 1.5."),
        (["table", "--p", "0.5,3/2"], "`--p` must hold numbers in (0, 1); got 1.5."),
        (["table", "--p", "0.5,half"],
         "`--p` is not a number: got 'half' (write 0.05, 1/20 or 5%)."),
        (["rules", "--rule", "abs(n) > 1"], "`--rule` may not contain a function call; allowed: "
         "numbers, n, p, q, + - * / **, unary -, < <= > >= == !=, and, or, not, parentheses. "
         "Got 'abs(n) > 1'."),
        (["rules", "--format", "csv"], "`--format` must be one of 'md', 'json'; got 'csv'."),
        (["rules", "--method", "normal"], "`--method` must be one of 'normal_cc', 'edgeworth_cc', "
         "'poisson' (the atlas's methods); got 'normal'."),
    ],
)  # fmt: skip
def test_cli_errors(chart_atlas, capsys, tmp_path, monkeypatch, args, message):
    monkeypatch.chdir(tmp_path)
    assert main([*args, "--atlas", str(chart_atlas.path)]) == 2
    assert capsys.readouterr().err == f"approx-atlas: error: {message}\n"
    assert os.listdir(tmp_path) == []


def test_cli_rules_grid_only(chart_atlas, capsys):
    assert main(["rules", "--atlas", str(chart_atlas.path), "--method", "normal_cc",
                 "--metric", "interval", "--format", "json", "--grid-only"]) == 0  # fmt: skip
    record = json.loads(capsys.readouterr().out)
    assert all("checked" not in r for r in record["rows"])  # the grid cells only
    expected = tables.rule_audit(chart_atlas, methods=["normal_cc"], metrics=["interval"],
                                 between=False)  # fmt: skip
    assert record == json.loads(expected.to_json())
    assert main(["rules", "--atlas", str(chart_atlas.path), "--method", "normal_cc",
                 "--metric", "interval", "--format", "json"]) == 0  # fmt: skip
    default = json.loads(capsys.readouterr().out)
    assert all("checked" in r for r in default["rows"])  # off the grid by default
    assert all(d["worst_error"] >= g["worst_error"]
               for d, g in zip(default["rows"], record["rows"], strict=True))  # fmt: skip


def test_cli_rules(chart_atlas, capsys):
    assert main(["rules", "--atlas", str(chart_atlas.path), "--rule", "n*p*q >= 25",
                 "--method", "normal_cc", "--metric", "cdf", "--format", "json",
                 "--tol", "0.01"]) == 0  # fmt: skip
    record = json.loads(capsys.readouterr().out)
    assert [r["rule"] for r in record["rows"]] == [*AUDIT_RULES, "n*p*q >= 25"]
    assert {r["method"] for r in record["rows"]} == {"normal_cc"}
    assert {r["metric"] for r in record["rows"]} == {"cdf"}
    expected = tables.rule_audit(
        chart_atlas,
        [*AUDIT_RULES, "n*p*q >= 25"],
        methods=["normal_cc"],
        metrics=["cdf"],
        tols=[0.01],
    )
    assert record == json.loads(expected.to_json())


def test_audit_cells_keep_a_long_grid_p_short_and_marked():
    # A logit-spaced grid p has 16 digits; the printed column shows 4 and says it is rounded.
    from atlas.notation import format_p_brief

    assert format_p_brief(0.004987164074638706) == "≈0.004987"
    assert format_p_brief(0.0005) == "0.0005"  # a round p is shown whole, unmarked
    assert format_p_brief(0.99999994) == "≈0.9999999"  # never "≈1" for a p below 1
    assert format_p_brief(1e-7) == "1e-7"


def test_an_error_just_above_a_tolerance_never_reads_as_it():
    from atlas.notation import format_beside

    assert format_beside(0.0010000001, 0.001) == "0.0010000001"  # 4 digits would read "0.001"
    assert format_beside(0.01113827, 0.01) == "0.01114"
    assert format_beside(0.5, 0.5) == "0.5"  # equal values: the value itself
