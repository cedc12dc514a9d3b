"""Benchmark of the region answers on the default atlas: ratios measured in one run.

Prints, for one method and metric (normal_cc, interval) on the embedded default atlas:

1. ``safe_region(tol)`` off the grid (``between=True``, the default) over the grid-only answer
   (``between=False``), at tol = 0.01 and 0.001;
2. the rule audit of the four classic rules off the grid over the grid-only audit;
3. with ``--before CHECKOUT`` (another checkout of the project, e.g. the main branch), the same
   timings there, in a fresh process, and the ratios this checkout / that one (target: the
   off-grid answers in a few seconds).

The grid-only answer includes reading the cube, as the off-grid one does; every timing is the
best of ``--repeat`` runs after one warm-up. The machine's load average is printed: other work on
the two cores slows both sides alike, the ratios less than the times.

Usage: python build_scripts/bench_regions.py [--before /work/main] [--repeat 2]
"""

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve()


def measure(repeat):
    """Seconds of each question, as a dict (this process's ``atlas``)."""
    import atlas
    from atlas.tables import rule_audit

    out = {}

    def best(label, call):
        call()  # warm-up: the cube read, caches
        times = []
        for _ in range(repeat):
            start = time.perf_counter()
            call()
            times.append(time.perf_counter() - start)
        out[label] = min(times)

    out["atlas module"] = atlas.__file__
    at = atlas.open_atlas()
    at.dataset  # noqa: B018 - built once, as any caller would
    for tol in (0.01, 0.001):
        best(f"safe_region grid tol={tol}", lambda t=tol: at.safe_region(t, between=False))
        best(f"safe_region between tol={tol}", lambda t=tol: at.safe_region(t, between=True))
    one = {"methods": ["normal_cc"], "metrics": ["interval"]}
    best("rule audit grid", lambda: rule_audit(at, between=False, **one))
    best("rule audit between", lambda: rule_audit(at, between=True, **one))
    return out


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", help="another checkout to time in a fresh process")
    parser.add_argument("--repeat", type=int, default=2)
    parser.add_argument("--json", action="store_true", help=argparse.SUPPRESS)  # the subprocess
    args = parser.parse_args(argv)
    if args.json:
        print(json.dumps(measure(args.repeat)))
        return 0
    sys.path.insert(0, str(HERE.parents[1]))
    print(f"load average before: {os.getloadavg()[0]:.2f}")
    after = measure(args.repeat)
    print(f"(this checkout: {after['atlas module']})")
    for tol in (0.01, 0.001):
        grid = after[f"safe_region grid tol={tol}"]
        between = after[f"safe_region between tol={tol}"]
        print(f"safe_region tol={tol}: between {between:.2f} s, grid {grid:.2f} s, "
              f"ratio {between / grid:.1f}x")  # fmt: skip
    grid, between = after["rule audit grid"], after["rule audit between"]
    print(f"rule audit (4 rules, normal_cc interval): between {between:.2f} s, grid {grid:.2f} s, "
          f"ratio {between / grid:.1f}x")  # fmt: skip
    if args.before:
        env = dict(os.environ, PYTHONPATH=str(Path(args.before).resolve()))
        run = subprocess.run(
            [sys.executable, str(HERE), "--json", "--repeat", str(args.repeat)],
            env=env, capture_output=True, text=True, check=True, cwd=args.before,
        )  # fmt: skip
        before = json.loads(run.stdout.strip().splitlines()[-1])
        print(f"before = {args.before}")
        print(f"(before imports atlas from {before.pop('atlas module')})")
        after.pop("atlas module")
        for label, seconds in after.items():
            if label in before:
                print(f"{label}: {seconds:.2f} s here, {before[label]:.2f} s before, "
                      f"ratio {seconds / before[label]:.2f}")  # fmt: skip
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
