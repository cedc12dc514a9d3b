"""Tests for atlas.pool: the worker processes of a build end with the build, however it ends.

The pool's results, errors and Ctrl-C are tested through atlas.build_atlas in test_build.py.
"""

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from atlas import pool

LINUX = sys.platform.startswith("linux")

# A child that ties its life to its parent's by `mode` ("signal": the kernel's death signal;
# "poll": the watching thread, the kernel's offer being refused), says so, then sleeps.
_CHILD = textwrap.dedent(
    """
    import os, sys, time
    from atlas import pool
    parent, mode = int(sys.argv[1]), sys.argv[2]
    if mode == "poll":
        pool._set_death_signal = lambda signum: False
    print(pool.end_with_parent(parent, poll=0.05), os.getpid(), flush=True)
    time.sleep(120)
    print("still here", flush=True)
    """
)
# The child's parent: starts the child with its own pid, then sleeps until killed.
_PARENT = textwrap.dedent(
    """
    import os, subprocess, sys, time
    subprocess.Popen([sys.executable, "-c", sys.argv[1], str(os.getpid()), sys.argv[2]])
    time.sleep(120)
    """
)


def _gone(pid, seconds):
    """Wait up to ``seconds`` for process ``pid`` to be gone or a zombie; whether it is."""
    deadline = time.monotonic() + seconds
    while True:
        try:
            if "zombie" in Path(f"/proc/{pid}/status").read_text():
                return True
        except FileNotFoundError:
            return True
        if time.monotonic() > deadline:
            return False
        time.sleep(0.05)


@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads /proc")
@pytest.mark.parametrize(
    "mode",
    [
        pytest.param("signal", marks=pytest.mark.skipif(not LINUX, reason="prctl is Linux's")),
        "poll",
    ],
)
def test_child_ends_when_its_parent_is_killed(mode):
    parent = subprocess.Popen(
        [sys.executable, "-c", _PARENT, _CHILD, mode], stdout=subprocess.PIPE, text=True
    )
    child = None
    try:
        said, pid = parent.stdout.readline().split()
        child = int(pid)
        assert said == mode
        parent.send_signal(signal.SIGKILL)
        assert parent.wait(timeout=30) == -signal.SIGKILL
        assert _gone(child, 5), f"the child {child} outlived its parent by 5 s"
        assert parent.stdout.read() == ""  # it never woke to print "still here"
    finally:
        if parent.poll() is None:
            parent.kill()
            parent.wait(timeout=30)
        if child is not None and not _gone(child, 0):
            os.kill(child, signal.SIGKILL)
        parent.stdout.close()


@pytest.mark.parametrize("mode", ["signal", "poll"])
def test_child_whose_parent_is_already_gone_exits_at_once(mode):
    # Handed a pid that is not its parent's, as when the parent died before the guard was set,
    # the child exits before the guard returns.
    code = (
        "import os, sys\n"
        "from atlas import pool\n"
        "if sys.argv[1] == 'poll':\n"
        "    pool._set_death_signal = lambda signum: False\n"
        "pool.end_with_parent(os.getpid())\n"
        "print('returned')\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, mode], capture_output=True, text=True, timeout=60
    )
    assert (out.returncode, out.stdout) == (pool.ORPHAN_STATUS, ""), out.stderr


def test_build_killed_with_sigkill_leaves_no_worker(killed_build):
    # The fault seen after the kill-and-resume check: the pool's two workers, asleep on the
    # pool's queue, re-parented to init, an hour later. Now the kernel kills them with the build.
    tree, survivors = killed_build(["--workers", "2"], workers=2)
    assert len(tree) == 2  # the two workers, and nothing else
    assert survivors == [], f"workers {survivors} of {sorted(tree)} outlived the build"
