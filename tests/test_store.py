"""Tests of atlas.store: the file layout, the one reader and its checks, the crash it avoids.

The atlas files are the tiny ones of tests/conftest.py; expected values are the in-memory
Dataset's own (a round trip), so they need no outside source.
"""

import json
import pathlib
import re
import shlex
import subprocess
import sys

import netCDF4
import numpy as np
import pytest

import atlas
from atlas import cube, store
from atlas.cli import main
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


def test_approximation_names_are_fixed_width_characters(small_atlas):
    with netCDF4.Dataset(small_atlas["float32"]) as f:
        var = f.variables["approximation"]
        assert var.dtype == np.dtype("S1")
        assert var.dimensions == ("approximation", store.APPROXIMATION_STRLEN)
        assert var.getncattr("_Encoding") == "utf-8"
    nc = store.open_netcdf(small_atlas["float32"])
    try:
        assert store.approximation_names(nc) == tuple(sorted(atlas.METHODS))
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
        "second = netCDF4.Dataset(path); second.variables['approximation'][:]; second.close()\n"
        "again = netCDF4.Dataset(path)\n"
        "raw = [str(m) for m in again.variables['approximation'][:]]\n"
        "ds = cube.load_dataset(path); ds['approximation'].values; ds.close()\n"
        "ds = cube.load_dataset(path, verify=True)\n"
        "print(json.dumps({'raw': raw, 'xarray': [str(m) for m in ds['approximation'].values],\n"
        "                  'checksum': cube.data_checksum(ds)}))\n"
    )
    out = json.loads(_run(script, small_atlas["float64"]))
    assert out["raw"] == out["xarray"] == sorted(atlas.METHODS)
    assert out["checksum"] == small_atlas["dataset"].attrs["checksum"]


def test_variable_length_names_still_read(tmp_path, small_atlas):
    # A file written by another program may hold variable-length strings: both readers decode
    # them to the same str, and the checksum (which takes the names) verifies.
    ds = small_atlas["dataset"]
    path = tmp_path / "vlen.nc"
    ds.to_netcdf(path, engine="netcdf4")  # xarray's default for str: variable length
    with netCDF4.Dataset(path) as f:
        assert f.variables["approximation"].dtype is str
    with cube.load_dataset(path, verify=True) as back:
        assert [str(m) for m in back["approximation"].values] == sorted(atlas.METHODS)
    with open_atlas(path, verify=True) as opened:
        assert opened.methods == tuple(sorted(atlas.METHODS))


def test_file_and_dataset_checksums_agree(small_atlas):
    nc = store.open_netcdf(small_atlas["float32"])
    try:
        digest = store.verify_file(nc, small_atlas["float32"])
    finally:
        nc.close()
    assert digest == cube.data_checksum(cube.compact(small_atlas["dataset"], "float32"))


def test_refuses_data_variables_over_other_dimensions(tmp_path, small_atlas):
    ds = small_atlas["dataset"]
    odd = ds.assign(interval_lo=ds["interval_lo"].transpose("n", "approximation", "p"))
    path = tmp_path / "odd.nc"
    odd.to_netcdf(path, engine="netcdf4")
    message = (
        r"^`path` has atlas variables without the dimensions \(approximation, n, p\): "
        r"interval_lo: "
    )
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


# ---- files of schema 1 are refused with the command that rebuilds them -------------------------


def _write_schema_1(path, *, n, p, methods, n_spec, p_spec, float32):
    """A file in the layout schema 1 had, written with netCDF4 directly: the dimension `method`,
    fixed-width names over `method_strlen` in the order the build was asked for, the data over
    (method, n, p), `atlas_schema` "1" and the attributes of that version."""
    width = max(len(m) for m in methods)
    with netCDF4.Dataset(path, "w", format="NETCDF4") as f:
        f.createDimension("method", len(methods))
        f.createDimension("n", len(n))
        f.createDimension("p", len(p))
        f.createDimension("method_strlen", width)
        names = f.createVariable("method", "S1", ("method", "method_strlen"))
        names.set_auto_chartostring(False)
        names[:] = netCDF4.stringtochar(np.array(methods, dtype=f"S{width}"))
        names.setncatts({"_Encoding": "utf-8", "long_name": "approximation method"})
        f.createVariable("n", "i8", ("n",))[:] = n
        f.createVariable("p", "f8", ("p",))[:] = p
        for name in store.DATA_VARIABLES:
            kind = ("f4" if float32 else "f8") if name.endswith("_error") else "i8"
            f.createVariable(name, kind, ("method", "n", "p"), zlib=True)[:] = 0
        f.setncatts({
            "title": "approx-atlas: worst-case errors of approximations to the binomial "
                     "distribution",
            "atlas_schema": "1", "n_spec": n_spec, "p_spec": p_spec, "tail_tolerance": 1e-17,
            "error_precision": "float32 (7 significant digits)" if float32 else "float64",
            "checksum": "sha256:" + "0" * 64,
        })  # fmt: skip
    return path


def _refused_by_every_reader(path, message):
    for opener in (store.open_netcdf, cube.load_dataset, open_atlas):
        with pytest.raises(ValueError, match="^" + re.escape(message) + "$"):
            opener(path)


def test_schema_1_is_refused_with_the_rebuild_command(tmp_path, capsys):
    path = _write_schema_1(tmp_path / "lot's atlas.nc", n=[1, 2, 3, 10], p=[0.1, 0.5],
                           methods=["poisson", "normal_cc"], n_spec="1:3,10", p_spec="0.1,0.5",
                           float32=True)  # fmt: skip
    quoted = "'" + str(path).replace("'", "'\\''") + "'"  # the POSIX shell's single quotes
    command = (f"approx-atlas build --n '1:3,10' --p '0.1,0.5' --methods 'poisson,normal_cc' "
               f"-o {quoted} --force --float32")  # fmt: skip
    message = (
        f"`path` {str(path)!r} is an atlas of schema version '1' (dimension 'method', no "
        f"accuracy variables), which this version of approx-atlas no longer reads (it reads "
        f"schema '4', with an accuracy beside every error, and room for the tail, test-size and "
        f"coverage variables); rebuild it with: {command}"
    )
    _refused_by_every_reader(path, message)
    # On the command line: the one-line error, exit status 2.
    assert main(["query", "--atlas", str(path), "--n", "10", "--p", "0.5", "--tol", "0.01"]) == 2
    err = capsys.readouterr().err  # the command line names its option, not the parameter
    assert err == f"approx-atlas: error: {message.replace('`path`', '`--atlas`', 1)}\n"
    # The command works as printed (the shell's quoting undone by shlex) and makes a schema-4
    # atlas of the same grid, methods and precision in place of the old file.
    argv = shlex.split(command)
    assert argv[0] == "approx-atlas" and argv[argv.index("-o") + 1] == str(path)
    assert main(argv[1:]) == 0
    capsys.readouterr()
    with cube.load_dataset(path, verify=True) as ds:
        assert ds.attrs["atlas_schema"] == "4"
        assert (ds.attrs["n_spec"], ds.attrs["p_spec"]) == ("1:3,10", "0.1,0.5")
        assert [str(m) for m in ds["approximation"].values] == ["normal_cc", "poisson"]
        assert ds["interval_error"].dtype == np.float32


def test_schema_2_is_refused_with_the_rebuild_command(tmp_path, capsys):
    # A schema-2 file (no accuracy variables): refused with the command that rebuilds it, as
    # schema 1 is; the command makes a schema-4 atlas with interval_accuracy and cdf_accuracy.
    ds = atlas.build_atlas(n="5,9", p="0.2", methods="normal_cc", progress=False)
    path = cube.save_atlas(cube.compact(ds), tmp_path / "old.nc")
    with netCDF4.Dataset(path, "a") as f:
        f.setncattr("atlas_schema", "2")
    command = (f"approx-atlas build --n '5,9' --p '0.2' --methods 'normal_cc' -o '{path}' "
               f"--force --float32")  # fmt: skip
    message = (
        f"`path` {str(path)!r} is an atlas of schema version '2' (no interval_accuracy and "
        f"cdf_accuracy variables), which this version of approx-atlas no longer reads (it reads "
        f"schema '4', with an accuracy beside every error, and room for the tail, test-size and "
        f"coverage variables); rebuild it with: {command}"
    )
    _refused_by_every_reader(path, message)
    assert main(["compare", "--atlas", str(path), "--n", "5", "--p", "0.2"]) == 2
    err = capsys.readouterr().err
    assert err == f"approx-atlas: error: {message.replace('`path`', '`--atlas`', 1)}\n"
    assert main(shlex.split(command)[1:]) == 0
    capsys.readouterr()
    with cube.load_dataset(path, verify=True) as new:
        assert new.attrs["atlas_schema"] == "4"
        assert new["interval_accuracy"].dtype == np.float32
        assert new["interval_error"].dtype == np.float32


def test_schema_3_is_refused_with_the_rebuild_command(tmp_path, capsys):
    # A schema-3 file (the layout without room for the decision and coverage variables): refused
    # with the command that rebuilds it, which makes a schema-4 atlas of the same grid.
    ds = atlas.build_atlas(n="5,9", p="0.2,0.5", methods="poisson", progress=False)
    path = cube.save_atlas(ds, tmp_path / "three.nc")
    with netCDF4.Dataset(path, "a") as f:
        f.setncattr("atlas_schema", "3")
    command = f"approx-atlas build --n '5,9' --p '0.2,0.5' --methods 'poisson' -o '{path}' --force"
    message = (
        f"`path` {str(path)!r} is an atlas of schema version '3' (no room for the tail, "
        f"test-size and coverage variables), which this version of approx-atlas no longer reads "
        f"(it reads schema '4', with an accuracy beside every error, and room for the tail, "
        f"test-size and coverage variables); rebuild it with: {command}"
    )
    _refused_by_every_reader(path, message)
    assert main(shlex.split(command)[1:]) == 0
    capsys.readouterr()
    with cube.load_dataset(path, verify=True) as new:
        assert new.attrs["atlas_schema"] == "4"
        assert new.attrs["checksum"] == ds.attrs["checksum"]  # the same values, bit for bit


def test_rebuild_command_reproduces_the_groups(tmp_path, capsys):
    # The command for a file holding the decision and coverage variables names their grids and
    # levels from its attributes and coordinates; run as printed it makes the same values.
    ds = atlas.build_atlas(n="5,9", p="0.2", methods="normal_cc,poisson", progress=False,
                           decision_n="10,60", decision_p="logit:0.01:0.99:3",
                           tail_levels=[0.01, 0.05], test_levels="0.05",
                           coverage_n="2,30", coverage_p="lin:0.1:0.5:3",
                           intervals="wilson,jeffreys", coverage_levels="0.95")  # fmt: skip
    ds = cube.compact(ds)
    path = cube.save_atlas(ds, tmp_path / "groups.nc")
    nc = store.open_netcdf(path)
    try:
        command = store.rebuild_command(nc, path)
    finally:
        nc.close()
    assert command == (
        f"approx-atlas build --n '5,9' --p '0.2' --methods 'normal_cc,poisson' -o '{path}' "
        f"--force --float32 --decision-n '10,60' --decision-p 'logit:0.01:0.99:3' "
        f"--tail-levels '0.01,0.05' --test-levels '0.05' --coverage-n '2,30' "
        f"--coverage-p 'lin:0.1:0.5:3' --intervals 'jeffreys,wilson' --coverage-levels '0.95'"
    )
    assert main(shlex.split(command)[1:]) == 0
    assert "tail and test-size variables, coverage variables" in capsys.readouterr().out
    with cube.load_dataset(path, verify=True) as new:
        assert new.attrs["checksum"] == ds.attrs["checksum"]
        assert new.attrs["checksum_variables"] == ds.attrs["checksum_variables"]


def test_groups_are_checked_on_opening(tmp_path):
    # A group is there whole, over its own dimensions, its indexes in order; else refused.
    ds = atlas.build_atlas(n="5", p="0.2", methods="normal_cc", progress=False,
                           coverage_n="2,30", coverage_p="0.1,0.5", intervals="wald,wilson",
                           coverage_levels="0.9,0.95")  # fmt: skip
    path = cube.save_atlas(ds, tmp_path / "ok.nc")
    assert store.groups_in(store.open_netcdf(path).variables) == ("coverage",)
    partial = ds.drop_vars("min_coverage")
    partial.to_netcdf(tmp_path / "partial.nc", engine="netcdf4")
    with pytest.raises(ValueError, match=r"^`path` '.*partial\.nc' holds part of the coverage "
                                         r"variables only: it lacks min_coverage\.$"):  # fmt: skip
        cube.load_dataset(tmp_path / "partial.nc")
    backwards = ds.isel(level=[1, 0])
    backwards.to_netcdf(tmp_path / "backwards.nc", engine="netcdf4")
    with pytest.raises(ValueError, match=r"its level coordinate must be non-empty and strictly "
                                         r"increasing\.$"):  # fmt: skip
        open_atlas(tmp_path / "backwards.nc")
    with pytest.raises(ValueError, match=r"^`ds` is not an atlas of this schema: its interval "
                                         r"coordinate must be non-empty and in strictly "
                                         r"increasing"):  # fmt: skip
        cube.save_atlas(ds.isel(interval=[1, 0]), tmp_path / "names.nc")
    moved = ds.assign(coverage=ds["coverage"].transpose("level", ...))
    moved.to_netcdf(tmp_path / "moved.nc", engine="netcdf4")
    with pytest.raises(ValueError, match=r"has coverage variables without the dimensions of the "
                                         r"schema: coverage \(interval, level, coverage_n, "
                                         r"coverage_p\)\.$"):  # fmt: skip
        cube.load_dataset(tmp_path / "moved.nc")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["backwards.nc", "moved.nc", "ok.nc",
                                                          "partial.nc"]  # fmt: skip


def test_schema_1_without_specs_and_in_float64(tmp_path):
    # A file without n_spec/p_spec (hand-made or trimmed): the axes' values stand in for them.
    path = _write_schema_1(tmp_path / "plain.nc", n=[5, 7], p=[0.25], methods=["normal"],
                           n_spec="", p_spec="", float32=False)  # fmt: skip
    with netCDF4.Dataset(path, "a") as f:
        f.delncattr("n_spec")
        f.delncattr("p_spec")
    nc = netCDF4.Dataset(path)
    try:
        assert store.rebuild_command(nc, path) == (
            f"approx-atlas build --n '5,7' --p '0.25' --methods 'normal' -o '{path}' --force"
        )
    finally:
        nc.close()


# ---- the checksum, recomputed by a reader that knows only the recipe ---------------------------

# A reader in the spirit of one in C, Fortran, R or Julia: netCDF4, numpy and hashlib only,
# following the words of the file's checksum_recipe. It runs in a fresh interpreter and reports
# whether anything of atlas was imported.
INDEPENDENT_READER = r"""
import hashlib, json, sys
import netCDF4, numpy as np

with netCDF4.Dataset(sys.argv[1]) as f:
    f.set_auto_mask(False)
    digest = hashlib.sha256()
    for name in f.getncattr("checksum_variables").split(" "):
        var = f.variables[name]
        var.set_auto_chartostring(False)          # names: the raw characters
        values = np.asarray(var[:])               # the type stored in the file
        if values.dtype.kind == "S":              # one name per row, NUL-padded
            for row in values:
                digest.update(b"".join(row).rstrip(b"\0") + b"\n")
        else:
            little = values.astype(values.dtype.newbyteorder("<"))
            digest.update(little.tobytes(order="C"))
    stored = f.getncattr("checksum")
    kinds = {name: f.variables[name].dtype.str[1:] for name in ("n", "p", "cdf_error")}
atlas_imported = any(m == "atlas" or m.startswith("atlas.") for m in sys.modules)
print(json.dumps({"computed": "sha256:" + digest.hexdigest(), "stored": stored,
                  "kinds": kinds, "atlas_imported": atlas_imported}))
"""


def _independent_checksum(path, cwd):
    done = subprocess.run([sys.executable, "-I", "-c", INDEPENDENT_READER, str(path)],
                          capture_output=True, text=True, timeout=120, cwd=cwd)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    out = json.loads(done.stdout)
    assert out["atlas_imported"] is False
    return out


@pytest.mark.parametrize(("copy", "kind"), [("float64", "f8"), ("float32", "f4")])
def test_independent_reader_recomputes_the_checksum(tmp_path, small_atlas, copy, kind):
    out = _independent_checksum(small_atlas[copy], tmp_path)
    assert out["kinds"] == {"n": "i8", "p": "f8", "cdf_error": kind}
    assert out["computed"] == out["stored"]
    assert out["stored"].startswith("sha256:") and len(out["stored"]) == 7 + 64


def test_independent_reader_detects_one_flipped_byte(tmp_path, small_atlas):
    path = tmp_path / "altered.nc"
    path.write_bytes(small_atlas["float32"].read_bytes())
    with netCDF4.Dataset(path, "a") as f:  # a valid file (HDF5 rewrites its chunk checksums)
        var = f.variables["cdf_error"]
        raw = bytearray(np.asarray(var[2, 10, 3]).astype("<f4").tobytes())
        raw[0] ^= 0x01  # the lowest byte of the mantissa: the value moves by one unit
        var[2, 10, 3] = np.frombuffer(bytes(raw), dtype="<f4")[0]
    out = _independent_checksum(path, tmp_path)
    assert out["computed"] != out["stored"]
    with pytest.raises(ValueError, match=r"is corrupt: its checksum does not match"):
        cube.load_dataset(path, verify=True)


@pytest.fixture(scope="module")
def groups_file(tmp_path_factory):
    """A small float32 atlas holding the decision and coverage variables."""
    ds = atlas.build_atlas(n="5,9", p="0.2,0.5", methods="normal_cc,poisson", progress=False,
                           decision_n="10,60", decision_p="0.1,0.5", tail_levels="0.01",
                           test_levels="0.05", coverage_n="2,30", coverage_p="0.1,0.5",
                           intervals="wald,wilson", coverage_levels="0.95")  # fmt: skip
    return cube.save_atlas(cube.compact(ds), tmp_path_factory.mktemp("groups") / "groups.nc")


@pytest.mark.parametrize("variable", ["tail_error", "exact_test_size", "coverage", "p_cell_hi"])
def test_independent_reader_covers_the_groups(tmp_path, groups_file, variable):
    # The recipe's reader, which knows no variable by name, recomputes the checksum of a file
    # with both groups, and one changed value of any group variable changes it.
    out = _independent_checksum(groups_file, tmp_path)
    assert out["computed"] == out["stored"]
    path = tmp_path / "altered.nc"
    path.write_bytes(groups_file.read_bytes())
    with netCDF4.Dataset(path, "a") as f:
        var = f.variables[variable]
        index = (0,) * var.ndim
        var[index] = np.nextafter(var[index], np.inf, dtype=var.dtype)
    out = _independent_checksum(path, tmp_path)
    assert out["computed"] != out["stored"]
    with pytest.raises(ValueError, match=r"is corrupt: its checksum does not match"):
        cube.load_dataset(path, verify=True)
    with pytest.raises(ValueError, match=r"is corrupt: its checksum does not match"):
        open_atlas(path, verify=True)


def test_group_names_enter_the_checksum(groups_file):
    # Names are read as text: relabelling the intervals changes the digest.
    with cube.load_dataset(groups_file) as ds:
        ds = ds.load()
    assert cube.data_checksum(ds) == ds.attrs["checksum"]
    relabelled = ds.assign_coords(interval=["wald", "wilson_cc"])
    assert cube.data_checksum(relabelled) != ds.attrs["checksum"]


def test_checksum_variables_must_be_the_schemas(tmp_path, small_atlas):
    # A shortened list would leave values unchecked: refused, not trusted.
    path = tmp_path / "short.nc"
    path.write_bytes(small_atlas["float64"].read_bytes())
    with netCDF4.Dataset(path, "a") as f:
        f.setncattr("checksum_variables", "n p")
    message = (r"is corrupt: its checksum_variables attribute must be 'approximation n p "
               r"interval_error cdf_error interval_lo interval_hi interval_accuracy "
               r"cdf_accuracy'; got 'n p'\.$")  # fmt: skip
    with pytest.raises(ValueError, match=message):
        cube.load_dataset(path, verify=True)
    with pytest.raises(ValueError, match=message):
        open_atlas(path, verify=True)


@pytest.mark.parametrize("kind", ["without groups", "with groups"])
def test_readme_checksum_reader(tmp_path, request, kind):
    # The README's reader (netCDF4, numpy and hashlib only) prints True for an intact file, with
    # or without the decision and coverage variables, and False once one value has changed.
    if kind == "with groups":
        source = request.getfixturevalue("groups_file")
    else:
        source = request.getfixturevalue("small_atlas")["float32"]
    text = (ROOT / "README.md").read_text()
    (code,) = [b for b in re.findall(r"```python\n(.*?)```", text, flags=re.S)
               if "checksum_variables" in b]  # fmt: skip
    script = tmp_path / "reader.py"
    script.write_text(code)
    path = tmp_path / "atlas.nc"
    path.write_bytes(source.read_bytes())

    def run():
        argv = [sys.executable, "-I", str(script), str(path)]
        done = subprocess.run(argv, capture_output=True, text=True, timeout=120, cwd=tmp_path)
        assert done.returncode == 0, done.stderr[-2000:]
        return done.stdout

    assert run() == "True\n"
    with netCDF4.Dataset(path, "a") as f:
        f.variables["interval_lo"][0, 0, 0] += 1
    assert run() == "False\n"
