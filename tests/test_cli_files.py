"""The command line and files: damaged atlases, targets that cannot or may not be written, --force,
and the numbers and words the commands print. Called in-process as main([...]).

The damaged files are made here from a tiny atlas: truncated, a byte flipped inside a data chunk
(the HDF5 Fletcher-32 check fails when it is read), a file that is not NetCDF, and a NetCDF file
that is not an atlas.
"""

import json
import os
import re

import numpy as np
import pytest
import xarray as xr

import atlas
from atlas import METHODS, METRICS, files, store
from atlas.cli import main

# A tiny atlas for these tests: 2 methods, every n to 12, 4 larger n, 5 p; it holds the
# demo's cell (n = 80, p = 0.025), so that the demo reads stored values.
N_SPEC, P_SPEC, TWO = "1:12,50,80,100,1000", "0.01,0.025,0.1,0.5,0.9", "normal_cc,edgeworth_cc"


@pytest.fixture(scope="module")
def tiny_ds():
    return atlas.build_atlas(n=N_SPEC, p=P_SPEC, methods=TWO, progress=False)


def _flipped(ds, path, variables):
    """Write ``ds`` uncompressed, one chunk per variable, and flip one bit in the middle of the
    chunk of each of ``variables``: HDF5's Fletcher-32 check fails when that chunk is read."""
    encoding = {
        name: {"zlib": False, "fletcher32": True, "contiguous": False,
               "chunksizes": ds[name].shape, "_FillValue": None}
        for name in store.DATA_VARIABLES
    }  # fmt: skip
    encoding["approximation"] = {"dtype": "S1", "char_dim_name": store.APPROXIMATION_STRLEN}
    ds.to_netcdf(path, engine="netcdf4", encoding=encoding)
    data = bytearray(path.read_bytes())
    for name in variables:
        needle = np.ascontiguousarray(ds[name].values).tobytes()
        at = data.find(needle)
        assert at > 0 and data.find(needle, at + 1) < 0  # the chunk's bytes, found once
        data[at + len(needle) // 2] ^= 0x01
    path.write_bytes(bytes(data))
    return path


@pytest.fixture(scope="module")
def bad_files(tiny_ds, tmp_path_factory):
    """``{kind: path}`` of four files no command may accept."""
    folder = tmp_path_factory.mktemp("bad_atlases")
    good = atlas.save_atlas(tiny_ds, folder / "good.nc")
    data = good.read_bytes()
    truncated = folder / "truncated.nc"
    truncated.write_bytes(data[: len(data) // 2])
    text = folder / "lot_notes.nc"
    text.write_text("an inspection lot of 80 fasteners, 2 defective\n")
    other = folder / "survey.nc"
    xr.Dataset({"answers": ("respondent", np.arange(5.0))}).to_netcdf(other, engine="netcdf4")
    return {
        "truncated": truncated,
        "flipped": _flipped(tiny_ds, folder / "flipped.nc", store.DATA_VARIABLES),
        "not_netcdf": text,
        "not_an_atlas": other,
    }


# Every command that takes --atlas, with the arguments it needs and its output (if it writes).
COMMANDS = {
    "query": ["query", "--n", "10", "--p", "0.1", "--tol", "0.01"],
    "query_cdf": ["query", "--n", "10", "--p", "0.1", "--tol", "0.01", "--metric", "cdf"],
    "min-n": ["min-n", "--p", "0.1", "--tol", "0.01"],
    "min-n_range": ["min-n", "--p-range", "0.1:0.5", "--tol", "0.01"],
    "compare": ["compare", "--n", "10", "--p", "0.1"],
    "demo": ["demo"],
    "inspect": ["inspect"],
    "chart": ["chart", "-o", "map.png"],
    "chart_cdf": ["chart", "--metric", "cdf", "-o", "map.svg"],
    "chart_best": ["chart", "--kind", "best", "-o", "best.pdf"],
    "table": ["table", "-o", "table.csv", "--format", "csv"],
    "table_print": ["table", "--format", "json"],
    "rules": ["rules", "-o", "audit.md"],
    "sheet": ["sheet", "-o", "sheet.pdf"],
    "wiki": ["wiki", "-o", "page"],
}


def test_every_command_that_reads_an_atlas_takes_atlas(capsys):
    # The README says so: every command but grid and build (which read none).
    for name in ("query", "min-n", "compare", "demo", "inspect", "chart", "table", "rules",
                 "sheet", "wiki"):  # fmt: skip
        assert main([name, "--help"]) == 0
        assert "--atlas FILE" in capsys.readouterr().out, name
    assert {argv[0] for argv in COMMANDS.values()} == {
        "query", "min-n", "compare", "demo", "inspect", "chart", "table", "rules", "sheet",
        "wiki"}  # fmt: skip


def _run_in(folder, monkeypatch, capsys, argv):
    monkeypatch.chdir(folder)
    status = main(argv)
    captured = capsys.readouterr()
    return status, captured.out, captured.err


@pytest.mark.parametrize("kind", ["truncated", "flipped", "not_netcdf", "not_an_atlas"])
@pytest.mark.parametrize("command", list(COMMANDS))
def test_damaged_atlas_is_one_line_and_leaves_nothing(bad_files, tmp_path, monkeypatch, capsys,
                                                      command, kind):  # fmt: skip
    path = str(bad_files[kind])
    status, out, err = _run_in(tmp_path, monkeypatch, capsys, [*COMMANDS[command], "--atlas", path])
    assert (status, out) == (2, "")
    assert err.startswith("approx-atlas: error: ") and err.count("\n") == 1
    assert "Traceback" not in err
    # What the error says, by kind: the file is named where it was opened.
    expected = {
        "truncated": r"`--atlas` is not a readable atlas file: ",
        "not_netcdf": r"`--atlas` is not a readable atlas file: ",
        "not_an_atlas": r"`--atlas` is NetCDF but not an atlas file",
        "flipped": r"(the atlas is corrupt: \w+ of \w+ cannot be read from '.*flipped\.nc'|"
                   r"`--atlas` '.*flipped\.nc' is corrupt: its data cannot be read)",
    }[kind]  # fmt: skip
    assert re.match(f"approx-atlas: error: {expected}", err), err
    assert os.listdir(tmp_path) == []  # no output, no temporary file, no directory


def test_chart_cdf_of_a_damaged_cdf_chunk(tiny_ds, tmp_path, monkeypatch, capsys):
    # The reported case: only cdf_error is damaged, and `chart --metric cdf` reads it.
    path = str(_flipped(tiny_ds, tmp_path / "cdf_flipped.nc", ["cdf_error"]))
    work = tmp_path / "work"
    work.mkdir()
    for argv in (["chart", "--metric", "cdf", "-o", "map.png"],
                 ["query", "--n", "10", "--p", "0.1", "--tol", "0.01", "--metric", "cdf"],
                 ["table", "--metric", "cdf"], ["rules", "--metric", "cdf"],
                 ["inspect"]):  # fmt: skip
        status, out, err = _run_in(work, monkeypatch, capsys, [*argv, "--atlas", path])
        assert (status, out) == (2, ""), argv
        expected = (
            r"approx-atlas: error: (the atlas is corrupt: cdf_error of normal_cc cannot be "
            r"read from '.*cdf_flipped\.nc'|`--atlas` '.*cdf_flipped\.nc' is corrupt)"
        )
        assert re.match(expected, err), err
        assert err.count("\n") == 1
    assert os.listdir(work) == []
    # The interval error is intact: a chart of it is drawn.
    status, out, _ = _run_in(work, monkeypatch, capsys, ["chart", "-o", "map.png", "--atlas", path])
    assert status == 0 and os.listdir(work) == ["map.png"]


def test_inspect_prints_nothing_before_the_checksum_fails(bad_files, capsys):
    status, out, err = main(["inspect", str(bad_files["flipped"])]), *capsys.readouterr()
    assert (status, out) == (2, "")
    assert err.startswith(f"approx-atlas: error: `FILE` {str(bad_files['flipped'])!r} is corrupt")


# ---- writing: checked before any work, never over an existing file without --force ----------


def _no_build(monkeypatch):
    """Make any build fail loudly: a refused target must be refused before the work starts."""
    import atlas.build

    def refuse(*args, **kwargs):
        raise AssertionError("the build started")

    monkeypatch.setattr(atlas.build, "build_atlas", refuse)


def test_build_into_a_missing_directory_starts_no_work(tmp_path, monkeypatch, capsys):
    _no_build(monkeypatch)
    target = tmp_path / "nowhere" / "cube.nc"
    argv = ["build", "--n", "1:3", "--p", "0.5", "-o", str(target)]
    status, out, err = _run_in(tmp_path, monkeypatch, capsys, argv)
    assert (status, out) == (2, "")
    assert err == (f"approx-atlas: error: `-o` is in a directory that does not exist: "
                   f"{str(target)!r}.\n")  # fmt: skip


def test_build_into_an_unwritable_directory_starts_no_work(tmp_path, monkeypatch, capsys):
    # As root no permission bit stops a write, so the probe's creation is made to fail as it
    # would in a read-only directory (EACCES); the real thing is checked below when not root.
    _no_build(monkeypatch)
    real_open = open

    def no_create(path, mode="r", *args, **kwargs):
        if "x" in mode:
            raise PermissionError(13, "Permission denied", str(path))
        return real_open(path, mode, *args, **kwargs)

    monkeypatch.setattr(files, "open", no_create, raising=False)
    target = tmp_path / "cube.nc"
    argv = ["build", "--n", "1:3", "--p", "0.5", "-o", str(target)]
    status, out, err = _run_in(tmp_path, monkeypatch, capsys, argv)
    assert (status, out) == (2, "")
    assert err == (f"approx-atlas: error: `-o` cannot be written: {str(target)!r} (Permission "
                   "denied in its directory).\n")  # fmt: skip
    assert os.listdir(tmp_path) == []


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into a read-only directory")
def test_build_into_a_read_only_directory(tmp_path, monkeypatch, capsys):
    _no_build(monkeypatch)
    folder = tmp_path / "read_only"
    folder.mkdir()
    folder.chmod(0o555)
    try:
        status, _, err = _run_in(tmp_path, monkeypatch, capsys,
                                 ["build", "--n", "1:3", "--p", "0.5", "-o",
                                  str(folder / "cube.nc")])  # fmt: skip
    finally:
        folder.chmod(0o755)
    assert status == 2 and "`-o` cannot be written: " in err and ".probe" not in err


def test_a_failed_write_names_the_users_file(tmp_path):
    # An error on the temporary file (a full disk, say) is told about the file asked for.
    target = tmp_path / "lot.txt"
    with pytest.raises(OSError, match=r"No space left on device; cannot write: '.*lot\.txt'"):
        with files.replacing(target) as tmp:
            raise OSError(28, "No space left on device", str(tmp))
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize(
    ("argv", "name", "looks_written"),
    [
        (["chart", "-o", "map.svg"], "map.svg", lambda b: b.startswith(b"<?xml")),
        (["table", "--format", "csv", "-o", "t.csv"], "t.csv", lambda b: b.startswith(b"p,tol,")),
        (["rules", "--format", "json", "-o", "r.json"], "r.json", lambda b: b"rows" in b),
        (["sheet", "-o", "s.pdf"], "s.pdf", lambda b: b.startswith(b"%PDF-")),
    ],
)  # fmt: skip
def test_writers_refuse_an_existing_file_without_force(
    chart_atlas, tmp_path, monkeypatch, capsys, argv, name, looks_written
):
    target = tmp_path / name
    target.write_text("the inspection log of lot 17\n")
    args = [*argv, "--atlas", str(chart_atlas.path)]
    status, out, err = _run_in(tmp_path, monkeypatch, capsys, args)
    assert (status, out) == (2, "")
    assert err == f"approx-atlas: error: `-o` {name!r} exists; pass --force to replace it.\n"
    assert target.read_text() == "the inspection log of lot 17\n"
    status, out, _ = _run_in(tmp_path, monkeypatch, capsys, [*args, "--force"])
    assert status == 0 and out == f"{name}\n"
    assert looks_written(target.read_bytes())
    assert os.listdir(tmp_path) == [name]


def test_writers_refuse_a_missing_directory_before_work(chart_atlas, tmp_path, monkeypatch,
                                                        capsys):  # fmt: skip
    for argv in (["chart", "-o", "no/map.png"], ["table", "-o", "no/t.md"],
                 ["rules", "-o", "no/r.md"], ["sheet", "-o", "no/s.pdf"],
                 ["wiki", "-o", "no/page"]):  # fmt: skip
        status, out, err = _run_in(tmp_path, monkeypatch, capsys,
                                   [*argv, "--atlas", str(chart_atlas.path)])  # fmt: skip
        assert (status, out) == (2, "")
        assert err == (f"approx-atlas: error: `-o` is in a directory that does not exist: "
                       f"{argv[-1]!r}.\n")  # fmt: skip
    assert os.listdir(tmp_path) == []


def test_wiki_into_a_directory(chart_atlas, tmp_path, monkeypatch, capsys):
    base = ["wiki", "--atlas", str(chart_atlas.path), "--method", "poisson", "-o", "page"]
    page = tmp_path / "page"
    page.mkdir()  # an empty directory is filled
    assert _run_in(tmp_path, monkeypatch, capsys, base)[0] == 0
    first = sorted(os.listdir(page))
    assert "index.html" in first and os.listdir(tmp_path) == ["page"]
    # A page already there: refused without --force, replaced with it.
    status, out, err = _run_in(tmp_path, monkeypatch, capsys, base)
    assert (status, out) == (2, "")
    assert err == ("approx-atlas: error: `-o` 'page' is a directory that is not empty; pass "
                   "--force to replace it.\n")  # fmt: skip
    (page / "old.svg").write_text("<svg/>")
    assert _run_in(tmp_path, monkeypatch, capsys, [*base, "--force"])[0] == 0
    assert sorted(os.listdir(page)) == first  # old.svg went with the old page
    assert os.listdir(tmp_path) == ["page"]  # no temporary or old directory left
    # A directory of other things is never replaced, even with --force.
    (page / "budget.xlsx").write_text("")
    status, _, err = _run_in(tmp_path, monkeypatch, capsys, [*base, "--force"])
    assert status == 2
    assert err == (
        "approx-atlas: error: `-o` 'page' holds files a page does not write (such as "
        "'budget.xlsx'); it is never replaced: name a new or empty directory.\n"
    )
    assert "budget.xlsx" in os.listdir(page)
    # A file where the directory should be.
    (tmp_path / "notes").write_text("")
    status, _, err = _run_in(tmp_path, monkeypatch, capsys, [*base[:-1], "notes"])
    assert err == "approx-atlas: error: `-o` must name a directory; got a file: 'notes'.\n"


def test_wiki_that_fails_midway_leaves_nothing(chart_atlas, tmp_path, monkeypatch, capsys):
    from atlas import sheets

    calls = []
    real = sheets.save_text

    def fail_on_second(path, data):  # index.md is written, index.html fails
        calls.append(path)
        if len(calls) == 2:
            raise OSError(28, "No space left on device", str(path))
        return real(path, data)

    monkeypatch.setattr(sheets, "save_text", fail_on_second)
    status, _, err = _run_in(tmp_path, monkeypatch, capsys,
                             ["wiki", "--atlas", str(chart_atlas.path), "--method", "poisson",
                              "-o", "page"])  # fmt: skip
    assert err == "approx-atlas: error: No space left on device: 'page/index.html'\n"
    assert os.listdir(tmp_path) == []  # no page, no temporary directory


def test_wiki_replaced_keeps_the_old_page_on_failure(chart_atlas, tmp_path, monkeypatch):
    from atlas import sheets

    page = tmp_path / "page"
    page.mkdir()
    (page / "index.html").write_text("the old page")

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device", "x")

    monkeypatch.setattr(sheets, "save_text", broken)
    with pytest.raises(OSError):
        sheets.write_wiki(chart_atlas, page, methods=["poisson"], overwrite=True)
    assert os.listdir(tmp_path) == ["page"] and os.listdir(page) == ["index.html"]
    assert (page / "index.html").read_text() == "the old page"


# ---- numbers: p as a fraction or percentage, read back unchanged; float32 digits -------------


@pytest.fixture(scope="module")
def tiny_path(tiny_ds, tmp_path_factory):
    return str(atlas.save_atlas(tiny_ds, tmp_path_factory.mktemp("tiny") / "tiny.nc"))


def _json(capsys, argv):
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize(
    ("text", "value"),
    [("1/10", 0.1), ("10%", 0.1), ("0.1", 0.1), ("1e-1", 0.1), ("1/3", 1 / 3),
     ("2.5%", 0.025), (" 1 / 4 ", 0.25)],
)  # fmt: skip
def test_p_as_fraction_or_percentage(capsys, tiny_path, text, value):
    # 1/10, 10% and 2.5% are the grid's 0.1 and 0.025 exactly (stored cells); 1/3 and 1/4 are
    # computed.
    record = _json(capsys, ["query", "--n", "10", "--p", text, "--tol", "0.01",
                            "--atlas", tiny_path])  # fmt: skip
    assert record["p"] == value
    assert record["source"] == ("atlas" if value in (0.1, 0.025) else "computed")
    assert main(["compare", "--n", "10", "--p", text, "--atlas", tiny_path, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["p"] == value


def test_p_lists_and_ranges_take_fractions_and_percentages(capsys, tiny_path):
    record = _json(capsys, ["min-n", "--p-range", "10%:1/2", "--tol", "0.01",
                            "--atlas", tiny_path])  # fmt: skip
    assert record["p_range"] == [0.1, 0.5]
    assert {0.1, 0.5} <= set(record["p_checked"])  # the grid p of the range, and more between
    assert main(["table", "--p", "1%,1/2", "--tol", "0.01", "--format", "json",
                 "--atlas", tiny_path]) == 0  # fmt: skip
    assert json.loads(capsys.readouterr().out)["ps"] == [0.01, 0.5]
    assert main(["grid", "--n", "10", "--p", "1/4,5%"]) == 0
    out = capsys.readouterr().out
    assert out == "n: 1 value, 10; p: 2 values from 0.05 to 0.25; 2 (n, p) points\n"


def test_p_is_printed_so_that_it_reads_back(capsys, tiny_path):
    argv = ["query", "--n", "10", "--p", "0.9999999", "--tol", "0.01", "--atlas", tiny_path]
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert out.startswith("Bin(n=10, p=0.9999999), normal_cc, interval error\n")
    record = _json(capsys, argv)
    assert record["p"] == 0.9999999 and "p=0.9999999:" in record["explain"]
    for argv in (["compare", "--n", "10", "--p", "0.9999999"],
                 ["min-n", "--p", "0.9999999", "--tol", "0.5"]):  # fmt: skip
        assert main([*argv, "--atlas", tiny_path]) == 0
        assert "p=1)" not in (out := capsys.readouterr().out) and "p = 1:" not in out
        assert "0.9999999" in out
    # A large n and a tiny tolerance are written in full too.
    assert main(["query", "--n", "123456789", "--p", "1/3", "--tol", "1.25e-7",
                 "--atlas", tiny_path]) == 0  # fmt: skip
    out = capsys.readouterr().out
    assert "Bin(n=123456789, p=0.3333333333333333)" in out and "tolerance       1.25e-7" in out


def test_float32_errors_are_printed_with_the_digits_the_file_holds(tiny_ds, tmp_path, capsys):
    path = str(atlas.save_atlas(atlas.cube.compact(tiny_ds), tmp_path / "tiny32.nc"))
    stored = float(tiny_ds["interval_error"].sel(approximation="normal_cc", n=50, p=0.1))
    digits7 = float(f"{np.float32(stored):.7g}")
    record = _json(capsys, ["query", "--n", "50", "--p", "0.1", "--tol", "0.01", "--atlas", path])
    assert (record["error"], record["error_digits"]) == (digits7, 7)
    ranking = _json(capsys, ["compare", "--n", "50", "--p", "0.1", "--atlas", path])
    assert ranking["error_digits"] == 7
    assert all(r["error"] == float(f"{r['error']:.7g}") for r in ranking["ranking"])
    assert main(["rules", "--format", "json", "--atlas", path]) == 0
    audit = json.loads(capsys.readouterr().out)
    assert audit["error_digits"] == 7
    assert all(r["worst_error"] == float(f"{r['worst_error']:.7g}") for r in audit["rows"])


# ---- words: --help lists the choices; plain English ------------------------------------------


@pytest.mark.parametrize("command", ["query", "min-n", "chart", "table", "rules", "sheet",
                                     "wiki", "build"])  # fmt: skip
def test_help_lists_the_methods(capsys, command):
    assert main([command, "--help"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert all(m in out for m in METHODS), command


@pytest.mark.parametrize("command", ["query", "min-n", "compare", "chart", "table", "rules"])
def test_help_lists_the_metrics_and_p_forms(capsys, command):
    assert main([command, "--help"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert all(m in out for m in METRICS), command
    if command in ("query", "min-n", "compare", "table"):
        assert "a fraction (1/20) or a percentage (5%)" in out


def test_grid_of_one_value_is_plain_english(capsys):
    assert main(["grid", "--n", "1000000", "--p", "0.5"]) == 0
    assert capsys.readouterr().out == "n: 1 value, 1000000; p: 1 value, 0.5; 1 (n, p) point\n"


def test_a_missing_or_damaged_embedded_atlas_is_named_so(bad_files, tmp_path, monkeypatch, capsys):
    # No --atlas typed: the message speaks of the embedded atlas, not of an option or `path`.
    missing = tmp_path / "default_atlas.nc"
    monkeypatch.setattr(store, "default_path", lambda: missing)
    for argv in (["inspect"], ["demo"], ["table"]):
        assert main(argv) == 2
        assert capsys.readouterr().err == (
            f"approx-atlas: error: the embedded atlas is missing: {str(missing)!r}; reinstall "
            "approx-atlas, or pass --atlas FILE.\n"
        )
    monkeypatch.setattr(store, "default_path", lambda: bad_files["flipped"])
    assert main(["inspect"]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"approx-atlas: error: the embedded atlas {str(bad_files['flipped'])!r}")
    assert "`" not in err


def test_wiki_never_replaces_the_current_directory(chart_atlas, tmp_path, monkeypatch, capsys):
    # Replacing a directory renames it away; a shell standing in it would be left in a deleted
    # directory, so "." (and any directory holding the current one) is refused.
    (tmp_path / "index.html").write_text("<p>an earlier page</p>")
    for target in (".", str(tmp_path)):
        argv = ["wiki", "--atlas", str(chart_atlas.path), "-o", target, "--force"]
        status, out, err = _run_in(tmp_path, monkeypatch, capsys, argv)
        assert (status, out) == (2, "")
        shown = str(tmp_path) if target == "." else target
        assert err == (
            f"approx-atlas: error: `-o` {shown!r} is the current directory or holds it; it is "
            "never replaced: name a new or empty directory beside it.\n"
        )
    assert os.listdir(tmp_path) == ["index.html"]
