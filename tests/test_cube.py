"""Tests for atlas.cube: the Dataset layout, NetCDF round trips, checksums, refusing bad files.

Expected values are the engine's own (atlas.worst_error, atlas.engine.evaluate), whose accuracy
tests/test_engine.py checks against mpmath; here the cube must hold exactly what the engine
computes, so the comparisons are exact for float64 storage and to float32 rounding otherwise.
"""

import os
import pathlib
import re
import subprocess
import sys

import netCDF4
import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats

import atlas
from atlas import cube, store
from atlas.approximations import approximate_cdf
from atlas.engine import TAIL_TOL, evaluate

# A cell of the small atlas (tests/conftest.py) and its grid.
SAMPLE_CELLS = [
    (1, 0.01, "normal_cc"),
    (7, 0.5, "edgeworth_cc"),
    (40, 0.9, "poisson"),
    (50, 0.3, "camp_paulson"),
    (5000, 0.05, "peizer_pratt"),
    (5000, 0.5, "edgeworth2_cc"),
    (186, 0.7, "normal"),
]


def _cell(ds, name, n, p, method):
    return ds[name].sel(approximation=method, n=n, p=p).values.item()


@pytest.fixture
def tiny():
    """A tiny float64 atlas built here: 2 methods x 5 n x 3 p (asked for out of order)."""
    return atlas.build_atlas(n="1:3,100,1000", p="0.1,0.5,0.8", methods="poisson,normal_cc",
                             progress=False)  # fmt: skip


# ---- layout of the Dataset ---------------------------------------------------------------------


def test_accuracy_variables(tiny):
    # Beside each error its bound, from the engine (atlas.engine.Evaluation), stored as float32
    # rounded up to 4 significant bits: never below the engine's value, at most 12.5% above.
    names = [str(m) for m in tiny["approximation"].values]
    for metric, variable in (("interval", "interval_accuracy"), ("cdf", "cdf_accuracy")):
        var = tiny[variable]
        assert var.dims == store.DIMENSIONS and var.dtype == np.float32
        assert var.attrs["units"] == "1" and var.attrs["long_name"].startswith("bound on")
        assert "|stored " in var.attrs["description"] and "2^-24" in var.attrs["description"]
        for i, method in enumerate(names):
            _, engine = atlas.worst_error(tiny["n"].values[:, None], tiny["p"].values[None, :],
                                          method=method, metric=metric,
                                          return_accuracy=True)  # fmt: skip
            stored = var.values[i].astype(np.float64)
            assert (stored >= engine).all() and (stored <= engine * 1.125 * (1 + 2.0**-22)).all()
            assert (stored.astype(np.float32).view(np.uint32) & 0xFFFFF == 0).all()  # 4 bits


def test_compact_adds_the_float32_rounding(tiny):
    # A float32 copy: |stored float32 - true| <= |stored - float64 value| + float64 accuracy,
    # which the stored accuracy must cover; it adds at most |value| 2^-23 to it before the
    # rounding up to 4 significant bits (at most 12.5%).
    small = cube.compact(tiny, "float32")
    for error, accuracy in cube.ACCURACY_OF.items():
        wide = tiny[error].values
        narrow = small[error].values.astype(np.float64)
        acc64 = tiny[accuracy].values.astype(np.float64)
        acc32 = small[accuracy].values.astype(np.float64)
        assert small[accuracy].dtype == np.float32
        assert (np.abs(narrow - wide) + acc64 <= acc32).all()
        assert (acc32 <= (acc64 + np.abs(wide) * 2.0**-23) * 1.125 * (1 + 2.0**-22) + 1e-44).all()
    # Back to float64 adds no digits and keeps the accuracy; float32 again adds nothing.
    again = cube.compact(small, "float32")
    assert (again["interval_accuracy"].values == small["interval_accuracy"].values).all()
    assert small.attrs["checksum"] == cube.data_checksum(small)


def test_layout(small_atlas):
    ds = small_atlas["dataset"]
    assert ds["interval_error"].dims == ("approximation", "n", "p")
    assert tuple(ds["approximation"].values) == tuple(sorted(atlas.METHODS))
    assert ds["n"].dtype == np.int64 and ds["p"].dtype == np.float64
    for name in ("interval_error", "cdf_error"):
        assert ds[name].dtype == np.float64
    for name in ("interval_lo", "interval_hi"):
        assert ds[name].dtype == np.int64
    for name in store.DATA_VARIABLES:
        attrs = ds[name].attrs
        assert set(attrs) >= {"long_name", "units", "description"}
        assert attrs["units"] == "1"
    assert "max D - min D" in ds["interval_error"].attrs["description"]
    keys = ["title", "Conventions", "source", "history", "references", "comment", "n_spec",
            "p_spec", "atlas_schema", "tail_tolerance", "error_precision", "checksum",
            "checksum_variables", "checksum_recipe", "attribute_notes"]  # fmt: skip
    assert list(ds.attrs) == keys
    assert ds.attrs["checksum_variables"] == (
        "approximation n p interval_error cdf_error interval_lo interval_hi interval_accuracy "
        "cdf_accuracy"
    )
    assert ds.attrs["checksum_recipe"] == store.CHECKSUM_RECIPE
    assert ds.attrs["Conventions"].startswith("CF-")
    assert ds.attrs["source"] == f"approx-atlas {atlas.__version__}"
    assert ds.attrs["atlas_schema"] == store.SCHEMA_VERSION
    assert ds.attrs["comment"] == cube.CAUTION
    assert ds.attrs["tail_tolerance"] == TAIL_TOL
    assert ds.attrs["error_precision"] == "float64"


@pytest.mark.parametrize(("n", "p", "method"), SAMPLE_CELLS)
def test_values_equal_the_engine(small_atlas, n, p, method):
    # The cube is the engine's output, cell for cell and bit for bit.
    ds = small_atlas["dataset"]
    assert _cell(ds, "interval_error", n, p, method) == atlas.worst_error(n, p, method=method)
    assert _cell(ds, "cdf_error", n, p, method) == atlas.worst_error(
        n, p, method=method, metric="cdf"
    )
    # The worst interval: the engine's window is the union of every method's, so [a, b] is
    # compared with evaluate over the same methods. (With one method alone an end lying in a
    # flat tail, where D differs from 0 by less than the tail tolerance, may come out elsewhere.)
    ev = evaluate(n, [p], methods=atlas.METHODS)
    i = atlas.METHODS.index(method)
    a, b = _cell(ds, "interval_lo", n, p, method), _cell(ds, "interval_hi", n, p, method)
    assert (a, b) == (ev.lo[i, 0], ev.hi[i, 0])
    assert ev.interval[i, 0] == _cell(ds, "interval_error", n, p, method)
    # ... and the interval attains the stored error: |P(a <= X <= b) - (G(b) - G(a-1))|.
    exact = stats.binom.cdf(b, n, p) - stats.binom.cdf(a - 1, n, p)
    approx = np.diff(approximate_cdf(np.array([a - 1, b]), n, p, method))[0]
    # Four CDF values near 1 differenced: a few float64 ulps of 1 (2.2e-16 each), so 1e-14.
    assert_allclose(abs(exact - approx), _cell(ds, "interval_error", n, p, method), atol=1e-14)


def test_known_cell():
    # W(10, 1/2) = 0.005372 for normal_cc on [2, 8] (REFERENCES.md fact 1, computed value).
    ds = atlas.build_atlas(n="10", p="0.5", methods="normal_cc", progress=False)
    assert_allclose(_cell(ds, "interval_error", 10, 0.5, "normal_cc"), 0.005372, atol=5e-7)
    assert (_cell(ds, "interval_lo", 10, 0.5, "normal_cc"),
            _cell(ds, "interval_hi", 10, 0.5, "normal_cc")) == (2, 8)  # fmt: skip


# ---- NetCDF round trips ------------------------------------------------------------------------


def test_round_trip_float64(small_atlas):
    ds = small_atlas["dataset"]
    with cube.load_dataset(small_atlas["float64"], verify=True) as back:
        xr.testing.assert_identical(back, ds)
        assert back["interval_error"].dtype == np.float64


def test_round_trip_float32(small_atlas):
    ds = small_atlas["dataset"]
    small = cube.compact(ds, "float32")
    with cube.load_dataset(small_atlas["float32"], verify=True) as back:
        xr.testing.assert_identical(back.drop_attrs(), small.drop_attrs())
        # Attributes too, except the history line's time stamp of the compaction.
        for key in set(small.attrs) - {"history", "checksum"}:
            assert back.attrs[key] == small.attrs[key], key
        assert back.attrs["checksum"] == small.attrs["checksum"]  # the data are the same
        assert back["interval_error"].dtype == np.float32
        assert back.attrs["error_precision"] == "float32 (7 significant digits)"
        # float32 rounding: relative error at most 2^-24 (IEEE 754 single precision).
        assert_allclose(back["interval_error"], ds["interval_error"], rtol=2.0**-24, atol=0)
        assert_array_equal(back["interval_lo"], ds["interval_lo"])
        assert_array_equal(back["interval_hi"], ds["interval_hi"])


def test_round_trip_float32_identical(tmp_path, tiny):
    small = cube.compact(tiny)
    path = cube.save_atlas(small, tmp_path / "t32.nc")
    with cube.load_dataset(path) as back:
        xr.testing.assert_identical(back, small)


def test_compact_marks_history_and_checksum(tiny):
    small = cube.compact(tiny, "float32")
    assert small.attrs["history"].startswith(tiny.attrs["history"] + "\n")
    assert "compact: interval_error and cdf_error stored as float32" in small.attrs["history"]
    assert small.attrs["checksum"] != tiny.attrs["checksum"]
    assert small.attrs["checksum"] == cube.data_checksum(small)
    assert tiny["interval_error"].dtype == np.float64  # the original is untouched
    same = cube.compact(tiny, "float64")
    assert same.attrs["checksum"] == tiny.attrs["checksum"]
    assert same.attrs["history"] == tiny.attrs["history"]


def test_compact_bad_precision(tiny):
    with pytest.raises(ValueError, match=r"`precision` must be one of 'float64', 'float32'; "
                                         r"got 'float16'\."):  # fmt: skip
        cube.compact(tiny, "float16")


def test_plain_netcdf4(small_atlas):
    # Readable without xarray: dimensions, attributes and a value equal to the engine's. The
    # method names are fixed-width characters: a dimension as long as the longest name.
    ds = small_atlas["dataset"]
    with netCDF4.Dataset(small_atlas["float64"]) as f:
        assert {name: len(dim) for name, dim in f.dimensions.items()} == {
            "approximation": ds.sizes["approximation"],
            "n": ds.sizes["n"],
            "p": ds.sizes["p"],
            "approximation_strlen": max(len(m) for m in ds["approximation"].values),
        }
        var = f.variables["interval_error"]
        assert var.dimensions == ("approximation", "n", "p")
        assert var.dtype == np.float64
        assert var.units == "1"
        assert var.long_name == "worst-case error of interval probabilities"
        assert "max D - min D" in var.description
        assert f.variables["interval_lo"].dtype == np.int64
        assert f.getncattr("atlas_schema") == store.SCHEMA_VERSION
        assert f.getncattr("Conventions").startswith("CF-")
        methods = list(f.variables["approximation"][:])
        n = f.variables["n"][:]
        p = f.variables["p"][:]
        i, j, k = methods.index("edgeworth_cc"), int(np.flatnonzero(n == 50)[0]), 2
        assert p[k] == 0.1
        value = var[i, j, k]
        assert var.filters()["zlib"] and var.filters()["fletcher32"]
    assert value == atlas.worst_error(50, 0.1, method="edgeworth_cc")


# ---- checksum ----------------------------------------------------------------------------------


def test_checksum_changes_with_one_value(tiny):
    base = cube.data_checksum(tiny)
    assert base == tiny.attrs["checksum"]
    assert base.startswith("sha256:") and len(base) == 7 + 64
    for name in store.DATA_VARIABLES:
        changed = tiny.copy(deep=True)
        values = changed[name].values
        values[1, 2, 0] = values[1, 2, 0] + (1 if values.dtype.kind == "i" else 1e-15)
        assert cube.data_checksum(changed) != base, name
    relabelled = tiny.assign_coords(approximation=["poisson", "normal_cc"])
    assert cube.data_checksum(relabelled) != base


def test_verify_refuses_a_changed_value(tmp_path, tiny):
    changed = tiny.copy(deep=True)
    changed["cdf_error"].values[0, 0, 0] *= 1.5  # the stored checksum is now stale
    path = cube.save_atlas(changed, tmp_path / "changed.nc")
    with cube.load_dataset(path) as ds:  # opening alone does not read the data
        assert ds.sizes["n"] == 5
    with pytest.raises(ValueError, match=r"is corrupt: its checksum does not match"):
        cube.load_dataset(path, verify=True)
    with pytest.raises(ValueError, match=r"^the atlas is corrupt: its checksum does not match"):
        cube.verify_checksum(changed)


def test_verify_checksum_missing():
    ds = atlas.build_atlas(n="5", p="0.5", methods="normal", progress=False)
    del ds.attrs["checksum"]
    with pytest.raises(ValueError, match=r"has no checksum attribute"):
        cube.verify_checksum(ds)


# ---- refusing files that are not atlases of this schema ----------------------------------------


def test_missing_file(tmp_path):
    with pytest.raises(FileNotFoundError, match=r"`path` names no atlas file: '.*nope\.nc'"):
        cube.load_dataset(tmp_path / "nope.nc")


def test_text_file_named_nc(tmp_path):
    path = tmp_path / "notes.nc"
    path.write_text("an inspection lot of 80 fasteners\n")
    with pytest.raises(ValueError, match=r"`path` is not a readable atlas file: '.*notes\.nc'"):
        cube.load_dataset(path)


def test_truncated_file(tmp_path, small_atlas):
    data = small_atlas["float64"].read_bytes()
    path = tmp_path / "truncated.nc"
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(ValueError, match=r"`path` is not a readable atlas file"):
        cube.load_dataset(path, verify=True)


def test_overwritten_middle(tmp_path, small_atlas):
    # Garbage over the middle third: refused on opening (damaged metadata) or when the data
    # are read (HDF5's Fletcher-32 check on each chunk, then the checksum).
    data = bytearray(small_atlas["float64"].read_bytes())
    third = len(data) // 3
    data[third : 2 * third] = bytes((37 * i + 11) % 256 for i in range(third))
    path = tmp_path / "damaged.nc"
    path.write_bytes(bytes(data))
    with pytest.raises(ValueError, match=r"is not a readable atlas file|is corrupt"):
        cube.load_dataset(path, verify=True)


def test_a_few_bytes_changed_in_data(tmp_path, tiny):
    # Without compression a chunk's bytes are findable: change one byte of interval_error.
    path = tmp_path / "plain.nc"
    encoding = {name: {"zlib": False, "fletcher32": True, "contiguous": False,
                       "chunksizes": (1, 5, 3)} for name in store.DATA_VARIABLES}  # fmt: skip
    tiny.to_netcdf(path, engine="netcdf4", encoding=encoding)
    data = bytearray(path.read_bytes())
    needle = np.ascontiguousarray(tiny["interval_error"].values[0]).tobytes()
    at = data.find(needle)
    assert at > 0
    data[at + 9] ^= 0xFF
    path.write_bytes(bytes(data))
    with pytest.raises(ValueError, match=r"is corrupt: its data cannot be read"):
        cube.load_dataset(path, verify=True)


def test_wrong_schema_version(tmp_path, tiny):
    other = tiny.copy()
    other.attrs = dict(tiny.attrs, atlas_schema="999")
    path = cube.save_atlas(other, tmp_path / "future.nc")
    with pytest.raises(ValueError, match=r"atlas of schema version '999'; this version of "
                                         r"approx-atlas reads schema '4'"):  # fmt: skip
        cube.load_dataset(path)


def test_netcdf_that_is_not_an_atlas(tmp_path):
    path = tmp_path / "other.nc"
    xr.Dataset({"x": ("t", np.arange(3.0))}).to_netcdf(path, engine="netcdf4")
    with pytest.raises(ValueError, match=r"NetCDF but not an atlas file"):
        cube.load_dataset(path)


def test_missing_variable(tmp_path, tiny):
    path = tmp_path / "partial.nc"
    tiny.drop_vars("interval_hi").to_netcdf(path, engine="netcdf4")
    with pytest.raises(ValueError, match=r"lacks the atlas variables interval_hi"):
        cube.load_dataset(path)


def test_open_atlas_refuses_the_same_way(tmp_path):
    path = tmp_path / "notes.nc"
    path.write_text("not NetCDF")
    with pytest.raises(ValueError, match=r"not a readable atlas file"):
        atlas.open_atlas(path)


# ---- atomic writes -----------------------------------------------------------------------------


def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir())


def test_save_refuses_existing_without_overwrite(tmp_path, tiny):
    path = cube.save_atlas(tiny, tmp_path / "a.nc")
    before = path.read_bytes()
    with pytest.raises(FileExistsError, match=r"`path` exists: '.*a\.nc'; pass overwrite"):
        cube.save_atlas(tiny, path, overwrite=False)
    assert path.read_bytes() == before


def test_save_into_missing_directory(tmp_path, tiny):
    with pytest.raises(FileNotFoundError, match=r"directory that does not exist"):
        cube.save_atlas(tiny, tmp_path / "no" / "a.nc")


def test_save_refuses_a_non_atlas(tmp_path, tiny):
    with pytest.raises(ValueError, match=r"`ds` is not an atlas Dataset: it lacks interval_lo"):
        cube.save_atlas(tiny.drop_vars("interval_lo"), tmp_path / "a.nc")
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("error", [OSError("disk full"), KeyboardInterrupt()])
def test_failure_mid_write_leaves_nothing(tmp_path, tiny, monkeypatch, error):
    # to_netcdf writes part of the temporary file, then fails.
    def failing(self, path, *args, **kwargs):
        with open(path, "wb") as f:
            f.write(b"\x89HDF\r\n\x1a\n" + bytes(1000))
        raise error

    monkeypatch.setattr(xr.Dataset, "to_netcdf", failing)
    with pytest.raises(type(error)):
        cube.save_atlas(tiny, tmp_path / "a.nc")
    assert _leftovers(tmp_path) == []


def test_failure_mid_write_keeps_the_old_file(tmp_path, tiny, monkeypatch):
    path = cube.save_atlas(tiny, tmp_path / "a.nc")
    before = path.read_bytes()
    real = xr.Dataset.to_netcdf

    def failing(self, target, *args, **kwargs):
        real(self, target, *args, **kwargs)
        raise OSError("failed after writing")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", failing)
    with pytest.raises(OSError, match="failed after writing"):
        cube.save_atlas(cube.compact(tiny), path)
    assert path.read_bytes() == before
    assert _leftovers(tmp_path) == ["a.nc"]


def test_save_returns_path_and_overwrites(tmp_path, tiny):
    path = cube.save_atlas(tiny, str(tmp_path / "a.nc"))
    assert path == tmp_path / "a.nc"
    cube.save_atlas(cube.compact(tiny), path)  # overwrite=True is the default
    with cube.load_dataset(path) as back:
        assert back["interval_error"].dtype == np.float32
    assert _leftovers(tmp_path) == ["a.nc"]


# ---- describe_dataset (what `approx-atlas inspect` prints) -------------------------------------


def test_describe_dataset(small_atlas):
    path = small_atlas["float32"]
    with cube.load_dataset(path) as ds:
        lines = cube.describe_dataset(ds, path)
        notes = cube.attribute_notes(ds)
    text = "\n".join(lines)
    assert lines[0] == f"file: {path} ({os.path.getsize(path) / 1e6:.2f} MB, " \
                       f"{os.path.getsize(path)} bytes)"  # fmt: skip
    # 40 + 8 n values (1:40 and log:50:5000:8) and 7 p values: the conftest grid.
    assert "grid: n: 48 values from 1 to 5000; p: 7 values from 0.01 to 0.9; 336 (n, p) points" \
        in lines  # fmt: skip
    head = lines.index("approximations (7; the names --method takes; dimension 'approximation', "
                       "in alphabetical order):")  # fmt: skip
    assert lines[head + 1 : head + 8] == [
        f"  {m}: {cube.METHOD_DESCRIPTIONS[m]}" for m in sorted(atlas.METHODS)
    ]
    assert "  interval_error(approximation, n, p) float32, units '1': worst-case error of " \
           "interval probabilities" in lines  # fmt: skip
    at = lines.index("  cdf_error(approximation, n, p) float32, units '1': worst-case error of the "
                     "cumulative distribution")  # fmt: skip
    assert lines[at + 1] == "    function"
    assert "  interval_lo(approximation, n, p) int64, units '1': lower end a of the worst " \
           "interval" in lines  # fmt: skip
    # Every attribute but the notes themselves: its value, then "= what it means".
    for key in ds.attrs:
        if key != "attribute_notes":
            assert f"\n  {key}: " in text, key
    assert "\n  attribute_notes: " not in text
    at = lines.index("  error_precision: float32 (7 significant digits)")
    assert lines[at + 1] == "    = " + notes["error_precision"][:94].rsplit(" ", 1)[0]
    at = lines.index("  tail_tolerance: 1e-17")
    assert lines[at + 1].startswith("    = The bound, checked in every cell, on |F(k) - G(k)|")
    # The compact copy's second history line is indented under the first.
    at = [line.startswith("  history: ") for line in lines].index(True)
    assert any(line.startswith("    2") and " compact: " in line for line in lines[at + 1 : at + 4])
    assert all(len(line) <= 100 for line in lines if "_spec: " not in line), "wrapped"


def test_evaluate_is_the_engine_behind_worst_error():
    # The sampled-cell checks above use worst_error; it and evaluate agree (one n, many p).
    ev = evaluate(50, [0.1, 0.3], methods=("camp_paulson",))
    assert ev.interval[0, 1] == atlas.worst_error(50, 0.3, method="camp_paulson")


# ---- schema 2: the approximation dimension, ordered indexes, the one-liners ------------------


def test_approximations_sorted_whatever_the_order_asked(tiny):
    # Asked for as "poisson,normal_cc": stored alphabetically, each row under its own label.
    assert tuple(tiny["approximation"].values) == ("normal_cc", "poisson")
    for method in ("normal_cc", "poisson"):
        assert _cell(tiny, "interval_error", 100, 0.1, method) == atlas.worst_error(
            100, 0.1, method=method
        )
    same = atlas.build_atlas(n="1:3,100,1000", p="0.1,0.5,0.8", methods="normal_cc,poisson",
                             progress=False)  # fmt: skip
    assert same.attrs["checksum"] == tiny.attrs["checksum"]


def test_round_trip_identical_out_of_order_request(tmp_path, tiny):
    path = cube.save_atlas(tiny, tmp_path / "tiny.nc")
    with xr.open_dataset(path) as back:  # plain xarray, no atlas reader
        xr.testing.assert_identical(back, tiny)


def test_index_coordinates_are_monotonic(small_atlas):
    with xr.open_dataset(small_atlas["float32"]) as ds:
        for name in ("approximation", "n", "p"):
            index = ds.indexes[name]
            assert index.is_monotonic_increasing and index.is_unique, name


def test_one_liner_as_typed(small_atlas):
    # The README's line, typed with keywords: `method` is no longer a dimension, so nothing
    # collides with the `method=` keyword of .sel().
    with xr.open_dataset(small_atlas["float64"]) as ds:
        cell = ds.interval_error.sel(approximation="normal_cc", n=50, p=0.1)
        assert cell.item() == atlas.worst_error(50, 0.1, method="normal_cc")


def test_nearest_lookups(small_atlas):
    # n = 55 lies between the grid's 50 and 97 (log:50:5000:8), p = 0.11 between 0.1 and 0.3:
    # the nearest cell is (50, 0.1).
    with xr.open_dataset(small_atlas["float64"]) as ds:
        assert ds.indexes["n"][40:42].tolist() == [50, 97]
        want = atlas.worst_error(50, 0.1, method="normal_cc")
        near = ds.interval_error.sel(approximation="normal_cc").sel(n=55, p=0.11, method="nearest")
        assert (int(near.n), float(near.p), near.item()) == (50, 0.1, want)
        # The names first or last, in two calls: both work.
        other = ds.interval_error.sel(n=55, p=0.11, method="nearest").sel(approximation="normal_cc")
        assert other.item() == want
        # In one call, pandas tries "nearest" on the names too and fails: the README says so.
        with pytest.raises(
            TypeError, match=r"unsupported operand type\(s\) for -: 'str' and 'str'"
        ):
            ds.interval_error.sel(approximation="normal_cc", n=55, p=0.11, method="nearest")


def test_unordered_axes_are_refused(tmp_path, tiny):
    backwards = tiny.isel(n=slice(None, None, -1))
    message = (r"^`ds` is not an atlas of this schema: its n coordinate must be non-empty and "
               r"strictly increasing\.$")  # fmt: skip
    with pytest.raises(ValueError, match=message):
        cube.save_atlas(backwards, tmp_path / "backwards.nc")
    assert _leftovers(tmp_path) == []
    with pytest.raises(ValueError, match=r"its p coordinate must be non-empty and strictly"):
        cube.make_dataset([1], [0.5, 0.5], ["normal"], {v: np.zeros((1, 1, 2)) for v in
                          store.DATA_VARIABLES}, n_spec="1", p_spec="0.5,0.5", history="",
                          tail_tolerance=TAIL_TOL)  # fmt: skip
    with pytest.raises(ValueError, match=r"its approximation coordinate must be non-empty and in "
                                         r"strictly increasing \(alphabetical\) order, without "
                                         r"repeats\.$"):  # fmt: skip
        cube.make_dataset([1], [0.5], ["normal", "normal"], {v: np.zeros((2, 1, 1)) for v in
                          store.DATA_VARIABLES}, n_spec="1", p_spec="0.5", history="",
                          tail_tolerance=TAIL_TOL)  # fmt: skip
    # A file written around save_atlas is refused on opening.
    path = tmp_path / "backwards.nc"
    backwards.to_netcdf(path, engine="netcdf4")
    with pytest.raises(ValueError, match=r"^`path` '.*backwards\.nc' is not an atlas of this "
                                         r"schema: its n coordinate must be"):  # fmt: skip
        cube.load_dataset(path)
    relabelled = tiny.assign_coords(approximation=["poisson", "normal_cc"])
    relabelled.to_netcdf(tmp_path / "names.nc", engine="netcdf4")
    with pytest.raises(ValueError, match=r"its approximation coordinate must be non-empty and in"):
        atlas.open_atlas(tmp_path / "names.nc")


# ---- every attribute explains itself -----------------------------------------------------------


def _notes(text):
    return dict(line.split(": ", 1) for line in text.splitlines())


def test_every_global_attribute_is_explained(tmp_path, tiny):
    path = cube.save_atlas(cube.compact(tiny), tmp_path / "t.nc")
    with netCDF4.Dataset(path) as f:  # as a reader of the raw file (ncdump -h) sees it
        names = f.ncattrs()
        notes = _notes(f.getncattr("attribute_notes"))
    assert list(notes) == names  # one line for each attribute, in the file's order
    groups = {"decision_n_spec", "decision_p_spec", "decision_note", "coverage_n_spec",
              "coverage_p_spec", "coverage_p_cells", "coverage_note"}  # fmt: skip
    assert notes == {k: v for k, v in cube.ATTRIBUTE_NOTES.items() if k not in groups}
    for name in ("tail_tolerance", "n_spec", "p_spec", "error_precision", "atlas_schema",
                 "checksum", "checksum_variables"):  # fmt: skip
        assert len(notes[name]) > 40 and notes[name].endswith("."), name
    assert "the omitted k change no stored error by more than this" in notes["tail_tolerance"]
    assert "`approx-atlas build --n`" in notes["n_spec"]
    assert "float32 (7 significant digits)" in notes["error_precision"]
    assert "checksum_recipe" in notes["checksum"]


def test_every_attribute_of_the_groups_is_explained(tmp_path):
    # With both groups: their global attributes sit before the checksum, each explained; every
    # variable and coordinate of a group has a long_name and a description, numbers units "1".
    ds = atlas.build_atlas(n="5", p="0.2", methods="normal_cc", progress=False, decisions=True,
                           decision_n="10", decision_p="0.1,0.5", coverage_n="10",
                           coverage_p="0.1,0.5")  # fmt: skip
    path = cube.save_atlas(ds, tmp_path / "g.nc")
    with netCDF4.Dataset(path) as f:
        names = f.ncattrs()
        notes = _notes(f.getncattr("attribute_notes"))
        assert list(notes) == names and notes == {k: cube.ATTRIBUTE_NOTES[k] for k in names}
        assert names[-4:] == ["checksum", "checksum_variables", "checksum_recipe",
                              "attribute_notes"]  # fmt: skip
        assert names[11:18] == ["decision_n_spec", "decision_p_spec", "decision_note",
                                "coverage_n_spec", "coverage_p_spec", "coverage_p_cells",
                                "coverage_note"]  # fmt: skip
        for group in store.GROUPS.values():
            for name in group.names():
                var = f.variables[name]
                assert var.getncattr("long_name") and var.getncattr("description"), name
                if var.dtype != "S1":
                    assert var.getncattr("units") == "1", name
            for name in group.attributes:
                assert len(notes[name]) > 40 and notes[name].endswith("."), name
        assert "Brown, Cai & DasGupta (2001)" in f.getncattr("references")
        assert (
            f.getncattr("decision_n_spec") == "10" and f.getncattr("coverage_p_spec") == "0.1,0.5"
        )
    assert "decisions:" in ds.attrs["history"] and "coverage:" in ds.attrs["history"]


def test_approximation_description_lists_only_the_stored(tmp_path, tiny):
    path = cube.save_atlas(tiny, tmp_path / "t.nc")
    with netCDF4.Dataset(path) as f:
        var = f.variables["approximation"]
        description = var.getncattr("description")
        assert var.getncattr("long_name") == "approximation to the binomial distribution function"
    lines = description.splitlines()
    assert lines[0].endswith("one line per name, in the stored (alphabetical) order:")
    assert lines[1:] == [f"normal_cc: {cube.METHOD_DESCRIPTIONS['normal_cc']}",
                         f"poisson: {cube.METHOD_DESCRIPTIONS['poisson']}"]  # fmt: skip
    for other in set(atlas.METHODS) - {"normal_cc", "poisson"}:
        assert f"{other}:" not in description, other


# ---- the README's code, as typed -----------------------------------------------------------------


def _readme_blocks():
    """The fenced blocks of the README's section on the cube, as (language, text) pairs."""
    text = (pathlib.Path(atlas.__file__).parent.parent / "README.md").read_text()
    section = text.split("## The cube, from xarray and from other languages", 1)[1]
    section = section.split("\n## ", 1)[0]
    return re.findall(r"```(\w*)\n(.*?)```", section, flags=re.S)


def test_readme_xarray_lines_run_as_typed(tmp_path):
    # The README's block runs as printed, in a fresh interpreter, and prints what it shows.
    blocks = _readme_blocks()
    (language, code), (_, shown) = blocks[0], blocks[1]
    assert language == "python" and 'sel(approximation="normal_cc", n=50, p=0.1)' in code
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout == shown


def test_readme_group_lines_run_as_typed(tmp_path):
    # The README's block on the tail, test-size and coverage variables runs as printed, in a
    # fresh interpreter, and prints what it shows (xarray and plain netCDF4 agree).
    blocks = _readme_blocks()
    at = [i for i, (_, code) in enumerate(blocks) if "ds.tail_error.sel(" in code]
    assert len(at) == 1
    (language, code), (_, shown) = blocks[at[0]], blocks[at[0] + 1]
    assert language == "python" and "netCDF4.Dataset(default_path())" in code
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout == shown
    lines = shown.splitlines()
    assert lines[0].rsplit(": ", 1)[1] == lines[-1].rsplit(": ", 1)[1]
