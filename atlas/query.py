"""The Atlas object: answers from the cube, computed exactly where the cube has no cell.

A cell (n, p) is read from the cube when n is a value of the atlas's n axis, p equals a value of
its p axis exactly (float equality, no tolerance) and the method is one the atlas stores. Every
other cell is computed exactly by :mod:`atlas.engine`. Nothing is ever interpolated, and every
answer that matters to a decision says which of the two it came from.

The error variables are read from the file one method at a time, on first use, and kept in
memory; they are returned as float64 whether the file stores float64 or float32 (the compact
embedded atlas: attribute ``error_precision``, 7 significant digits).

Reading a file. :func:`open_atlas` reads the file through :mod:`atlas.store`, with netCDF4
directly, and builds the ``xarray.Dataset`` only when :attr:`Atlas.dataset` is first used, so
that a command-line query imports neither xarray nor pandas nor dask. Each file is opened once
per process (:func:`atlas.store.share`): the one handle, and the Dataset built on it, is shared
by every Atlas of the file and closed when the last of them is closed or garbage collected.
"""

import collections
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import NamedTuple

import numpy as np

from atlas import store
from atlas.approximations import METHODS, check_method
from atlas.engine import (
    WorstError,
    check_metric,
    check_n,
    check_p,
    evaluate,
    evaluate_cells,
    is_resolved,
)
from atlas.notation import error_digits, format_bound, format_p, format_value
from atlas.thresholds import minimum_n, minimum_n_over

__all__ = ["Atlas", "Ranked", "Verdict", "check_tol", "open_atlas", "tie_groups"]

_VARIABLES = {"interval": "interval_error", "cdf": "cdf_error"}
_ACCURACIES = {"interval": "interval_accuracy", "cdf": "cdf_accuracy"}


def _show(value):
    """Format a bad value for an error message: 0, nan, 'x'."""
    if isinstance(value, np.generic):
        value = value.item()
    return repr(value)


def check_tol(tol):
    """Return ``tol`` as a float64 array, or raise ValueError unless every value is in (0, inf).

    Examples
    --------
    >>> float(check_tol(0.01))
    0.01
    >>> check_tol(0)
    Traceback (most recent call last):
    ...
    ValueError: `tol` must be a positive finite number; got 0.
    """
    arr = np.asarray(tol)
    if arr.dtype == bool or arr.dtype.kind not in "iuf":
        raise ValueError(f"`tol` must be a positive finite number; got {_show(tol)}.")
    values = arr.astype(np.float64)
    bad = ~(np.isfinite(values) & (values > 0))
    if bad.any():
        raise ValueError(f"`tol` must be a positive finite number; got {_show(arr[bad][0])}.")
    return values


def _scalar(arr, name, what):
    """Refuse an array where one value is wanted (is_safe, min_n, best_method)."""
    if arr.ndim != 0:
        raise ValueError(f"`{name}` must be a single {what} here; got shape {arr.shape}.")
    return arr.item()


def _point(n, p):
    """One checked (n, p): an integer n >= 1 and a p in (0, 1), as Python numbers."""
    return _scalar(check_n(n), "n", "integer"), _scalar(check_p(p), "p", "number")


def _one_tol(tol):
    """One checked tolerance, as a float."""
    return float(_scalar(check_tol(tol), "tol", "number"))


def _question(tol, method, metric):
    """One checked tolerance, method and metric (checked in that order)."""
    tol_value = _one_tol(tol)
    check_metric(metric)
    return tol_value, check_method(method)


def _fmt(x):
    """A number for people: three significant digits."""
    return f"{x:.3g}"


def describe_error(error, accuracy, digits=17):
    """An error for people, with its accuracy, or "below the resolution" when unresolved.

    Parameters
    ----------
    error, accuracy : float
        A worst-case error and the bound on its absolute error.
    digits : int, optional
        The significant digits the value is stored with (7 for float32, 17 for float64).

    Returns
    -------
    str
        ``"0.04006 (accuracy 3e-15)"``: the error with no more digits than it has (at most 4,
        none below the accuracy's leading digit) and the accuracy rounded up; or, when the
        error is not above ``RESOLUTION_FACTOR`` times its accuracy,
        ``"below the resolution of the exact side (< 2e-15)"`` with error + accuracy rounded
        up, the most the true value can be. Without an accuracy (0), the error alone.

    Examples
    --------
    >>> describe_error(0.04006076604127884, 3e-15)
    '0.04006 (accuracy 3e-15)'
    >>> describe_error(1.1e-15, 6e-16)
    'below the resolution of the exact side (< 1.7e-15)'
    """
    if not accuracy > 0.0:  # no accuracy known (a Verdict made by hand): the number alone
        return f"{error:.{min(4, digits)}g}"
    if not is_resolved(error, accuracy):
        return f"below the resolution of the exact side (< {format_bound(error + accuracy)})"
    shown = format_value(error, accuracy, digits=min(4, digits))
    return f"{shown} (accuracy {format_bound(accuracy, digits=1)})"


@dataclass(frozen=True)
class Verdict:
    """The answer to "is the approximation within ``tol`` at (n, p)?".

    Attributes
    ----------
    safe : bool
        ``error + accuracy <= tol``: conservative, safe only when the largest value the true
        error can have is within ``tol``.
    error : float
        The exact worst-case error of ``method`` under ``metric`` at (n, p), as computed or
        stored.
    tol : float
        The tolerance asked for.
    margin : float
        ``tol - (error + accuracy)``: positive or zero when safe, negative by how much the
        largest possible error exceeds ``tol``.
    method, metric : str
        What was measured.
    n : int
    p : float
    worst_interval : tuple of int
        ``(a, b)``: an interval P(a <= X <= b) whose approximation errs by the interval error
        (the interval metric's worst case, reported under either metric).
    source : {"atlas", "computed"}
        ``"atlas"``: a stored cell of the cube; ``"computed"``: computed exactly by the engine
        because (n, p) is not a grid cell or the method is not stored.
    accuracy : float
        A bound on |error - true error|: the cube's ``interval_accuracy`` or ``cdf_accuracy``
        for a stored cell (float32 rounding included), the engine's for a computed one.
    resolved : bool
        ``error > 3 * accuracy`` (:func:`atlas.is_resolved`); when False the error is below the
        resolution of the exact side and only ``error + accuracy`` bounds it.
    """

    safe: bool
    error: float
    tol: float
    margin: float
    method: str
    metric: str
    n: int
    p: float
    worst_interval: tuple
    source: str
    accuracy: float = 0.0
    resolved: bool = True

    def explain(self, digits=17):
        """One line for people.

        Parameters
        ----------
        digits : int, optional
            The significant digits the error is stored with (the atlas's ``error_digits`` for
            a stored cell); the error is shown with at most 4, and none below its accuracy.

        Examples
        --------
        >>> Verdict(False, 0.0244, 0.01, -0.0144, "normal_cc", "interval", 50, 0.1, (2, 6),
        ...         "atlas", 3e-15, True).explain()
        'n=50, p=0.1: normal_cc interval error 0.0244 (accuracy 3e-15) <= tol 0.01? no (margin -0.0144); worst interval [2, 6]; from the atlas'

        n and p are written so that they read back as the same numbers (p = 0.9999999 is not
        written as 1); the margin to three significant digits. An error not above 3 times its
        accuracy is written "below the resolution of the exact side (< X)", X = error +
        accuracy rounded up.
        """  # noqa: E501 - a doctest's output line cannot be wrapped
        a, b = self.worst_interval
        where = "from the atlas" if self.source == "atlas" else "computed exactly (no atlas cell)"
        return (
            f"n={self.n}, p={format_p(self.p)}: {self.method} {self.metric} error "
            f"{describe_error(self.error, self.accuracy, digits)} <= tol {format_p(self.tol)}? "
            f"{'yes' if self.safe else 'no'} (margin {_fmt(self.margin)}); worst interval "
            f"[{a}, {b}]; {where}"
        )


class Ranked(NamedTuple):
    """One method of a ranking (:meth:`Atlas.best_method` with ``return_accuracy=True``).

    Attributes
    ----------
    method : str
    error, accuracy : float
        The error and the bound on its absolute error.
    rank : int
        1 + the number of methods ranked strictly better: tied methods share a rank
        (1, 1, 3, ...).
    tied_with : tuple of str
        The other methods of its tie group, in ranking order.
    """

    method: str
    error: float
    accuracy: float
    rank: int
    tied_with: tuple


def tie_groups(errors, accuracies):
    """Group errors sorted in ranking order into ties.

    Two neighbours in the order are tied when their errors differ by no more than the sum of
    their accuracies (neither can be said to be smaller); a group is a run of such neighbours.

    Parameters
    ----------
    errors, accuracies : sequence of float
        In ranking order (errors non-decreasing).

    Returns
    -------
    list of int
        The rank of each entry: 1 + the index of the first entry of its group.

    Examples
    --------
    >>> tie_groups([1e-15, 2e-15, 0.01], [2e-15, 2e-15, 1e-15])
    [1, 1, 3]
    """
    ranks = []
    for k, (error, accuracy) in enumerate(zip(errors, accuracies, strict=True)):
        tied = k > 0 and error - errors[k - 1] <= accuracy + accuracies[k - 1]
        ranks.append(ranks[-1] if tied else k + 1)
    return ranks


class Atlas:
    """An opened atlas: its Dataset and the questions asked of it.

    Parameters
    ----------
    dataset : xarray.Dataset
        An atlas Dataset (see :mod:`atlas.cube`), opened lazily from a file or in memory.
    path : pathlib.Path, optional
        The file it came from.

    Attributes
    ----------
    dataset : xarray.Dataset
    path : pathlib.Path or None

    Notes
    -----
    For X ~ Bin(n, p), F its CDF and G an approximation, D(k) = F(k) - G(k) on k = -1..n. The
    ``interval`` metric is max D - min D, the largest error of any P(a <= X <= b); the ``cdf``
    metric is max over k = 0..n of |D(k)|. Cells off the grid are computed exactly by
    :func:`atlas.engine.evaluate`; none is interpolated.

    Examples
    --------
    >>> from atlas import build_atlas
    >>> at = Atlas(build_atlas(n="1:40", p="0.1,0.5", methods="normal_cc,edgeworth_cc",
    ...                        progress=False))
    >>> round(at.error(10, 0.5), 6)
    0.005372
    >>> at.is_safe(10, 0.5, 0.01).safe
    True
    """

    def __init__(self, dataset, path=None):
        self._dataset = dataset
        self.path = path
        self._cache = {}
        self._file = None  # the shared atlas.store.AtlasFile when opened by open_atlas

    @property
    def dataset(self):
        """The atlas as an ``xarray.Dataset`` (built on the open file on first use)."""
        if self._dataset is None:
            self._dataset = self._file.dataset()
        return self._dataset

    @property
    def methods(self):
        """The methods held in the atlas, a tuple of str in the order the file stores them
        (alphabetical, along the Dataset's ``approximation`` dimension)."""
        methods = self._cache.get("methods")
        if methods is None:
            if self._file is not None:
                methods = self._file.approximations()
            else:
                methods = tuple(str(m) for m in np.ravel(self.dataset["approximation"].values))
            self._cache["methods"] = methods
        return methods

    @property
    def attrs(self):
        """The global attributes of the atlas (title, history, comment, checksum, ...)."""
        if self._file is not None and self._dataset is None:
            return self._file.attrs()
        return dict(self.dataset.attrs)

    @property
    def error_digits(self):
        """The significant digits the atlas holds of each error: 7 if stored as float32 (the
        attribute ``error_precision``), 17 (any float64, exactly) otherwise.

        Errors are returned as float64 either way; print them with these digits.
        """
        digits = self._cache.get("error_digits")
        if digits is None:
            precision = self.attrs.get("error_precision")
            if precision is None:  # a file without the attribute: the variable's own dtype
                if self._file is not None:
                    precision = self._file.nc.variables["interval_error"].dtype
                else:
                    precision = self.dataset["interval_error"].dtype
            digits = self._cache["error_digits"] = error_digits(precision)
        return digits

    @property
    def n(self):
        """The n axis, a read-only int64 array."""
        return self._axes()[0]

    @property
    def p(self):
        """The p axis, a read-only float64 array."""
        return self._axes()[1]

    @property
    def dense_n(self):
        """The largest grid n up to which the grid holds every integer from its first n.

        1..2000 in the default atlas. (:meth:`min_n` is exact for every integer n everywhere;
        beyond this n it evaluates or bounds the integers between grid n, see
        :mod:`atlas.thresholds`.)
        """
        n_axis = self.n
        steps = np.flatnonzero(np.diff(n_axis) != 1)
        return int(n_axis[steps[0]] if steps.size else n_axis[-1])

    def __repr__(self):
        where = f" from {str(self.path)!r}" if self.path is not None else ""
        sizes = f"{self.n.size} n x {self.p.size} p x {len(self.methods)} methods"
        return f"<Atlas{where}: {sizes}>"

    def close(self):
        """Close the file behind the atlas (values already read stay available).

        An atlas from :func:`open_atlas` shares its open file with the other atlases of the same
        file; the file is closed when the last of them is closed or garbage collected.
        """
        if self._file is None:
            self.dataset.close()
        else:
            store.release(self._file, self)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # --- reading the cube -------------------------------------------------------------------

    def _axes(self):
        axes = self._cache.get("axes")
        if axes is None:
            if self._file is not None:
                n_values, p_values = self._file.axes()
            else:
                n_values, p_values = self.dataset["n"].values, self.dataset["p"].values
            n_axis = np.array(n_values, dtype=np.int64)
            p_axis = np.array(p_values, dtype=np.float64)
            n_axis.flags.writeable = False
            p_axis.flags.writeable = False
            axes = self._cache["axes"] = (n_axis, p_axis)
        return axes

    def _stored(self, name, method):
        """The (n, p) slice of one variable for one stored method, read once and kept."""
        key = (name, method)
        values = self._cache.get(key)
        if values is None:
            index = self.methods.index(method)
            if self._file is not None and not self._file.isopen():
                raise ValueError(f"the atlas file is closed: {str(self.path)!r}.")
            try:
                if self._file is not None:
                    values = self._file.read(name, index)
                else:
                    values = np.asarray(self.dataset[name].isel(approximation=index).values)
            except Exception as err:  # netCDF4/HDF5 raise RuntimeError or OSError on a bad chunk
                where = f"{str(self.path)!r}" if self.path is not None else "the Dataset"
                raise ValueError(
                    f"the atlas is corrupt: {name} of {method} cannot be read from {where} "
                    f"({type(err).__name__}: {err})."
                ) from None
            self._cache[key] = values
        return values

    def _locate(self, n, p):
        """Grid indices of flat n and p, and the mask of cells that are exactly on the grid."""
        n_axis, p_axis = self._axes()
        i = np.minimum(np.searchsorted(n_axis, n), n_axis.size - 1)
        j = np.minimum(np.searchsorted(p_axis, p), p_axis.size - 1)
        return (n_axis[i] == n) & (p_axis[j] == p), i, j

    def _cells(self, n, p, method, metric, *, bounds=False):
        """Errors, their accuracies (and worst intervals) at broadcast n and p, and the mask of
        cube cells: ``(values, accuracy, hit[, lo, hi])``."""
        n_arr, p_arr = check_n(n), check_p(p)
        check_metric(metric)
        method = check_method(method)
        n_b, p_b = np.broadcast_arrays(n_arr, p_arr)
        shape = n_b.shape
        n_flat, p_flat = n_b.ravel(), p_b.ravel()
        stored = method in self.methods
        if stored:
            hit, i, j = self._locate(n_flat, p_flat)
        else:
            hit = np.zeros(n_flat.size, dtype=bool)
        variable = _VARIABLES[metric]
        values, accuracy = np.empty(n_flat.size), np.empty(n_flat.size)
        lo, hi = np.empty(n_flat.size, np.int64), np.empty(n_flat.size, np.int64)
        if hit.any():
            ih, jh = i[hit], j[hit]
            values[hit] = self._stored(variable, method)[ih, jh]
            accuracy[hit] = self._stored(_ACCURACIES[metric], method)[ih, jh]
            if bounds:
                lo[hit] = self._stored("interval_lo", method)[ih, jh]
                hi[hit] = self._stored("interval_hi", method)[ih, jh]
        miss = ~hit
        if miss.any():
            interval, cdf, lo[miss], hi[miss], interval_acc, cdf_acc = evaluate_cells(
                n_flat[miss], p_flat[miss].astype(np.float64), method, accuracy=True
            )
            values[miss] = interval if metric == "interval" else cdf
            accuracy[miss] = interval_acc if metric == "interval" else cdf_acc
        out = (values.reshape(shape), accuracy.reshape(shape), hit.reshape(shape))
        if bounds:
            out += (lo.reshape(shape), hi.reshape(shape))
        return out

    def _columns(self, start, stop, p_values, method, metric, *, accuracy=False):
        """Errors at grid n[start:stop] for the given p: from the cube when p and method are
        stored, else computed by the engine. Shape (stop - start, len(p_values)); with
        ``accuracy``, the pair (errors, their accuracies)."""
        n_axis, p_axis = self._axes()
        if method in self.methods:
            j = np.searchsorted(p_axis, p_values).clip(0, p_axis.size - 1)
            if np.all(p_axis[j] == p_values):
                values = self._stored(_VARIABLES[metric], method)[start:stop][:, j]
                if not accuracy:
                    return values.astype(np.float64)
                acc = self._stored(_ACCURACIES[metric], method)[start:stop][:, j]
                return values.astype(np.float64), acc.astype(np.float64)
        out = np.empty((stop - start, p_values.size))
        acc = np.empty((stop - start, p_values.size))
        for row, value in enumerate(n_axis[start:stop]):
            ev = evaluate(int(value), p_values, methods=(method,))
            interval = metric == "interval"
            out[row] = ev.interval[0] if interval else ev.cdf[0]
            acc[row] = ev.interval_accuracy[0] if interval else ev.cdf_accuracy[0]
        return (out, acc) if accuracy else out

    # --- the questions ------------------------------------------------------------------------

    def on_grid(self, n=None, p=None, *, method="normal_cc"):
        """Whether answers at (n, p) come from the cube rather than the engine.

        Parameters
        ----------
        n : int or array_like of int, optional
            Number of trials; omitted, only ``p`` is checked (as for :meth:`min_n`).
        p : float or array_like of float, optional
            Success probability; omitted, only ``n`` is checked.
        method : str, optional
            A method of :data:`atlas.METHODS`; one the atlas does not store is never on the grid.

        Returns
        -------
        bool or numpy.ndarray of bool
            True where n is on the n axis and p equals a value of the p axis exactly.

        Raises
        ------
        ValueError
            For a bad n, p or method.
        """
        method = check_method(method)
        n_axis, p_axis = self._axes()
        n_arr = None if n is None else check_n(n)
        p_arr = None if p is None else check_p(p)
        hit = np.asarray(method in self.methods)
        if n_arr is not None:
            hit = hit & np.isin(n_arr, n_axis)
        if p_arr is not None:
            hit = hit & np.isin(p_arr, p_axis)
        return bool(hit) if hit.ndim == 0 else hit

    def select_p(self, p_lo, p_hi):
        """The grid p in the closed interval [p_lo, p_hi].

        Parameters
        ----------
        p_lo, p_hi : float
            ``0 < p_lo <= p_hi < 1``.

        Returns
        -------
        numpy.ndarray
            The p of the atlas grid with p_lo <= p <= p_hi, at least one.

        Raises
        ------
        ValueError
            For p outside (0, 1), p_lo > p_hi, or an interval that holds no grid p.
        """
        lo = _scalar(check_p(p_lo), "p_lo", "number")
        hi = _scalar(check_p(p_hi), "p_hi", "number")
        if lo > hi:
            raise ValueError(f"`p_lo` must be <= `p_hi`; got p_lo={lo!r} > p_hi={hi!r}.")
        p_axis = self.p
        chosen = p_axis[(p_axis >= lo) & (p_axis <= hi)]
        if chosen.size == 0:
            first, last = format_p(p_axis[0]), format_p(p_axis[-1])
            grid = (f"the grid's one p is {first}" if p_axis.size == 1 else
                    f"the grid's {p_axis.size} values of p run from {first} to {last}")  # fmt: skip
            raise ValueError(
                f"[`p_lo`, `p_hi`] must hold a p of the atlas grid; got [{lo!r}, {hi!r}], and "
                f"{grid}."
            )
        return chosen

    def error(self, n, p, *, method="normal_cc", metric="interval", return_accuracy=False):
        """Exact worst-case error at broadcast n and p: from the cube on the grid, else computed.

        Parameters
        ----------
        n : int or array_like of int
            Number of trials, n >= 1.
        p : float or array_like of float
            Success probability, 0 < p < 1; broadcast against ``n``.
        method : str, optional
            One of :data:`atlas.METHODS`, default ``"normal_cc"``. A method the atlas does not
            store is computed by the engine.
        metric : {"interval", "cdf"}, optional
            ``"interval"`` (default): the largest error of any P(a <= X <= b); ``"cdf"``: of
            any P(X <= k).
        return_accuracy : bool, optional
            Return an :class:`atlas.WorstError` ``(error, accuracy)`` instead of the error
            alone, as :func:`atlas.worst_error` does.

        Returns
        -------
        float or numpy.ndarray or atlas.WorstError
            A float for scalar n and p, else a float64 array of the broadcast shape. With
            ``return_accuracy``, the pair (error, accuracy) of such values: ``accuracy`` bounds
            |error - true error|, read from the cube's ``interval_accuracy`` or
            ``cdf_accuracy`` for a stored cell (float32 rounding included) and the engine's
            for a computed one; :func:`atlas.is_resolved` says whether the error is meaningful
            as a number.

        Raises
        ------
        ValueError
            If n is not an integer >= 1, p is outside (0, 1), or method or metric is unknown.

        Notes
        -----
        A cell is read from the cube when n is on the n axis and p equals a p of the axis
        exactly; every other cell is computed exactly by :func:`atlas.engine.evaluate`, grouped
        by n. With D(k) = F(k) - G(k), k = -1..n: interval = max D - min D,
        cdf = max over k = 0..n of |D(k)|.

        Examples
        --------
        >>> from atlas import build_atlas
        >>> at = Atlas(build_atlas(n="10,20", p="0.5", methods="normal_cc", progress=False))
        >>> round(at.error(10, 0.5), 6), round(at.error(11, 0.5), 6)  # a cube cell, a computed one
        (0.005372, 0.005011)
        >>> error, accuracy = at.error(10, 0.5, return_accuracy=True)
        >>> accuracy < 1e-14
        True
        """
        values, accuracy, _ = self._cells(n, p, method, metric)
        if values.ndim == 0:
            values, accuracy = float(values), float(accuracy)
        return WorstError(values, accuracy) if return_accuracy else values

    def safe(self, n, p, tol, *, method="normal_cc", metric="interval"):
        """Whether the error is within ``tol``, vectorised over n, p and tol.

        Parameters
        ----------
        n, p, method, metric
            As for :meth:`error`.
        tol : float or array_like of float
            Tolerance, 0 < tol < inf, broadcast against n and p.

        Returns
        -------
        bool or numpy.ndarray of bool
            ``error(n, p) + accuracy <= tol``: conservative, as :attr:`Verdict.safe`.

        Raises
        ------
        ValueError
            As for :meth:`error`, or for a tol that is not positive and finite.
        """
        tol = check_tol(tol)
        values, accuracy, _ = self._cells(n, p, method, metric)
        out = values + accuracy <= tol
        return bool(out) if out.ndim == 0 else out

    def is_safe(self, n, p, tol, *, method="normal_cc", metric="interval"):
        """The verdict at one (n, p): the error, the margin, the worst interval and the source.

        Parameters
        ----------
        n : int
            Number of trials, n >= 1.
        p : float
            Success probability, 0 < p < 1.
        tol : float
            Tolerance, 0 < tol < inf.
        method, metric : str, optional
            As for :meth:`error`.

        Returns
        -------
        Verdict
            ``safe`` is ``error + accuracy <= tol`` (conservative); ``margin`` is
            ``tol - (error + accuracy)``; ``resolved`` says whether the error is above 3 times
            its accuracy.

        Raises
        ------
        ValueError
            As for :meth:`error`; for a tol that is not positive and finite; for arrays (use
            :meth:`safe`).

        Examples
        --------
        >>> from atlas import build_atlas
        >>> at = Atlas(build_atlas(n="10,20", p="0.5", methods="normal_cc", progress=False))
        >>> v = at.is_safe(10, 0.5, 0.005)
        >>> v.safe, round(v.error, 6), v.worst_interval, v.source, v.resolved
        (False, 0.005372, (2, 8), 'atlas', True)
        """
        n_value, p_value = _point(n, p)
        tol_value = _one_tol(tol)
        values, accuracy, hit, lo, hi = self._cells(n_value, p_value, method, metric, bounds=True)
        error, accuracy = float(values), float(accuracy)
        return Verdict(
            safe=bool(error + accuracy <= tol_value),
            error=error,
            tol=tol_value,
            margin=tol_value - (error + accuracy),
            method=method,
            metric=metric,
            n=int(n_value),
            p=float(p_value),
            worst_interval=(int(lo), int(hi)),
            source="atlas" if bool(hit) else "computed",
            accuracy=accuracy,
            resolved=is_resolved(error, accuracy),
        )

    def min_n(self, p, tol, *, method="normal_cc", metric="interval"):
        """The smallest N such that the error is within ``tol`` at every integer n >= N.

        Parameters
        ----------
        p : float
            Success probability, 0 < p < 1. Off the p axis, the column is computed by the engine
            over the same n grid.
        tol : float
            Tolerance, 0 < tol < inf.
        method, metric : str, optional
            As for :meth:`error`.

        Returns
        -------
        int or None
            N, or None if the error at the largest n examined exceeds ``tol``. What the answer
            rests on (and how far it reaches) is in :meth:`threshold`.

        Raises
        ------
        ValueError
            As for :meth:`error`, or for a tol that is not positive and finite.

        Notes
        -----
        Exact for every integer, not only grid n (:mod:`atlas.thresholds`): grid values show
        where to look; the engine evaluates the integers where the error can still cross
        ``tol``; a proven bound on how fast the error can grow from one n to the next covers
        the integers between; beyond the atlas's end a Berry-Esseen bound (Shevtsova 2011)
        covers every larger n, after stepping beyond the end where needed. For
        ``camp_paulson`` and ``peizer_pratt`` no step bound is known at large sigma, and the
        answer covers only the n evaluated there (:attr:`Threshold.exact` is then False).

        Examples
        --------
        >>> from atlas import build_atlas
        >>> at = Atlas(build_atlas(n="1:40", p="0.5", methods="normal_cc", progress=False))
        >>> at.min_n(0.5, 0.01)  # W(5, 1/2) = 0.01114 > 0.01 >= W(n, 1/2) for every n >= 6
        6
        """
        return self.threshold(p, tol, method=method, metric=metric, runs=False).n

    def threshold(self, p, tol, *, method="normal_cc", metric="interval", runs=True):
        """The minimum n at p with its basis: :class:`atlas.thresholds.Threshold`.

        Parameters
        ----------
        p, tol, method, metric
            As for :meth:`min_n`.
        runs : bool, optional
            Also find the exact ends of the stretches within ``tol`` below N (default True).

        Returns
        -------
        atlas.thresholds.Threshold
            ``n`` (as :meth:`min_n`), ``upto``, ``exact``, ``failing``, ``runs``, ``basis()``
            and ``describe_runs()``.

        Raises
        ------
        ValueError
            As for :meth:`min_n`.
        """
        p_value = float(_scalar(check_p(p), "p", "number"))
        tol_value, method = _question(tol, method, metric)
        key = ("threshold", p_value, tol_value, method, metric, bool(runs))
        answer = self._cache.get(key)  # answers are kept: tables, sheets and wiki ask again
        shared = _file_answers(self._file)
        if answer is None and shared is not None:
            answer = shared.get(key)
        if answer is None:
            n_axis, _ = self._axes()
            values, accuracy = self._columns(0, n_axis.size, np.array([p_value]), method, metric,
                                             accuracy=True)  # fmt: skip
            answer = minimum_n(n_axis, values[:, 0], p_value, tol_value, method=method,
                               metric=metric, runs=runs, accuracy=accuracy[:, 0])  # fmt: skip
        self._cache[key] = answer
        if shared is not None:
            shared[key] = answer
        return answer

    def min_n_over(self, p_lo, p_hi, tol, *, method="normal_cc", metric="interval"):
        """The smallest N such that the error is within ``tol`` at every integer n >= N, for
        every p in [p_lo, p_hi].

        Parameters
        ----------
        p_lo, p_hi : float
            The closed interval of p, ``0 < p_lo <= p_hi < 1``; it must hold a grid p.
        tol, method, metric
            As for :meth:`min_n`.

        Returns
        -------
        int or None
            The largest per-p answer over the p checked; None if some p has none. What was
            checked is in :meth:`threshold_over`.

        Raises
        ------
        ValueError
            For bad p, p_lo > p_hi, an interval holding no grid p, or a bad tol, method, metric.

        Notes
        -----
        The p checked are the grid p in the interval, both ends, and midpoints in log-odds
        added where a p between two checked ones could come out largest: next to the p of the
        largest answer, and between neighbours whose answers both come within 2 per cent of it
        (:func:`atlas.thresholds.minimum_n_over`). Each is exact for every integer n as
        :meth:`min_n` is; the p between those checked are not computed.
        """
        return self.threshold_over(p_lo, p_hi, tol, method=method, metric=metric).n

    def threshold_over(self, p_lo, p_hi, tol, *, method="normal_cc", metric="interval"):
        """:meth:`min_n_over` with what was checked: :class:`atlas.thresholds.RangeThreshold`.

        Parameters
        ----------
        p_lo, p_hi, tol, method, metric
            As for :meth:`min_n_over`.

        Returns
        -------
        atlas.thresholds.RangeThreshold

        Raises
        ------
        ValueError
            As for :meth:`min_n_over`.
        """
        chosen = self.select_p(p_lo, p_hi)
        tol_value, method = _question(tol, method, metric)
        n_axis, _ = self._axes()

        def column(ps):
            return self._columns(0, n_axis.size, ps, method, metric, accuracy=True)

        return minimum_n_over(n_axis, chosen, column, float(p_lo), float(p_hi), tol_value,
                              method=method, metric=metric)  # fmt: skip

    def best_method(self, n, p, *, metric="interval", return_accuracy=False):
        """The atlas's methods ranked by their error at (n, p), best first, ties grouped.

        Parameters
        ----------
        n : int
            Number of trials, n >= 1.
        p : float
            Success probability, 0 < p < 1.
        metric : {"interval", "cdf"}, optional
        return_accuracy : bool, optional
            Return :class:`Ranked` entries ``(method, error, accuracy, rank, tied_with)``
            instead of ``(method, error)`` pairs.

        Returns
        -------
        list of tuple
            ``(method, error)`` pairs (or :class:`Ranked`), sorted by error. Methods whose
            errors differ by no more than the sum of their accuracies cannot be told apart:
            they are tied (:func:`tie_groups`, a run of such neighbours), share a ``rank`` and
            are listed in the order of :data:`atlas.METHODS` (normal_cc first) within their
            group, whatever order the atlas stores them in.

        Raises
        ------
        ValueError
            For a bad n, p or metric, or arrays.

        Examples
        --------
        >>> from atlas import build_atlas
        >>> at = Atlas(build_atlas(n="10", p="0.5", methods="normal_cc,normal", progress=False))
        >>> [(r.method, r.rank, r.tied_with) for r in at.best_method(10, 0.5, return_accuracy=True)]
        [('normal_cc', 1, ()), ('normal', 2, ())]
        """
        n_value, p_value = _point(n, p)
        check_metric(metric)
        methods = self.methods
        hit, i, j = self._locate(np.array([n_value]), np.array([p_value]))
        if hit[0]:
            errors = [float(self._stored(_VARIABLES[metric], m)[i[0], j[0]]) for m in methods]
            accuracies = [float(self._stored(_ACCURACIES[metric], m)[i[0], j[0]]) for m in methods]
        else:
            ev = evaluate(int(n_value), [p_value], methods=methods)
            interval = metric == "interval"
            errors = [float(x) for x in (ev.interval if interval else ev.cdf)[:, 0]]
            accuracies = [
                float(x) for x in (ev.interval_accuracy if interval else ev.cdf_accuracy)[:, 0]
            ]
        by_error = sorted(range(len(methods)), key=lambda k: (errors[k], methods[k]))
        rank_of = dict(
            zip(by_error, tie_groups([errors[k] for k in by_error],
                                     [accuracies[k] for k in by_error]), strict=True)
        )  # fmt: skip
        position = {m: i for i, m in enumerate(METHODS)}

        def key(k):  # the tie group, then the order of atlas.METHODS (normal_cc first)
            return rank_of[k], position.get(methods[k], len(position)), methods[k]

        order = sorted(by_error, key=key)
        if not return_accuracy:
            return [(methods[k], errors[k]) for k in order]
        out = []
        for k in order:
            tied = tuple(methods[q] for q in order if q != k and rank_of[q] == rank_of[k])
            out.append(Ranked(methods[k], errors[k], accuracies[k], rank_of[k], tied))
        return out

    def safe_region(self, tol, *, method="normal_cc", metric="interval", between=True):
        """Where the error is within ``tol``: for every integer n and p of each grid cell.

        Parameters
        ----------
        tol : float
            Tolerance, 0 < tol < inf.
        method, metric : str, optional
            As for :meth:`error`; a method the atlas does not store is computed over the whole
            grid by the engine (as long as building it).
        between : bool, optional
            True (default): True at (n_i, p_j) means error + accuracy <= tol for every integer
            n from n_i up to the next grid n (n_i alone at the atlas's end) and every p of the
            p-cell of p_j (between the log-odds midpoints to its neighbours), as checked by
            :func:`atlas.regions.safe_cells`: the large-n bound, the engine at the p-edges
            where the grid's neighbours differ or come near ``tol`` and bisected between
            them, and the one-step bound (with the engine where it does not suffice) between
            grid n. False: at the grid point (n_i, p_j) only.

        Returns
        -------
        xarray.DataArray
            Boolean, dims (n, p), the atlas's coordinates; attrs ``tol``, ``method``,
            ``metric``, ``long_name``, ``description``, ``claim`` (what True means) and
            ``checked`` (what was computed, and what is left unchecked).

        Raises
        ------
        ValueError
            For a bad tol, method or metric.

        Examples
        --------
        >>> from atlas import build_atlas
        >>> at = Atlas(build_atlas(n="10,20,40", p="0.5", methods="normal_cc", progress=False))
        >>> at.safe_region(0.003).values.tolist()  # W(10, 1/2) = 0.00537; below 0.0028 from 20 on
        [[False], [True], [True]]
        """
        import xarray as xr

        tol_value, method = _question(tol, method, metric)
        n_axis, p_axis = self._axes()
        errors, accuracy = self._columns(0, n_axis.size, p_axis, method, metric, accuracy=True)
        if between:
            from atlas.regions import region_words, safe_cells

            safe, stats = safe_cells(n_axis, p_axis, errors, tol_value, method=method,
                                     metric=metric, accuracy=accuracy)  # fmt: skip
            extra = region_words(stats, method)
        else:
            safe = errors + accuracy <= tol_value
            extra = {"claim": "error + accuracy <= tol at the grid point (n, p) only",
                     "checked": "the grid's values only"}  # fmt: skip
        return xr.DataArray(
            safe,
            dims=("n", "p"),
            coords={"n": self.dataset["n"], "p": self.dataset["p"]},
            name="safe",
            attrs={
                "long_name": f"{method} {metric} error within the tolerance",
                "description": f"{_VARIABLES[metric]} + {_ACCURACIES[metric]} <= tol for "
                f"method {method}",
                "tol": tol_value,
                "method": method,
                "metric": metric,
                **extra,
            },
        )


# Threshold answers of the last few files, kept beyond the Atlas that asked: a sheet and a wiki
# page written from one file in one process (and the commands that write them) ask the same
# questions, each an every-integer search. Keyed by the file's identity (device, inode, size,
# modification time: a file rewritten or replaced is another file), as store.share opens it.
_FILE_ANSWERS = collections.OrderedDict()
_FILE_ANSWERS_KEPT = 4
_FILE_ANSWERS_LOCK = threading.Lock()


def _file_answers(file):
    """The shared answers of an open :class:`atlas.store.AtlasFile`, or None (no file)."""
    if file is None or file.identity is None:
        return None
    with _FILE_ANSWERS_LOCK:
        answers = _FILE_ANSWERS.get(file.identity)
        if answers is None:
            answers = _FILE_ANSWERS[file.identity] = {}
        _FILE_ANSWERS.move_to_end(file.identity)
        while len(_FILE_ANSWERS) > _FILE_ANSWERS_KEPT:
            _FILE_ANSWERS.popitem(last=False)
    return answers


def open_atlas(path=None, *, verify=False):
    """Open an atlas file, or the embedded default atlas.

    Parameters
    ----------
    path : str or os.PathLike, optional
        A file written by :func:`atlas.save_atlas`; None opens the default atlas shipped with
        the package.
    verify : bool, optional
        Recompute and compare the stored checksum (reads every value).

    Returns
    -------
    Atlas
        Only the coordinates and attributes are read on opening; each error variable is read on
        first use, one method at a time.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If it is not a readable atlas of this schema version, or fails its checksum.

    Notes
    -----
    A file already open in this process (the same device, inode, size and modification time)
    is not opened again: the new Atlas shares the open file, which is closed when the last Atlas
    sharing it is closed or garbage collected. A file replaced on disk is opened afresh.
    """
    target = Path(store.default_path() if path is None else path)
    atlas = Atlas(None, path=target)
    atlas._file = store.share(target, atlas)  # raises FileNotFoundError / ValueError
    if verify:
        try:
            atlas._file.verify()
        except Exception:
            atlas.close()
            raise
    return atlas
