"""Building an atlas: the grid is cut into chunks of (n, p), each chunk is computed by the engine,
and the pieces are assembled into the cube of :mod:`atlas.cube`.

Chunks (:mod:`atlas.chunks`) run in this process (``workers=None`` or 1), in a pool of local
processes (``workers=K``, :mod:`atlas.pool`) or on a dask.distributed cluster (``client=...``,
:mod:`atlas.distributed`). A chunk's values depend only on its own (n, p) cells, so every way
of running gives the same cube, bit for bit. The executors know nothing of this module: it
imports them, never the other way round.
"""

import contextlib
import time
from datetime import datetime, timezone

from atlas import __version__, grid
from atlas.approximations import METHODS, check_method

# Chunk, cell_cost, compute_chunk and chunk_work lived here before atlas.chunks held them: they
# stay importable from atlas.build.
from atlas.chunks import (  # noqa: F401 - re-exported, see above
    CHUNK_COST,
    Chunk,
    cell_cost,
    chunk_arrays,
    chunk_work,
    compute_chunk,
    empty_arrays,
    plan_chunks,
    positive_int,
)
from atlas.engine import TAIL_TOL, check_n

# The largest cube a build allocates: six arrays of 8 bytes per cell, 4.8 GB.
MAX_CELLS = 10**8


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
        Target work per chunk, in the units of :func:`atlas.chunks.cell_cost` (default
        ``CHUNK_COST``, about a second of one core).

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
    ``chunk_cost`` (:func:`atlas.chunks.plan_chunks`); a local pool takes the costliest chunks
    first. The workers of a local pool end with this process, however it ends
    (:func:`atlas.pool.end_with_parent`).

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
        workers = positive_int("workers", workers)
    cells = len(methods) * n_axis.size * p_axis.size
    if cells > MAX_CELLS:
        raise ValueError(
            f"`n`, `p` and `methods` must give at most {MAX_CELLS} cells; got {n_axis.size} n x "
            f"{p_axis.size} p x {len(methods)} methods = {cells}."
        )
    chunks = plan_chunks(n_axis, p_axis, cost=chunk_cost, p_block=p_block)
    arrays = empty_arrays((len(methods), n_axis.size, p_axis.size))
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
            yield chunk, chunk_arrays(chunk, n, p, methods)
        return
    from atlas.pool import run_chunks

    yield from run_chunks(chunks, n, p, methods, workers=workers)
