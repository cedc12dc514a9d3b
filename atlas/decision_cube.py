"""The tail and test-size metrics as cube variables, on their own (coarser) grid.

:func:`decision_dataset` computes, on a grid of its own, the variables the atlas cube gains for
issue 11, each with its own dimensions and attributes that explain it:

- ``tail_error(approximation, tail, tail_level, decision_n, decision_p)``: the tail relative
  error (:func:`atlas.tail_error`) of the lower and upper tails at each level;
- ``test_size(approximation, alternative, test_level, decision_n, decision_p)``: the size of
  the test with the approximation's p-value (:func:`atlas.test_size`);
- ``exact_test_size(alternative, test_level, decision_n, decision_p)``: the exact test's size.

The grid is coarser than the atlas's (``DECISION_N``: every n to 200, then 121 n log-spaced to
10^8; ``DECISION_P``: 41 p logit-spaced from 1e-4 to 0.9999, with 1/2), because a cell of these
metrics costs a few milliseconds at large n and the embedded file must stay small; its
dimensions are ``decision_n`` and ``decision_p`` so that they never clash with the atlas's ``n``
and ``p``. Any other cell, level or method is computed on demand by :mod:`atlas.tails` and
:mod:`atlas.sizes`.

This module builds the group's Dataset (the ``decisions`` group of :data:`atlas.store.GROUPS`);
:func:`attach` adds it to an atlas Dataset (:func:`atlas.cube.attach`), which
:func:`atlas.build_atlas` does with ``decisions=True``; :func:`open_decision_cube` reads it back
from an atlas file. Writing and checking the file is :mod:`atlas.cube` and :mod:`atlas.store`.
"""

from datetime import datetime, timezone

import numpy as np

from atlas.approximations import METHODS, check_method
from atlas.grid import parse_n, parse_p
from atlas.sizes import ALTERNATIVES, cell_all_sizes, rejected_mass
from atlas.tails import (
    DIRECT_MAX,
    Counts,
    cell_tail_errors,
    error_bounds,
    profile_tail_errors,
    share,
)

__all__ = [
    "DECISION_N",
    "DECISION_P",
    "TAIL_LEVELS",
    "TEST_LEVELS",
    "attach",
    "decision_dataset",
    "open_decision_cube",
]

DECISION_N = "1:200,log:200:100000000:121"
DECISION_P = "logit:0.0001:0.9999:41,0.5"
TAIL_LEVELS = (0.05, 0.01, 0.001, 0.0001)
TEST_LEVELS = (0.1, 0.05, 0.01, 0.001)
TAILS = ("lower", "upper")
_ALTERNATIVES = tuple(sorted(ALTERNATIVES))  # greater, less, two-sided: an increasing index

ATTRIBUTES = {
    "tail_error": {
        "long_name": "tail relative error",
        "units": "1",
        "description": (
            "lower: max over 0 <= k <= n with F(k) >= alpha of |G(k)/F(k) - 1|; upper: max over "
            "0 <= k <= n with P(X >= k) >= alpha of |(1 - G(k-1))/P(X >= k) - 1|; alpha = "
            "tail_level, X ~ Bin(n, p) with n = decision_n and p = decision_p, F its CDF, G the "
            "approximation. Every tail probability of at least alpha is approximated within it. "
            "Exact (every admitted k accounted for), accurate to about (1 + value) 1e-12 before "
            "storage as float32 (7 significant digits)."
        ),
    },
    "test_size": {
        "long_name": "size of the test with the approximation's p-value",
        "units": "1",
        "description": (
            "P(reject H0 | H0 true) for H0: p = p0 = decision_p at nominal level alpha = "
            "test_level, X ~ Bin(n, p0) with n = decision_n, b its pmf: less = sum of b(k) over "
            "G(k) <= alpha; "
            "greater = sum of b(k) over 1 - G(k-1) <= alpha; two-sided = sum of b(k) over "
            "G(k) <= alpha/2 or 1 - G(k-1) <= alpha/2. Exact, accurate to about 1e-12 relative "
            "before storage as float32 (7 significant digits)."
        ),
    },
    "exact_test_size": {
        "long_name": "size of the exact binomial test",
        "units": "1",
        "description": (
            "the same sums as test_size with F(k) in place of G(k) and P(X >= k) in place of "
            "1 - G(k-1); at most test_level. The same for every approximation; float64."
        ),
    },
}


def _row(args):
    """Every metric of one n at every p and method.

    Returns tails (methods, p, 2, levels), sizes and exact sizes (methods, p, 3, levels); the
    exact sizes are the same for every method (computed once, repeated).

    The work that does not depend on the method is done once: up to n = ``DIRECT_MAX`` the
    exact part of every count at every p (:class:`atlas.tails.Counts`) and each method's G at
    every p in one call; above it, one :func:`atlas.tails.share` per p for the seven methods.
    Each value is the one the per-cell functions give (:func:`atlas.tails.cell_tail_errors`,
    :func:`atlas.sizes.cell_all_sizes`), bit for bit: the same operations on the same numbers,
    row by row (tests/test_decision_regression.py).
    """
    n, p_axis, methods, tail_levels, test_levels = args
    alphas, levels = np.asarray(tail_levels), np.asarray(test_levels)
    tails = np.empty((len(methods), p_axis.size, 2, alphas.size))
    sizes = np.empty((len(methods), p_axis.size, 3, levels.size))
    exact = np.empty_like(sizes)
    if n <= DIRECT_MAX:
        counts = Counts(n, p_axis)
        exact[:] = np.stack([rejected_mass(counts.mass, counts.lower, counts.upper, levels, a)
                             for a in _ALTERNATIVES], axis=1)  # fmt: skip
        for i, method in enumerate(methods):
            g, gu = counts.approx(method)
            tails[i] = np.stack(profile_tail_errors(counts.lower, counts.upper, g, gu, alphas), 1)
            sizes[i] = np.stack([rejected_mass(counts.mass, g, gu, levels, a)
                                 for a in _ALTERNATIVES], axis=1)  # fmt: skip
        return tails, sizes, exact
    bounds = [error_bounds(n, p_axis, method) for method in methods]
    for j, p in enumerate(p_axis.tolist()):
        shared = share(n, p)
        for i, method in enumerate(methods):
            bound = bounds[i][j]
            tails[i, j] = cell_tail_errors(n, p, method, alphas, bound=bound, shared=shared)
            got = cell_all_sizes(n, p, method, levels, bound=bound, shared=shared)
            sizes[i, j] = [got[a][0] for a in _ALTERNATIVES]
            exact[i, j] = [got[a][1] for a in _ALTERNATIVES]
    return tails, sizes, exact


def decision_dataset(
    n=DECISION_N,
    p=DECISION_P,
    *,
    methods=METHODS,
    tail_levels=TAIL_LEVELS,
    test_levels=TEST_LEVELS,
    workers=None,
    dtype="float32",
):
    """The tail and test-size variables on their own grid, as an ``xarray.Dataset``.

    Parameters
    ----------
    n, p : str or sequence, optional
        The grid (:func:`atlas.grid.parse_n`, :func:`atlas.grid.parse_p`).
    methods : sequence of str, optional
        Every method by default; stored in alphabetical order, as the atlas stores them.
    tail_levels, test_levels : sequence of float, optional
        The levels (default 0.05, 0.01, 0.001, 0.0001 and 0.1, 0.05, 0.01, 0.001); stored in
        increasing order, as every index of the atlas file (alternatives alphabetically).
    workers : int, optional
        Processes to compute in (default: this process only).
    dtype : str, optional
        Storage type of tail_error and test_size (default float32, 7 significant digits);
        exact_test_size is stored as float64.

    Returns
    -------
    xarray.Dataset

    Examples
    --------
    >>> ds = decision_dataset("50", "0.1", methods=["normal_cc"])
    >>> round(float(ds.test_size.sel(alternative="greater", test_level=0.05).item()), 4)
    0.0579
    """
    import time

    import xarray as xr

    from atlas import __version__

    started = time.perf_counter()
    n_spec = n if isinstance(n, str) else ",".join(str(int(v)) for v in parse_n(n))
    p_spec = p if isinstance(p, str) else ",".join(repr(float(v)) for v in parse_p(p))
    n_axis, p_axis = parse_n(n), parse_p(p)
    methods = tuple(sorted({check_method(m) for m in methods}))
    # Index coordinates strictly increasing, as the atlas file requires of every index.
    tail_levels = tuple(sorted({float(a) for a in tail_levels}))
    test_levels = tuple(sorted({float(a) for a in test_levels}))
    # One task per n, every p and method (the method-free work shared: _row); the largest n
    # first, so that workers finish together.
    tasks = [(int(cn), p_axis, methods, tail_levels, test_levels) for cn in n_axis[::-1]]
    if workers and workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as pool:
            results = list(pool.map(_row, tasks))[::-1]
    else:
        results = [_row(t) for t in tasks][::-1]
    # (methods, n, p, 2 or 3, levels); the exact sizes of the first method stand for all.
    tails = np.stack([r[0] for r in results], axis=1)
    sizes = np.stack([r[1] for r in results], axis=1)
    exact = np.stack([r[2] for r in results], axis=1)[0]
    coords = {
        "approximation": np.asarray(methods, dtype=object),
        "tail": np.asarray(TAILS, dtype=object),
        "tail_level": list(tail_levels),
        "alternative": np.asarray(_ALTERNATIVES, dtype=object),
        "test_level": list(test_levels),
        "decision_n": n_axis,
        "decision_p": p_axis,
    }
    ds = xr.Dataset(
        {
            "tail_error": (
                ("approximation", "tail", "tail_level", "decision_n", "decision_p"),
                tails.transpose(0, 3, 4, 1, 2).astype(dtype),
            ),
            "test_size": (
                ("approximation", "alternative", "test_level", "decision_n", "decision_p"),
                sizes.transpose(0, 3, 4, 1, 2).astype(dtype),
            ),
            "exact_test_size": (
                ("alternative", "test_level", "decision_n", "decision_p"),
                exact.transpose(2, 3, 0, 1),
            ),
        },  # fmt: skip
        coords=coords,
    )
    for name, attrs in ATTRIBUTES.items():
        ds[name].attrs.update(attrs)
    for name, attrs in COORDINATE_ATTRIBUTES.items():
        ds[name].attrs.update(attrs)
    seconds = time.perf_counter() - started
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    ds.attrs.update(
        decision_n_spec=n_spec,
        decision_p_spec=p_spec,
        decision_note=(
            "The tail and test-size metrics are stored on their own grid (decision_n, "
            "decision_p), coarser than the atlas's, for every approximation of the atlas, "
            "tail_error and test_size as float32 (7 significant digits), exact_test_size as "
            "float64; any other cell, level or method is computed exactly on demand by "
            "atlas.tail_error and atlas.test_size."
        ),
        history=(
            f"{stamp} approx-atlas {__version__} decisions: {n_axis.size} n x {p_axis.size} p "
            f"x {len(methods)} methods, {len(tail_levels)} tail and {len(test_levels)} test "
            f"levels with {workers or 1} worker process(es), {seconds:.1f} s"
        ),
    )
    return ds


#: The attributes of the group's index coordinates.
COORDINATE_ATTRIBUTES = {
    "tail": {
        "long_name": "tail of the distribution",
        "description": "lower: the lower tails P(X <= k), approximated by G(k); upper: the upper "
        "tails P(X >= k) = 1 - F(k-1), approximated by 1 - G(k-1)",
    },
    "tail_level": {
        "long_name": "smallest tail probability admitted (alpha)",
        "units": "1",
        "description": "tail_error counts the tails of probability at least alpha; strictly "
        "increasing",
    },
    "alternative": {
        "long_name": "alternative hypothesis of the test of H0: p = p0",
        "description": "less (reject for small X), greater (reject for large X), two-sided; as "
        "scipy.stats.binomtest names them, in alphabetical order",
    },
    "test_level": {
        "long_name": "nominal level of the test (alpha)",
        "units": "1",
        "description": "the test rejects H0 when its p-value is at most alpha (alpha/2 in each "
        "tail for two-sided); strictly increasing",
    },
    "decision_n": {
        "long_name": "number of trials (grid of the tail and test-size variables)",
        "units": "1",
        "description": "n of X ~ Bin(n, p); strictly increasing; see decision_n_spec",
    },
    "decision_p": {
        "long_name": "success probability, p0 for the tests (grid of the tail and test-size "
        "variables)",
        "units": "1",
        "description": "p of X ~ Bin(n, p), 0 < p < 1; strictly increasing; see decision_p_spec",
    },
}


def attach(atlas_ds, decision_ds):
    """The atlas Dataset with the decision variables, their coordinates and notes added.

    The approximations must be the same (the decision variables share the ``approximation``
    dimension); see :func:`atlas.cube.attach`.
    """
    from atlas.cube import attach as attach_group

    return attach_group(atlas_ds, decision_ds)


def open_decision_cube(path=None):
    """The tail and test-size variables of an atlas file, read into memory.

    Parameters
    ----------
    path : str or os.PathLike, optional
        An atlas file holding them; default the embedded atlas.

    Returns
    -------
    xarray.Dataset
        ``tail_error``, ``test_size`` and ``exact_test_size`` over their own dimensions
        (``decision_n``, ``decision_p``, ...), with the group's attributes.

    Raises
    ------
    FileNotFoundError, ValueError
        As :func:`atlas.cube.load_dataset`; ValueError if the file holds no such variables.
    """
    from atlas import cube, store

    with cube.load_dataset(store.default_path() if path is None else path) as ds:
        return cube.group_part(ds, "decisions").load()
