"""The coverage cube, its file, its maps and the minimum-n table.

Every value in the cube must equal what atlas.confidence computes for that cell (itself checked
against mpmath in tests/test_confidence.py); literal values are "computed, regression value".
"""

import json
import re

import netCDF4
import numpy as np
import pytest
import xarray as xr

import atlas
from atlas import coverage_charts, coverage_cube, figures
from atlas.confidence import coverage, expected_width, min_coverage
from atlas.coverage_questions import coverage_min_n, coverage_table


@pytest.fixture(scope="module")
def small_cube():
    return coverage_cube.build_coverage_cube(
        "1:12,40,200", "logit:0.01:0.99:9", intervals=["wald", "wilson", "clopper_pearson"],
        levels=[0.9, 0.95],
    )  # fmt: skip


def test_cube_values_are_the_api_values(small_cube):
    ds = small_cube
    lo, hi = ds["p_cell_lo"].values, ds["p_cell_hi"].values
    assert lo[0] == ds.p.values[0] and hi[-1] == ds.p.values[-1]
    assert np.array_equal(lo[1:], hi[:-1])  # the cells tile [p_first, p_last]
    for name in ("wald", "wilson", "clopper_pearson"):
        for level in (0.9, 0.95):
            for n in (1, 7, 40, 200):
                cell = ds.sel(interval=name, level=level, n=n)
                p = ds.p.values
                assert np.array_equal(cell.coverage.values,
                                      coverage(n, p, interval=name, level=level))  # fmt: skip
                np.testing.assert_allclose(
                    cell.min_coverage.values,
                    min_coverage(n, lo, hi, interval=name, level=level), rtol=0, atol=1e-15,
                )  # fmt: skip
                np.testing.assert_allclose(
                    cell.expected_width.values,
                    expected_width(n, p, interval=name, level=level), rtol=1e-12, atol=1e-15,
                )  # fmt: skip


def test_cube_attributes(small_cube):
    ds = small_cube
    for name in ("coverage", "min_coverage", "expected_width"):
        attrs = ds[name].attrs
        assert attrs["units"] == "1" and attrs["long_name"] and attrs["description"]
    assert ds.attrs["Conventions"].startswith("CF-")
    assert ds.attrs["n_spec"] == "1:12,40,200"
    assert "Brown, Cai & DasGupta (2001)" in ds.attrs["references"]
    # Clopper-Pearson keeps its level in every cell (theorem).
    cp = ds.min_coverage.sel(interval="clopper_pearson")
    assert bool((cp >= cp.level - 1e-12).all())


def test_cube_round_trip_through_an_atlas_file(small_cube, tmp_path):
    # The coverage variables travel in the atlas file (dimensions coverage_n and coverage_p
    # there, intervals in alphabetical order) and come back as the cube that was built.
    ds = atlas.build_atlas(n="5,9", p="0.2", methods="normal_cc", progress=False)
    path = atlas.save_atlas(coverage_cube.attach(ds, small_cube), tmp_path / "a.nc")
    with netCDF4.Dataset(path) as f:
        assert f.variables["coverage"].dimensions == ("interval", "level", "coverage_n",
                                                      "coverage_p")  # fmt: skip
        assert f.variables["p_cell_lo"].dimensions == ("coverage_p",)
        assert f.getncattr("coverage_n_spec") == "1:12,40,200"
    back = coverage_cube.open_coverage_cube(path)
    assert [str(v) for v in back["interval"].values] == ["wald", "wilson", "clopper_pearson"]
    xr.testing.assert_identical(back.drop_attrs(), small_cube.drop_attrs())
    assert {k: back.attrs[k] for k in ("n_spec", "p_spec", "p_cells", "title", "references")} == {
        k: small_cube.attrs[k] for k in ("n_spec", "p_spec", "p_cells", "title", "references")
    }
    assert back.attrs["history"].startswith(ds.attrs["history"])  # the atlas's own history
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.nc"]  # no temporary left


def test_an_atlas_without_coverage_variables_says_so(tmp_path):
    ds = atlas.build_atlas(n="5", p="0.2", methods="normal_cc", progress=False)
    path = atlas.save_atlas(ds, tmp_path / "plain.nc")
    message = r"^the atlas holds no coverage variables; build it with them \(--coverage of "
    with pytest.raises(ValueError, match=message + r"approx-atlas build\)\.$"):
        coverage_cube.open_coverage_cube(path)


def test_cube_errors():
    with pytest.raises(ValueError, match=r"^`interval` must be one of 'wald', .*got 'bogus'\.$"):
        coverage_cube.build_coverage_cube("1:3", "0.1,0.2", intervals=["bogus"])
    with pytest.raises(ValueError, match=r"^`level` must be in the open interval \(0, 1\)"):
        coverage_cube.build_coverage_cube("1:3", "0.1,0.2", levels=[1.0])
    with pytest.raises(ValueError, match=r"^`p` must give at least two values; got '0\.1'\.$"):
        coverage_cube.build_coverage_cube("1:3", "0.1")
    with pytest.raises(ValueError, match=r"^`n` must be at most 1000000 in a coverage cube"):
        coverage_cube.build_coverage_cube("2000000", "0.1,0.2")


def test_coverage_map(small_cube, tmp_path):
    fig = coverage_charts.coverage_map(small_cube, interval="wilson", level=0.95)
    gids = {a.get_gid() for a in fig.findobj() if a.get_gid()}
    assert {"coverage-field", "level-contour", "title", "subtitle", "footer"} <= gids
    texts = " ".join(t.get_text() for t in fig.texts)
    assert "wilson interval, nominal 0.95" in texts and "Caution:" in texts
    path = figures.save_figure(fig, tmp_path / "map.svg")
    assert path.stat().st_size > 10_000
    fig = coverage_charts.coverage_map(small_cube, interval="wald", level=0.9,
                                       variable="coverage")  # fmt: skip
    assert "level-contour" not in {a.get_gid() for a in fig.findobj()}


def test_coverage_map_errors(small_cube):
    with pytest.raises(ValueError, match=r"^`variable` must be one of 'min_coverage', 'coverage'"):
        coverage_charts.coverage_map(small_cube, variable="width")
    with pytest.raises(ValueError, match=r"^`interval` must be one the cube holds \(wald, "):
        coverage_charts.coverage_map(small_cube, interval="jeffreys")
    with pytest.raises(ValueError, match=r"^`level` must be one the cube holds \(0\.9, 0\.95\); "):
        coverage_charts.coverage_map(small_cube, level=0.99)


def test_coverage_table():
    table = coverage_table(0.05, 0.5, [0.93, 0.94], intervals=["wald", "wilson"], n_max=150)
    for name in ("wald", "wilson"):
        for floor in (0.93, 0.94):
            expected = coverage_min_n(0.05, 0.5, floor, interval=name, n_max=150)
            assert table.answers[(name, floor)] == expected
    # computed, regression values: Wilson keeps 93% from n = 116 (after earlier runs).
    assert table.cell("wilson", 0.93) == "116*" and table.cell("wald", 0.93) == "> 150"
    md = table.render("md")
    assert "| wilson | 116* | > 150 |" in md and "every n checked up to 150" in md
    assert table.render("csv").splitlines()[0] == "interval,floor 0.93,floor 0.94"
    rows = json.loads(table.render("json"))["rows"]
    assert {"interval": "wilson", "floor": 0.93, "min_n": 116, "last_failure": 115,
            "runs": [[43, 51], [56, 61], [116, 150]]} in rows  # fmt: skip
    with pytest.raises(ValueError, match=r"^`format` must be one of 'md', 'csv', 'json'; got 'x'"):
        table.render("x")
    with pytest.raises(ValueError, match=r"^`floors` must hold at least one floor; got none\.$"):
        coverage_table(0.05, 0.5, [])


# --- the coverage page and sheet ----------------------------------------------------------------


def test_coverage_page(small_cube, tmp_path):
    from atlas.coverage_pages import write_coverage_page

    written = write_coverage_page(tmp_path, cube=small_cube, bands=[(0.05, 0.5)], n_max=60)
    names = sorted(p.name for p in written)
    assert names == sorted(p.name for p in tmp_path.iterdir())  # nothing else, no temporary
    assert "coverage.html" in names and "coverage_wilson_95.svg" in names
    page = (tmp_path / "coverage.html").read_text()
    assert "<script" not in page and "http" not in page  # opens offline
    for src in re.findall(r'src="([^"]+)"', page):
        assert (tmp_path / src).is_file()
    table = coverage_table(0.05, 0.5, (0.93, 0.94, 0.95), n_max=60)
    md = (tmp_path / "coverage.md").read_text()
    for name in table.intervals:  # each row of the table, as the page sets it
        cells = " | ".join(table.cell(name, f).replace("|", "\\|") for f in table.floors)
        assert f"| {name} | {cells} |" in md
    assert (tmp_path / "coverage_min_n_0.05_0.5.csv").read_text() == table.render("csv")
    assert "Caution." in page and "Newcombe (1998), method 4" in page
    # The page's files are page files: the wiki may replace the directory that holds them.
    from atlas.files import check_directory_target

    assert check_directory_target(tmp_path, overwrite=True) == tmp_path


def test_coverage_sheet(small_cube, tmp_path):
    from atlas.coverage_pages import write_coverage_sheet

    path = write_coverage_sheet(tmp_path / "s.pdf", cube=small_cube, bands=[(0.05, 0.5)],
                                n_max=40)  # fmt: skip
    data = path.read_bytes()
    assert data.startswith(b"%PDF")
    # definitions, three maps, the tables, the caution (atlas.sections.section_pages)
    assert len(re.findall(rb"/Type\s*/Page\b", data)) == 1 + 3 + 1 + 1
    assert [p.name for p in tmp_path.iterdir()] == ["s.pdf"]
    with pytest.raises(ValueError, match=r"^`path` must end in '\.pdf'; got '.*s\.png'\.$"):
        write_coverage_sheet(tmp_path / "s.png", cube=small_cube)
