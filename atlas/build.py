"""Building an atlas: the grid is cut into chunks of (n, p), each chunk is computed by the engine,
and the pieces are assembled into the cube of :mod:`atlas.cube`.

Chunks (:mod:`atlas.chunks`) run in this process (``workers=None`` or 1), in a pool of local
processes (``workers=K``, :mod:`atlas.pool`) or on a dask.distributed cluster (``client=...``,
:mod:`atlas.distributed`). A chunk's values depend only on its own (n, p) cells, so every way
of running gives the same cube, bit for bit. The executors know nothing of this module: it
imports them, never the other way round.
"""

import contextlib
import re
import time
from datetime import datetime, timezone

from atlas import __version__, floatpath, grid
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

#: The keyword arguments of build_atlas for the decision and coverage variables (the build
#: command's options of the same names).
GROUP_OPTIONS = (
    "decisions",
    "decision_n",
    "decision_p",
    "tail_levels",
    "test_levels",
    "coverage",
    "coverage_n",
    "coverage_p",
    "intervals",
    "coverage_levels",
)

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
    decisions=False,
    decision_n=None,
    decision_p=None,
    tail_levels=None,
    test_levels=None,
    coverage=False,
    coverage_n=None,
    coverage_p=None,
    intervals=None,
    coverage_levels=None,
):
    """Compute every method's worst-case errors over an (n, p) grid, and optionally the tail,
    test-size and coverage variables on grids of their own.

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
    decisions : bool, optional
        Add the tail and test-size variables (``tail_error``, ``test_size``,
        ``exact_test_size``; :mod:`atlas.decision_cube`) for every method, on their own grid.
        Giving any of the next four options adds them too.
    decision_n, decision_p : str or sequence, optional
        Their grid (default :data:`atlas.decision_cube.DECISION_N` and ``DECISION_P``: every n
        to 200 and 121 n log-spaced to 10^8; 41 p logit-spaced from 1e-4 to 0.9999, and 1/2).
    tail_levels, test_levels : str or sequence of float, optional
        Their levels, each in (0, 1) (default 0.0001, 0.001, 0.01, 0.05 for tails and 0.001,
        0.01, 0.05, 0.1 for tests).
    coverage : bool, optional
        Add the coverage variables of confidence intervals for p (``coverage``,
        ``min_coverage``, ``expected_width``, ``p_cell_lo``, ``p_cell_hi``;
        :mod:`atlas.coverage_cube`), on their own grid. Giving any of the next four options
        adds them too.
    coverage_n, coverage_p : str or sequence, optional
        Their grid (default :data:`atlas.coverage_cube.DEFAULT_COVERAGE_N_SPEC` and
        ``DEFAULT_COVERAGE_P_SPEC``: every n to 100, 21 n log-spaced to 10^4; 61 p logit-spaced
        from 0.001 to 0.999); n at most 10^6, at least two p.
    intervals : str or sequence of str, optional
        The intervals (default all of :data:`atlas.INTERVALS`).
    coverage_levels : str or sequence of float, optional
        Their nominal levels (default 0.9, 0.95, 0.99).

    Returns
    -------
    xarray.Dataset
        The atlas (see :mod:`atlas.cube`), with the groups asked for (:func:`atlas.cube.attach`).

    Raises
    ------
    ValueError
        For a bad grid specification, method list, worker count, ``p_block`` or
        ``chunk_cost``, or a grid of more than ``MAX_CELLS`` cells, or a bad option of the
        decision or coverage variables, before any work starts.
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
    extra = check_groups(
        decisions=decisions,
        decision_n=decision_n,
        decision_p=decision_p,
        tail_levels=tail_levels,
        test_levels=test_levels,
        coverage=coverage,
        coverage_n=coverage_n,
        coverage_p=coverage_p,
        intervals=intervals,
        coverage_levels=coverage_levels,
    )
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
        f"{len(methods)} methods in {len(chunks)} chunk(s) {where}, {elapsed:.1f} s; "
        f"numpy float path {floatpath.describe()} (atlas.floatpath)"
        + ("" if client is None else " in the client; the workers' is their own")
    )
    from atlas.cube import make_dataset

    ds = make_dataset(
        n_axis,
        p_axis,
        methods,
        arrays,
        n_spec=n_spec,
        p_spec=p_spec,
        history=history,
        tail_tolerance=TAIL_TOL,
    )
    return _add_groups(ds, extra, methods, workers)


def _named(name, check, value):
    """``check(value)``, its error naming ``name`` in place of the checker's own argument."""
    try:
        return check(value)
    except (TypeError, ValueError) as err:
        raise type(err)(re.sub(r"^`[^`]+`", f"`{name}`", str(err), count=1)) from None


def _levels(name, value):
    """A level list from a comma-separated string or a sequence: each in (0, 1), none twice."""
    if isinstance(value, str):
        value = [item.strip() for item in value.split(",")]
    try:
        items = list(value)
    except TypeError:
        raise TypeError(f"`{name}` must be a comma-separated string or a sequence of levels; "
                        f"got {value!r}.") from None  # fmt: skip
    levels = []
    for item in items:
        try:
            level = float(item)
        except (TypeError, ValueError):
            level = None
        if isinstance(item, bool) or level is None or not 0.0 < level < 1.0:
            raise ValueError(f"`{name}` must hold levels in the open interval (0, 1); got "
                             f"{item!r}.")  # fmt: skip
        levels.append(level)
    if not levels:
        raise ValueError(f"`{name}` must hold at least one level; got none.")
    if len(set(levels)) != len(levels):
        raise ValueError(f"`{name}` must not repeat a level; got {value!r}.")
    return tuple(levels)


def _or(value, default):
    """``value``, or ``default`` when it is None (an empty value is refused, not replaced)."""
    return default if value is None else value


def _spec(name, parse, value):
    """A grid spec string (or values) checked by ``parse``, as given."""
    _named(name, parse, value)
    return value


def check_groups(
    *,
    decisions=False,
    decision_n=None,
    decision_p=None,
    tail_levels=None,
    test_levels=None,
    coverage=False,
    coverage_n=None,
    coverage_p=None,
    intervals=None,
    coverage_levels=None,
):
    """Check the options of the decision and coverage variables before any work.

    Returns
    -------
    dict
        ``{"decisions": {...}, "coverage": {...}}`` with the keyword arguments of
        :func:`atlas.decision_cube.decision_dataset` and
        :func:`atlas.coverage_cube.build_coverage_cube` for each group asked for (a group is
        asked for by its flag or by any of its options).

    Raises
    ------
    ValueError, TypeError
        Naming the option (``decision_n``, ``tail_levels``, ``intervals``, ...).
    """
    from atlas import confidence
    from atlas.coverage_cube import (
        DEFAULT_COVERAGE_N_SPEC,
        DEFAULT_COVERAGE_P_SPEC,
        DEFAULT_LEVELS,
        MAX_N,
    )
    from atlas.decision_cube import DECISION_N, DECISION_P, TAIL_LEVELS, TEST_LEVELS

    out = {}
    options = (decision_n, decision_p, tail_levels, test_levels)
    if decisions or any(v is not None for v in options):
        out["decisions"] = {
            "n": _spec("decision_n", grid.parse_n, _or(decision_n, DECISION_N)),
            "p": _spec("decision_p", grid.parse_p, _or(decision_p, DECISION_P)),
            "tail_levels": _levels("tail_levels", _or(tail_levels, TAIL_LEVELS)),
            "test_levels": _levels("test_levels", _or(test_levels, TEST_LEVELS)),
        }
        _named("decision_n", check_n, grid.parse_n(out["decisions"]["n"]))
    options = (coverage_n, coverage_p, intervals, coverage_levels)
    if coverage or any(v is not None for v in options):
        n_values = _named("coverage_n", grid.parse_n, _or(coverage_n, DEFAULT_COVERAGE_N_SPEC))
        p_values = _named("coverage_p", grid.parse_p, _or(coverage_p, DEFAULT_COVERAGE_P_SPEC))
        if n_values[-1] > MAX_N:
            raise ValueError(f"`coverage_n` must be at most {MAX_N}; got {n_values[-1]}.")
        if p_values.size < 2:
            raise ValueError(f"`coverage_p` must give at least two values; got {coverage_p!r}.")
        names = intervals if intervals is not None else confidence.INTERVALS
        if isinstance(names, str):
            names = [item.strip() for item in names.split(",")]
        names = tuple(_named("intervals", confidence.check_interval, m) for m in names)
        if not names:
            raise ValueError("`intervals` must name at least one interval; got none.")
        if len(set(names)) != len(names):
            raise ValueError(f"`intervals` must not repeat an interval; got {', '.join(names)}.")
        out["coverage"] = {
            "n": _or(coverage_n, DEFAULT_COVERAGE_N_SPEC),
            "p": _or(coverage_p, DEFAULT_COVERAGE_P_SPEC),
            "intervals": names,
            "levels": _levels("coverage_levels", _or(coverage_levels, DEFAULT_LEVELS)),
        }
    return out


def _add_groups(ds, extra, methods, workers):
    """The atlas ``ds`` with the groups of ``extra`` (from :func:`check_groups`) added."""
    if "decisions" in extra:
        from atlas.decision_cube import attach, decision_dataset

        ds = attach(ds, decision_dataset(methods=methods, workers=workers, **extra["decisions"]))
    if "coverage" in extra:
        from atlas.coverage_cube import attach, build_coverage_cube

        ds = attach(ds, build_coverage_cube(**extra["coverage"]))
    return ds


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
