"""Benchmark: exact minimum n for every integer (atlas.thresholds) on the embedded atlas.

Prints, for the issue's speed case (p = 0.001, tolerance 0.001, normal_cc, interval; N near
10^7) and the three audit examples:

- the answer N and what it rests on (grid values, integers computed by the engine);
- the time of ``approx-atlas min-n`` as a fresh process (the user's wait), against the 10 s
  target, as a ratio;
- the time of the search (:func:`atlas.thresholds.minimum_n`) in a warm process, and its
  ratio to one engine evaluation at n = 10^6 (how many engine calls the answer costs in all);
- integers covered per engine evaluation (integers from N to the atlas's end, over the
  evaluations made).

Run on a quiet machine: ``python build_scripts/bench_min_n.py``.
"""

import statistics
import subprocess
import sys
import time
from pathlib import Path

import atlas
from atlas.engine import evaluate
from atlas.thresholds import minimum_n

CASES = [(0.001, 0.001), (0.01, 0.01), (0.05, 0.005), (0.3, 0.001)]
TARGET = 10.0  # seconds, issue 10


def _cli_seconds(p, tol):
    exe = Path(sys.executable).with_name("approx-atlas")
    command = [str(exe)] if exe.exists() else [sys.executable, "-m", "atlas"]
    start = time.perf_counter()
    subprocess.run(command + ["min-n", "--p", str(p), "--tol", str(tol)], check=True,
                   capture_output=True)  # fmt: skip
    return time.perf_counter() - start


def main():
    at = atlas.open_atlas()
    start = time.perf_counter()
    for _ in range(20):
        evaluate(10**6, [0.001], methods=("normal_cc",))
    one_eval = (time.perf_counter() - start) / 20
    print(f"one engine evaluation at n = 10^6, p = 0.001: {one_eval * 1e3:.2f} ms")
    for p, tol in CASES:
        cli = min(_cli_seconds(p, tol) for _ in range(3))
        answer = at.threshold(p, tol)
        column = at.error(at.n, p)  # the grid's values, read once
        warm = []
        for _ in range(3):  # the search itself, from the grid's values (no cache)
            start = time.perf_counter()
            again = minimum_n(at.n, column, p, tol, method="normal_cc", metric="interval",
                              runs=True)  # fmt: skip
            warm.append(time.perf_counter() - start)
        assert again.n == answer.n
        warm_s = statistics.median(warm)
        covered = int(at.n[-1]) - answer.n + 1
        print(
            f"p = {p:g}, tol = {tol:g}: N = {answer.n:,} ({answer.evaluated} engine evaluations "
            f"beyond {answer.grid_values:,} grid values); CLI {cli:.2f} s = {cli / TARGET:.3f} "
            f"of the {TARGET:.0f} s target; warm {warm_s * 1e3:.0f} ms = "
            f"{warm_s / one_eval:.0f} engine evaluations; "
            f"{covered / max(answer.evaluated, 1):,.0f} integers covered per evaluation"
        )


if __name__ == "__main__":
    main()
