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
:mod:`atlas.sizes`. :func:`attach` merges the variables into an atlas Dataset.

This module builds the Dataset only; writing it into the atlas file (a schema change) is left
to :mod:`atlas.cube` and :mod:`atlas.store`.
"""

import numpy as np

from atlas.approximations import METHODS, check_method
from atlas.grid import parse_n, parse_p
from atlas.sizes import ALTERNATIVES, cell_all_sizes
from atlas.tails import cell_tail_errors, error_bound

__all__ = ["DECISION_N", "DECISION_P", "TAIL_LEVELS", "TEST_LEVELS", "attach", "decision_dataset"]

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
            "tail_level, X ~ Bin(n, p), F its CDF, G the approximation. Every tail probability "
            "of at least alpha is approximated within it. Exact (every admitted k accounted "
            "for), accurate to about (1 + value) 1e-12 before storage."
        ),
    },
    "test_size": {
        "long_name": "size of the test with the approximation's p-value",
        "units": "1",
        "description": (
            "P(reject H0 | H0 true) for H0: p = p0 = decision_p at nominal level alpha = "
            "test_level, X ~ Bin(n, p0), b its pmf: less = sum of b(k) over G(k) <= alpha; "
            "greater = sum of b(k) over 1 - G(k-1) <= alpha; two-sided = sum of b(k) over "
            "G(k) <= alpha/2 or 1 - G(k-1) <= alpha/2. Exact, accurate to about 1e-12 relative "
            "before storage."
        ),
    },
    "exact_test_size": {
        "long_name": "size of the exact binomial test",
        "units": "1",
        "description": (
            "the same sums as test_size with F(k) in place of G(k) and P(X >= k) in place of "
            "1 - G(k-1); at most test_level. The same for every approximation."
        ),
    },
}


def _cell(args):
    """Every metric of one (n, p) and method: tails (2, levels), sizes (3, levels) x 2."""
    n, p, method, tail_levels, test_levels = args
    bound = error_bound(n, p, method) if n > 2048 else None
    lower, upper = cell_tail_errors(n, p, method, tail_levels, bound=bound)
    sizes = cell_all_sizes(n, p, method, test_levels, bound=bound)
    size = np.array([sizes[a][0] for a in _ALTERNATIVES])
    exact = np.array([sizes[a][1] for a in _ALTERNATIVES])
    return np.array([lower, upper]), size, exact


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
    import xarray as xr

    n_axis, p_axis = parse_n(n), parse_p(p)
    methods = tuple(sorted({check_method(m) for m in methods}))
    # Index coordinates strictly increasing, as the atlas file requires of every index.
    tail_levels = tuple(sorted({float(a) for a in tail_levels}))
    test_levels = tuple(sorted({float(a) for a in test_levels}))
    tasks = [(int(cn), float(cp), m, tail_levels, test_levels)
             for m in methods for cn in n_axis for cp in p_axis]  # fmt: skip
    if workers and workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as pool:
            results = list(pool.map(_cell, tasks, chunksize=64))
    else:
        results = [_cell(t) for t in tasks]
    shape = (len(methods), n_axis.size, p_axis.size)
    tails = np.stack([r[0] for r in results]).reshape(shape + (2, len(tail_levels)))
    sizes = np.stack([r[1] for r in results]).reshape(shape + (3, len(test_levels)))
    exact = np.stack([r[2] for r in results]).reshape(shape + (3, len(test_levels)))[0]
    coords = {
        "approximation": list(methods),
        "tail": list(TAILS),
        "tail_level": list(tail_levels),
        "alternative": list(_ALTERNATIVES),
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
    ds["tail"].attrs.update(long_name="tail", description="lower: P(X <= k); upper: P(X >= k)")
    ds["tail_level"].attrs.update(long_name="smallest tail probability admitted (alpha)", units="1")
    ds["alternative"].attrs.update(
        long_name="alternative hypothesis", description="as scipy.stats.binomtest names them"
    )
    ds["test_level"].attrs.update(long_name="nominal level of the test (alpha)", units="1")
    ds["decision_n"].attrs.update(long_name="number of trials (grid of the decision metrics)",
                                  units="1")  # fmt: skip
    ds["decision_p"].attrs.update(
        long_name="success probability, p0 for the tests (grid of the decision metrics)",
        units="1",
    )
    ds.attrs.update(
        decision_grid=f"n: {n}; p: {p}" if isinstance(n, str) and isinstance(p, str) else "",
        decision_note=(
            "The tail and test-size metrics are stored on their own grid (decision_n, "
            "decision_p), coarser than the atlas's; any other cell, level or method is computed "
            "exactly on demand by atlas.tail_error and atlas.test_size."
        ),
    )
    return ds


def attach(atlas_ds, decision_ds):
    """The atlas Dataset with the decision variables, their coordinates and notes added.

    The approximations must be the same (the decision variables share the ``approximation``
    dimension).
    """
    import xarray as xr

    if list(atlas_ds["approximation"].values) != list(decision_ds["approximation"].values):
        raise ValueError(
            "`decision_ds` must hold the atlas's approximations; got "
            f"{list(decision_ds['approximation'].values)}."
        )
    merged = xr.merge([atlas_ds, decision_ds], combine_attrs="override")
    merged.attrs.update(atlas_ds.attrs)
    merged.attrs.update({k: decision_ds.attrs[k] for k in ("decision_grid", "decision_note")})
    return merged
