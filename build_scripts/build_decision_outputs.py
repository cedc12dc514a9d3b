"""Write the charts and tables of tail p-values and test sizes into ``outputs/`` (flat files).

Everything is computed exactly on demand (no atlas file is read):

- ``decision_tail_maps_<method>.png`` and ``.svg``: the tail relative error over (n, p), one
  panel per level 0.05, 0.01, 0.001, 0.0001;
- ``decision_size_<method>_<alternative>_n<n>_p<p0>.png`` and ``.svg``: the size of the test
  against the nominal level, for the demo's invented lot (n = 80, p0 = 0.025, upper one-sided)
  and the issue's example (n = 50, p0 = 0.1);
- ``decision_tail_min_n_<method>.csv`` and ``.md``, ``decision_size_min_n_<method>_<alt>.csv``
  and ``.md``: the minimum n tables;
- ``decision_rules_tails.md``, ``decision_rules_sizes.md`` and their ``.json``: the rules of
  thumb audited on these metrics.

``build_scripts/build_outputs.py`` replaces ``outputs/`` as a whole (the wiki page's
directory), so run this script after it. Usage::

    python build_scripts/build_decision_outputs.py [--output DIR] [--method M]
"""

import argparse
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # this checkout's atlas, not an installed copy

from atlas import decision_charts, decision_rules, decision_tables, figures, files, floatpath  # noqa: E402
from atlas.notation import format_p  # noqa: E402

SIZE_CASES = ((80, 0.025, "greater"), (50, 0.1, "greater"), (50, 0.1, "two-sided"))


def _rules_markdown(title, rows):
    lines = [f"**{title}**", "", f"Audit grid: {rows[0].grid}. Computed exactly on demand.", ""]
    return "\n".join(lines + [f"- {row.explain()}" for row in rows]) + "\n"


def _rules_json(rows):
    record = {
        "grid": rows[0].grid,
        "rows": [
            {"rule": r.rule, "name": r.name, "method": r.method, "what": r.what,
             "alpha": r.alpha, "cells": r.cells, "worst": r.worst, "worst_n": r.worst_n,
             "worst_p": r.worst_p, "exact_size": r.exact_size, "explain": r.explain()}
            for r in rows
        ],
    }  # fmt: skip
    return json.dumps(record, allow_nan=False, indent=1) + "\n"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output", type=Path, default=ROOT / "outputs", help="the directory")
    parser.add_argument("--method", default="normal_cc")
    args = parser.parse_args(argv)
    out, method = args.output, args.method
    out.mkdir(parents=True, exist_ok=True)
    start = time.perf_counter()
    written = []
    fig = decision_charts.tail_error_maps(method=method)
    for ext in ("png", "svg"):
        written.append(figures.save_figure(fig, out / f"decision_tail_maps_{method}.{ext}"))
    for n, p0, alternative in SIZE_CASES:
        fig = decision_charts.size_chart(n, p0, method=method, alternative=alternative)
        stem = f"decision_size_{method}_{alternative}_n{n}_p{format_p(p0)}"
        for ext in ("png", "svg"):
            written.append(figures.save_figure(fig, out / f"{stem}.{ext}"))
    tables = {
        f"decision_tail_min_n_{method}": decision_tables.tail_table(method=method),
        f"decision_size_min_n_{method}_greater": decision_tables.size_table(
            method=method, alternative="greater"
        ),
    }
    for stem, table in tables.items():
        for fmt, ext in (("csv", "csv"), ("md", "md")):
            written.append(files.save_text(out / f"{stem}.{ext}", table.render(fmt)))
    tail_rows = decision_rules.tail_rule_audit(method=method)
    size_rows = decision_rules.size_rule_audit(method=method, alternative="greater")
    for stem, title, rows in (
        ("decision_rules_tails", f"Rules of thumb: the tail relative error they admit ({method})",
         tail_rows),
        ("decision_rules_sizes",
         f"Rules of thumb: the size of the upper one-sided test they admit ({method} p-values)",
         size_rows),
    ):  # fmt: skip
        written.append(files.save_text(out / f"{stem}.md", _rules_markdown(title, rows)))
        written.append(files.save_text(out / f"{stem}.json", _rules_json(rows)))
    for path in written:
        print(path)
    print(f"{len(written)} files in {time.perf_counter() - start:.1f} s", file=sys.stderr)


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
