"""Regenerate ``tests/data/decision_regression.npz``: the decisions group on a sample (regression).

Not a reference: these are the group's own values (computed, regression value), stored as float64
before the cast to float32 so that a change to how :mod:`atlas.decision_cube` shares or batches
its work can be checked to leave every value identical bit for bit
(``tests/test_decision_regression.py``). The sample is drawn from the group's own grid
(``DECISION_N`` x ``DECISION_P``): 40 n from 1 to 10^8 (every regime: the direct pass up to
n = 2048, the bounded scan above it) x 12 p with both extremes and 1/2, every method, the
default levels. Stored per (method, n, p): the tail errors (2 tails x levels), the test sizes
and the exact test's sizes (3 alternatives x levels), each computed one cell and one method at a
time by the per-cell path (:func:`atlas.tails.cell_tail_errors` and
:func:`atlas.sizes.cell_all_sizes`, with the engine's bound above n = 2048), so the exact sizes
are stored for every method. The commit the values came from is stored beside them; the file is
written atomically.

Run from the repository root, on a commit whose values are to be frozen (about a minute)::

    .venv/bin/python build_scripts/make_decision_regression.py
"""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from atlas import METHODS, floatpath  # noqa: E402
from atlas.decision_cube import DECISION_N, DECISION_P, TAIL_LEVELS, TEST_LEVELS  # noqa: E402
from atlas.files import replacing  # noqa: E402
from atlas.grid import parse_n, parse_p  # noqa: E402
from atlas.sizes import ALTERNATIVES, cell_all_sizes  # noqa: E402
from atlas.tails import cell_tail_errors, error_bound  # noqa: E402

PATH = ROOT / "tests" / "data" / "decision_regression.npz"
_ALTERNATIVES = tuple(sorted(ALTERNATIVES))  # as the group stores them


def sample():
    """The n and p of the sample: indices into the group's own axes."""
    n_axis, p_axis = parse_n(DECISION_N), parse_p(DECISION_P)
    small = np.flatnonzero(n_axis <= 200)
    large = np.flatnonzero(n_axis > 200)
    n_index = np.concatenate([
        small[np.unique(np.round(np.geomspace(1, small.size, 12)).astype(int) - 1)],
        large[np.unique(np.round(np.linspace(0, large.size - 1, 28)).astype(int))],
    ])  # fmt: skip
    p_index = np.array([0, 1, 4, 8, 12, 16, 20, 24, 28, 33, 39, 40])
    return n_axis[n_index], p_axis[p_index]


def cell(n, p, method):
    """The per-cell path: tails (2, levels), sizes and exact sizes (3, levels)."""
    levels = tuple(sorted(TAIL_LEVELS)), tuple(sorted(TEST_LEVELS))
    bound = error_bound(n, p, method) if n > 2048 else None
    lower, upper = cell_tail_errors(n, p, method, levels[0], bound=bound)
    sizes = cell_all_sizes(n, p, method, levels[1], bound=bound)
    size = np.array([sizes[a][0] for a in _ALTERNATIVES])
    exact = np.array([sizes[a][1] for a in _ALTERNATIVES])
    return np.array([lower, upper]), size, exact


def compute(n, p, methods=METHODS):
    """Every value of the sample: arrays of shape (methods, n, p, ...)."""
    methods = tuple(sorted(methods))
    tails = np.empty((len(methods), n.size, p.size, 2, len(TAIL_LEVELS)))
    size = np.empty((len(methods), n.size, p.size, 3, len(TEST_LEVELS)))
    exact = np.empty_like(size)
    for m, method in enumerate(methods):
        for i, cn in enumerate(n.tolist()):
            for j, cp in enumerate(p.tolist()):
                tails[m, i, j], size[m, i, j], exact[m, i, j] = cell(int(cn), float(cp), method)
    return {"tail_error": tails, "test_size": size, "exact_test_size": exact}


def main():
    commit = subprocess.run(
        ["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True, check=True
    ).stdout.strip()
    n, p = sample()
    values = compute(n, p)
    with replacing(PATH) as tmp:
        with open(tmp, "wb") as handle:
            np.savez_compressed(
                handle,
                label=np.array("computed, regression value"),
                commit=np.array(commit),
                methods=np.array(sorted(METHODS)),
                n=n,
                p=p,
                tail_levels=np.array(sorted(TAIL_LEVELS)),
                test_levels=np.array(sorted(TEST_LEVELS)),
                **values,
            )
    size = PATH.stat().st_size
    print(
        f"wrote {PATH.relative_to(ROOT)} ({size / 1e3:.0f} kB): {n.size} n x {p.size} p x "
        f"{len(METHODS)} methods from {commit}"
    )


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
