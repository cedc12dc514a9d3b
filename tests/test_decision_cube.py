"""Tests of atlas.decision_cube: the tail and test-size variables as a Dataset on their grid.

Source of every expected value: "definition", recomputed by atlas.tail_error / atlas.test_size
(tested against mpmath in test_tails.py and test_sizes.py), stored as float32 (7 digits).
"""

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose

import atlas
from atlas.decision_cube import attach, decision_dataset, open_decision_cube

METHODS = ("normal_cc", "edgeworth_cc")


@pytest.fixture(scope="module")
def ds():
    return decision_dataset("10,50,3000", "0.1,0.5", methods=METHODS)


def test_values_are_the_metrics(ds):
    for method in METHODS:
        for tail in ("lower", "upper"):
            got = ds.tail_error.sel(approximation=method, tail=tail, tail_level=0.01)
            expected = atlas.tail_error([[10], [50], [3000]], [0.1, 0.5], 0.01, method=method,
                                        tail=tail)  # fmt: skip
            assert_allclose(got.values, expected, rtol=1e-6)  # float32
        for alternative in ("two-sided", "less", "greater"):
            t = atlas.test_size([[10], [50], [3000]], [0.1, 0.5], 0.05, method=method,
                                alternative=alternative)  # fmt: skip
            got = ds.test_size.sel(approximation=method, alternative=alternative, test_level=0.05)
            assert_allclose(got.values, t.size, rtol=1e-6)
            exact = ds.exact_test_size.sel(alternative=alternative, test_level=0.05)
            assert_allclose(exact.values, t.exact_size, rtol=1e-15)


def test_every_attribute_explains_itself(ds):
    for name in ("tail_error", "test_size", "exact_test_size"):
        attrs = ds[name].attrs
        assert attrs["units"] == "1" and attrs["long_name"] and len(attrs["description"]) > 80
    assert "computed exactly on demand" in ds.attrs["decision_note"]
    for name in ("tail", "tail_level", "alternative", "test_level", "decision_n", "decision_p"):
        assert ds[name].attrs["long_name"] and ds[name].attrs["description"], name
    # Every index increasing, as the atlas file requires.
    for dim in ("approximation", "tail", "tail_level", "alternative", "test_level",
                "decision_n", "decision_p"):  # fmt: skip
        values = ds[dim].values
        assert all(a < b for a, b in zip(values[:-1], values[1:], strict=True)), dim
    assert list(ds.alternative.values) == ["greater", "less", "two-sided"]


def test_workers_give_the_same_values(ds):
    again = decision_dataset("10,50,3000", "0.1,0.5", methods=METHODS, workers=2)
    assert "with 2 worker process(es)" in again.attrs.pop("history")  # and its time
    assert again.attrs == {k: v for k, v in ds.attrs.items() if k != "history"}
    again.attrs = ds.attrs
    assert again.identical(ds)


def test_attach_to_an_atlas(ds, tmp_path):
    cube = atlas.build_atlas(n="10,50", p="0.5", methods=",".join(METHODS), progress=False)
    merged = attach(cube, ds)
    assert "interval_error" in merged and "tail_error" in merged
    assert merged.attrs["decision_note"] == ds.attrs["decision_note"]
    assert merged.attrs["decision_n_spec"] == "10,50,3000"
    assert merged.attrs["title"] == cube.attrs["title"]
    assert merged.attrs["history"].splitlines()[-1] == ds.attrs["history"]
    other = decision_dataset("10", "0.5", methods=["normal_cc"])
    message = r"^`part` must hold the atlas's approximations \(edgeworth_cc, normal_cc\); got "
    with pytest.raises(ValueError, match=message + r"normal_cc\.$"):
        attach(cube, other)
    with pytest.raises(ValueError, match=r"^`ds` holds the decisions variables already\.$"):
        attach(merged, ds)
    assert np.isfinite(merged.tail_error.values).all()
    # Through the file and back: the same values, read by open_decision_cube.
    path = atlas.save_atlas(merged, tmp_path / "a.nc")
    back = open_decision_cube(path)
    for name in ("tail_error", "test_size", "exact_test_size"):  # the atlas's names' attributes
        xr.testing.assert_identical(
            back[name].drop_vars("approximation", errors="ignore"),
            ds[name].drop_vars("approximation", errors="ignore"),
        )
        assert back[name].dtype == ds[name].dtype
    message = r"^the atlas holds no decisions variables; build it with them \(--decisions of "
    with pytest.raises(ValueError, match=message + r"approx-atlas build\)\.$"):
        open_decision_cube(atlas.save_atlas(cube, tmp_path / "plain.nc"))


def test_embedded_atlas_holds_them():
    # The embedded atlas (build_scripts/build_default_atlas.py): every method on the default
    # decision grid; a stored cell equals the engine's value to float32 rounding.
    back = open_decision_cube()
    assert back.sizes["decision_n"] == 320 and back.sizes["decision_p"] == 41  # 1/2 among them
    assert [str(m) for m in back["approximation"].values] == sorted(atlas.METHODS)
    cell = back.tail_error.sel(approximation="normal_cc", tail="lower", tail_level=0.001,
                               decision_n=100, decision_p=0.5)  # fmt: skip
    expected = atlas.tail_error(100, 0.5, 0.001, method="normal_cc", tail="lower")
    assert_allclose(cell.item(), expected, rtol=1e-6)  # float32
