"""Benchmark the minimum n at every integer for tail tolerances and test sizes.

For each question, in one run: the search's time (:mod:`atlas.decision_search`), the integers
above ``dense_to`` it evaluated and those a bound covered, and two ratios: against walking the
ladder alone (the n about 5% apart, what the answers used to rest on) and against evaluating
every integer (its cost estimated from the mean time of the evaluations of a sample of n). The
answers are printed beside the ladder-only answer. Run on a quiet machine::

    python build_scripts/bench_decision_min_n.py [--n-max N] [--quick]
"""

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy

import numpy as np  # noqa: E402

from atlas import decision_search as ds  # noqa: E402

QUESTIONS = (
    ("tail", 0.1, 0.01, "both", 0.1),
    ("tail", 0.01, 0.01, "both", 0.2),
    ("tail", 0.1, 0.00135, "upper", 0.1),
    ("size", 0.1, 0.05, "greater", 0.055),
    ("size", 0.01, 0.05, "two-sided", 0.0525),
)


def _search(kind, p, alpha, which, method="normal_cc"):
    if kind == "tail":
        return ds.tail_search(p, alpha, method, which)
    return ds.size_search(p, alpha, method, which)


def _ladder_only(search, limit, n_max, dense_to):
    """The old answer: the largest failing ladder point, walking the ladder from the top."""
    points = ds.ladder(dense_to, n_max)
    for i in range(len(points) - 1, -1, -1):
        if not search.value(points[i]) <= limit:
            return None if i == len(points) - 1 else points[i + 1]
    return 1


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n-max", type=int, default=ds.N_MAX)
    parser.add_argument("--quick", action="store_true", help="the first two questions only")
    args = parser.parse_args(argv)
    n_max, dense_to = args.n_max, ds.DENSE_TO
    questions = QUESTIONS[:2] if args.quick else QUESTIONS
    print(f"n_max = {n_max:,}, dense_to = {dense_to:,}, method normal_cc")
    for kind, p, alpha, which, limit in questions:
        started = time.perf_counter()
        got = ds.min_ns(_search(kind, p, alpha, which), [limit], n_max, dense_to)[0]
        every = time.perf_counter() - started
        fresh = _search(kind, p, alpha, which)
        started = time.perf_counter()
        ladder_answer = _ladder_only(fresh, limit, n_max, dense_to)
        ladder = time.perf_counter() - started
        sample = np.unique(np.linspace(dense_to + 1, n_max, 25).astype(int)).tolist()
        probe = _search(kind, p, alpha, which)
        started = time.perf_counter()
        for n in sample:
            probe.value_at(n)
        per_n = (time.perf_counter() - started) / len(sample)
        brute = per_n * (n_max - dense_to)
        print(
            f"{kind} p = {p:g}, alpha = {alpha:g}, {which}, limit {limit:g}: from n = "
            f"{got.n if got.n is None else f'{got.n:,}'} (ladder alone said "
            f"{ladder_answer if ladder_answer is None else f'{ladder_answer:,}'}); "
            f"{every:.1f} s, {got.evaluated:,} evaluated, {got.certified:,} covered by a bound; "
            f"{every / ladder:.1f} x the ladder alone ({ladder:.2f} s), "
            f"{every / brute:.3f} x every integer evaluated one by one (about {brute:.0f} s at "
            f"{per_n * 1e3:.2f} ms each)"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
