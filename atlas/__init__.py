"""approx-atlas: how wrong is the normal shortcut to the binomial, and where is it safe.

The public API. The engine is imported at once; the cube, query and chart layers (which pull
in xarray and, later, netCDF4 and matplotlib) are imported on first use, so ``import atlas``
stays light and never imports matplotlib, dask or netCDF4.
"""

__version__ = "0.1.0"

from atlas.approximations import METHODS  # noqa: E402 - __version__ first: submodules read it
from atlas.confidence import (  # noqa: E402 - numpy and scipy only, as the engine
    INTERVALS,
    coverage,
    expected_width,
    min_coverage,
)
from atlas.engine import (  # noqa: E402
    METRICS,
    WorstError,
    is_resolved,
    worst_error,
    worst_interval,
)

_LAZY = {
    "build_atlas": "atlas.build",
    "save_atlas": "atlas.cube",
    "open_atlas": "atlas.query",
    "Atlas": "atlas.query",
    "Verdict": "atlas.query",
    "Ranked": "atlas.query",
    "error_map": "atlas.charts",
    "compare_map": "atlas.charts",
    "gain_map": "atlas.charts",
    "best_method_map": "atlas.charts",
    "save_figure": "atlas.figures",
    "threshold_table": "atlas.tables",
    "rule_audit": "atlas.tables",
    "write_sheet": "atlas.sheets",
    "write_wiki": "atlas.sheets",
    "parse_rule": "atlas.rules",
    "check_coverage": "atlas.coverage_questions",
    "coverage_min_n": "atlas.coverage_questions",
    "shortest_interval": "atlas.coverage_questions",
    "coverage_table": "atlas.coverage_questions",
    "build_coverage_cube": "atlas.coverage_cube",
    "open_coverage_cube": "atlas.coverage_cube",
    "open_decision_cube": "atlas.decision_cube",
    "coverage_map": "atlas.coverage_charts",
    "tail_error": "atlas.tails",
    "test_size": "atlas.sizes",
    "TestSize": "atlas.sizes",
    "tail_verdict": "atlas.decisions",
    "size_verdict": "atlas.decisions",
    "tail_min_n": "atlas.decisions",
    "size_min_n": "atlas.decisions",
    "best_tail_method": "atlas.decisions",
    "best_size_method": "atlas.decisions",
    "tail_rule_audit": "atlas.decision_rules",
    "size_rule_audit": "atlas.decision_rules",
    "tail_table": "atlas.decision_tables",
    "size_table": "atlas.decision_tables",
    "tail_error_maps": "atlas.decision_charts",
    "size_chart": "atlas.decision_charts",
    "write_decision_page": "atlas.decision_pages",
    "write_decision_sheet": "atlas.decision_pages",
}

__all__ = [
    "INTERVALS",
    "METHODS",
    "METRICS",
    "Atlas",
    "Ranked",
    "TestSize",
    "Verdict",
    "WorstError",
    "__version__",
    "best_method_map",
    "best_size_method",
    "best_tail_method",
    "build_atlas",
    "build_coverage_cube",
    "check_coverage",
    "compare_map",
    "coverage",
    "coverage_map",
    "coverage_min_n",
    "coverage_table",
    "error_map",
    "expected_width",
    "gain_map",
    "min_coverage",
    "is_resolved",
    "open_atlas",
    "open_coverage_cube",
    "open_decision_cube",
    "parse_rule",
    "rule_audit",
    "save_atlas",
    "save_figure",
    "shortest_interval",
    "size_chart",
    "size_min_n",
    "size_rule_audit",
    "size_table",
    "size_verdict",
    "tail_error",
    "tail_error_maps",
    "tail_min_n",
    "tail_rule_audit",
    "tail_table",
    "tail_verdict",
    "test_size",
    "threshold_table",
    "worst_error",
    "worst_interval",
    "write_decision_page",
    "write_decision_sheet",
    "write_sheet",
    "write_wiki",
]


def __getattr__(name):
    """Import the heavier layers on first use of one of their names."""
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'atlas' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
