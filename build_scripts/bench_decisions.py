"""Benchmark of the decisions group's build (atlas.decision_cube): old code and new, one run.

The old path is the code of the commit the regression values came from (``commit`` in
tests/data/decision_regression.npz, or ``--base``), extracted by ``git archive`` and run in a
worker process: every (n, p, method) computed on its own by the per-cell functions
(:func:`atlas.tails.cell_tail_errors`, :func:`atlas.sizes.cell_all_sizes`, the engine's bound
above n = 2048), as the group was built before. The new path is this checkout's group task
(``atlas.decision_cube._row``: one n, every p and method, the method-free work shared). Both run
the sample of the regression file (40 n from 1 to 10^8 x 12 p of the group's grid, every method,
the default levels), interleaved n by n, one process each, timed inside the process.

Prints the time of each path per regime of n and in all, their ratio, and an estimate for the
full group (320 n x 41 p, one worker): each path's time per (n, p) at the sampled n,
interpolated in log n over the group's n axis and summed over its 41 p. The values of the two
paths are compared too (identical bit for bit, or the script says so).

With ``--every-p`` each sampled n runs the group's 41 p (the engine's bound is asked once per
n and method for every p, so 12 p understate the new path's gain).

Usage: python build_scripts/bench_decisions.py [--repeat R] [--base COMMIT] [--every] [--every-p]
"""

import argparse
import gc
import pickle
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from atlas import METHODS
from atlas.decision_cube import DECISION_N, DECISION_P, TAIL_LEVELS, TEST_LEVELS, _row
from atlas.grid import parse_n, parse_p

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data" / "decision_regression.npz"
REGIMES = ((1, 200), (201, 141421), (141422, 10**8))

#: The old path, run by the worker on the old code: reads (n, p, methods, repeat) pickled from
#: stdin, writes back (best seconds, [per method [per p (tails, sizes, exact)]]).
WORKER = """
import gc, pickle, sys, time
import numpy as np
from atlas.decision_cube import TAIL_LEVELS, TEST_LEVELS
from atlas.sizes import ALTERNATIVES, cell_all_sizes
from atlas.tails import cell_tail_errors, error_bound

ALTS = tuple(sorted(ALTERNATIVES))
LEVELS = tuple(sorted(TAIL_LEVELS)), tuple(sorted(TEST_LEVELS))

def cell(n, p, method):
    bound = error_bound(n, p, method) if n > 2048 else None
    lower, upper = cell_tail_errors(n, p, method, LEVELS[0], bound=bound)
    sizes = cell_all_sizes(n, p, method, LEVELS[1], bound=bound)
    return (np.array([lower, upper]), np.array([sizes[a][0] for a in ALTS]),
            np.array([sizes[a][1] for a in ALTS]))

stdin, stdout = sys.stdin.buffer, sys.stdout.buffer
while True:
    try:
        n, p_axis, methods, repeat = pickle.load(stdin)
    except EOFError:
        break
    best = float("inf")
    gc.disable()
    for _ in range(repeat):
        start = time.perf_counter()
        got = [[cell(n, float(p), m) for p in p_axis] for m in methods]
        best = min(best, time.perf_counter() - start)
    gc.enable()
    pickle.dump((best, got), stdout)
    stdout.flush()
"""


class OldCode:
    """A worker process running the old path on the atlas package of commit ``base``."""

    def __init__(self, base, directory):
        archive = subprocess.run(["git", "archive", base, "atlas"], cwd=ROOT, check=True,
                                 capture_output=True).stdout  # fmt: skip
        subprocess.run(["tar", "-x", "-C", directory], input=archive, check=True)
        self.process = subprocess.Popen(
            [sys.executable, "-c", WORKER],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            cwd=directory,
            env={"PYTHONPATH": directory, "PATH": "/usr/bin:/bin"},
        )

    def row(self, n, p_axis, methods, repeat):
        """Best time and values of the old path at one n."""
        pickle.dump((n, p_axis, methods, repeat), self.process.stdin)
        self.process.stdin.flush()
        return pickle.load(self.process.stdout)

    def close(self):
        self.process.stdin.close()
        self.process.wait()


def new_row(n, p_axis, methods):
    """The new path at one n (the group's task)."""
    levels = tuple(sorted(TAIL_LEVELS)), tuple(sorted(TEST_LEVELS))
    return _row((n, p_axis, methods, *levels))


def best_of(func, repeat):
    """Best wall time of ``func()`` over ``repeat`` runs, and its last result."""
    best = float("inf")
    gc.disable()
    try:
        for _ in range(repeat):
            start = time.perf_counter()
            got = func()
            best = min(best, time.perf_counter() - start)
    finally:
        gc.enable()
    return best, got


def same(old, new):
    """Whether the two paths' values are identical bit for bit."""
    tails, sizes, exact = new
    for i, per_p in enumerate(old):
        for j, (t, s, e) in enumerate(per_p):
            if not (np.array_equal(t, tails[i, j]) and np.array_equal(s, sizes[i, j])
                    and np.array_equal(e, exact[i, j])):  # fmt: skip
                return False
    return True


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=1, help="runs of each path per n (best)")
    parser.add_argument("--every", action="store_true", help="print every sampled n too")
    parser.add_argument(
        "--every-p", action="store_true", help="the group's 41 p at each n (default: 12 p)"
    )
    parser.add_argument("--base", help="commit of the old code (default: the regression file's)")
    args = parser.parse_args()
    methods = tuple(sorted(METHODS))
    with np.load(DATA) as stored:
        n_sample, p_sample, base = stored["n"], stored["p"], args.base or str(stored["commit"])
    if args.every_p:
        p_sample = parse_p(DECISION_P)
    times = np.empty((2, n_sample.size))
    identical = True
    with tempfile.TemporaryDirectory() as directory:
        old_code = OldCode(base, directory)
        try:
            # Warm-up: the engine's tables, in both processes.
            old_code.row(int(n_sample[-1]), p_sample[:1], methods, 1)
            new_row(int(n_sample[-1]), p_sample[:1], methods)
            for i, n in enumerate(n_sample.tolist()):
                times[0, i], old = old_code.row(n, p_sample, methods, args.repeat)
                times[1, i], new = best_of(lambda n=n: new_row(n, p_sample, methods), args.repeat)
                identical &= same(old, new)
        finally:
            old_code.close()
    print(f"old code: {base[:12]}; new: this checkout")
    print(f"sample: {n_sample.size} n x {p_sample.size} p x {len(methods)} methods, one worker")
    print(f"{'n':>20} {'old s':>8} {'new s':>8} {'ratio':>6}")
    if args.every:
        for n, (old_s, new_s) in zip(n_sample.tolist(), times.T.tolist(), strict=True):
            print(f"{n:>20} {old_s:8.3f} {new_s:8.3f} {old_s / new_s:6.2f}")
    for lo, hi in REGIMES:
        part = (n_sample >= lo) & (n_sample <= hi)
        old_s, new_s = times[0, part].sum(), times[1, part].sum()
        print(f"{f'{lo}..{hi}':>20} {old_s:8.2f} {new_s:8.2f} {old_s / new_s:6.2f}")
    old_s, new_s = times.sum(axis=1)
    print(f"{'all':>20} {old_s:8.2f} {new_s:8.2f} {old_s / new_s:6.2f}")
    print(f"values identical bit for bit: {'yes' if identical else 'NO'}")
    # The full group: per-(n, p) time interpolated in log n over the group's n axis.
    n_axis, p_axis = parse_n(DECISION_N), parse_p(DECISION_P)
    per_p = times / p_sample.size
    full = [np.interp(np.log(n_axis), np.log(n_sample), row).sum() * p_axis.size for row in per_p]
    print(
        f"full group estimate ({n_axis.size} n x {p_axis.size} p x {len(methods)} methods, one "
        f"worker): old {full[0]:.0f} s, new {full[1]:.0f} s, ratio {full[0] / full[1]:.2f}"
    )


if __name__ == "__main__":
    main()
