"""Shared test fixtures."""

import os
import runpy
import signal
import subprocess
import sys
import time
import warnings
from pathlib import Path

import pytest

# numpy on the reference float path (atlas/floatpath.py), before anything imports it: the
# regression fixtures and the embedded atlas hold that path's bits. Run from the file, since
# importing the package would import numpy first.
_FLOAT_PATH = runpy.run_path(str(Path(__file__).resolve().parents[1] / "atlas" / "floatpath.py"))
try:
    _FLOAT_PATH["pin_before_numpy"]()
except RuntimeError as error:  # numpy imported before pytest read this file
    warnings.warn(f"the tests may not run on the reference float path: {error}", stacklevel=1)

# A tiny atlas for the query and CLI tests: every integer n to 40, eight log-spaced n to 5000,
# seven p, all methods. About 1.5 s to build, once per test session.
SMALL_N_SPEC = "1:40,log:50:5000:8"
SMALL_P_SPEC = "0.01,0.05,0.1,0.3,0.5,0.7,0.9"


@pytest.fixture(scope="session")
def small_atlas(tmp_path_factory):
    """The tiny atlas: ``{"dataset": Dataset, "float64": path, "float32": path}``.

    ``float32`` is the compact copy (:func:`atlas.cube.compact`), as the embedded atlas is stored.
    """
    import atlas
    from atlas import cube

    ds = atlas.build_atlas(n=SMALL_N_SPEC, p=SMALL_P_SPEC, progress=False)
    folder = tmp_path_factory.mktemp("small_atlas")
    return {
        "dataset": ds,
        "float64": atlas.save_atlas(ds, folder / "small64.nc"),
        "float32": atlas.save_atlas(cube.compact(ds, "float32"), folder / "small32.nc"),
    }


# A tiny atlas for the chart, sheet and rule tests: a logit p axis (both tails), the round p of
# the tables, n from 1 to 10^5, three methods. About 0.5 s to build, once per test session.
CHART_N_SPEC = "1:30,log:40:100000:14"
CHART_P_SPEC = "logit:0.001:0.999:13,0.01,0.05,0.1,0.3,0.5"
CHART_METHODS = ("normal_cc", "edgeworth_cc", "poisson")


@pytest.fixture(scope="session")
def chart_atlas(tmp_path_factory):
    """The chart atlas, opened: an :class:`atlas.Atlas` whose ``path`` is a float64 file."""
    import atlas

    ds = atlas.build_atlas(n=CHART_N_SPEC, p=CHART_P_SPEC, methods=CHART_METHODS, progress=False)
    path = atlas.save_atlas(ds, tmp_path_factory.mktemp("chart_atlas") / "chart.nc")
    return atlas.open_atlas(path)


# The sheet and the wiki page add the sections on tests and on confidence intervals
# (atlas.sheets.default_sections, about two minutes at their full size). The tests of the sheet
# and the wiki, and of their commands, use the same sections with small tables: n to 2,500 for
# the tests' tables, to 60 for the coverage tables (their content is tested with its module).
LIGHT_SECTION_N_MAX = {"decisions": 2500, "coverage": 60}


@pytest.fixture(autouse=True)
def light_sections(monkeypatch):
    """Replace :func:`atlas.sheets.default_sections` by the same sections with small tables."""
    import functools

    from atlas import sheets

    @functools.cache
    def light(method="normal_cc", *, coverage=None):
        from atlas import coverage_pages, decision_pages

        return (
            decision_pages.section(method, n_max=LIGHT_SECTION_N_MAX["decisions"]),
            coverage_pages.section(coverage, n_max=LIGHT_SECTION_N_MAX["coverage"]),
        )

    monkeypatch.setattr(sheets, "default_sections", _LIGHT.setdefault("f", light))


_LIGHT = {}


# ---- a build killed with SIGKILL, and the processes it leaves behind ---------------------------

# About 170 chunks of about a second of one core (atlas.chunks.plan_chunks with all methods on
# the default p axis): minutes of work for two workers, and the first chunk saved in seconds.
BUSY_N_SPEC = "1:3000,log:3000:1000000:100"


def _stat(pid):
    """(state, parent pid, CPU seconds, start time) of a process from /proc, or None if gone."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except (FileNotFoundError, ProcessLookupError):
        return None
    # The command name, in parentheses, may hold spaces: the fields follow its last ")".
    fields = text[text.rindex(")") + 2 :].split()
    ticks = os.sysconf("SC_CLK_TCK")
    return fields[0], int(fields[1]), (int(fields[11]) + int(fields[12])) / ticks, int(fields[19])


def _descendants(pid):
    """{pid: start time} of every living descendant of process ``pid``, from /proc."""
    children = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            stat = _stat(int(entry.name))
            if stat is not None and stat[0] != "Z":
                children.setdefault(stat[1], []).append((int(entry.name), stat[3]))
    found, todo = {}, [pid]
    while todo:
        for child, start in children.get(todo.pop(), []):
            found[child] = start
            todo.append(child)
    return found


def _running(pid, start):
    """Whether the process ``pid`` that started at ``start`` still runs (a zombie has ended)."""
    stat = _stat(pid)
    return stat is not None and stat[3] == start and stat[0] != "Z"


@pytest.fixture
def killed_build(tmp_path):
    """Run a real ``python -m atlas build``, SIGKILL it while its workers compute, return survivors.

    Call it with the build's extra options and the number of worker processes to wait for:
    ``killed_build(["--workers", "2"], workers=2)``. It starts the build on a grid that keeps
    the workers busy for minutes, with a checkpoint directory, and waits until a chunk has
    been saved there and that many of the build's descendant processes have each used 0.3 s of
    CPU: the workers compute. It records every descendant by process id and start time, kills
    the build with SIGKILL and returns ``(descendants, survivors)``: the pids recorded, and
    those still running (not gone, not a zombie) ``grace`` seconds later.
    Survivors are then killed by pid, so that a failing test leaves nothing behind either.
    """
    if not Path("/proc/self/stat").exists():
        pytest.skip("needs /proc to find the build's worker processes")
    started, trees = [], []

    def run(options, *, workers, grace=5.0):
        checkpoint = tmp_path / "checkpoint"  # a chunk saved there: the workers compute
        argv = [sys.executable, "-m", "atlas", "build", "--n", BUSY_N_SPEC,
                "-o", str(tmp_path / "busy.nc"), "--checkpoint", str(checkpoint),
                *options]  # fmt: skip
        repo = str(Path(__file__).resolve().parents[1])
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([repo, os.environ.get("PYTHONPATH", "")]))
        log = open(tmp_path / "build.log", "w")
        proc = subprocess.Popen(argv, stdout=log, stderr=subprocess.STDOUT, env=env)
        started.append(proc)
        try:
            deadline = time.monotonic() + 60
            while True:
                assert proc.poll() is None, (tmp_path / "build.log").read_text()
                assert time.monotonic() < deadline, "no chunk was computed within 60 s"
                tree = _descendants(proc.pid)
                busy = [pid for pid in tree if (_stat(pid) or ("", 0, 0.0, 0))[2] >= 0.3]
                if len(busy) >= workers and list(checkpoint.glob("chunk-*")):
                    break
                time.sleep(0.05)
            tree = _descendants(proc.pid)
            trees.append(tree)
            proc.send_signal(signal.SIGKILL)
            assert proc.wait(timeout=30) == -signal.SIGKILL
            deadline = time.monotonic() + grace
            while True:
                survivors = [pid for pid, start in tree.items() if _running(pid, start)]
                if not survivors or time.monotonic() > deadline:
                    break
                time.sleep(0.05)
            return tree, survivors
        finally:
            log.close()

    yield run
    for proc in started:  # a build a failed test did not kill: its processes first, then it
        if proc.poll() is None:
            trees.append(_descendants(proc.pid))
            proc.kill()
            proc.wait(timeout=30)
    # A survivor is a worker a failed test found: end it by its pid, as nothing else will.
    for tree in trees:
        for pid, start in tree.items():
            if _running(pid, start):
                os.kill(pid, signal.SIGKILL)
