"""Benchmark the query layer against the speed targets of issue 4, as ratios measured in one run.

1. 100,000 vectorised on-grid lookups, ``Atlas.error(n, p)`` on arrays: target 0.2 s.
2. ``import atlas`` in a fresh interpreter (median of several), and whether it pulled in
   matplotlib, dask or netCDF4: target 0.5 s, none of the three.
3. ``approx-atlas query --n 50 --p 0.1 --tol 0.01`` from a cold interpreter, wall time
   (median of several): target 1.5 s.

The embedded atlas (atlas/data/default_atlas.nc) is used when present. Otherwise a temporary
atlas is built on the default grid (the same n and p axes, so the same file layout per method)
for normal_cc only, stored as float32 like the embedded copy; that takes about a minute on one
core, and the report says so. A ratio below 1 meets the target.

The wall times are the targets; the CPU times beside them show what a loaded machine adds.

Usage::

    python build_scripts/bench_query.py [--atlas FILE] [--repeats 5]
"""

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

TARGET_LOOKUPS = 0.2
TARGET_IMPORT = 0.5
TARGET_QUERY = 1.5
LOOKUPS = 100_000

_IMPORT_PROBE = (
    "import sys, time, json\n"
    "t, c = time.perf_counter(), time.process_time()\n"
    "import atlas\n"
    "dt, dc = time.perf_counter() - t, time.process_time() - c\n"
    "heavy = [m for m in ('matplotlib', 'dask', 'netCDF4', 'scipy.stats') if m in sys.modules]\n"
    "print(json.dumps({'seconds': dt, 'cpu': dc, 'heavy': heavy}))\n"
)


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    return env


def _ratio_line(label, seconds, target, extra=""):
    ratio = seconds / target
    return f"{label:<40} {seconds:7.3f} s  target {target:4.2f} s  ratio {ratio:5.2f}{extra}"


def _temporary_atlas(folder):
    """Build the default grid for normal_cc, float32 like the embedded atlas; return its path."""
    import atlas
    from atlas import cube

    started = time.perf_counter()
    ds = atlas.build_atlas(methods="normal_cc", progress=False)
    path = atlas.save_atlas(cube.compact(ds, "float32"), Path(folder) / "bench_atlas.nc")
    return path, time.perf_counter() - started


def bench_lookups(path, repeats):
    """Median time of LOOKUPS vectorised on-grid lookups (after one call that reads the data)."""
    import numpy as np

    from atlas.query import open_atlas

    with open_atlas(path) as at:
        rng = np.random.default_rng(20240)
        n = rng.choice(at.n, LOOKUPS)
        p = rng.choice(at.p, LOOKUPS)
        started = time.perf_counter()
        at.error(n[:1], p[:1])  # reads the normal_cc interval_error variable once
        first = time.perf_counter() - started
        times = []
        for _ in range(repeats):
            started = time.perf_counter()
            values = at.error(n, p)
            times.append(time.perf_counter() - started)
        assert bool(at.on_grid(n, p).all()) and values.shape == (LOOKUPS,)
        return statistics.median(times), first


def bench_import(repeats):
    """Median wall and CPU seconds of ``import atlas`` in fresh interpreters, and the heavy
    modules seen."""
    seconds, cpu, heavy = [], [], set()
    for _ in range(repeats):
        done = subprocess.run(
            [sys.executable, "-c", _IMPORT_PROBE],
            capture_output=True, text=True, env=_env(), check=True,
        )  # fmt: skip
        record = json.loads(done.stdout)
        seconds.append(record["seconds"])
        cpu.append(record["cpu"])
        heavy.update(record["heavy"])
    return statistics.median(seconds), statistics.median(cpu), sorted(heavy)


def bench_query(path, repeats):
    """Median wall time, median CPU time (user + system) and first wall time of the query
    command in a fresh interpreter."""
    import resource

    script = shutil.which("approx-atlas")
    head = [script] if script else [sys.executable, "-m", "atlas"]
    argv = head + ["query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--atlas", str(path)]
    times, cpu = [], []
    for _ in range(repeats):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        started = time.perf_counter()
        done = subprocess.run(argv, capture_output=True, text=True, env=_env())
        times.append(time.perf_counter() - started)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
        if done.returncode != 0:
            raise SystemExit(f"the query command failed: {done.stderr.strip()}")
    command = " ".join(["approx-atlas"] + argv[len(head) :])
    return statistics.median(times), statistics.median(cpu), times[0], command


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--atlas", help="atlas file (default: the embedded, else a temporary one)")
    parser.add_argument("--repeats", type=int, default=5, help="runs per measurement (median)")
    args = parser.parse_args(argv)

    from atlas import store

    with tempfile.TemporaryDirectory() as folder:
        if args.atlas is not None:
            path, where = Path(args.atlas), f"the given atlas {args.atlas}"
        elif store.default_path().exists():
            path, where = store.default_path(), f"the embedded atlas {store.default_path()}"
        else:
            path, built = _temporary_atlas(folder)
            where = (
                f"a temporary atlas (the embedded one is not built yet): the default grid, "
                f"normal_cc only, float32, built in {built:.0f} s"
            )
        from atlas.query import open_atlas

        with open_atlas(path) as at:
            shape = f"{at.n.size} n x {at.p.size} p x {len(at.methods)} methods"
            precision = at.dataset.attrs.get("error_precision")
        size = path.stat().st_size / 2**20
        print(f"atlas: {where}\n       {shape}, errors {precision}, {size:.1f} MiB")
        print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}; "
              f"median of {args.repeats} runs")  # fmt: skip

        lookups, first = bench_lookups(path, args.repeats)
        imported, imported_cpu, heavy = bench_import(args.repeats)
        query, query_cpu, query_first, command = bench_query(path, args.repeats)

    print(_ratio_line(f"{LOOKUPS:,} vectorised on-grid lookups", lookups, TARGET_LOOKUPS,
                      f"  (first call, reading the variable: {first:.3f} s)"))  # fmt: skip
    seen = ", ".join(heavy) if heavy else "none of matplotlib, dask, netCDF4, scipy.stats"
    print(_ratio_line("import atlas (fresh interpreter)", imported, TARGET_IMPORT,
                      f"  (CPU {imported_cpu:.3f} s, ratio {imported_cpu / TARGET_IMPORT:.2f}; "
                      f"imported: {seen})"))  # fmt: skip
    print(_ratio_line("query command, cold start (wall)", query, TARGET_QUERY,
                      f"  (CPU {query_cpu:.3f} s, ratio {query_cpu / TARGET_QUERY:.2f}; "
                      f"first run {query_first:.3f} s)"))  # fmt: skip
    print("  (wall times include waiting for a core when the machine is loaded; CPU times do not)")
    print(f"  command: {command}")
    ok = lookups <= TARGET_LOOKUPS and imported <= TARGET_IMPORT and query <= TARGET_QUERY
    bad_imports = [m for m in heavy if m in ("matplotlib", "dask", "netCDF4")]
    print("all targets met" if ok and not bad_imports else "a target is missed")
    return 0 if ok and not bad_imports else 1


if __name__ == "__main__":
    raise SystemExit(main())
