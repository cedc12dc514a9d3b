"""Tests of atlas.query: lookups, verdicts, minimum n and best method against brute force.

Sources of the expected values, named beside each check:

- "brute force": :func:`atlas.worst_error` / :func:`atlas.worst_interval` (the engine) evaluated
  at every cell of the grid, independently of the cube and of atlas.query's indexing.
- "computed, regression value": figures of /work/shared/REFERENCES.md computed to the project's
  definitions; they catch a changed formula, they are not published numbers.
- Common practice as REFERENCES.md labels it.

The atlas is the tiny one of tests/conftest.py: n = 1..40 and 8 log-spaced n to 5000, seven p.
"""

import dataclasses
import os
import pathlib
import re

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose, assert_array_equal

import atlas
from atlas import METHODS, cube, query, store, worst_error, worst_interval
from atlas.notation import format_bound
from atlas.query import Atlas, Verdict, check_tol, open_atlas

# The cube holds the engine's own float64 results, so on-grid values agree to rounding only.
# (source: the build stores evaluate()'s arrays unchanged; 1e-12 allows summation-order effects)
SAME = 1e-12
# float32 keeps a relative rounding error of at most 2**-24 = 5.96e-8 (IEEE 754 binary32).
FLOAT32 = 2.0**-24

TOLS = (1.0, 0.05, 0.01, 0.005, 1e-3, 1e-4, 1e-6, 1e-12)


@pytest.fixture(scope="module")
def at(small_atlas):
    opened = open_atlas(small_atlas["float64"])
    yield opened
    opened.close()


@pytest.fixture(scope="module")
def at32(small_atlas):
    opened = open_atlas(small_atlas["float32"])
    yield opened
    opened.close()


def brute_errors(n_axis, p_values, method, metric):
    """Engine errors over the grid n x p (brute force), shape (len(n), len(p))."""
    return np.asarray(
        worst_error(n_axis[:, None], np.asarray(p_values)[None, :], method=method, metric=metric)
    )


# --- opening and the grid --------------------------------------------------------------------


def test_open_reads_axes_and_methods(at, small_atlas):
    ds = small_atlas["dataset"]
    assert at.methods == tuple(sorted(METHODS))  # the file's order: alphabetical
    assert_array_equal(at.n, ds["n"].values)
    assert_array_equal(at.p, ds["p"].values)
    assert at.dense_n == 40  # "1:40,log:50:5000:8": every integer up to 40
    assert "7 methods" in repr(at)


def test_opening_reads_no_variable_and_caches_one_method(small_atlas):
    with open_atlas(small_atlas["float64"]) as fresh:
        assert [k for k in fresh._cache if k not in ("axes", "methods")] == []
        fresh.error(10, 0.5)
        fresh.error([10, 20], 0.5)
        read = [k for k in fresh._cache if k not in ("axes", "methods")]
        assert read == [("interval_error", "normal_cc"), ("interval_accuracy", "normal_cc")]


def test_one_reader_for_the_query_and_the_cube():
    # atlas.query and atlas.cube read files through atlas.store: no copy of the schema left.
    assert not hasattr(query, "_SCHEMA_VERSION") and not hasattr(query, "_open_netcdf")
    assert not hasattr(cube, "SCHEMA_VERSION") and not hasattr(cube, "default_path")
    assert query.store is store and cube.store is store


def test_query_layer_does_not_import_xarray(small_atlas):
    import subprocess
    import sys

    script = (
        "import sys; from atlas.query import open_atlas\n"
        "at = open_atlas(sys.argv[1]); at.is_safe(50, 0.1, 0.01); at.min_n(0.1, 0.01)\n"
        "at.best_method(50, 0.1)\n"
        "print(sorted(m for m in ('xarray', 'pandas', 'dask', 'matplotlib', 'scipy.stats')"
        " if m in sys.modules))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", script, str(small_atlas["float64"])],
        capture_output=True, text=True, timeout=120, cwd=pathlib.Path(atlas.__file__).parent.parent,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.strip() == "[]"


def test_dataset_is_built_on_the_open_file(small_atlas):
    with open_atlas(small_atlas["float32"]) as opened:
        before = opened.error(50, 0.1)
        ds = opened.dataset
        assert isinstance(ds, xr.Dataset) and opened.dataset is ds
        assert ds["interval_error"].dtype == np.float32
        expected = cube.compact(small_atlas["dataset"], "float32")
        xr.testing.assert_equal(ds.load(), expected)
        for name in expected.variables:
            assert ds[name].attrs == expected[name].attrs, name
        skip = ("history",)  # compact() stamps the time of the conversion
        assert {k: v for k, v in ds.attrs.items() if k not in skip} == {
            k: v for k, v in expected.attrs.items() if k not in skip
        }
        assert opened.error(50, 0.1) == before
        assert opened.attrs["checksum"] == ds.attrs["checksum"]


def test_open_missing_file():
    with pytest.raises(FileNotFoundError, match="`path` names no atlas file"):
        open_atlas("/nonexistent/atlas.nc")


@pytest.mark.skipif(not store.default_path().exists(), reason="the embedded atlas is not built yet")
def test_open_embedded_default():
    with open_atlas() as embedded:
        assert embedded.path == store.default_path()
        assert "normal_cc" in embedded.methods
        assert embedded.dense_n == 2000  # DEFAULT_N_SPEC = "1:2000,log:..."


def test_on_grid(at):
    assert at.on_grid(50, 0.1)
    assert not at.on_grid(51, 0.1)
    assert not at.on_grid(50, 0.1 + 0.2 - 0.2 + 1e-9)
    assert_array_equal(at.on_grid(p=[0.1, 0.2]), [True, False])
    assert_array_equal(at.on_grid(n=[40, 41, 50]), [True, False, True])
    assert not Atlas(at.dataset.sel(approximation=["normal_cc"])).on_grid(
        50, 0.1, method="edgeworth_cc"
    )


def test_select_p(at):
    assert_array_equal(at.select_p(0.05, 0.5), [0.05, 0.1, 0.3, 0.5])
    assert_array_equal(at.select_p(0.1, 0.1), [0.1])


# --- error ------------------------------------------------------------------------------------


@pytest.mark.parametrize("metric", ["interval", "cdf"])
@pytest.mark.parametrize("method", ["normal_cc", "edgeworth_cc", "poisson", "peizer_pratt"])
def test_error_on_grid_matches_brute_force(at, method, metric):
    n, p = at.n[:, None], at.p[None, :]
    got = at.error(n, p, method=method, metric=metric)
    assert got.dtype == np.float64 and got.shape == (at.n.size, at.p.size)
    assert_allclose(got, brute_errors(at.n, at.p, method, metric), rtol=SAME, atol=0)


def test_error_float32_cube_returns_float64(at, at32):
    assert at32.dataset["interval_error"].dtype == np.float32
    assert at32.dataset.attrs["error_precision"].startswith("float32")
    n, p = at.n[:, None], at.p[None, :]
    for metric in ("interval", "cdf"):
        got = at32.error(n, p, metric=metric)
        assert got.dtype == np.float64
        assert_allclose(got, at.error(n, p, metric=metric), rtol=FLOAT32, atol=0)
    assert isinstance(at32.error(50, 0.1), float)


def test_error_off_grid_is_computed_exactly(at):
    # 41 lies between grid n 40 and 50; 0.1 + 0.2 is 0.30000000000000004, not the grid's 0.3:
    # exact float equality, no tolerance on p (and no interpolation).
    p_near = 0.1 + 0.2
    assert p_near != 0.3
    for n, p in [(41, 0.3), (50, p_near), (41, 0.123), (7, 0.77)]:
        assert not at.on_grid(n, p)
        assert_allclose(at.error(n, p), worst_error(n, p), rtol=SAME, atol=0)  # brute force
    assert at.error(50, p_near) != at.error(50, 0.3)


def test_error_mixed_cells_and_broadcasting(at):
    n = np.array([[10], [41], [5000], [4999]])
    p = np.array([0.1, 0.5, np.nextafter(0.5, 1.0)])
    got = at.error(n, p, metric="cdf")
    assert got.shape == (4, 3)
    assert_allclose(got, worst_error(n, p, metric="cdf"), rtol=SAME, atol=0)  # brute force
    assert_array_equal(at.on_grid(n, p), [[1, 1, 0], [0, 0, 0], [1, 1, 0], [0, 0, 0]])


def test_error_method_not_stored_is_computed(at):
    only_cc = Atlas(at.dataset.sel(approximation=["normal_cc"]))
    assert only_cc.methods == ("normal_cc",)
    got = only_cc.error(at.n[:, None], at.p[None, :], method="edgeworth2_cc")
    assert_allclose(got, brute_errors(at.n, at.p, "edgeworth2_cc", "interval"), rtol=SAME)
    assert only_cc.is_safe(50, 0.1, 0.01, method="edgeworth2_cc").source == "computed"


def test_error_scalar_in_float_out(at):
    assert isinstance(at.error(50, 0.1), float)
    assert isinstance(at.error(np.int64(41), np.float64(0.2)), float)
    assert at.error([50], [0.1]).shape == (1,)


def test_reference_cdf_errors_at_50_01(at):
    # (computed, REFERENCES.md table of max CDF errors at (n, p) = (50, 0.1), 3-4 digits given:
    # rtol 5e-3 covers the rounding of 3 significant digits)
    table = {
        "normal": 1.161e-1,
        "normal_cc": 2.437e-2,
        "edgeworth_cc": 4.623e-3,
        "camp_paulson": 8.04e-4,
        "peizer_pratt": 2.04e-4,
        "poisson": 1.47e-2,
    }
    for method, value in table.items():
        assert_allclose(at.error(50, 0.1, method=method, metric="cdf"), value, rtol=5e-3)


# --- verdicts ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("n", "p", "source"),
    [(50, 0.1, "atlas"), (10, 0.5, "atlas"), (5000, 0.01, "atlas"), (41, 0.1, "computed"),
     (50, 0.2, "computed"), (123, 0.456, "computed")],
)  # fmt: skip
@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_is_safe_matches_brute_force(at, n, p, source, metric):
    error = worst_error(n, p, metric=metric)  # brute force
    for tol in (error * 0.5, error, error * 2.0):
        v = at.is_safe(n, p, tol, metric=metric)
        assert isinstance(v, Verdict)
        assert v.source == source
        assert v.safe is bool(v.error + v.accuracy <= tol)  # conservative
        assert_allclose(v.error, error, rtol=SAME, atol=0)
        assert v.margin == v.tol - (v.error + v.accuracy)
        assert 0 < v.accuracy < 1e-13 and v.resolved
        assert (v.n, v.p, v.tol, v.method, v.metric) == (n, p, tol, "normal_cc", metric)
        assert v.worst_interval == worst_interval(n, p)  # brute force, from the engine
        assert all(type(x) is int for x in v.worst_interval)
    assert at.is_safe(n, p, error * 2.0, metric=metric).safe
    assert not at.is_safe(n, p, error * 0.5, metric=metric).safe


def test_is_safe_float32_cube(at32):
    v = at32.is_safe(50, 0.1, 0.01, metric="cdf")
    # computed, REFERENCES.md: normal_cc CDF error at (50, 0.1) = 2.437e-2 (4 digits)
    assert_allclose(v.error, 2.437e-2, rtol=5e-4)
    assert type(v.error) is float and v.source == "atlas" and not v.safe


def test_verdict_is_frozen_and_explains(at):
    v = at.is_safe(50, 0.1, 0.01, metric="cdf")
    with pytest.raises(dataclasses.FrozenInstanceError):
        v.safe = True
    # The line's form, on the spec's example figures (normal_cc CDF error at (50, 0.1), 3 digits).
    example = Verdict(False, 0.0244, 0.01, -0.0144, "normal_cc", "cdf", 50, 0.1, (2, 6), "atlas")
    assert example.explain() == (
        "n=50, p=0.1: normal_cc cdf error 0.0244 <= tol 0.01? no (margin -0.0144); "
        "worst interval [2, 6]; from the atlas"
    )
    a, b = v.worst_interval
    assert v.explain() == (
        f"n=50, p=0.1: normal_cc cdf error {v.error:.4g} (accuracy "
        f"{format_bound(v.accuracy, 1)}) <= tol 0.01? no (margin {v.margin:.3g}); worst "
        f"interval [{a}, {b}]; from the atlas"
    )
    off_grid = at.is_safe(41, 0.1, 1.0).explain()
    assert "? yes (margin " in off_grid and off_grid.endswith("; computed exactly (no atlas cell)")


def test_safe_is_vectorised(at):
    n, p = at.n[:, None], at.p[None, :]
    errors = brute_errors(at.n, at.p, "normal_cc", "interval")  # brute force
    assert_array_equal(at.safe(n, p, 0.01), errors <= 0.01)
    tol = np.array([0.001, 0.01, 0.1, 0.5, 1.0, 1e-4, 1e-6])
    assert_array_equal(at.safe(n, p, tol), errors <= tol)
    assert at.safe(50, 0.1, 0.05) is True and at.safe(50, 0.1, 0.001) is False


# --- minimum n ---------------------------------------------------------------------------------


OFF_GRID_P = (0.2, 0.0123, 0.95, 0.1 + 0.2)


@pytest.fixture(scope="module")
def every_integer(at):
    """Engine errors + accuracies at every integer n = 1..5000 (the small atlas's end) for the
    atlas's p and OFF_GRID_P: {(method, metric): array (5000, len(p))} (brute force, one call
    per n)."""
    ps = np.concatenate([at.p, OFF_GRID_P])
    methods = ("normal_cc", "camp_paulson")
    out = {(m, e): np.empty((int(at.n[-1]), ps.size)) for m in methods for e in ("interval", "cdf")}
    for n in range(1, int(at.n[-1]) + 1):
        ev = atlas.engine.evaluate(n, ps, methods=methods)
        for i, m in enumerate(methods):
            # error + accuracy: min_n counts n as within tol only then (conservative)
            out[(m, "interval")][n - 1] = ev.interval[i] + ev.interval_accuracy[i]
            out[(m, "cdf")][n - 1] = ev.cdf[i] + ev.cdf_accuracy[i]
    return ps, out


def brute_min_n_every_integer(errors, tol):
    """Smallest N with errors[N-1:] <= tol over every integer to the end (brute force)."""
    bad = np.flatnonzero(~(errors <= tol))
    if bad.size == 0:
        return 1
    return None if bad[-1] == errors.size - 1 else int(bad[-1]) + 2


def check_against_every_integer(answer, errors, tol):
    """The answer agrees with brute force over every integer to the atlas's end (5000)."""
    end = errors.size
    if answer.n is None:
        assert errors[-1] > tol
    elif answer.n <= end:
        assert answer.n == brute_min_n_every_integer(errors, tol), (answer.p, tol)
    else:  # found beyond the atlas's end: the integer below it fails, the answer holds
        assert answer.failing[0] == answer.n - 1 > end
        assert worst_error(answer.n - 1, answer.p, method=answer.method,
                           metric=answer.metric) > tol  # fmt: skip


@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_min_n_exact_for_every_integer(at, every_integer, metric):
    ps, errors = every_integer
    column = errors[("normal_cc", metric)]
    for j, p in enumerate(ps):
        for tol in TOLS + tuple(column[[5, 40, 500, -1], j]):  # and tolerances equal to a value
            answer = at.threshold(p, tol, metric=metric, runs=False)
            assert answer.exact and answer.n == at.min_n(p, tol, metric=metric)
            check_against_every_integer(answer, column[:, j], tol)


def test_min_n_without_a_step_bound_says_so(at, every_integer):
    # camp_paulson has no step bound where sigma > 3: gaps there are left to the n evaluated,
    # and the answer says so; where it is exact it agrees with every integer.
    ps, errors = every_integer
    exact = 0
    for metric in ("interval", "cdf"):
        column = errors[("camp_paulson", metric)]
        for j, p in enumerate(ps):
            for tol in TOLS:
                answer = at.threshold(p, tol, method="camp_paulson", metric=metric, runs=False)
                if answer.exact:
                    exact += 1
                    check_against_every_integer(answer, column[:, j], tol)
                else:
                    assert answer.uncovered and "only the n evaluated" in answer.basis()
    assert exact >= 20  # small tolerances and the dense n: most answers are still exact


def test_min_n_method_not_stored(at):
    only_cc = Atlas(at.dataset.sel(approximation=["normal_cc"]))
    ns = np.arange(1, int(at.n[-1]) + 1)
    errors = worst_error(ns, 0.3, method="edgeworth_cc", metric="cdf")  # brute force
    for tol in TOLS:
        answer = only_cc.threshold(0.3, tol, method="edgeworth_cc", metric="cdf", runs=False)
        assert answer.exact
        check_against_every_integer(answer, errors, tol)


def test_min_n_edge_answers(at):
    assert at.min_n(0.5, 1.0) == 1  # every interval error is at most 1 (probabilities)
    assert at.min_n(0.5, 1e-12) is None  # brute force: W(5000, 1/2) is far above 1e-12
    # common practice (REFERENCES.md fact 1): W(n, 1/2) <= 0.01 for every n >= 10 and
    # <= 0.005 for every n >= 20, so the answers are at most 10 and 20.
    assert at.min_n(0.5, 0.01) <= 10
    assert at.min_n(0.5, 0.005) <= 20
    # brute force (computed, regression value): W(5, 1/2) = 0.01114 > 0.01 >= W(6, 1/2) = 0.00998
    assert at.min_n(0.5, 0.01) == 6


def test_min_n_dense_region_is_exact_for_integers(at):
    # Within n = 1..40 the grid holds every integer: the answer n* is safe at every integer from
    # n* to 40 and n* - 1 is not (brute force over the integers themselves).
    checked = 0
    for p in (0.3, 0.5, 0.27):
        for tol in (0.05, 0.02, 0.01, 0.005):
            n_star = at.min_n(p, tol)
            if n_star is None or n_star > at.dense_n:  # e.g. p = 0.3, tol = 0.005: n* = 97
                continue
            checked += 1
            ints = np.arange(n_star, at.dense_n + 1)
            assert np.all(worst_error(ints, p) <= tol)
            if n_star > 1:
                assert worst_error(n_star - 1, p) > tol
    assert checked >= 6


def test_min_n_float32_cube(at, at32):
    for p in at.p:
        for tol in (0.05, 0.01, 0.001, 1e-4):  # tolerances away from any cell: no float32 ties
            assert at32.min_n(p, tol) == at.min_n(p, tol)


def test_min_n_over_is_the_largest_per_p_answer(at, every_integer):
    ps, errors = every_integer
    column = errors[("normal_cc", "interval")]
    for lo, hi in [(0.05, 0.95), (0.1, 0.1), (0.3, 0.7), (0.04, 0.11)]:
        for tol in (0.05, 0.01, 0.005, 1e-3):
            answer = at.threshold_over(lo, hi, tol)
            assert answer.n == at.min_n_over(lo, hi, tol)
            per_p = {t.p: t for t in answer.per_p}
            if any(t.n is None for t in answer.per_p):
                assert answer.n is None
            else:
                assert answer.n == max(t.n for t in answer.per_p)
            assert lo in per_p and hi in per_p  # both ends are checked
            # every grid p of the range is checked against every integer (brute force): exactly,
            # or from above where the search stopped at the answer of the p that decides
            for j, p in enumerate(ps[: at.p.size]):
                if lo <= p <= hi:
                    brute = brute_min_n_every_integer(column[:, j], tol)
                    if per_p[p].at_most:
                        assert brute <= per_p[p].n <= answer.n, (p, tol)
                    else:
                        assert per_p[p].n == brute, (p, tol)
    assert at.min_n_over(0.1, 0.1, 0.01) == at.min_n(0.1, 0.01)


def test_min_n_over_holds_off_the_grid(at):
    # Thousands of random (n, p) in the range and from the answer on: the engine finds none
    # above the tolerance (brute force at each point).
    rng = np.random.default_rng(20261203)
    checked = 0
    for lo, hi, tol in [(0.05, 0.5, 0.01), (0.3, 0.7, 0.005), (0.02, 0.2, 0.02)]:
        answer = at.threshold_over(lo, hi, tol)
        assert answer.n is not None and answer.upto is None
        p = rng.uniform(lo, hi, 1500)
        n = np.round(np.exp(rng.uniform(np.log(answer.n), np.log(20 * answer.n), 1500)))
        errors = worst_error(n.astype(np.int64), p)
        assert np.all(errors <= tol), (lo, hi, tol, n[errors > tol], p[errors > tol])
        checked += p.size
    assert checked == 4500


def test_min_n_over_method_not_stored(at):
    only_cc = Atlas(at.dataset.sel(approximation=["normal_cc"]))
    for tol in (0.01, 1e-3):
        answer = only_cc.threshold_over(0.2, 0.6, tol, method="edgeworth_cc")
        assert answer.n == max(t.n for t in answer.per_p)
        assert answer.n >= only_cc.min_n(0.3, tol, method="edgeworth_cc")


def test_min_n_over_refuses_bad_intervals(at):
    message = "`p_lo` must be <= `p_hi`; got p_lo=0.6 > p_hi=0.4."
    with pytest.raises(ValueError, match=re.escape(message)):
        at.min_n_over(0.6, 0.4, 0.01)
    with pytest.raises(
        ValueError,
        match=re.escape(
            "[`p_lo`, `p_hi`] must hold a p of the atlas grid; got [0.11, 0.12], and the grid's "
            "7 values of p run from 0.01 to 0.9."
        ),
    ):
        at.min_n_over(0.11, 0.12, 0.01)
    with pytest.raises(ValueError, match=re.escape("`p` must be in the open interval (0, 1)")):
        at.min_n_over(0.0, 0.5, 0.01)
    with pytest.raises(ValueError, match="`p_lo` must be a single number here"):
        at.min_n_over([0.1, 0.2], 0.5, 0.01)


# --- best method and safe region ----------------------------------------------------------------


@pytest.mark.parametrize(("n", "p"), [(50, 0.1), (10, 0.5), (41, 0.2), (1000, 0.01)])
@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_best_method_ranks_brute_force_errors(at, n, p, metric):
    ranking = at.best_method(n, p, metric=metric)
    assert sorted(m for m, _ in ranking) == sorted(at.methods)
    errors = [e for _, e in ranking]
    assert errors == sorted(errors)
    for method, error in ranking:
        assert type(error) is float
        assert_allclose(error, worst_error(n, p, method=method, metric=metric), rtol=SAME)


def test_best_method_order_at_50_01(at):
    # computed, REFERENCES.md: max CDF errors at (50, 0.1) order peizer_pratt 2.04e-4 <
    # camp_paulson 8.04e-4 < edgeworth_cc 4.623e-3 < poisson 1.47e-2 < normal_cc 2.437e-2 <
    # normal 1.161e-1 (edgeworth2_cc is not in the table)
    order = [m for m, _ in at.best_method(50, 0.1, metric="cdf") if m != "edgeworth2_cc"]
    assert order == ["peizer_pratt", "camp_paulson", "edgeworth_cc", "poisson", "normal_cc",
                     "normal"]  # fmt: skip


def test_best_method_ties_keep_the_order_of_methods(at):
    # normal_cc and edgeworth_cc coincide at p = 1/2 (the skewness term has the factor q - p)
    # (computed, REFERENCES.md: both 2.686e-3 at (10, 0.5)). The file stores edgeworth_cc
    # first (alphabetical order); the tie follows atlas.METHODS, normal_cc first.
    names = [m for m, _ in at.best_method(10, 0.5, metric="cdf")]
    assert at.methods.index("edgeworth_cc") < at.methods.index("normal_cc")
    assert names.index("normal_cc") < names.index("edgeworth_cc")


def test_best_method_with_accuracy_ranks_and_ties(at):
    ranked = at.best_method(10, 0.5, metric="cdf", return_accuracy=True)
    assert all(isinstance(r, atlas.Ranked) for r in ranked)
    assert [(r.method, r.error) for r in ranked] == at.best_method(10, 0.5, metric="cdf")
    by_method = {r.method: r for r in ranked}
    # normal_cc and edgeworth_cc coincide at p = 1/2 (above): one tie group, one rank.
    assert by_method["normal_cc"].tied_with == ("edgeworth_cc",)
    assert by_method["edgeworth_cc"].tied_with == ("normal_cc",)
    assert by_method["normal_cc"].rank == by_method["edgeworth_cc"].rank
    for r in ranked:  # the stored accuracies of the cube
        assert r.accuracy == at.error(10, 0.5, method=r.method, metric="cdf",
                                      return_accuracy=True).accuracy  # fmt: skip
    # Ranks count the methods strictly better: 1 + the index of the group's first member.
    assert [r.rank for r in ranked] == query.tie_groups(
        [r.error for r in ranked], [r.accuracy for r in ranked]
    )


def test_best_method_ties_below_the_resolution(at):
    # n = 10^12, p = 1/2 (computed by the engine): edgeworth2_cc (5.5e-26) and peizer_pratt
    # (2.0e-16) differ by less than their accuracies (2e-17 + 4e-15, atlas.engine's model).
    ranked = at.best_method(10**12, 0.5, return_accuracy=True)
    by_method = {r.method: r for r in ranked}
    assert by_method["edgeworth2_cc"].rank == by_method["peizer_pratt"].rank == 1
    assert "peizer_pratt" in by_method["edgeworth2_cc"].tied_with
    pp = by_method["peizer_pratt"]
    assert not atlas.is_resolved(pp.error, pp.accuracy)


@pytest.mark.parametrize(
    ("errors", "accuracies", "ranks"),
    [
        ([0.1, 0.2, 0.3], [1e-15, 1e-15, 1e-15], [1, 2, 3]),  # far apart: no ties
        ([1e-15, 2e-15, 0.01], [1e-15, 1e-15, 1e-15], [1, 1, 3]),  # 1e-15 <= 2e-15: tied
        ([1e-15, 4e-15, 0.01], [1e-15, 1e-15, 1e-15], [1, 2, 3]),  # 3e-15 > 2e-15: not tied
        ([0.0, 1.0, 2.0, 3.0], [0.5, 0.5, 0.5, 0.5], [1, 1, 1, 1]),  # a chain of neighbours
    ],
)  # the definition in atlas.query.tie_groups, worked by hand
def test_tie_groups(errors, accuracies, ranks):
    assert query.tie_groups(errors, accuracies) == ranks


def test_error_returns_the_accuracy(at, at32):
    # On the grid: the cube's stored accuracy; off it: the engine's (atlas.worst_error).
    for n, p in ((50, 0.1), (41, 0.123)):
        pair = at.error(n, p, return_accuracy=True)
        assert isinstance(pair, atlas.WorstError) and type(pair.accuracy) is float
        engine = worst_error(n, p, return_accuracy=True)
        assert_allclose(pair.error, engine.error, rtol=SAME)
        # float64 cube: the engine's bound rounded up to 4 significant bits (at most 12.5% more).
        assert engine.accuracy <= pair.accuracy <= engine.accuracy * 1.125 * (1 + 2.0**-22)
    # float32 cube: the float32 rounding of the stored value is inside the accuracy.
    stored, accuracy = at32.error(50, 0.1, return_accuracy=True)
    engine = worst_error(50, 0.1, return_accuracy=True)
    assert abs(stored - engine.error) + engine.accuracy <= accuracy
    assert accuracy <= (engine.accuracy + abs(engine.error) * 2.0**-23) * 1.125 * (1 + 2.0**-22)
    # Arrays: the accuracy has the shape of the error.
    errors, accuracies = at.error([10, 41], 0.5, return_accuracy=True)
    assert errors.shape == accuracies.shape == (2,) and (accuracies > 0).all()


def test_verdict_is_conservative(at):
    # A tol between the error and error + accuracy: the true error may exceed it, so not safe.
    v = at.is_safe(50, 0.1, 0.01)
    tol = v.error + v.accuracy / 2
    assert v.error < tol < v.error + v.accuracy
    w = at.is_safe(50, 0.1, tol)
    assert not w.safe and w.margin < 0 and w.resolved
    assert not at.safe(50, 0.1, tol)
    assert at.is_safe(50, 0.1, v.error + v.accuracy).safe  # the largest possible error fits
    assert at.safe(50, 0.1, v.error + v.accuracy)
    # Off the grid, the engine's accuracy.
    off = at.is_safe(41, 0.123, 0.05)
    assert off.source == "computed"
    assert off.accuracy == worst_error(41, 0.123, return_accuracy=True).accuracy


def test_explain_below_the_resolution(at):
    # camp_paulson at (10^12, 1/2): 1.05e-14 with accuracy 4e-15 (computed): not resolved.
    v = at.is_safe(10**12, 0.5, 1e-3, method="camp_paulson")
    assert not v.resolved and v.safe
    text = v.explain()
    bound = format_bound(v.error + v.accuracy)
    below = f"below the resolution of the exact side (< {bound}) "
    assert f"camp_paulson interval error {below}" in text
    assert f"{v.error:.3g}" not in text
    assert float(bound) >= v.error + v.accuracy  # rounded up: still a bound
    example = Verdict(True, 1e-15, 0.01, 0.01, "normal_cc", "interval", 10, 0.5, (2, 8),
                      "computed", 1e-15, False)  # fmt: skip
    assert "error below the resolution of the exact side (< 2e-15) <= tol" in example.explain()


def test_safe_region(at, small_atlas):
    region = at.safe_region(0.01, method="edgeworth_cc", metric="cdf")
    assert isinstance(region, xr.DataArray)
    assert region.dims == ("n", "p") and region.dtype == bool
    assert_array_equal(region["n"], small_atlas["dataset"]["n"])
    assert region.attrs["tol"] == 0.01
    assert region.attrs["method"] == "edgeworth_cc" and region.attrs["metric"] == "cdf"
    errors = brute_errors(at.n, at.p, "edgeworth_cc", "cdf")
    grid_only = at.safe_region(0.01, method="edgeworth_cc", metric="cdf", between=False)
    # At the grid points, error + accuracy <= tol (the engine's accuracy is below 1e-13 here).
    assert_array_equal(grid_only.values, errors + 1e-13 <= 0.01)
    # Off the grid (the default) the claim covers whole cells: never more than the grid says.
    assert not (region.values & ~grid_only.values).any()
    # wide p-cells (7 p): computed, 191 of 238
    assert region.values.sum() > 0.5 * grid_only.values.sum()
    only_cc = Atlas(at.dataset.sel(approximation=["normal_cc"]))
    assert_array_equal(only_cc.safe_region(0.01, method="edgeworth_cc", metric="cdf"), region)


# --- bad input --------------------------------------------------------------------------------

_METHODS = ", ".join(repr(m) for m in METHODS)


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda a: a.error(0, 0.5), "`n` must be an integer >= 1; got 0."),
        (lambda a: a.error(-3, 0.5), "`n` must be an integer >= 1; got -3."),
        (lambda a: a.error(2.5, 0.5), "`n` must be an integer >= 1; got 2.5."),
        (lambda a: a.error(10, 2), "`p` must be in the open interval (0, 1); got 2.0."),
        (lambda a: a.error(10, [0.5, np.nan]), "`p` must be in the open interval (0, 1); got nan."),
        (lambda a: a.error(10, 0.5, method="bogus"),
         f"`method` must be one of {_METHODS}; got 'bogus'."),
        (lambda a: a.error(10, 0.5, metric="max"),
         "`metric` must be one of 'interval', 'cdf'; got 'max'."),
        (lambda a: a.is_safe(10, 0.5, 0), "`tol` must be a positive finite number; got 0."),
        (lambda a: a.is_safe(10, 0.5, -0.1), "`tol` must be a positive finite number; got -0.1."),
        (lambda a: a.is_safe(10, 0.5, np.inf), "`tol` must be a positive finite number; got inf."),
        (lambda a: a.is_safe(10, 0.5, "x"), "`tol` must be a positive finite number; got 'x'."),
        (lambda a: a.is_safe(10, 0.5, True), "`tol` must be a positive finite number; got True."),
        (lambda a: a.is_safe([10, 20], 0.5, 0.1),
         "`n` must be a single integer here; got shape (2,)."),
        (lambda a: a.is_safe(10, [0.5], 0.1), "`p` must be a single number here; got shape (1,)."),
        (lambda a: a.safe(10, 0.5, [0.1, 0.0]), "`tol` must be a positive finite number; got 0.0."),
        (lambda a: a.min_n(0.5, np.nan), "`tol` must be a positive finite number; got nan."),
        (lambda a: a.min_n(1.5, 0.01), "`p` must be in the open interval (0, 1); got 1.5."),
        (lambda a: a.min_n(0.5, 0.01, method="bogus"),
         f"`method` must be one of {_METHODS}; got 'bogus'."),
        (lambda a: a.best_method(10, 0.5, metric="x"),
         "`metric` must be one of 'interval', 'cdf'; got 'x'."),
        (lambda a: a.best_method(0, 0.5), "`n` must be an integer >= 1; got 0."),
        (lambda a: a.safe_region(0), "`tol` must be a positive finite number; got 0."),
        (lambda a: a.safe_region(0.1, method="x"), f"`method` must be one of {_METHODS}; got 'x'."),
    ],
)  # fmt: skip
def test_bad_input(at, call, message):
    with pytest.raises(ValueError, match=re.escape(message)):
        call(at)


def test_check_tol_accepts_arrays():
    assert_array_equal(check_tol([0.1, 1, 2.5]), [0.1, 1.0, 2.5])


# --- damaged files ----------------------------------------------------------------------------


def test_garbage_and_truncated_files_are_refused(tmp_path, small_atlas):
    garbage = tmp_path / "garbage.nc"
    garbage.write_bytes(b"this is not a NetCDF file\n" * 100)
    with pytest.raises(ValueError, match="`path` is not a readable atlas file"):
        open_atlas(garbage)
    data = small_atlas["float64"].read_bytes()
    truncated = tmp_path / "truncated.nc"
    truncated.write_bytes(data[: len(data) // 2])
    with pytest.raises(ValueError, match="`path` is not a readable atlas file"):
        open_atlas(truncated)


def damaged_copies(source, folder):
    """Copies of an atlas file with 4 KiB flipped at 30, 40, 60 and 70 % of its length.

    Where the damage falls (a data chunk, whose Fletcher-32 checksum then fails, or the HDF5
    metadata) depends on the file's layout, so each copy is refused one way or the other.
    """
    data = source.read_bytes()
    for frac in (0.3, 0.4, 0.6, 0.7):
        damaged = bytearray(data)
        start = int(len(data) * frac)
        for i in range(start, min(len(data), start + 4096)):
            damaged[i] ^= 0xA5
        path = folder / f"damaged_{int(frac * 100)}.nc"  # a new name each: netCDF4 caches handles
        path.write_bytes(bytes(damaged))
        yield path


def test_damaged_chunks_are_refused(tmp_path, small_atlas):
    outcomes = []
    for path in damaged_copies(small_atlas["float64"], tmp_path):
        try:
            with open_atlas(path) as damaged:
                for method in damaged.methods:
                    for metric in ("interval", "cdf"):
                        damaged.is_safe(50, 0.1, 0.01, method=method, metric=metric)
            outcomes.append("read")
        except ValueError as err:
            outcomes.append("open" if "not a readable atlas file" in str(err) else str(err))
    assert "read" not in outcomes  # every damaged copy is refused
    corrupt = [o for o in outcomes if o.startswith("the atlas is corrupt: ")]
    assert corrupt
    assert all(re.search(r"cannot be read from '.*damaged_\d+\.nc'", o) for o in corrupt)


# --- one open file per process -----------------------------------------------------------------


def test_open_atlas_shares_one_open_file(small_atlas):
    first = open_atlas(small_atlas["float64"])
    second = open_atlas(str(small_atlas["float64"]))
    assert first.dataset is second.dataset
    second.close()  # the file stays open for `first`
    assert_allclose(first.error(50, 0.1, method="poisson"), worst_error(50, 0.1, method="poisson"),
                    rtol=SAME)  # fmt: skip
    first.close()


def test_reopening_after_a_close_does_not_crash(small_atlas):
    # With netCDF4/HDF5, open + open + close + open of one file is a segmentation fault; through
    # open_atlas the file is opened once. In a subprocess, so that a crash fails only this test.
    import subprocess
    import sys

    script = (
        "import sys; from atlas.query import open_atlas\n"
        "a = open_atlas(sys.argv[1]); b = open_atlas(sys.argv[1]); b.close(); del b\n"
        "c = open_atlas(sys.argv[1]); print(c.error(50, 0.1, method='camp_paulson'))\n"
    )
    root = pathlib.Path(atlas.__file__).parent.parent
    done = subprocess.run(
        [sys.executable, "-c", script, str(small_atlas["float64"])],
        capture_output=True, text=True, timeout=120, cwd=root,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert_allclose(float(done.stdout), worst_error(50, 0.1, method="camp_paulson"), rtol=SAME)


def test_verify_checks_the_checksum(tmp_path, small_atlas):
    ds = small_atlas["dataset"].copy()
    ds.attrs = dict(ds.attrs, checksum="sha256:" + "0" * 64)
    wrong = atlas.save_atlas(ds, tmp_path / "wrong_checksum.nc")
    with open_atlas(wrong) as opened:  # unverified: opens
        assert opened.error(10, 0.5) > 0
        with pytest.raises(ValueError, match="is corrupt: its checksum does not match"):
            open_atlas(wrong, verify=True)  # while open: the shared Dataset is checked
    with pytest.raises(ValueError, match="is corrupt: its checksum does not match"):
        open_atlas(wrong, verify=True)  # a fresh open: the cube layer checks
    with open_atlas(small_atlas["float32"], verify=True) as good:
        assert set(good.methods) == set(METHODS)


def test_threshold_answers_are_shared_by_atlases_of_one_file(small_atlas, tmp_path, monkeypatch):
    # A sheet and a wiki page written from one file in one process ask the same questions: a
    # second Atlas of the same file answers from the first's work; a rewritten file does not.
    import shutil

    path = shutil.copy(small_atlas["float64"], tmp_path / "a.nc")
    calls = []
    real = query.minimum_n

    def counted(*args, **kwargs):
        calls.append(args[2])
        return real(*args, **kwargs)

    monkeypatch.setattr(query, "minimum_n", counted)
    first = atlas.open_atlas(path)
    answer = first.threshold(0.3, 0.01)
    first.close()
    second = atlas.open_atlas(path)
    assert second.threshold(0.3, 0.01) == answer and len(calls) == 1
    second.close()
    os.utime(path, ns=(1, 1))  # another modification time: another file
    third = atlas.open_atlas(path)
    assert third.threshold(0.3, 0.01) == answer and len(calls) == 2
    third.close()
