"""approx-atlas: how wrong is the normal shortcut to the binomial, and where is it safe.

The public API. The engine is imported at once; the cube, query and chart layers (which pull
in xarray and, later, netCDF4 and matplotlib) are imported on first use, so ``import atlas``
stays light and never imports matplotlib, dask or netCDF4.
"""

__version__ = "0.1.0"

from atlas.approximations import METHODS  # noqa: E402 - __version__ first: submodules read it
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
}

__all__ = [
    "METHODS",
    "METRICS",
    "Atlas",
    "Verdict",
    "WorstError",
    "__version__",
    "best_method_map",
    "build_atlas",
    "compare_map",
    "error_map",
    "gain_map",
    "is_resolved",
    "open_atlas",
    "parse_rule",
    "rule_audit",
    "save_atlas",
    "save_figure",
    "threshold_table",
    "worst_error",
    "worst_interval",
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
