"""Tests for atlas.charts: contour maps and comparisons (figure files: tests/test_figures.py)."""

import os
import re
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
    # Labels of the tolerance contours (in the colour bar's notation) and of the rule curves.
    labels = [t.get_text() for t in ax.texts]
    assert {"10⁻²", "5×10⁻³", "10⁻³", "10⁻⁴"} <= set(labels)
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
    assert ds.attrs["source"] in footer and "schema 4" in footer
    assert f"built {ds.attrs['history'][:10]}" in footer  # the build date of the atlas
    assert f"checksum {ds.attrs['checksum']}" in footer  # whole, never cut with an ellipsis
    assert "…" not in footer
    assert " ".join(("Caution: " + cube.CAUTION).split()) in footer
    # The colour bar is labelled and carries the tolerance lines.
    colourbar = fig.axes[1]
    assert colourbar.get_ylabel() == "worst-case interval error (fixed scale 10⁻⁹ to 10⁰)"


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
    assert_allclose(fill.levels[[0, -1]], [-6.0, 6.0])  # one fixed range for every gain map
    (lines,) = _contours(ax, "gain-contours")
    assert 0.0 in lines.levels  # the line of equal errors
    # Stated positively: which method is better, and by how many times.
    labels = {t.get_text() for t in ax.texts if t.get_gid() == "contour-label"}
    assert "equal" in labels and "edgeworth_cc better by 10×" in labels
    assert not any("/" in t or "smaller" in t for t in labels)
    assert RULE_LABELS <= {line.get_label() for line in ax.get_lines()}
    assert _texts(fig)["title"] == ("edgeworth_cc or normal_cc: which is better, and by how "
                                    "many times")  # fmt: skip
    assert "Purple: edgeworth_cc better; orange: normal_cc better" in _texts(fig)["subtitle"]
    bar = fig.axes[1]
    ends = {t.get_gid(): t for t in bar.texts}
    assert ends["gain-end:edgeworth_cc"].get_position()[1] > 1  # above the purple end
    assert ends["gain-end:normal_cc"].get_position()[1] < 0  # below the orange end


def _fill_paths(fig):
    (fill,) = _contours(fig.axes[0], "gain-fill")
    return fill.levels, [[np.asarray(s) for s in level] for level in fill.allsegs]


def test_gain_map_colours_do_not_depend_on_the_order(chart_atlas):
    """The same method winning is the same colour whichever is ``method`` and ``method2``."""
    one = charts.gain_map(chart_atlas, method="edgeworth_cc", method2="normal_cc")
    two = charts.gain_map(chart_atlas, method="normal_cc", method2="edgeworth_cc")
    levels_one, paths_one = _fill_paths(one)
    levels_two, paths_two = _fill_paths(two)
    assert_array_equal(levels_one, levels_two)
    assert len(paths_one) == len(paths_two)
    for a, b in zip(paths_one, paths_two, strict=True):
        assert len(a) == len(b)
        for x, y in zip(a, b, strict=True):
            assert_array_equal(x, y)
    # edgeworth_cc is more accurate at large n away from p = 1/2: there the ratio is
    # positive (purple, the upper end of PuOr) in both figures.
    assert charts.gain_order("edgeworth_cc", "normal_cc") == ("normal_cc", "edgeworth_cc")
    assert charts.gain_order("normal_cc", "edgeworth_cc") == ("normal_cc", "edgeworth_cc")
    normal, edgeworth = (
        chart_atlas.error(100000, 0.1, method=m) for m in ("normal_cc", "edgeworth_cc")
    )
    assert normal > 10 * edgeworth  # so the map's purple side is edgeworth_cc winning
    texts = [{t.get_text() for t in f.axes[0].texts} for f in (one, two)]
    assert texts[0] == texts[1]


def test_gain_labels():
    assert charts.gain_text(0.0, "normal_cc", "edgeworth_cc") == "equal"
    assert charts.gain_text(2.0, "normal_cc", "edgeworth_cc") == "edgeworth_cc better by 100×"
    assert charts.gain_text(-1.0, "normal_cc", "edgeworth_cc") == "normal_cc better by 10×"
    assert [charts._factor(v) for v in (0.0, 1.0, -1.0, 3.0, 6.0)] == [
        "equal", "10×", "10×", "1,000×", "1,000,000×"]  # fmt: skip


def test_best_method_map_against_numpy(chart_atlas):
    fig = charts.best_method_map(chart_atlas)
    ax = fig.axes[0]
    (mesh,) = [c for c in ax.collections if isinstance(c, QuadMesh)]
    ds = chart_atlas.dataset
    errors = np.stack([ds["interval_error"].sel(approximation=m).values
                       for m in ("normal_cc", "edgeworth_cc", "poisson")])  # fmt: skip
    expected = np.argmin(errors, axis=0)  # the chart atlas is not pooled (see above)
    accuracy = np.stack([ds["interval_accuracy"].sel(approximation=m).values
                         for m in ("normal_cc", "edgeworth_cc", "poisson")])  # fmt: skip
    floor = np.maximum(charts.RESOLUTION, 3.0 * accuracy)  # below resolution: is_resolved
    expected[(errors <= floor).sum(axis=0) >= 2] = 3  # the tie category
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
        "normal_cc or edgeworth_cc: which is better"
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


# ---- charts for print: labels, specks, notation, colour range, rules ----

_POWER = r"10[⁻]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+"


def _drawn(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return canvas.get_renderer()


def _text_box(fig, text, renderer):
    """The corners (display) of a label's rotated rectangle: its upright size, turned."""
    probe = fig.text(0, 0, text.get_text(), fontproperties=text.get_fontproperties())
    box = probe.get_window_extent(renderer)
    probe.remove()
    cx, cy = text.axes.transData.transform(text.get_position())
    angle = np.radians(text.get_rotation())  # any range: cos and sin do not mind
    u, v = np.array([np.cos(angle), np.sin(angle)]), np.array([-np.sin(angle), np.cos(angle)])
    return np.array([(cx, cy) + sx * box.width / 2 * u + sy * box.height / 2 * v
                     for sx, sy in ((-1, -1), (1, -1), (1, 1), (-1, 1))])  # fmt: skip


def _overlap(a, b):
    """Whether two convex quadrilaterals overlap (separating axis test)."""
    for poly in (a, b):
        for k in range(4):
            edge = poly[(k + 1) % 4] - poly[k]
            axis = np.array([-edge[1], edge[0]])
            pa, pb = a @ axis, b @ axis
            if pa.max() <= pb.min() or pb.max() <= pa.min():
                return False
    return True


def _labels(ax):
    return [t for t in ax.texts if t.get_gid() == "contour-label"
            or str(t.get_gid()).startswith("rule-label:")]  # fmt: skip


def _line_angle(ax, text, reach=30.0):
    """The distance (display pixels) from a label's centre to its line, and the line's
    direction there (degrees): the principal axis of the line within ``reach`` pixels."""
    if text.get_gid() == "contour-label":
        (lines,) = [c for c in ax.collections if isinstance(c, ContourSet) and not c.filled
                    and c.get_gid() in ("tolerance-contours", "gain-contours")]  # fmt: skip
        curves = [np.asarray(s) for level in lines.allsegs for s in level if len(s) > 1]
    else:
        name = text.get_gid().split(":", 1)[1]
        (line,) = [x for x in ax.get_lines() if x.get_label() == name]
        curves = [np.column_stack(line.get_data()).astype(float)]
    centre = ax.transData.transform(text.get_position())
    best = None
    for curve in curves:
        pts = ax.transData.transform(curve)
        a, b = pts[:-1], pts[1:]
        ab = b - a
        t = np.clip(np.einsum("ij,ij->i", centre - a, ab) / np.maximum(
            np.einsum("ij,ij->i", ab, ab), 1e-12), 0, 1)  # fmt: skip
        d = np.hypot(*(a + t[:, None] * ab - centre).T)
        k = int(np.argmin(d))
        if best is None or d[k] < best[0]:
            steps = np.maximum(np.ceil(np.hypot(*ab.T)), 1).astype(int)  # 1-pixel samples
            dense = np.concatenate([a[m] + np.outer(np.arange(steps[m]) / steps[m], ab[m])
                                    for m in range(len(ab))])  # fmt: skip
            nearest = int(np.argmin(np.hypot(*(dense - centre).T)))
            near = dense[max(nearest - int(reach), 0) : nearest + int(reach) + 1]  # along it
            if len(near) < 2:
                near = np.array([a[k], b[k]])
            _, _, vt = np.linalg.svd(near - near.mean(axis=0))
            best = (float(d[k]), float(np.degrees(np.arctan2(vt[0, 1], vt[0, 0]))))
    return best


def _check_labels(fig):
    renderer = _drawn(fig)
    for ax in fig.axes:
        labels = _labels(ax)
        if not labels:
            continue
        spike = ax.transData.transform((ax.get_xlim()[0], 0.5))[1]
        boxes = []
        for text in labels:
            angle = (text.get_rotation() + 180) % 360 - 180  # matplotlib keeps it in [0, 360)
            assert -90 < angle <= 90, (text.get_text(), angle)  # right side up
            box = _text_box(fig, text, renderer)
            half = float(np.hypot(*(box[1] - box[0]))) / 2  # along the label
            distance, direction = _line_angle(ax, text, reach=half)
            assert distance < 3.0, text.get_text()  # on its line (display pixels, 100 dpi)
            turn = (angle - direction) % 180
            assert min(turn, 180 - turn) < 15, (text.get_text(), angle, direction)  # along it
            assert np.all(box[:, 1] > spike) or np.all(box[:, 1] < spike), text.get_text()
            boxes.append((text.get_text(), box))
        from matplotlib.path import Path as Outline

        dots = [ax.transData.transform(np.column_stack(line.get_data()).astype(float))
                for line in ax.get_lines() if line.get_gid() == "tolerance-islands"]  # fmt: skip
        for name, box in boxes:  # no label hides an island's dot
            for points in dots:
                assert not Outline(box).contains_points(points).any(), name
        for i, (name_a, a) in enumerate(boxes):
            for name_b, b in boxes[i + 1 :]:
                assert not _overlap(a, b), (name_a, name_b)
    return [(t.get_text(), t.get_position(), t.get_rotation()) for ax in fig.axes
            for t in _labels(ax)]  # fmt: skip


@pytest.mark.parametrize("kind", ["map", "gain", "compare", "best"])
def test_labels_along_lines_upright_and_apart(chart_atlas, kind):
    """Contour and rule labels: rotated with their line, right side up, on no other label and
    off the p = 1/2 line; placed the same way every time."""
    make = {
        "map": lambda: charts.error_map(chart_atlas, method="edgeworth_cc"),
        "gain": lambda: charts.gain_map(chart_atlas, method="normal_cc", method2="edgeworth_cc"),
        "compare": lambda: charts.compare_map(
            chart_atlas, method="normal_cc", method2="edgeworth_cc", stacked=True
        ),
        "best": lambda: charts.best_method_map(chart_atlas),
    }[kind]
    placed = _check_labels(make())
    assert len(placed) >= 5  # the five rules at least
    assert placed == _check_labels(make())  # deterministic


def test_labels_on_the_default_atlas():
    """The same checks on the embedded atlas, whose edgeworth_cc map was the crowded one."""
    import atlas

    default = atlas.open_atlas()
    fig = charts.error_map(default, method="edgeworth_cc", metric="cdf")
    placed = _check_labels(fig)
    names = [name for name, _, _ in placed]
    for level in ("10⁻²", "5×10⁻³", "10⁻³", "10⁻⁴"):
        assert names.count(level) == 2, level  # once below p = 1/2, once above
    assert RULE_LABELS <= set(names)


def _loops(segments, n, p, cells):
    """Closed pieces of line whose extent is under ``cells`` grid cells in n and in p."""
    count = 0
    for seg in segments:
        if len(seg) > 2 and np.allclose(seg[0], seg[-1]):
            i = np.interp(seg[:, 0], n, np.arange(n.size))
            j = np.interp(seg[:, 1], p, np.arange(p.size))
            count += max(np.ptp(i), np.ptp(j)) < cells
    return count


def test_no_specks_in_the_default_edgeworth_maps():
    """The maps that printed as dirt: no closed line of fewer than MIN_CELLS cells remains,
    where a plain contour of the same field has dozens; every unsafe cell is still shown."""
    import contourpy

    import atlas
    from atlas import contours

    default = atlas.open_atlas()
    for metric in ("interval", "cdf"):
        n, p, values = charts._pooled(default.dataset, "edgeworth_cc", metric)
        z = np.log10(values)
        fig = charts.error_map(default, method="edgeworth_cc", metric=metric)
        (lines,) = _contours(fig.axes[0], "tolerance-contours")
        plain = contourpy.contour_generator(n.astype(float), p, z.T, line_type="Separate")
        before = sum(_loops(plain.lines(lv), n, p, contours.MIN_CELLS) for lv in lines.levels)
        # A region of MIN_CELLS cells spans MIN_CELLS - 1 cell steps between cell centres.
        after = sum(_loops(seg, n, p, contours.MIN_CELLS - 1) for seg in lines.allsegs)
        assert after == 0 and before >= 10, (metric, before, after)
        dots = [line for line in fig.axes[0].get_lines() if line.get_gid() == "tolerance-islands"]
        spots = set()
        for level in lines.levels:
            _, islands = contours.simplify_level(z, level)
            for cells in islands:
                i, j = cells[np.argmax(z[cells[:, 0], cells[:, 1]])]
                spots.add((float(n[i]), float(p[j])))
        drawn = set()
        for line in dots:
            drawn |= {(float(x), float(y)) for x, y in zip(*line.get_data(), strict=True)}
        assert drawn == spots  # every island left out of the line work has its dot


def _speckled(seed):
    rng = np.random.default_rng(seed)
    base = np.add.outer(np.linspace(-4, 0, 60), np.linspace(-1, 1, 40) ** 2)  # smooth ramp
    return base + rng.normal(0, 0.4, base.shape)  # and noise that makes specks


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("level", [-3.0, -2.0, -1.0])
def test_simplify_level_keeps_every_unsafe_cell(seed, level):
    """A cell above the level stays above it in the line field, or is an island (marked);
    the line field is never below the field elsewhere; and no speck is left."""
    from scipy import ndimage

    from atlas import contours

    z = _speckled(seed)
    lines, islands = contours.simplify_level(z, level)
    marked = np.zeros(z.shape, bool)
    for cells in islands:
        marked[cells[:, 0], cells[:, 1]] = True
        assert np.all(z[cells[:, 0], cells[:, 1]] > level)  # islands are unsafe cells only
    assert np.all((lines > level) | marked | (z <= level))
    assert np.all((lines >= z) | marked)
    above = lines > level
    for mask in (above, ~above):
        labels, count = ndimage.label(mask)
        for box in ndimage.find_objects(labels, count):
            extent = max(box[0].stop - box[0].start, box[1].stop - box[1].start)
            assert extent >= contours.MIN_CELLS or mask is not above or not count or False
    labels, count = ndimage.label(above)
    extents = [max(b[0].stop - b[0].start, b[1].stop - b[1].start)
               for b in ndimage.find_objects(labels, count)]  # fmt: skip
    assert all(e >= contours.MIN_CELLS for e in extents)  # no unsafe speck in the line work


def test_simplify_level_marks_a_lone_unsafe_cell():
    from atlas import contours

    z = np.full((20, 20), -3.0)
    z[5, 7] = -1.5  # one cell above 10^-2 in a safe sea
    z[12:18, 2:9] = -1.0  # a real unsafe region, 6 x 7 cells
    z[14, 5] = -2.5  # a one-cell safe hole inside it
    lines, islands = contours.simplify_level(z, -2.0)
    assert [c.tolist() for c in islands] == [[[5, 7]]]
    assert lines[5, 7] < -2.0 and lines[14, 5] > -2.0  # hole filled: reads unsafe
    assert np.all(lines[12:18, 2:9] > -2.0)


def test_one_notation_per_axis_and_in_labels(chart_atlas):
    fig = charts.error_map(chart_atlas, method="normal_cc")
    _drawn(fig)
    ax, bar = fig.axes[0], fig.axes[1]
    lo, hi = ax.get_xlim()
    ticks = [t.get_text() for t in ax.get_xticklabels()
             if t.get_text() and lo <= t.get_position()[0] <= hi]  # fmt: skip
    assert ticks and all(re.fullmatch(_POWER, t) for t in ticks), ticks  # 10⁰ ... 10⁵
    assert ticks[0] == "10⁰"
    yticks = [t.get_text() for t in ax.get_yticklabels() if t.get_text()]
    assert all(re.fullmatch(r"0\.\d+", t) for t in yticks), yticks  # plain decimals throughout
    bar_ticks = [t.get_text() for t in bar.get_yticklabels() if t.get_text()]
    assert bar_ticks == [f"10{s}" for s in ("⁻⁹", "⁻⁸", "⁻⁷", "⁻⁶", "⁻⁵", "⁻⁴", "⁻³", "⁻²", "⁻¹",
                                            "⁰")]  # fmt: skip
    for text in (t.get_text() for t in ax.texts if t.get_gid() == "contour-label"):
        assert re.fullmatch(r"(\d(\.\d+)?×)?" + _POWER, text), text


def test_maps_of_one_metric_share_one_fixed_colour_range(chart_atlas):
    """Two maps compare by colour: the same bands and colours whatever each one's errors."""
    figs = [charts.error_map(chart_atlas, method=m) for m in ("normal_cc", "poisson")]
    figs.append(charts.compare_map(chart_atlas, method="normal_cc", method2="edgeworth_cc"))
    expected = np.arange(-9.0, 0.25, 0.5)  # 10^-9 to 10^0 in half decades (FILL_RANGE)
    for fig in figs:
        for ax in fig.axes:
            for fill in _contours(ax, "error-fill"):
                assert_allclose(fill.levels, expected)
                assert fill.norm.vmin == figs[0].axes[0].collections[0].norm.vmin
                assert fill.norm.vmax == figs[0].axes[0].collections[0].norm.vmax
        label = [a.get_ylabel() for a in fig.axes if "fixed scale" in a.get_ylabel()]
        assert label == ["worst-case interval error (fixed scale 10⁻⁹ to 10⁰)"]
    # An atlas whose errors all lie between 10^-6 and 10^-2 is drawn on the same scale.
    import atlas

    narrow = atlas.build_atlas(n="log:1000:100000:4", p="0.1,0.3,0.5", methods="normal_cc",
                               progress=False)  # fmt: skip
    assert float(narrow["interval_error"].max()) < 1e-2
    (fill,) = _contours(charts.error_map(narrow, method="normal_cc").axes[0], "error-fill")
    assert_allclose(fill.levels, expected)


def test_rule_curves_labelled_on_the_curve_and_told_apart_without_colour(chart_atlas):
    fig = charts.error_map(chart_atlas, method="normal_cc")
    _drawn(fig)
    ax = fig.axes[0]
    labels = {t.get_gid().split(":", 1)[1]: t for t in ax.texts
              if str(t.get_gid()).startswith("rule-label:")}  # fmt: skip
    assert set(labels) == RULE_LABELS
    for name, text in labels.items():
        distance, _ = _line_angle(ax, text)
        assert distance < 3.0, name  # on the curve it names
    # Line styles, not colour: all black, three dash patterns for the three constants.
    lines = [line for line in ax.get_lines() if line.get_label() in RULE_LABELS]
    assert {line.get_color() for line in lines} == {"black"}
    patterns = {constant: dashes for _, _, constant, dashes in charts.RULE_CURVES}
    assert len(set(patterns.values())) == 3


def test_compare_map_stacked(chart_atlas):
    fig = charts.compare_map(chart_atlas, method="normal_cc", method2="edgeworth_cc",
                             stacked=True)  # fmt: skip
    upper, lower = fig.axes[0], fig.axes[1]
    assert fig.get_figheight() > fig.get_figwidth()
    _drawn(fig)
    assert upper.get_position().y0 > lower.get_position().y1  # one above the other
    assert upper.get_title(loc="left").startswith("normal_cc")
    assert lower.get_title(loc="left").startswith("edgeworth_cc")
