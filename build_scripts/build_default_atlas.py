"""Build the embedded default atlas, ``atlas/data/default_atlas.nc``.

The atlas covers the default grid (``atlas.grid.DEFAULT_N_SPEC`` x ``DEFAULT_P_SPEC``), every
method of ``atlas.METHODS`` and both metrics (``interval_error`` and ``cdf_error`` are computed
together), with 2 worker processes. The errors are stored as float32 (7 significant digits,
``atlas.cube.compact``); the worst-interval ends stay exact. It also holds the tail and
test-size variables (``decisions=True``: every method on the default decision grid,
``atlas.decision_cube.DECISION_N`` x ``DECISION_P``, levels ``TAIL_LEVELS`` and
``TEST_LEVELS``) and the coverage variables (``coverage=True``: every interval at 0.90, 0.95
and 0.99 on ``atlas.coverage_cube.DEFAULT_COVERAGE_N_SPEC`` x ``DEFAULT_COVERAGE_P_SPEC``). The
file is written beside the target and renamed over it only when complete and under the size
limit.

The data are reproducible: a cell depends only on the engine and the grid, never on the worker
count or the chunking, so the checksum printed at the end is the same on every rebuild until
the engine's results change. Only then rebuild and commit the file: every copy stays in the
repository's history.

Usage::

    python build_scripts/build_default_atlas.py [--workers 2] [--output PATH]
    python build_scripts/build_default_atlas.py --resave [--output PATH]

It prints the number of cells, cells per second, the total time, the peak memory (resident set
of this process and of the largest worker, from ``resource.getrusage``), the file size and the
checksum; it exits with status 1, writing nothing, if the file would exceed ``--max-mb``.

``--resave`` computes nothing: it reads the existing file whole (verifying its checksum), writes
the same Dataset again through ``atlas.cube.save_atlas`` in the current file layout (the same
path, atomically, under the same size limit), then reads the new file back and checks that its
stored checksum verifies and equals the old one. Use it when the layout changes but the values
do not (so it was used when the method names became fixed-width characters).
"""

import argparse
import os
import resource
import sys
import time
from pathlib import Path

# Build this checkout's atlas, not that of an installed copy.
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from atlas import METHODS, cube, floatpath, grid, store  # noqa: E402
from atlas.build import build_atlas  # noqa: E402

# The package-data limit: 40 MB since the file holds the tail, test-size and coverage variables
# beside the errors (issue 11 and 12 allow 40 MB for the atlas with every metric).
MAX_MB = 40.0


def _peak_mb():
    """Peak resident set size of this process and of its largest finished child, in MB."""
    # ru_maxrss is in kilobytes on Linux.
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    child = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    return own, child


def _cpu_seconds():
    """CPU time (user + system) used so far by this process and by its finished children."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime, children.ru_utime + children.ru_stime


def _write(ds, output, max_mb):
    """Save ``ds`` beside ``output`` and rename it over ``output`` if it is within ``max_mb``.

    Returns the size in bytes, or None (nothing written) when the file would be too large.
    """
    output.parent.mkdir(parents=True, exist_ok=True)
    staging = output.with_name(f".{output.name}.build-{os.getpid()}.nc")
    try:
        cube.save_atlas(ds, staging)
        size = staging.stat().st_size
        if size > max_mb * 1e6:
            print(
                f"error: the atlas is {size / 1e6:.2f} MB, over the {max_mb:g} MB limit; "
                f"nothing written to {output}",
                file=sys.stderr,
            )
            return None
        os.replace(staging, output)
    finally:
        if staging.exists():
            staging.unlink()
    return size


def resave(output, max_mb=MAX_MB):
    """Write the atlas at ``output`` again in the current layout, without computing anything.

    Returns
    -------
    int
        0 when the new file verifies with the old checksum; 1 if nothing was written (too
        large) or the check failed.
    """
    started = time.perf_counter()
    before = output.stat().st_size
    with cube.load_dataset(output, verify=True) as opened:  # reads and checks every value
        ds = opened.load()
    checksum = ds.attrs["checksum"]
    size = _write(ds, output, max_mb)
    if size is None:
        return 1
    with cube.load_dataset(output, verify=True) as again:
        stored = again.attrs["checksum"]
    print(f"resaved {output}: {before} -> {size} bytes in {time.perf_counter() - started:.1f} s")
    print(f"checksum: {stored}")
    if stored != checksum:
        print(f"error: the stored checksum changed (it was {checksum})", file=sys.stderr)
        return 1
    print("checksum is the same as the previous file's and verifies against the values")
    return 0


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--workers", type=int, default=2, help="worker processes (2)")
    parser.add_argument("--output", type=Path, default=store.default_path(), help="the file")
    parser.add_argument("--max-mb", type=float, default=MAX_MB, help="size limit in MB (40)")
    parser.add_argument(
        "--resave",
        action="store_true",
        help="rewrite the existing file in the current layout; compute nothing",
    )
    args = parser.parse_args(argv)
    if args.resave:
        return resave(args.output, args.max_mb)

    previous = None
    if args.output.exists():
        try:
            previous = cube.load_dataset(args.output).attrs.get("checksum")
        except (OSError, ValueError):
            previous = "unreadable"
    n, p = grid.default_n(), grid.default_p()
    print(f"grid: {grid.describe_grid(n, p)}; {len(METHODS)} methods; {args.workers} workers")
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    started = time.perf_counter()
    ds = build_atlas(
        grid.DEFAULT_N_SPEC,
        grid.DEFAULT_P_SPEC,
        METHODS,
        workers=args.workers,
        decisions=True,
        coverage=True,
    )
    computed = time.perf_counter() - started
    ds = cube.compact(ds, "float32")
    size = _write(ds, args.output, args.max_mb)
    if size is None:
        return 1
    total = time.perf_counter() - started
    cells = ds.sizes["approximation"] * ds.sizes["n"] * ds.sizes["p"]
    points = ds.sizes["n"] * ds.sizes["p"]
    own, child = _peak_mb()
    checksum = ds.attrs["checksum"]
    print(f"cells: {cells} ({ds.sizes['approximation']} methods x {points} (n, p) points)")
    print(f"compute time (errors, tail and test-size, coverage): {computed:.1f} s; "
          f"{cells / computed:.0f} error cells/s, "
          f"{points / computed:.0f} (n, p) points/s")  # fmt: skip
    print(f"total time (compute, compact, write): {total:.1f} s")
    print("steps (from the history attribute):")
    for line in ds.attrs["history"].splitlines():
        print(f"  {line}")
    own_cpu, worker_cpu = _cpu_seconds()
    # Other processes share the cores: the CPU time shows what the build itself needed. On
    # idle cores the workers' time divides among them and this process's adds on top of it.
    print(f"CPU time: workers {worker_cpu:.1f} s, this process {own_cpu:.1f} s; on "
          f"{args.workers} otherwise idle cores about "
          f"{worker_cpu / args.workers + own_cpu:.0f} s")  # fmt: skip
    print(f"peak memory: this process {own:.0f} MB, largest worker {child:.0f} MB, "
          f"at most {own + args.workers * child:.0f} MB together")  # fmt: skip
    print(f"file: {args.output} ({size / 1e6:.2f} MB, {size} bytes)")
    print(f"checksum: {checksum}")
    if previous == "unreadable":
        print("the previous file could not be read (damaged, or of an older schema)")
    elif previous is not None:
        same = "the same as" if previous == checksum else "DIFFERENT from"
        print(f"checksum is {same} the previous file's ({previous})")
    print(f"load average at end: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    return 0


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    raise SystemExit(main())
