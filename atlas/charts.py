"""Contour maps of the atlas: where each approximation is within a tolerance, and how the
methods compare.

Every function returns a :class:`matplotlib.figure.Figure` built without :mod:`matplotlib.pyplot`:
no display, no backend and no global figure registry is involved (the figure renders with Agg,
or the SVG and PDF back ends, when it is saved with :func:`atlas.figures.save_figure`), so the
functions work on a headless machine and never show a window. matplotlib is imported inside the
functions, so ``import atlas`` does not import it. What the maps share with the tables and
sheets (the footer, the words for methods and metrics) is in :mod:`atlas.figures`.

Reading a map
-------------
- x: n on a log axis; y: p on a logit axis (or linear).
- Colour: log10 of the worst-case error in half-decade bands, in the perceptually uniform
  ``viridis`` colour map, which stays readable with the common colour-vision deficiencies and
  in grey print.
- Solid lines: the tolerance contours, labelled with their tolerance.
- Dashed lines: the boundaries of the rules of thumb np = 5, nq = 5, np = 10, nq = 10 and
  npq = 9.
- Where the atlas's n axis is denser than a map can show (every integer up to 2000 in the
  default atlas), the n axis is pooled into bins of 1/``N_PER_DECADE`` decade and each bin is
  drawn with the *largest* error of the grid n it holds, at its smallest n: a map never shows a
  cell safer than the grid says.
"""

import math

import numpy as np

from atlas import cube, figures
from atlas.engine import check_metric
from atlas.figures import METHOD_LABELS, METRIC_FORMULAS, METRIC_LABELS

LEVELS = (1e-2, 5e-3, 1e-3, 1e-4)
P_SCALES = ("logit", "linear")
KINDS = ("map", "compare", "gain", "best")
N_PER_DECADE = 120  # pooled n columns per decade of n
ERROR_CMAP = "viridis"  # perceptually uniform, readable with colour-vision deficiency, in grey
GAIN_CMAP = "PuOr"  # diverging, colour-blind safe (ColorBrewer)
RESOLUTION = 1e-12  # the exact side's accuracy (REFERENCES.md): smaller errors are not told apart
TIE_COLOUR = "#BBBBBB"  # neutral grey: several methods below RESOLUTION
# Okabe & Ito (2008), "Color Universal Design": eight colours told apart under the common
# colour-vision deficiencies; black is kept for the overlays.
OKABE_ITO = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
             "#000000")  # fmt: skip
# The rule-of-thumb boundaries: (label, kind, constant, dashes); kind "np": n p = c, "nq": n q = c,
# "npq": n p q = c. Dash patterns tell the constants apart without colour.
RULE_CURVES = (
    ("np = 5", "np", 5.0, (0, (5, 3))),
    ("nq = 5", "nq", 5.0, (0, (5, 3))),
    ("np = 10", "np", 10.0, (0, (11, 4))),
    ("nq = 10", "nq", 10.0, (0, (11, 4))),
    ("npq = 9", "npq", 9.0, (0, (2, 2))),
)
# Where each rule's label sits, as the p of its anchor on the curve, per p scale.
_RULE_ANCHORS = {
    "logit": {"np = 5": 0.004, "nq = 5": 0.996, "np = 10": 0.04, "nq = 10": 0.96,
              "npq = 9": 0.62},
    "linear": {"np = 5": 0.06, "nq = 5": 0.94, "np = 10": 0.2, "nq = 10": 0.8, "npq = 9": 0.6},
}  # fmt: skip


def _check_levels(levels):
    try:
        values = [float(x) for x in levels]
    except (TypeError, ValueError):
        raise ValueError(
            f"`levels` must be a sequence of numbers in (0, 1); got {levels!r}."
        ) from None
    if not values or not all(0 < x < 1 for x in values):
        raise ValueError(
            f"`levels` must be a non-empty sequence of numbers in (0, 1); got {levels!r}."
        )
    return tuple(sorted(set(values)))


def pool_n(n, values, *, per_decade=N_PER_DECADE):
    """Pool the rows of ``values`` (one per n) into bins of 1/per_decade decade of n.

    Parameters
    ----------
    n : array_like of int
        The increasing n axis.
    values : numpy.ndarray
        Shape (len(n), ...).
    per_decade : float, optional
        Bins per decade.

    Returns
    -------
    n_start : numpy.ndarray
        The smallest n of each bin.
    pooled : numpy.ndarray
        The largest value of each bin (NaN ignored), shape (len(n_start), ...).

    Notes
    -----
    A bin starts at each n whose log10 lies at least 1/per_decade above the previous bin's start,
    so that sparse parts of the axis keep every n.

    Examples
    --------
    >>> n_start, pooled = pool_n([1, 2, 100, 101, 102, 1000], np.arange(6.0), per_decade=10)
    >>> n_start.tolist(), pooled.tolist()
    ([1, 2, 100, 1000], [0.0, 1.0, 4.0, 5.0])
    """
    n = np.asarray(n)
    log_n = np.log10(n.astype(np.float64))
    starts = [0]
    for i in range(1, n.size):
        if log_n[i] - log_n[starts[-1]] >= 1.0 / per_decade - 1e-12:
            starts.append(i)
    starts = np.asarray(starts)
    return n[starts], np.fmax.reduceat(np.asarray(values, dtype=np.float64), starts, axis=0)


def _pooled(ds, method, metric):
    n_start, pooled = pool_n(ds["n"].values, figures.errors_on_grid(ds, method, metric))
    return n_start, np.asarray(ds["p"].values, dtype=np.float64), pooled


def _titles(fig, title, subtitle):
    fig.text(0.012, 0.985, title, ha="left", va="top", fontsize=15, weight="bold", gid="title")
    fig.text(0.012, 0.945, subtitle, ha="left", va="top", fontsize=9.5, color="#222222",
             linespacing=1.4, gid="subtitle")  # fmt: skip


def _figure(width, height, *, top, bottom):
    mpl = figures.mpl()
    fig = mpl.figure.Figure(figsize=(width, height), dpi=100, layout="constrained")
    fig.get_layout_engine().set(rect=(0.0, bottom, 1.0, top - bottom), w_pad=0.08, h_pad=0.06)
    return fig


def _method_text(method):
    label = METHOD_LABELS.get(method)
    return f"{method} ({label})" if label else method


def _subtitle(method, metric):
    formula = cube.METHOD_DESCRIPTIONS.get(method, "")
    return (
        f"Method {_method_text(method)}: G(k) = {formula}\n"
        f"Metric {metric}: {METRIC_FORMULAS[metric]}, X ~ Bin(n, p), q = 1 − p"
    )


def _halo(width=3.0):
    mpl = figures.mpl()
    return [mpl.patheffects.withStroke(linewidth=width, foreground="white")]


def _axes_setup(ax, n, p, p_scale):
    mpl = figures.mpl()
    ax.set_xscale("log")
    ax.set_xlim(float(n[0]), float(n[-1]))
    ax.xaxis.set_major_locator(mpl.ticker.LogLocator(base=10, numticks=20))
    ax.xaxis.set_major_formatter(mpl.ticker.FuncFormatter(_n_tick))
    if p_scale == "logit":
        ax.set_yscale("logit")
        ticks = [t for t in (1e-4, 1e-3, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999, 0.9999)
                 if p[0] <= t <= p[-1]]  # fmt: skip
        ax.yaxis.set_major_locator(mpl.ticker.FixedLocator(ticks))
        ax.yaxis.set_minor_locator(mpl.ticker.NullLocator())
        ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
    else:
        ax.yaxis.set_major_locator(mpl.ticker.MultipleLocator(0.1))
        ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:.1f}"))
    ax.set_ylim(float(p[0]), float(p[-1]))
    ax.set_xlabel("n (number of trials, log scale)", fontsize=10)
    ax.set_ylabel(f"p (success probability, {p_scale} scale)", fontsize=10)
    ax.tick_params(labelsize=9)


def _n_tick(value, _pos):
    if value <= 0:
        return ""
    exponent = round(math.log10(value))
    if abs(value - 10.0**exponent) > 1e-9 * value:
        return ""
    return f"{int(round(value)):,}" if exponent <= 4 else f"$10^{{{exponent}}}$"


def _rule_points(kind, constant, p):
    """The curve n p = c, n q = c or n p q = c as (n, p) points over the p range drawn."""
    grid = 1.0 / (1.0 + np.exp(-np.linspace(_logit(p[0]), _logit(p[-1]), 1200)))
    q = 1.0 - grid
    n = constant / {"np": grid, "nq": q, "npq": grid * q}[kind]
    return n, grid


def _logit(x):
    return math.log(x / (1.0 - x))


def _rule_anchor(kind, constant, p_anchor):
    q_anchor = 1.0 - p_anchor
    n_anchor = constant / {"np": p_anchor, "nq": q_anchor, "npq": p_anchor * q_anchor}[kind]
    return n_anchor, p_anchor


def draw_rules(ax, n, p, p_scale):
    """Draw the dashed rule-of-thumb boundaries with their labels on ``ax``.

    Returns
    -------
    list of matplotlib.lines.Line2D
        Legend handles, one per dash pattern (``"np = 5, nq = 5"``, ...).
    """
    mpl = figures.mpl()
    styles = {}
    for label, kind, constant, dashes in RULE_CURVES:
        xs, ys = _rule_points(kind, constant, p)
        keep = (xs >= n[0]) & (xs <= n[-1])
        if keep.sum() < 2:
            continue
        ax.plot(xs[keep], ys[keep], color="black", linewidth=1.1, linestyle=dashes,
                path_effects=_halo(2.6), label=label, gid=f"rule:{label}", zorder=4)  # fmt: skip
        styles.setdefault(dashes, []).append(label)
        x0, y0 = _rule_anchor(kind, constant, _RULE_ANCHORS[p_scale][label])
        if n[0] <= x0 <= n[-1] and p[0] <= y0 <= p[-1]:
            ax.annotate(label, (x0, y0), xytext=(5, 0), textcoords="offset points", ha="left",
                        va="center", fontsize=8.5, style="italic", zorder=6,
                        gid=f"rule-label:{label}", annotation_clip=True,
                        bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                              "alpha": 0.85})  # fmt: skip
    return [
        mpl.lines.Line2D(
            [], [], color="black", linewidth=1.1, linestyle=dashes, label=", ".join(labels)
        )
        for dashes, labels in styles.items()
    ]


_LEGEND_STYLE = {"fontsize": 8.5, "frameon": False, "handlelength": 4.0, "columnspacing": 1.6,
                 "title_fontsize": 8.5}  # fmt: skip


def _rules_legend_above(ax, handles):
    """The legend of the rule curves in one row just above the axes, at the right."""
    if handles:
        box = ax.legend(handles=handles, loc="lower right", bbox_to_anchor=(1.0, 1.0),
                        ncols=len(handles), borderaxespad=0.2, **_LEGEND_STYLE)  # fmt: skip
        box.set_gid("rules-legend")


def _log_error(values):
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log10(np.maximum(values, 1e-300))


def _fill_levels(*arrays):
    """Half-decade fill levels from the 1st percentile of the errors of ``arrays`` to their
    maximum; smaller errors take the lowest colour (the colour bar's pointed end)."""
    finite = np.concatenate([a[np.isfinite(a) & (a > 0)].ravel() for a in arrays])
    if finite.size == 0:
        return np.array([-3.0, -2.5, -2.0]), "neither"
    floor = np.percentile(np.log10(finite), 1.0)
    lo = max(math.floor(2 * floor) / 2, -12.0)
    hi = min(math.ceil(2 * math.log10(finite.max())) / 2, 0.0)
    if hi <= lo:
        hi = lo + 0.5
    extend = "min" if math.log10(finite.min()) < lo else "neither"
    return np.arange(lo, hi + 0.25, 0.5), extend


def _label_positions(n, p, field, level, p_scale):
    """Where to label one contour level: where it last crosses p = 0.15 and 0.85 (0.25 and
    0.75 on a linear axis) along n, so that labels sit apart from the rules' labels and from
    one another (one contour per n)."""
    targets = (0.15, 0.85) if p_scale == "logit" else (0.25, 0.75)
    spots = []
    for target in targets:
        j = int(np.argmin(np.abs(p - target)))
        with np.errstate(invalid="ignore"):
            side = np.sign(field[:, j] - level)
        crossings = np.flatnonzero(side[:-1] * side[1:] < 0)
        if crossings.size:
            i = crossings[-1]
            spots.append((float(np.sqrt(n[i] * n[i + 1])), float(p[j])))
    return spots


def _label_contours(ax, lines, n, p, field, labels, p_scale):
    """Label each level of ``lines`` (keys of ``labels``, in the units of ``field``) at the
    spots of `_label_positions`, or where matplotlib chooses when it has none there."""
    drawn = [lv for lv in labels if np.any(np.isclose(lines.levels, lv))]
    placed = {lv: _label_positions(n, p, field, lv, p_scale) for lv in drawn}
    manual = [xy for spots in placed.values() for xy in spots]
    texts = []
    if manual:
        texts += ax.clabel(lines, levels=[lv for lv in drawn if placed[lv]], fmt=labels,
                           inline=True, fontsize=9, inline_spacing=6, manual=manual)  # fmt: skip
    rest = [lv for lv in drawn if not placed[lv]]
    if rest:
        texts += ax.clabel(lines, levels=rest, fmt=labels, inline=True, fontsize=9)
    for text in texts:
        text.set(path_effects=_halo(2.5), weight="bold")
    return texts


def _draw_error_panel(ax, n, p, values, *, levels, fill, extend, p_scale, cmap=ERROR_CMAP):
    """Filled log10 contours, tolerance contours with labels, and the rules."""
    z = _log_error(values).T  # contourf wants (len(p), len(n))
    filled = ax.contourf(n, p, z, levels=fill, cmap=cmap, extend=extend)
    filled.set_rasterized(True)  # a vector file keeps its text and lines, the fill as an image
    filled.set_gid("error-fill")
    log_levels = np.log10(np.asarray(levels))
    lines = ax.contour(n, p, z, levels=log_levels, colors="black", linewidths=1.6,
                       linestyles="solid", zorder=5)  # fmt: skip
    lines.set_gid("tolerance-contours")
    lines.set(path_effects=_halo(3.5))
    labels = {lv: figures.format_level(v) for lv, v in zip(log_levels, levels, strict=True)}
    _label_contours(ax, lines, n, p, z.T, labels, p_scale)
    handles = draw_rules(ax, n, p, p_scale)
    _axes_setup(ax, n, p, p_scale)
    return filled, lines, handles


def _error_colorbar(fig, filled, lines, ax, metric):
    mpl = figures.mpl()
    cbar = fig.colorbar(filled, ax=ax, pad=0.015, fraction=0.05, aspect=30)
    cbar.set_label(f"worst-case {metric} error (colour: log10, half-decade bands)", fontsize=10)
    lo, hi = filled.levels[0], filled.levels[-1]
    cbar.set_ticks(np.arange(math.ceil(lo), math.floor(hi) + 1))
    cbar.ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"$10^{{{v:.0f}}}$"))
    cbar.ax.tick_params(labelsize=9)
    if lines is not None and len(lines.levels):
        cbar.add_lines(lines)
    return cbar


_MAP_NOTE = (
    "Solid lines: tolerance contours. Dashed: rule-of-thumb boundaries. Each drawn column holds "
    "the largest error of the grid n it stands for (bins of 1/{per} decade), so a cell never "
    "looks safer than the grid says."
)


def error_map(atlas, *, method, metric="interval", levels=LEVELS, p_scale="logit",
              width=10.0, height=7.4):  # fmt: skip
    """A contour map of one method's worst-case error over the atlas grid.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
        An opened atlas (:func:`atlas.open_atlas`) or its Dataset.
    method : str
        A method the atlas holds.
    metric : {"interval", "cdf"}, optional
        The error drawn; default ``"interval"``.
    levels : sequence of float, optional
        Tolerances in (0, 1) drawn as labelled contour lines; default (0.01, 0.005, 0.001, 1e-4).
    p_scale : {"logit", "linear"}, optional
        The p axis; default ``"logit"``, which shows both tails.
    width, height : float, optional
        Figure size in inches.

    Returns
    -------
    matplotlib.figure.Figure
        With a title and subtitle naming the method and metric, a colour bar, the tolerance
        contours (gid ``"tolerance-contours"``), the rule-of-thumb curves (lines labelled
        ``"np = 5"`` etc.) and a footer with the provenance and the caution.

    Raises
    ------
    ValueError
        For a method the atlas does not hold, or a bad metric, levels or p_scale.
    TypeError
        If ``atlas`` is not an Atlas or an atlas Dataset.

    Notes
    -----
    Colour is log10 W(n, p) for the interval metric, W = max over 0 <= a <= b <= n of
    |P(a <= X <= b) - (G(b) - G(a-1))|, or log10 max over k of |F(k) - G(k)| for ``cdf``.
    """
    ds = figures.as_dataset(atlas)
    figures.check_atlas_method(ds, method)
    check_metric(metric)
    levels = _check_levels(levels)
    figures.check_choice(p_scale, "p_scale", P_SCALES)
    n, p, values = _pooled(ds, method, metric)
    fill, extend = _fill_levels(values)
    fig = _figure(width, height, top=0.895, bottom=0.095)
    ax = fig.add_subplot()
    filled, lines, handles = _draw_error_panel(ax, n, p, values, levels=levels, fill=fill,
                                               extend=extend, p_scale=p_scale)  # fmt: skip
    _rules_legend_above(ax, handles)
    _error_colorbar(fig, filled, lines, ax, metric)
    _titles(fig, f"Worst-case error of {METRIC_LABELS[metric]}: {method}",
            _subtitle(method, metric))  # fmt: skip
    figures.footer(fig, ds, _MAP_NOTE.format(per=N_PER_DECADE))
    return fig


def compare_map(atlas, *, method, method2, metric="interval", levels=LEVELS, p_scale="logit",
                width=15.0, height=7.4):  # fmt: skip
    """Two methods' error maps side by side on one colour scale.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    method, method2 : str
        Two different methods the atlas holds: left and right panel.
    metric, levels, p_scale, width, height
        As for :func:`error_map`.

    Returns
    -------
    matplotlib.figure.Figure
        Two axes sharing one colour bar.

    Raises
    ------
    ValueError
        As for :func:`error_map`, or if ``method2`` equals ``method``.
    """
    ds = figures.as_dataset(atlas)
    figures.check_atlas_method(ds, method)
    figures.check_atlas_method(ds, method2, "method2")
    _check_distinct(method, method2)
    check_metric(metric)
    levels = _check_levels(levels)
    figures.check_choice(p_scale, "p_scale", P_SCALES)
    n, p, left = _pooled(ds, method, metric)
    _, _, right = _pooled(ds, method2, metric)
    fill, extend = _fill_levels(left, right)
    fig = _figure(width, height, top=0.895, bottom=0.095)
    axes = fig.subplots(1, 2, sharey=True)
    drawn = []
    for ax, name, values in ((axes[0], method, left), (axes[1], method2, right)):
        drawn.append(_draw_error_panel(ax, n, p, values, levels=levels, fill=fill,
                                       extend=extend, p_scale=p_scale))  # fmt: skip
        ax.set_title(_method_text(name), fontsize=11, loc="left")
    axes[1].set_ylabel("")
    _error_colorbar(fig, drawn[0][0], drawn[0][1], list(axes), metric)
    if drawn[0][2]:  # in the title band, at the right: outside legends ignore the layout rect
        box = fig.legend(
            handles=drawn[0][2],
            loc="upper right",
            bbox_to_anchor=(0.995, 0.99),
            ncols=len(drawn[0][2]),
            title="rules of thumb",
            **_LEGEND_STYLE,
        )
        box.set_gid("rules-legend")
    _titles(fig, f"Worst-case error of {METRIC_LABELS[metric]}: {method} and {method2}",
            f"Left G(k) = {cube.METHOD_DESCRIPTIONS.get(method, method)}; right G(k) = "
            f"{cube.METHOD_DESCRIPTIONS.get(method2, method2)}\n"
            f"Metric {metric}: {METRIC_FORMULAS[metric]}, X ~ Bin(n, p); one colour scale for "
            "both panels")  # fmt: skip
    figures.footer(fig, ds, _MAP_NOTE.format(per=N_PER_DECADE))
    return fig


def _check_distinct(method, method2):
    if method == method2:
        raise ValueError(f"`method2` must differ from `method`; got {method2!r} for both.")


def gain_map(atlas, *, method, method2="normal_cc", metric="interval", p_scale="logit",
             width=10.0, height=7.4):  # fmt: skip
    """How many times smaller the error of ``method`` is than that of ``method2``.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    method : str
        The method judged.
    method2 : str, optional
        The method it is judged against; default ``"normal_cc"``.
    metric, p_scale, width, height
        As for :func:`error_map`.

    Returns
    -------
    matplotlib.figure.Figure
        Colour: log10 of the ratio, on a diverging colour-blind-safe map centred on 1; contour
        lines at the ratios 1/100, 1/10, 1, 10, 100 (those that occur) labelled ``"1×"`` etc.

    Raises
    ------
    ValueError
        As for :func:`compare_map`.

    Notes
    -----
    gain(n, p) = E2(n, p) / E1(n, p), with E1 the error of ``method`` and E2 that of
    ``method2`` (each the worst over a pooled n bin); errors below ``RESOLUTION`` = 1e-12, the
    accuracy of the exact side, count as 1e-12.
    """
    mpl = figures.mpl()
    ds = figures.as_dataset(atlas)
    figures.check_atlas_method(ds, method)
    figures.check_atlas_method(ds, method2, "method2")
    _check_distinct(method, method2)
    check_metric(metric)
    figures.check_choice(p_scale, "p_scale", P_SCALES)
    n, p, mine = _pooled(ds, method, metric)
    _, _, theirs = _pooled(ds, method2, metric)
    with np.errstate(invalid="ignore"):
        ratio = np.log10(np.maximum(theirs, RESOLUTION) / np.maximum(mine, RESOLUTION)).T
    finite = ratio[np.isfinite(ratio)]
    reach = float(np.abs(finite).max()) if finite.size else 1.0
    reach = min(max(math.ceil(reach * 2) / 2, 0.5), 6.0)
    step = 0.25 if reach <= 2 else 0.5
    fill = np.arange(-reach, reach + step / 2, step)
    fig = _figure(width, height, top=0.895, bottom=0.095)
    ax = fig.add_subplot()
    filled = ax.contourf(n, p, ratio, levels=fill, cmap=GAIN_CMAP, extend="both")
    filled.set_rasterized(True)
    filled.set_gid("gain-fill")
    marks = [v for v in (-2.0, -1.0, 0.0, 1.0, 2.0) if -reach <= v <= reach]
    lines = ax.contour(n, p, ratio, levels=marks, colors="black", linewidths=1.4,
                       linestyles="solid", zorder=5)  # fmt: skip
    lines.set_gid("gain-contours")
    lines.set(path_effects=_halo(3.5))
    _label_contours(ax, lines, n, p, ratio.T, {v: _factor(v) for v in marks}, p_scale)
    _rules_legend_above(ax, draw_rules(ax, n, p, p_scale))
    _axes_setup(ax, n, p, p_scale)
    cbar = fig.colorbar(filled, ax=ax, pad=0.015, fraction=0.05, aspect=30)
    cbar.set_label(f"{method2} error ÷ {method} error (log scale)", fontsize=10)
    cbar.set_ticks([v for v in np.arange(-math.floor(reach), math.floor(reach) + 1)])
    cbar.ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: _factor(v)))
    cbar.ax.tick_params(labelsize=9)
    if len(lines.levels):
        cbar.add_lines(lines)
    _titles(fig, f"How many times smaller the error of {method} is than that of {method2}",
            f"Ratio of worst-case errors of {METRIC_LABELS[metric]} ({metric} metric: "
            f"{METRIC_FORMULAS[metric]})\nPurple: {method} errs less; orange: {method2} errs "
            f"less; line 1×: equal")  # fmt: skip
    figures.footer(fig, ds, "Dashed: rule-of-thumb boundaries. Each drawn column compares the "
                   f"largest errors of the grid n it stands for (bins of 1/{N_PER_DECADE} "
                   f"decade); errors below {RESOLUTION:g} count as {RESOLUTION:g}.")  # fmt: skip
    return fig


def _factor(log_ratio):
    """A ratio for people: 1×, 10×, 1/10×."""
    value = 10.0**log_ratio
    if abs(log_ratio) < 1e-9:
        return "1×"
    if value >= 1:
        return f"{value:,.0f}×" if value < 1e4 else f"$10^{{{log_ratio:.0f}}}$×"
    inverse = 1 / value
    return f"1/{inverse:,.0f}×" if inverse < 1e4 else f"$10^{{{log_ratio:.0f}}}$×"


def method_colours(methods):
    """A fixed Okabe-Ito colour for each method, the same in every chart."""
    from atlas.approximations import METHODS

    order = list(METHODS) + [m for m in methods if m not in METHODS]
    return {m: OKABE_ITO[order.index(m) % 7] for m in methods}


def best_method_map(atlas, *, metric="interval", methods=None, p_scale="logit", width=10.0,
                    height=7.4):  # fmt: skip
    """Which method has the smallest worst-case error at each cell.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    metric : {"interval", "cdf"}, optional
    methods : sequence of str, optional
        The candidates (default every method of the atlas).
    p_scale, width, height
        As for :func:`error_map`.

    Returns
    -------
    matplotlib.figure.Figure
        Categories in the Okabe-Ito palette with a legend of the methods that win somewhere.

    Raises
    ------
    ValueError
        For a method the atlas does not hold, an empty list, or a bad metric or p_scale.

    Notes
    -----
    Each cell (a pooled n bin) goes to the method whose largest error over the bin is smallest;
    an exact tie goes to the method listed first. Where two or more methods err by less than
    ``RESOLUTION`` = 1e-12, the accuracy of the exact side, the cell is a tie (grey).
    """
    mpl = figures.mpl()
    ds = figures.as_dataset(atlas)
    check_metric(metric)
    figures.check_choice(p_scale, "p_scale", P_SCALES)
    methods = figures.atlas_methods(ds) if methods is None else tuple(methods)
    if not methods:
        raise ValueError("`methods` must name at least one method; got an empty sequence.")
    for m in methods:
        figures.check_atlas_method(ds, m, "methods")
    stack = []
    for m in methods:
        n, p, values = _pooled(ds, m, metric)
        stack.append(np.where(np.isfinite(values), values, np.inf))
    stack = np.stack(stack)
    winner = np.argmin(stack, axis=0).T  # the first index wins an exact tie
    tie = ((stack <= RESOLUTION).sum(axis=0) >= 2).T
    winner[tie] = len(methods)
    colours = method_colours(methods)
    cmap = mpl.colors.ListedColormap([colours[m] for m in methods] + [TIE_COLOUR])
    norm = mpl.colors.BoundaryNorm(np.arange(len(methods) + 2) - 0.5, len(methods) + 1)
    fig = _figure(width, height, top=0.895, bottom=0.095)
    # The legend gets a column of its own: the layout then keeps it inside the figure.
    ax, legend_ax = fig.subplots(1, 2, width_ratios=[5.0, 1.15])
    legend_ax.set_axis_off()
    mesh = ax.pcolormesh(n, p, winner, cmap=cmap, norm=norm, shading="nearest")
    mesh.set_rasterized(True)
    mesh.set_gid("best-method")
    _rules_legend_above(ax, draw_rules(ax, n, p, p_scale))
    _axes_setup(ax, n, p, p_scale)
    present = [m for i, m in enumerate(methods) if (winner == i).any()]
    handles = [mpl.patches.Patch(facecolor=colours[m], edgecolor="black", linewidth=0.5,
                                 label=m) for m in present]  # fmt: skip
    if tie.any():
        handles.append(
            mpl.patches.Patch(
                facecolor=TIE_COLOUR,
                edgecolor="black",
                linewidth=0.5,
                label=f"tie (< {RESOLUTION:g})",
            )
        )
    box = legend_ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, 1.0),
                           fontsize=9.5, frameon=False, title="smallest error", title_fontsize=10,
                           alignment="left", borderaxespad=0.0)  # fmt: skip
    box.set_gid("methods-legend")
    _titles(fig, f"The method with the smallest worst-case error of {METRIC_LABELS[metric]}",
            f"Metric {metric}: {METRIC_FORMULAS[metric]}, X ~ Bin(n, p)\nCandidates: "
            f"{', '.join(methods)}")  # fmt: skip
    figures.footer(
        fig,
        ds,
        "Dashed: rule-of-thumb boundaries. Each drawn column goes to the method "
        "whose largest error over the grid n it stands for (bins of 1/"
        f"{N_PER_DECADE} decade) is smallest; grey: two or more methods below "
        f"{RESOLUTION:g}, the accuracy of the exact side, which cannot be ranked.",
    )
    return fig


def chart(atlas, *, kind="map", method="normal_cc", method2=None, metric="interval",
          p_scale="logit"):  # fmt: skip
    """Draw one chart by kind: ``"map"``, ``"compare"``, ``"gain"`` or ``"best"``.

    ``method2`` is the second method of ``compare`` and the reference of ``gain`` (default
    ``"normal_cc"``, or ``"edgeworth_cc"`` when ``method`` is ``"normal_cc"``); it is refused for
    ``map`` and ``best``.
    """
    figures.check_choice(kind, "kind", KINDS)
    if kind in ("map", "best") and method2 is not None:
        raise ValueError(f"`method2` is for the kinds 'compare' and 'gain'; got kind {kind!r}.")
    if method2 is None:
        method2 = "edgeworth_cc" if method == "normal_cc" else "normal_cc"
    if kind == "map":
        return error_map(atlas, method=method, metric=metric, p_scale=p_scale)
    if kind == "compare":
        return compare_map(atlas, method=method, method2=method2, metric=metric,
                           p_scale=p_scale)  # fmt: skip
    if kind == "gain":
        return gain_map(atlas, method=method, method2=method2, metric=metric, p_scale=p_scale)
    return best_method_map(atlas, metric=metric, p_scale=p_scale)


__all__ = [
    "KINDS",
    "LEVELS",
    "OKABE_ITO",
    "P_SCALES",
    "best_method_map",
    "chart",
    "compare_map",
    "error_map",
    "gain_map",
    "method_colours",
    "pool_n",
]
