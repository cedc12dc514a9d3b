"""Chunks of an atlas build: the plan that cuts the (n, p) grid into tasks, and a task's work.

A chunk is a rectangle of cells n[n_start:n_stop] x p[p_start:p_stop]. :func:`plan_chunks` cuts
the grid into chunks of about equal engine work (:func:`cell_cost`); :func:`chunk_arrays`
computes one chunk with :func:`atlas.engine.evaluate`. Every executor of a build (this process,
the local pool of :mod:`atlas.pool`, dask in :mod:`atlas.distributed`) runs chunks through these
functions and nothing else, so a cell's values are the same however the grid is run. This module
knows nothing of executors, checkpoints or the cube.
"""

from dataclasses import dataclass

import numpy as np

from atlas.engine import FULL_LIMIT, evaluate

__all__ = [
    "CHUNK_COST",
    "Chunk",
    "cell_cost",
    "chunk_arrays",
    "chunk_work",
    "compute_chunk",
    "empty_arrays",
    "plan_chunks",
    "positive_int",
]

# Target work per chunk, in the units of `cell_cost` (0.13 to 0.68 microseconds of one core each
# for all seven methods, see below): at most about a second a chunk, so that two workers finish
# within a second of each other and a checkpoint loses little when a build is stopped.
CHUNK_COST = 1_500_000
# Cost model of `cell_cost`, fitted to timings of atlas.engine.evaluate with all seven methods
# over the default p axis, n = 1 .. 10^8 (within a factor 2 everywhere): a fixed cost per call
# of evaluate, a cost per p and per integer of the padded rectangle of narrow windows, and for
# wide windows a cost per evaluation of the nested search, each _WIDE_WEIGHT narrow points.
# Since the engine evaluates narrow windows in groups of similar width (issue 14) a unit costs
# 0.13 to 0.68 microseconds (the dearest around n = 2000 to 5000, the cheapest at 10^8, measured
# under load); the model only balances the chunks, and no value depends on it.
_CALL_COST = 300
_ROW_COST = 50
_WIDE_WEIGHT = 2.4


@dataclass(frozen=True)
class Chunk:
    """One task: the cells n[n_start:n_stop] x p[p_start:p_stop]."""

    index: int
    n_start: int
    n_stop: int
    p_start: int
    p_stop: int


def cell_cost(n, p):
    """Estimated engine work for one n over the vector p, in narrow-window point evaluations.

    Parameters
    ----------
    n : int
        The number of trials.
    p : numpy.ndarray
        The p values computed together with this n.

    Returns
    -------
    float

    Notes
    -----
    A model fitted to timings, shaped after :func:`atlas.engine.evaluate`. The window of one
    p holds ``w = min(n + 1, 18 sigma + 21)`` integers, sigma = sqrt(n p q). Windows of at most
    ``FULL_LIMIT`` integers are evaluated at every integer of one rectangle, (count of those p)
    x (widest window), padded. A wider window is searched at a cost that grows slowly with w,
    counted as ``c + 3 b`` evaluations with ``c = clip(6 w / sigma, 64, 8192) + 1`` and
    ``b = min(2 w / (c - 1), FULL_LIMIT)``, each worth ``_WIDE_WEIGHT`` narrow points. The
    model is for all seven methods; fewer methods take less time per chunk, which only makes
    their chunks shorter.
    """
    return float(_costs(np.array([n]), np.asarray(p, dtype=np.float64))[0])


def _costs(n, p):
    """`cell_cost` of every n of an array over the vector p, computed a slab of n at a time."""
    out = np.empty(n.size)
    step = max(1, 2**20 // max(p.size, 1))
    for start in range(0, n.size, step):
        rows = n[start : start + step].astype(np.float64)[:, None]
        sigma = np.sqrt(rows * p * (1.0 - p))
        width = np.minimum(rows + 1.0, 18.0 * sigma + 21.0)
        wide = width > FULL_LIMIT
        count = (~wide).sum(axis=1)
        widest = np.where(wide, 0.0, width).max(axis=1)
        cost = np.where(count > 0, count * (widest + _ROW_COST), 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            samples = np.clip(np.ceil(6.0 * width / sigma), 64, 8192) + 1.0
            bracket = np.minimum(2.0 * width / (samples - 1.0), FULL_LIMIT)
        cost += _WIDE_WEIGHT * np.where(wide, samples + 3.0 * bracket + _ROW_COST, 0.0).sum(axis=1)
        out[start : start + step] = _CALL_COST + cost
    return out


def plan_chunks(n, p, *, cost=CHUNK_COST, p_block=None):
    """Cut the (n, p) grid into chunks of about ``cost`` work each.

    Parameters
    ----------
    n, p : numpy.ndarray
        The grid axes.
    cost : float, optional
        Target work per chunk (see :func:`cell_cost`).
    p_block : int, optional
        Cut the p axis into blocks of this many values; default: the whole axis.

    Returns
    -------
    list of Chunk
        Consecutive runs of n within each p block, in a fixed order.
    """
    n = np.asarray(n)
    p = np.asarray(p, dtype=np.float64)
    p_block = p.size if p_block is None else positive_int("p_block", p_block)
    if isinstance(cost, bool) or not isinstance(cost, (int, float, np.integer, np.floating)):
        raise TypeError(f"`chunk_cost` must be a positive number; got {cost!r}.")
    if not (np.isfinite(cost) and cost > 0):
        raise ValueError(f"`chunk_cost` must be a positive number; got {cost!r}.")
    chunks = []
    for p_start in range(0, p.size, p_block):
        p_stop = min(p.size, p_start + p_block)
        start, acc = 0, 0.0
        for i, work in enumerate(_costs(n, p[p_start:p_stop]).tolist()):
            acc += work
            if acc >= cost or i == n.size - 1:
                chunks.append(Chunk(len(chunks), start, i + 1, p_start, p_stop))
                start, acc = i + 1, 0.0
    return chunks


def positive_int(name, value):
    """``value`` as an int if it is an integer >= 1, else a TypeError or ValueError naming it."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise TypeError(f"`{name}` must be a positive integer; got {value!r}.")
    if value < 1:
        raise ValueError(f"`{name}` must be a positive integer; got {value!r}.")
    return int(value)


def compute_chunk(n, p, methods):
    """Compute every cell of one chunk.

    Parameters
    ----------
    n : array_like of int
        The chunk's n values.
    p : array_like of float
        The chunk's p values.
    methods : tuple of str
        The methods.

    Returns
    -------
    dict
        ``interval_error``, ``cdf_error``, ``interval_lo``, ``interval_hi``,
        ``interval_accuracy`` and ``cdf_accuracy`` (the engine's bounds on the absolute error of
        the two errors, :class:`atlas.engine.Evaluation`), of shape (len(methods), len(n), len(p)).
    """
    n = np.asarray(n, dtype=np.int64)
    p = np.asarray(p, dtype=np.float64)
    out = empty_arrays((len(methods), n.size, p.size))
    for j, value in enumerate(n):
        ev = evaluate(int(value), p, methods=methods)
        out["interval_error"][:, j] = ev.interval
        out["cdf_error"][:, j] = ev.cdf
        out["interval_lo"][:, j] = ev.lo
        out["interval_hi"][:, j] = ev.hi
        out["interval_accuracy"][:, j] = ev.interval_accuracy
        out["cdf_accuracy"][:, j] = ev.cdf_accuracy
    return out


def empty_arrays(shape):
    """The six arrays of a cube (or of a chunk) of ``shape``, not yet filled."""
    return {
        "interval_error": np.empty(shape),
        "cdf_error": np.empty(shape),
        "interval_lo": np.empty(shape, np.int64),
        "interval_hi": np.empty(shape, np.int64),
        "interval_accuracy": np.empty(shape),
        "cdf_accuracy": np.empty(shape),
    }


def chunk_arrays(chunk, n, p, methods):
    """Compute one chunk of the whole grid: :func:`compute_chunk` of its n and p.

    Parameters
    ----------
    chunk : Chunk
        Indices into the axes.
    n, p : numpy.ndarray
        The whole grid axes.
    methods : tuple of str
        The methods.

    Returns
    -------
    dict
        As from :func:`compute_chunk`.
    """
    return compute_chunk(n[chunk.n_start : chunk.n_stop], p[chunk.p_start : chunk.p_stop], methods)


def chunk_work(n, p, chunk):
    """Estimated work of one chunk of the whole grid (:func:`cell_cost` summed over its n)."""
    block = p[chunk.p_start : chunk.p_stop]
    return float(_costs(n[chunk.n_start : chunk.n_stop], block).sum())
