"""Tests of the tail and size commands (atlas/cli_decisions.py), called in-process as main([...]).

Expected numbers come from the API (atlas.tail_error, atlas.test_size, atlas.decisions), tested
against mpmath and hand-worked cases in test_tails.py and test_sizes.py; the issue-11 figures
(2.19 at n = 100, p = 0.1, alpha = 0.001; 5.8% at n = 50, p0 = 0.1) are named where used.
"""

import json
import pathlib
import re
import shlex
import subprocess
import sys

import pytest

import atlas
from atlas import decisions
from atlas.cli import main


def run(capsys, argv):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_tail_human_and_strict(capsys):
    argv = ["tail", "--n", "100", "--p", "0.1", "--alpha", "0.001", "--tail", "lower"]
    code, out, err = run(capsys, argv + ["--rel-tol", "10%"])
    assert code == 0 and err == ""
    assert "tail relative error  2.193  (219.3%)" in out  # issue 11: 2.19
    assert "NOT within" in out
    assert run(capsys, argv + ["--rel-tol", "0.1", "--strict"])[0] == 3
    assert run(capsys, argv + ["--rel-tol", "3", "--strict"])[0] == 0
    # Without --rel-tol: the number only, and --strict has nothing to refuse.
    code, out, _ = run(capsys, argv + ["--strict"])
    assert code == 0 and "verdict" not in out


def test_tail_json(capsys):
    code, out, _ = run(capsys, ["tail", "--n", "100", "--p", "1/10", "--alpha", "0.1%",
                                "--rel-tol", "0.1", "--json"])  # fmt: skip
    record = json.loads(out)
    assert code == 0
    assert record["tail_error"] == atlas.tail_error(100, 0.1, 0.001)
    assert record["within"] is False and record["tail"] == "both" and record["alpha"] == 0.001
    assert record["explain"] == decisions.tail_verdict(100, 0.1, 0.001, 0.1).explain()


def test_size_human_json_strict(capsys):
    argv = ["size", "--n", "50", "--p0", "0.1", "--alpha", "0.05", "--alternative", "greater"]
    code, out, _ = run(capsys, argv + ["--max-size", "0.055"])
    assert code == 0
    assert "size            0.05787  (5.787%)" in out  # issue 11: 5.8%
    assert "EXCEEDS" in out
    assert run(capsys, argv + ["--max-size", "0.055", "--strict"])[0] == 3
    assert run(capsys, argv + ["--max-size", "0.06", "--strict"])[0] == 0
    code, out, _ = run(capsys, argv + ["--json"])
    record = json.loads(out)
    t = atlas.test_size(50, 0.1, 0.05, alternative="greater")
    assert (record["size"], record["exact_size"]) == (t.size, t.exact_size)
    assert record["max_size"] == 0.05 and record["keeps"] is False


def test_min_n_commands(capsys):
    code, out, _ = run(capsys, ["size-min-n", "--p0", "0.1", "--alpha", "0.05", "--max-size",
                                "0.055", "--alternative", "greater", "--n-max", "300",
                                "--dense-to", "300", "--json"])  # fmt: skip
    record = json.loads(out)
    expected = decisions.size_min_n(0.1, 0.05, max_size=0.055, alternative="greater",
                                    n_max=300, dense_to=300)  # fmt: skip
    assert code == 0 and record["min_n"] == expected.n and record["every_integer"]
    assert record["runs"] == [{"first": a, "last": b, "within": w} for a, b, w in expected.runs]
    code, out, _ = run(capsys, ["tail-min-n", "--p", "0.2", "--alpha", "0.01", "--rel-tol",
                                "30%", "--n-max", "400", "--dense-to", "400"])  # fmt: skip
    expected = decisions.tail_min_n(0.2, 0.01, 0.3, n_max=400, dense_to=400)
    assert code == 0
    assert out.splitlines()[0] == (
        "normal_cc: every tail P(X <= k) or P(X >= k) of at least 0.01 within 30% at p = 0.2: "
        + expected.explain()
    )


def test_compare_commands(capsys):
    code, out, _ = run(capsys, ["tail-compare", "--n", "100", "--p", "0.1", "--alpha", "0.001",
                                "--json"])  # fmt: skip
    record = json.loads(out)
    assert code == 0
    assert [r["method"] for r in record["ranking"]] == [
        m for m, _ in decisions.best_tail_method(100, 0.1, 0.001)
    ]
    code, out, _ = run(capsys, ["size-compare", "--n", "50", "--p0", "0.1", "--alpha", "0.05",
                                "--alternative", "greater"])  # fmt: skip
    assert code == 0
    assert "   7  normal_cc      0.05787  (5.787%)  above" in out  # issue 11: 5.8%


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (
            ["tail", "--n", "100", "--p", "0.1", "--alpha", "1.5"],
            "`--alpha` must be in the open interval (0, 1); got 1.5.",
        ),
        (
            ["tail", "--n", "100", "--p", "0.1", "--alpha", "0.1", "--tail", "middle"],
            "`--tail` must be one of 'lower', 'upper', 'both'; got 'middle'.",
        ),
        (
            ["tail", "--n", "100", "--p", "0.1", "--alpha", "0.1", "--rel-tol", "-1"],
            "`--rel-tol` must be a positive finite number; got -1.0.",
        ),
        (
            ["tail", "--n", "100", "--p", "x", "--alpha", "0.1"],
            "`--p` is not a number: got 'x' (write 0.05, 1/20 or 5%).",
        ),
        (
            ["size", "--n", "0", "--p0", "0.1", "--alpha", "0.05"],
            "`--n` must be an integer >= 1; got 0.",
        ),
        (
            ["size", "--n", "10", "--p0", "1.1", "--alpha", "0.05"],
            "`--p0` must be in the open interval (0, 1); got 1.1.",
        ),
        (
            ["size", "--n", "10", "--p0", "0.1", "--alpha", "0.05", "--max-size", "2"],
            "`--max-size` must be in the open interval (0, 1); got 2.0.",
        ),
        (
            ["size", "--n", "10", "--p0", "0.1", "--alpha", "0.05", "--alternative", "up"],
            "`--alternative` must be one of 'two-sided', 'less', 'greater'; got 'up'.",
        ),
        (
            ["size", "--n", "10", "--p0", "0.1", "--alpha", "0.05", "--method", "bogus"],
            "`--method` must be one of 'normal_cc', ",
        ),
        (
            ["tail-min-n", "--p", "0.1", "--alpha", "0.01", "--rel-tol", "0.1", "--n-max", "0"],
            "`--n-max` must be an integer >= 1; got 0.",
        ),
        (
            ["size-min-n", "--p0", "0.1", "--alpha", "0.05", "--dense-to", "x"],
            "`--dense-to` must be an integer >= 1; got 'x'.",
        ),
    ],
)
def test_user_mistakes(capsys, argv, message):
    code, out, err = run(capsys, argv)
    assert code == 2 and out == ""
    assert err.startswith(f"approx-atlas: error: {message}")
    assert err.count("\n") == 1


def test_missing_options_are_usage_errors(capsys):
    code, _, err = run(capsys, ["size", "--n", "10", "--alpha", "0.05"])
    assert code == 2 and "--p0" in err


# ---- the README's section, as typed --------------------------------------------------------


def _readme_blocks():
    """The fenced blocks of the README's section on tails and tests, as (language, text)."""
    text = (pathlib.Path(atlas.__file__).parent.parent / "README.md").read_text()
    section = text.split("## Tail p-values and test sizes", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```(\w*)\n(.*?)```", section, flags=re.S)


def test_readme_python_runs_as_typed(tmp_path):
    # The README's Python block runs in a fresh interpreter and prints what the README shows.
    (language, code), (_, shown) = _readme_blocks()[:2]
    assert language == "python"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=300, cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout == shown


def test_readme_commands_print_what_is_shown(capsys):
    # Each "$ approx-atlas ..." of the README's command block, run in-process, prints the lines
    # shown under it ("$ echo $?" shows its exit status).
    shown = _readme_blocks()[2][1]
    runs = re.split(r"^\$ approx-atlas ", shown, flags=re.M)[1:]
    assert len(runs) == 5
    for run_text in runs:
        command, _, rest = run_text.partition("\n")
        output, _, status = rest.partition("$ echo $?\n")
        code = main(shlex.split(command))
        out, _ = capsys.readouterr()
        assert out.strip() == output.strip()
        assert code == (int(status) if status else 0)


def test_demo_asks_about_p_values(capsys):
    # The demo's lot (n = 80, claimed rate 0.025): the upper one-sided test at 5% with
    # normal_cc p-values, and the upper-tail p-values of at least 0.01 (definition: the API).
    from atlas.cli_decisions import demo_lines

    lines = demo_lines(80, 0.025)
    size = atlas.test_size(80, 0.025, 0.05, alternative="greater")
    error = atlas.tail_error(80, 0.025, 0.01, tail="upper")
    assert f"at the claimed rate {100 * size.size:.4g}% of the time" in lines[0]
    assert f"(exact p-values: {100 * size.exact_size:.4g}%;" in lines[0]
    assert f"are off by up to {100 * error:.4g}%" in lines[0]
    assert lines[1].startswith("  next: approx-atlas size --n 80 --p0 0.025 --alpha 0.05")
    # Each suggested command runs.
    for command in lines[1].removeprefix("  next: ").split("; "):
        assert main(shlex.split(command)[1:]) == 0
    capsys.readouterr()
