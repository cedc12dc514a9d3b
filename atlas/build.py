"""Building an atlas: the grid is cut into chunks of (n, p), each chunk is computed by the engine,
and the pieces are assembled into the cube of :mod:`atlas.cube`.

Chunks run in this process (``workers=None`` or 1), in a pool of local processes (``workers=K``)
or on a dask.distributed cluster (``client=...``, see :mod:`atlas.distributed`). A chunk's values
depend only on its own (n, p) cells, so every way of running gives the same cube, bit for bit.
"""

import contextlib
import signal
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from datetime import datetime, timezone
from multiprocessing import get_all_start_methods, get_context

import numpy as np

from atlas import __version__, grid
from atlas.approximations import METHODS, check_method
from atlas.engine import FULL_LIMIT, TAIL_TOL, check_n, evaluate

# Target work per chunk, in the units of `cell_cost` (about 0.6 microseconds of one core each
# for all seven methods): about a second a chunk, so that two workers finish within a second
# of each other and a checkpoint loses little when a build is stopped.
CHUNK_COST = 1_500_000
# The largest cube a build allocates: four arrays of 8 bytes per cell, 3.2 GB.
MAX_CELLS = 10**8
# Cost model of `cell_cost`, fitted to timings of atlas.engine.evaluate with all seven methods
# over the default p axis, n = 1 .. 10^8 (within a factor 2 everywhere): a fixed cost per call
# of evaluate, a cost per p and per integer of the padded rectangle of narrow windows, and for
# wide windows a cost per evaluation of the nested search, each _WIDE_WEIGHT narrow points.
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
    p_block = p.size if p_block is None else _positive_int("p_block", p_block)
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


def _positive_int(name, value):
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
        ``interval_error``, ``cdf_error``, ``interval_lo``, ``interval_hi`` of shape
        (len(methods), len(n), len(p)).
    """
    n = np.asarray(n, dtype=np.int64)
    p = np.asarray(p, dtype=np.float64)
    out = _empty_arrays((len(methods), n.size, p.size))
    for j, value in enumerate(n):
        ev = evaluate(int(value), p, methods=methods)
        out["interval_error"][:, j] = ev.interval
        out["cdf_error"][:, j] = ev.cdf
        out["interval_lo"][:, j] = ev.lo
        out["interval_hi"][:, j] = ev.hi
    return out


def _empty_arrays(shape):
    """The four arrays of a cube (or of a chunk) of ``shape``, not yet filled."""
    return {
        "interval_error": np.empty(shape),
        "cdf_error": np.empty(shape),
        "interval_lo": np.empty(shape, np.int64),
        "interval_hi": np.empty(shape, np.int64),
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


def _run_chunk(n, p, methods, chunk):
    """Pool entry point: the chunk's index and its arrays."""
    return chunk.index, chunk_arrays(chunk, n, p, methods)


def check_methods(methods):
    """Normalise a method list: None (all), a comma-separated string, or a sequence."""
    if methods is None:
        return METHODS
    if isinstance(methods, str):
        methods = [m.strip() for m in methods.split(",")]
    try:
        methods = list(methods)
    except TypeError:
        raise TypeError(
            f"`methods` must be a comma-separated string or a sequence of names; got {methods!r}."
        ) from None
    methods = tuple(check_method(m) for m in methods)
    if not methods:
        raise ValueError("`methods` must name at least one method; got none.")
    if len(set(methods)) != len(methods):
        raise ValueError(f"`methods` must not repeat a method; got {', '.join(methods)}.")
    return methods


def _axis(value, parse, default_spec):
    """An axis and its specification string from None, a spec string, or values."""
    if value is None:
        return parse(default_spec), default_spec
    if isinstance(value, str):
        return parse(value), value
    values = parse(value)
    return values, ",".join(repr(v.item()) for v in values)


def build_atlas(
    n=None,
    p=None,
    methods=None,
    *,
    workers=None,
    progress=True,
    client=None,
    checkpoint=None,
    p_block=None,
    chunk_cost=CHUNK_COST,
):
    """Compute every method's worst-case errors over an (n, p) grid.

    Parameters
    ----------
    n : str or array_like of int, optional
        A grid specification such as ``"1:60,log:100:100000:5"`` or the values; default the
        default grid (:data:`atlas.grid.DEFAULT_N_SPEC`).
    p : str or array_like of float, optional
        A specification such as ``"logit:0.0001:0.9999:201"`` or the values; default the
        default grid.
    methods : str or sequence of str, optional
        Methods (all by default), in any order: the cube stores them in alphabetical order
        along its ``approximation`` dimension.
    workers : int, optional
        Local worker processes (``workers >= 1``); None or 1 computes in this process.
    progress : bool, optional
        Show a progress bar (tqdm) when standard error is a terminal.
    client : distributed.Client, optional
        Run the chunks on this dask.distributed cluster instead.
    checkpoint : str or os.PathLike, optional
        A directory that keeps finished chunks, so that a rerun computes only missing ones.
    p_block : int, optional
        Split the p axis into blocks of this many values (default: the whole axis).
    chunk_cost : float, optional
        Target work per chunk, in the units of :func:`cell_cost` (default ``CHUNK_COST``,
        about a second of one core).

    Returns
    -------
    xarray.Dataset
        The atlas (see :mod:`atlas.cube`).

    Raises
    ------
    ValueError
        For a bad grid specification, method list, worker count, ``p_block`` or
        ``chunk_cost``, or a grid of more than ``MAX_CELLS`` cells, before any work starts.
    TypeError
        For a ``workers``, ``p_block`` or ``chunk_cost`` that is not a number, or an axis that
        is neither a spec string nor a sequence of numbers.

    Notes
    -----
    A cell's values depend on that cell alone, so the cube is the same, bit for bit, for every
    ``workers``, ``client``, ``p_block`` and ``chunk_cost``. Work is cut into chunks of about
    ``chunk_cost`` (:func:`plan_chunks`); a local pool takes the costliest chunks first.

    Examples
    --------
    >>> ds = build_atlas(n="10,20", p="0.5", methods="normal_cc,camp_paulson", progress=False)
    >>> [str(m) for m in ds.approximation.values]
    ['camp_paulson', 'normal_cc']
    >>> round(float(ds.interval_error.sel(approximation="normal_cc", n=10, p=0.5)), 6)
    0.005372
    """
    n_axis, n_spec = _axis(n, grid.parse_n, grid.DEFAULT_N_SPEC)
    p_axis, p_spec = _axis(p, grid.parse_p, grid.DEFAULT_P_SPEC)
    check_n(n_axis)  # the engine's own limit on n, checked before any work
    methods = tuple(sorted(check_methods(methods)))  # the order of the cube's index
    if workers is not None:
        workers = _positive_int("workers", workers)
    cells = len(methods) * n_axis.size * p_axis.size
    if cells > MAX_CELLS:
        raise ValueError(
            f"`n`, `p` and `methods` must give at most {MAX_CELLS} cells; got {n_axis.size} n x "
            f"{p_axis.size} p x {len(methods)} methods = {cells}."
        )
    chunks = plan_chunks(n_axis, p_axis, cost=chunk_cost, p_block=p_block)
    arrays = _empty_arrays((len(methods), n_axis.size, p_axis.size))
    store = None
    if checkpoint is not None:
        from atlas.checkpoint import CheckpointStore

        store = CheckpointStore.open(checkpoint, n_axis, p_axis, methods, chunks)
    started = time.perf_counter()
    todo = []
    for chunk in chunks:
        part = store.load(chunk) if store is not None else None
        if part is None:
            todo.append(chunk)
        else:
            _place(arrays, chunk, part)
    bar = _progress_bar(len(chunks), len(chunks) - len(todo), progress)
    results = _execute(todo, n_axis, p_axis, methods, workers, client)
    # closing(): an error in this loop stops a local pool at once rather than when collected.
    with bar, contextlib.closing(results):
        for chunk, part in results:
            if store is not None:
                store.save(chunk, part)
            _place(arrays, chunk, part)
            bar.update(1)
    elapsed = time.perf_counter() - started
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    where = "on a dask cluster" if client is not None else f"with {workers or 1} worker process(es)"
    history = (
        f"{stamp} approx-atlas {__version__} build: {n_axis.size} n x {p_axis.size} p x "
        f"{len(methods)} methods in {len(chunks)} chunk(s) {where}, {elapsed:.1f} s"
    )
    from atlas.cube import make_dataset

    return make_dataset(
        n_axis,
        p_axis,
        methods,
        arrays,
        n_spec=n_spec,
        p_spec=p_spec,
        history=history,
        tail_tolerance=TAIL_TOL,
    )


def _place(arrays, chunk, part):
    """Copy a chunk's arrays into the whole cube."""
    cells = (slice(None), slice(chunk.n_start, chunk.n_stop), slice(chunk.p_start, chunk.p_stop))
    for name, values in part.items():
        arrays[name][cells] = values


def _progress_bar(total, done, progress):
    """A tqdm bar over chunks (shown only when standard error is a terminal), or a silent one."""
    from tqdm import tqdm

    return tqdm(
        total=total,
        initial=done,
        unit="chunk",
        desc="approx-atlas build",
        disable=None if progress else True,
    )


def _execute(chunks, n, p, methods, workers, client):
    """Yield (chunk, arrays) as chunks finish, in this process, a local pool or on dask."""
    if client is not None:
        from atlas.distributed import run_chunks

        yield from run_chunks(client, chunks, n, p, methods)
        return
    if workers is None or workers == 1 or len(chunks) <= 1:
        for chunk in chunks:
            yield chunk, _run_chunk(n, p, methods, chunk)[1]
        return
    # Costliest chunks first, so that no long chunk starts last while the other workers idle.
    order = sorted(chunks, key=lambda c: -chunk_work(n, p, c))
    by_index = {chunk.index: chunk for chunk in chunks}
    # fork starts workers without re-importing; elsewhere spawn is the safe default.
    context = get_context("fork" if "fork" in get_all_start_methods() else "spawn")
    pool = ProcessPoolExecutor(
        max_workers=min(workers, len(chunks)), mp_context=context, initializer=_ignore_interrupts
    )
    try:
        futures = [pool.submit(_run_chunk, n, p, methods, chunk) for chunk in order]
        for future in as_completed(futures):
            try:
                index, part = future.result()
            except BrokenProcessPool:
                raise RuntimeError(
                    "a worker process of the build died (out of memory, or killed); "
                    "no atlas was made"
                ) from None
            yield by_index[index], part
    except BaseException:
        # An error, Ctrl-C, or the consumer stopping: stop the workers at once.
        _stop_workers(pool)
        raise
    pool.shutdown(wait=True)


def _stop_workers(pool):
    """Cancel what has not started and end the pool's worker processes now."""
    terminate = getattr(pool, "terminate_workers", None)  # Python >= 3.14
    if terminate is not None:
        terminate()
        return
    # Before 3.14 there is no public way: take the processes before shutdown forgets them.
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        process.terminate()
    for process in processes:
        process.join()


def _ignore_interrupts():
    """Pool initializer: Ctrl-C goes to the parent alone, which then stops the workers."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
