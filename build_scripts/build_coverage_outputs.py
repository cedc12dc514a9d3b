"""Rebuild the embedded coverage cube and regenerate ``outputs/coverage/``.

1. ``atlas/data/coverage_cube.nc``: :func:`atlas.coverage_cube.build_coverage_cube` on the
   default coverage grid (every n to 100, 21 log-spaced n to 10^4; 61 logit-spaced p from 0.001
   to 0.999), all seven intervals, levels 0.90, 0.95 and 0.99; about ten seconds.
2. ``outputs/coverage/min_coverage_<interval>_95.png``: the map of the minimum coverage over
   each p-cell at the nominal 95%, one per interval (2000 pixels wide).
3. ``outputs/coverage/min_n_<band>.md``, ``.csv`` and ``.json``: the minimum n for each interval
   and the floors 0.93, 0.94 and 0.95, at level 0.95, every n to 1000 checked, for the bands
   0.05..0.5 and 0.01..0.99; about a minute each.

The maps carry the cube's build date; the tables carry no date. Usage::

    python build_scripts/build_coverage_outputs.py [--output DIR] [--keep-cube]

``--keep-cube`` draws from the embedded cube as it is instead of rebuilding it.
"""

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy

from atlas import coverage_charts, coverage_cube, figures, files  # noqa: E402
from atlas.confidence import INTERVALS  # noqa: E402
from atlas.coverage_questions import coverage_table  # noqa: E402

BANDS = ((0.05, 0.5), (0.01, 0.99))
FLOORS = (0.93, 0.94, 0.95)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--output", type=Path, default=ROOT / "outputs" / "coverage")
    parser.add_argument("--keep-cube", action="store_true", help="do not rebuild the cube")
    args = parser.parse_args(argv)
    started = time.perf_counter()
    written = []
    path = coverage_cube.default_coverage_path()
    if not args.keep_cube:
        ds = coverage_cube.build_coverage_cube()
        written.append(coverage_cube.save_coverage_cube(ds, path, overwrite=True))
        print(f"cube built in {time.perf_counter() - started:.1f} s")
    cube = coverage_cube.open_coverage_cube(path)
    out = args.output
    out.mkdir(parents=True, exist_ok=True)
    for interval in INTERVALS:
        fig = coverage_charts.coverage_map(cube, interval=interval, level=0.95)
        written.append(figures.save_figure(fig, out / f"min_coverage_{interval}_95.png"))
    for p_lo, p_hi in BANDS:
        table = coverage_table(p_lo, p_hi, FLOORS, level=0.95, n_max=1000)
        for fmt in ("md", "csv", "json"):
            name = f"min_n_{p_lo:g}_{p_hi:g}.{fmt}"
            written.append(files.save_text(out / name, table.render(fmt)))
    for item in written:
        print(f"{item.stat().st_size / 1024:9.1f} KB  {item.relative_to(ROOT)}")
    print(f"{len(written)} files in {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
