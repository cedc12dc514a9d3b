"""Build the tail and test-size variables of the cube on their grid and measure time and size.

Computes :func:`atlas.decision_cube.decision_dataset` with every method on the default decision
grid (every n to 200, 121 n log-spaced to 10^8; 41 p logit-spaced from 1e-4 to 0.9999 and 1/2)
in ``--workers`` processes, writes it as compressed NetCDF (zlib level 4, float32 for the
approximate metrics) to ``--output`` and prints the build time, cells per second and the file's
size, beside the size of the embedded atlas (which holds the same variables, built by
``build_default_atlas.py``).

Usage::

    python build_scripts/build_decision_cube.py [--workers 2] [--output /tmp/decisions.nc]
"""

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy

from atlas import floatpath  # noqa: E402
from atlas.decision_cube import DECISION_N, DECISION_P, decision_dataset  # noqa: E402


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--output", type=Path,
                        default=Path(tempfile.gettempdir()) / "decisions.nc")  # fmt: skip
    parser.add_argument("--n", default=DECISION_N)
    parser.add_argument("--p", default=DECISION_P)
    args = parser.parse_args()
    start = time.perf_counter()
    ds = decision_dataset(args.n, args.p, workers=args.workers)
    seconds = time.perf_counter() - start
    cells = ds.sizes["decision_n"] * ds.sizes["decision_p"] * ds.sizes["approximation"]
    encoding = {name: {"zlib": True, "complevel": 4} for name in ds.data_vars}
    tmp = args.output.with_name(args.output.name + ".tmp")
    ds.to_netcdf(tmp, encoding=encoding)
    os.replace(tmp, args.output)
    size = args.output.stat().st_size
    embedded = ROOT / "atlas" / "data" / "default_atlas.nc"
    print(f"grid: {ds.sizes['decision_n']} n x {ds.sizes['decision_p']} p x "
          f"{ds.sizes['approximation']} methods = {cells} cell-methods")  # fmt: skip
    print(f"build: {seconds:.1f} s with {args.workers} workers ({cells / seconds:.0f} "
          "cell-methods/s)")  # fmt: skip
    print(f"file: {size / 1e6:.2f} MB ({args.output})")
    if embedded.exists():  # it holds these variables beside the errors (schema 4)
        print(f"embedded atlas, errors and these: {embedded.stat().st_size / 1e6:.2f} MB "
              "(target 40 MB)")  # fmt: skip


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
