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
- Colour: log10 of the worst-case error in half-decade bands on one fixed scale,
  ``FILL_RANGE`` = 10⁻⁹ to 10⁰, for every map (two printed maps compare by colour), in the
  perceptually uniform ``viridis`` colour map, which stays readable with the common
  colour-vision deficiencies and in grey print.
- Solid lines: the tolerance contours, labelled along the line with their tolerance in the
  notation of the colour bar (10⁻², 5×10⁻³). Specks of line work smaller than
  ``contours.MIN_CELLS`` grid cells are left out (:func:`atlas.contours.simplify_level`):
  small safe holes in an unsafe region read as unsafe, and small unsafe islands are marked with
  a dot instead of a tiny closed line.
- Broken lines: the boundaries of the rules of thumb np = 5, nq = 5 (dashed), np = 10,
  nq = 10 (dash-dot) and npq = 9 (dotted), each labelled on the curve.
- Where the atlas's n axis is denser than a map can show (every integer up to 2000 in the
  default atlas), the n axis is pooled into bins of 1/``N_PER_DECADE`` decade and each bin is
  drawn with the *largest* error of the grid n it holds, at its smallest n: a map never shows a
  cell safer than the grid says.
"""

import math

import numpy as np

from atlas import cube, figures
from atlas.engine import RESOLUTION_FACTOR, check_metric
from atlas.figures import METHOD_LABELS, METRIC_FORMULAS, METRIC_LABELS

LEVELS = (1e-2, 5e-3, 1e-3, 1e-4)
P_SCALES = ("logit", "linear")
KINDS = ("map", "compare", "gain", "best")
N_PER_DECADE = 120  # pooled n columns per decade of n
ERROR_CMAP = "viridis"  # perceptually uniform, readable with colour-vision deficiency, in grey
GAIN_CMAP = "PuOr"  # diverging, colour-blind safe (ColorBrewer)
RESOLUTION = 1e-12  # the least resolution of the exact side: smaller errors are not told apart
#: log10 of the errors the colour scale spans, the same on every map: 10^-9 to 10^0. Smaller
#: errors take the colour of the scale's pointed lower end.
FILL_RANGE = (-9.0, 0.0)
#: log10 of the largest ratio the gain map's colour scale spans, each way: 10^6.
GAIN_REACH = 6.0
TIE_COLOUR = "#BBBBBB"  # neutral grey: several methods below RESOLUTION
# Okabe & Ito (2008), "Color Universal Design": eight colours told apart under the common
# colour-vision deficiencies; black is kept for the overlays.
OKABE_ITO = ("#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
             "#000000")  # fmt: skip
# The rule-of-thumb boundaries: (label, kind, constant, dashes); kind "np": n p = c, "nq": n q = c,
# "npq": n p q = c. The three line styles (dashed, dash-dot, dotted) tell the constants apart in
# black-and-white print; each curve is also labelled where it is drawn.
RULE_CURVES = (
    ("np = 5", "np", 5.0, (0, (6, 3))),
    ("nq = 5", "nq", 5.0, (0, (6, 3))),
    ("np = 10", "np", 10.0, (0, (9, 2.5, 1.5, 2.5))),
    ("nq = 10", "nq", 10.0, (0, (9, 2.5, 1.5, 2.5))),
    ("npq = 9", "npq", 9.0, (0, (1.2, 1.8))),
)
# The preferred height of each rule's label on its curve, as a p, per p scale.
_RULE_ANCHORS = {
    "logit": {"np = 5": 0.002, "nq = 5": 0.998, "np = 10": 0.03, "nq = 10": 0.97,
              "npq = 9": 0.75},
    "linear": {"np = 5": 0.06, "nq = 5": 0.94, "np = 10": 0.2, "nq = 10": 0.8, "npq = 9": 0.6},
}  # fmt: skip
LABEL_SIZE = 9  # points: the labels of the tolerance and ratio lines
RULE_LABEL_SIZE = 8.5  # points: the labels of the rule curves


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


def _pooled_floor(ds, method, metric):
    """The resolution of the exact side at each drawn cell: ``RESOLUTION_FACTOR`` times the
    largest accuracy of the bin's values (the cube's interval_accuracy / cdf_accuracy), at least
    ``RESOLUTION``. An error at or below it is not a precise number (:func:`atlas.is_resolved`)."""
    name = f"{metric}_accuracy"
    if name not in ds:
        return RESOLUTION
    index = [str(m) for m in ds["approximation"].values].index(method)
    accuracy = np.asarray(ds[name].isel(approximation=index).values, dtype=np.float64)
    _, pooled = pool_n(ds["n"].values, accuracy)
    return np.maximum(RESOLUTION, RESOLUTION_FACTOR * pooled)


def _titles(fig, title, subtitle):
    """The title 0.11 in and the subtitle 0.4 in below the figure's top edge."""
    height = fig.get_figheight()
    fig.text(0.012, 1 - 0.11 / height, title, ha="left", va="top", fontsize=15, weight="bold",
             gid="title")  # fmt: skip
    fig.text(0.012, 1 - 0.4 / height, subtitle, ha="left", va="top", fontsize=9.5,
             color="#222222", linespacing=1.4, gid="subtitle")  # fmt: skip


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
        ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:.10f}".rstrip("0")))
    else:
        ax.yaxis.set_major_locator(mpl.ticker.MultipleLocator(0.1))
        ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:.1f}"))
    ax.set_ylim(float(p[0]), float(p[-1]))
    ax.set_xlabel("n (number of trials, log scale)", fontsize=10)
    ax.set_ylabel(f"p (success probability, {p_scale} scale)", fontsize=10)
    ax.tick_params(labelsize=9)


def _n_tick(value, _pos):
    """Every n tick as a power of ten, 10⁰ to 10⁸: one notation on the axis."""
    if value <= 0:
        return ""
    exponent = round(math.log10(value))
    if abs(value - 10.0**exponent) > 1e-9 * value:
        return ""
    return figures.power_of_ten(exponent)


def _rule_points(kind, constant, p):
    """The curve n p = c, n q = c or n p q = c as (n, p) points over the p range drawn."""
    grid = 1.0 / (1.0 + np.exp(-np.linspace(_logit(p[0]), _logit(p[-1]), 1200)))
    q = 1.0 - grid
    n = constant / {"np": grid, "nq": q, "npq": grid * q}[kind]
    return n, grid


def _logit(x):
    return math.log(x / (1.0 - x))


def draw_rules(ax, n, p, p_scale):
    """Draw the rule-of-thumb boundaries on ``ax`` (their labels come with :func:`_finish`).

    Returns
    -------
    handles : list of matplotlib.lines.Line2D
        Legend handles, one per line style (``"np = 5, nq = 5"``, ...).
    curves : list of (str, numpy.ndarray, float)
        Each drawn rule's label, its (n, p) points and the p its label prefers.
    """
    mpl = figures.mpl()
    styles = {}
    curves = []
    for label, kind, constant, dashes in RULE_CURVES:
        xs, ys = _rule_points(kind, constant, p)
        keep = (xs >= n[0]) & (xs <= n[-1])
        if keep.sum() < 2:
            continue
        width = 1.5 if kind == "npq" else 1.2
        ax.plot(xs[keep], ys[keep], color="black", linewidth=width, linestyle=dashes,
                path_effects=_halo(width + 1.6), label=label, gid=f"rule:{label}",
                zorder=4)  # fmt: skip
        styles.setdefault((dashes, width), []).append(label)
        curves.append((label, np.column_stack([xs[keep], ys[keep]]),
                       _RULE_ANCHORS[p_scale][label]))  # fmt: skip
    handles = [
        mpl.lines.Line2D(
            [], [], color="black", linewidth=width, linestyle=dashes, label=", ".join(labels)
        )  # fmt: skip
        for (dashes, width), labels in styles.items()
    ]
    return handles, curves


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


def fill_levels():
    """The colour bands of every error map: half decades over ``FILL_RANGE`` (log10)."""
    lo, hi = FILL_RANGE
    return np.arange(lo, hi + 0.25, 0.5)


def _line_set(ax, n, p, z, log_levels, *, gid, mark_islands, **style):
    """Contour lines of ``z`` (shape (len(n), len(p))) at ``log_levels``, each level drawn from
    its own simplified field (:func:`atlas.contours.simplify_level`).

    Returns the ContourSet and, per level, the (n, p) points of the islands left out of the
    line work (marked with dots when ``mark_islands``).
    """
    import contourpy
    from matplotlib.contour import ContourSet

    from atlas import contours

    segments, spots = [], []
    x = np.asarray(n, dtype=np.float64)
    for level in log_levels:
        field, islands = contours.simplify_level(z, level)
        gen = contourpy.contour_generator(x, p, np.ma.masked_invalid(field.T),
                                          line_type="Separate")  # fmt: skip
        segments.append([np.asarray(s) for s in gen.lines(level)])
        at = []
        for cells in islands:
            i, j = cells[np.argmax(z[cells[:, 0], cells[:, 1]])]  # the island's worst cell
            at.append((x[i], p[j]))
        spots.append(at)
    lines = ContourSet(ax, list(log_levels), segments, zorder=5, **style)
    lines.set_gid(gid)
    lines.set(path_effects=_halo(3.5))
    dots = [xy for at in spots for xy in at]
    if mark_islands and dots:
        xs, ys = zip(*dots, strict=True)
        ax.plot(xs, ys, linestyle="none", marker="o", markersize=4.5, markerfacecolor="black",
                markeredgecolor="white", markeredgewidth=1.0, zorder=6,
                gid="tolerance-islands")  # fmt: skip
    return lines, segments, spots


def _draw_error_panel(ax, n, p, values, *, levels, p_scale, cmap=ERROR_CMAP, floor=None):
    """Filled log10 bands on the fixed scale, the tolerance contours and the rules; the labels
    are placed by :func:`_finish` once the figure's layout is known. Cells at or below
    ``floor`` (the resolution of the exact side) are hatched (gid ``"below-resolution"``)."""
    z = _log_error(values)  # (len(n), len(p))
    shown = np.minimum(z, FILL_RANGE[1])  # errors above 1 (none in practice) take the top band
    filled = ax.contourf(n, p, shown.T, levels=fill_levels(), cmap=cmap, extend="min")
    filled.set_rasterized(True)  # a vector file keeps its text and lines, the fill as an image
    filled.set_gid("error-fill")
    if floor is not None:
        below = np.asarray(values <= floor, dtype=np.float64)
        if below.any():
            hatch = ax.contourf(n, p, below.T, levels=[0.5, 1.5], colors="none",
                                hatches=["////"])  # fmt: skip
            hatch.set_gid("below-resolution")
    log_levels = np.log10(np.asarray(levels))
    lines, segments, spots = _line_set(ax, n, p, z, log_levels, gid="tolerance-contours",
                                   mark_islands=True, colors="black", linewidths=1.6,
                                   linestyles="solid")  # fmt: skip
    handles, curves = draw_rules(ax, n, p, p_scale)
    _axes_setup(ax, n, p, p_scale)
    texts = [figures.format_power(v) for v in levels]
    panel = {"ax": ax, "p": p, "lines": list(zip(log_levels, segments, texts, strict=True)),
             "rules": curves, "dots": [xy for at in spots for xy in at]}  # fmt: skip
    return filled, lines, handles, panel


def _halves(curve, p_mid=0.5):
    """The parts of a curve below and above p = 1/2."""
    from atlas.contours import runs

    return runs(curve, curve[:, 1] < p_mid), runs(curve, curve[:, 1] > p_mid)


def _finish(fig, panels):
    """Place the labels of the rule curves and of the contour lines of each panel.

    Called once the figure is complete: the layout is computed first, so that the labels'
    room on the page is known. Rule labels go first, near their preferred p; then each
    contour level gets a label in each half of the p axis (below and above 1/2), on its
    longest stretch there that is straight enough, nearest to the heights 1/4 and 3/4 of the
    axes, never on another label, another line, the edges or the p = 1/2 line.
    """
    from atlas import contours

    fig.draw_without_rendering()
    for panel in panels:
        ax, p = panel["ax"], panel["p"]
        spike = 0.5 if p[0] < 0.5 < p[-1] else None
        placer = contours.LabelPlacer(ax, spike=spike)
        for level, segments, _text in panel.get("lines", ()):
            for seg in segments:
                placer.add_obstacle(seg, ("line", float(level)))
        for label, curve, _ in panel.get("rules", ()):
            placer.add_obstacle(curve, ("rule", label))
        for x, y in panel.get("dots", ()):  # the island dots, 4.5 points across
            placer.add_box(x, y, 0.09, 0.09)
        ymin, ymax = ax.get_ylim()
        for label, curve, p_anchor in panel.get("rules", ()):
            width, height = contours.text_size(label, RULE_LABEL_SIZE)
            spot = placer.place([curve], width, height, target_y=_fraction_y(ax, p_anchor),
                                owner=("rule", label))  # fmt: skip
            if spot:
                contours.add_label(ax, label, *spot, fontsize=RULE_LABEL_SIZE, style="italic",
                                   zorder=7, gid=f"rule-label:{label}",
                                   bbox=_LABEL_BOX)  # fmt: skip
        for level, segments, text in panel.get("lines", ()):
            width, height = contours.text_size(text, LABEL_SIZE)
            halves = [[], []]
            for seg in segments:
                below, above = _halves(seg)
                halves[0] += below
                halves[1] += above
            for target, curves in ((0.25, halves[0]), (0.75, halves[1])):
                if not curves:
                    continue
                spot = placer.place(curves, width, height, target_y=target,
                                    owner=("line", float(level)))  # fmt: skip
                if spot:
                    contours.add_label(ax, text, *spot, fontsize=LABEL_SIZE, weight="bold",
                                       zorder=7, gid="contour-label", bbox=_LABEL_BOX)  # fmt: skip


_LABEL_BOX = {"boxstyle": "round,pad=0.12", "fc": "white", "ec": "none", "alpha": 0.9}


def _fraction_y(ax, p_value):
    """The height of p on the axes, as a fraction of the axes."""
    y = ax.transAxes.inverted().transform(ax.transData.transform((ax.get_xlim()[0], p_value)))
    return float(y[1])


def _error_colorbar(fig, filled, lines, ax, metric):
    mpl = figures.mpl()
    cbar = fig.colorbar(filled, ax=ax, pad=0.015, fraction=0.05, aspect=30)
    lo, hi = FILL_RANGE
    cbar.set_label(f"worst-case {metric} error (fixed scale {figures.power_of_ten(lo)} to "
                   f"{figures.power_of_ten(hi)})", fontsize=10)  # fmt: skip
    cbar.set_ticks(np.arange(math.ceil(lo), math.floor(hi) + 1))
    cbar.ax.yaxis.set_major_formatter(
        mpl.ticker.FuncFormatter(lambda v, _: figures.power_of_ten(round(v)))
    )
    cbar.ax.tick_params(labelsize=9)
    if lines is not None and len(lines.levels):
        cbar.add_lines(lines)
    return cbar


_MAP_NOTE = (
    "Solid lines: tolerance contours; dots: spots of fewer than {cells} grid cells above a "
    "tolerance, too small for a line. Broken lines: rules of thumb (np, nq = 5 dashed; np, "
    "nq = 10 dash-dot; npq = 9 dotted). Each drawn column holds the largest error of the grid n "
    "it stands for (bins of 1/{per} decade), so a cell never looks safer than the grid says."
)


def _map_note():
    from atlas.contours import MIN_CELLS

    return _MAP_NOTE.format(cells=MIN_CELLS, per=N_PER_DECADE)


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
        With a title and subtitle naming the method and metric, a colour bar on the fixed scale
        ``FILL_RANGE`` (10⁻⁹ to 10⁰, the same for every map), the tolerance contours (gid
        ``"tolerance-contours"``) labelled along the lines (gid ``"contour-label"``), dots for
        unsafe spots too small for a line (gid ``"tolerance-islands"``), the rule-of-thumb
        curves (lines labelled ``"np = 5"`` etc., with labels on the curves) and a footer with
        the provenance and the caution.

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
    floor = _pooled_floor(ds, method, metric)
    fig = _figure(width, height, top=0.895, bottom=0.095)
    ax = fig.add_subplot()
    filled, lines, handles, panel = _draw_error_panel(ax, n, p, values, levels=levels,
                                                      p_scale=p_scale, floor=floor)  # fmt: skip
    _rules_legend_above(ax, handles)
    _error_colorbar(fig, filled, lines, ax, metric)
    _titles(fig, f"Worst-case error of {METRIC_LABELS[metric]}: {method}",
            _subtitle(method, metric))  # fmt: skip
    note = _map_note()
    if bool(np.any(values <= floor)):
        note += (" Hatched: below the resolution of the exact side (the error is at most "
                 f"{RESOLUTION_FACTOR:g} times its accuracy): its colour is a bound, not a "
                 "value.")  # fmt: skip
    figures.footer(fig, ds, note)
    _finish(fig, [panel])
    return fig


def compare_map(atlas, *, method, method2, metric="interval", levels=LEVELS, p_scale="logit",
                stacked=False, width=None, height=None):  # fmt: skip
    """Two methods' error maps on one colour scale, side by side or one above the other.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    method, method2 : str
        Two different methods the atlas holds: left and right (or upper and lower) panel.
    metric, levels, p_scale
        As for :func:`error_map`.
    stacked : bool, optional
        One panel above the other (for a narrow page such as a web page) instead of side by
        side; default False.
    width, height : float, optional
        Figure size in inches; default 15 x 7.4 side by side, 10 x 12.5 stacked.

    Returns
    -------
    matplotlib.figure.Figure
        Two axes sharing one colour bar on the fixed scale of :func:`error_map`.

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
    if width is None:
        width = 10.0 if stacked else 15.0
    if height is None:
        height = 12.5 if stacked else 7.4
    n, p, first = _pooled(ds, method, metric)
    _, _, second = _pooled(ds, method2, metric)
    fig = _figure(width, height, top=1.0 - 0.98 / height, bottom=0.7 / height)
    axes = fig.subplots(2, 1, sharex=True) if stacked else fig.subplots(1, 2, sharey=True)
    drawn, panels = [], []
    for ax, name, values in ((axes[0], method, first), (axes[1], method2, second)):
        filled, lines, handles, panel = _draw_error_panel(ax, n, p, values, levels=levels,
                                                          p_scale=p_scale)  # fmt: skip
        drawn.append((filled, lines, handles))
        panels.append(panel)
        ax.set_title(_method_text(name), fontsize=11, loc="left")
    if stacked:
        axes[0].set_xlabel("")
    else:
        axes[1].set_ylabel("")
    _error_colorbar(fig, drawn[0][0], drawn[0][1], list(axes), metric)
    _rules_legend_above(axes[0] if stacked else axes[1], drawn[0][2])
    where = ("Upper", "lower") if stacked else ("Left", "right")
    _titles(fig, f"Worst-case error of {METRIC_LABELS[metric]}: {method} and {method2}",
            f"{where[0]} G(k) = {cube.METHOD_DESCRIPTIONS.get(method, method)}\n{where[1]} "
            f"G(k) = {cube.METHOD_DESCRIPTIONS.get(method2, method2)}\n"
            f"Metric {metric}: {METRIC_FORMULAS[metric]}, X ~ Bin(n, p); one colour scale for "
            "both panels")  # fmt: skip
    figures.footer(fig, ds, _map_note())
    _finish(fig, panels)
    return fig


def _check_distinct(method, method2):
    if method == method2:
        raise ValueError(f"`method2` must differ from `method`; got {method2!r} for both.")


def gain_order(method, method2):
    """The two methods of a gain map in a fixed order, whichever way they are given.

    The method listed first in :data:`atlas.METHODS` (then alphabetically, for methods it does
    not list) comes first; the gain map colours the cells where the first one errs less
    orange and those where the second errs less purple.

    Examples
    --------
    >>> gain_order("edgeworth_cc", "normal_cc")
    ('normal_cc', 'edgeworth_cc')
    """
    from atlas.approximations import METHODS

    def rank(m):
        return (list(METHODS).index(m), m) if m in METHODS else (len(METHODS), m)

    first, second = sorted((method, method2), key=rank)
    return first, second


def gain_map(atlas, *, method, method2="normal_cc", metric="interval", p_scale="logit",
             width=10.0, height=7.4):  # fmt: skip
    """Which of two methods errs less at each cell, and by how many times.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    method, method2 : str
        Two different methods the atlas holds (default ``method2``: ``"normal_cc"``). The
        chart is the same whichever is given first, apart from the order of the names in the
        title: each method keeps its colour (see :func:`gain_order`).
    metric, p_scale, width, height
        As for :func:`error_map`.

    Returns
    -------
    matplotlib.figure.Figure
        Colour: log10 of the ratio of the two errors on a fixed diverging colour-blind-safe
        scale (``GAIN_REACH``: up to 1,000,000 times each way), orange where the first method
        of :func:`gain_order` errs less and purple where the second does; contour lines at the
        ratios 1, 10 and 100 each way, labelled positively (``"edgeworth_cc better by 10×"``,
        ``"equal"``).

    Raises
    ------
    ValueError
        As for :func:`compare_map`.

    Notes
    -----
    With (A, B) = ``gain_order(method, method2)`` and E the worst-case error of a method over a
    pooled n bin, the colour is log10(E_A / E_B): B is better by E_A / E_B times where it is
    positive, A by E_B / E_A where it is negative. An error below the resolution of the exact
    side (``RESOLUTION_FACTOR`` = 3 times its accuracy, at least ``RESOLUTION`` = 1e-12)
    counts as that resolution.
    """
    mpl = figures.mpl()
    ds = figures.as_dataset(atlas)
    figures.check_atlas_method(ds, method)
    figures.check_atlas_method(ds, method2, "method2")
    _check_distinct(method, method2)
    check_metric(metric)
    figures.check_choice(p_scale, "p_scale", P_SCALES)
    first, second = gain_order(method, method2)
    n, p, e_first = _pooled(ds, first, metric)
    _, _, e_second = _pooled(ds, second, metric)
    f_first, f_second = _pooled_floor(ds, first, metric), _pooled_floor(ds, second, metric)
    with np.errstate(invalid="ignore"):
        ratio = np.log10(np.maximum(e_first, f_first) / np.maximum(e_second, f_second))
    fill = gain_levels()
    fig = _figure(width, height, top=0.895, bottom=0.095)
    ax = fig.add_subplot()
    shown = np.clip(ratio, -GAIN_REACH - 0.25, GAIN_REACH + 0.25)
    filled = ax.contourf(n, p, shown.T, levels=fill, cmap=GAIN_CMAP, extend="both")
    filled.set_rasterized(True)
    filled.set_gid("gain-fill")
    marks = np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    lines, segments, _ = _line_set(ax, n, p, ratio, marks, gid="gain-contours",
                                   mark_islands=False, colors="black", linewidths=1.4,
                                   linestyles="solid")  # fmt: skip
    handles, curves = draw_rules(ax, n, p, p_scale)
    _rules_legend_above(ax, handles)
    _axes_setup(ax, n, p, p_scale)
    cbar = fig.colorbar(filled, ax=ax, pad=0.015, fraction=0.05, aspect=30)
    cbar.set_label(f"how many times smaller the better method's {metric} error is",
                   fontsize=10)  # fmt: skip
    cbar.set_ticks(np.arange(-GAIN_REACH, GAIN_REACH + 1))
    cbar.ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: _factor(v)))
    cbar.ax.tick_params(labelsize=9)
    for y, name, va in ((1.0, second, "bottom"), (0.0, first, "top")):
        cbar.ax.text(0.5, y + (0.045 if y else -0.045), f"{name}\nbetter", ha="center", va=va,
                     fontsize=8.5, weight="bold", transform=cbar.ax.transAxes,
                     gid=f"gain-end:{name}")  # fmt: skip
    cbar.add_lines(lines)
    _titles(fig, f"{method} or {method2}: which is better, and by how many times",
            f"Worst-case error of {METRIC_LABELS[metric]} ({metric} metric: "
            f"{METRIC_FORMULAS[metric]})\nPurple: {second} better; orange: {first} better; "
            "the number: how many times smaller the better method's error is")  # fmt: skip
    figures.footer(fig, ds, "Broken lines: rules of thumb (np, nq = 5 dashed; np, nq = 10 "
                   "dash-dot; npq = 9 dotted). Each drawn column compares the largest errors of "
                   f"the grid n it stands for (bins of 1/{N_PER_DECADE} decade); an error below "
                   f"the resolution of the exact side ({RESOLUTION_FACTOR:g} times its "
                   f"accuracy, at least {RESOLUTION:g}) counts as that. Specks of line work "
                   "under a few grid cells are left to the colour.")  # fmt: skip
    texts = [gain_text(v, first, second) for v in marks]
    _finish(fig, [{"ax": ax, "p": p, "rules": curves,
                   "lines": list(zip(marks, segments, texts, strict=True))}])  # fmt: skip
    return fig


def gain_levels():
    """The colour bands of every gain map: quarter decades over +-``GAIN_REACH`` (log10)."""
    return np.arange(-GAIN_REACH, GAIN_REACH + 0.125, 0.25)


def gain_text(log_ratio, first, second):
    """The label of a ratio line: ``"equal"`` or which method is better and by how much.

    Examples
    --------
    >>> gain_text(1.0, "normal_cc", "edgeworth_cc"), gain_text(-2.0, "normal_cc", "edgeworth_cc")
    ('edgeworth_cc better by 10×', 'normal_cc better by 100×')
    """
    if abs(log_ratio) < 1e-9:
        return "equal"
    return f"{second if log_ratio > 0 else first} better by {_factor(log_ratio)}"


def _factor(log_ratio):
    """A ratio for people, always more than 1: 10×, 1,000×, 1,000,000× (the better method's
    error is that many times smaller), or "equal"."""
    if abs(log_ratio) < 1e-9:
        return "equal"
    return f"{10.0 ** abs(log_ratio):,.0f}×"


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
    an exact tie goes to the method listed first. Where two or more methods' errors are below
    the resolution of the exact side (at most ``RESOLUTION_FACTOR`` = 3 times their accuracy,
    at least ``RESOLUTION`` = 1e-12), the cell is a tie (grey).
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
    stack, floors = [], []
    for m in methods:
        n, p, values = _pooled(ds, m, metric)
        stack.append(np.where(np.isfinite(values), values, np.inf))
        floors.append(np.broadcast_to(_pooled_floor(ds, m, metric), values.shape))
    stack = np.stack(stack)
    winner = np.argmin(stack, axis=0).T  # the first index wins an exact tie
    tie = ((stack <= np.stack(floors)).sum(axis=0) >= 2).T
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
    handles, curves = draw_rules(ax, n, p, p_scale)
    _rules_legend_above(ax, handles)
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
                label="tie (below resolution)",
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
        "Broken lines: rules of thumb (np, nq = 5 dashed; np, nq = 10 dash-dot; npq = 9 "
        "dotted). Each drawn column goes to the method "
        "whose largest error over the grid n it stands for (bins of 1/"
        f"{N_PER_DECADE} decade) is smallest; grey: two or more methods below the resolution "
        f"of the exact side ({RESOLUTION_FACTOR:g} times their accuracy, at least "
        f"{RESOLUTION:g}), which cannot be ranked.",
    )
    _finish(fig, [{"ax": ax, "p": p, "rules": curves}])
    return fig


def chart(atlas, *, kind="map", method="normal_cc", method2=None, metric="interval",
          p_scale="logit"):  # fmt: skip
    """Draw one chart by kind: ``"map"``, ``"compare"``, ``"gain"`` or ``"best"``.

    ``method2`` is the second method of ``compare`` and of ``gain`` (default
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
