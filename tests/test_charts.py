"""Tests for atlas.charts: contour maps and comparisons (figure files: tests/test_figures.py)."""

import os
import subprocess
import sys
import xml.etree.ElementTree as ET

import matplotlib

matplotlib.use("Agg")  # before pyplot, so that no display is ever needed

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.collections import QuadMesh  # noqa: E402
from matplotlib.contour import ContourSet  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from numpy.testing import assert_allclose, assert_array_equal  # noqa: E402

from atlas import charts, cube  # noqa: E402
from atlas.cli import main  # noqa: E402

RULE_LABELS = {"np = 5", "nq = 5", "np = 10", "nq = 10", "npq = 9"}


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


def _contours(ax, gid):
    return [c for c in ax.collections if isinstance(c, ContourSet) and c.get_gid() == gid]


def _texts(fig):
    return {t.get_gid(): t.get_text() for t in fig.texts if t.get_gid()}


# ---- error_map ----


def test_error_map_contents(chart_atlas):
    fig = charts.error_map(chart_atlas, method="normal_cc")
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "logit"
    assert "n (number of trials" in ax.get_xlabel() and "p (success" in ax.get_ylabel()
    # The drawn tolerance contours are the four default levels, in log10.
    (lines,) = _contours(ax, "tolerance-contours")
    assert not lines.filled
    assert_allclose(lines.levels, np.log10([1e-4, 1e-3, 5e-3, 1e-2]), rtol=1e-12)
    (fill,) = _contours(ax, "error-fill")
    assert fill.filled and fill.cmap.name == "viridis"  # perceptually uniform, colour-blind safe
    assert_allclose(np.diff(fill.levels), 0.5)  # half-decade bands
    # Labels of the tolerance contours and of the rule-of-thumb curves.
    labels = [t.get_text() for t in ax.texts]
    assert {"0.01", "0.005", "0.001", "1e-4"} <= set(labels)
    assert RULE_LABELS <= set(labels)
    rules = {line.get_label(): line for line in ax.get_lines()}
    assert set(rules) == RULE_LABELS
    assert all(line.get_linestyle() == "--" for line in rules.values())  # dashed
    assert ax.get_legend().get_gid() == "rules-legend"
    # Title, subtitle and footer state the method, the metric, the source and the caution.
    texts = _texts(fig)
    assert texts["title"] == "Worst-case error of interval probabilities: normal_cc"
    assert "Method normal_cc (normal, continuity-corrected): G(k) = Phi(z)" in texts["subtitle"]
    assert "Metric interval: max over 0 ≤ a ≤ b ≤ n" in texts["subtitle"]
    footer = " ".join(texts["footer"].split())
    ds = chart_atlas.dataset
    assert ds.attrs["source"] in footer and "schema 2" in footer
    assert f"built {ds.attrs['history'][:10]}" in footer  # the build date of the atlas
    assert ds.attrs["checksum"][:19] in footer
    assert " ".join(("Caution: " + cube.CAUTION).split()) in footer
    # The colour bar is labelled and carries the tolerance lines.
    colourbar = fig.axes[1]
    assert "worst-case interval error" in colourbar.get_ylabel()


def test_error_map_rule_curves_are_the_rules(chart_atlas):
    ax = charts.error_map(chart_atlas, method="edgeworth_cc", metric="cdf").axes[0]
    lines = {line.get_label(): line for line in ax.get_lines()}
    n, p = (np.asarray(a, dtype=float) for a in lines["np = 5"].get_data())
    assert_allclose(n * p, 5.0, rtol=1e-12)
    n, p = (np.asarray(a, dtype=float) for a in lines["nq = 10"].get_data())
    assert_allclose(n * (1 - p), 10.0, rtol=1e-12)
    n, p = (np.asarray(a, dtype=float) for a in lines["npq = 9"].get_data())
    assert_allclose(n * p * (1 - p), 9.0, rtol=1e-12)
    assert n.min() >= 36 - 1e-9  # npq = 9 needs n >= 36 (at p = 1/2)


def test_error_map_options(chart_atlas):
    fig = charts.error_map(chart_atlas, method="poisson", metric="cdf", levels=(0.02, 0.001),
                           p_scale="linear")  # fmt: skip
    ax = fig.axes[0]
    assert ax.get_yscale() == "linear"
    (lines,) = _contours(ax, "tolerance-contours")
    assert_allclose(lines.levels, np.log10([0.001, 0.02]), rtol=1e-12)
    assert _texts(fig)["title"] == "Worst-case error of the cumulative distribution: poisson"
    assert "Metric cdf: max over 0 ≤ k ≤ n of |P(X ≤ k) − G(k)|" in _texts(fig)["subtitle"]


def test_error_map_accepts_a_dataset(chart_atlas):
    fig = charts.error_map(chart_atlas.dataset, method="normal_cc")
    assert _texts(fig)["title"].endswith("normal_cc")


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"method": "bogus"}, ValueError,
         r"^`method` must be one of 'normal_cc', 'edgeworth_cc', 'poisson' \(the atlas's "
         r"methods\); got 'bogus'\.$"),
        ({"method": "camp_paulson"}, ValueError, r"^`method` must be one of .*'camp_paulson'"),
        ({"method": "normal_cc", "metric": "pdf"}, ValueError,
         r"^`metric` must be one of 'interval', 'cdf'; got 'pdf'\.$"),
        ({"method": "normal_cc", "p_scale": "log"}, ValueError,
         r"^`p_scale` must be one of 'logit', 'linear'; got 'log'\.$"),
        ({"method": "normal_cc", "levels": (0.01, 2)}, ValueError,
         r"^`levels` must be a non-empty sequence of numbers in \(0, 1\); got \(0\.01, 2\)\.$"),
        ({"method": "normal_cc", "levels": ()}, ValueError, r"^`levels` must be a non-empty"),
        ({"method": "normal_cc", "levels": "x"}, ValueError, r"^`levels` must be a sequence"),
    ],
)  # fmt: skip
def test_error_map_refuses(chart_atlas, kwargs, error, match):
    with pytest.raises(error, match=match):
        charts.error_map(chart_atlas, **kwargs)


def test_refuses_what_is_not_an_atlas():
    with pytest.raises(TypeError, match=r"^`atlas` must be an Atlas or an atlas Dataset; got "
                                        r"dict\.$"):  # fmt: skip
        charts.error_map({}, method="normal_cc")


# ---- pooling the dense n axis ----


def test_pool_n_keeps_the_largest_error():
    n = np.array([1, 2, 3, 100, 101, 102, 1000, 1001])
    values = np.array([[5.0], [4.0], [3.0], [1.0], [3.0], [2.0], [0.5], [np.nan]])
    # 1/10 decade bins: 1, 2, 3 each start a bin (log10 gaps >= 0.1), 100..102 share one.
    n_start, pooled = charts.pool_n(n, values, per_decade=10)
    assert_array_equal(n_start, [1, 2, 3, 100, 1000])
    assert_array_equal(pooled[:, 0], [5.0, 4.0, 3.0, 3.0, 0.5])  # max, NaN ignored


def test_pool_n_keeps_a_sparse_axis_whole(chart_atlas):
    n = chart_atlas.n
    n_start, pooled = charts.pool_n(n, np.ones((n.size, 2)))
    assert_array_equal(n_start, n)  # the chart atlas is sparser than 120 bins per decade
    assert pooled.shape == (n.size, 2)


# ---- compare, gain, best ----


def test_compare_map_shares_one_colour_scale(chart_atlas):
    fig = charts.compare_map(chart_atlas, method="normal_cc", method2="edgeworth_cc")
    left, right = fig.axes[0], fig.axes[1]
    (fill_left,) = _contours(left, "error-fill")
    (fill_right,) = _contours(right, "error-fill")
    assert_array_equal(fill_left.levels, fill_right.levels)
    assert left.get_title(loc="left").startswith("normal_cc")
    assert right.get_title(loc="left").startswith("edgeworth_cc")
    for ax in (left, right):
        assert {line.get_label() for line in ax.get_lines()} == RULE_LABELS
        assert_allclose(_contours(ax, "tolerance-contours")[0].levels,
                        np.log10(sorted(charts.LEVELS)), rtol=1e-12)  # fmt: skip
    # Both panels' error ranges lie inside the shared levels (or below, in the extended end).
    for method in ("normal_cc", "edgeworth_cc"):
        top = np.log10(chart_atlas.dataset["interval_error"].sel(approximation=method).max())
        assert top <= fill_left.levels[-1] + 1e-12
    assert "normal_cc and edgeworth_cc" in _texts(fig)["title"]
    with pytest.raises(ValueError, match=r"^`method2` must differ from `method`; got "
                                         r"'normal_cc' for both\.$"):  # fmt: skip
        charts.compare_map(chart_atlas, method="normal_cc", method2="normal_cc")
    with pytest.raises(ValueError, match=r"^`method2` must be one of "):
        charts.compare_map(chart_atlas, method="normal_cc", method2="peizer_pratt")


def test_gain_map(chart_atlas):
    fig = charts.gain_map(chart_atlas, method="edgeworth_cc", method2="normal_cc")
    ax = fig.axes[0]
    (fill,) = _contours(ax, "gain-fill")
    assert fill.cmap.name == "PuOr"  # diverging, colour-blind safe
    assert_allclose(fill.levels, -fill.levels[::-1], atol=1e-12)  # centred on a ratio of 1
    (lines,) = _contours(ax, "gain-contours")
    assert 0.0 in lines.levels  # the line of equal errors
    assert "1×" in [t.get_text() for t in ax.texts]
    assert RULE_LABELS <= {line.get_label() for line in ax.get_lines()}
    assert _texts(fig)["title"] == ("How many times smaller the error of edgeworth_cc is than "
                                    "that of normal_cc")  # fmt: skip
    # The reach of the colour scale covers the largest ratio in the atlas (up to 10^6).
    ds = chart_atlas.dataset["interval_error"]
    ratio = np.maximum(ds.sel(approximation="normal_cc").values, charts.RESOLUTION) / np.maximum(
        ds.sel(approximation="edgeworth_cc").values, charts.RESOLUTION
    )
    assert fill.levels[-1] >= min(np.abs(np.log10(ratio)).max(), 6.0) - 1e-12


def test_factor_labels():
    assert [charts._factor(v) for v in (0.0, 1.0, 2.0, -1.0, -2.0)] == [
        "1×", "10×", "100×", "1/10×", "1/100×"]  # fmt: skip


def test_best_method_map_against_numpy(chart_atlas):
    fig = charts.best_method_map(chart_atlas)
    ax = fig.axes[0]
    (mesh,) = [c for c in ax.collections if isinstance(c, QuadMesh)]
    ds = chart_atlas.dataset
    errors = np.stack([ds["interval_error"].sel(approximation=m).values
                       for m in ("normal_cc", "edgeworth_cc", "poisson")])  # fmt: skip
    expected = np.argmin(errors, axis=0)  # the chart atlas is not pooled (see above)
    expected[(errors <= charts.RESOLUTION).sum(axis=0) >= 2] = 3  # the tie category
    assert_array_equal(np.asarray(mesh.get_array()).reshape(expected.T.shape), expected.T)
    legend = fig.axes[1].get_legend()  # in a column of its own, beside the map
    assert legend.get_gid() == "methods-legend"
    names = [t.get_text() for t in legend.get_texts()]
    winners = {("normal_cc", "edgeworth_cc", "poisson")[k] for k in np.unique(expected) if k < 3}
    assert set(names) - {n for n in names if n.startswith("tie")} == winners
    colours = charts.method_colours(("normal_cc", "edgeworth_cc", "poisson"))
    assert set(colours.values()) <= set(charts.OKABE_ITO)
    assert len(set(colours.values())) == 3
    assert RULE_LABELS <= {line.get_label() for line in ax.get_lines()}


def test_best_method_map_refuses(chart_atlas):
    with pytest.raises(ValueError, match=r"^`methods` must name at least one method"):
        charts.best_method_map(chart_atlas, methods=[])
    with pytest.raises(ValueError, match=r"^`methods` must be one of "):
        charts.best_method_map(chart_atlas, methods=["normal"])


def test_chart_dispatch(chart_atlas):
    assert _texts(charts.chart(chart_atlas, kind="gain"))["title"].startswith(
        "How many times smaller the error of normal_cc is than that of edgeworth_cc"
    )
    with pytest.raises(ValueError, match=r"^`kind` must be one of 'map', 'compare', 'gain', "
                                         r"'best'; got 'pie'\.$"):  # fmt: skip
        charts.chart(chart_atlas, kind="pie")
    with pytest.raises(ValueError, match=r"^`method2` is for the kinds 'compare' and 'gain'; "
                                         r"got kind 'map'\.$"):  # fmt: skip
        charts.chart(chart_atlas, kind="map", method2="poisson")


def test_charts_do_not_load_pyplot_or_a_display():
    code = (
        "import sys, atlas, atlas.charts, atlas.sheets, atlas.rules\n"
        "assert 'matplotlib' not in sys.modules, 'import atlas loaded matplotlib'\n"
        "ds = atlas.build_atlas(n='1:12', p='0.2,0.5', methods='normal_cc', progress=False)\n"
        "atlas.charts.error_map(ds, method='normal_cc')\n"
        "assert 'matplotlib.pyplot' not in sys.modules\n"
    )
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "MPLBACKEND")}
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                            env=env, cwd=os.path.dirname(os.path.dirname(__file__)),
                            timeout=120)  # fmt: skip
    assert result.returncode == 0, result.stderr


# ---- the command line ----


def test_cli_chart(chart_atlas, tmp_path, capsys):
    out = tmp_path / "gain.svg"
    code = main(
        [
            "chart",
            "--atlas",
            str(chart_atlas.path),
            "--kind",
            "gain",
            "--method",
            "edgeworth_cc",
            "--method2",
            "poisson",
            "--metric",
            "cdf",
            "-o",
            str(out),
        ]
    )
    assert code == 0
    assert capsys.readouterr().out.strip() == str(out)
    ET.parse(out)
    out = tmp_path / "map.pdf"
    assert main(["chart", "--atlas", str(chart_atlas.path), "--p-scale", "linear", "-o",
                 str(out)]) == 0  # fmt: skip
    assert out.read_bytes().startswith(b"%PDF-")


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["-o", "x.gif"], "`-o` must end in one of '.png', '.svg', '.pdf'; got 'x.gif'."),
        (["--kind", "pie", "-o", "x.png"],
         "`--kind` must be one of 'map', 'compare', 'gain', 'best'; got 'pie'."),
        (["--method", "bogus", "-o", "x.png"],
         "`--method` must be one of 'normal_cc', 'edgeworth_cc', 'poisson' (the atlas's methods); "
         "got 'bogus'."),
        (["--p-scale", "log", "-o", "x.svg"],
         "`--p-scale` must be one of 'logit', 'linear'; got 'log'."),
    ],
)  # fmt: skip
def test_cli_chart_errors(chart_atlas, tmp_path, capsys, monkeypatch, args, message):
    monkeypatch.chdir(tmp_path)
    assert main(["chart", "--atlas", str(chart_atlas.path), *args]) == 2
    captured = capsys.readouterr()
    assert captured.err == f"approx-atlas: error: {message}\n"
    assert os.listdir(tmp_path) == []
