"""Benchmark of the exact error engine: ratios measured in one run.

Prints, each as a ratio with its target (the targets of issue 14):

1. speed-up at n = 10^6, p = 0.3 (normal_cc, interval metric) over the naive full evaluation a
   user would write: scipy.stats.binom.cdf over k = -1..n minus the normal CDF, max minus min
   (target: at least 1000x), as the ratio of the best times of each side and as the median of
   interleaved rounds;
2. growth: the cost of a cell at n = 10^8 over a cell at n = 10^4, p = 0.5 (target: at most 3x);
3. the cost of a cell against the floor of evaluating the normal CDF once per integer in
   mu +- 8 sigma (scipy.special.ndtr on that array), at n = 10^6, p = 0.3 and at n = 10^8, p = 0.5;
4. all seven methods at one cell, n = 10^6, p = 0.3 (target: under 0.5 ms), as a time and as
   its ratio to the naive evaluation of one method; and the per-cell cost of a batch of p;
5. with ``--build``: the default atlas (all methods, interval and CDF errors) on a sub-grid of
   every k-th default n and every p, with 2 worker processes, and the full build estimated from
   it by the count of n (target: at most 60 s on two cores); with ``--against DIR``, the same
   sub-grid with the engine of another checkout too, in fresh processes, interleaved. The
   estimate runs high: 74 to 80 s against 54.6 to 65.4 s for the full build measured on the
   same day (``--n-step 1`` measures the full build itself; so does build_default_atlas.py).

Timings are the best of repeated runs, measured in this one process, so the ratios do not
depend on the machine's speed (they do depend on its load, printed before and after: run it on a
quiet machine). Run with ``PYTHONPATH`` set to another checkout to measure that one's engine
with the same script.

Usage: python build_scripts/bench_engine.py [--repeat R] [--build] [--n-step K]
       [--against OTHER_CHECKOUT --rounds R]
"""

import argparse
import gc
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
from scipy import special, stats

import atlas
from atlas import floatpath
from atlas.engine import evaluate


def timed(func, repeat):
    """Best wall time of ``func()`` over ``repeat`` runs, after one warm-up run.

    The best of several runs is the least disturbed by other work on the machine, for the fast
    and the slow side alike, so the ratios compare like with like.
    """
    func()
    times = []
    gc.disable()  # a collection landing inside one run would be timed as the engine's
    try:
        for _ in range(repeat):
            start = time.perf_counter()
            func()
            times.append(time.perf_counter() - start)
    finally:
        gc.enable()
    return min(times)


def naive(n, p):
    """The full evaluation a user would write first."""
    k = np.arange(-1, n + 1)
    mu, sigma = n * p, np.sqrt(n * p * (1 - p))
    d = stats.binom.cdf(k, n, p) - stats.norm.cdf((k + 0.5 - mu) / sigma)
    return d.max() - d.min()


def floor(n, p):
    """The normal CDF evaluated once per integer in mu +- 8 sigma."""
    mu, sigma = n * p, np.sqrt(n * p * (1 - p))
    k = np.arange(np.floor(mu - 8 * sigma), np.ceil(mu + 8 * sigma) + 1)
    return special.ndtr((k + 0.5 - mu) / sigma)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=50, help="timed runs per figure")
    parser.add_argument("--build", action="store_true", help="also time a default sub-grid")
    parser.add_argument("--n-step", type=int, default=10, help="every k-th default n (10)")
    parser.add_argument("--against", metavar="CHECKOUT",
                        help="with --build: time the same sub-grid with another checkout's "
                             "engine too, interleaved, and print the ratio")  # fmt: skip
    parser.add_argument("--rounds", type=int, default=2, help="interleaved build rounds (2)")
    args = parser.parse_args(argv)
    r = args.repeat
    print(
        f"engine: {atlas.__file__}; numpy float path {floatpath.describe()}; "
        f"load average before: {_load()}"
    )

    n, p = 10**6, 0.3
    # Interleaved rounds: each round times the naive evaluation once and the engine (best of a
    # burst) right after it, so both sides see the same state of the machine; the median of the
    # rounds' ratios is reported.
    ratios, cells, fulls = [], [], []
    for _ in range(max(3, r // 2)):
        full = timed(lambda: naive(n, p), 1)
        cell = timed(lambda: atlas.worst_error(n, p), 20)
        ratios.append(full / cell)
        cells.append(cell)
        fulls.append(full)
    cell, full = min(cells), min(fulls)
    check = abs(naive(n, p) - atlas.worst_error(n, p))
    print(
        f"[1] n=1e6, p=0.3 normal_cc: engine {cell * 1e3:.3f} ms, naive {full * 1e3:.1f} ms (best)"
    )
    print(
        f"    speed-up {full / cell:.0f}x, best against best (target >= 1000x); median of "
        f"{len(ratios)} interleaved rounds {statistics.median(ratios):.0f}x (range "
        f"{min(ratios):.0f}-{max(ratios):.0f}x, the spread of a shared machine); "
        f"|engine - naive| = {check:.1e}"
    )

    small = timed(lambda: atlas.worst_error(10**4, 0.5), r)
    large = timed(lambda: atlas.worst_error(10**8, 0.5), r)
    print(f"[2] p=0.5: n=1e4 {small * 1e3:.3f} ms, n=1e8 {large * 1e3:.3f} ms")
    print(f"    growth {large / small:.1f}x (target <= 3x)")

    for nn, pp, t in ((10**6, 0.3, cell), (10**8, 0.5, large)):
        f = timed(lambda nn=nn, pp=pp: floor(nn, pp), r)
        print(
            f"[3] n={nn:.0e}, p={pp}: floor (ndtr on mu +- 8 sigma) {f * 1e3:.3f} ms; "
            f"engine / floor = {t / f:.2f}"
        )

    every = timed(lambda: evaluate(n, [p]), r)
    ps = np.linspace(0.05, 0.95, 200)
    batch = timed(lambda: evaluate(n, ps), max(3, r // 10))
    print(
        f"[4] n=1e6, p=0.3: all 7 methods at one cell {every * 1e3:.3f} ms (target < 0.5 ms: "
        f"{every / 0.5e-3:.1f}x the target); naive one method / all seven = {full / every:.0f}x; "
        f"200 p at once: {batch / ps.size * 1e3:.3f} ms per cell (7 methods)"
    )
    if args.build:
        build(args.n_step, args.against, args.rounds if args.against else 1)
    print(f"load average after: {_load()}")


def _load():
    return " ".join(f"{x:.2f}" for x in os.getloadavg())


_BUILD = (
    "import sys, time; from atlas import METHODS, grid; from atlas.build import build_atlas; "
    "n = grid.default_n()[::{step}]; t = time.perf_counter(); "
    "build_atlas(n, grid.default_p(), METHODS, workers=2, progress=False); "
    "print(time.perf_counter() - t)"
)


def _build_in(checkout, n_step):
    """Wall time of the sub-grid build in a fresh process importing ``checkout``'s atlas."""
    env = dict(os.environ, PYTHONPATH=str(checkout))
    code = _BUILD.format(step=n_step)
    done = subprocess.run([sys.executable, "-c", code], env=env, check=True,
                          capture_output=True, text=True, cwd=checkout)  # fmt: skip
    return float(done.stdout.split()[-1])


def build(n_step, other=None, rounds=1):
    """The sub-grid build (every n_step-th default n, every p, 2 workers), each in a fresh
    process; with ``other``, that checkout's too, interleaved; best of ``rounds``."""
    from atlas import METHODS, grid

    here = Path(atlas.__file__).resolve().parent.parent
    ours, theirs = [], []
    for _ in range(rounds):
        if other is not None:
            theirs.append(_build_in(Path(other).resolve(), n_step))
        ours.append(_build_in(here, n_step))
    n_all, p = grid.default_n(), grid.default_p()
    size, best = n_all[::n_step].size, min(ours)
    text = (
        f"[5] default atlas, every {n_step}th n ({size} n x {p.size} p x {len(METHODS)} "
        f"methods), 2 workers, best of {rounds}: {best:.1f} s; full build estimated "
        f"{best * n_all.size / size:.0f} s (target 60 s)"
    )
    if other is not None:
        other_best = min(theirs)
        text += (
            f"; {other}, interleaved: {other_best:.1f} s, estimated "
            f"{other_best * n_all.size / size:.0f} s ({other_best / best:.2f}x)"
        )
    print(text)


if __name__ == "__main__":
    main()
