"""Benchmark the atlas build: 1 worker against 2, measured in the same run, and peak memory.

The sub-grid is representative of the default one: every 4th n of the default n axis (small n
with narrow windows and large n with the nested search, up to 10^8) and every 2nd p (both
tails and 1/2), all seven methods. It is built once in this process (``workers=1``) and once
with 2 worker processes; the script prints cells per second and the time of each, their
ratio (target >= 1.7), and checks that the two cubes are identical bit for bit.

Peak memory of the full default build (target < 2 GB) is estimated from what is measured here
and the size of the full cube: this process's resident set before the build, plus the cube's
arrays (float64 errors and int64 ends, and the float32 copy the default atlas is stored as),
plus the largest worker's resident set. ``--full`` measures it instead by building the
default atlas (several minutes; nothing is written).

Usage::

    python build_scripts/bench_build.py [--n-step 4] [--p-step 2] [--repeat 1] [--full]

Other processes on the machine slow both runs and lower the ratio: the load average is printed
before and after.
"""

import argparse
import os
import resource
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402

from atlas import METHODS, floatpath, grid, store  # noqa: E402
from atlas.build import build_atlas  # noqa: E402


def _rss_mb(who):
    return resource.getrusage(who).ru_maxrss / 1024  # kilobytes on Linux


def _load():
    return " ".join(f"{x:.2f}" for x in os.getloadavg())


def _cpu():
    """CPU seconds (user + system) of this process and of its finished children."""
    return sum(
        usage.ru_utime + usage.ru_stime
        for usage in (
            resource.getrusage(w) for w in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN)
        )
    )


def _timed(n, p, workers):
    """The Dataset, wall seconds and CPU seconds of one build."""
    cpu, started = _cpu(), time.perf_counter()
    ds = build_atlas(n, p, METHODS, workers=workers, progress=False)
    return ds, time.perf_counter() - started, _cpu() - cpu


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n-step", type=int, default=4, help="take every k-th default n (4)")
    parser.add_argument("--p-step", type=int, default=2, help="take every k-th default p (2)")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each, alternated (1)")
    parser.add_argument("--full", action="store_true", help="measure the full default build")
    args = parser.parse_args(argv)

    n = grid.default_n()[:: args.n_step]
    p = grid.default_p()[:: args.p_step]
    cells = len(METHODS) * n.size * p.size
    print(f"sub-grid: {grid.describe_grid(n, p)}; {len(METHODS)} methods; {cells} cells")
    print(f"numpy float path {floatpath.describe()}; load average before: {_load()}")
    base_rss = _rss_mb(resource.RUSAGE_SELF)

    runs = {1: [], 2: []}
    for _ in range(args.repeat):  # alternated, so that a burst of other work hits both
        for workers in (1, 2):
            ds, wall, cpu = _timed(n, p, workers)
            runs[workers].append((wall, cpu, ds))
            label = "1 worker " if workers == 1 else "2 workers"
            print(f"{label}: {wall:7.1f} s  {cells / wall:9.0f} cells/s  (CPU {cpu:.1f} s)")
    # The fastest of each: other processes only ever slow a run down.
    t1, c1, one = min(runs[1], key=lambda r: r[0])
    t2, c2, two = min(runs[2], key=lambda r: r[0])
    if args.repeat > 1:
        print(f"fastest: 1 worker {t1:.1f} s ({cells / t1:.0f} cells/s), 2 workers {t2:.1f} s "
              f"({cells / t2:.0f} cells/s)")  # fmt: skip
    print(f"ratio 2 workers / 1 worker: {t1 / t2:.2f}x (target >= 1.7x)")
    # Under load the wall times measure the other processes too; the CPU times do not. On idle
    # cores the 2-worker run would take about c2 / 2 (if its chunks balance), hence:
    print(f"CPU-time ratio (1-worker CPU / half the 2-worker CPU): {c1 / (c2 / 2):.2f}x")
    same = all(np.array_equal(one[v].values, two[v].values) for v in store.DATA_VARIABLES)
    print(f"identical bit for bit: {same}")
    print(f"load average after: {_load()}")

    full_n, full_p = grid.default_n(), grid.default_p()
    full_cells = len(METHODS) * full_n.size * full_p.size
    worker_rss = _rss_mb(resource.RUSAGE_CHILDREN)
    if args.full:
        _, seconds, _ = _timed(grid.DEFAULT_N_SPEC, grid.DEFAULT_P_SPEC, 2)
        own = _rss_mb(resource.RUSAGE_SELF)
        worker_rss = _rss_mb(resource.RUSAGE_CHILDREN)
        print(f"full default build, 2 workers: {seconds:.1f} s, {full_cells / seconds:.0f} cells/s")
        print(f"measured peak memory: this process {own:.0f} MB, largest worker "
              f"{worker_rss:.0f} MB, at most {own + 2 * worker_rss:.0f} MB together")  # fmt: skip
    else:
        # float64 + float64 + int64 + int64 per cell, and the float32 copy of the two errors.
        cube_mb = full_cells * (8 + 8 + 8 + 8 + 4 + 4) / 2**20
        estimate = base_rss + cube_mb + 2 * worker_rss
        print(f"estimated peak memory of the full default build ({full_cells} cells): "
              f"{base_rss:.0f} MB before the build + {cube_mb:.0f} MB of arrays + 2 workers x "
              f"{worker_rss:.0f} MB = {estimate:.0f} MB (target < 2048 MB)")  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
