"""The atlas cube: worst-case errors over (approximation, n, p) as an xarray Dataset and a file.

The layout (schema version :data:`atlas.store.SCHEMA_VERSION`):

- dimensions and coordinates ``approximation`` (strings, in alphabetical order), ``n`` (int64)
  and ``p`` (float64), both strictly increasing, whatever order a build was asked for;
- ``interval_error`` and ``cdf_error`` (float64, or float32 in a compact copy: the global
  attribute ``error_precision`` says which), ``interval_lo`` and ``interval_hi`` (int64);
- ``interval_accuracy`` and ``cdf_accuracy`` (float32, rounded up to 4 significant bits,
  :func:`float32_upward`): bounds on
  |stored value - true value| of the two errors, the engine's accuracy
  (:class:`atlas.engine.Evaluation`) plus, in a compact copy, the float32 rounding of the stored
  error (|value| 2^-24);
- global attributes ``title``, ``Conventions``, ``source``, ``history``, ``references``,
  ``comment`` (the caution), ``n_spec``, ``p_spec``, ``atlas_schema``, ``tail_tolerance``,
  ``error_precision``, ``checksum`` (SHA-256 of the names, coordinates and data, see
  :func:`data_checksum`), ``checksum_variables``, ``checksum_recipe`` and ``attribute_notes``
  (one line per attribute saying what it means, :data:`ATTRIBUTE_NOTES`);
- optionally the groups of :data:`atlas.store.GROUPS`, each over dimensions of its own and with
  global attributes of its own, added by :func:`attach`: the tail relative error and the size
  of tests (built by :mod:`atlas.decision_cube`) and the coverage of confidence intervals
  (built by :mod:`atlas.coverage_cube`).

The dimension is ``approximation``, not ``method``: ``method`` is a keyword of xarray's
``.sel()``, so ``ds.interval_error.sel(approximation="normal_cc", n=50, p=0.1)`` works as typed.
The Python API and the command line keep the word method (``method=``, ``--method``).

Files are written to a temporary name beside the target and renamed when complete, with HDF5's
Fletcher-32 checksums on every chunk, so a damaged chunk is refused when it is read. The
approximation names are stored as fixed-width characters (CF character arrays, dimension
``approximation_strlen``).
Files are read and checked by :mod:`atlas.store`; xarray is imported only by the functions that
build a Dataset, so that importing this module stays light.
"""

from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from atlas import __version__, store
from atlas.files import replacing

CONVENTIONS = "CF-1.10"
CAUTION = (
    "The atlas bounds the error of approximations to the binomial model only. Regulated "
    "decisions (quality release, clinical counts) follow exact methods, local codes and "
    "licensed practice."
)
REFERENCES = (
    "Feller (1968) An Introduction to Probability Theory and Its Applications, vol. 1, ch. VII; "
    "Uspensky (1937) Introduction to Mathematical Probability, ch. VII; "
    "Esseen (1945) Acta Mathematica 77; "
    "Camp (1951) Ann. Math. Statist. 22; Paulson (1942) Ann. Math. Statist. 13; "
    "Peizer & Pratt (1968) JASA 63, 1416-1456; "
    "Johnson, Kemp & Kotz (2005) Univariate Discrete Distributions, 3rd ed."
)
METHOD_DESCRIPTIONS = {
    "normal_cc": "Phi(z), z = (k + 1/2 - n p) / sqrt(n p q)",
    "edgeworth_cc": "Phi(z) - (q - p) / (6 sigma) (z^2 - 1) phi(z)",
    "edgeworth2_cc": "two-term Edgeworth expansion with the lattice term z phi(z) / (24 sigma^2)",
    "normal": "Phi((k - n p) / sqrt(n p q)), no continuity correction",
    "poisson": "Poisson(n p) CDF; for p > 1/2 applied to the failures n - X",
    "camp_paulson": "Camp-Paulson cube-root normal approximation",
    "peizer_pratt": "Peizer-Pratt normal approximation",
}
_VARIABLE_ATTRS = {
    "interval_error": {
        "long_name": "worst-case error of interval probabilities",
        "units": "1",
        "description": (
            "max over 0 <= a <= b <= n of |P(a <= X <= b) - (G(b) - G(a-1))| for X ~ Bin(n, p), "
            "which equals max D - min D with D(k) = F(k) - G(k), k = -1..n"
        ),
    },
    "cdf_error": {
        "long_name": "worst-case error of the cumulative distribution function",
        "units": "1",
        "description": "max over k = 0..n of |F(k) - G(k)|, F(k) = P(X <= k), X ~ Bin(n, p)",
    },
    "interval_lo": {
        "long_name": "lower end a of the worst interval",
        "units": "1",
        "description": "a of an interval [a, b] on which interval_error is attained",
    },
    "interval_hi": {
        "long_name": "upper end b of the worst interval",
        "units": "1",
        "description": "b of an interval [a, b] on which interval_error is attained",
    },
    "interval_accuracy": {
        "long_name": "bound on the absolute error of interval_error",
        "units": "1",
        "description": (
            "|stored interval_error - true interval_error| <= interval_accuracy: the engine's "
            "bound (error of the exact side F, rounding of G, omitted tails) plus, where "
            "error_precision is float32, the rounding of the stored value, |value| * 2^-24; "
            "rounded up to 4 significant bits. A value <= 3 * interval_accuracy is below the "
            "resolution of the exact side: only interval_error + interval_accuracy bounds it"
        ),
    },
    "cdf_accuracy": {
        "long_name": "bound on the absolute error of cdf_error",
        "units": "1",
        "description": (
            "|stored cdf_error - true cdf_error| <= cdf_accuracy: the engine's bound (error of "
            "the exact side F, rounding of G, omitted tails) plus, where error_precision is "
            "float32, the rounding of the stored value, |value| * 2^-24; rounded up to 4 "
            "significant bits. A value <= 3 * cdf_accuracy is below the resolution of the "
            "exact side: only cdf_error + cdf_accuracy bounds it"
        ),
    },
}
#: The accuracy variable of each error variable.
ACCURACY_OF = {"interval_error": "interval_accuracy", "cdf_error": "cdf_accuracy"}
#: The relative rounding of a float32 value, round to nearest: half a unit in the last place.
FLOAT32_ROUNDING = 2.0**-24
_COORD_ATTRS = {
    "n": {
        "long_name": "number of trials",
        "units": "1",
        "description": "n of X ~ Bin(n, p); strictly increasing",
    },
    "p": {
        "long_name": "success probability",
        "units": "1",
        "description": "p of X ~ Bin(n, p), 0 < p < 1; strictly increasing",
    },
}
PRECISIONS = ("float64", "float32")
#: What each global attribute of the file means, one sentence each: stored in the file as the
#: attribute ``attribute_notes`` (one "name: sentence" line per attribute) and shown by
#: ``approx-atlas inspect`` under each value.
ATTRIBUTE_NOTES = {
    "title": "What the file holds.",
    "Conventions": "The CF metadata conventions version the file follows.",
    "source": "The program and version that computed the values.",
    "history": "One line per step that made or changed the file: UTC time, program and action.",
    "references": "The published sources of the approximations and of the error measures.",
    "comment": "The caution that applies to every use of the values.",
    "n_spec": (
        "The n axis as given to the build, comma-separated items 'k', 'a:b' (every integer "
        "from a to b) and 'log:a:b:m' (m integers log-spaced from a to b); "
        "`approx-atlas build --n` with it gives the same axis."
    ),
    "p_spec": (
        "The p axis as given to the build, comma-separated items 'x', 'lin:a:b:m', 'log:a:b:m' "
        "and 'logit:a:b:m' (m points evenly spaced in p, log p or log(p/(1-p))); "
        "`approx-atlas build --p` with it gives the same axis."
    ),
    "atlas_schema": (
        "The version of this file layout (dimensions approximation, n and p, the variables and "
        "these attributes, and the optional tail, test-size and coverage variables over "
        "dimensions of their own); a reader refuses a version it does not know."
    ),
    "tail_tolerance": (
        "The bound, checked in every cell, on |F(k) - G(k)| at each k the exact search leaves "
        "out (the far tails of X ~ Bin(n, p)): the omitted k change no stored error by more "
        "than this."
    ),
    "error_precision": (
        "The type interval_error and cdf_error are stored in: float64, or float32 (7 "
        "significant digits) in a compact copy, whose rounding interval_accuracy and "
        "cdf_accuracy include; interval_lo and interval_hi are exact int64."
    ),
    "checksum": (
        "'sha256:' and the SHA-256 digest of the names and values, computed as checksum_recipe "
        "says; recompute it to detect damaged or altered values."
    ),
    "decision_n_spec": (
        "The n axis (dimension decision_n) of the tail and test-size variables, in the form of "
        "n_spec; `approx-atlas build --decision-n` with it gives the same axis."
    ),
    "decision_p_spec": (
        "The p axis (dimension decision_p; p0 for the tests) of the tail and test-size "
        "variables, in the form of p_spec; `approx-atlas build --decision-p` with it gives the "
        "same axis."
    ),
    "decision_note": (
        "Why the tail and test-size variables have a grid of their own, and how other cells "
        "and levels are obtained."
    ),
    "coverage_n_spec": (
        "The n axis (dimension coverage_n) of the coverage variables, in the form of n_spec; "
        "`approx-atlas build --coverage-n` with it gives the same axis."
    ),
    "coverage_p_spec": (
        "The p axis (dimension coverage_p) of the coverage variables, in the form of p_spec; "
        "`approx-atlas build --coverage-p` with it gives the same axis."
    ),
    "coverage_p_cells": (
        "How the p-cell [p_cell_lo, p_cell_hi] of each coverage_p is cut, over which "
        "min_coverage is the exact minimum."
    ),
    "coverage_note": (
        "What the coverage variables are, on which grid, and how other cells and levels are "
        "obtained."
    ),
    "checksum_variables": "The variables whose values enter the checksum, in order, "
    "separated by spaces.",
    "checksum_recipe": "How the checksum is computed, in words for a reader in any language.",
    "attribute_notes": "This list: one line per global attribute saying what it means.",
}
#: Global attributes that document the file format, the same in every atlas, rather than the
#: provenance of one atlas: provenance listings (the sheet, the wiki page) leave them out.
FORMAT_ATTRIBUTES = ("checksum_recipe", "attribute_notes")


def make_dataset(n, p, methods, arrays, *, n_spec, p_spec, history, tail_tolerance):
    """Assemble the atlas Dataset from computed arrays.

    Parameters
    ----------
    n : array_like of int
        The n axis.
    p : array_like of float
        The p axis.
    methods : sequence of str
        The approximations, in any order (stored alphabetically).
    arrays : dict
        ``interval_error``, ``cdf_error``, ``interval_lo``, ``interval_hi``,
        ``interval_accuracy`` and ``cdf_accuracy``, each of shape (len(methods), len(n), len(p)).
        The accuracies are stored as float32 rounded up to 4 significant bits
        (:func:`float32_upward`), so they stay bounds.
    n_spec, p_spec : str
        The grid specifications, stored as attributes.
    history : str
        One line for the ``history`` attribute.
    tail_tolerance : float
        The engine's tail tolerance, stored as an attribute.

    Returns
    -------
    xarray.Dataset
        With every attribute of the schema, the checksum included. The approximations are in
        alphabetical order (the arrays are reordered with them), whatever order they came in.

    Raises
    ------
    ValueError
        If n or p is not strictly increasing, or a name repeats.
    """
    import xarray as xr

    names = [str(m) for m in methods]
    order = sorted(range(len(names)), key=names.__getitem__)
    names = [names[i] for i in order]
    n = np.asarray(n, dtype=np.int64)
    p = np.asarray(p, dtype=np.float64)
    store.check_axes({store.APPROXIMATION: names, "n": n, "p": p}, "`methods`, `n` and `p`")
    coords = {
        store.APPROXIMATION: (
            store.APPROXIMATION,
            np.asarray(names, dtype=object),
            approximation_attrs(names),
        ),
        "n": ("n", n, _COORD_ATTRS["n"]),
        "p": ("p", p, _COORD_ATTRS["p"]),
    }
    dtypes = {"interval_error": np.float64, "cdf_error": np.float64}
    data_vars = {}
    for name in store.DATA_VARIABLES:
        if name in ACCURACY_OF.values():
            values = float32_upward(arrays[name])
        else:
            values = np.asarray(arrays[name], dtype=dtypes.get(name, np.int64))
        data_vars[name] = (store.DIMENSIONS, values[order], dict(_VARIABLE_ATTRS[name]))
    ds = xr.Dataset(data_vars, coords=coords)
    ds.attrs = {
        "title": "approx-atlas: worst-case errors of approximations to the binomial distribution",
        "Conventions": CONVENTIONS,
        "source": f"approx-atlas {__version__}",
        "history": history,
        "references": REFERENCES,
        "comment": CAUTION,
        "n_spec": n_spec,
        "p_spec": p_spec,
        "atlas_schema": store.SCHEMA_VERSION,
        "tail_tolerance": float(tail_tolerance),
        "error_precision": "float64",
    }
    return _seal(ds)


#: The attributes that close every atlas's list, in this order, after any group's.
_CLOSING = ("checksum", "checksum_variables", "checksum_recipe", "attribute_notes")


def _seal(ds):
    """``ds`` with its closing attributes (re)computed: the checksum over the variables of the
    groups it holds, their list, the recipe and one note per attribute, in the file's order."""
    attrs = {k: v for k, v in ds.attrs.items() if k not in _CLOSING}
    attrs["checksum"] = data_checksum(ds)
    attrs["checksum_variables"] = " ".join(store.checksum_variables(store.groups_in(ds.variables)))
    attrs["checksum_recipe"] = store.CHECKSUM_RECIPE
    attrs["attribute_notes"] = ""
    attrs["attribute_notes"] = "\n".join(
        f"{k}: {ATTRIBUTE_NOTES[k]}" for k in attrs if k in ATTRIBUTE_NOTES
    )
    ds.attrs = attrs
    return ds


def attach(ds, part):
    """The atlas ``ds`` with one group of variables (:data:`atlas.store.GROUPS`) added.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset (:func:`make_dataset`), with or without the other group.
    part : xarray.Dataset
        The variables of one group with their index coordinates and attributes, over the
        dimensions of the file (from :func:`atlas.decision_cube.decision_dataset` or
        :func:`atlas.coverage_cube.coverage_part`). Its global attributes are the group's
        (``atlas.store.GROUPS[...].attributes``) and optionally ``history`` (appended to the
        atlas's) and ``references`` (added to the atlas's).

    Returns
    -------
    xarray.Dataset
        A new Dataset: the group's attributes after the atlas's own and before the checksum,
        ``checksum``, ``checksum_variables`` and ``attribute_notes`` redone.

    Raises
    ------
    ValueError
        If ``part`` is not one whole group, the atlas holds that group already, the group is
        over other approximations than the atlas's, or an index is out of order.
    """
    import xarray as xr

    groups = store.groups_in(part.variables)
    if len(groups) != 1:
        raise ValueError(
            f"`part` must hold the variables of one group of {', '.join(store.GROUPS)}; got "
            f"{len(groups)}."
        )
    (key,) = groups
    group = store.GROUPS[key]
    if key in store.groups_in(ds.variables):
        raise ValueError(f"`ds` holds the {key} variables already.")
    _check_groups(part, "`part`")
    if store.APPROXIMATION in part.dims:
        mine, theirs = list(ds[store.APPROXIMATION].values), list(part[store.APPROXIMATION].values)
        if [str(m) for m in mine] != [str(m) for m in theirs]:
            raise ValueError(
                f"`part` must hold the atlas's approximations ({', '.join(map(str, mine))}); got "
                f"{', '.join(map(str, theirs))}."
            )
    keep = [*group.names(), *(d for d in part.dims if d not in group.names())]
    body = part[[name for name in group.names() if name in part.data_vars]]
    body = body.drop_vars([c for c in body.coords if c not in keep])
    if store.APPROXIMATION in body.coords:
        body = body.drop_vars(store.APPROXIMATION)
    merged = xr.merge([ds, body], combine_attrs="drop_conflicts", join="exact")
    attrs = {k: v for k, v in ds.attrs.items() if k not in _CLOSING}
    for name in group.attributes:
        attrs[name] = part.attrs[name]
    if part.attrs.get("history"):
        attrs["history"] = f"{attrs.get('history', '')}\n{part.attrs['history']}".strip()
    if part.attrs.get("references") and part.attrs["references"] not in attrs["references"]:
        attrs["references"] = f"{attrs['references']}; {part.attrs['references']}"
    merged.attrs = attrs
    return _seal(merged)


def group_part(ds, key):
    """The variables of group ``key`` of an atlas Dataset, with their coordinates and the
    group's global attributes (and the atlas's ``source``, ``history`` and ``references``).

    Raises
    ------
    ValueError
        If ``ds`` does not hold the group.
    """
    group = store.GROUPS[key]
    if key not in store.groups_in(ds.variables):
        raise ValueError(
            f"the atlas holds no {key} variables; build it with them "
            f"({'--decisions' if key == 'decisions' else '--coverage'} of approx-atlas build)."
        )
    part = ds[[name for name in group.variables]]
    part = part.drop_vars([c for c in part.coords if c not in group.names()
                           and c != store.APPROXIMATION])  # fmt: skip
    keys = ("source", "history", "references", *group.attributes)
    part.attrs = {k: ds.attrs[k] for k in keys if k in ds.attrs}
    return part


#: Significant bits kept of each stored accuracy (rounded up): 4, so at most 12.5% above the
#: bound computed. With shuffle and zlib an accuracy variable then takes about a tenth of the
#: space of an error variable (measured on the default p axis, 240 n from 1 to 10^8: 0.11 MB
#: against 0.95 MB); with all 24 bits it would take as much, and the embedded atlas would pass
#: its package-data limit (25 MB then; 40 MB since it holds the tail, test-size and coverage
#: variables too).
ACCURACY_BITS = 4


def float32_upward(values, bits=ACCURACY_BITS):
    """Bounds as float32, rounded up to ``bits`` significant bits: never below the value.

    Parameters
    ----------
    values : array_like of float
        Non-negative bounds (accuracies).
    bits : int, optional
        Significant bits kept (1 to 24); default :data:`ACCURACY_BITS`, at most
        2^(1 - bits) relative above the value (12.5% for 4 bits).

    Examples
    --------
    >>> x = float32_upward([1e-15, 0.5, 0.3])
    >>> str(x.dtype), bool(x[0] >= 1e-15), float(x[1]), float(x[2])
    ('float32', True, 0.5, 0.3125)
    """
    values = np.asarray(values, dtype=np.float64)
    out = values.astype(np.float32)
    low = out.astype(np.float64) < values
    out[low] = np.nextafter(out[low], np.float32(np.inf))
    drop = 24 - bits  # mantissa bits cleared, rounding up when any was set
    if drop > 0:
        raw = out.view(np.uint32)
        mask = np.uint32((1 << drop) - 1)
        carry = np.where(raw & mask, np.uint32(1 << drop), np.uint32(0)).astype(np.uint32)
        out = ((raw & ~mask) + carry).view(np.float32)  # positive floats order as integers
    return out


def approximation_attrs(names):
    """The attributes of the approximation coordinate: its description lists ``names`` only.

    The description is one line of what the coordinate is, then one line per approximation the
    atlas holds, ``name: G(k)``, in the stored (alphabetical) order.

    Examples
    --------
    >>> print(approximation_attrs(["normal_cc", "poisson"])["description"])
    the approximation G(k) to F(k) = P(X <= k), X ~ Bin(n, p); one line per name, in the stored (alphabetical) order:
    normal_cc: Phi(z), z = (k + 1/2 - n p) / sqrt(n p q)
    poisson: Poisson(n p) CDF; for p > 1/2 applied to the failures n - X
    """  # noqa: E501 (a doctest's output line is as long as it is)
    head = (
        "the approximation G(k) to F(k) = P(X <= k), X ~ Bin(n, p); one line per name, in the "
        "stored (alphabetical) order:"
    )
    lines = [f"{m}: {METHOD_DESCRIPTIONS.get(m, 'not described')}" for m in names]
    return {
        "long_name": "approximation to the binomial distribution function",
        "description": "\n".join([head, *lines]),
    }


def attribute_notes(ds):
    """The explanation of each global attribute of an atlas, from its ``attribute_notes``.

    Returns
    -------
    dict
        Attribute name -> sentence, read from the Dataset's ``attribute_notes`` (what the file
        itself says), falling back to :data:`ATTRIBUTE_NOTES` for a name it does not explain.
    """
    notes = dict(ATTRIBUTE_NOTES)
    for line in str(ds.attrs.get("attribute_notes", "")).splitlines():
        name, _, text = line.partition(": ")
        if text:
            notes[name.strip()] = text.strip()
    return notes


def data_checksum(ds):
    """SHA-256 over the approximation names, coordinates and data variables of an atlas Dataset.

    The digest covers the names (UTF-8, each followed by a line feed), then the raw
    little-endian bytes of n, p and each data variable in C order, then those of each group it
    holds (indexes first; :func:`atlas.store.checksum_variables`; the recipe is the
    ``checksum_recipe`` attribute, :data:`atlas.store.CHECKSUM_RECIPE`), so it changes with any
    value. It is :func:`atlas.store.checksum` of the Dataset's values, the digest the file
    readers check.

    Returns
    -------
    str
        ``"sha256:<hex digest>"``.
    """

    return store.checksum(_reader(ds), store.checksum_variables(store.groups_in(ds.variables)))


def _reader(ds):
    """``read(name)`` for :mod:`atlas.store`: the names of a name index as str, else values."""

    def read(name):
        values = ds[name].values
        return [str(v) for v in values] if name in store.NAME_INDEXES else values

    return read


def _check_groups(ds, where):
    """:func:`atlas.store.check_groups` on a Dataset: the groups it holds, checked."""
    dims = {name: var.dims for name, var in ds.variables.items()}
    return store.check_groups(dims, _reader(ds), where)


def compact(ds, precision="float32"):
    """Return ``ds`` with its error variables stored at ``precision`` and the checksum redone.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset.
    precision : {"float32", "float64"}, optional
        float32 (the default) keeps 7 significant digits and halves the size of the error
        variables; the end points ``interval_lo`` and ``interval_hi`` stay exact.

    Returns
    -------
    xarray.Dataset
        A copy with ``error_precision`` saying how the errors are stored, a ``history`` line
        for the conversion and a new ``checksum``. Converting float64 errors to float32 adds
        their rounding, |value| * 2^-24, to ``interval_accuracy`` and ``cdf_accuracy``, so
        that these still bound |stored value - true value|.

    Raises
    ------
    ValueError
        If ``precision`` is not one of the two.

    Examples
    --------
    >>> import numpy as np
    >>> from atlas.store import DATA_VARIABLES
    >>> ds = make_dataset([10], [0.5], ["normal_cc"], {name: np.zeros((1, 1, 1)) for name in
    ...     DATA_VARIABLES}, n_spec="10", p_spec="0.5", history="example", tail_tolerance=1e-17)
    >>> small = compact(ds, "float32")
    >>> str(small["interval_error"].dtype), small.attrs["error_precision"]
    ('float32', 'float32 (7 significant digits)')
    """
    if precision not in PRECISIONS:
        valid = ", ".join(repr(x) for x in PRECISIONS)
        raise ValueError(f"`precision` must be one of {valid}; got {precision!r}.")
    out = ds.copy()
    before = np.dtype(ds["interval_error"].dtype)
    for name in ("interval_error", "cdf_error"):
        out[name] = ds[name].astype(precision)
        out[name].attrs = dict(ds[name].attrs)
        if np.dtype(precision) == np.float32 and before != np.float32:
            accuracy = ACCURACY_OF[name]
            stored = out[name].values.astype(np.float64)
            # |float32(x) - x| <= |x| 2^-24 <= |float32(x)| 2^-24 (1 + 2^-23) for normal
            # float32, plus 2^-150 for subnormal ones; the sum is rounded upward, so the bound
            # holds for the true value.
            rounding = np.abs(stored) * (FLOAT32_ROUNDING * (1.0 + 2.0**-23)) + 2.0**-149
            total = ds[accuracy].values.astype(np.float64) + rounding
            out[accuracy] = (ds[accuracy].dims, float32_upward(total), dict(ds[accuracy].attrs))
    out.attrs = dict(ds.attrs)
    if precision == "float32":
        out.attrs["error_precision"] = "float32 (7 significant digits)"
    elif before != np.float32:  # widening float32 values back to float64 adds no digits
        out.attrs["error_precision"] = "float64"
    if np.dtype(precision) != before:
        stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        out.attrs["history"] = (
            f"{ds.attrs.get('history', '')}\n{stamp} approx-atlas {__version__} compact: "
            f"interval_error and cdf_error stored as {precision}"
        ).strip()
    return _seal(out)


def save_atlas(ds, path, *, overwrite=True):
    """Write an atlas Dataset to NetCDF4 atomically.

    The file is written to a temporary name in the target's directory and renamed over the
    target only when complete; on any failure the temporary file is removed and no file is left
    at the target.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset (from :func:`atlas.build_atlas` or :func:`compact`).
    path : str or os.PathLike
        The target file.
    overwrite : bool, optional
        If False, refuse an existing target.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    FileExistsError
        If the target exists and ``overwrite`` is False.
    ValueError
        If ``ds`` lacks a variable of the schema, or an index coordinate is not strictly
        increasing (the readers would refuse the file).

    Notes
    -----
    The approximation names are written as fixed-width characters over (approximation,
    approximation_strlen), not as variable-length strings: with netCDF4 1.7.5, reading
    variable-length strings through a second handle on an open file, closing it and opening the
    file again crashes the interpreter (see :mod:`atlas.store`).
    """
    path = Path(path)
    missing = [name for name in (*store.DATA_VARIABLES, *store.DIMENSIONS) if name not in ds]
    if missing:
        raise ValueError(f"`ds` is not an atlas Dataset: it lacks {', '.join(missing)}.")
    names = [str(m) for m in ds[store.APPROXIMATION].values]
    store.check_axes({store.APPROXIMATION: names, "n": ds["n"].values, "p": ds["p"].values}, "`ds`")
    groups = _check_groups(ds, "`ds`")
    if path.exists() and not overwrite:
        raise FileExistsError(
            f"`path` exists: {str(path)!r}; pass overwrite (--force) to replace it."
        )
    chunks = (1, min(ds.sizes["n"], 256), ds.sizes["p"])
    encoding = {
        name: {
            "zlib": True,
            "complevel": 6,
            "shuffle": True,
            "fletcher32": True,
            "chunksizes": chunks,
            "_FillValue": None,
        }
        for name in store.DATA_VARIABLES
    }
    for key in groups:
        for name in store.GROUPS[key].variables:
            shape = ds[name].shape
            # One chunk per grid of cells (the last two dimensions), as for the errors.
            encoding[name] = dict(encoding[store.DATA_VARIABLES[0]],
                                  chunksizes=(1,) * (len(shape) - 2) + shape[-2:])  # fmt: skip
        for name in store.GROUPS[key].indexes:
            encoding[name] = {"_FillValue": None}
    for name in store.NAME_INDEXES:
        if name in ds.variables:
            encoding[name] = {"dtype": "S1", "char_dim_name": f"{name}_strlen"}
    encoding["n"] = {"_FillValue": None}
    encoding["p"] = {"_FillValue": None}
    with replacing(path) as tmp:
        ds.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding)
    return path


def load_dataset(path, *, verify=False):
    """Open an atlas file, refusing anything that is not a valid atlas of this schema.

    Parameters
    ----------
    path : str or os.PathLike
        A NetCDF file written by :func:`save_atlas`.
    verify : bool, optional
        Also recompute the checksum and compare it with the stored one (reads every value).

    Returns
    -------
    xarray.Dataset
        Opened lazily; values are read on access. Closing it closes the file.

    Raises
    ------
    FileNotFoundError
        If there is no file at ``path``.
    ValueError
        If the file is not readable NetCDF, is of another schema version, lacks a variable,
        or (with ``verify``) fails its checksum.
    """
    path = Path(path)
    nc = store.open_netcdf(path)
    try:
        if verify:
            store.verify_file(nc, path)
        return store.to_dataset(nc)
    except Exception:
        nc.close()
        raise


def verify_checksum(ds, path=None):
    """Read every value of an atlas and compare its checksum with the stored one.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset, in memory or opened from a file (then every value is read).
    path : str or os.PathLike, optional
        The file it came from, named in the error message.

    Returns
    -------
    str
        The checksum, ``"sha256:<hex digest>"``.

    Raises
    ------
    ValueError
        If a value cannot be read (a damaged HDF5 chunk fails its Fletcher-32 check), the
        stored checksum is missing, or it differs from :func:`data_checksum` of the values.

    Examples
    --------
    >>> import numpy as np
    >>> from atlas.store import DATA_VARIABLES
    >>> ds = make_dataset([10], [0.5], ["normal_cc"], {name: np.zeros((1, 1, 1)) for name in
    ...     DATA_VARIABLES}, n_spec="10", p_spec="0.5", history="example", tail_tolerance=1e-17)
    >>> verify_checksum(ds) == ds.attrs["checksum"]
    True
    """
    try:
        ds.load()
    except Exception as err:  # netCDF4 raises RuntimeError (HDF error) for a damaged chunk
        raise store.unreadable(err, path) from None
    return store.verify_digest(
        ds.attrs.get("checksum"),
        data_checksum(ds),
        path,
        ds.attrs.get("checksum_variables"),
        store.checksum_variables(store.groups_in(ds.variables)),
    )


def describe_dataset(ds, path=None, *, width=100):
    """Lines of text describing an atlas: grid, approximations, variables, attributes explained.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset.
    path : str or os.PathLike, optional
        Its file, whose name and size head the description.
    width : int, optional
        Long values and explanations are wrapped to this many characters.

    Returns
    -------
    list of str
        What ``approx-atlas inspect`` prints before it verifies the checksum: each global
        attribute's value, and under it, marked "= ", what it means (:func:`attribute_notes`).
    """
    import textwrap

    from atlas.grid import describe_grid

    lines = []
    if path is not None:
        size = Path(path).stat().st_size
        lines.append(f"file: {path} ({size / 1e6:.2f} MB, {size} bytes)")
    grid = f"grid: {describe_grid(ds['n'].values, ds['p'].values)}"
    lines.extend(textwrap.wrap(grid, width, subsequent_indent=" " * 4))
    groups = store.groups_in(ds.variables)

    def listed(name):
        return ", ".join(str(v) if name in store.NAME_INDEXES else f"{float(v):g}"
                         for v in ds[name].values)  # fmt: skip

    shown = {  # group: (what, its n and p, its other indexes with their words)
        "decisions": ("tail and test-size", "decision", (("tail levels", "tail_level"),
                                                         ("test levels", "test_level"))),
        "coverage": ("coverage", "coverage", (("intervals", "interval"), ("levels", "level"))),
    }  # fmt: skip
    for key in groups:
        what, prefix, indexes = shown[key]
        text = (
            f"{what} grid ({prefix}_n, {prefix}_p): "
            f"{describe_grid(ds[f'{prefix}_n'].values, ds[f'{prefix}_p'].values)}; "
            + "; ".join(f"{words} {listed(name)}" for words, name in indexes)
        )
        lines.extend(textwrap.wrap(text, width, subsequent_indent=" " * 4))
    names = [str(m) for m in ds[store.APPROXIMATION].values]
    lines.append(
        f"approximations ({len(names)}; the names --method takes; dimension "
        f"'{store.APPROXIMATION}', in alphabetical order):"
    )
    lines.extend(f"  {m}: {METHOD_DESCRIPTIONS.get(m, 'not described')}" for m in names)
    lines.append("variables:")
    extra = [name for key in groups for name in store.GROUPS[key].variables]
    for name in (*store.DATA_VARIABLES, *extra):
        var = ds[name]
        text = (
            f"{name}({', '.join(var.dims)}) {var.dtype}, units {var.attrs.get('units', '?')!r}: "
            f"{var.attrs.get('long_name', '')}"
        )
        lines.extend(textwrap.wrap(text, width, initial_indent="  ", subsequent_indent=" " * 4))
    lines.append("global attributes (the value, then = what it means):")
    notes = attribute_notes(ds)
    for key, value in ds.attrs.items():
        if key == "attribute_notes":  # shown here, under each attribute
            continue
        # Each line of a multi-line value (history) starts at 4 spaces under the first and
        # continues at 6, so that each reads as one; a one-line value continues at 4.
        parts = str(value).split("\n")
        more = " " * (6 if len(parts) > 1 else 4)
        for k, part in enumerate(parts):
            first = f"  {key}: " if k == 0 else " " * 4
            lines.extend(
                textwrap.wrap(part, width, initial_indent=first, subsequent_indent=more,
                              break_on_hyphens=False,
                              break_long_words=False)  # a spec or digest stays whole
            )  # fmt: skip
        if key in notes:
            lines.extend(textwrap.wrap(notes[key], width, initial_indent="    = ",
                                       subsequent_indent=" " * 6))  # fmt: skip
    return lines
