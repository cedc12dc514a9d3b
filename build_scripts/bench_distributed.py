"""Benchmark of builds on dask.distributed: ratios measured in one run, and a large-grid plan.

Prints, each with its target where it has one:

1. scheduling overhead: the build time with a dask LocalCluster of one worker process over the
   build in this process, on the same small grid (target: at most 1.3x);
2. throughput in (n, p) cells per second (each cell with all seven methods) with one and with
   two worker processes on the same grid, and the scaling (target: at least 1.7x);
3. a large-grid plan: the projected time and memory of a build of a default-like n axis
   extended to n = 10^9 with 1,000 p values on 100 workers, from the measured cost of sample
   chunks at n = 1 .. 10^9, and the assumptions behind it;
4. for information: the CPU time of one chunk in a fresh process started with dask's worker
   setting MALLOC_TRIM_THRESHOLD_=65536 over one started without it (why atlas.distributed
   starts local workers without it).

Cluster start-up and the workers' first imports are timed apart and left out of 1 and 2 (a
cluster is started once per build, whatever its size). The machine's load average is printed
before and after each part: other work on the cores lowers the scaling.

Usage: python build_scripts/bench_distributed.py [--quick]
"""

import argparse
import math
import os
import sys
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout, too

import numpy as np  # noqa: E402 - after the path

from atlas.approximations import METHODS  # noqa: E402
from atlas.build import build_atlas  # noqa: E402
from atlas.chunks import cell_cost, compute_chunk, plan_chunks  # noqa: E402
from atlas.distributed import connect  # noqa: E402
from atlas.grid import parse_n, parse_p  # noqa: E402

# Grids. SMALL: a few chunks; WIDE: about twenty chunks of the default size, so that two
# workers finish within a chunk of each other.
SMALL = ("1:300,log:300:100000000:80", "logit:0.0001:0.9999:41,0.5")
WIDE = ("1:500,log:500:100000000:160", "logit:0.0001:0.9999:81,0.5")
QUICK_SMALL = ("1:100,log:100:1000000:30", "logit:0.001:0.999:21,0.5")
QUICK_WIDE = ("1:200,log:200:10000000:60", "logit:0.001:0.999:31,0.5")
# The large grid: the default n axis (every n to 2000, then 100.02 points a decade) carried on
# to 10^9, and 1,000 logit-spaced p.
PLAN_N = "1:2000,log:2000:1000000000:571"
PLAN_P = "logit:0.0001:0.9999:1000"
PLAN_WORKERS = 100
SAMPLE_N = (1, 3, 10, 30, 100, 300, 1000, 2000, 10**4, 10**5, 10**6, 10**7, 10**8, 10**9)
FULL_P_UP_TO = 10**4  # sample n up to here over all 1,000 p; above, over every 10th p


def load():
    one, five, _ = os.getloadavg()
    return f"load average {one:.2f} (1 min), {five:.2f} (5 min) on {os.cpu_count()} cores"


def _cpu_seconds():
    """User + system CPU seconds of the calling process (run on each worker, too)."""
    import psutil  # a dependency of distributed

    times = psutil.Process().cpu_times()
    return times.user + times.system


def timed_build(grid_spec, repeat, client=None):
    """The fastest of ``repeat`` builds: wall seconds, CPU seconds, worker occupancy, Dataset.

    CPU seconds count this process (with a LocalCluster's scheduler) and every worker, so that
    they hardly depend on other work on the machine; occupancy is the time the workers spent
    computing tasks over (wall time x workers), from dask's task stream.
    """
    best = (math.inf, math.nan, math.nan, None)
    for _ in range(repeat):
        workers = (lambda: sum(client.run(_cpu_seconds).values())) if client else (lambda: 0.0)
        cpu0, wcpu0, start = _cpu_seconds(), workers(), time.perf_counter()
        if client is None:
            ds = build_atlas(*grid_spec, progress=False)
            busy = math.nan
        else:
            from distributed import get_task_stream

            with get_task_stream(client=client) as stream:
                ds = build_atlas(*grid_spec, progress=False, client=client)
            busy = sum(
                part["stop"] - part["start"]
                for task in stream.data
                for part in task["startstops"]
                if part["action"] == "compute"
            )
        wall = time.perf_counter() - start
        cpu = _cpu_seconds() - cpu0 + workers() - wcpu0
        if wall < best[0]:
            count = len(client.scheduler_info()["workers"]) if client else 1
            best = (wall, cpu, busy / (wall * count), ds)
    return best


def idle_rates(client, seconds=3.0):
    """CPU seconds per second of an idle cluster: (this process with the scheduler, a worker)."""
    here, there = _cpu_seconds(), client.run(_cpu_seconds)
    time.sleep(seconds)
    after = client.run(_cpu_seconds)
    worker = max(after[w] - there[w] for w in there) / seconds
    return (_cpu_seconds() - here) / seconds, worker


def cells(grid_spec):
    return parse_n(grid_spec[0]).size * parse_p(grid_spec[1]).size


def start_cluster(stack, workers):
    """Start ``local:K``, import the engine on every worker, and time both."""
    start = time.perf_counter()
    client = stack.enter_context(connect(f"local:{workers}"))
    up = time.perf_counter() - start
    client.run(compute_chunk, [10], [0.5], METHODS)  # the workers' first imports
    return client, up, time.perf_counter() - start - up


def same(a, b):
    return all(np.array_equal(a[v].values, b[v].values) for v in a.data_vars)


def measure(small, wide, repeat):
    from contextlib import ExitStack

    print(f"[{load()}]")
    serial_small, serial_cpu, _, ref_small = timed_build(small, repeat)
    with ExitStack() as stack:
        client, up, warm = start_cluster(stack, 1)
        print(f"local:1 cluster start {up:.2f} s, first imports on the worker {warm:.2f} s")
        idle_here, idle_worker = idle_rates(client)
        dask_small, dask_cpu, busy_small, ds = timed_build(small, repeat, client=client)
        assert same(ds, ref_small), (
            "local:1 differs from the serial build (atlas edited meanwhile?)"
        )
        one_wide, one_cpu, one_busy, ref_wide = timed_build(wide, 1, client=client)
    chunks_small = len(plan_chunks(parse_n(small[0]), parse_p(small[1])))
    overhead = dask_small / serial_small
    background = (idle_here + idle_worker) * dask_small
    per_task = (dask_cpu - serial_cpu - background) / chunks_small
    print(
        f"\n1. scheduling overhead, grid n={small[0]!r} p={small[1]!r} "
        f"({cells(small)} cells, {chunks_small} chunks, best of {repeat}):\n"
        f"   wall: serial {serial_small:.2f} s, dask local:1 {dask_small:.2f} s: "
        f"{overhead:.3f}x (target <= 1.3x: {'met' if overhead <= 1.3 else 'NOT met'});\n"
        f"   CPU (all processes): serial {serial_cpu:.2f} s, dask local:1 {dask_cpu:.2f} s: "
        f"{dask_cpu / serial_cpu:.3f}x; the worker computed {busy_small:.0%} of the wall time;\n"
        f"   an idle cluster uses {idle_here:.1%} of a core in this process (scheduler, client) "
        f"and {idle_worker:.1%} in a worker (heartbeats, monitors):\n"
        f"   {background:.2f} s of the difference; the rest is {1000 * per_task:+.0f} ms per chunk"
    )
    print(f"[{load()}]")
    with ExitStack() as stack:
        client, up, warm = start_cluster(stack, 2)
        print(f"local:2 cluster start {up:.2f} s, first imports on the workers {warm:.2f} s")
        two_wide, two_cpu, two_busy, ds = timed_build(wide, 1, client=client)
        assert same(ds, ref_wide), "local:2 differs from local:1 (atlas edited meanwhile?)"
        import psutil  # a dependency of distributed

        rss = client.run(lambda: psutil.Process().memory_info().rss)
    chunks_wide = len(plan_chunks(parse_n(wide[0]), parse_p(wide[1])))
    c = cells(wide)
    scaling = one_wide / two_wide
    print(
        f"\n2. throughput, grid n={wide[0]!r} p={wide[1]!r} ({c} cells x {len(METHODS)} "
        f"methods, {chunks_wide} chunks):\n"
        f"   local:1 {one_wide:.2f} s = {c / one_wide:,.0f} cells/s; "
        f"local:2 {two_wide:.2f} s = {c / two_wide:,.0f} cells/s; "
        f"scaling {scaling:.2f}x (target >= 1.7x: {'met' if scaling >= 1.7 else 'NOT met'});\n"
        f"   CPU (all processes) {one_cpu:.1f} s and {two_cpu:.1f} s; the workers computed "
        f"{one_busy:.0%} and {two_busy:.0%} of the wall time;\n"
        f"   the cubes are identical bit for bit (local:1, local:2; serial on the small grid)"
    )
    print(f"[{load()}]")
    return {
        "per_task": max(per_task, 0.0),
        "worker_rss": max(rss.values()),
        "background": idle_worker,
    }


def interpolate(sample_n, values, n):
    """Piecewise-linear interpolation in (log n, log value), flat beyond the samples."""
    return np.exp(np.interp(np.log(n), np.log(sample_n), np.log(values)))


def lpt_makespan(times, workers):
    """Greedy list scheduling, costliest first (as run_chunks submits them)."""
    import heapq

    free = [0.0] * workers
    for t in sorted(times, reverse=True):
        heapq.heappush(free, heapq.heappop(free) + t)
    return max(free)


def time_save(cells, repeat=5):
    """CheckpointStore.save (write, fsync, rename) of a chunk of ``cells`` cells: seconds, bytes."""
    import tempfile

    from atlas.checkpoint import CheckpointStore
    from atlas.chunks import Chunk

    rng = np.random.default_rng(0)
    shape = (len(METHODS), 1, cells)
    part = {
        "interval_error": rng.random(shape),
        "cdf_error": rng.random(shape),
        "interval_lo": rng.integers(0, 10**9, shape),
        "interval_hi": rng.integers(0, 10**9, shape),
    }
    chunk = Chunk(0, 0, 1, 0, cells)
    with tempfile.TemporaryDirectory() as tmp:
        n, p = np.array([1]), np.linspace(0.01, 0.99, cells)
        store = CheckpointStore.open(tmp, n, p, METHODS, [chunk])
        start = time.perf_counter()
        for _ in range(repeat):
            path = store.save(chunk, part)
        return (time.perf_counter() - start) / repeat, path.stat().st_size


def plan(measured, quick):
    n_axis, p_axis = parse_n(PLAN_N), parse_p(PLAN_P)
    methods = len(METHODS)
    sample_n = (10, 1000, 10**5, 10**9) if quick else SAMPLE_N
    sec_per_cost = []
    print(
        f"\n3. large-grid plan: n={PLAN_N!r} ({n_axis.size} values to {n_axis[-1]:.0e}), "
        f"p={PLAN_P!r} ({p_axis.size} values), {methods} methods, {PLAN_WORKERS} workers"
    )
    print("   measured cost of sample chunks (one n over the p shown, all methods, one core):")
    for n in sample_n:
        step = 1 if n <= FULL_P_UP_TO and not quick else 10 if not quick else 50
        p = p_axis[::step]
        compute_chunk([n], p[:5], METHODS)  # warm the code paths of this n
        start = time.perf_counter()
        compute_chunk([n], p, METHODS)
        seconds = time.perf_counter() - start
        # Seconds per unit of the build's cost model at this n: the model carries the
        # dependence on p (narrow and wide windows), the measurement its scale.
        sec_per_cost.append(seconds / cell_cost(n, p))
        print(
            f"     n = {n:>10.0e}  {p.size:>4} p: {1e3 * seconds / p.size:7.3f} ms per cell, "
            f"{1e9 * sec_per_cost[-1]:5.0f} ns per cost unit"
        )
    k_n = interpolate(sample_n, sec_per_cost, n_axis.astype(np.float64))
    # Engine memory: peak of one n = 10^9 over two p counts, fitted as a + b * (number of p).
    peaks = []
    for count in (50, 100):
        p = p_axis[:: p_axis.size // count][:count]
        tracemalloc.start()
        compute_chunk([10**9], p, METHODS)
        peaks.append(tracemalloc.get_traced_memory()[1])
        tracemalloc.stop()
    slope = (peaks[1] - peaks[0]) / 50
    base = peaks[0] - 50 * slope
    tracemalloc.start()
    compute_chunk([2000], p_axis, METHODS)  # the widest narrow window, over all p
    narrow_peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    cube = methods * n_axis.size * p_axis.size * 32  # 2 float64 + 2 int64 per cell
    _, file_overhead = time_save(1, repeat=1)
    file_overhead -= methods * 32
    print(f"   the cube: {cube / 1e6:,.0f} MB in memory")
    overhead = measured["per_task"]
    for p_block in (None, 100):
        chunks = plan_chunks(n_axis, p_axis, p_block=p_block)
        seconds_n = {}  # per p block: projected seconds of each n over the block
        for start in sorted({c.p_start for c in chunks}):
            stop = next(c.p_stop for c in chunks if c.p_start == start)
            block = p_axis[start:stop]
            seconds_n[start] = k_n * np.array([cell_cost(int(v), block) for v in n_axis])
        cpu = sum(float(s.sum()) for s in seconds_n.values())
        times, cells_all = [], []
        for chunk in chunks:
            width = chunk.p_stop - chunk.p_start
            cells_in = (chunk.n_stop - chunk.n_start) * width
            work = seconds_n[chunk.p_start][chunk.n_start : chunk.n_stop].sum()
            times.append(float(work) / (1.0 - measured["background"]) + overhead)
            cells_all.append(cells_in)
        cells_max = max(cells_all)
        save, _ = time_save(int(np.mean(cells_all)))
        disk = sum(cells_all) * methods * 32 + len(chunks) * file_overhead
        wall = lpt_makespan(times, PLAN_WORKERS)
        width = p_axis.size if p_block is None else p_block
        engine = base + slope * width
        worker = measured["worker_rss"] + max(engine, narrow_peak) + cells_max * methods * 32
        print(
            f"   p_block={p_block}: CPU time {cpu:,.0f} core-seconds; {len(chunks)} chunks, "
            f"longest {max(times):.1f} s, mean {np.mean(times):.2f} s;\n     projected wall time "
            f"{wall:.0f} s on {PLAN_WORKERS} workers (ideal {cpu / PLAN_WORKERS:.0f} s, efficiency "
            f"{cpu / PLAN_WORKERS / wall:.0%}); per worker about {worker / 1e6:,.0f} MB;\n"
            f"     {len(chunks) / wall:.0f} chunks a second reach the client; with --checkpoint "
            f"it saves one of the mean size in {1000 * save:.0f} ms (measured), busy "
            f"{len(chunks) / wall * save:.0%} of the time; the directory holds {disk / 1e6:,.0f} MB"
        )
    print(
        "   assumptions: every worker is one core as fast as one of this machine's, with one "
        "thread;\n"
        "   a chunk's time = the build's cost model (atlas.chunks.cell_cost) of its cells x the "
        "measured\n   seconds per cost unit, interpolated linearly in (log n, log seconds) between "
        "the sample n;\n"
        f"   a worker's background load of {measured['background']:.1%} of its core and "
        f"{1000 * overhead:.0f} ms per chunk (item 1, at least 0);\n"
        "   the scheduler and the network keep up with the rates above (tens of tasks a second);\n"
        f"   per-worker memory = a warm worker's resident set "
        f"({measured['worker_rss'] / 1e6:.0f} MB, measured) + the engine's peak for one n over "
        f"the block\n"
        f"   (tracemalloc: {narrow_peak / 1e6:.0f} MB at n = 2000 over 1,000 p; "
        f"{slope / 1e6:.2f} MB per p at n = 10^9, a line through 50 and 100 p) + the chunk's "
        "result arrays;\n"
        f"   the client holds the whole cube ({cube / 1e6:,.0f} MB) and writes it once at the "
        "end; results cross the network once."
    )


_MALLOC_PROBE = """
import time
from atlas.approximations import METHODS
from atlas.chunks import compute_chunk
from atlas.grid import parse_n, parse_p
n, p = parse_n("log:1000:10000000:8"), parse_p("logit:0.001:0.999:41")
compute_chunk(n[:1], p, METHODS)
best = float("inf")
for _ in range(3):
    start = time.process_time()
    compute_chunk(n, p, METHODS)
    best = min(best, time.process_time() - start)
print(best)
"""


def malloc_probe():
    """CPU seconds of one chunk in fresh processes, with and without dask's trim setting."""
    import subprocess

    root = str(Path(__file__).resolve().parents[1])
    seconds = {}
    for label, value in (("without", None), ("with", "65536"), ("without ", None)):
        env = {k: v for k, v in os.environ.items() if k != "MALLOC_TRIM_THRESHOLD_"}
        env["PYTHONPATH"] = os.pathsep.join([root, env.get("PYTHONPATH", "")])
        if value is not None:
            env["MALLOC_TRIM_THRESHOLD_"] = value
        out = subprocess.run([sys.executable, "-c", _MALLOC_PROBE], env=env, check=True,
                             capture_output=True, text=True, timeout=600)  # fmt: skip
        seconds.setdefault(label.strip(), []).append(float(out.stdout))
    without, with_ = min(seconds["without"]), seconds["with"][0]
    print(
        f"\n4. one chunk (8 n from 10^3 to 10^7 x 41 p, best of 3, CPU time) in a fresh process: "
        f"{without:.2f} s by default, {with_:.2f} s with MALLOC_TRIM_THRESHOLD_=65536: "
        f"{with_ / without:.2f}x"
    )


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small grids (a smoke test)")
    parser.add_argument("--repeat", type=int, default=2, help="timed runs on the small grid")
    parser.add_argument(
        "--plan-only", action="store_true", help="only the large-grid plan (assumes 0 overhead)"
    )
    args = parser.parse_args(argv)
    small, wide = (QUICK_SMALL, QUICK_WIDE) if args.quick else (SMALL, WIDE)
    if args.plan_only:
        import psutil

        measured = {
            "per_task": 0.0,
            "worker_rss": psutil.Process().memory_info().rss,
            "background": 0.0,
        }
    else:
        measured = measure(small, wide, args.repeat)
    plan(measured, args.quick)
    malloc_probe()
    print(f"[{load()}]")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
