"""The coverage page of the wiki and the coverage sheet: maps, minimum-n tables, definitions.

- :func:`write_coverage_page`: ``coverage.html`` and ``coverage.md`` with an SVG map per interval
  and the minimum-n tables beside them, written into an existing directory (the wiki page's, so
  that ``index.html`` can link ``coverage.html``); no script, no external address.
- :func:`write_coverage_sheet`: a multi-page PDF of the same.

Every file is written under a temporary name and renamed when complete. The maps come from the
coverage variables of the atlas (:func:`atlas.coverage_cube.open_coverage_cube`), the tables
from :func:`atlas.coverage_table`.
"""

import html
import textwrap
from pathlib import Path

from atlas import figures
from atlas.confidence import check_level
from atlas.coverage_questions import coverage_table
from atlas.cube import CAUTION
from atlas.files import replacing, save_text

BANDS = ((0.05, 0.5), (0.01, 0.99))
FLOORS = (0.93, 0.94, 0.95)
TITLE = "Confidence intervals for p: where they keep their promise"
#: The definitions of the intervals (the contract of atlas.confidence), for people.
INTERVAL_DEFINITIONS = (
    ("wald", "p̂ ∓ z √(p̂ q̂ / n)"),
    ("wald_cc", "the Wald interval widened by 1/(2n) on each side"),
    ("wilson", "(p̂ + z²/(2n) ∓ z √(p̂ q̂ / n + z²/(4n²))) / (1 + z²/n)"),
    ("wilson_cc", "Newcombe (1998), method 4: the score interval with continuity correction"),
    ("agresti_coull", "ñ = n + z², p̃ = (x + z²/2)/ñ, p̃ ∓ z √(p̃ (1 − p̃)/ñ)"),
    (
        "jeffreys",
        "the (1 − level)/2 and (1 + level)/2 quantiles of Beta(x + ½, n − x + ½); "
        "lo = 0 at x = 0, hi = 1 at x = n",
    ),
    (
        "clopper_pearson",
        "the exact interval: quantiles of Beta(x, n − x + 1) and "
        "Beta(x + 1, n − x); never below its level",
    ),
)
NOTES = (
    "x successes in n trials, p̂ = x/n, q̂ = 1 − p̂, z = the (1 + level)/2 normal quantile.",
    "Coverage C(n, p) = Σ over x of b(x; n, p) [lo(x) ≤ p ≤ hi(x)], closed intervals.",
    "Minimum coverage over a band: the exact infimum over every p in it. C jumps only where p "
    "crosses an endpoint; between two consecutive endpoints the covering x form one run a..b and "
    "C = F(b) − F(a − 1), which rises then falls, so its infimum is a one-sided limit at the end "
    "of a piece: no p is sampled.",
    "Coverage is not monotone in n: the tables check every integer n up to their limit.",
)


def _tables(level, bands, floors, n_max):
    return [coverage_table(lo, hi, floors, level=level, n_max=n_max) for lo, hi in bands]


def _maps(cube, level):
    from atlas.coverage_charts import coverage_map

    names = [str(v) for v in cube["interval"].values]
    return [(name, coverage_map(cube, interval=name, level=level)) for name in names]


def _cube(cube):
    if cube is not None:
        return cube
    from atlas.coverage_cube import open_coverage_cube

    return open_coverage_cube()


def write_coverage_page(
    directory, *, cube=None, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000
):
    """Write ``coverage.html``, ``coverage.md``, the SVG maps and the tables into ``directory``.

    Parameters
    ----------
    directory : str or os.PathLike
        An existing directory (the wiki page's); files of the same names are replaced.
    cube : xarray.Dataset, optional
        A coverage cube; default the coverage variables of the embedded atlas.
    level : float
        The nominal level of the maps and tables (one the cube holds).
    bands : sequence of (float, float)
        The p bands of the minimum-n tables.
    floors : sequence of float
        The coverage floors of the tables.
    n_max : int
        Every n from 1 to ``n_max`` is checked for the tables (a few seconds per interval at
        1000).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    level = check_level(level)
    directory = Path(directory)
    if not directory.is_dir():
        raise FileNotFoundError(f"`directory` is not a directory: {str(directory)!r}.")
    cube = _cube(cube)
    tables = _tables(level, bands, floors, n_max)
    written, images = [], []
    tag = f"{round(level * 100):d}"
    for name, fig in _maps(cube, level):
        file = f"coverage_{name}_{tag}.svg"
        written.append(figures.save_figure(fig, directory / file))
        images.append((name, file))
    for table in tables:
        stem = f"coverage_min_n_{table.p_lo:g}_{table.p_hi:g}"
        for fmt in ("md", "csv", "json"):
            written.append(save_text(directory / f"{stem}.{fmt}", table.render(fmt)))
    written.append(save_text(directory / "coverage.md", _markdown(level, images, tables)))
    written.append(save_text(directory / "coverage.html", _html(level, images, tables)))
    return written


def _markdown(level, images, tables):
    lines = [f"# {TITLE}", "", *[f"- {note}" for note in NOTES], "", "## The intervals", ""]
    lines += ["| interval | [lo(x), hi(x)] |", "|---|---|"]
    lines += [f"| `{name}` | {text} |" for name, text in INTERVAL_DEFINITIONS]
    lines += ["", "## Minimum n per interval and floor", ""]
    for table in tables:
        lines += [table.render("md"), ""]
    lines += [f"## Minimum coverage maps, nominal {level:g}", ""]
    lines += [f"![{name}]({file})" for name, file in images]
    lines += ["", f"**Caution.** {CAUTION}", ""]
    return "\n".join(lines)


def _html_table(table):
    head = "".join(
        f"<th>{html.escape(h)}</th>" for h in ["interval", *[f"floor {f:g}" for f in table.floors]]
    )
    rows = []
    for name in table.intervals:
        cells = "".join(
            f'<td class="num">{html.escape(table.cell(name, f))}</td>' for f in table.floors
        )
        rows.append(f"<tr><td><code>{name}</code></td>{cells}</tr>")
    caption = (
        f"Minimum n, level {table.level:g}, every p in [{table.p_lo:g}, {table.p_hi:g}], every n "
        f"checked up to {table.n_max} (*: the floor also held at a smaller n and failed again)"
    )
    return (
        f"<table><caption>{html.escape(caption)}</caption><tr>{head}</tr>"
        + "".join(rows)
        + "</table>"
    )


def _html(level, images, tables):
    notes = "".join(f"<li>{html.escape(note)}</li>" for note in NOTES)
    defs = "".join(
        f"<tr><td><code>{n}</code></td><td>{html.escape(t)}</td></tr>"
        for n, t in INTERVAL_DEFINITIONS
    )
    figs = "".join(
        f'<figure><img src="{file}" alt="minimum coverage map of the {name} interval">'
        f"<figcaption>{name}: minimum coverage over each p-cell at the nominal {level:g} "
        "(red below it, blue above)</figcaption></figure>"
        for name, file in images
    )
    style = (
        "body{font-family:'DejaVu Sans',Arial,sans-serif;margin:2em auto;max-width:70em;"
        "padding:0 1em;line-height:1.45}table{border-collapse:collapse;margin:.8em 0}"
        "th,td{border:1px solid #999;padding:.25em .6em}th{background:#e6e6e6}"
        "td.num{text-align:right}caption{text-align:left;font-weight:bold}"
        "figure img{width:100%;height:auto;border:1px solid #ccc}"
        ".caution{border:2px solid #8b0000;padding:.6em 1em;background:#fff4f4}"
    )
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        f"<title>{html.escape(TITLE)}</title><style>{style}</style></head><body>"
        f"<h1>{html.escape(TITLE)}</h1><ul>{notes}</ul>"
        f"<h2>The intervals</h2><table><tr><th>interval</th><th>[lo(x), hi(x)]</th></tr>"
        f"{defs}</table><h2>Minimum n per interval and floor</h2>"
        + "".join(_html_table(t) for t in tables)
        + f"<h2>Minimum coverage maps, nominal {level:g}</h2>{figs}"
        f'<p class="caution"><strong>Caution.</strong> {html.escape(CAUTION)}</p>'
        "</body></html>\n"
    )


def _text_figure(title, blocks):
    """A landscape page with a title and paragraphs of monospace or plain text."""
    mpl = figures.mpl()
    fig = mpl.figure.Figure(figsize=(10.0, 7.4), dpi=100)
    fig.text(0.04, 0.955, title, fontsize=15, weight="bold", va="top", gid="title")
    y = 0.89
    for text, mono in blocks:
        size = 8.0 if mono else 9.5
        body = text if mono else "\n".join(textwrap.wrap(text, 125))
        fig.text(
            0.04,
            y,
            body,
            fontsize=size,
            va="top",
            linespacing=1.35,
            family="DejaVu Sans Mono" if mono else "DejaVu Sans",
        )
        y -= (body.count("\n") + 1) * size * 1.35 / (72 * 7.4) + 0.02
    fig.text(
        0.04, 0.03, "\n".join(textwrap.wrap("Caution: " + CAUTION, 160)), **figures.FOOTER_STYLE
    )
    return fig


def _aligned(table):
    """A table as aligned monospace text with its caption above, for a sheet page."""
    head = ["interval", *[f"floor {f:g}" for f in table.floors]]
    rows = [head, *[[i, *[table.cell(i, f) for f in table.floors]] for i in table.intervals]]
    widths = [max(len(r[k]) for r in rows) for k in range(len(head))]
    lines = [
        "  ".join(
            c.ljust(w) if k == 0 else c.rjust(w)
            for k, (c, w) in enumerate(zip(r, widths, strict=True))
        )
        for r in rows
    ]
    caption = (
        f"Level {table.level:g}, every p in [{table.p_lo:g}, {table.p_hi:g}]; every integer n "
        f"from 1 to {table.n_max} checked; '> {table.n_max}': fails at n = {table.n_max}; '*': "
        "the floor also held at a smaller n and failed again (coverage is not monotone in n)."
    )
    return "\n".join([*textwrap.wrap(caption, 125), "", *lines]), True


def write_coverage_sheet(path, *, cube=None, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000):
    """Write the coverage sheet, a multi-page PDF, atomically.

    Pages: the definitions and the argument for exactness, the minimum-n tables, then a
    minimum-coverage map per interval. Parameters as :func:`write_coverage_page`; ``path`` ends
    in ``.pdf``.

    Returns
    -------
    pathlib.Path
    """
    mpl = figures.mpl()
    from matplotlib.backends.backend_pdf import PdfPages

    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    level = check_level(level)
    with replacing(path) as tmp:
        cube = _cube(cube)
        tables = _tables(level, bands, floors, n_max)
        defs = "\n".join(f"{name:<16} {text}" for name, text in INTERVAL_DEFINITIONS)
        pages = [_text_figure(TITLE, [*[(note, False) for note in NOTES], (defs, True)])]
        title = "Minimum n per interval and floor"
        pages.append(_text_figure(title, [_aligned(t) for t in tables]))
        pages += [fig for _, fig in _maps(cube, level)]
        metadata = {"Title": "approx-atlas coverage sheet", "CreationDate": None}
        with mpl.rc_context({"pdf.fonttype": 42}), PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                pdf.savefig(fig, dpi=figures.PNG_DPI)
    return path
