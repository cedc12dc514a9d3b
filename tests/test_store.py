"""Tests of atlas.store: the file layout, the one reader and its checks, the crash it avoids.

The atlas files are the tiny ones of tests/conftest.py; expected values are the in-memory
Dataset's own (a round trip), so they need no outside source.
"""

import json
import pathlib
import subprocess
import sys

import netCDF4
import numpy as np
import pytest

import atlas
from atlas import cube, store
from atlas.query import open_atlas

ROOT = pathlib.Path(atlas.__file__).parent.parent


def _run(script, *args):
    """Run ``script`` in a fresh interpreter (a segmentation fault fails the test, not pytest)."""
    done = subprocess.run(
        [sys.executable, "-c", script, *map(str, args)],
        capture_output=True, text=True, timeout=120, cwd=ROOT,
    )  # fmt: skip
    assert done.returncode == 0, f"exit status {done.returncode}: {done.stderr[-2000:]}"
    return done.stdout


def test_method_names_are_fixed_width_characters(small_atlas):
    with netCDF4.Dataset(small_atlas["float32"]) as f:
        var = f.variables["method"]
        assert var.dtype == np.dtype("S1")
        assert var.dimensions == ("method", store.METHOD_STRLEN)
        assert var.getncattr("_Encoding") == "utf-8"
    nc = store.open_netcdf(small_atlas["float32"])
    try:
        assert store.method_names(nc) == atlas.METHODS
    finally:
        nc.close()


def test_reopening_after_a_second_handle_is_closed_does_not_crash(small_atlas):
    # With the method names stored as variable-length strings, netCDF4 1.7.5 crashes the
    # interpreter (segmentation fault) on: a file is open, a second handle reads the method
    # names and is closed, then the file is opened again. Raw handles first, then the readers.
    script = (
        "import json, sys, netCDF4\n"
        "from atlas import cube, store\n"
        "path = sys.argv[1]\n"
        "held = netCDF4.Dataset(path)\n"
        "second = netCDF4.Dataset(path); second.variables['method'][:]; second.close()\n"
        "again = netCDF4.Dataset(path); raw = [str(m) for m in again.variables['method'][:]]\n"
        "ds = cube.load_dataset(path); ds['method'].values; ds.close()\n"
        "ds = cube.load_dataset(path, verify=True)\n"
        "print(json.dumps({'raw': raw, 'xarray': [str(m) for m in ds['method'].values],\n"
        "                  'checksum': cube.data_checksum(ds)}))\n"
    )
    out = json.loads(_run(script, small_atlas["float64"]))
    assert out["raw"] == out["xarray"] == list(atlas.METHODS)
    assert out["checksum"] == small_atlas["dataset"].attrs["checksum"]


def test_variable_length_names_of_earlier_files_still_read(tmp_path, small_atlas):
    # Files written before the names were fixed-width hold variable-length strings: both
    # readers decode them to the same str, and the checksum (which joins the names) verifies.
    ds = small_atlas["dataset"]
    path = tmp_path / "vlen.nc"
    ds.to_netcdf(path, engine="netcdf4")  # xarray's default for str: variable length
    with netCDF4.Dataset(path) as f:
        assert f.variables["method"].dtype is str
    with cube.load_dataset(path, verify=True) as back:
        assert [str(m) for m in back["method"].values] == list(atlas.METHODS)
    with open_atlas(path, verify=True) as opened:
        assert opened.methods == atlas.METHODS


def test_file_and_dataset_checksums_agree(small_atlas):
    nc = store.open_netcdf(small_atlas["float32"])
    try:
        digest = store.verify_file(nc, small_atlas["float32"])
    finally:
        nc.close()
    assert digest == cube.data_checksum(cube.compact(small_atlas["dataset"], "float32"))


def test_refuses_data_variables_over_other_dimensions(tmp_path, small_atlas):
    ds = small_atlas["dataset"]
    odd = ds.assign(interval_lo=ds["interval_lo"].transpose("n", "method", "p"))
    path = tmp_path / "odd.nc"
    odd.to_netcdf(path, engine="netcdf4")
    message = r"^`path` has atlas variables without the dimensions \(method, n, p\): interval_lo: "
    with pytest.raises(ValueError, match=message + r"'.*odd\.nc'\.$"):
        store.open_netcdf(path)


def test_an_atlas_of_a_closed_file_says_so(tmp_path, small_atlas):
    path = tmp_path / "closed.nc"  # a copy: no other atlas of the session holds it open
    path.write_bytes(small_atlas["float64"].read_bytes())
    opened = open_atlas(path)
    opened.error(10, 0.5)  # reads the axes, the method names and one variable, then closes
    opened.close()
    with pytest.raises(ValueError, match=r"^the atlas file is closed: '.*closed\.nc'\.$"):
        opened.error(10, 0.5, method="peizer_pratt")
