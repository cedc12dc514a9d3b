"""Tests for atlas.cli, called in-process as main([...])."""

import argparse
import subprocess
import sys

import pytest

from atlas import __version__, cli
from atlas.cli import main


def test_version(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out == f"approx-atlas {__version__}\n"


def test_help(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: approx-atlas")
    assert "grid" in out


def test_no_command_prints_help_and_returns_2(capsys):
    assert main([]) == 2
    assert capsys.readouterr().err.startswith("usage: approx-atlas")


def test_unknown_command(capsys):
    assert main(["bogus"]) == 2
    err = capsys.readouterr().err
    assert "approx-atlas: error: argument command: invalid choice: 'bogus'" in err


def test_unknown_option(capsys):
    assert main(["--bogus"]) == 2
    assert "approx-atlas: error: unrecognized arguments: --bogus" in capsys.readouterr().err


def test_grid(capsys):
    assert main(["grid", "--n", "1:10", "--p", "0.25,0.5"]) == 0
    # 10 values of n times 2 of p, by the specs' definitions.
    assert capsys.readouterr().out == (
        "n: 10 values from 1 to 10; p: 2 values from 0.25 to 0.5; 20 (n, p) points\n"
    )


def test_grid_bad_spec_is_one_line(capsys):
    assert main(["grid", "--p", "lin:0.5:1.5:3"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err == (
        "approx-atlas: error: `--p` values must be in the open interval (0, 1); "
        "got item 'lin:0.5:1.5:3' in 'lin:0.5:1.5:3'.\n"
    )


def _raiser(error):
    def handler(args):
        raise error

    return handler


@pytest.mark.parametrize(
    ("error", "message"),
    [
        (ValueError("`p` must be in the open interval (0, 1); got 1.5."),
         "`p` must be in the open interval (0, 1); got 1.5."),
        (TypeError("`n` must be an integer;\ngot 'x'."), "`n` must be an integer; got 'x'."),
        (FileNotFoundError(2, "No such file or directory", "atlas.nc"),
         "No such file or directory: 'atlas.nc'"),
        (FileExistsError(17, "File exists", "out.nc"), "File exists: 'out.nc'"),
        (OSError("disk full"), "disk full"),
    ],
)  # fmt: skip
def test_handler_errors_become_one_line(monkeypatch, capsys, error, message):
    # A command whose handler raises: the wrapper prints one line and returns 2, no traceback.
    parser = argparse.ArgumentParser()
    parser.set_defaults(command="fake", handler=_raiser(error))
    monkeypatch.setattr(cli, "_build_parser", lambda: parser)
    assert main([]) == 2
    assert capsys.readouterr().err == f"approx-atlas: error: {message}\n"


def test_interrupt_returns_130(monkeypatch, capsys):
    parser = argparse.ArgumentParser()
    parser.set_defaults(command="fake", handler=_raiser(KeyboardInterrupt()))
    monkeypatch.setattr(cli, "_build_parser", lambda: parser)
    assert main([]) == 130
    assert capsys.readouterr().err == "approx-atlas: error: interrupted\n"


def test_fail(capsys):
    assert cli._fail("something is wrong") == 2
    assert capsys.readouterr().err == "approx-atlas: error: something is wrong\n"


def test_python_dash_m():
    # `python -m atlas` runs the same main(); one subprocess, so the check stays cheap.
    result = subprocess.run(
        [sys.executable, "-m", "atlas", "--version"], capture_output=True, text=True, check=False
    )
    assert (result.returncode, result.stdout) == (0, f"approx-atlas {__version__}\n")
