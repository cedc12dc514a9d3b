"""Regenerate ``tests/data/engine_regression.npz``: the engine's results on a grid (regression).

Not a reference: these are the engine's own outputs (computed, regression value), stored so that
a change to the search or the evaluation of D can be checked to leave every result identical bit
for bit (``tests/test_engine_regression.py``). The grid covers the domain: n log-spread from 1 to
10^8 (with 10^10 and 10^15 beyond), p logit-spread from about 1e-7 to 1 - 1e-7 plus the extremes
1e-300, 1e-30 and 1 - 1e-12, every method, both metrics. Stored per (method, n, p): the interval
and CDF errors, their accuracies and the worst interval [lo, hi]; the commit the values came from
is stored beside them (``commit``), and the file is written atomically.

Run from the repository root, on a commit whose results are to be frozen (a few seconds)::

    .venv/bin/python build_scripts/make_engine_regression.py
"""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from atlas import METHODS, floatpath  # noqa: E402
from atlas.engine import evaluate  # noqa: E402
from atlas.files import replacing  # noqa: E402

PATH = ROOT / "tests" / "data" / "engine_regression.npz"
FIELDS = ("interval", "cdf", "lo", "hi", "interval_accuracy", "cdf_accuracy")


def grid():
    """The n and p axes of the regression grid."""
    n = np.unique(np.round(np.logspace(0, 8, 57)).astype(np.int64))
    n = np.concatenate([n, [10**10, 10**15]])
    t = np.linspace(-16.0, 16.0, 33)
    p = np.concatenate([1.0 / (1.0 + np.exp(-t)), [1e-300, 1e-30, 1.0 - 1e-12]])
    return n, np.unique(p)


def compute(n, p):
    """The engine's results on the grid: a dict of arrays of shape (methods, n, p)."""
    out = {
        f: np.empty((len(METHODS), n.size, p.size), np.int64 if f in ("lo", "hi") else float)
        for f in FIELDS
    }
    for j, value in enumerate(n.tolist()):
        ev = evaluate(value, p)
        for f in FIELDS:
            out[f][:, j] = getattr(ev, f)
    return out


def main():
    commit = subprocess.run(
        ["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True, check=True
    ).stdout.strip()
    n, p = grid()
    values = compute(n, p)
    with replacing(PATH) as tmp:
        with open(tmp, "wb") as handle:
            np.savez_compressed(
                handle,
                label=np.array("computed, regression value"),
                commit=np.array(commit),
                methods=np.array(METHODS),
                n=n,
                p=p,
                **values,
            )
    print(
        f"wrote {PATH.relative_to(ROOT)}: {n.size} n x {p.size} p x {len(METHODS)} methods "
        f"from {commit}"
    )


if __name__ == "__main__":
    floatpath.restart_on_reference_path()  # stored bits are the reference path's
    main()
