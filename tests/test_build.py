"""Tests for atlas.build and the ``build`` and ``inspect`` commands.

Expected values are the engine's own (see tests/test_engine.py for its accuracy): a build must
give exactly what atlas.engine.evaluate gives, however it is split into chunks or workers.
"""

import io
import os
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import atlas
from atlas import build, chunks, cube, grid, store
from atlas.cli import main
from atlas.engine import evaluate

# A grid with small and large n (narrow windows and the nested search) and both tails of p.
N_SPEC = "1:25,log:30:3000000:10"
P_SPEC = "logit:0.001:0.999:7,0.5"
METHODS3 = "normal_cc,poisson,camp_paulson"


@pytest.fixture(scope="module")
def serial():
    """The reference build: in this process, default chunking."""
    return atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False)


def _same_bits(a, b):
    for name in (*store.DATA_VARIABLES, "n", "p"):
        assert a[name].dtype == b[name].dtype, name
        assert np.array_equal(a[name].values, b[name].values), name
    assert list(a["approximation"].values) == list(b["approximation"].values)
    assert a.attrs["checksum"] == b.attrs["checksum"]


def _no_work(monkeypatch):
    """Make any engine call fail the test: validation must come before work."""

    def forbidden(*args, **kwargs):
        raise AssertionError("the engine ran before the arguments were checked")

    monkeypatch.setattr(chunks, "evaluate", forbidden)


# ---- grids, methods, results -------------------------------------------------------------------


def test_build_specs_and_values(serial):
    ds = serial
    assert ds.attrs["n_spec"] == N_SPEC and ds.attrs["p_spec"] == P_SPEC
    np.testing.assert_array_equal(ds["n"], grid.parse_n(N_SPEC))
    np.testing.assert_array_equal(ds["p"], grid.parse_p(P_SPEC))
    # Asked for as "normal_cc,poisson,camp_paulson": stored in alphabetical order.
    assert tuple(ds["approximation"].values) == ("camp_paulson", "normal_cc", "poisson")
    assert ds.attrs["checksum"] == cube.data_checksum(ds)
    # Every cell is evaluate's value at that n over the whole p axis, bit for bit.
    for n in (1, 25, int(ds["n"][-1])):
        ev = evaluate(n, ds["p"].values, methods=("camp_paulson", "normal_cc", "poisson"))
        cells = ds.sel(n=n)
        assert np.array_equal(cells["interval_error"].values, ev.interval)
        assert np.array_equal(cells["cdf_error"].values, ev.cdf)
        assert np.array_equal(cells["interval_lo"].values, ev.lo)
        assert np.array_equal(cells["interval_hi"].values, ev.hi)


def test_build_from_values():
    ds = atlas.build_atlas([20, 10, 10], np.array([0.5, 0.25]), ["normal"], progress=False)
    assert list(ds["n"].values) == [10, 20]  # sorted, duplicates dropped (grid.parse_n)
    assert ds.attrs["n_spec"] == "10,20" and ds.attrs["p_spec"] == "0.25,0.5"
    assert ds["interval_error"].shape == (1, 2, 2)


def test_default_methods_are_all():
    ds = atlas.build_atlas("5", "0.5", progress=False)
    assert tuple(ds["approximation"].values) == tuple(sorted(atlas.METHODS))


def test_history_line(serial):
    assert " approx-atlas " in serial.attrs["history"]
    assert "build: 35 n x 7 p x 3 methods in " in serial.attrs["history"]


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"n": "0:5"}, ValueError, r"`n` values must be from 1 to"),
        ({"n": "5:1"}, ValueError, r"`n` ranges must have a <= b"),
        ({"n": "log:1:100"}, ValueError, r"`n` items must be"),
        ({"n": ""}, ValueError, r"`n` values must be integers|`n` items must be"),
        ({"n": [1.5]}, ValueError, r"`n` values must be integers"),
        ({"n": "1e16"}, ValueError, r"`n` (values must be from 1 to|must be at most)"),
        ({"p": "1.5"}, ValueError, r"`p` values must be in the open interval \(0, 1\)"),
        ({"p": "0"}, ValueError, r"`p` values must be in the open interval \(0, 1\)"),
        ({"p": "lin:0.1:0.9"}, ValueError, r"`p` items must be"),
        ({"p": [0.5, float("nan")]}, ValueError, r"`p` values must be in the open interval"),
        ({"p": {"a": 1}}, TypeError, r"`p` must be a spec string or a 1-d sequence"),
        ({"methods": "bogus"}, ValueError, r"`method` must be one of 'normal_cc', .*got 'bogus'"),
        ({"methods": "normal,normal"}, ValueError, r"`methods` must not repeat a method"),
        ({"methods": []}, ValueError, r"`methods` must name at least one method; got none\."),
        ({"methods": 5}, TypeError, r"`methods` must be a comma-separated string or a sequence"),
        ({"workers": 0}, ValueError, r"`workers` must be a positive integer; got 0\."),
        ({"workers": -2}, ValueError, r"`workers` must be a positive integer; got -2\."),
        ({"workers": 1.5}, TypeError, r"`workers` must be a positive integer; got 1\.5\."),
        ({"workers": "2"}, TypeError, r"`workers` must be a positive integer; got '2'\."),
        ({"workers": True}, TypeError, r"`workers` must be a positive integer; got True\."),
        ({"p_block": 0}, ValueError, r"`p_block` must be a positive integer; got 0\."),
        ({"p_block": 2.0}, TypeError, r"`p_block` must be a positive integer; got 2\.0\."),
        ({"chunk_cost": 0}, ValueError, r"`chunk_cost` must be a positive number; got 0\."),
        ({"chunk_cost": float("inf")}, ValueError, r"`chunk_cost` must be a positive number"),
        ({"chunk_cost": "big"}, TypeError, r"`chunk_cost` must be a positive number; got 'big'"),
        ({"decision_n": "0"}, ValueError, r"^`decision_n` values must be from 1 to "),
        ({"decision_p": "1.5"}, ValueError, r"^`decision_p` values must be in the open interval"),
        ({"tail_levels": "0.05,1"}, ValueError,
         r"^`tail_levels` must hold levels in the open interval \(0, 1\); got '1'\.$"),
        ({"test_levels": []}, ValueError, r"^`test_levels` must hold at least one level; got "),
        ({"test_levels": "0.05,0.05"}, ValueError, r"^`test_levels` must not repeat a level"),
        ({"tail_levels": 5}, TypeError, r"^`tail_levels` must be a comma-separated string or a "),
        ({"coverage_n": "2000000"}, ValueError, r"^`coverage_n` must be at most 1000000; got "),
        ({"coverage_p": "0.5"}, ValueError, r"^`coverage_p` must give at least two values; got "),
        ({"intervals": "wald,bogus"}, ValueError,
         r"^`intervals` must be one of 'wald', .*; got 'bogus'\.$"),
        ({"intervals": "wald,wald"}, ValueError, r"^`intervals` must not repeat an interval"),
        ({"coverage_levels": "0"}, ValueError, r"^`coverage_levels` must hold levels in the "),
    ],
)  # fmt: skip
def test_bad_arguments_refused_before_work(monkeypatch, kwargs, error, match):
    _no_work(monkeypatch)
    options = {"n": "1:3", "p": "0.5", "methods": "normal_cc", "progress": False} | kwargs
    with pytest.raises(error, match=match):
        atlas.build_atlas(**options)


def test_too_many_cells_refused_before_work(monkeypatch):
    _no_work(monkeypatch)
    with pytest.raises(ValueError, match=r"must give at most 100000000 cells; got 1000000 n x "
                                         r"101 p x 7 methods = 707000000\."):  # fmt: skip
        atlas.build_atlas("1:1000000", "lin:0.01:0.99:101", progress=False)


# ---- the same cube however the work is split ---------------------------------------------------


def test_two_workers_identical(serial):
    # chunk_cost small enough for many chunks, so both workers take several.
    ds = atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, workers=2, chunk_cost=2e3)
    assert len(chunks.plan_chunks(ds["n"].values, ds["p"].values, cost=2e3)) >= 6
    _same_bits(ds, serial)


@pytest.mark.parametrize(("p_block", "chunk_cost"), [(1, 1e4), (3, chunks.CHUNK_COST), (None, 1)])
def test_chunking_identical(serial, p_block, chunk_cost):
    ds = atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, p_block=p_block,
                           chunk_cost=chunk_cost)  # fmt: skip
    _same_bits(ds, serial)


# ---- failures and interrupts leave no file -----------------------------------------------------


def _fail_after(monkeypatch, calls, error):
    real = chunks.evaluate
    count = {"n": 0}

    def flaky(*args, **kwargs):
        count["n"] += 1
        if count["n"] > calls:
            raise error
        return real(*args, **kwargs)

    monkeypatch.setattr(chunks, "evaluate", flaky)


def _files(folder):
    return sorted(p.name for p in folder.iterdir())


def test_error_mid_build_raises(monkeypatch):
    _fail_after(monkeypatch, 5, RuntimeError("engine failure"))
    with pytest.raises(RuntimeError, match="engine failure"):
        atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, chunk_cost=1)


def test_error_in_a_worker_reaches_the_caller(monkeypatch):
    # The pool is forked after the patch, so the workers fail too; the pool is stopped.
    _fail_after(monkeypatch, 3, RuntimeError("worker failure"))
    with pytest.raises(RuntimeError, match="worker failure"):
        atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, workers=2, chunk_cost=1)


def test_a_worker_that_dies_is_reported(monkeypatch):
    real = chunks.evaluate

    def dying(n, p, **kwargs):
        if n == 387:  # one of the grid's n, in one chunk: that worker process exits at once
            os._exit(3)
        return real(n, p, **kwargs)

    monkeypatch.setattr(chunks, "evaluate", dying)
    with pytest.raises(RuntimeError, match=r"a worker process of the build died"):
        atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, workers=2, chunk_cost=1)


def test_interrupt_stops_the_workers(monkeypatch):
    # Ctrl-C in the parent while the workers compute: the build stops and no worker is left.
    import multiprocessing

    def interrupted(*args):
        raise KeyboardInterrupt

    monkeypatch.setattr(build, "_place", interrupted)
    with pytest.raises(KeyboardInterrupt):
        atlas.build_atlas(N_SPEC, P_SPEC, METHODS3, progress=False, workers=2, chunk_cost=1)
    # Ask the operating system, not multiprocessing's bookkeeping: when the pool's own thread
    # reaps a worker first, multiprocessing keeps listing it as started although it is gone.
    running = [c.pid for c in multiprocessing.active_children() if _running(c.pid)]
    assert running == []


def _running(pid):
    """Whether process ``pid`` exists and is not a zombie."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    status = Path(f"/proc/{pid}/status")  # Linux: a dead but unreaped child is a zombie
    return not (status.exists() and "zombie" in status.read_text())


def test_cli_error_mid_build_leaves_no_file(tmp_path, monkeypatch, capsys):
    _fail_after(monkeypatch, 5, ValueError("engine refused"))
    target = tmp_path / "a.nc"
    assert main(["build", "--n", N_SPEC, "--p", P_SPEC, "-o", str(target)]) == 2
    assert capsys.readouterr().err == "approx-atlas: error: engine refused\n"
    assert _files(tmp_path) == []


def test_cli_interrupt_mid_build_leaves_no_file(tmp_path, monkeypatch, capsys):
    _fail_after(monkeypatch, 5, KeyboardInterrupt())
    target = tmp_path / "a.nc"
    assert main(["build", "--n", N_SPEC, "--p", P_SPEC, "-o", str(target)]) == 130
    assert capsys.readouterr().err == "approx-atlas: error: interrupted\n"
    assert _files(tmp_path) == []


def test_cli_interrupt_with_workers_leaves_no_file(tmp_path, monkeypatch, capsys):
    # Ctrl-C reaches the parent (the workers ignore SIGINT); here it comes from placing a chunk.
    real = build._place
    count = {"n": 0}

    def interrupted(*args):
        count["n"] += 1
        if count["n"] == 2:
            raise KeyboardInterrupt
        return real(*args)

    monkeypatch.setattr(build, "_place", interrupted)
    plan = build.plan_chunks  # one n a chunk, so that there are many chunks
    monkeypatch.setattr(build, "plan_chunks", lambda n, p, cost, p_block: plan(n, p, cost=1))
    target = tmp_path / "a.nc"
    argv = ["build", "--n", N_SPEC, "--p", P_SPEC, "--workers", "2", "-o", str(target)]
    assert main(argv) == 130
    assert _files(tmp_path) == []


def test_cli_failure_in_make_dataset_keeps_old_file(tmp_path, monkeypatch, capsys):
    target = tmp_path / "a.nc"
    assert main(["build", "--n", "1:3", "--p", "0.5", "-o", str(target)]) == 0
    before = target.read_bytes()

    def broken(*args, **kwargs):
        raise OSError("no space left")

    monkeypatch.setattr(cube, "make_dataset", broken)
    assert main(["build", "--n", "1:4", "--p", "0.5", "-o", str(target), "--force"]) == 2
    assert capsys.readouterr().err == "approx-atlas: error: no space left\n"
    assert target.read_bytes() == before
    assert _files(tmp_path) == ["a.nc"]


def test_cli_failure_mid_write_leaves_no_file(tmp_path, monkeypatch, capsys):
    def failing(self, path, *args, **kwargs):
        with open(path, "wb") as f:
            f.write(b"\x89HDF\r\n\x1a\n")
        raise OSError("write failed")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", failing)
    assert main(["build", "--n", "1:3", "--p", "0.5", "-o", str(tmp_path / "a.nc")]) == 2
    assert capsys.readouterr().err == "approx-atlas: error: write failed\n"
    assert _files(tmp_path) == []


# ---- progress bar ------------------------------------------------------------------------------


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_bar_on_a_terminal_only(monkeypatch, capsys):
    atlas.build_atlas("1:3", "0.5", "normal", progress=True)
    assert capsys.readouterr().err == ""  # not a terminal: no bar
    terminal = _Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    atlas.build_atlas("1:3", "0.5", "normal", progress=True)
    assert "approx-atlas build" in terminal.getvalue()
    terminal = _Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    atlas.build_atlas("1:3", "0.5", "normal", progress=False)
    assert terminal.getvalue() == ""


# ---- the build and inspect commands ------------------------------------------------------------


def test_cli_build_and_inspect(tmp_path, capsys, serial):
    target = tmp_path / "cube.nc"
    argv = ["build", "--n", N_SPEC, "--p", P_SPEC, "--methods", METHODS3, "-o", str(target)]
    assert main(argv) == 0
    captured = capsys.readouterr()
    assert captured.err == ""
    assert captured.out.startswith(f"wrote {target}: 35 n x 7 p x 3 methods = 735 cells in ")
    with cube.load_dataset(target, verify=True) as ds:
        _same_bits(ds, serial)

    assert main(["inspect", str(target)]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith(f"file: {target} (")
    assert f"  n_spec: {N_SPEC}" in out and f"  p_spec: {P_SPEC}" in out
    names = out.index(
        "approximations (3; the names --method takes; dimension 'approximation', in "
        "alphabetical order):"
    )
    assert [line.split(":")[0] for line in out[names + 1 : names + 4]] == [
        "  camp_paulson", "  normal_cc", "  poisson"]  # fmt: skip
    assert out[-1] == f"checksum: ok ({serial.attrs['checksum']})"


def test_cli_refuses_existing_file_then_force(tmp_path, capsys, monkeypatch):
    target = tmp_path / "cube.nc"
    assert main(["build", "--n", "1:3", "--p", "0.5", "-o", str(target)]) == 0
    before = target.read_bytes()
    capsys.readouterr()
    _no_work(monkeypatch)
    assert main(["build", "--n", "1:4", "--p", "0.5", "-o", str(target)]) == 2
    captured = capsys.readouterr()
    assert captured.err == (
        f"approx-atlas: error: `-o` {str(target)!r} exists; pass --force to replace it.\n"
    )
    assert captured.out == ""
    assert target.read_bytes() == before
    monkeypatch.undo()
    assert main(["build", "--n", "1:4", "--p", "0.5", "-o", str(target), "--force"]) == 0
    with cube.load_dataset(target) as ds:
        assert ds.sizes["n"] == 4
    assert _files(tmp_path) == ["cube.nc"]


def test_cli_float32_and_workers(tmp_path, capsys, serial):
    target = tmp_path / "small.nc"
    argv = ["build", "--n", N_SPEC, "--p", P_SPEC, "--methods", METHODS3, "-o", str(target),
            "--float32", "--workers", "2"]  # fmt: skip
    assert main(argv) == 0
    assert "float32 errors" in capsys.readouterr().out
    with cube.load_dataset(target, verify=True) as ds:
        assert ds["interval_error"].dtype == np.float32
        assert ds.attrs["error_precision"] == "float32 (7 significant digits)"
        xr.testing.assert_identical(ds.drop_attrs(), cube.compact(serial).drop_attrs())


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--n", "0"], "`--n` values must be from 1 to 9007199254740992; got item '0' in '0'."),
        (["--p", "1"], "`--p` values must be in the open interval (0, 1); got item '1' in '1'."),
        (["--methods", "normal,bogus"], "`--methods` must be one of 'normal_cc', 'edgeworth_cc', "
         "'edgeworth2_cc', 'normal', 'poisson', 'camp_paulson', 'peizer_pratt'; got 'bogus'."),
        (["--workers", "0"], "`--workers` must be a positive integer; got 0."),
        (["--workers", "two"], "`--workers` must be a positive integer; got 'two'."),
        (["--dask", "bogus"], "`--dask` must be 'local:K' (K local worker processes) or "
         "'tcp://HOST:PORT' (a running scheduler); got 'bogus'."),
        (["--decision-p", "2"], "`--decision-p` values must be in the open interval (0, 1); got "
         "item '2' in '2'."),
        (["--tail-levels", "x"], "`--tail-levels` must hold levels in the open interval (0, 1); "
         "got 'x'."),
        (["--coverage-n", "1:3", "--coverage-p", "0.3"], "`--coverage-p` must give at least two "
         "values; got '0.3'."),
        (["--intervals", "score"], "`--intervals` must be one of 'wald', 'wald_cc', 'wilson', "
         "'wilson_cc', 'agresti_coull', 'jeffreys', 'clopper_pearson'; got 'score'."),
    ],
)  # fmt: skip
def test_cli_bad_arguments_one_line(tmp_path, capsys, monkeypatch, args, message):
    _no_work(monkeypatch)
    target = tmp_path / "a.nc"
    assert main(["build", "--n", "1:3", "--p", "0.5", *args, "-o", str(target)]) == 2
    captured = capsys.readouterr()
    assert captured.err == f"approx-atlas: error: {message}\n"
    assert captured.out == ""
    assert _files(tmp_path) == []


def test_cli_bad_output_places(tmp_path, capsys, monkeypatch):
    _no_work(monkeypatch)
    assert main(["build", "--n", "1:3", "-o", str(tmp_path / "no" / "a.nc")]) == 2
    assert capsys.readouterr().err == (
        f"approx-atlas: error: `-o` is in a directory that does not exist: "
        f"{str(tmp_path / 'no' / 'a.nc')!r}.\n"
    )
    assert main(["build", "--n", "1:3", "-o", str(tmp_path), "--force"]) == 2
    assert capsys.readouterr().err == (
        f"approx-atlas: error: `-o` must name a file; got a directory: {str(tmp_path)!r}.\n"
    )


def test_cli_inspect_refuses_bad_files(tmp_path, capsys):
    text = tmp_path / "notes.nc"
    text.write_text("an inspection lot of 80 fasteners\n")
    assert main(["inspect", str(text)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(
        f"approx-atlas: error: `FILE` is not a readable atlas file: {str(text)!r}"
    )
    assert err.count("\n") == 1

    assert main(["inspect", str(tmp_path / "missing.nc")]) == 2
    assert capsys.readouterr().err == (
        f"approx-atlas: error: `FILE` names no atlas file: {str(tmp_path / 'missing.nc')!r}.\n"
    )

    ds = atlas.build_atlas("1:3", "0.5", "normal", progress=False)
    ds["cdf_error"].values[0, 1, 0] += 1e-9  # the stored checksum no longer matches
    changed = cube.save_atlas(ds, tmp_path / "changed.nc")
    assert main(["inspect", str(changed)]) == 2
    captured = capsys.readouterr()
    assert "checksum: ok" not in captured.out
    assert captured.err.startswith(
        f"approx-atlas: error: `FILE` {str(changed)!r} is corrupt: its checksum does not match"
    )
    assert captured.err.count("\n") == 1


def test_cli_inspect_default_atlas(capsys):
    if not store.default_path().exists():
        pytest.skip("the embedded atlas is not built (build_scripts/build_default_atlas.py)")
    assert main(["inspect"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith(f"file: {store.default_path()} (")
    assert f"  n_spec: {grid.DEFAULT_N_SPEC}" in out
    assert out[-1].startswith("checksum: ok (sha256:")


@pytest.mark.slow
def test_cli_build_on_dask(tmp_path, capsys, serial):
    pytest.importorskip("distributed")
    target = tmp_path / "dask.nc"
    argv = ["build", "--n", N_SPEC, "--p", P_SPEC, "--methods", METHODS3, "-o", str(target),
            "--dask", "local:1", "--checkpoint", str(tmp_path / "ckpt")]  # fmt: skip
    assert main(argv) == 0
    with cube.load_dataset(target, verify=True) as ds:
        _same_bits(ds, serial)
    assert os.path.isdir(tmp_path / "ckpt")
