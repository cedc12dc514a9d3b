"""Regenerate ``outputs/``: the charts, tables, rule audit, reference sheet and wiki page.

Everything is drawn from the embedded default atlas (``atlas/data/default_atlas.nc``) unless
``--atlas`` names another file. ``outputs/`` is itself the wiki page's directory: ``index.html``
and ``index.md`` link the SVG charts beside them by relative names, so the directory can be
published or opened as it is. Beside them:

- ``*.png``: the same charts as PNG, 2000 pixels wide (10 in at 200 dpi; the comparison's two
  panels one above the other, as on the wiki page);
- ``min_n_<method>_<metric>.csv`` and ``.md``: the minimum n for each tolerance and p;
- ``rules_audit.md`` and ``.json``: the rules of thumb audited for every method and metric;
- ``reference_sheet.pdf``: the printable multi-page sheet;
- the sections on tail p-values and tests and on confidence intervals are part of the sheet
  and of ``index.html`` (their charts ``decision_*.svg`` and ``coverage_<interval>_95.svg``
  beside it); ``coverage_min_n_*`` (md, csv, json) hold the coverage tables as files, and
  ``build_decision_outputs.py`` adds the flat files of tails and tests.

The sections are made once (:func:`atlas.sheets.default_sections`, about two minutes) and
handed to both the wiki page and the sheet.

The files carry no creation date (the charts show the atlas's build date), so a rerun on the
same atlas rewrites the same bytes and the repository sees no change.

Usage::

    python build_scripts/build_outputs.py [--atlas FILE] [--output DIR]
"""

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy
sys.path.insert(1, str(Path(__file__).resolve().parent))  # build_decision_outputs beside it

from atlas import charts, coverage_pages, figures, files, floatpath, sheets, tables  # noqa: E402
from atlas.engine import METRICS  # noqa: E402
from atlas.query import open_atlas  # noqa: E402

HEADLINE = sheets.HEADLINE_METHODS  # normal_cc, edgeworth_cc


def _charts(atlas):
    """(file stem, figure factory) for each chart: the wiki's and a few more."""
    a, b = HEADLINE
    items = []
    for metric in METRICS:
        for method in HEADLINE:
            items.append(
                (
                    f"map_{method}_{metric}",
                    lambda m=method, x=metric: charts.error_map(atlas, method=m, metric=x),
                )
            )
    items += [
        (f"map_{a}_interval_linear",
         lambda: charts.error_map(atlas, method=a, p_scale="linear")),
        (f"compare_{a}_{b}_interval",
         lambda: charts.compare_map(atlas, method=a, method2=b, stacked=True)),
        (f"gain_{b}_over_{a}_interval", lambda: charts.gain_map(atlas, method=b, method2=a)),
        ("best_interval", lambda: charts.best_method_map(atlas)),
        ("best_cdf", lambda: charts.best_method_map(atlas, metric="cdf")),
    ]  # fmt: skip
    return items


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--atlas", type=Path, help="atlas file (default: the embedded one)")
    parser.add_argument("--output", type=Path, default=ROOT / "outputs", help="the directory")
    args = parser.parse_args(argv)

    started = time.perf_counter()
    atlas = open_atlas(args.atlas)
    for method in HEADLINE:
        if method not in atlas.methods:
            parser.error(f"the atlas lacks the headline method {method!r}")
    out = args.output
    out.mkdir(parents=True, exist_ok=True)
    written = []

    # The sections on tests and on coverage, once for the page and the sheet.
    extra = sheets.default_sections(HEADLINE[0])
    # The wiki page first: index.html, index.md and its SVG charts. It replaces the directory
    # as a whole, which holds only a page's files; the subdirectories written by other scripts
    # (exports/, by build_exports.py) are moved beside it meanwhile and back after.
    kept = [d for d in sorted(out.iterdir()) if d.is_dir()]
    aside = [out.parent / f".{out.name}.{d.name}.kept" for d in kept]
    for d, a in zip(kept, aside, strict=True):
        d.rename(a)
    try:
        written += sheets.write_wiki(atlas, out, sections=extra)
    finally:
        for d, a in zip(kept, aside, strict=True):
            a.rename(d)
    for stem, make in _charts(atlas):
        fig = make()
        written.append(figures.save_figure(fig, out / f"{stem}.png"))
        svg = out / f"{stem}.svg"
        if svg not in written:
            written.append(figures.save_figure(fig, svg))

    for method in HEADLINE:
        for metric in METRICS:
            table = tables.threshold_table(atlas, method=method, metric=metric)
            for fmt in ("csv", "md"):
                path = out / f"min_n_{method}_{metric}.{fmt}"
                written.append(files.save_text(path, table.render(fmt)))

    audit = tables.rule_audit(atlas)
    written.append(files.save_text(out / "rules_audit.md", audit.to_markdown()))
    written.append(files.save_text(out / "rules_audit.json", audit.to_json()))
    written.append(sheets.write_sheet(atlas, out / "reference_sheet.pdf", sections=extra))
    # The coverage tables as files (the same tables as the page's section).
    written += coverage_pages.write_table_files(out, coverage_pages.tables())

    for path in written:
        print(f"{path.stat().st_size / 1024:9.1f} KB  {path.relative_to(out.parent)}")
    # The tail p-value and test-size charts and tables: the wiki page replaced the directory
    # above, so they are written again after it (their own script prints its list).
    import build_decision_outputs

    build_decision_outputs.main(["--output", str(out)])
    total = sum(p.stat().st_size for p in written) / 1024**2
    print(f"{len(written)} files, {total:.1f} MB, in {time.perf_counter() - started:.0f} s "
          f"from {atlas.path}")  # fmt: skip
    return 0


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    sys.exit(main())
