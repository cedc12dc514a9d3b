"""The atlas cube: an xarray Dataset of worst-case errors over (method, n, p), and its NetCDF file.

The layout (schema version ``SCHEMA_VERSION``):

- dimensions and coordinates ``method`` (strings), ``n`` (int64), ``p`` (float64);
- ``interval_error`` and ``cdf_error`` (float64, or float32 in a compact copy: the global
  attribute ``error_precision`` says which), ``interval_lo`` and ``interval_hi`` (int64);
- global attributes ``title``, ``Conventions``, ``source``, ``history``, ``references``,
  ``comment`` (the caution), ``n_spec``, ``p_spec``, ``atlas_schema``, ``tail_tolerance``,
  ``error_precision`` and ``checksum`` (SHA-256 of the coordinates and data, see
  :func:`data_checksum`).

Files are written to a temporary name beside the target and renamed when complete, with HDF5's
Fletcher-32 checksums on every chunk, so a damaged chunk is refused when it is read.
"""

import hashlib
import os
from pathlib import Path

import numpy as np
import xarray as xr

from atlas import __version__

SCHEMA_VERSION = "1"
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
DATA_VARIABLES = ("interval_error", "cdf_error", "interval_lo", "interval_hi")
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
}
_COORD_ATTRS = {
    "method": {
        "long_name": "approximation method",
        "description": "; ".join(f"{m}: {d}" for m, d in METHOD_DESCRIPTIONS.items()),
    },
    "n": {"long_name": "number of trials", "units": "1", "description": "n of X ~ Bin(n, p)"},
    "p": {
        "long_name": "success probability",
        "units": "1",
        "description": "p of X ~ Bin(n, p), 0 < p < 1",
    },
}
PRECISIONS = ("float64", "float32")


def make_dataset(n, p, methods, arrays, *, n_spec, p_spec, history, tail_tolerance):
    """Assemble the atlas Dataset from computed arrays.

    Parameters
    ----------
    n : array_like of int
        The n axis.
    p : array_like of float
        The p axis.
    methods : sequence of str
        The method axis.
    arrays : dict
        ``interval_error``, ``cdf_error``, ``interval_lo``, ``interval_hi``, each of shape
        (len(methods), len(n), len(p)).
    n_spec, p_spec : str
        The grid specifications, stored as attributes.
    history : str
        One line for the ``history`` attribute.
    tail_tolerance : float
        The engine's tail tolerance, stored as an attribute.

    Returns
    -------
    xarray.Dataset
        With every attribute of the schema, the checksum included.
    """
    coords = {
        "method": ("method", np.asarray(list(methods), dtype=object), _COORD_ATTRS["method"]),
        "n": ("n", np.asarray(n, dtype=np.int64), _COORD_ATTRS["n"]),
        "p": ("p", np.asarray(p, dtype=np.float64), _COORD_ATTRS["p"]),
    }
    dtypes = {"interval_error": np.float64, "cdf_error": np.float64}
    data_vars = {
        name: (
            ("method", "n", "p"),
            np.asarray(arrays[name], dtype=dtypes.get(name, np.int64)),
            dict(_VARIABLE_ATTRS[name]),
        )
        for name in DATA_VARIABLES
    }
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
        "atlas_schema": SCHEMA_VERSION,
        "tail_tolerance": float(tail_tolerance),
        "error_precision": "float64",
    }
    ds.attrs["checksum"] = data_checksum(ds)
    return ds


def data_checksum(ds):
    """SHA-256 over the coordinates and data variables of an atlas Dataset.

    The digest covers, in a fixed order, each coordinate and data variable's name, dtype, shape
    and C-ordered bytes (method names as UTF-8 text), so it changes with any value.

    Returns
    -------
    str
        ``"sha256:<hex digest>"``.
    """
    digest = hashlib.sha256()
    digest.update("\n".join(str(m) for m in ds["method"].values).encode())
    for name in ("n", "p", *DATA_VARIABLES):
        values = np.ascontiguousarray(ds[name].values)
        digest.update(f"|{name}|{values.dtype.str}|{values.shape}|".encode())
        digest.update(values.tobytes())
    return "sha256:" + digest.hexdigest()


def compact(ds, precision):
    """Return ``ds`` with its error variables stored at ``precision`` and the checksum redone.

    Parameters
    ----------
    ds : xarray.Dataset
        An atlas Dataset.
    precision : {"float64", "float32"}
        float32 keeps 7 significant digits and halves the size of the error variables.

    Returns
    -------
    xarray.Dataset
    """
    if precision not in PRECISIONS:
        valid = ", ".join(repr(x) for x in PRECISIONS)
        raise ValueError(f"`precision` must be one of {valid}; got {precision!r}.")
    out = ds.copy()
    for name in ("interval_error", "cdf_error"):
        out[name] = ds[name].astype(precision)
        out[name].attrs = dict(ds[name].attrs)
    out.attrs = dict(ds.attrs)
    out.attrs["error_precision"] = (
        "float64" if precision == "float64" else "float32 (7 significant digits)"
    )
    out.attrs["checksum"] = data_checksum(out)
    return out


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
        If ``ds`` lacks a variable of the schema.
    """
    path = Path(path)
    missing = [name for name in DATA_VARIABLES if name not in ds]
    if missing:
        raise ValueError(f"`ds` is not an atlas Dataset: it lacks {', '.join(missing)}.")
    if path.exists() and not overwrite:
        raise FileExistsError(f"`path` exists: {str(path)!r}; pass overwrite (--force) to replace it.")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"`path` is in a directory that does not exist: {str(path)!r}.")
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
        for name in DATA_VARIABLES
    }
    encoding["n"] = {"_FillValue": None}
    encoding["p"] = {"_FillValue": None}
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        ds.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
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
        Opened lazily; values are read on access.

    Raises
    ------
    FileNotFoundError
        If there is no file at ``path``.
    ValueError
        If the file is not readable NetCDF, is of another schema version, lacks a variable,
        or (with ``verify``) fails its checksum.
    """
    path = Path(path)
    if not path.is_file():
        raise FileNotFoundError(f"`path` names no atlas file: {str(path)!r}.")
    try:
        ds = xr.open_dataset(path, engine="netcdf4")
    except Exception as err:  # netCDF4 raises OSError, xarray ValueError: refuse both the same
        raise ValueError(
            f"`path` is not a readable atlas file: {str(path)!r} ({type(err).__name__}: {err})."
        ) from None
    try:
        schema = ds.attrs.get("atlas_schema")
        if schema != SCHEMA_VERSION:
            raise ValueError(
                f"`path` holds an atlas of schema version {schema!r}; this version of approx-atlas "
                f"reads schema {SCHEMA_VERSION!r}: {str(path)!r}."
            )
        missing = [v for v in (*DATA_VARIABLES, "method", "n", "p") if v not in ds.variables]
        if missing:
            raise ValueError(f"`path` lacks the atlas variables {', '.join(missing)}: {str(path)!r}.")
        if verify:
            try:
                ds.load()
            except Exception as err:
                raise ValueError(
                    f"`path` is corrupt: its data cannot be read: {str(path)!r} ({err})."
                ) from None
            if data_checksum(ds) != ds.attrs.get("checksum"):
                raise ValueError(f"`path` is corrupt: its checksum does not match: {str(path)!r}.")
    except Exception:
        ds.close()
        raise
    return ds


def default_path():
    """The path of the embedded default atlas shipped inside the package."""
    return Path(__file__).with_name("data") / "default_atlas.nc"
