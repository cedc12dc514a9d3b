"""Benchmark of the tail and test-size metrics (atlas.tails, atlas.sizes): one run, ratios.

Prints:

1. the cost of one on-demand cell with every new metric at n = 10^6 (the tail relative error
   of both tails at the default levels 0.05, 0.01, 0.001, 1e-4 and the approximate and exact
   sizes of the two-sided, less and greater tests at 0.1, 0.05, 0.01, 0.001), for each method
   and several p, in ms (target: at most 5 ms), and as a ratio to the engine's cell for the
   same (n, p, method) (``worst_error``, which it calls once for its bound);
2. the speed-up over the naive evaluation of the same numbers at every count k = 0..n with
   scipy.stats.binom (what a user would write), at n = 10^6, p = 0.1, normal_cc;
3. the growth of a cell's cost from n = 10^4 to n = 10^8 (p = 0.1, normal_cc).

Timings are the best of repeated runs in this one process (run it on a quiet machine).

Usage: python build_scripts/bench_tails.py [--repeat R]
"""

import argparse
import gc
import time

import numpy as np
from scipy import stats

from atlas import METHODS
from atlas.approximations import approximate_cdf
from atlas.complements import approximate_upper
from atlas.engine import _evaluate
from atlas.sizes import cell_all_sizes
from atlas.tails import cell_tail_errors, error_bound

TAIL_LEVELS = (0.05, 0.01, 0.001, 1e-4)
SIZE_LEVELS = (0.1, 0.05, 0.01, 0.001)


def timed(func, repeat):
    """Best wall time of ``func()`` over ``repeat`` runs, after one warm-up run."""
    func()
    best = float("inf")
    gc.disable()
    try:
        for _ in range(repeat):
            start = time.perf_counter()
            func()
            best = min(best, time.perf_counter() - start)
    finally:
        gc.enable()
    return best


def every_metric(n, p, method):
    """One cell with every new metric: the bound once, then tails and sizes."""
    bound = error_bound(n, p, method)
    cell_tail_errors(n, p, method, TAIL_LEVELS, bound=bound)
    cell_all_sizes(n, p, method, SIZE_LEVELS, bound=bound)


def naive(n, p, method):
    """The same numbers by the definitions at every count k = 0..n."""
    k = np.arange(n + 1)
    b = stats.binom.pmf(k, n, p)
    low = stats.binom.cdf(k, n, p)
    up = stats.binom.sf(k - 1, n, p)
    g = approximate_cdf(k, n, p, method)
    gu = approximate_upper(k, n, p, method)
    with np.errstate(divide="ignore", invalid="ignore"):
        r_low, r_up = np.abs(g / low - 1), np.abs(gu / up - 1)
    for a in TAIL_LEVELS:
        r_low[low >= a].max(), r_up[up >= a].max()
    for a in SIZE_LEVELS:
        b[g <= a].sum(), b[low <= a].sum(), b[gu <= a].sum(), b[up <= a].sum()
        b[(g <= a / 2) | (gu <= a / 2)].sum(), b[(low <= a / 2) | (up <= a / 2)].sum()


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=20)
    args = parser.parse_args()
    n = 10**6
    print(f"1. one cell with every tail and size metric at n = {n} (target <= 5 ms)")
    print(f"   {'method':<14} {'p':>7} {'ms':>7} {'x engine cell':>14}")
    worst = 0.0
    for method in METHODS:
        for p in (0.5, 0.1, 0.01, 0.001):
            cost = timed(lambda p=p, method=method: every_metric(n, p, method), args.repeat)
            engine = timed(
                lambda p=p, method=method: _evaluate(n, np.array([p]), (method,)), args.repeat
            )
            worst = max(worst, cost)
            print(f"   {method:<14} {p:>7} {1e3 * cost:>7.2f} {cost / engine:>14.1f}")
    print(f"   slowest: {1e3 * worst:.2f} ms ({'within' if worst <= 5e-3 else 'ABOVE'} 5 ms)")

    fast = timed(lambda: every_metric(n, 0.1, "normal_cc"), args.repeat)
    slow = timed(lambda: naive(n, 0.1, "normal_cc"), max(2, args.repeat // 10))
    print(f"2. speed-up over every count with scipy.stats at n = {n}, p = 0.1: {slow / fast:.0f}x")

    small = timed(lambda: every_metric(10**4, 0.1, "normal_cc"), args.repeat)
    large = timed(lambda: every_metric(10**8, 0.1, "normal_cc"), args.repeat)
    print(f"3. growth from n = 10^4 to 10^8 (p = 0.1, normal_cc): {large / small:.1f}x "
          f"({1e3 * small:.2f} ms to {1e3 * large:.2f} ms)")  # fmt: skip


if __name__ == "__main__":
    main()
