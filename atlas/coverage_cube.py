"""The coverage cube: coverage, minimum coverage and expected width of confidence intervals for p
over (interval, level, n, p), as an xarray Dataset and a NetCDF file.

A companion of the error atlas, kept in its own Dataset and file (its grid is coarser and its
dimensions differ, and the error atlas's schema is left alone):

- dimensions and coordinates ``interval`` (the names of :data:`atlas.confidence.INTERVALS`, as
  fixed-width characters in the file), ``level`` (0.90, 0.95, 0.99 by default), ``n`` and ``p``;
- ``coverage``: C(n, p) at each grid cell;
- ``min_coverage``: the exact infimum of C over the p-cell of each grid p, [p_cell_lo, p_cell_hi];
  the cells split the p axis at the midpoints of neighbouring grid p on the logit scale, the first
  starting at the first grid p and the last ending at the last, so the cells tile
  [p_first, p_last] and the minimum over the cells of a band is the minimum over the band;
- ``expected_width``: E[hi(X) - lo(X)], X ~ Bin(n, p), at each grid cell;
- ``p_cell_lo``, ``p_cell_hi`` along p.

The definitions are those of :mod:`atlas.confidence`.
"""

from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from atlas import __version__
from atlas.confidence import (
    INTERVALS,
    _binom_pmf,
    _lower,
    _upper,
    check_interval,
    check_level,
    coverage,
    min_coverage_cells,
)
from atlas.files import replacing

#: The default coverage grid: every n to 100, then 21 log-spaced n to 10^4; 61 p logit-spaced.
DEFAULT_COVERAGE_N_SPEC = "1:100,log:100:10000:21"
DEFAULT_COVERAGE_P_SPEC = "logit:0.001:0.999:61"
DEFAULT_LEVELS = (0.9, 0.95, 0.99)
COVERAGE_SCHEMA = "1"
MAX_N = 10**6

_VARIABLE_ATTRS = {
    "coverage": {
        "long_name": "coverage probability of the confidence interval",
        "units": "1",
        "description": "C(n, p) = sum over x = 0..n of b(x; n, p) [lo(x) <= p <= hi(x)], "
        "closed intervals, endpoints as defined in atlas.confidence",
    },
    "min_coverage": {
        "long_name": "minimum coverage over the p-cell",
        "units": "1",
        "description": "the exact infimum of C(n, p') over p_cell_lo <= p' <= p_cell_hi "
        "(smallest one-sided limit at the pieces between consecutive interval endpoints)",
    },
    "expected_width": {
        "long_name": "expected width of the confidence interval",
        "units": "1",
        "description": "E[hi(X) - lo(X)] = sum over x of b(x; n, p) (hi(x) - lo(x)), "
        "endpoints unclipped as defined",
    },
    "p_cell_lo": {
        "long_name": "lower end of the p-cell of each grid p",
        "units": "1",
        "description": "the first grid p, else the logit-scale midpoint with the previous p",
    },
    "p_cell_hi": {
        "long_name": "upper end of the p-cell of each grid p",
        "units": "1",
        "description": "the last grid p, else the logit-scale midpoint with the next p",
    },
}
_REFERENCES = (
    "Brown, Cai & DasGupta (2001), Statistical Science 16(2), 101-133; Newcombe (1998), "
    "Statistics in Medicine 17, 857-872; Wilson (1927), JASA 22; Agresti & Coull (1998), "
    "The American Statistician 52; Clopper & Pearson (1934), Biometrika 26."
)


def p_cells(p):
    """The p-cells of a grid: logit-scale midpoints between neighbours, the ends at the grid's.

    >>> lo, hi = p_cells([0.1, 0.5, 0.9])
    >>> print(lo.round(4), hi.round(4))
    [0.1  0.25 0.75] [0.25 0.75 0.9 ]
    """
    p = np.asarray(p, dtype=np.float64)
    logit = np.log(p) - np.log1p(-p)
    mids = 1.0 / (1.0 + np.exp(-(logit[:-1] + logit[1:]) / 2.0))
    return np.concatenate([[p[0]], mids]), np.concatenate([mids, [p[-1]]])


def build_coverage_cube(
    n=DEFAULT_COVERAGE_N_SPEC, p=DEFAULT_COVERAGE_P_SPEC, *, intervals=None, levels=DEFAULT_LEVELS
):
    """Compute the coverage cube over a grid.

    Parameters
    ----------
    n, p : str or sequence
        Grid specifications as :func:`atlas.grid.parse_n` and :func:`atlas.grid.parse_p` read
        them (or the values); ``n <= 10**6``, at least two p.
    intervals : sequence of str, optional
        Default: all of :data:`atlas.confidence.INTERVALS`.
    levels : sequence of float
        Nominal levels, each ``0 < level < 1``.

    Returns
    -------
    xarray.Dataset

    Notes
    -----
    The default grid (120 n to 10^4, 61 p, 7 intervals, 3 levels) takes about six seconds on
    one core. Every value is exact in the sense of :mod:`atlas.confidence`; no p is sampled.

    Examples
    --------
    >>> ds = build_coverage_cube("10,40", "0.1,0.3,0.5", intervals=["wilson"], levels=[0.95])
    >>> print(f"{float(ds.coverage.sel(interval='wilson', level=0.95, n=40, p=0.3)):.4f}")
    0.9443
    """
    import xarray as xr

    from atlas.grid import parse_n, parse_p

    n_spec = n if isinstance(n, str) else ",".join(str(int(v)) for v in n)
    p_spec = p if isinstance(p, str) else ",".join(repr(float(v)) for v in p)
    n_axis, p_axis = parse_n(n), parse_p(p)
    if n_axis[-1] > MAX_N:
        raise ValueError(f"`n` must be at most {MAX_N} in a coverage cube; got {n_axis[-1]}.")
    if p_axis.size < 2:
        raise ValueError(f"`p` must give at least two values; got {p_spec!r}.")
    names = INTERVALS if intervals is None else tuple(dict.fromkeys(intervals))
    if not names:
        raise ValueError("`intervals` must name at least one interval; got none.")
    for name in names:
        check_interval(name)
    levels = sorted({check_level(level) for level in np.atleast_1d(levels).tolist()})
    cell_lo, cell_hi = p_cells(p_axis)
    edges = np.concatenate([cell_lo, [cell_hi[-1]]])
    shape = (len(names), len(levels), n_axis.size, p_axis.size)
    cov, low, width = np.empty(shape), np.empty(shape), np.empty(shape)
    for k, n_value in enumerate(n_axis.tolist()):
        x = np.arange(n_value + 1, dtype=np.float64)
        pmf = _binom_pmf(x[None, :], n_value, p_axis[:, None])
        for i, name in enumerate(names):
            for j, level in enumerate(levels):
                cov[i, j, k] = coverage(n_value, p_axis, interval=name, level=level)
                low[i, j, k] = min_coverage_cells(n_value, edges, interval=name, level=level)
                w = _upper(x, n_value, name, level) - _lower(x, n_value, name, level)
                width[i, j, k] = pmf @ w
    dims = ("interval", "level", "n", "p")
    ds = xr.Dataset(
        {
            "coverage": (dims, cov, dict(_VARIABLE_ATTRS["coverage"])),
            "min_coverage": (dims, low, dict(_VARIABLE_ATTRS["min_coverage"])),
            "expected_width": (dims, width, dict(_VARIABLE_ATTRS["expected_width"])),
            "p_cell_lo": ("p", cell_lo, dict(_VARIABLE_ATTRS["p_cell_lo"])),
            "p_cell_hi": ("p", cell_hi, dict(_VARIABLE_ATTRS["p_cell_hi"])),
        },
        coords={
            "interval": (
                "interval",
                np.asarray(names, dtype=object),
                {"long_name": "confidence interval for p"},
            ),
            "level": (
                "level",
                np.asarray(levels),
                {"long_name": "nominal confidence level", "units": "1"},
            ),
            "n": ("n", n_axis, {"long_name": "number of trials", "units": "1"}),
            "p": ("p", p_axis, {"long_name": "success probability", "units": "1"}),
        },
    )
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    ds.attrs = {
        "title": "approx-atlas: coverage of confidence intervals for a binomial p",
        "Conventions": "CF-1.10",
        "source": f"approx-atlas {__version__}",
        "history": f"{stamp} built by atlas.coverage_cube.build_coverage_cube",
        "references": _REFERENCES,
        "n_spec": n_spec,
        "p_spec": p_spec,
        "coverage_schema": COVERAGE_SCHEMA,
        "p_cells": "split at logit-scale midpoints of neighbouring grid p; the ends at the "
        "first and last grid p",
    }
    return ds


def save_coverage_cube(ds, path, *, overwrite=False):
    """Write a coverage cube to NetCDF4 atomically (a temporary name, renamed when complete).

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`build_coverage_cube`.
    path : str or os.PathLike
    overwrite : bool
        If False, refuse an existing target.

    Returns
    -------
    pathlib.Path
    """
    path = Path(path)
    missing = [v for v in ("coverage", "min_coverage", "expected_width") if v not in ds]
    if missing:
        raise ValueError(f"`ds` is not a coverage cube: it lacks {', '.join(missing)}.")
    if path.exists() and not overwrite:
        raise FileExistsError(
            f"`path` exists: {str(path)!r}; pass overwrite (--force) to replace it."
        )
    encoding = {
        name: {"zlib": True, "complevel": 6, "shuffle": True, "_FillValue": None}
        for name in ("coverage", "min_coverage", "expected_width", "p_cell_lo", "p_cell_hi")
    }
    # Fixed-width characters, as the error atlas stores its names (see atlas.store).
    encoding["interval"] = {"dtype": "S1", "char_dim_name": "interval_strlen"}
    for name in ("level", "n", "p"):
        encoding[name] = {"_FillValue": None}
    with replacing(path) as tmp:
        ds.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding)
    return path


def default_coverage_path():
    """The path of the embedded coverage cube (the default grid, all intervals and levels)."""
    return Path(__file__).with_name("data") / "coverage_cube.nc"


def open_coverage_cube(path=None):
    """Read a coverage cube written by :func:`save_coverage_cube` into memory.

    Parameters
    ----------
    path : str or os.PathLike, optional
        Default: the embedded cube (:func:`default_coverage_path`).
    """
    import xarray as xr

    path = default_coverage_path() if path is None else Path(path)
    if not path.is_file():
        raise FileNotFoundError(f"`path` is not a file: {str(path)!r}.")

    ds = xr.load_dataset(path, engine="netcdf4")
    if ds.attrs.get("coverage_schema") != COVERAGE_SCHEMA:
        raise ValueError(
            f"`path` is not a coverage cube of schema {COVERAGE_SCHEMA}: {str(path)!r}."
        )
    names = [v.decode() if isinstance(v, bytes) else str(v) for v in ds["interval"].values]
    return ds.assign_coords(
        interval=("interval", np.asarray(names, dtype=object), ds["interval"].attrs)
    )
