"""Tests of the query, min-n, compare and demo commands, called in-process as main([...]).

Expected values come from the Python API on the same atlas (the CLI is a thin layer over it) or
from the engine by brute force (:func:`atlas.worst_error`), as named beside each check. The atlas
is the tiny one of tests/conftest.py.
"""

import json
import re

import numpy as np
import pytest
from numpy.testing import assert_allclose

from atlas import METHODS, cube, store, worst_error
from atlas.cli import main
from atlas.notation import format_bound
from atlas.query import open_atlas

# (source: the engine's float64 results are stored unchanged; rounding only)
SAME = 1e-12

QUERY_KEYS = {
    "safe": bool,
    "error": float,
    "tol": float,
    "margin": float,
    "method": str,
    "metric": str,
    "n": int,
    "p": float,
    "source": str,
    "worst_interval": list,
    "explain": str,
    "atlas": str,
    "error_digits": int,
    "accuracy": float,
    "resolved": bool,
}


@pytest.fixture(scope="module")
def path(small_atlas):
    return str(small_atlas["float64"])


@pytest.fixture(scope="module")
def at(small_atlas):
    opened = open_atlas(small_atlas["float64"])
    yield opened
    opened.close()


def run(capsys, *argv):
    """Run the CLI in-process; return (status, stdout, stderr)."""
    status = main(list(argv))
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def run_json(capsys, *argv):
    status, out, err = run(capsys, *argv, "--json")
    assert status == 0 and err == ""
    assert out.count("\n") == 1  # exactly one JSON object on one line
    return json.loads(out)


# --- query ------------------------------------------------------------------------------------


def test_query_human(capsys, path, at):
    status, out, err = run(capsys, "query", "--n", "50", "--p", "0.1", "--tol", "0.01",
                           "--atlas", path)  # fmt: skip
    assert status == 0 and err == ""
    v = at.is_safe(50, 0.1, 0.01)
    a, b = v.worst_interval
    assert out.splitlines() == [
        "Bin(n=50, p=0.1), normal_cc, interval error",
        f"  error           {v.error:.4g} (accuracy {format_bound(v.accuracy, 1)})",
        "  tolerance       0.01",
        f"  margin          {v.margin:.4g}  (tolerance - error - accuracy)",
        "  verdict         UNSAFE: the error exceeds the tolerance",
        f"  worst interval  P({a} <= X <= {b})",
        f"  source          atlas (a stored cell of {path})",
    ]


def test_query_json_schema_and_values(capsys, path, at):
    record = run_json(capsys, "query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--metric",
                      "cdf", "--atlas", path)  # fmt: skip
    assert set(record) == set(QUERY_KEYS)
    for key, kind in QUERY_KEYS.items():
        assert type(record[key]) is kind, key
    assert len(record["worst_interval"]) == 2
    assert all(type(x) is int for x in record["worst_interval"])
    v = at.is_safe(50, 0.1, 0.01, metric="cdf")
    assert record["error"] == v.error and record["safe"] is v.safe is False
    assert record["margin"] == v.margin and record["source"] == "atlas"
    assert (record["n"], record["p"], record["tol"]) == (50, 0.1, 0.01)
    assert (record["method"], record["metric"]) == ("normal_cc", "cdf")
    assert record["explain"] == v.explain() and record["atlas"] == path
    assert record["error_digits"] == 17  # a float64 atlas: every digit, as stored
    assert record["resolved"] is True and v.accuracy <= record["accuracy"] <= 1.1 * v.accuracy


def test_query_off_grid_is_computed(capsys, path):
    record = run_json(capsys, "query", "--n", "41", "--p", "0.123", "--tol", "0.05",
                      "--method", "edgeworth_cc", "--atlas", path)  # fmt: skip
    assert record["source"] == "computed"
    assert_allclose(record["error"], worst_error(41, 0.123, method="edgeworth_cc"), rtol=SAME)
    _, out, _ = run(capsys, "query", "--n", "41", "--p", "0.123", "--tol", "0.05", "--atlas", path)
    assert "computed exactly by the engine (not a cell of the atlas grid)" in out


def test_query_exit_statuses(capsys, path, at):
    error = at.error(50, 0.1)
    safe_tol, unsafe_tol = repr(error * 2), repr(error / 2)
    base = ["query", "--n", "50", "--p", "0.1", "--atlas", path]
    assert run(capsys, *base, "--tol", unsafe_tol)[0] == 0  # answered
    assert run(capsys, *base, "--tol", unsafe_tol, "--strict")[0] == 3  # unsafe
    assert run(capsys, *base, "--tol", safe_tol, "--strict")[0] == 0  # safe
    status, out, _ = run(capsys, *base, "--tol", unsafe_tol, "--strict", "--json")
    assert status == 3 and json.loads(out)["safe"] is False


def test_query_float32_atlas(capsys, small_atlas, at):
    path32 = str(small_atlas["float32"])
    argv = ["query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--atlas", path32]
    status, raw, _ = run(capsys, *argv, "--json")
    record = json.loads(raw)
    # float32 rounding, then 7 significant digits: relative error below 2**-24 + 5e-7
    assert_allclose(record["error"], at.error(50, 0.1), rtol=2.0**-24 + 5e-7)
    assert type(record["error"]) is float and record["error_digits"] == 7
    # The file holds 7 significant digits, and the JSON says no more (no 17-digit tail).
    stored = open_atlas(path32).error(50, 0.1)
    assert record["error"] == float(f"{stored:.7g}")
    assert re.search(r'"error": 0\.0\d{7}, ', raw)  # 0.0xxxxxxx: 7 significant digits
    assert len(repr(record["margin"]).lstrip("-0.")) <= 7
    # Computed off the grid: float64, every digit.
    off = run_json(capsys, "query", "--n", "51", "--p", "0.1", "--tol", "0.01", "--atlas", path32)
    assert off["source"] == "computed" and off["error_digits"] == 17
    assert off["error"] == worst_error(51, 0.1)


# --- min-n -------------------------------------------------------------------------------------


def test_min_n_json(capsys, path, at):
    record = run_json(capsys, "min-n", "--p", "0.5", "--tol", "0.01", "--atlas", path)
    assert record["min_n"] == at.min_n(0.5, 0.01) == 6  # brute force in tests/test_query.py
    assert record["every_integer"] is True and record["upto"] is None
    # computed, regression value: W(5, 1/2) = 0.01114 (tests/test_query.py)
    assert record["failing"]["n"] == 5 and round(record["failing"]["error"], 5) == 0.01114
    assert record["n_max"] == 5000 and "Berry-Esseen" in record["basis"]
    assert record["source"] == "atlas" and record["p"] == 0.5 and record["p_range"] is None
    assert record["runs"][-1] == {"first": 6, "last": record["runs"][-1]["last"], "within": True,
                                  "every_integer": True}  # fmt: skip
    off = run_json(capsys, "min-n", "--p", "0.2", "--tol", "0.005", "--atlas", path)
    assert off["min_n"] == at.min_n(0.2, 0.005) and off["source"] == "computed"


def test_min_n_human(capsys, path):
    status, out, err = run(capsys, "min-n", "--p", "0.5", "--tol", "0.01", "--atlas", path)
    assert status == 0 and err == ""
    lines = out.splitlines()
    assert lines[:2] == [
        "normal_cc interval error <= 0.01 at p = 0.5: from n = 6 on (every integer n from 6 on)",
        "  n = 5 is not within it (error 0.01114)",  # computed, regression value
    ]
    assert lines[2].startswith(
        "  basis: every integer n from 6 on is within the tolerance: 48 grid n"
    )
    assert "grid values" not in out and "only grid" not in out
    assert lines[-1] == f"  source: atlas (a stored cell of {path})"
    _, out, _ = run(capsys, "min-n", "--p", "0.5", "--tol", "1e-12", "--atlas", path)
    assert "no n from which on every n is within it" in out
    assert "    n = 1 to 5,000: not within the tolerance" in out


def test_min_n_range(capsys, path, at):
    record = run_json(capsys, "min-n", "--p-range", "0.05:0.5", "--tol", "0.02", "--atlas", path)
    assert record["min_n"] == at.min_n_over(0.05, 0.5, 0.02)
    assert record["p_range"] == [0.05, 0.5] and record["p"] is None
    assert {0.05, 0.1, 0.3, 0.5} <= set(record["p_checked"])  # the grid p of the range
    status, out, _ = run(capsys, "min-n", "--p-range", "0.05:0.5", "--tol", "0.02", "--atlas", path)
    assert status == 0 and "at every p in [0.05, 0.5]" in out
    assert "  p checked: " in out and "the grid's 4" in out
    # Fractions and percentages are read in --p-range.
    _, out, _ = run(capsys, "min-n", "--p-range", "50%:1/2", "--tol", "0.02", "--atlas", path)
    assert out.startswith("normal_cc interval error <= 0.02 at p = 0.5: from n = ")


# --- compare -----------------------------------------------------------------------------------


def test_compare(capsys, path, at):
    record = run_json(capsys, "compare", "--n", "50", "--p", "0.1", "--atlas", path)
    assert set(record) == {"n", "p", "metric", "source", "error_digits", "ranking"}
    assert record["error_digits"] == 17
    for item in record["ranking"]:
        assert set(item) == {"method", "error", "accuracy", "resolved", "rank", "tied_with"}
    assert [r["rank"] for r in record["ranking"]] == list(range(1, len(METHODS) + 1))
    ranking = [(r["method"], r["error"]) for r in record["ranking"]]
    assert ranking == at.best_method(50, 0.1)
    assert [e for _, e in ranking] == sorted(e for _, e in ranking)
    assert record["source"] == "atlas"
    status, out, _ = run(capsys, "compare", "--n", "50", "--p", "0.1", "--metric", "cdf",
                         "--atlas", path)  # fmt: skip
    lines = out.splitlines()
    assert status == 0 and len(lines) == 2 + len(METHODS)
    # computed, REFERENCES.md: peizer_pratt has the smallest max CDF error at (50, 0.1), 2.04e-4
    assert lines[1].split()[:2] == ["1", "peizer_pratt"]


def test_compare_off_grid(capsys, path):
    record = run_json(capsys, "compare", "--n", "77", "--p", "0.3", "--atlas", path)
    assert record["source"] == "computed"
    for item in record["ranking"]:  # brute force
        assert_allclose(item["error"], worst_error(77, 0.3, method=item["method"]), rtol=SAME)


# --- demo --------------------------------------------------------------------------------------


def test_demo_on_a_given_atlas(capsys, path, at):
    status, out, err = run(capsys, "demo", "--atlas", path)
    assert status == 0 and err == ""
    lines = out.splitlines()
    assert 4 <= len(lines) <= 8
    assert "invented scenario" in lines[0] and "n = 80 fasteners" in lines[0]
    assert f"  normal_cc: {at.is_safe(80, 0.025, 0.01).explain()}" in lines
    best, error = at.best_method(80, 0.025)[0]
    assert any(line.startswith(f"  best method here: {best}, error {error:.3g}") for line in lines)
    assert any(f"from n = {at.min_n(0.025, 0.01)} on (every integer n" in line for line in lines)
    assert lines[-1] == f"  caution: {cube.CAUTION}"


@pytest.mark.skipif(not store.default_path().exists(), reason="the embedded atlas is not built yet")
def test_demo_on_the_embedded_atlas(capsys):
    status, out, err = run(capsys, "demo")
    assert status == 0 and err == "" and "caution:" in out


def test_demo_without_the_embedded_atlas(capsys, monkeypatch, tmp_path):
    missing = tmp_path / "default_atlas.nc"
    monkeypatch.setattr(store, "default_path", lambda: missing)
    status, out, err = run(capsys, "demo")
    assert (status, out) == (2, "")
    assert err == (
        f"approx-atlas: error: the embedded atlas is missing: {str(missing)!r}; reinstall "
        "approx-atlas, or pass --atlas FILE.\n"
    )


# --- a user's mistakes: one line on stderr, exit status 2 ---------------------------------------

_METHODS = ", ".join(repr(m) for m in METHODS)


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["query", "--n", "50", "--p", "2", "--tol", "0.01"],
         "`--p` must be in the open interval (0, 1); got 2.0."),
        (["query", "--n", "-3", "--p", "0.1", "--tol", "0.01"],
         "`--n` must be an integer >= 1; got -3."),
        (["query", "--n", "2.5", "--p", "0.1", "--tol", "0.01"],
         "`--n` must be an integer >= 1; got 2.5."),
        (["query", "--n", "abc", "--p", "0.1", "--tol", "0.01"],
         "`--n` must be an integer >= 1; got 'abc'."),
        (["query", "--n", "50", "--p", "x", "--tol", "0.01"],
         "`--p` is not a number: got 'x' (write 0.05, 1/20 or 5%)."),
        (["query", "--n", "50", "--p", "1/0", "--tol", "0.01"],
         "`--p` is not a number: got '1/0' (write 0.05, 1/20 or 5%)."),
        (["query", "--n", "50", "--p", "nan", "--tol", "0.01"],
         "`--p` must be in the open interval (0, 1); got nan."),
        (["query", "--n", "50", "--p", "150%", "--tol", "0.01"],
         "`--p` must be in the open interval (0, 1); got 1.5."),
        (["query", "--n", "50", "--p", "4/3", "--tol", "0.01"],
         "`--p` must be in the open interval (0, 1); got 1.3333333333333333."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "0"],
         "`--tol` must be a positive finite number; got 0."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "-0.001"],
         "`--tol` must be a positive finite number; got -0.001."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "inf"],
         "`--tol` must be a positive finite number; got inf."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "tiny"],
         "`--tol` must be a positive finite number; got 'tiny'."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--method", "bogus"],
         f"`--method` must be one of {_METHODS}; got 'bogus'."),
        (["query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--metric", "max"],
         "`--metric` must be one of 'interval', 'cdf'; got 'max'."),
        (["min-n", "--p", "1.5", "--tol", "0.01"],
         "`--p` must be in the open interval (0, 1); got 1.5."),
        (["min-n", "--p", "half", "--tol", "0.01"],
         "`--p` is not a number: got 'half' (write 0.05, 1/20 or 5%)."),
        (["min-n", "--p", "0.5", "--tol", "0"],
         "`--tol` must be a positive finite number; got 0."),
        (["min-n", "--p", "0.5", "--tol", "0.01", "--method", "bogus"],
         f"`--method` must be one of {_METHODS}; got 'bogus'."),
        (["min-n", "--p-range", "0.5", "--tol", "0.01"],
         "`--p-range` must be LO:HI, such as 0.05:0.95; got '0.5'."),
        (["min-n", "--p-range", "0.6:0.4", "--tol", "0.01"],
         "`--p-range` LO:HI must have LO <= HI; got '0.6:0.4'."),
        (["min-n", "--p-range", "0.1:x", "--tol", "0.01"],
         "`--p-range` is not a number: got 'x' (write 0.05, 1/20 or 5%)."),
        (["min-n", "--p-range", "0.11:0.12", "--tol", "0.01"],
         "`--p-range` must hold a p of the atlas grid; got [0.11, 0.12]"),
        (["min-n", "--p-range", "0:0.5", "--tol", "0.01"],
         "`--p-range` must be in the open interval (0, 1); got 0.0."),
        (["compare", "--n", "0", "--p", "0.1"], "`--n` must be an integer >= 1; got 0."),
        (["compare", "--n", "50", "--p", "5 %%"],
         "`--p` is not a number: got '5 %%' (write 0.05, 1/20 or 5%)."),
        (["compare", "--n", "50", "--p", "0.1", "--metric", "x"],
         "`--metric` must be one of 'interval', 'cdf'; got 'x'."),
    ],
)  # fmt: skip
def test_user_mistakes(capsys, path, argv, message):
    status, out, err = run(capsys, *argv, "--atlas", path)
    assert (status, out) == (2, "")
    assert err.startswith(f"approx-atlas: error: {message}") and err.count("\n") == 1
    assert "Traceback" not in err


def test_missing_atlas_file(capsys, tmp_path):
    missing = tmp_path / "none.nc"
    status, out, err = run(capsys, "query", "--n", "50", "--p", "0.1", "--tol", "0.01",
                           "--atlas", str(missing))  # fmt: skip
    assert (status, out) == (2, "")
    assert err == f"approx-atlas: error: `--atlas` names no atlas file: {str(missing)!r}.\n"


def test_garbage_atlas_file(capsys, tmp_path):
    garbage = tmp_path / "garbage.nc"
    garbage.write_bytes(b"\x89HDF\r\n\x1a\n but nothing else" * 10)
    for argv in (
        ["query", "--n", "50", "--p", "0.1", "--tol", "0.01"],
        ["demo"],
        ["compare", "--n", "50", "--p", "0.1"],
        ["min-n", "--p", "0.1", "--tol", "0.01"],
    ):
        status, out, err = run(capsys, *argv, "--atlas", str(garbage))
        assert (status, out) == (2, "")
        assert err.startswith("approx-atlas: error: `--atlas` is not a readable atlas file: ")
        assert err.count("\n") == 1 and "Traceback" not in err


def test_damaged_atlas_chunks(capsys, tmp_path, small_atlas):
    data = small_atlas["float64"].read_bytes()
    refused = 0
    for frac in (0.3, 0.4, 0.6, 0.7):  # 4 KiB flipped: a data chunk or the HDF5 metadata
        damaged = bytearray(data)
        start = int(len(data) * frac)
        damaged[start : start + 4096] = bytes(b ^ 0xA5 for b in damaged[start : start + 4096])
        target = tmp_path / f"damaged_{int(frac * 100)}.nc"
        target.write_bytes(bytes(damaged))
        for metric in ("interval", "cdf"):  # compare reads one variable for every method
            status, out, err = run(capsys, "compare", "--n", "50", "--p", "0.1", "--metric",
                                   metric, "--atlas", str(target))  # fmt: skip
            if status == 0:
                continue
            refused += 1
            assert (status, out) == (2, "") and err.count("\n") == 1
            assert re.match(
                r"approx-atlas: error: (the atlas is corrupt: \w+ of \w+ cannot be read from "
                r"|`(path|--atlas)` is not a readable atlas file: )",
                err,
            )
    assert refused >= 4


def test_missing_required_options_are_usage_errors(capsys, path):
    assert run(capsys, "query", "--n", "50", "--p", "0.1", "--atlas", path)[0] == 2
    assert run(capsys, "min-n", "--tol", "0.01", "--atlas", path)[0] == 2
    status, _, err = run(capsys, "min-n", "--p", "0.1", "--p-range", "0.1:0.2", "--tol", "0.01")
    assert status == 2 and "not allowed with argument" in err


def test_numbers_are_parsed_like_the_api(capsys, path, at):
    # "1e2" is the integer 100 to the API; a p typed in full hits the grid p exactly.
    a = run_json(capsys, "query", "--n", "1e1", "--p", "0.5", "--tol", "0.01", "--atlas", path)
    assert a["n"] == 10 and a["source"] == "atlas"
    assert np.isclose(a["error"], at.error(10, 0.5), rtol=SAME)


def test_commands_leave_no_file_open(capsys, small_atlas):
    # An atlas opened by a command is closed when the command returns (its Atlas is garbage
    # collected), so a later open of the same file by other code meets no second handle.
    import gc

    path = str(small_atlas["float32"])
    assert run(capsys, "query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--atlas", path)[0] == 0
    assert run(capsys, "compare", "--n", "5", "--p", "0.5", "--atlas", path)[0] == 0
    gc.collect()
    assert [e for e in store._OPEN.values() if str(e.path) == path] == []


def test_min_n_without_a_step_bound_says_so_on_the_command_line(capsys, path, at):
    answer = at.threshold(0.3, 0.001, method="camp_paulson")
    assert not answer.exact  # no step bound for camp_paulson where sigma > 3
    _, out, _ = run(capsys, "min-n", "--p", "0.3", "--tol", "0.001", "--method", "camp_paulson",
                    "--atlas", path)  # fmt: skip
    assert "(not every integer between the n evaluated: see the basis)" in out.splitlines()[0]
    assert "only the n evaluated are checked" in out


# --- accuracy: values below the resolution, ties ------------------------------------------------


def test_query_below_the_resolution(capsys, path):
    # camp_paulson at n = 10^12, p = 1/2: its error, 1.05e-14 (computed), is below 3 times its
    # accuracy, 4e-15 (atlas.engine's model): it is printed as a bound, never as a number.
    argv = ("query", "--n", "1000000000000", "--p", "0.5", "--tol", "0.01", "--method",
            "camp_paulson", "--atlas", path)  # fmt: skip
    error, accuracy = worst_error(10**12, 0.5, method="camp_paulson", return_accuracy=True)
    assert error <= 3 * accuracy  # the premise (atlas.engine.is_resolved)
    status, out, _ = run(capsys, *argv)
    bound = format_bound(error + accuracy)
    assert status == 0
    assert f"  error           below the resolution of the exact side (< {bound})" in out
    assert f"{error:.4g}" not in out
    record = run_json(capsys, *argv)
    assert record["resolved"] is False and record["safe"] is True
    assert record["accuracy"] >= accuracy
    assert f"below the resolution of the exact side (< {bound})" in record["explain"]


def test_query_unsafe_within_the_accuracy(capsys, path, at):
    # tol between the error and error + accuracy: not safe, said so (conservative verdicts).
    v = at.is_safe(50, 0.1, 0.01)
    tol = v.error + v.accuracy / 2
    assert v.error < tol < v.error + v.accuracy
    status, out, _ = run(capsys, "query", "--n", "50", "--p", "0.1", "--tol", repr(tol),
                         "--atlas", path, "--strict")  # fmt: skip
    assert status == 3
    assert "UNSAFE: the error may exceed the tolerance (within its accuracy)" in out


def test_compare_shows_ties(capsys, path):
    # At p = 1/2 the skewness term vanishes: edgeworth_cc is normal_cc, the same error
    # (atlas.approximations), so the two are tied; edgeworth2_cc and peizer_pratt are both below
    # their accuracies at n = 10^12 (computed) and differ by less than their sum.
    argv = ("compare", "--n", "1000000000000", "--p", "0.5", "--atlas", path)
    record = run_json(capsys, *argv)
    by_method = {r["method"]: r for r in record["ranking"]}
    assert by_method["normal_cc"]["tied_with"] == ["edgeworth_cc"]
    assert by_method["edgeworth_cc"]["tied_with"] == ["normal_cc"]
    assert by_method["normal_cc"]["rank"] == by_method["edgeworth_cc"]["rank"]
    # Within a tie, normal_cc first (the order of atlas.METHODS).
    names = [r["method"] for r in record["ranking"]]
    assert names.index("normal_cc") + 1 == names.index("edgeworth_cc")
    assert by_method["peizer_pratt"]["rank"] == by_method["edgeworth2_cc"]["rank"] == 1
    assert by_method["peizer_pratt"]["resolved"] is False
    _, out, _ = run(capsys, *argv)
    rank = by_method["normal_cc"]["rank"]
    assert re.search(rf"^ +={rank} +normal_cc +\d", out, re.M)
    assert re.search(rf"^ +={rank} +edgeworth_cc +\d", out, re.M)
    assert "=k: tied (errors differ by less than their accuracies): the same rank" in out
