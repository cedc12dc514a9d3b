"""The coverage, coverage-n and shortest commands, called in-process as main([...]).

Expected numbers come from the API (atlas.coverage_questions), which tests/test_confidence.py
and tests/test_coverage_questions.py check against mpmath and theorems; the CLI must report
them unchanged.
"""

import json
import pathlib
import re
import shlex
import subprocess
import sys

import pytest

from atlas.cli import main
from atlas.coverage_questions import (
    check_coverage,
    coverage_min_n,
    coverage_table,
    shortest_interval,
)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_coverage_text(capsys):
    code, out, err = run(capsys, "coverage", "--n", "40", "--p-range", "0.05:0.5",
                         "--interval", "wilson", "--floor", "0.93")  # fmt: skip
    assert (code, err) == (0, "")
    assert "minimum coverage  0.927764  (exact infimum over the band)" in out
    assert "worst p           0.200845  (the limit as p rises to it)" in out
    assert "FAILS: the coverage falls below the floor" in out


def test_coverage_json_and_strict(capsys):
    argv = ["coverage", "--n", "40", "--p-range", "5%:1/2", "--interval", "wilson",
            "--floor", "93%", "--json"]  # fmt: skip
    code, out, _ = run(capsys, *argv)
    record = json.loads(out)
    expected = check_coverage(40, 0.05, 0.5, 0.93, interval="wilson").to_dict()
    assert code == 0 and record == expected
    assert run(capsys, *argv, "--strict")[0] == 3
    # Holds at a lower floor: --strict exits 0.
    assert run(capsys, "coverage", "--n", "40", "--p-range", "0.05:0.5", "--interval", "wilson",
               "--floor", "0.92", "--strict")[0] == 0  # fmt: skip


def test_coverage_floor_defaults_to_the_level(capsys):
    code, out, _ = run(capsys, "coverage", "--n", "200", "--p", "0.3", "--interval",
                       "clopper_pearson", "--level", "0.9", "--json")  # fmt: skip
    record = json.loads(out)
    assert code == 0 and record["floor"] == 0.9 and record["p_lo"] == record["p_hi"] == 0.3
    assert record["holds"] is True  # Clopper-Pearson keeps its level (theorem)


def test_coverage_n(capsys):
    code, out, err = run(capsys, "coverage-n", "--p-range", "0.05:0.5", "--interval", "wilson",
                         "--floor", "0.93", "--n-max", "150")  # fmt: skip
    assert (code, err) == (0, "")
    assert "from n on         n >= 116 (every n checked from 116 to 150)" in out
    assert "holds at n in     43..51, 56..61, 116..150" in out
    assert "every integer n from 1 to 150" in out and "none beyond" in out
    code, out, _ = run(capsys, "coverage-n", "--p-range", "0.05:0.5", "--interval", "wilson",
                       "--floor", "0.93", "--n-max", "100", "--json", "--strict")  # fmt: skip
    expected = coverage_min_n(0.05, 0.5, 0.93, interval="wilson", n_max=100).to_dict()
    assert code == 3 and json.loads(out) == expected and expected["min_n"] is None


def test_shortest(capsys):
    code, out, _ = run(capsys, "shortest", "--n", "40", "--p-range", "0.05:0.5", "--floor",
                       "0.94")  # fmt: skip
    assert code == 0
    assert "shortest that keeps the floor: wilson_cc" in out
    assert out.index("wilson ") < out.index("clopper_pearson")  # narrowest first
    code, out, _ = run(capsys, "shortest", "--n", "40", "--p", "0.3", "--floor", "0.999",
                       "--interval", "wald,wilson", "--json", "--strict")  # fmt: skip
    record = json.loads(out)
    expected = shortest_interval(40, 0.3, 0.3, 0.999, intervals=["wald", "wilson"]).to_dict()
    assert code == 3 and record == expected and record["best"] is None


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["coverage", "--n", "40", "--p", "0.3", "--interval", "bogus"],
         "`--interval` must be one of 'wald', 'wald_cc', 'wilson', 'wilson_cc', "
         "'agresti_coull', 'jeffreys', 'clopper_pearson'; got 'bogus'."),
        (["coverage", "--n", "40", "--p", "0.3", "--level", "1.5"],
         "`--level` must be in the open interval (0, 1); got 1.5."),
        (["coverage", "--n", "0", "--p", "0.3"], "`--n` must be an integer >= 1; got 0."),
        (["coverage", "--n", "40", "--p", "0.3", "--floor", "2"],
         "`--floor` must be in the open interval (0, 1); got 2.0."),
        (["coverage", "--n", "40", "--p-range", "0:0.5"],
         "`--p-range` must be in the open interval (0, 1); got 0.0."),
        (["coverage", "--n", "40", "--p-range", "0.5"],
         "`--p-range` must be LO:HI, such as 0.05:0.95; got '0.5'."),
        (["coverage", "--n", "40", "--p", "often"],
         "`--p` is not a number: got 'often' (write 0.05, 1/20 or 5%)."),
        (["coverage-n", "--p", "0.3", "--n-max", "1000000"],
         "`--n-max` must be an integer from 1 to 100000; got 1000000."),
        (["shortest", "--n", "40", "--p", "0.3", "--interval", "wilson,nope"],
         "`--interval` must be one of 'wald', 'wald_cc', 'wilson', 'wilson_cc', "
         "'agresti_coull', 'jeffreys', 'clopper_pearson'; got 'nope'."),
    ],
)  # fmt: skip
def test_errors_are_one_line_naming_the_option(capsys, argv, message):
    code, out, err = run(capsys, *argv)
    assert code == 2 and out == ""
    assert err == f"approx-atlas: error: {message}\n"


def test_a_band_is_required(capsys):
    code, _, err = run(capsys, "coverage", "--n", "40")
    assert code == 2 and "one of the arguments --p --p-range is required" in err


def test_coverage_table_command(capsys, tmp_path):
    code, out, _ = run(capsys, "coverage-table", "--p-range", "0.05:0.5", "--interval",
                       "wald,wilson", "--floor", "0.93,0.94", "--n-max", "150")  # fmt: skip
    expected = coverage_table(0.05, 0.5, [0.93, 0.94], intervals=["wald", "wilson"], n_max=150)
    assert code == 0 and out == expected.render("md")
    target = tmp_path / "t.csv"
    code, out, _ = run(capsys, "coverage-table", "--p", "0.3", "--interval", "wilson_cc",
                       "--n-max", "30", "--format", "csv", "-o", str(target))  # fmt: skip
    assert code == 0 and out.strip() == str(target)
    assert target.read_text() == "interval,floor 0.93,floor 0.94,floor 0.95\nwilson_cc,1,1,1\n"
    code, _, err = run(capsys, "coverage-table", "--p", "0.3", "--n-max", "30", "-o", str(target))
    assert code == 2 and "`-o`" in err and "--force" in err


def test_coverage_map_command(capsys, tmp_path):
    target = tmp_path / "map.svg"
    code, out, _ = run(capsys, "coverage-map", "--interval", "wilson", "-o", str(target))
    assert code == 0 and out.strip() == str(target) and target.stat().st_size > 10_000
    assert "wilson interval, nominal 0.95" in target.read_text()


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["coverage-table", "--p", "0.3", "--format", "xml"],
         "`--format` must be one of 'md', 'csv', 'json'; got 'xml'."),
        (["coverage-table", "--p", "0.3", "--floor", "1.5", "--n-max", "5"],
         "`--floor` must be in the open interval (0, 1); got 1.5."),
        (["coverage-map", "--level", "0.8", "-o", "x.png"],
         "`--level` must be one the cube holds (0.9, 0.95, 0.99); got 0.8."),
        (["coverage-map", "--variable", "width", "-o", "x.png"],
         "`--variable` must be one of 'min_coverage', 'coverage'; got 'width'."),
        (["coverage-map", "-o", "x.gif"],
         "`-o` must end in one of '.png', '.svg', '.pdf'; got 'x.gif'."),
        (["coverage-map", "--atlas", "missing.nc", "-o", "x.png"],
         "`--atlas` names no atlas file: 'missing.nc'."),
        (["coverage-map", "--cube", "missing.nc", "-o", "x.png"],  # the former name
         "`--atlas` names no atlas file: 'missing.nc'."),
    ],
)  # fmt: skip
def test_table_and_map_errors(capsys, tmp_path, monkeypatch, argv, message):
    monkeypatch.chdir(tmp_path)
    code, out, err = run(capsys, *argv)
    assert (code, out, err) == (2, "", f"approx-atlas: error: {message}\n")
    assert list(tmp_path.iterdir()) == []


# --- the README's section, as typed -------------------------------------------------------------


def _readme_blocks():
    """The fenced blocks of the README's section on confidence intervals, as (language, text)."""
    text = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text()
    section = text.split("## Confidence intervals for p:", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```(\w*)\n(.*?)```", section, flags=re.S)


def test_readme_python_block_prints_what_it_shows(tmp_path):
    (language, code), (_, shown) = _readme_blocks()[:2]
    assert language == "python"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout == shown


def test_readme_commands_print_what_they_show(capsys):
    sessions = [text for lang, text in _readme_blocks() if text.startswith("$ approx-atlas ")]
    commands = [c for text in sessions for c in re.split(r"^\$ approx-atlas ", text, flags=re.M)]
    commands = [c for c in commands if c]
    assert len(commands) == 5
    for block in commands:
        line, _, shown = block.partition("\n")
        assert main(shlex.split(line)) == 0
        assert capsys.readouterr().out == shown, line
