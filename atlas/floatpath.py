"""numpy's float path on this machine, and the reference path the stored results are made on.

numpy chooses its loops for ``exp``, ``log``, ``log1p``, ``expm1``, ``cbrt`` and ``power`` when
it is imported, by what the processor offers. On a processor with AVX-512 it takes vectorised
loops whose results differ from the others' in the last bit: over 100,001 points in [-30, 30]
(numpy 2.4.6, an Intel Xeon with AVX-512), 4,580 values of ``exp``, 4,801 of ``log1p`` and
49,355 of ``cbrt`` changed, each by an ulp or so. The engine's values move with them, within
their accuracy (see :mod:`atlas.engine`, "Accuracy") but not bit for bit.

The stored results are made on the *reference path*: x86-64 with numpy's AVX-512 loops turned
off (``NPY_DISABLE_CPU_FEATURES``), where numpy's baseline and AVX2 loops agree with each other
(checked on the engine's regression fixture with both turned off and on). That covers the
embedded atlas and its checksum, the regression fixtures in ``tests/data`` and everything that
compares against them: the build scripts and the test suite run on it. A user's own build is
correct on any path; it is the same bit for bit as ours only on the reference path. The grid
axes do not depend on the path (:mod:`atlas.grid` spaces them with the C library's functions),
so a build on another path computes the same cells. On an AVX-512 machine, the default atlas's
errors at equal p differ by at most 6.7e-16, 0.22 of their stated accuracy.

This module imports only the standard library at module level, so that it can be run from a
file before numpy is imported (``tests/conftest.py`` does so with :func:`runpy.run_path`).
"""

import os
import shlex
import subprocess
import sys

ENV = "NPY_DISABLE_CPU_FEATURES"
_RESTARTED = "APPROX_ATLAS_REFERENCE_RESTART"  # set on the one restart, so it happens once

# Prints the dispatched AVX-512 targets that this numpy has turned on, by numpy's own names (they
# changed in numpy 2.4: X86_V4, AVX512_ICL, AVX512_SPR; AVX512F, AVX512_SKX ... before).
_PROBE = """
try:
    from numpy._core._multiarray_umath import __cpu_dispatch__ as d, __cpu_features__ as f
except ImportError:
    from numpy.core._multiarray_umath import __cpu_dispatch__ as d, __cpu_features__ as f
print(" ".join(x for x in d if f.get(x) and (x.startswith("AVX512") or x == "X86_V4")))
"""


def wide_features():
    """The AVX-512 loops numpy uses in this process, as a tuple of numpy's feature names (empty on
    the reference path). Imports numpy."""
    scope = {}
    lines = []
    scope["print"] = lines.append
    exec(_PROBE, scope)  # noqa: S102 - the fixed probe above, shared with the subprocess
    return tuple(lines[0].split())


def describe():
    """``"reference"``, or ``"native (AVX512_ICL, ...)"`` naming the AVX-512 loops in use."""
    wide = wide_features()
    return f"native ({', '.join(wide)})" if wide else "reference"


def _probe_fresh(environ):
    """The AVX-512 loops a fresh interpreter with ``environ`` would use."""
    done = subprocess.run(
        [sys.executable, "-c", _PROBE], env=environ, capture_output=True, text=True, check=True
    )
    return tuple(done.stdout.split())


def reference_environment(environ=None):
    """A copy of ``environ`` (default: this process's) that puts numpy on the reference path.

    Appends the AVX-512 targets of the installed numpy to ``NPY_DISABLE_CPU_FEATURES``, asking a
    fresh interpreter which they are (numpy's names differ between versions, and a name numpy
    does not dispatch may not be listed there).
    """
    env = dict(os.environ if environ is None else environ)
    wide = _probe_fresh(env)
    if wide:
        current = env.get(ENV, "").split()
        env[ENV] = " ".join(dict.fromkeys(current + list(wide)))
    return env


def pin_before_numpy():
    """Put this process on the reference path; call before anything imports numpy.

    Returns the feature names turned off (empty when there were none to turn off).

    Raises
    ------
    RuntimeError
        If numpy is already imported: it has chosen its loops, and only a new process can change
        them (see :func:`restart_on_reference_path`).
    """
    if "numpy" in sys.modules:
        raise RuntimeError(
            "numpy is already imported, so its loops are chosen: call pin_before_numpy() first"
        )
    env = reference_environment()
    if env.get(ENV) != os.environ.get(ENV):
        os.environ[ENV] = env[ENV]
    return tuple(os.environ.get(ENV, "").split())


def restart_on_reference_path():
    """Run this program again on the reference path if numpy is not on it (for the build scripts).

    Replaces the process (``os.execve``, the same interpreter and command line) when numpy uses
    AVX-512 loops; returns at once otherwise. Raises RuntimeError if the loops are still in use
    after the restart.
    """
    wide = wide_features()
    if not wide:
        return
    if os.environ.get(_RESTARTED):
        raise RuntimeError(
            f"numpy still uses {', '.join(wide)} with {ENV}={os.environ.get(ENV, '')!r}: "
            "the reference float path cannot be set on this machine"
        )
    env = reference_environment()
    env[_RESTARTED] = "1"
    sys.stdout.flush()
    sys.stderr.flush()
    os.execve(sys.executable, sys.orig_argv, env)


def main():
    """Print the shell line that puts later commands on the reference path, for
    ``eval "$(python -m atlas.floatpath)"``; nothing to set prints a comment saying so."""
    env = reference_environment()
    if env.get(ENV, "") == os.environ.get(ENV, ""):  # the probe found no AVX-512 loop in use
        print(f"# numpy here is on the reference path already; nothing to set ({ENV})")
        return
    print(f"export {ENV}={shlex.quote(env[ENV])}")


if __name__ == "__main__":
    main()
