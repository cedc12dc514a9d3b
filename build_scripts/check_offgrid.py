"""A larger run of tests/test_offgrid.py: region answers of the default atlas against the engine.

For each (method, metric, tol) asked, draws random cells of ``safe_region`` (three quarters
beside an unsafe cell, where a contradiction would show first), a random integer n of the
cell's n-range and a random p of its p-cell, and counts the draws whose error + accuracy from
the engine exceeds tol. Then draws admitted (n, p) of each classic rule (the boundary and
spread over the run, at random p off the grid) and counts errors above the audit's worst.
Prints the draws and the contradictions of each (there must be none).

Usage: python build_scripts/check_offgrid.py [--draws 4000] [--seed 10]
"""

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout, too

import numpy as np  # noqa: E402 - after the path

import atlas  # noqa: E402
from atlas.regions import admitted_runs, cell_edges  # noqa: E402
from atlas.rules import parse_rule  # noqa: E402
from atlas.tables import rule_audit  # noqa: E402

QUESTIONS = [("normal_cc", "interval", 0.01), ("normal_cc", "interval", 0.001),
             ("normal_cc", "cdf", 0.005), ("edgeworth_cc", "interval", 0.001),
             ("normal", "cdf", 0.01), ("poisson", "cdf", 0.01)]  # fmt: skip


def upper(n, p, method, metric):
    error, accuracy = atlas.worst_error(n, p, method=method, metric=metric, return_accuracy=True)
    return np.asarray(error) + np.asarray(accuracy)


def check_region(at, rng, method, metric, tol, draws):
    start = time.perf_counter()
    region = at.safe_region(tol, method=method, metric=metric)
    seconds = time.perf_counter() - start
    safe = region.values
    n_axis, p_axis = at.n, at.p
    edges = cell_edges(p_axis)
    stop = np.append(n_axis[1:], n_axis[-1] + 1)
    beside = np.zeros_like(safe)
    beside[:, :-1] |= ~safe[:, 1:]
    beside[:, 1:] |= ~safe[:, :-1]
    beside[:-1] |= ~safe[1:]
    beside[1:] |= ~safe[:-1]
    bad = total = between_n = 0
    for mask, size in ((safe & beside, draws * 3 // 4), (safe, draws // 4)):
        i, j = np.nonzero(mask)
        if not i.size:
            continue
        pick = rng.integers(0, i.size, size=size)
        i, j = i[pick], j[pick]
        n = rng.integers(n_axis[i], stop[i])
        p = rng.uniform(edges[j], edges[j + 1])
        p = np.where(np.isin(p, p_axis), np.nextafter(p, 1.0), p)
        over = upper(n, p, method, metric) > tol
        bad += int(over.sum())
        total += size
        between_n += int((n > n_axis[i]).sum())
        for a, b in zip(n[over][:3].tolist(), p[over][:3].tolist(), strict=True):
            print(f"  contradicted: n = {a}, p = {b!r}")
    print(f"safe_region {method} {metric} tol={tol}: {seconds:.1f} s; {total} draws "
          f"({between_n} with n between grid n), {bad} contradicted; "
          f"{region.attrs['checked']}")  # fmt: skip
    return total, bad


def check_audit(at, rng, draws):
    audit = rule_audit(at, methods=["normal_cc"], metrics=["interval", "cdf"], tols=[0.01])
    total = bad = 0
    for row in audit.rows:
        rule = parse_rule(row.rule)
        t = rng.uniform(np.log(at.p[0] / (1 - at.p[0])), np.log(at.p[-1] / (1 - at.p[-1])),
                        size=draws // 12)  # fmt: skip
        ns, ps = [], []
        for x in (1.0 / (1.0 + np.exp(-t))).tolist():
            runs = admitted_runs(rule, at.n, x)
            if not runs:
                continue
            first, last = runs[0]
            ns += [first + k for k in range(6) if first + k <= last]
            ns += np.exp(rng.uniform(np.log(first), np.log(last), size=6)).astype(int).tolist()
            ps += [x] * (len(ns) - len(ps))
        errors = atlas.worst_error(np.array(ns), np.array(ps), method=row.method,
                                   metric=row.metric)  # fmt: skip
        over = errors > row.worst_error * (1 + 2.0**-23) + 1e-12
        total += len(ns)
        bad += int(over.sum())
        print(f"audit {row.name} {row.method} {row.metric}: worst {row.worst_error:.4g}; "
              f"{len(ns)} draws, {int(over.sum())} above it")  # fmt: skip
    return total, bad


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--draws", type=int, default=4000, help="draws per question")
    parser.add_argument("--seed", type=int, default=10)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    at = atlas.open_atlas()
    total = bad = 0
    for method, metric, tol in QUESTIONS:
        t, b = check_region(at, rng, method, metric, tol, args.draws)
        total, bad = total + t, bad + b
    t, b = check_audit(at, rng, args.draws)
    total, bad = total + t, bad + b
    print(f"in all: {total} random off-grid draws, {bad} contradicted")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
