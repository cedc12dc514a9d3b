"""Tests for atlas.distributed: builds on dask.distributed give the serial cube, bit for bit.

Every cluster, scheduler and worker a test starts is stopped by that test (context managers,
try/finally, timeouts), so no process outlives it.
"""

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

import atlas
import atlas.distributed
from atlas.build import build_atlas
from atlas.chunks import plan_chunks
from atlas.distributed import connect, parse_spec, run_chunks

REPO = Path(atlas.__file__).resolve().parents[1]
# About 25 chunks of a few hundredths of a second at COST: enough for tasks to be in flight.
N_SPEC, P_SPEC, COST = "1:60,log:80:3000000:24", "logit:0.01:0.99:11,0.5", 1e4


def _assert_same_cube(a, b):
    for name in a.data_vars:
        assert np.array_equal(a[name].values, b[name].values), name
    assert a.attrs["checksum"] == b.attrs["checksum"]


@pytest.fixture(scope="module")
def serial():
    """The build in this process, with the default chunk plan."""
    return build_atlas(N_SPEC, P_SPEC, progress=False)


# ---- the specification and the light paths (no cluster) ----


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        (None, (None, None)),
        ("local:1", ("local", 1)),
        (" local:12 ", ("local", 12)),
        ("tcp://127.0.0.1:8786", ("tcp", "tcp://127.0.0.1:8786")),
        ("tcp://scheduler-1.example:8786", ("tcp", "tcp://scheduler-1.example:8786")),
        ("tcp://[::1]:8786", ("tcp", "tcp://[::1]:8786")),
    ],
)
def test_parse_spec_accepts_the_two_forms(spec, expected):
    assert parse_spec(spec) == expected


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        ("bogus", r"^`spec` must be 'local:K' \(K local worker processes\) or 'tcp://HOST:PORT' "
                  r"\(a running scheduler\); got 'bogus'\.$"),  # fmt: skip
        ("local", r"must be 'local:K'.*; got 'local'\."),
        ("local:-2", r"must be 'local:K'.*; got 'local:-2'\."),
        ("local:0", r"^`spec` 'local:K' must have K >= 1 workers; got 'local:0'\.$"),
        ("tcp://127.0.0.1", r"must be 'local:K'.*; got 'tcp://127\.0\.0\.1'\."),
        ("tcp://127.0.0.1:0", r"^`spec` must have a port from 1 to 65535; got 'tcp://127\.0\.0\.1:0'"),
        ("tcp://127.0.0.1:70000", r"must have a port from 1 to 65535; got 'tcp://127\.0\.0\.1:70000'"),
    ],
)  # fmt: skip
def test_parse_spec_refuses_anything_else(spec, message):
    with pytest.raises(ValueError, match=message):
        parse_spec(spec)
    with pytest.raises(ValueError, match=message), connect(spec):
        pass


def test_spec_of_wrong_type_is_refused():
    with pytest.raises(TypeError, match=r"^`spec` must be a string or None; got int\.$"):
        parse_spec(2)


def test_connect_none_is_a_serial_build(serial):
    with connect(None) as client:
        assert client is None
        _assert_same_cube(build_atlas(N_SPEC, P_SPEC, progress=False, client=client), serial)


def test_no_chunks_needs_no_cluster():
    assert list(run_chunks(None, [], np.array([1]), np.array([0.5]), ("normal_cc",))) == []


def test_import_atlas_does_not_import_dask():
    # Importing only: a build makes an xarray Dataset, and xarray itself imports dask.config.
    code = (
        "import sys, atlas, atlas.build, atlas.chunks, atlas.pool, atlas.distributed\n"
        "import atlas.checkpoint\n"
        "print(sorted(m for m in ('dask', 'distributed') if m in sys.modules))\n"
    )
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    )
    out = subprocess.run(
        [sys.executable, "-c", code], env=env, capture_output=True, text=True, timeout=120
    )
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"


def test_chunking_does_not_change_a_value(serial):
    # One p per block and tiny chunks against the default plan: the engine is per cell.
    _assert_same_cube(
        build_atlas(N_SPEC, P_SPEC, progress=False, p_block=1, chunk_cost=COST / 3), serial
    )


# ---- a LocalCluster of processes ----


def test_local_cluster_of_two_processes_gives_the_serial_cube(serial):
    with connect("local:2") as client:
        assert len(client.scheduler_info()["workers"]) == 2
        # Workers keep this process's allocator settings, not dask's MALLOC_TRIM_THRESHOLD_.
        trim = os.environ.get("MALLOC_TRIM_THRESHOLD_")
        on_workers = client.run(lambda: os.environ.get("MALLOC_TRIM_THRESHOLD_"))
        assert set(on_workers.values()) == {trim}
        ds = build_atlas(N_SPEC, P_SPEC, progress=False, client=client, chunk_cost=COST, p_block=5)
        # An error raised on a worker (here the engine's, for an unknown method) reaches the
        # caller after the task's retries.
        n, p = np.array([10, 20, 30]), np.array([0.5])
        with pytest.raises(ValueError, match=r"^`method` must be one of .*; got 'bogus'"):
            list(run_chunks(client, plan_chunks(n, p, cost=1), n, p, ("bogus",)))
    _assert_same_cube(ds, serial)


@pytest.mark.parametrize(
    "workers",
    [
        2,  # the other worker holds the axes too: the scheduler reruns the killed tasks
        1,  # the axes die with the only worker: they are scattered again to its replacement
    ],
)
def test_build_survives_a_worker_killed_mid_build(serial, monkeypatch, workers):
    kills = []
    original = atlas.distributed.run_chunks

    def run_and_kill(client, chunks, n, p, methods):
        pids = client.run(os.getpid)
        finished = 0
        for item in original(client, chunks, n, p, methods):
            finished += 1
            if not kills:
                # Kill (SIGKILL) the busiest worker while its tasks run.
                busy = client.processing()
                victim = max(pids, key=lambda address: len(busy.get(address, ())))
                kills.append((victim, len(busy.get(victim, ())), len(chunks) - finished))
                os.kill(pids[victim], signal.SIGKILL)
            yield item

    monkeypatch.setattr(atlas.distributed, "run_chunks", run_and_kill)
    with connect(f"local:{workers}") as client:
        scatters = []
        scatter = client.scatter
        monkeypatch.setattr(
            client, "scatter", lambda *a, **k: scatters.append(1) or scatter(*a, **k)
        )
        ds = build_atlas(N_SPEC, P_SPEC, progress=False, client=client, chunk_cost=COST)
        assert len(scatters) == (1 if workers == 2 else 2)
        (victim, running, left), = kills  # fmt: skip
        assert running >= 1  # it was computing a chunk when killed
        assert left >= 5  # and the build had chunks to go
        assert victim not in client.scheduler_info()["workers"]  # the scheduler lost it
    _assert_same_cube(ds, serial)


# ---- a real `dask scheduler` and `dask worker` over tcp ----


def _free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _dask(command):
    """The venv's ``dask <command>``, or ``python -m distributed.cli.dask_<command>``."""
    exe = Path(sys.executable).parent / "dask"
    if exe.exists():
        return [str(exe), command]
    return [sys.executable, "-m", f"distributed.cli.dask_{command}"]


def _start(args, log):
    """Start a process in its own process group, so that stopping it stops its children."""
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    )
    return subprocess.Popen(
        args, env=env, stdout=log, stderr=subprocess.STDOUT, start_new_session=True
    )


def _stop(proc):
    """SIGTERM the process group, then SIGKILL it if it has not ended within 15 s."""
    if proc.poll() is None:
        with_group = [signal.SIGTERM, signal.SIGKILL]
        for sig in with_group:
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                break
            try:
                proc.wait(timeout=15)
                break
            except subprocess.TimeoutExpired:
                continue
    try:  # children left in the group (a nanny's worker) get the same end
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    proc.wait(timeout=15)


def _wait_for_port(port, proc, log, seconds=60):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        assert proc.poll() is None, Path(log.name).read_text()
        with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
            if sock.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.1)
    raise AssertionError(f"the dask scheduler did not listen on port {port} within {seconds} s")


def test_unreachable_scheduler_is_refused():
    spec = f"tcp://127.0.0.1:{_free_port()}"
    with pytest.raises(ValueError, match=rf"^`spec` names no reachable dask scheduler: '{spec}' "):
        with connect(spec, timeout=1):
            pass


def test_scheduler_and_worker_over_tcp_give_the_serial_cube(serial, tmp_path):
    port = _free_port()
    spec = f"tcp://127.0.0.1:{port}"
    procs = []
    with open(tmp_path / "scheduler.log", "w") as slog, open(tmp_path / "worker.log", "w") as wlog:
        try:
            procs.append(
                _start(
                    [*_dask("scheduler"), "--host", "127.0.0.1", "--port", str(port),
                     "--no-dashboard"],
                    slog,
                )
            )  # fmt: skip
            _wait_for_port(port, procs[0], slog)
            # A scheduler without workers is refused rather than waited on for ever.
            with pytest.raises(ValueError, match=r"names a dask scheduler with no workers"):
                with connect(spec, timeout=1):
                    pass
            procs.append(
                _start(
                    [*_dask("worker"), spec, "--nworkers", "2", "--nthreads", "1",
                     "--no-dashboard", "--local-directory", str(tmp_path / "work"),
                     "--death-timeout", "60"],
                    wlog,
                )
            )  # fmt: skip
            with connect(spec, timeout=60) as client:
                ds = build_atlas(N_SPEC, P_SPEC, progress=False, client=client, chunk_cost=COST)
                workers = client.scheduler_info()["workers"]
                assert all(w["nthreads"] == 1 for w in workers.values())
        finally:
            for proc in reversed(procs):
                _stop(proc)
    _assert_same_cube(ds, serial)


# ---- a build killed with SIGKILL ----


def test_local_cluster_ends_with_a_build_killed_with_sigkill(killed_build):
    # `--dask local:2` starts its worker processes from the build (the nannies live in the
    # build's process). SIGKILL of the build ends them: distributed's worker processes watch a
    # pipe from their parent and exit when it closes.
    tree, survivors = killed_build(["--dask", "local:2"], workers=2)
    assert len(tree) >= 2  # the two workers (and multiprocessing's resource tracker)
    assert survivors == [], f"processes {survivors} of {sorted(tree)} outlived the build"
