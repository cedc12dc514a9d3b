"""Maps of the coverage of confidence intervals for p, drawn from a coverage cube.

n runs along the x axis (log scale) and p along the y axis (logit scale), as in the error maps.
The colour scale diverges at the nominal level: blue where the interval covers more than it
promises, red where it covers less, white at the level itself, with the level drawn as a black
contour. matplotlib is imported inside the functions (:func:`atlas.figures.mpl`).
"""

import textwrap

import numpy as np

from atlas import figures
from atlas.confidence import check_interval, check_level
from atlas.cube import CAUTION

VARIABLES = ("min_coverage", "coverage")
_TITLES = {
    "min_coverage": "Minimum coverage over each p-cell",
    "coverage": "Coverage at the grid points",
}
_SUBTITLES = {
    "min_coverage": "inf of C(n, p') = Σ b(x; n, p') [lo(x) ≤ p' ≤ hi(x)] over the p-cell of "
    "each grid p (exact); black line: the nominal level",
    "coverage": "C(n, p) = Σ b(x; n, p) [lo(x) ≤ p ≤ hi(x)] at each grid point",
}
#: How far below the level the colour scale reaches; lower values share the end colour.
SPAN = 0.25


def _cube_provenance(ds):
    n, p = ds["n"].values, ds["p"].values
    history = str(ds.attrs.get("history", ""))[:10] or "unknown date"
    return (
        f"Coverage cube: {ds.attrs.get('source', 'approx-atlas')}, built {history}; grid "
        f"n = {n[0]:,} to {n[-1]:,} ({n.size} values), p = {p[0]:g} to {p[-1]:g} "
        f"({p.size} values), "
        f"logit-spaced p-cells; exact values (atlas.confidence), no p sampled."
    )


def coverage_map(
    cube, *, interval="wald", level=0.95, variable="min_coverage", width=10.0, height=7.4
):
    """A map of the coverage (or minimum coverage) of one interval at one level.

    Parameters
    ----------
    cube : xarray.Dataset
        A coverage cube (:func:`atlas.coverage_cube.build_coverage_cube`).
    interval : str
        An interval the cube holds.
    level : float
        A level the cube holds.
    variable : {"min_coverage", "coverage"}
        The exact minimum over each p-cell (default), or the coverage at the grid points.
    width, height : float
        Figure size in inches.

    Returns
    -------
    matplotlib.figure.Figure
        With the colour field (gid ``"coverage-field"``), for ``min_coverage`` the contour of the
        nominal level (gid ``"level-contour"``), a colour bar (the level marked), a title and a
        footer with provenance and caution.

    Raises
    ------
    ValueError
        For an interval, level or variable the cube does not hold.
    """
    mpl = figures.mpl()
    if variable not in VARIABLES:
        valid = ", ".join(repr(v) for v in VARIABLES)
        raise ValueError(f"`variable` must be one of {valid}; got {variable!r}.")
    check_interval(interval)
    level = check_level(level)
    names = [str(v) for v in cube["interval"].values]
    if interval not in names:
        raise ValueError(
            f"`interval` must be one the cube holds ({', '.join(names)}); got {interval!r}."
        )
    levels = cube["level"].values
    match = np.flatnonzero(np.isclose(levels, level, rtol=0, atol=1e-12))
    if match.size == 0:
        held = ", ".join(f"{v:g}" for v in levels)
        raise ValueError(f"`level` must be one the cube holds ({held}); got {level!r}.")
    values = cube[variable].isel(interval=names.index(interval), level=int(match[0])).values
    n, p = cube["n"].values, cube["p"].values
    fig = mpl.figure.Figure(figsize=(width, height), dpi=100, layout="constrained")
    fig.get_layout_engine().set(rect=(0.0, 0.1, 1.0, 0.77))
    ax = fig.add_subplot()
    low = level - SPAN
    norm = mpl.colors.TwoSlopeNorm(vmin=low, vcenter=level, vmax=1.0)
    field = ax.pcolormesh(
        n,
        p,
        np.clip(values.T, low, 1.0),
        cmap="RdBu",
        norm=norm,
        shading="nearest",
        rasterized=True,
    )
    field.set_gid("coverage-field")
    if variable == "min_coverage":  # the coverage itself oscillates too finely for a contour
        contour = ax.contour(n, p, values.T, levels=[level], colors="black", linewidths=1.4)
        contour.set_gid("level-contour")
    ax.set_xscale("log")
    ax.set_yscale("logit")
    ax.set_xlim(float(n[0]), float(n[-1]))
    ax.set_ylim(float(p[0]), float(p[-1]))
    ticks = [t for t in (1e-3, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999) if p[0] <= t <= p[-1]]
    ax.yaxis.set_major_locator(mpl.ticker.FixedLocator(ticks))
    ax.yaxis.set_minor_locator(mpl.ticker.NullLocator())
    ax.yaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
    ax.xaxis.set_major_formatter(mpl.ticker.FuncFormatter(lambda v, _: f"{v:,.0f}"))
    ax.set_xlabel("n (number of trials, log scale)")
    ax.set_ylabel("p (true success probability, logit scale)")
    bar = fig.colorbar(field, ax=ax, extend="min", shrink=0.9)
    bar.set_label(f"coverage (white = the nominal {level:g}; red = below it)")
    bar.ax.axhline(level, color="black", linewidth=1.4)
    fig.text(
        0.012,
        0.985,
        f"{_TITLES[variable]}: {interval} interval, nominal {level:g}",
        ha="left",
        va="top",
        fontsize=15,
        weight="bold",
        gid="title",
    )
    fig.text(
        0.012,
        0.94,
        "\n".join(
            textwrap.wrap(
                _SUBTITLES[variable] + f"; values below {low:g} share the darkest red",
                int(width * 13),
            )
        ),
        ha="left",
        va="top",
        fontsize=9.5,
        gid="subtitle",
    )
    note = _cube_provenance(cube) + " Caution: " + CAUTION
    fig.text(
        0.012,
        0.012,
        "\n".join(textwrap.wrap(note, int(width * 17))),
        ha="left",
        va="bottom",
        gid="footer",
        **figures.FOOTER_STYLE,
    )
    return fig
