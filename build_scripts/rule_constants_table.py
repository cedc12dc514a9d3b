"""Print the constant each family of rules needs for a tolerance, what it gives away, and what the
refinement between checked p cost and found.

    python build_scripts/rule_constants_table.py [--tols 0.01,0.005,0.001]
        [--methods normal_cc,edgeworth_cc] [--metric interval] [--no-compare]

For each tolerance and method: the bands of atlas.guarantees.threshold_bands on the embedded
atlas, then atlas.guarantees.rule_constants for every family of atlas.guarantees.FAMILIES. One
Markdown table: the constant (the smallest c; for the skewness family the largest), the constant
needed at the p checked alone (the true one lies between), the worst error the rule then admits
(atlas.regions.rule_worst) and the share of the grid's safe cells it refuses; and the share the
bands themselves refuse.

A second table says what the refinement in p (atlas.refinement) did: p added, rises (new p whose
minimum n exceeds both neighbours) by depth, the margin taken, and, unless --no-compare, the
bands computed without refinement (budget 0, the grid p and one midpoint per band): their time,
the ratio of times measured in this run, and how many band thresholds the refinement raised.
Tens of minutes in all on the default atlas.
"""

import argparse
import time

import numpy as np

from atlas import floatpath, open_atlas
from atlas.guarantees import rule_constants, threshold_bands


def _rises(refinement):
    by_depth = {}
    for depth, rise in refinement.rises:
        by_depth.setdefault(depth, []).append(rise)
    return ", ".join(f"d{d}: {sum(x > 0 for x in v)}/{len(v)} (max {max(v):+.2%})"
                     for d, v in sorted(by_depth.items()))  # fmt: skip


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tols", default="0.01,0.005,0.001")
    parser.add_argument("--methods", default="normal_cc,edgeworth_cc")
    parser.add_argument("--metric", default="interval")
    parser.add_argument("--no-compare", action="store_true")
    args = parser.parse_args(argv)
    atlas = open_atlas()
    print(f"atlas checksum {atlas.attrs.get('checksum')}; metric {args.metric}")
    print()
    print("| tol | method | family | constant | needed at the p checked | worst admitted "
          "| gives away |")  # fmt: skip
    print("|---|---|---|---|---|---|---|")
    cost = []
    for tol in (float(x) for x in args.tols.split(",")):
        for method in args.methods.split(","):
            before = None
            if not args.no_compare:
                start = time.perf_counter()
                plain = threshold_bands(atlas, tol, method=method, metric=args.metric, budget=0)
                before = time.perf_counter() - start
            start = time.perf_counter()
            bands = threshold_bands(atlas, tol, method=method, metric=args.metric)
            took = time.perf_counter() - start
            start = time.perf_counter()
            out = rule_constants(atlas, tol, method=method, metric=args.metric, bands=bands)
            took_constants = time.perf_counter() - start
            for row in out.rows:
                w = row.worst.worst if row.worst is not None else None
                const = "none" if row.constant is None else f"{row.constant:.3g}"
                lower = "none" if row.at_points is None else f"{row.at_points:.3g}"
                print(f"| {tol:g} | {method} | {row.family.name} | {const} | {lower} | "
                      f"{'—' if w is None else f'{w:.4g}'} | "
                      f"{'—' if row.refused is None else f'{row.refused:.1%}'} |")  # fmt: skip
            print(f"| {tol:g} | {method} | the bands n >= n*(p) | — | — | — | "
                  f"{out.bands_refused:.1%} |", flush=True)  # fmt: skip
            r = bands.refinement
            raised = ""
            if before is not None:
                up = bands.n_min > plain.n_min
                share = np.where(up, bands.n_min / np.maximum(plain.n_min, 1) - 1, 0.0)
                raised = f"{int(up.sum())} (largest {share.max():+.2%})"
            cost.append((tol, method, len(bands.points), int(r.added.sum()), r.exhausted,
                         _rises(r), bands.margin, raised, before, took,
                         took_constants))  # fmt: skip
    print()
    print("| tol | method | p checked | added | bands out of budget | rises by depth | margin "
          "| bands raised vs. no refinement | bands, no refinement | bands | ratio "
          "| rule_constants |")  # fmt: skip
    print("|---|---|---|---|---|---|---|---|---|---|---|---|")
    for tol, method, points, added, out_of, rises, margin, raised, before, took, tc in cost:
        ratio = "—" if before is None else f"{took / before:.1f}x"
        old = "—" if before is None else f"{before:.0f} s"
        print(f"| {tol:g} | {method} | {points} | {added} | {out_of} | {rises} | {margin:.2%} | "
              f"{raised or '—'} | {old} | {took:.0f} s | {ratio} | {tc:.0f} s |")  # fmt: skip
    print()
    print(f"Bands (last): {bands.checked()}.")


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
