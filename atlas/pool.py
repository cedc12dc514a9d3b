"""A build's local process pool, whose worker processes end with the process that started them.

:func:`run_chunks` computes chunks (:mod:`atlas.chunks`) in K local worker processes and yields
each as it finishes, the costliest first. Ctrl-C reaches the parent alone, which stops the
workers; an error or the consumer stopping the generator stops them too.

A parent that dies without a word (``kill -9``, the out-of-memory killer, a crash) cannot stop
anything: its workers would be left asleep on the pool's queue, re-parented to init, for as long
as the machine runs. So every worker ties its life to the parent's as it starts
(:func:`end_with_parent`): on Linux the kernel kills it when the parent dies; elsewhere a thread
in the worker watches the parent and ends the worker when it is gone.
"""

import ctypes
import os
import signal
import sys
import threading
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from multiprocessing import get_all_start_methods, get_context

from atlas.chunks import chunk_arrays, chunk_work

__all__ = ["ORPHAN_STATUS", "POLL_INTERVAL", "end_with_parent", "run_chunks"]

#: Seconds between two looks at the parent, where the kernel cannot signal its death.
POLL_INTERVAL = 0.5
#: The exit status of a process that finds its parent gone.
ORPHAN_STATUS = 70
# PR_SET_PDEATHSIG from <linux/prctl.h>: the signal the kernel sends when the parent dies.
_PR_SET_PDEATHSIG = 1


def run_chunks(chunks, n, p, methods, *, workers):
    """Compute chunks in a pool of local worker processes, yielding each as it finishes.

    Parameters
    ----------
    chunks : sequence of atlas.chunks.Chunk
        The chunks to compute.
    n, p : numpy.ndarray
        The whole grid axes (the chunks index into them).
    methods : tuple of str
        The methods.
    workers : int
        The number of worker processes (at most one per chunk is started), ``workers >= 1``.

    Yields
    ------
    tuple
        ``(chunk, arrays)`` in the order the chunks finish, arrays as from
        :func:`atlas.chunks.compute_chunk`.

    Raises
    ------
    RuntimeError
        If a worker process died (out of memory, or killed); no further chunk is yielded.
    Exception
        The first error raised by a chunk in a worker; the workers are stopped.

    Notes
    -----
    Workers are forked where the platform can fork (no re-import), spawned elsewhere. Each
    ignores SIGINT (Ctrl-C goes to the parent, which stops them) and calls
    :func:`end_with_parent` with this process's pid. An error, an interrupt or closing the
    generator early terminates the workers at once rather than letting them finish.
    """
    chunks = list(chunks)
    if not chunks:
        return
    # Costliest chunks first, so that no long chunk starts last while the other workers idle.
    order = sorted(chunks, key=lambda chunk: -chunk_work(n, p, chunk))
    by_index = {chunk.index: chunk for chunk in chunks}
    # fork starts workers without re-importing; elsewhere spawn is the safe default. Either way
    # this process is the workers' parent, as end_with_parent requires (a forkserver is not).
    context = get_context("fork" if "fork" in get_all_start_methods() else "spawn")
    pool = ProcessPoolExecutor(
        max_workers=min(workers, len(chunks)),
        mp_context=context,
        initializer=_start_worker,
        initargs=(os.getpid(),),
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


def _run_chunk(n, p, methods, chunk):
    """The workers' entry point: the chunk's index and its arrays."""
    return chunk.index, chunk_arrays(chunk, n, p, methods)


def _start_worker(parent_pid):
    """Pool initializer: leave Ctrl-C to the parent, and end with the parent."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    end_with_parent(parent_pid)


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


def end_with_parent(parent_pid, *, poll=POLL_INTERVAL):
    """Make this process end when its parent ends, however the parent ends.

    Call it first thing in a child process (a pool initializer, say).

    Parameters
    ----------
    parent_pid : int
        The parent's pid, read by the parent (``os.getpid()`` there) and handed to the child.
        It must be this process's parent: the process that forked or spawned it.
    poll : float, optional
        Seconds between two looks at the parent where the kernel cannot signal its death.

    Returns
    -------
    str
        ``"signal"`` if the kernel will kill this process when the parent dies (Linux), or
        ``"poll"`` if a daemon thread watches the parent instead.

    Notes
    -----
    If the parent is already gone (this process was re-parented, so ``os.getppid()`` is no
    longer `parent_pid`), the process exits at once with status ``ORPHAN_STATUS``.

    On Linux, ``prctl(PR_SET_PDEATHSIG, SIGKILL)`` asks the kernel for SIGKILL when the parent
    dies: it cannot be missed, caught or ignored, and it comes even while this process computes
    in C with the GIL held. SIGKILL rather than SIGTERM, as a worker has nothing to clean up:
    its results were for the parent, and the checkpoint is written by the parent. The parent
    may die between the fork and the prctl call, when no signal would come, so
    ``os.getppid()`` is compared with `parent_pid` after the call. The kernel counts the
    parent's death from the end of the *thread* that started this process, so that thread must
    outlive the child: :func:`run_chunks` starts and stops its pool in one thread.

    Elsewhere, a daemon thread compares ``os.getppid()`` with `parent_pid` every `poll`
    seconds (a POSIX system re-parents an orphan, to init or a sub-reaper) and ends the process
    with ``os._exit`` when they differ: no clean-up, as nothing the process holds has anywhere
    to go.
    """
    if _set_death_signal(signal.SIGKILL):
        _exit_if_orphaned(parent_pid)
        return "signal"
    _exit_if_orphaned(parent_pid)
    threading.Thread(
        target=_watch_parent, args=(parent_pid, poll), name="atlas-watch-parent", daemon=True
    ).start()
    return "poll"


def _set_death_signal(signum):
    """Ask the Linux kernel for `signum` when the parent dies; False where that is not possible."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        prctl = ctypes.CDLL(None, use_errno=True).prctl
    except (OSError, AttributeError):  # no C library to load, or one without prctl
        return False
    zero = ctypes.c_ulong(0)
    return prctl(_PR_SET_PDEATHSIG, ctypes.c_ulong(int(signum)), zero, zero, zero) == 0


def _exit_if_orphaned(parent_pid):
    """End this process now if it has been re-parented: `parent_pid` died."""
    if os.getppid() != parent_pid:
        os._exit(ORPHAN_STATUS)


def _watch_parent(parent_pid, poll):
    """The fallback's daemon thread: end the process when the parent is gone."""
    while True:
        _exit_if_orphaned(parent_pid)
        time.sleep(poll)
