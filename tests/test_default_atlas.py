"""Tests of the embedded default atlas, atlas/data/default_atlas.nc.

It is rebuilt by build_scripts/build_default_atlas.py. The expected values are recomputed here
with the engine (whose accuracy tests/test_engine.py checks against mpmath): the stored errors
are float32, so they agree to float32 rounding (or the engine's 1e-12 accuracy), and each
stored worst interval attains its stored error.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats

import atlas
from atlas import cube, grid, store
from atlas.approximations import approximate_cdf
from atlas.engine import evaluate

# Round values of p written out by hand (the mirrors as decimals), independent of atlas.grid.
ROUND_P = [0.0001, 0.0002, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.025, 0.05, 0.1, 0.15, 0.2,
           0.25, 0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 0.975,
           0.98, 0.99, 0.995, 0.998, 0.999, 0.9995, 0.9998, 0.9999]  # fmt: skip
SAMPLES = 30
# float32 keeps 24 bits: relative rounding at most 2^-24 = 6e-8; 1e-6 leaves room to spare.
RTOL = 1e-6
# The package-data limit: 40 MB since schema 4, when the file took in the tail, test-size and
# coverage variables (issues 11 and 12 allow 40 MB for the atlas with every metric; before, the
# errors alone had 25 MB).
MAX_BYTES = 40_000_000


@pytest.fixture(scope="module")
def default():
    path = store.default_path()
    if not path.exists():
        pytest.fail(f"the embedded atlas is missing: run build_scripts/build_default_atlas.py "
                    f"to write {path}")  # fmt: skip
    with cube.load_dataset(path) as ds:
        yield ds


def _sample_cells(ds):
    """About 30 (n index, p index) pairs: the corners and 1/2, then a fixed random draw."""
    n_size, p_size = ds.sizes["n"], ds.sizes["p"]
    half = int(np.flatnonzero(ds["p"].values == 0.5)[0])
    fixed = [(0, 0), (0, p_size - 1), (n_size - 1, 0), (n_size - 1, p_size - 1),
             (n_size - 1, half), (1999, half), (2000, 0)]  # fmt: skip
    rng = np.random.default_rng(20240611)
    count = SAMPLES - len(fixed)
    drawn = zip(rng.integers(0, n_size, count), rng.integers(0, p_size, count), strict=True)
    return fixed + [(int(i), int(j)) for i, j in drawn]


def test_file_size_and_format(default):
    assert store.default_path().stat().st_size < MAX_BYTES
    assert default["interval_error"].dtype == np.float32
    assert default["cdf_error"].dtype == np.float32
    assert default["interval_lo"].dtype == np.int64
    assert default.attrs["error_precision"] == "float32 (7 significant digits)"
    assert default.attrs["atlas_schema"] == store.SCHEMA_VERSION


def test_groups_on_their_default_grids(default):
    # The tail and test-size variables (every method) and the coverage variables (every interval
    # at 0.90, 0.95, 0.99), each on the grid its module names as the default.
    from atlas import coverage_cube, decision_cube

    assert store.groups_in(default.variables) == ("decisions", "coverage")
    assert default.attrs["decision_n_spec"] == decision_cube.DECISION_N
    assert default.attrs["decision_p_spec"] == decision_cube.DECISION_P
    assert_array_equal(default["decision_n"].values, grid.parse_n(decision_cube.DECISION_N))
    assert tuple(default["tail_level"].values) == tuple(sorted(decision_cube.TAIL_LEVELS))
    assert tuple(default["test_level"].values) == tuple(sorted(decision_cube.TEST_LEVELS))
    assert default.attrs["coverage_n_spec"] == coverage_cube.DEFAULT_COVERAGE_N_SPEC
    assert default.attrs["coverage_p_spec"] == coverage_cube.DEFAULT_COVERAGE_P_SPEC
    assert sorted(str(v) for v in default["interval"].values) == sorted(atlas.INTERVALS)
    assert tuple(default["level"].values) == (0.9, 0.95, 0.99)
    assert default["tail_error"].dtype == np.float32 and default["coverage"].dtype == np.float64


def test_sampled_group_cells_match_the_api(default):
    # A few stored cells of each group recomputed by the public functions (themselves tested
    # against mpmath in test_tails.py, test_sizes.py and test_confidence.py).
    rng = np.random.default_rng(20261203)
    for _ in range(4):
        n = int(rng.choice(default["decision_n"].values[:260]))  # n <= about 10^6: fast
        p = float(rng.choice(default["decision_p"].values))
        method = str(rng.choice(default["approximation"].values))
        for tail in ("lower", "upper"):
            stored = default["tail_error"].sel(approximation=method, tail=tail, decision_n=n,
                                               decision_p=p).values  # fmt: skip
            want = [atlas.tail_error(n, p, a, method=method, tail=tail)
                    for a in default["tail_level"].values]  # fmt: skip
            assert_allclose(stored, want, rtol=RTOL)
        size = atlas.test_size(n, p, 0.05, method=method, alternative="less")
        cell = dict(alternative="less", test_level=0.05, decision_n=n, decision_p=p)
        assert_allclose(default["test_size"].sel(approximation=method, **cell).item(), size.size,
                        rtol=RTOL)  # fmt: skip
        assert_allclose(default["exact_test_size"].sel(**cell).item(), size.exact_size,
                        rtol=1e-12)  # fmt: skip
    for _ in range(4):
        n = int(rng.choice(default["coverage_n"].values))
        p = float(rng.choice(default["coverage_p"].values))
        name = str(rng.choice(default["interval"].values))
        stored = default["coverage"].sel(interval=name, level=0.95, coverage_n=n, coverage_p=p)
        assert stored.item() == atlas.coverage(n, p, interval=name, level=0.95)


def test_grid_is_the_default(default):
    assert default.attrs["n_spec"] == grid.DEFAULT_N_SPEC
    assert default.attrs["p_spec"] == grid.DEFAULT_P_SPEC
    assert_array_equal(default["n"].values, grid.default_n())
    # The logit spacing is computed with numpy's exp/log, whose last bit differs between numpy
    # builds: the stored axis (the one every answer uses) agrees with this machine's to 1 ulp.
    np.testing.assert_allclose(default["p"].values, grid.default_p(), rtol=4.5e-16, atol=0)
    assert tuple(default["approximation"].values) == tuple(sorted(atlas.METHODS))


def test_round_p_exactly_on_the_grid(default):
    p = default["p"].values
    for x in ROUND_P:
        assert np.count_nonzero(p == x) == 1, x
    # ... so that label lookups find them without a tolerance.
    assert default["interval_error"].sel(approximation="normal_cc", n=100, p=0.05).size == 1


def test_every_integer_n_to_2000(default):
    assert_array_equal(default["n"].values[:2000], np.arange(1, 2001))
    assert int(default["n"].values[-1]) == 10**8


def test_approximation_names_are_fixed_width():
    # Variable-length names crash netCDF4 1.7.5 when a second handle is closed and the file
    # reopened (tests/test_store.py).
    import netCDF4

    with netCDF4.Dataset(store.default_path()) as f:
        var = f.variables["approximation"]
        assert var.dimensions == ("approximation", store.APPROXIMATION_STRLEN)
        assert var.dtype == np.dtype("S1")


def test_checksum_verifies():
    with cube.load_dataset(store.default_path(), verify=True) as ds:
        assert ds.attrs["checksum"] == cube.data_checksum(ds)


def test_sampled_cells_match_the_engine(default):
    cells = _sample_cells(default)
    assert len(cells) == SAMPLES
    n_axis, p_axis = default["n"].values, default["p"].values
    for i, j in cells:
        n, p = int(n_axis[i]), float(p_axis[j])
        names = tuple(str(m) for m in default["approximation"].values)  # alphabetical
        ev = evaluate(n, [p], methods=names)  # the atlas's methods: the same windows
        stored = default.isel(n=i, p=j)
        # float32 storage (RTOL) plus the engine's accuracy contract, 1e-12 absolute against the
        # mpmath references: values at rounding level (large n, accurate methods) may differ
        # by that much between engine versions.
        assert_allclose(stored["interval_error"].values, ev.interval[:, 0], rtol=RTOL, atol=1e-12,
                        err_msg=f"n={n}, p={p}")  # fmt: skip
        assert_allclose(stored["cdf_error"].values, ev.cdf[:, 0], rtol=RTOL, atol=1e-12,
                        err_msg=f"n={n}, p={p}")  # fmt: skip
        # The stored worst interval [a, b] must attain the error: |D(b) - D(a-1)| = W. (Its
        # ends are not unique where one extreme of D sits at rounding level in a flat tail.)
        for m, method in enumerate(names):
            a, b = int(stored["interval_lo"].values[m]), int(stored["interval_hi"].values[m])
            assert 0 <= a <= b <= n
            d = stats.binom.cdf([a - 1, b], n, p) - approximate_cdf(np.array([a - 1, b]), n, p,
                                                                    method)  # fmt: skip
            assert_allclose(abs(d[1] - d[0]), ev.interval[m, 0], rtol=RTOL, atol=1e-12,
                            err_msg=f"{method} n={n}, p={p}, [a, b] = [{a}, {b}]")  # fmt: skip


def test_known_cell(default):
    # W(10, 1/2) = 0.005372 and W(20, 1/2) = 0.002782 for normal_cc (REFERENCES.md fact 1,
    # computed values, 4 significant digits).
    cells = default["interval_error"].sel(approximation="normal_cc", p=0.5)
    assert_allclose(cells.sel(n=10), 0.005372, atol=5e-7)
    assert_allclose(cells.sel(n=20), 0.002782, atol=5e-7)


def test_symmetry_in_p(default):
    # W(n, p) = W(n, 1 - p) for the normal-family methods (REFERENCES.md): the grid is
    # symmetric, so the stored rows read the same backwards, up to float32 rounding of values
    # computed at p and at 1 - p separately.
    p = default["p"].values
    assert_allclose(p + p[::-1], 1.0, rtol=0, atol=1e-15)
    rows = default["interval_error"].sel(approximation="normal_cc").isel(n=slice(0, 2000, 97))
    values = rows.values.astype(np.float64)
    assert_allclose(values, values[:, ::-1], rtol=1e-5, atol=1e-12)
