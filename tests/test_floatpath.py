"""The reference float path: the test process runs on it, and off it results move by ulps only."""

import io
import os
import subprocess
import sys

import numpy as np

from atlas import floatpath
from atlas.engine import evaluate


def test_tests_run_on_the_reference_path():
    # The regression fixtures and the embedded atlas hold the reference path's bits
    # (tests/conftest.py sets it before numpy is imported).
    assert floatpath.describe() == "reference", (
        f"numpy uses AVX-512 loops here; run with {floatpath.ENV} from "
        "atlas.floatpath.reference_environment()"
    )


def test_reference_environment_turns_off_only_what_this_numpy_uses():
    env = floatpath.reference_environment({**os.environ, floatpath.ENV: ""})
    assert floatpath._probe_fresh(env) == ()
    names = env.get(floatpath.ENV, "").split()
    assert all(name.startswith("AVX512") or name == "X86_V4" for name in names)


def test_pin_before_numpy_refuses_once_numpy_is_imported():
    try:
        floatpath.pin_before_numpy()
    except RuntimeError as error:
        assert "already imported" in str(error)
    else:  # pragma: no cover - numpy is imported by this module
        raise AssertionError("pin_before_numpy accepted an imported numpy")


def test_native_path_moves_engine_values_within_their_accuracy():
    # Off the reference path (where the machine has AVX-512) the values may differ in the last
    # bits, never by more than the accuracy the engine states.
    code = (
        "import numpy as np, sys; from atlas.engine import evaluate; "
        "ev = evaluate(100000, np.array([0.001, 0.3, 0.5]), methods=('normal_cc', 'poisson')); "
        "np.save(sys.stdout.buffer, np.stack([ev.interval, ev.interval_accuracy]))"
    )
    env = {k: v for k, v in os.environ.items() if k != floatpath.ENV}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, check=True)
    native = np.load(io.BytesIO(out.stdout))
    ev = evaluate(100000, np.array([0.001, 0.3, 0.5]), methods=("normal_cc", "poisson"))
    assert np.all(np.abs(native[0] - ev.interval) <= ev.interval_accuracy + native[1])


def test_default_grid_is_the_same_off_the_reference_path():
    # The default axes are spaced with the C library's exp, log and pow, not numpy's loops, so a
    # process off the reference path builds the embedded atlas's own coordinates.
    code = (
        "import sys, numpy as np; from atlas import grid; "
        "np.save(sys.stdout.buffer, np.concatenate([grid.default_p(), grid.default_n()]))"
    )
    env = {k: v for k, v in os.environ.items() if k != floatpath.ENV}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, check=True)
    from atlas import grid, store

    native = np.load(io.BytesIO(out.stdout))
    here = np.concatenate([grid.default_p(), grid.default_n()])
    assert np.array_equal(native, here)
    import xarray as xr

    with xr.open_dataset(store.default_path()) as ds:
        assert np.array_equal(ds["p"].values, grid.default_p())


def test_module_prints_the_shell_line():
    # `eval "$(python -m atlas.floatpath)"` puts later commands on the reference path; here
    # (already on it) there is nothing to set, and the line says so as a shell comment.
    out = subprocess.run(
        [sys.executable, "-m", "atlas.floatpath"], capture_output=True, text=True, check=True
    ).stdout
    assert out.startswith("# numpy here is on the reference path already")
    env = {k: v for k, v in os.environ.items() if k != floatpath.ENV}
    line = subprocess.run(
        [sys.executable, "-m", "atlas.floatpath"],
        env=env,
        capture_output=True,
        text=True,
        check=True,
    ).stdout.strip()
    if floatpath._probe_fresh(env):  # a machine with AVX-512: the export line
        assert line.startswith(f"export {floatpath.ENV}=")
    else:
        assert line.startswith("#")
