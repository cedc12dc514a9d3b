"""Charts of the tail relative error and of test sizes, computed on demand.

- :func:`tail_error_maps`: contour maps over (n, p) of the tail relative error, one panel per
  level alpha, with contour lines at relative tolerances.
- :func:`size_chart`: the size of the test with an approximation's p-value against the nominal
  level alpha, beside the exact test's, with the nominal level (size = alpha) marked.

No atlas file is read: every value is computed exactly (:mod:`atlas.tails`, :mod:`atlas.sizes`),
so the footer names the computation instead of an atlas. matplotlib is imported inside the
functions (:func:`atlas.figures.mpl`); save with :func:`atlas.figures.save_figure`.
"""

import textwrap

import numpy as np

from atlas import __version__, cube, figures
from atlas.approximations import check_method
from atlas.decision_rules import AUDIT_P
from atlas.decisions import _alpha, _point
from atlas.grid import describe_grid, parse_n, parse_p
from atlas.notation import format_p
from atlas.sizes import cell_all_sizes, check_alternative
from atlas.tails import cell_tail_errors, check_tail

__all__ = ["MAP_LEVELS", "MAP_N", "MAP_P", "size_chart", "tail_error_maps"]

MAP_LEVELS = (0.05, 0.01, 0.001, 0.0001)
MAP_N = "log:5:100000:41"
MAP_P = AUDIT_P
TOLERANCES = (0.01, 0.05, 0.1, 0.2, 0.5)
_TAIL_WORDS = {"lower": "lower tail P(X <= k)", "upper": "upper tail P(X >= k)",
               "both": "tail P(X <= k) or P(X >= k)"}  # fmt: skip
_TEST_WORDS = {"less": "lower one-sided test (less)", "greater": "upper one-sided test (greater)",
               "two-sided": "two-sided test"}  # fmt: skip


def _footer(fig, note):
    """Provenance (computed on demand), a note and the caution, at the foot of the figure."""
    size = figures.FOOTER_STYLE["fontsize"]
    width = int(0.975 * fig.get_figwidth() * 72 / (size * 0.55))
    text = (f"Computed exactly on demand by approx-atlas {__version__} (no atlas file). {note} "
            f"Caution: {cube.CAUTION}")  # fmt: skip
    lines = textwrap.wrap(text, width)
    fig.text(0.012, 0.012, "\n".join(lines), ha="left", va="bottom", gid="footer",
             **figures.FOOTER_STYLE)  # fmt: skip
    return 0.012 + (len(lines) * size * 1.35 + 10) / (72 * fig.get_figheight())


def tail_error_maps(
    *, method="normal_cc", tail="both", alphas=MAP_LEVELS, n=MAP_N, p=MAP_P, width=13.0,
    height=9.0,
):  # fmt: skip
    """Contour maps of the tail relative error over (n, p), one panel per level.

    Parameters
    ----------
    method : str, optional
    tail : {"both", "lower", "upper"}, optional
    alphas : sequence of float, optional
        Levels, one panel each (at most four); default 0.05, 0.01, 0.001, 0.0001.
    n, p : str or sequence, optional
        The grid (:func:`atlas.grid.parse_n`, :func:`atlas.grid.parse_p`); by default 41 n
        log-spaced from 5 to 10^5 and 41 p logit-spaced from 0.001 to 0.999, with 1/2.
    width, height : float, optional
        Inches.

    Returns
    -------
    matplotlib.figure.Figure
        Colour: log10 of the tail relative error; lines (gid ``"tolerance-contours"``) at the
        relative tolerances 1%, 5%, 10%, 20% and 50%.
    """
    method, tail = check_method(method), check_tail(tail)
    levels = tuple(_alpha(a) for a in ((alphas,) if isinstance(alphas, int | float) else alphas))
    if not 1 <= len(levels) <= 4:
        raise ValueError(f"`alphas` must hold one to four levels; got {len(levels)}.")
    n_axis, p_axis = parse_n(n), parse_p(p)
    if n_axis.size < 2 or p_axis.size < 2:
        raise ValueError("`n` and `p` must each hold at least two values for a map.")
    values = np.empty((len(levels), n_axis.size, p_axis.size))
    for a, cell_n in enumerate(n_axis):
        for b, cell_p in enumerate(p_axis):
            lower, upper = cell_tail_errors(int(cell_n), float(cell_p), method, levels)
            values[:, a, b] = {"lower": lower, "upper": upper}.get(tail, np.maximum(lower, upper))
    matplotlib = figures.mpl()
    fig = matplotlib.figure.Figure(figsize=(width, height), layout="constrained")
    cols = 1 if len(levels) == 1 else 2
    rows = (len(levels) + cols - 1) // cols
    logs = np.log10(np.maximum(values, 1e-16))
    fill = np.arange(np.floor(max(logs.min(), -8.0) * 2) / 2, np.ceil(logs.max() * 2) / 2 + 0.5,
                     0.5)  # fmt: skip
    x = np.log(p_axis / (1 - p_axis))
    filled = None
    for i, alpha in enumerate(levels):
        ax = fig.add_subplot(rows, cols, i + 1)
        filled = ax.contourf(x, n_axis, logs[i], levels=fill, cmap="viridis", extend="both")
        lines = ax.contour(x, n_axis, values[i], levels=TOLERANCES, colors="white",
                           linewidths=0.9)  # fmt: skip
        lines.set_gid("tolerance-contours")
        ax.clabel(lines, fmt=lambda v: f"{100 * v:g}%", fontsize=8)
        ax.set_yscale("log")
        ticks = [0.001, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999]
        ax.set_xticks([np.log(t / (1 - t)) for t in ticks], [format_p(t) for t in ticks])
        ax.set_xlabel("p (logit scale)")
        ax.set_ylabel("n")
        ax.set_title(f"alpha = {format_p(alpha)}", fontsize=10)
    bar = fig.colorbar(filled, ax=fig.axes, shrink=0.85)
    bar.set_label("log10 tail relative error (white lines: 1%, 5%, 10%, 20%, 50%)")
    fig.suptitle(f"Tail relative error of {method}: every {_TAIL_WORDS[tail]} of at least "
                 "alpha", fontsize=12)  # fmt: skip
    bottom = _footer(fig, f"Grid: {describe_grid(n_axis, p_axis)}.")
    fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
    return fig


def size_chart(
    n, p0, *, method="normal_cc", alternative="two-sided", alpha_range=(1e-4, 0.2), width=9.0,
    height=6.5,
):  # fmt: skip
    """The test's size against the nominal level, with the exact test's and size = alpha marked.

    Parameters
    ----------
    n : int
    p0 : float
        The null hypothesis, 0 < p0 < 1.
    method : str, optional
        Where the p-values come from.
    alternative : {"two-sided", "less", "greater"}, optional
    alpha_range : (float, float), optional
        The levels drawn (log scale), 400 points; default 1e-4 to 0.2.
    width, height : float, optional

    Returns
    -------
    matplotlib.figure.Figure
        Lines with gid ``"approximate-size"``, ``"exact-size"`` and ``"nominal-level"``.
    """
    n, p0 = _point(n, p0, "p0")
    method, alternative = check_method(method), check_alternative(alternative)
    lo, hi = (_alpha(a, "alpha_range") for a in alpha_range)
    if not lo < hi:
        raise ValueError(f"`alpha_range` must be (low, high) with low < high; got {alpha_range}.")
    alphas = np.geomspace(lo, hi, 400)
    size, exact = cell_all_sizes(n, p0, method, alphas)[alternative]
    matplotlib = figures.mpl()
    fig = matplotlib.figure.Figure(figsize=(width, height), layout="constrained")
    ax = fig.add_subplot()
    ax.plot(alphas, alphas, color="#888888", linestyle="--", linewidth=1,
            label="nominal level (size = alpha)", gid="nominal-level")  # fmt: skip
    ax.step(alphas, exact, where="post", color="#1f77b4", linewidth=1.2,
            label="exact test (exact p-values)", gid="exact-size")  # fmt: skip
    ax.step(alphas, size, where="post", color="#d62728", linewidth=1.6,
            label=f"{method} p-values", gid="approximate-size")  # fmt: skip
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("nominal level alpha")
    ax.set_ylabel("size: P(reject | H0 true)")
    ax.legend(loc="upper left")
    ax.grid(True, which="major", linewidth=0.4, alpha=0.5)
    fig.suptitle(f"Size of the {_TEST_WORDS[alternative]} of p = {format_p(p0)}, n = {n}",
                 fontsize=12)  # fmt: skip
    note = ("Above the dashed line the test rejects a true null more often than its level "
            "says.")  # fmt: skip
    bottom = _footer(fig, note)
    fig.get_layout_engine().set(rect=(0, bottom, 1, 1 - bottom))
    return fig
