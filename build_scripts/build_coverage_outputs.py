"""Write the coverage page and sheet into ``outputs/`` from the embedded atlas.

The coverage variables live in the embedded atlas (``atlas/data/default_atlas.nc``, rebuilt by
``build_scripts/build_default_atlas.py`` with every interval at 0.90, 0.95 and 0.99 on the
default coverage grid: every n to 100, 21 log-spaced n to 10^4; 61 logit-spaced p from 0.001 to
0.999). This script draws from them, into ``outputs/`` (the wiki page's directory, beside
``index.html``): :func:`atlas.coverage_pages.write_coverage_page` (``coverage.html``,
``coverage.md``, a minimum-coverage map per interval ``coverage_<interval>_95.svg`` and the
minimum-n tables ``coverage_min_n_<band>.md/.csv/.json``, every n to 1000 checked) and
:func:`atlas.coverage_pages.write_coverage_sheet` (``coverage_sheet.pdf``); about a minute.

``build_scripts/build_outputs.py`` writes the same page and sheet after the wiki page (which
replaces the whole directory); this script is for when only the coverage part changes. The files
carry no creation date (the maps show the atlas's build date). Usage::

    python build_scripts/build_coverage_outputs.py [--output DIR]
"""

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy

from atlas import coverage_pages, floatpath  # noqa: E402


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--output", type=Path, default=ROOT / "outputs")
    args = parser.parse_args(argv)
    started = time.perf_counter()
    args.output.mkdir(parents=True, exist_ok=True)
    written = coverage_pages.write_coverage_page(args.output)
    written.append(coverage_pages.write_coverage_sheet(args.output / "coverage_sheet.pdf"))
    for item in written:
        print(f"{item.stat().st_size / 1024:9.1f} KB  {item.resolve().relative_to(ROOT)}")
    print(f"{len(written)} files in {time.perf_counter() - started:.0f} s")
    return 0


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    sys.exit(main())
