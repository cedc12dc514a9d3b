"""Print the constant each family of rules needs for a tolerance, and what it gives away.

    python build_scripts/rule_constants_table.py [--tols 0.01,0.005,0.001]
        [--methods normal_cc,edgeworth_cc] [--metric interval]

For each tolerance and method: the bands of atlas.guarantees.threshold_bands on the embedded
atlas (about a minute each), then atlas.guarantees.rule_constants for every family of
atlas.guarantees.FAMILIES. One Markdown table: the constant (the smallest c; for the skewness
family the largest), the constant needed at the p checked alone (the true one lies between),
the worst error the rule then admits (atlas.regions.rule_worst) and the share of the grid's
safe cells it refuses; and the share the bands themselves refuse. Several minutes in all.
"""

import argparse
import time

from atlas import open_atlas
from atlas.guarantees import rule_constants, threshold_bands


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tols", default="0.01,0.005,0.001")
    parser.add_argument("--methods", default="normal_cc,edgeworth_cc")
    parser.add_argument("--metric", default="interval")
    args = parser.parse_args(argv)
    atlas = open_atlas()
    print(f"atlas checksum {atlas.attrs.get('checksum')}; metric {args.metric}")
    print()
    print("| tol | method | family | constant | needed at the p checked | worst admitted "
          "| gives away |")  # fmt: skip
    print("|---|---|---|---|---|---|---|")
    for tol in (float(x) for x in args.tols.split(",")):
        for method in args.methods.split(","):
            start = time.perf_counter()
            bands = threshold_bands(atlas, tol, method=method, metric=args.metric)
            out = rule_constants(atlas, tol, method=method, metric=args.metric, bands=bands)
            for row in out.rows:
                w = row.worst.worst if row.worst is not None else None
                const = "none" if row.constant is None else f"{row.constant:.3g}"
                lower = "none" if row.at_points is None else f"{row.at_points:.3g}"
                print(f"| {tol:g} | {method} | {row.family.name} | {const} | {lower} | "
                      f"{'—' if w is None else f'{w:.4g}'} | "
                      f"{'—' if row.refused is None else f'{row.refused:.1%}'} |")  # fmt: skip
            print(
                f"| {tol:g} | {method} | the bands n >= n*(p) | — | — | — | "
                f"{out.bands_refused:.1%} |  <!-- {time.perf_counter() - start:.0f} s -->"
            )
    print()
    print(f"Bands: {bands.checked()}.")


if __name__ == "__main__":
    main()
