"""Write the example exports of outputs/exports/ and measure what their bands give away.

    python build_scripts/build_exports.py [--tol 0.01] [--method normal_cc] [--metric interval]

Writes ``outputs/exports/within_tolerance_<method>_<metric>_<tol>.{py,c,json,csv}`` from the
embedded atlas (minutes: the bands' off-grid columns, exact minimum n and refinement), and
prints the share of the grid's safe cells the bands refuse. ``tests/test_exports.py`` imports
the Python file and compiles the C file, and checks both against the engine on random off-grid
(n, p).
"""

import argparse
import time
from pathlib import Path

from atlas import floatpath, open_atlas
from atlas.exports import write_export
from atlas.guarantees import threshold_bands

OUT = Path(__file__).resolve().parent.parent / "outputs" / "exports"
SUFFIX = {"python": "py", "c": "c", "json": "json", "csv": "csv"}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tol", type=float, default=0.01)
    parser.add_argument("--method", default="normal_cc")
    parser.add_argument("--metric", default="interval")
    args = parser.parse_args(argv)
    start = time.perf_counter()
    atlas = open_atlas()
    bands = threshold_bands(atlas, args.tol, method=args.method, metric=args.metric)
    took = time.perf_counter() - start
    OUT.mkdir(parents=True, exist_ok=True)
    stem = f"within_tolerance_{args.method}_{args.metric}_{args.tol!r}".replace(".", "_")
    for fmt, suffix in SUFFIX.items():
        print(write_export(bands, OUT / f"{stem}.{suffix}", fmt))
    grid_n, grid_p = atlas.n, atlas.p
    safe = atlas.error(grid_n[:, None], grid_p[None, :], method=args.method,
                       metric=args.metric) <= args.tol  # fmt: skip
    called = bands.within(grid_n[:, None], grid_p[None, :])
    print(f"bands computed in {took:.0f} s; {bands.checked()}")
    print(f"grid cells safe: {int(safe.sum()):,}; refused by the bands: "
          f"{(safe & ~called).sum() / safe.sum():.2%}; called safe but not: "
          f"{int((called & ~safe).sum())}")  # fmt: skip


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
