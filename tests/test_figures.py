"""Tests for atlas.figures: figure files, the words shared by the charts, tables and sheets."""

import os
import xml.etree.ElementTree as ET

import matplotlib

matplotlib.use("Agg")  # before pyplot, so that no display is ever needed

import matplotlib.image as mpimg  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import pytest  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from atlas import charts, figures  # noqa: E402


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


# ---- files ----


def test_png_is_wide_and_not_blank(chart_atlas, tmp_path):
    fig = charts.error_map(chart_atlas, method="normal_cc")
    path = figures.save_figure(fig, tmp_path / "map.png")
    image = mpimg.imread(path)
    height, width = image.shape[:2]
    assert width >= figures.MIN_PNG_WIDTH
    assert width == 2000  # 10 in at the default 200 dpi
    assert image[..., :3].std() > 0.1  # not blank: colour fills most of the page
    assert sorted(os.listdir(tmp_path)) == ["map.png"]  # no temporary file left


def test_png_dpi_is_raised_to_the_minimum_width(tmp_path):
    fig = Figure(figsize=(4, 3))
    fig.add_subplot().plot([0, 1], [0, 1])
    image = mpimg.imread(figures.save_figure(fig, tmp_path / "small.png", dpi=50))
    assert image.shape[1] == 1600  # 4 in at ceil(1600 / 4) = 400 dpi


def test_svg_and_pdf(chart_atlas, tmp_path):
    fig = charts.error_map(chart_atlas, method="poisson", p_scale="linear")
    svg = figures.save_figure(fig, tmp_path / "map.SVG")
    root = ET.parse(svg).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    text = svg.read_text()
    assert "<metadata>" not in text and "Date" not in text  # reproducible: no date, no RDF
    pdf = figures.save_figure(fig, tmp_path / "map.pdf")
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-") and b"%%EOF" in data[-64:]
    assert len(_pdf_pages(data)) == 1
    # The same chart drawn again is written as the same bytes (no date, fixed ids).
    fig = charts.error_map(chart_atlas, method="poisson", p_scale="linear")
    again = figures.save_figure(fig, tmp_path / "again.svg")
    assert again.read_bytes() == svg.read_bytes()


def _pdf_pages(data):
    import re

    return re.findall(rb"/Type\s*/Page(?![s\w])", data)


def test_save_figure_refuses(tmp_path):
    fig = Figure()
    with pytest.raises(ValueError, match=r"^`path` must end in one of '\.png', '\.svg', "
                                         r"'\.pdf'; got '.*map\.jpg'\.$"):  # fmt: skip
        figures.save_figure(fig, tmp_path / "map.jpg")
    with pytest.raises(FileNotFoundError, match=r"^`path` is in a directory that does not "):
        figures.save_figure(fig, tmp_path / "missing" / "map.png")


def test_save_figure_leaves_no_half_file(tmp_path, monkeypatch):
    fig = Figure()

    def broken(*args, **kwargs):
        with open(args[0], "wb") as handle:
            handle.write(b"half")
        raise RuntimeError("disk full")

    monkeypatch.setattr(fig, "savefig", broken)
    with pytest.raises(RuntimeError, match="disk full"):
        figures.save_figure(fig, tmp_path / "map.png")
    assert os.listdir(tmp_path) == []


def test_levels_format():
    assert [figures.format_level(v) for v in (0.01, 0.005, 0.001, 1e-4, 2.5e-5)] == [
        "0.01", "0.005", "0.001", "1e-4", "2.5e-5"]  # fmt: skip
