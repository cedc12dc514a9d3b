"""The coverage cube: coverage, minimum coverage and expected width of confidence intervals for p
over (interval, level, n, p), as an xarray Dataset, and the coverage group of the atlas file.

:func:`build_coverage_cube` computes it over a grid of its own (coarser than the atlas's);
:func:`attach` adds it to an atlas Dataset as the ``coverage`` group of
:data:`atlas.store.GROUPS` (dimensions renamed ``coverage_n`` and ``coverage_p``, so that they
never clash with the atlas's n and p; :func:`coverage_part`), which :func:`atlas.build_atlas`
does with ``coverage=True``; :func:`open_coverage_cube` reads it back from an atlas file with
the dimensions named n and p again (:func:`coverage_view`). The cube, as built and as read:

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

import math
from datetime import datetime, timezone

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

#: The default coverage grid: every n to 100, then 21 log-spaced n to 10^4; 61 p logit-spaced.
DEFAULT_COVERAGE_N_SPEC = "1:100,log:100:10000:21"
DEFAULT_COVERAGE_P_SPEC = "logit:0.001:0.999:61"
DEFAULT_LEVELS = (0.9, 0.95, 0.99)
MAX_N = 10**6
TITLE = "approx-atlas: coverage of confidence intervals for a binomial p"
_COORD_ATTRS = {
    "n": {"long_name": "number of trials", "units": "1"},
    "p": {"long_name": "success probability", "units": "1"},
}

_VARIABLE_ATTRS = {
    "coverage": {
        "long_name": "coverage probability of the confidence interval",
        "units": "1",
        "description": "C(n, p) = sum over x = 0..n of b(x; n, p) [lo(x) <= p <= hi(x)], "
        "closed intervals, endpoints as defined in atlas.confidence; n and p are coverage_n and "
        "coverage_p in the atlas file",
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
    # The C library's log and exp (math), not numpy's loops, which differ by processor
    # (atlas.floatpath): the same cells on every machine.
    logit = [math.log(v) - math.log1p(-v) for v in p.tolist()]
    pairs = zip(logit[:-1], logit[1:], strict=True)
    mids = np.array([1.0 / (1.0 + math.exp(-(a + b) / 2.0)) for a, b in pairs])
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
    import time

    import xarray as xr

    from atlas.grid import parse_n, parse_p

    started = time.perf_counter()
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
                {
                    "long_name": "confidence interval for p",
                    "description": "wald, wald_cc, wilson, wilson_cc, agresti_coull, jeffreys, "
                    "clopper_pearson: the endpoints lo(x), hi(x) defined in atlas.confidence "
                    "(README: confidence intervals for p)",
                },
            ),
            "level": (
                "level",
                np.asarray(levels),
                {
                    "long_name": "nominal confidence level",
                    "units": "1",
                    "description": "the level of each interval, z = the (1 + level)/2 normal "
                    "quantile; strictly increasing",
                },
            ),
            "n": ("n", n_axis, dict(_COORD_ATTRS["n"])),
            "p": ("p", p_axis, dict(_COORD_ATTRS["p"])),
        },
    )
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    seconds = time.perf_counter() - started
    ds.attrs = {
        "title": TITLE,
        "Conventions": "CF-1.10",
        "source": f"approx-atlas {__version__}",
        "history": (
            f"{stamp} approx-atlas {__version__} coverage: {n_axis.size} n x {p_axis.size} p x "
            f"{len(names)} intervals x {len(levels)} levels, {seconds:.1f} s"
        ),
        "references": _REFERENCES,
        "n_spec": n_spec,
        "p_spec": p_spec,
        "p_cells": "split at logit-scale midpoints of neighbouring grid p; the ends at the "
        "first and last grid p",
    }
    return ds


#: Global attributes of the coverage view that the atlas file keeps under another name.
_FILE_ATTRIBUTES = {"n_spec": "coverage_n_spec", "p_spec": "coverage_p_spec",
                    "p_cells": "coverage_p_cells"}  # fmt: skip
#: Dimensions of the view (the pages' n and p) and of the atlas file (never the atlas's n, p).
_FILE_DIMENSIONS = {"n": "coverage_n", "p": "coverage_p"}
COVERAGE_NOTE = (
    "The coverage of confidence intervals for p (coverage, min_coverage over the p-cell of each "
    "coverage_p, expected_width) over its own grid (coverage_n, coverage_p), every interval "
    "named in interval at each level; the endpoints as defined in atlas.confidence, exact "
    "(no p sampled). Any other n, p, band or level is computed exactly on demand by "
    "atlas.coverage, atlas.min_coverage and atlas.expected_width."
)


def coverage_part(ds):
    """The coverage view ``ds`` in the layout of the atlas file: the coverage group.

    The dimensions n and p become ``coverage_n`` and ``coverage_p`` (never the atlas's n and
    p), the intervals are stored in alphabetical order (as every index of the file), and the
    grid attributes become ``coverage_n_spec``, ``coverage_p_spec`` and ``coverage_p_cells``.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`build_coverage_cube`.

    Returns
    -------
    xarray.Dataset
        For :func:`atlas.cube.attach`.
    """
    names = [str(v) for v in ds["interval"].values]
    part = ds.isel(interval=sorted(range(len(names)), key=names.__getitem__))
    part = part.rename(_FILE_DIMENSIONS)
    for old, new in _FILE_DIMENSIONS.items():
        part[new].attrs = dict(part[new].attrs)
        part[new].attrs["description"] = (
            f"{old} of X ~ Bin(n, p) on the grid of the coverage variables; strictly increasing; "
            f"see {new}_spec"
        )
    part.attrs = {_FILE_ATTRIBUTES[k]: v for k, v in ds.attrs.items() if k in _FILE_ATTRIBUTES}
    part.attrs["coverage_note"] = COVERAGE_NOTE
    part.attrs["references"] = _REFERENCES
    if "history" in ds.attrs:
        part.attrs["history"] = ds.attrs["history"]
    return part


def attach(atlas_ds, cube):
    """The atlas Dataset with the coverage view ``cube`` added as its coverage group."""
    from atlas.cube import attach as attach_group

    return attach_group(atlas_ds, coverage_part(cube))


def coverage_view(atlas_ds):
    """The coverage group of an atlas Dataset as the coverage cube the pages and charts read.

    Dimensions ``interval``, ``level``, ``n`` and ``p`` (renamed from ``coverage_n`` and
    ``coverage_p``), the intervals in the order of :data:`atlas.confidence.INTERVALS`, the
    attributes of :func:`build_coverage_cube` (``n_spec``, ``p_spec``, ``p_cells``; ``source``
    and ``history`` those of the atlas).

    Raises
    ------
    ValueError
        If the atlas holds no coverage variables.
    """
    from atlas.cube import group_part

    part = group_part(atlas_ds, "coverage")
    names = [v.decode() if isinstance(v, bytes) else str(v) for v in part["interval"].values]
    part = part.assign_coords(
        interval=("interval", np.asarray(names, dtype=object), part["interval"].attrs)
    )
    order = sorted(range(len(names)), key=lambda i: INTERVALS.index(names[i]))
    view = part.isel(interval=order).rename({new: old for old, new in _FILE_DIMENSIONS.items()})
    for old in _FILE_DIMENSIONS:
        view[old].attrs = dict(_COORD_ATTRS[old])
    attrs = {
        "title": TITLE,
        "Conventions": "CF-1.10",
        "source": part.attrs.get("source", ""),
        "history": part.attrs.get("history", ""),
        "references": _REFERENCES,
    }
    attrs.update({k: part.attrs[v] for k, v in _FILE_ATTRIBUTES.items() if v in part.attrs})
    view.attrs = attrs
    return view


def open_coverage_cube(path=None):
    """The coverage variables of an atlas file, read into memory, as the coverage cube.

    Parameters
    ----------
    path : str or os.PathLike, optional
        An atlas file holding the coverage variables (``approx-atlas build --coverage``);
        default the embedded atlas.

    Returns
    -------
    xarray.Dataset
        :func:`coverage_view` of the file: dimensions ``interval``, ``level``, ``n`` and ``p``.

    Raises
    ------
    FileNotFoundError, ValueError
        As :func:`atlas.cube.load_dataset`; ValueError if the atlas holds no coverage variables.
    """
    from atlas import cube, store

    with cube.load_dataset(store.default_path() if path is None else path) as ds:
        return coverage_view(ds).load()
