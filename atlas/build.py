"""Building an atlas: the grid is cut into chunks of (n, p), each chunk is computed by the engine,
and the pieces are assembled into the cube of :mod:`atlas.cube`.

Chunks run in this process (``workers=None`` or 1), in a pool of local processes (``workers=K``)
or on a dask.distributed cluster (``client=...``, see :mod:`atlas.distributed`). A chunk's values
depend only on its own (n, p) cells, so every way of running gives the same cube, bit for bit.
"""

import os
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from datetime import datetime, timezone
from multiprocessing import get_context

import numpy as np

from atlas import __version__, grid
from atlas.approximations import METHODS, check_method
from atlas.engine import FULL_LIMIT, TAIL_TOL, evaluate

# Work per chunk, in the engine's point evaluations; about a second on one core.
CHUNK_COST = 3_000_000
# A wide-window cell costs about as much as this many points of a narrow one.
_NESTED_COST = 3_000


@dataclass(frozen=True)
class Chunk:
    """One task: the cells n[n_start:n_stop] x p[p_start:p_stop]."""

    index: int
    n_start: int
    n_stop: int
    p_start: int
    p_stop: int


def cell_cost(n, p):
    """Estimated engine work for the cells of one n over the vector p (point evaluations)."""
    sigma = np.sqrt(n * p * (1.0 - p))
    points = np.minimum(n + 1.0, 18.0 * sigma + 21.0)
    return float(np.where(points > FULL_LIMIT, _NESTED_COST, points + 50.0).sum())


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
    p_block = p.size if p_block is None else int(p_block)
    if p_block < 1:
        raise ValueError(f"`p_block` must be a positive integer; got {p_block!r}.")
    chunks = []
    for p_start in range(0, p.size, p_block):
        p_stop = min(p.size, p_start + p_block)
        block = p[p_start:p_stop]
        start, acc = 0, 0.0
        for i, value in enumerate(n):
            acc += cell_cost(int(value), block)
            if acc >= cost or i == n.size - 1:
                chunks.append(Chunk(len(chunks), start, i + 1, p_start, p_stop))
                start, acc = i + 1, 0.0
    return chunks


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
    shape = (len(methods), n.size, p.size)
    out = {
        "interval_error": np.empty(shape),
        "cdf_error": np.empty(shape),
        "interval_lo": np.empty(shape, np.int64),
        "interval_hi": np.empty(shape, np.int64),
    }
    for j, value in enumerate(n):
        ev = evaluate(int(value), p, methods=methods)
        out["interval_error"][:, j] = ev.interval
        out["cdf_error"][:, j] = ev.cdf
        out["interval_lo"][:, j] = ev.lo
        out["interval_hi"][:, j] = ev.hi
    return out


def _run_chunk(n, p, methods, chunk):
    """Pool entry point: the chunk's index and its arrays."""
    part = compute_chunk(n[chunk.n_start : chunk.n_stop], p[chunk.p_start : chunk.p_stop], methods)
    return chunk.index, part


def check_methods(methods):
    """Normalise a method list: None (all), a comma-separated string, or a sequence."""
    if methods is None:
        return METHODS
    if isinstance(methods, str):
        methods = [m.strip() for m in methods.split(",")]
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
        Methods (all by default).
    workers : int, optional
        Local worker processes; None or 1 computes in this process.
    progress : bool, optional
        Show a progress bar (tqdm) when standard error is a terminal.
    client : distributed.Client, optional
        Run the chunks on this dask.distributed cluster instead.
    checkpoint : str or os.PathLike, optional
        A directory that keeps finished chunks, so that a rerun computes only missing ones.
    p_block : int, optional
        Split the p axis into blocks of this many values.
    chunk_cost : float, optional
        Target work per chunk.

    Returns
    -------
    xarray.Dataset
        The atlas (see :mod:`atlas.cube`).

    Raises
    ------
    ValueError
        For a bad grid specification, method list or worker count, before any work starts.

    Examples
    --------
    >>> ds = build_atlas(n="10,20", p="0.5", methods="normal_cc", progress=False)
    >>> round(float(ds["interval_error"].sel(method="normal_cc", n=10, p=0.5)), 6)
    0.005372
    """
    n_axis, n_spec = _axis(n, grid.parse_n, grid.DEFAULT_N_SPEC)
    p_axis, p_spec = _axis(p, grid.parse_p, grid.DEFAULT_P_SPEC)
    methods = check_methods(methods)
    if workers is not None and (
        isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1
    ):
        raise ValueError(f"`workers` must be a positive integer; got {workers!r}.")
    chunks = plan_chunks(n_axis, p_axis, cost=chunk_cost, p_block=p_block)
    shape = (len(methods), n_axis.size, p_axis.size)
    arrays = {
        "interval_error": np.empty(shape),
        "cdf_error": np.empty(shape),
        "interval_lo": np.empty(shape, np.int64),
        "interval_hi": np.empty(shape, np.int64),
    }
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
    try:
        for chunk, part in _execute(todo, n_axis, p_axis, methods, workers, client):
            if store is not None:
                store.save(chunk, part)
            _place(arrays, chunk, part)
            bar.update(1)
    finally:
        bar.close()
    elapsed = time.perf_counter() - started
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    history = (
        f"{stamp} approx-atlas {__version__} build: {n_axis.size} n x {p_axis.size} p x "
        f"{len(methods)} methods in {len(chunks)} chunks, {elapsed:.1f} s"
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
    """A tqdm bar over chunks (shown only on a terminal), or a silent stand-in."""
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
    # fork starts workers without re-importing; elsewhere spawn is the safe default.
    method = "fork" if "fork" in _start_methods() else "spawn"
    by_index = {chunk.index: chunk for chunk in chunks}
    with ProcessPoolExecutor(max_workers=workers, mp_context=get_context(method)) as pool:
        futures = [pool.submit(_run_chunk, n, p, methods, chunk) for chunk in chunks]
        try:
            for future in as_completed(futures):
                index, part = future.result()
                yield by_index[index], part
        except BaseException:
            for future in futures:
                future.cancel()
            raise


def _start_methods():
    """The multiprocessing start methods of this platform."""
    from multiprocessing import get_all_start_methods

    return get_all_start_methods()


def cpu_count():
    """Cores available to this process."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1
