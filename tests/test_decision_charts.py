"""Tests of atlas.decision_charts and the tail-chart and size-chart commands.

Source of every expected value: "definition", recomputed by atlas.tail_error / atlas.test_size
(tested against mpmath in test_tails.py and test_sizes.py).
"""

import numpy as np
import pytest

import atlas
from atlas.cli import main
from atlas.decision_charts import size_chart, tail_error_maps


def _line(fig, gid):
    (line,) = [ln for ax in fig.axes for ln in ax.get_lines() if ln.get_gid() == gid]
    return line


def test_size_chart_lines_are_the_sizes():
    fig = size_chart(50, 0.1, alternative="greater")
    approx, exact = _line(fig, "approximate-size"), _line(fig, "exact-size")
    alphas = approx.get_xdata()
    assert alphas[0] == pytest.approx(1e-4) and alphas[-1] == pytest.approx(0.2)
    t = atlas.test_size(50, 0.1, alphas[::40], alternative="greater")  # definition
    np.testing.assert_allclose(approx.get_ydata()[::40], t.size, rtol=1e-13)
    np.testing.assert_allclose(exact.get_ydata()[::40], t.exact_size, rtol=1e-13)
    nominal = _line(fig, "nominal-level")
    np.testing.assert_array_equal(nominal.get_xdata(), nominal.get_ydata())
    footer = [t for t in fig.texts if t.get_gid() == "footer"][0].get_text()
    assert "Computed exactly on demand" in footer and "Caution:" in footer


def test_tail_maps_panels_and_contours():
    fig = tail_error_maps(alphas=[0.01, 0.001], n="log:5:2000:6", p="0.1,0.3,0.5")
    panels = [ax for ax in fig.axes if ax.get_title().startswith("alpha = ")]
    assert [ax.get_title() for ax in panels] == ["alpha = 0.01", "alpha = 0.001"]
    gids = [c.get_gid() for ax in panels for c in ax.collections]
    assert gids.count("tolerance-contours") == 2


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: tail_error_maps(alphas=[0.1] * 5), r"^`alphas` must hold one to four levels"),
        (lambda: tail_error_maps(n="10", p="0.5"), r"^`n` and `p` must each hold at least two"),
        (lambda: size_chart(50, 0.1, alpha_range=(0.1, 0.01)), r"^`alpha_range` must be"),
        (lambda: size_chart(50, 1.1), r"^`p0` must be in the open interval"),
    ],
)
def test_errors(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_commands(capsys, tmp_path):
    target = tmp_path / "size.svg"
    argv = ["size-chart", "--n", "50", "--p0", "0.1", "--alternative", "greater", "-o",
            str(target)]  # fmt: skip
    assert main(argv) == 0
    assert capsys.readouterr().out.strip() == str(target)
    assert target.read_text().lstrip().startswith("<?xml")
    assert main(argv) == 2
    assert "pass --force to replace it" in capsys.readouterr().err
    chart = tmp_path / "tails.png"
    assert main(["tail-chart", "--alpha", "0.01", "--n-grid", "log:5:500:4", "--p-grid",
                 "0.2,0.5", "-o", str(chart)]) == 0  # fmt: skip
    assert chart.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    capsys.readouterr()
    assert main(["tail-chart", "-o", str(tmp_path / "x.gif")]) == 2
    assert "`-o` must end in one of '.png', '.svg', '.pdf'" in capsys.readouterr().err
