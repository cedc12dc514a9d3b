"""Atlas files on disk: the schema every reader checks, and the one fast reader.

An atlas file is NetCDF4 (HDF5) in the layout that :func:`atlas.cube.save_atlas` writes, of
schema version ``SCHEMA_VERSION``: dimensions ``method``, ``n`` and ``p``, the coordinate
variables of the same names, the data variables ``DATA_VARIABLES`` over (method, n, p) and the
global attribute ``atlas_schema``. The method names are stored as fixed-width characters
(dimensions ``method`` and ``method_strlen``); files of earlier versions store them as
variable-length strings, and both are read as Python str.

Everything here reads the file with netCDF4 directly and imports neither xarray nor pandas nor
dask (xarray imports dask while it decodes the method names whenever dask is installed), so
that a command-line query starts fast. :func:`open_netcdf` refuses what is not an atlas of this
schema; :func:`atlas.cube.load_dataset` builds its ``xarray.Dataset`` on the handle it returns
(:func:`to_dataset`), and :func:`atlas.open_atlas` keeps one :class:`AtlasFile` per file.

One open file per process. :func:`share` opens each file once and hands the same
:class:`AtlasFile` to every Atlas of that file; it is closed when the last of them is closed or
garbage collected. With netCDF4 1.7.5, reading variable-length method names through a second
handle on an open file, closing that handle and opening the file again is a segmentation fault.
Fixed-width names (what :func:`atlas.cube.save_atlas` writes) do not crash; sharing the handle
keeps files of earlier versions safe too.
"""

import hashlib
import os
import threading
import weakref
from pathlib import Path

import numpy as np

__all__ = [
    "DATA_VARIABLES",
    "DIMENSIONS",
    "METHOD_STRLEN",
    "SCHEMA_VERSION",
    "AtlasFile",
    "checksum",
    "default_path",
    "method_names",
    "open_netcdf",
    "release",
    "share",
    "to_dataset",
    "unreadable",
    "verify_digest",
    "verify_file",
]

SCHEMA_VERSION = "1"
DATA_VARIABLES = ("interval_error", "cdf_error", "interval_lo", "interval_hi")
DIMENSIONS = ("method", "n", "p")
#: The character dimension of the fixed-width method names.
METHOD_STRLEN = "method_strlen"


def default_path():
    """The path of the embedded default atlas shipped inside the package."""
    return Path(__file__).with_name("data") / "default_atlas.nc"


def open_netcdf(path):
    """Open an atlas file with netCDF4, refusing anything that is not an atlas of this schema.

    Parameters
    ----------
    path : str or os.PathLike
        A NetCDF file written by :func:`atlas.cube.save_atlas`.

    Returns
    -------
    netCDF4.Dataset
        Open for reading, with automatic masking off (the atlas has no fill values).

    Raises
    ------
    FileNotFoundError
        If there is no file at ``path``.
    ValueError
        If the file is not readable NetCDF, is of another schema version, lacks a variable, or
        has a data variable over other dimensions than (method, n, p).
    """
    path = Path(path)
    if not path.is_file():
        raise FileNotFoundError(f"`path` names no atlas file: {str(path)!r}.")
    import netCDF4

    try:
        nc = netCDF4.Dataset(path, "r")
    except Exception as err:  # netCDF4 raises OSError for a file that is not NetCDF
        raise ValueError(
            f"`path` is not a readable atlas file: {str(path)!r} ({type(err).__name__}: {err})."
        ) from None
    try:
        _check_layout(nc, path)
        nc.set_auto_mask(False)  # plain arrays: the atlas has no fill values
    except Exception:
        nc.close()
        raise
    return nc


def _check_layout(nc, path):
    """Refuse an open NetCDF file that is not an atlas of schema ``SCHEMA_VERSION``."""
    schema = nc.getncattr("atlas_schema") if "atlas_schema" in nc.ncattrs() else None
    if schema is None:
        raise ValueError(
            f"`path` is NetCDF but not an atlas file (it has no 'atlas_schema' attribute): "
            f"{str(path)!r}."
        )
    if schema != SCHEMA_VERSION:
        raise ValueError(
            f"`path` holds an atlas of schema version {schema!r}; this version of approx-atlas "
            f"reads schema {SCHEMA_VERSION!r}: {str(path)!r}."
        )
    missing = [v for v in (*DATA_VARIABLES, *DIMENSIONS) if v not in nc.variables]
    if missing:
        raise ValueError(f"`path` lacks the atlas variables {', '.join(missing)}: {str(path)!r}.")
    odd = [v for v in DATA_VARIABLES if nc.variables[v].dimensions != DIMENSIONS]
    if odd:
        raise ValueError(
            f"`path` has atlas variables without the dimensions (method, n, p): "
            f"{', '.join(odd)}: {str(path)!r}."
        )


def method_names(nc):
    """The method names of an open atlas file, as a tuple of str.

    Fixed-width characters (method, method_strlen) are joined and decoded here, whatever
    netCDF4's automatic conversion is set to (xarray turns it off on the handles it reads);
    variable-length strings (files of earlier versions) arrive as str already.
    """
    var = nc.variables["method"]
    var.set_auto_chartostring(False)
    values = np.asarray(var[:])
    if values.dtype.kind == "S":
        encoding = var.getncattr("_Encoding") if "_Encoding" in var.ncattrs() else "utf-8"
        return tuple(b"".join(row).decode(encoding) for row in values.reshape(len(values), -1))
    return tuple(str(m) for m in np.ravel(values))


def to_dataset(nc):
    """An ``xarray.Dataset`` on an open atlas handle (not on a second handle of the file).

    Closing the Dataset closes the handle.
    """
    import xarray as xr

    ds = xr.open_dataset(xr.backends.NetCDF4DataStore(nc))
    ds.encoding.setdefault("source", nc.filepath())  # named when a damaged chunk is refused
    return ds


# ---- the checksum ------------------------------------------------------------------------------


def checksum(methods, read):
    """SHA-256 over an atlas's method names, coordinates and data variables.

    Parameters
    ----------
    methods : sequence of str
        The method names, in the order of the method axis.
    read : callable
        ``read(name)`` returns the array of ``name``, for ``n``, ``p`` and each of
        ``DATA_VARIABLES`` in turn.

    Returns
    -------
    str
        ``"sha256:<hex digest>"`` of the method names (UTF-8, one per line), then each array's
        name, dtype, shape and C-ordered bytes.
    """
    digest = hashlib.sha256()
    digest.update("\n".join(str(m) for m in methods).encode())
    for name in ("n", "p", *DATA_VARIABLES):
        values = np.ascontiguousarray(read(name))
        digest.update(f"|{name}|{values.dtype.str}|{values.shape}|".encode())
        digest.update(values.tobytes())
    return "sha256:" + digest.hexdigest()


def _where(path):
    return f"`path` {str(path)!r}" if path is not None else "the atlas"


def unreadable(err, path=None):
    """The ValueError for atlas values that cannot be read (a damaged HDF5 chunk)."""
    return ValueError(f"{_where(path)} is corrupt: its data cannot be read ({err}).")


def verify_digest(stored, actual, path=None):
    """Return ``actual`` if it equals the ``stored`` checksum, else raise ValueError.

    Raises
    ------
    ValueError
        If ``stored`` is None (no checksum attribute) or differs from ``actual``.
    """
    where = _where(path)
    if stored is None:
        raise ValueError(f"{where} has no checksum attribute to verify.")
    if actual != stored:
        raise ValueError(
            f"{where} is corrupt: its checksum does not match (stored {stored}, data {actual})."
        )
    return actual


def verify_file(nc, path=None):
    """Read every value of an open atlas file and compare its checksum with the stored one.

    ``nc`` is a handle from :func:`open_netcdf`; ``path``, the return value and the errors are
    those of :func:`atlas.cube.verify_checksum`, which does the same for a Dataset.
    """
    try:
        # One variable in memory at a time: the digest is fed as each is read.
        actual = checksum(method_names(nc), lambda name: nc.variables[name][:])
    except Exception as err:  # netCDF4 raises RuntimeError (HDF error) for a damaged chunk
        raise unreadable(err, path) from None
    stored = nc.getncattr("checksum") if "checksum" in nc.ncattrs() else None
    return verify_digest(stored, actual, path)


# ---- one open file per process -----------------------------------------------------------------


def _close_handles(handles):
    """Close an atlas file's Dataset (if built) and netCDF4 handle; safe to call twice."""
    ds, nc = handles.pop("ds", None), handles.pop("nc", None)
    if ds is not None:
        ds.close()
    if nc is not None and nc.isopen():
        nc.close()


class AtlasFile:
    """One atlas file open in this process: its netCDF4 handle, the Dataset built on that handle
    when asked for, and the objects (atlases) that hold it.

    The file is closed when the last holder is released (:func:`release`) or garbage collected.
    """

    def __init__(self, path):
        self.path = path
        self.nc = open_netcdf(path)
        self.ds = None
        self.holders = weakref.WeakSet()
        self._handles = {"nc": self.nc}
        self.close = weakref.finalize(self, _close_handles, self._handles)

    def isopen(self):
        return self.nc.isopen()

    def dataset(self):
        """The ``xarray.Dataset`` of the file, built on the open handle on first use."""
        if self.ds is None:
            self.ds = to_dataset(self.nc)
            self._handles["ds"] = self.ds
        return self.ds

    def methods(self):
        """The method names, a tuple of str."""
        return method_names(self.nc)

    def attrs(self):
        """The global attributes, a dict."""
        return {name: self.nc.getncattr(name) for name in self.nc.ncattrs()}

    def axes(self):
        """The stored n and p axes, as read."""
        return self.nc.variables["n"][:], self.nc.variables["p"][:]

    def read(self, name, index):
        """The (n, p) slice of variable ``name`` for the method at ``index``."""
        return np.asarray(self.nc.variables[name][index])

    def verify(self):
        """Compare the stored checksum with the values (see :func:`verify_file`)."""
        return verify_file(self.nc, self.path)


# (st_dev, st_ino, st_size, st_mtime_ns) -> AtlasFile, held by its holders only
_OPEN = weakref.WeakValueDictionary()
_OPEN_LOCK = threading.Lock()


def share(path, holder):
    """The open :class:`AtlasFile` of ``path`` (opened if no holder has it open), held by
    ``holder`` from now on.

    A file already open in this process (the same device, inode, size and modification time)
    is not opened again; a file replaced on disk is opened afresh.

    Raises
    ------
    FileNotFoundError, ValueError
        As :func:`open_netcdf`.
    """
    try:
        st = os.stat(path)
        key = (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns)
    except OSError:
        key = None
    with _OPEN_LOCK:
        entry = _OPEN.get(key)
        if entry is None or not entry.isopen():
            entry = AtlasFile(path)  # raises FileNotFoundError / ValueError
            _OPEN[key] = entry
        entry.holders.add(holder)
    return entry


def release(entry, holder):
    """Drop ``holder`` from the holders of ``entry``; close the file when none is left."""
    with _OPEN_LOCK:
        entry.holders.discard(holder)
        if len(entry.holders):
            return
        for key, value in list(_OPEN.items()):
            if value is entry:
                del _OPEN[key]
        entry.close()
