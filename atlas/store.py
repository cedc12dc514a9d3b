"""Atlas files on disk: the schema every reader checks, and the one fast reader.

An atlas file is NetCDF4 (HDF5) in the layout that :func:`atlas.cube.save_atlas` writes, of
schema version ``SCHEMA_VERSION``: dimensions ``approximation``, ``n`` and ``p``, the coordinate
variables of the same names, the data variables ``DATA_VARIABLES`` over (approximation, n, p)
and the global attribute ``atlas_schema``. Every index coordinate is strictly increasing: the
approximation names in code-point (alphabetical) order, n and p numerically, so that xarray's
``.sel(..., method="nearest")`` works on n and p. The names are stored as fixed-width
characters (dimensions ``approximation`` and ``approximation_strlen``); variable-length strings
are read too, both as Python str.

Beside the error atlas a file may hold two groups of variables, each over dimensions of its own
(:data:`GROUPS`): ``decisions`` (the tail relative error and the size of tests, over ``tail``,
``tail_level``, ``alternative``, ``test_level``, ``decision_n`` and ``decision_p``) and
``coverage`` (the coverage of confidence intervals for p, over ``interval``, ``level``,
``coverage_n`` and ``coverage_p``). A group is there whole or not at all; its index coordinates
are strictly increasing too (names in code-point order: ``tail``, ``alternative`` and
``interval`` are fixed-width characters, as ``approximation``).

Schema "1" called the first dimension ``method``, which is also the keyword of xarray's
``.sel()``; schema "2" had no accuracy variables (``interval_accuracy``, ``cdf_accuracy``);
schema "3" had no room for the decision and coverage groups. Files of these are refused with the
command that rebuilds them (:func:`rebuild_command`).

Everything here reads the file with netCDF4 directly and imports neither xarray nor pandas nor
dask (xarray imports dask while it decodes the name strings whenever dask is installed), so
that a command-line query starts fast. :func:`open_netcdf` refuses what is not an atlas of this
schema; :func:`atlas.cube.load_dataset` builds its ``xarray.Dataset`` on the handle it returns
(:func:`to_dataset`), and :func:`atlas.open_atlas` keeps one :class:`AtlasFile` per file.

One open file per process. :func:`share` opens each file once and hands the same
:class:`AtlasFile` to every Atlas of that file; it is closed when the last of them is closed or
garbage collected. With netCDF4 1.7.5, reading variable-length name strings through a second
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
    "APPROXIMATION",
    "APPROXIMATION_STRLEN",
    "CHECKSUM_RECIPE",
    "CHECKSUM_VARIABLES",
    "DATA_VARIABLES",
    "DIMENSIONS",
    "GROUPS",
    "NAME_INDEXES",
    "OLD_SCHEMAS",
    "SCHEMA_VERSION",
    "AtlasFile",
    "approximation_names",
    "check_axes",
    "check_groups",
    "checksum",
    "checksum_variables",
    "default_path",
    "groups_in",
    "open_netcdf",
    "rebuild_command",
    "release",
    "share",
    "to_dataset",
    "unreadable",
    "verify_digest",
    "verify_file",
]

SCHEMA_VERSION = "4"
#: What a file of this schema holds, for the message that refuses an older one.
SCHEMA_SUMMARY = (
    "with an accuracy beside every error, and room for the tail, test-size and coverage variables"
)
DATA_VARIABLES = (
    "interval_error",
    "cdf_error",
    "interval_lo",
    "interval_hi",
    "interval_accuracy",
    "cdf_accuracy",
)
#: What older schemas lacked, for the message that refuses them (with the rebuild command).
OLD_SCHEMAS = {
    "1": "dimension 'method', no accuracy variables",
    "2": "no interval_accuracy and cdf_accuracy variables",
    "3": "no room for the tail, test-size and coverage variables",
}
#: The dimension (and coordinate) of the approximation names.
APPROXIMATION = "approximation"
DIMENSIONS = (APPROXIMATION, "n", "p")
#: The character dimension of the fixed-width approximation names.
APPROXIMATION_STRLEN = "approximation_strlen"
#: Index coordinates of names (strings), stored as fixed-width characters over ``<name>_strlen``
#: and ordered by code point; every other index is numeric and strictly increasing.
NAME_INDEXES = (APPROXIMATION, "tail", "alternative", "interval")


class Group:
    """One optional group of variables of an atlas file: its index coordinates (in the order
    they enter the checksum), its variables with their dimensions, and its global attributes."""

    def __init__(self, indexes, variables, attributes):
        self.indexes = tuple(indexes)
        self.variables = dict(variables)
        self.attributes = tuple(attributes)

    def names(self):
        """Every variable of the group, indexes first: the order of the checksum."""
        return (*self.indexes, *self.variables)


_DECISION_CELL = ("decision_n", "decision_p")
_COVERAGE_CELL = ("interval", "level", "coverage_n", "coverage_p")
#: The optional groups: ``decisions`` (atlas.decision_cube) and ``coverage`` (atlas.coverage_cube).
GROUPS = {
    "decisions": Group(
        ("tail", "tail_level", "alternative", "test_level", *_DECISION_CELL),
        {
            "tail_error": (APPROXIMATION, "tail", "tail_level", *_DECISION_CELL),
            "test_size": (APPROXIMATION, "alternative", "test_level", *_DECISION_CELL),
            "exact_test_size": ("alternative", "test_level", *_DECISION_CELL),
        },
        ("decision_n_spec", "decision_p_spec", "decision_note"),
    ),
    "coverage": Group(
        _COVERAGE_CELL,
        {
            "p_cell_lo": ("coverage_p",),
            "p_cell_hi": ("coverage_p",),
            "coverage": _COVERAGE_CELL,
            "min_coverage": _COVERAGE_CELL,
            "expected_width": _COVERAGE_CELL,
        },
        ("coverage_n_spec", "coverage_p_spec", "coverage_p_cells", "coverage_note"),
    ),
}
#: The variables whose values enter the checksum of an atlas without groups, in order (the
#: attribute ``checksum_variables``; :func:`checksum_variables` adds those of each group).
CHECKSUM_VARIABLES = (APPROXIMATION, "n", "p", *DATA_VARIABLES)
#: How the checksum is computed, in words a reader in any language can follow (the attribute
#: ``checksum_recipe``; the README states it too).
CHECKSUM_RECIPE = (
    "SHA-256 over these bytes, in this order: for each variable named in checksum_variables, "
    "in that order, its values. A variable of names (characters: approximation, tail, "
    "alternative, interval) gives each name, in the order of its dimension, encoded in UTF-8 "
    "without padding and followed by one line feed byte (0x0A). Any other gives all its values "
    "as the raw little-endian bytes of the type stored in this file (int64 for n, decision_n, "
    "coverage_n, interval_lo and interval_hi; float64 for p, the levels, decision_p, "
    "coverage_p, p_cell_lo, p_cell_hi, exact_test_size, coverage, min_coverage and "
    "expected_width; float64, or float32 where error_precision says so, for interval_error and "
    "cdf_error; float32 for interval_accuracy, cdf_accuracy, tail_error and test_size), in C "
    "(row-major) order: the variable's last dimension varies fastest (Fortran, R and Julia "
    "readers, which list the dimensions reversed, take their arrays in native column-major "
    "order). Nothing else enters the digest: no variable names, separators, shapes or "
    "attributes. The checksum attribute is 'sha256:' followed by the digest in 64 lower-case "
    "hexadecimal digits."
)


def groups_in(names):
    """The groups (keys of :data:`GROUPS`) of which ``names`` holds any variable, in order."""
    names = set(names)
    return tuple(key for key, group in GROUPS.items() if names & set(group.variables))


def checksum_variables(groups=()):
    """The variables of the checksum of an atlas holding ``groups``, in order.

    Examples
    --------
    >>> checksum_variables(["coverage"])[-5:]
    ('p_cell_lo', 'p_cell_hi', 'coverage', 'min_coverage', 'expected_width')
    """
    names = list(CHECKSUM_VARIABLES)
    for key in GROUPS:
        if key in groups:
            names.extend(GROUPS[key].names())
    return tuple(names)


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
        has a data variable over other dimensions than (approximation, n, p), an index
        coordinate that is not strictly increasing, part of a group of :data:`GROUPS` only or a
        group variable over other dimensions than the schema's, or is of schema "1", "2" or
        "3" (the message gives the command that rebuilds it).
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
        nc.set_auto_mask(False)  # plain arrays: the atlas has no fill values
        _check_layout(nc, path)
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
    if schema in OLD_SCHEMAS:
        raise ValueError(
            f"`path` {str(path)!r} is an atlas of schema version {schema!r} "
            f"({OLD_SCHEMAS[schema]}), which this version of approx-atlas no longer reads (it "
            f"reads schema {SCHEMA_VERSION!r}, {SCHEMA_SUMMARY}); rebuild it with: "
            f"{rebuild_command(nc, path)}"
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
            f"`path` has atlas variables without the dimensions ({', '.join(DIMENSIONS)}): "
            f"{', '.join(odd)}: {str(path)!r}."
        )
    check_axes(
        {
            APPROXIMATION: approximation_names(nc),
            "n": np.asarray(nc.variables["n"][:]),
            "p": np.asarray(nc.variables["p"][:]),
        },
        f"`path` {str(path)!r}",
    )
    check_groups(
        {name: var.dimensions for name, var in nc.variables.items()},
        lambda name: _index_values(nc, name),
        f"`path` {str(path)!r}",
    )


def _index_values(nc, name):
    """The values of index ``name`` of an open file: names as a tuple of str, else an array."""
    return _names(nc, name) if name in NAME_INDEXES else np.asarray(nc.variables[name][:])


def check_groups(dims, read, where):
    """Refuse a group that is not whole, is over other dimensions, or has an unordered index.

    Parameters
    ----------
    dims : dict
        Variable name -> its dimensions (a tuple of str), for every variable present.
    read : callable
        ``read(name)`` returns the values of index coordinate ``name``.
    where : str
        What holds them, for the message.

    Returns
    -------
    tuple of str
        The groups present (keys of :data:`GROUPS`).

    Raises
    ------
    ValueError
        Naming what is missing, over other dimensions or out of order.
    """
    present = groups_in(dims)
    for key in present:
        group = GROUPS[key]
        missing = [name for name in group.names() if name not in dims]
        if missing:
            raise ValueError(
                f"{where} holds part of the {key} variables only: it lacks {', '.join(missing)}."
            )
        odd = [
            f"{name} ({', '.join(want)})"
            for name, want in group.variables.items()
            if tuple(dims[name]) != want
        ]
        if odd:
            raise ValueError(
                f"{where} has {key} variables without the dimensions of the schema: "
                f"{'; '.join(odd)}."
            )
        check_axes({name: read(name) for name in group.indexes}, where)
    return present


def check_axes(axes, where):
    """Refuse index coordinates that are not strictly increasing.

    Parameters
    ----------
    axes : dict
        ``{"approximation": names, "n": values, "p": values}`` (or any other indexes); names
        (:data:`NAME_INDEXES`) must be in strictly increasing code-point (alphabetical) order,
        which also rules out repeats; numbers strictly increasing.
    where : str
        What holds them, for the message (such as "`path` 'a.nc'" or "`ds`").

    Raises
    ------
    ValueError
        Naming the first coordinate that is empty or out of order.
    """
    for name, values in axes.items():
        if name in NAME_INDEXES:
            ordered = all(a < b for a, b in zip(values[:-1], values[1:], strict=True))
            rule = "in strictly increasing (alphabetical) order, without repeats"
        else:
            values = np.asarray(values)
            ordered = values.ndim == 1 and bool(np.all(values[1:] > values[:-1]))
            rule = "strictly increasing"
        if len(values) == 0 or not ordered:
            raise ValueError(f"{where} is not an atlas of this schema: its {name} coordinate "
                             f"must be non-empty and {rule}.")  # fmt: skip


def _quote(text):
    """``text`` in single quotes for a POSIX shell (a quote inside closed, escaped, reopened)."""
    return "'" + str(text).replace("'", "'\\''") + "'"


def rebuild_command(nc, path):
    """The ``approx-atlas build`` command that rebuilds an open atlas file of an older schema.

    Built from the file's own attributes (``n_spec``, ``p_spec``, ``error_precision``) and
    names; ``-o`` names ``path`` itself with ``--force``, which replaces the old file (atomically,
    only when the new one is complete). A file holding the decision or coverage group gets the
    options that rebuild it on its own grids and levels (``--decision-n``, ``--decision-p``,
    ``--tail-levels``, ``--test-levels``; ``--coverage-n``, ``--coverage-p``, ``--intervals``,
    ``--coverage-levels``), from its attributes and index coordinates.
    """

    def spec(attribute, variable):  # the stored spec, else the values themselves
        if attribute in nc.ncattrs():
            return str(nc.getncattr(attribute))
        return ",".join(repr(v.item()) for v in np.asarray(nc.variables[variable][:]))

    names = _names(nc, APPROXIMATION if APPROXIMATION in nc.variables else "method")
    precision = nc.getncattr("error_precision") if "error_precision" in nc.ncattrs() else ""
    words = [
        "approx-atlas build",
        f"--n {_quote(spec('n_spec', 'n'))}",
        f"--p {_quote(spec('p_spec', 'p'))}",
        f"--methods {_quote(','.join(names))}",
        f"-o {_quote(path)} --force",
    ]
    if str(precision).startswith("float32"):
        words.append("--float32")
    present = groups_in(nc.variables)

    def levels(name):
        return ",".join(repr(float(v)) for v in np.asarray(nc.variables[name][:]))

    if "decisions" in present:
        words += [
            f"--decision-n {_quote(spec('decision_n_spec', 'decision_n'))}",
            f"--decision-p {_quote(spec('decision_p_spec', 'decision_p'))}",
            f"--tail-levels {_quote(levels('tail_level'))}",
            f"--test-levels {_quote(levels('test_level'))}",
        ]
    if "coverage" in present:
        words += [
            f"--coverage-n {_quote(spec('coverage_n_spec', 'coverage_n'))}",
            f"--coverage-p {_quote(spec('coverage_p_spec', 'coverage_p'))}",
            f"--intervals {_quote(','.join(_names(nc, 'interval')))}",
            f"--coverage-levels {_quote(levels('level'))}",
        ]
    return " ".join(words)


def approximation_names(nc):
    """The approximation names of an open atlas file, as a tuple of str.

    Fixed-width characters (approximation, approximation_strlen) are joined and decoded here,
    whatever netCDF4's automatic conversion is set to (xarray turns it off on the handles it
    reads); variable-length strings arrive as str already.
    """
    return _names(nc, APPROXIMATION)


def _names(nc, name):
    """The strings of variable ``name``: fixed-width characters or variable-length strings."""
    var = nc.variables[name]
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


def checksum(read, variables=CHECKSUM_VARIABLES):
    """SHA-256 over an atlas's names, coordinates and data variables.

    Parameters
    ----------
    read : callable
        ``read(name)`` returns the values of ``name``, for each of ``variables`` in turn (one
        at a time: only one is held in memory): the strings of a variable of names
        (:data:`NAME_INDEXES`), the array of any other.
    variables : sequence of str, optional
        The variables, in order (:func:`checksum_variables`); default an atlas without groups.

    Returns
    -------
    str
        ``"sha256:<hex digest>"``, computed as :data:`CHECKSUM_RECIPE` says: each name in UTF-8
        followed by a line feed, each other variable's values as raw little-endian bytes of
        their type, in C order. No Python-specific text (dtype strings, printed shapes) enters,
        so a reader in any language can recompute it.

    Examples
    --------
    >>> import numpy as np
    >>> arrays = {"approximation": ["normal_cc"], "n": np.array([10]), "p": np.array([0.5])}
    >>> arrays.update({v: np.zeros((1, 1, 1)) for v in DATA_VARIABLES})
    >>> import hashlib, struct
    >>> raw = b"normal_cc\\n" + struct.pack("<qd", 10, 0.5) + bytes(6 * 8)  # then six 0.0
    >>> checksum(arrays.__getitem__) == "sha256:" + hashlib.sha256(raw).hexdigest()
    True
    """
    digest = hashlib.sha256()
    for name in variables:
        if name in NAME_INDEXES:
            for text in read(name):
                digest.update(str(text).encode("utf-8") + b"\n")
            continue
        values = np.asarray(read(name))
        # Little-endian whatever the machine: the recipe fixes the byte order.
        values = np.ascontiguousarray(values, dtype=values.dtype.newbyteorder("<"))
        digest.update(memoryview(values).cast("B"))
    return "sha256:" + digest.hexdigest()


def _where(path):
    return f"`path` {str(path)!r}" if path is not None else "the atlas"


def unreadable(err, path=None):
    """The ValueError for atlas values that cannot be read (a damaged HDF5 chunk)."""
    return ValueError(f"{_where(path)} is corrupt: its data cannot be read ({err}).")


def verify_digest(stored, actual, path=None, variables=None, expected=CHECKSUM_VARIABLES):
    """Return ``actual`` if it equals the ``stored`` checksum, else raise ValueError.

    ``variables`` is the file's ``checksum_variables`` attribute: the checksum is verified only
    over the variables this schema puts in it for the groups the file holds, ``expected`` (a
    shorter list would leave values unchecked).

    Raises
    ------
    ValueError
        If ``stored`` is None (no checksum attribute), ``variables`` is not the schema's list,
        or ``stored`` differs from ``actual``.
    """
    where = _where(path)
    if stored is None:
        raise ValueError(f"{where} has no checksum attribute to verify.")
    expected = " ".join(expected)
    if variables != expected:
        raise ValueError(
            f"{where} is corrupt: its checksum_variables attribute must be {expected!r}; "
            f"got {variables!r}."
        )
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
    expected = checksum_variables(groups_in(nc.variables))
    try:
        # One variable in memory at a time: the digest is fed as each is read.
        actual = checksum(lambda name: _index_values(nc, name), expected)
    except Exception as err:  # netCDF4 raises RuntimeError (HDF error) for a damaged chunk
        raise unreadable(err, path) from None
    attrs = {name: nc.getncattr(name) for name in ("checksum", "checksum_variables")
             if name in nc.ncattrs()}  # fmt: skip
    return verify_digest(
        attrs.get("checksum"), actual, path, attrs.get("checksum_variables"), expected
    )


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
        self.identity = None  # (device, inode, size, modification time), set by share()
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

    def approximations(self):
        """The approximation names, a tuple of str, in the file's (alphabetical) order."""
        return approximation_names(self.nc)

    def attrs(self):
        """The global attributes, a dict."""
        return {name: self.nc.getncattr(name) for name in self.nc.ncattrs()}

    def axes(self):
        """The stored n and p axes, as read."""
        return self.nc.variables["n"][:], self.nc.variables["p"][:]

    def read(self, name, index):
        """The (n, p) slice of variable ``name`` for the approximation at ``index``."""
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
            entry.identity = key
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
