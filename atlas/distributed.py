"""Builds on dask.distributed: one task per chunk, on a local cluster or a running scheduler.

:func:`connect` turns a ``--dask`` specification into a ``distributed.Client`` (or None for a
build in this process); :func:`run_chunks` runs a build's chunks on it and yields each chunk's
arrays as it finishes, which :func:`atlas.build_atlas` places in the cube (and saves to its
checkpoint directory). The engine's value for a cell depends on that cell only, so the cube is
the same, bit for bit, whatever the number of workers, the order in which chunks finish or the
chunk plan.

dask is imported inside the functions only, so ``import atlas`` does not import it.
"""

import contextlib
import re
import uuid

from atlas.chunks import chunk_arrays, chunk_work

__all__ = ["connect", "parse_spec", "run_chunks"]

#: Times a task is rerun after raising on a worker (a worker's death is survived apart from this).
RETRIES = 2
#: Times the grid axes are scattered again after every worker holding them died.
MAX_RESCATTERS = 5
_SPEC_FORMS = "'local:K' (K local worker processes) or 'tcp://HOST:PORT' (a running scheduler)"
_LOCAL = re.compile(r"local:([0-9]+)")
_TCP = re.compile(r"tcp://(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9_.-]+):([0-9]+)")


def parse_spec(spec):
    """Read a ``--dask`` specification.

    Parameters
    ----------
    spec : str or None
        ``"local:K"``, ``"tcp://HOST:PORT"`` or None.

    Returns
    -------
    tuple
        ``("local", K)``, ``("tcp", "tcp://HOST:PORT")`` or ``(None, None)``.

    Raises
    ------
    ValueError
        For any other string, K < 1 or a port outside 1..65535.
    TypeError
        If `spec` is neither a string nor None.

    Examples
    --------
    >>> parse_spec("local:2"), parse_spec("tcp://127.0.0.1:8786"), parse_spec(None)
    (('local', 2), ('tcp', 'tcp://127.0.0.1:8786'), (None, None))
    """
    if spec is None:
        return None, None
    if not isinstance(spec, str):
        raise TypeError(f"`spec` must be a string or None; got {type(spec).__name__}.")
    text = spec.strip()
    local = _LOCAL.fullmatch(text)
    if local:
        workers = int(local.group(1))
        if workers < 1:
            raise ValueError(f"`spec` 'local:K' must have K >= 1 workers; got {spec!r}.")
        return "local", workers
    tcp = _TCP.fullmatch(text)
    if tcp:
        port = int(tcp.group(2))
        if not 1 <= port <= 65535:
            raise ValueError(f"`spec` must have a port from 1 to 65535; got {spec!r}.")
        return "tcp", text
    raise ValueError(f"`spec` must be {_SPEC_FORMS}; got {spec!r}.")


@contextlib.contextmanager
def connect(spec, *, timeout=10.0):
    """A dask.distributed client for a ``--dask`` specification, closed on exit.

    Parameters
    ----------
    spec : str or None
        ``"local:K"`` starts a local cluster of K worker processes with one thread each (and
        stops it on exit); ``"tcp://HOST:PORT"`` connects to a scheduler started by
        ``dask scheduler`` with workers from ``dask worker`` (which keep running after exit);
        None yields None, for a build in this process.
    timeout : float, optional
        Seconds to wait for the scheduler to answer and for its first worker.

    Yields
    ------
    distributed.Client or None

    Raises
    ------
    ValueError
        For a malformed `spec`, a scheduler that does not answer within `timeout`, or one with
        no worker within `timeout`.
    TypeError
        If `spec` is neither a string nor None.

    Notes
    -----
    The worker processes of ``"local:K"`` are children of this process (their nannies run in
    it) and end with it however it ends, ``kill -9`` included: distributed starts each with a
    thread that exits the process when a pipe from its parent closes, which the kernel does at
    the parent's death (``tests/test_distributed.py`` kills a build and looks for survivors).

    Examples
    --------
    >>> with connect(None) as client:
    ...     print(client)
    None

    A build on two local processes (not run here: it starts a cluster)::

        with connect("local:2") as client:
            ds = build_atlas("1:100", "0.1,0.5", client=client)
    """
    kind, value = parse_spec(spec)
    if kind is None:
        yield None
        return
    import logging

    from distributed import Client, LocalCluster

    if kind == "local":
        import dask

        # dask starts workers with MALLOC_TRIM_THRESHOLD_=65536, which turns off glibc's
        # adaptive mmap threshold: every large temporary array of the engine is then mapped
        # and zero-filled afresh, about 1.4x the CPU time of the same chunk in this process
        # (item 4 of build_scripts/bench_distributed.py). Local workers keep glibc's defaults.
        with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}):
            cluster = LocalCluster(
                n_workers=value,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                # No dashboard; the scheduler's small HTTP server (health, metrics) goes on a
                # free local port, as its default 8787 warns when another cluster holds it.
                scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
                silence_logs=logging.ERROR,
            )
        with cluster, Client(cluster) as client:
            yield client
        return
    try:
        client = Client(value, timeout=timeout)
    except (OSError, TimeoutError) as err:  # distributed raises OSError after the timeout
        raise ValueError(
            f"`spec` names no reachable dask scheduler: {spec!r} "
            f"(no answer within {timeout:g} s: {err})."
        ) from None
    with client:
        try:
            client.wait_for_workers(1, timeout=timeout)
        except (OSError, TimeoutError):
            raise ValueError(
                f"`spec` names a dask scheduler with no workers: {spec!r} (none joined within "
                f"{timeout:g} s; start some with `dask worker {value}`)."
            ) from None
        yield client


def run_chunks(client, chunks, n, p, methods):
    """Compute chunks on a dask.distributed cluster, yielding each as it finishes.

    Parameters
    ----------
    client : distributed.Client
        A connected client (see :func:`connect`).
    chunks : sequence of atlas.chunks.Chunk
        The chunks to compute.
    n, p : numpy.ndarray
        The whole grid axes (the chunks index into them).
    methods : tuple of str
        The methods.

    Yields
    ------
    tuple
        ``(chunk, arrays)`` in the order the chunks finish, arrays as from
        :func:`atlas.chunks.compute_chunk`.

    Raises
    ------
    Exception
        The first error raised by a chunk on a worker after ``RETRIES`` reruns; the remaining
        tasks are cancelled.
    RuntimeError
        If the grid axes were lost with every worker holding them more than
        ``MAX_RESCATTERS`` times.

    Notes
    -----
    The axes are scattered once to every worker, and each chunk is one task (with a unique key,
    ``atlas-chunk-<index>-<run>-<round>``) that slices them; the costliest chunks are submitted
    first (:func:`atlas.chunks.cell_cost`). A worker that dies is survived:
    the scheduler reruns its tasks elsewhere, and if the axes were lost with it (every worker
    holding them died) they are scattered again and the cancelled tasks resubmitted. Closing
    the generator early cancels the tasks not yet finished.
    """
    chunks = list(chunks)
    if not chunks:
        return
    from distributed import as_completed

    methods = tuple(methods)
    run = uuid.uuid4().hex[:8]
    pending = {}  # key -> (chunk, round, future)
    state = {"round": -1, "axes": None}

    def submit(todo, priority=0):
        """Submit chunks with the current round's axes, scattering them again if lost."""
        round_ = state["round"]
        if state["axes"] is None:
            round_ = state["round"] = state["round"] + 1
            if round_ > MAX_RESCATTERS:
                raise RuntimeError(
                    f"the dask cluster lost the grid axes with its workers {round_} times; "
                    "the build stops (are workers being killed, or out of memory?)."
                )
            state["axes"] = client.scatter([n, p], broadcast=True, hash=False)
        n_future, p_future = state["axes"]
        keys = [f"atlas-chunk-{chunk.index:06d}-{run}-{round_}" for chunk in todo]
        futures = client.map(
            chunk_arrays,  # the worker's entry point: one chunk of the whole (scattered) axes
            todo,
            key=keys,
            retries=RETRIES,
            priority=priority,
            n=n_future,
            p=p_future,
            methods=methods,
        )
        for chunk, future in zip(todo, futures, strict=True):
            pending[future.key] = (chunk, round_, future)
        done.update(futures)

    done = as_completed(loop=client.loop, with_results=True, raise_errors=False)
    try:
        # client.map gives its tasks priorities in list order: the costliest chunks go first,
        # so that no long chunk starts last while the other workers idle.
        submit(sorted(chunks, key=lambda chunk: -chunk_work(n, p, chunk)))
        for future, result in done:
            chunk, round_, _ = pending.pop(future.key)
            status = future.status
            if status == "finished":
                future.release()
                yield chunk, result
            elif status == "cancelled":
                # The axes of this round were lost with the workers that held them.
                if round_ == state["round"]:
                    state["axes"] = None
                submit([chunk], priority=1)  # ahead of the chunks not yet started
            else:
                future.result()  # raises the task's error, with its traceback
                raise RuntimeError(f"dask task {future.key} ended with status {status!r}.")
    finally:
        if pending:
            with contextlib.suppress(Exception):  # the client may be closing already
                client.cancel([future for _, _, future in pending.values()], force=True)
        pending.clear()
        state["axes"] = None
