"""Printable reference sheets and wiki pages: the charts, tables and audits set for people.

- :func:`write_sheet`: a multi-page PDF: maps, tables, audit, definitions, provenance, caution,
  on A4 or US Letter (landscape; :func:`default_paper` follows the locale), no text under
  8 points.
- :func:`write_wiki`: ``index.html`` and ``index.md`` with SVG charts beside them; the page
  opens offline (no scripts, no external addresses).

The threshold tables and the rule audit themselves are computed by :mod:`atlas.tables`; every
file is written to a temporary name in its directory and renamed when complete.
"""

import html
import math
import os
import re
import textwrap
from pathlib import Path

from atlas import charts, cube, figures
from atlas.engine import METRICS, check_metric
from atlas.figures import METHOD_LABELS, TEXT_COLOUR, provenance_line
from atlas.files import replacing, replacing_directory, save_text
from atlas.tables import (
    AUDIT_TOLS,
    TABLE_PS,
    TABLE_TOLS,
    escape_markdown,
    rule_audit,
    threshold_table,
)

HEADLINE_METHODS = ("normal_cc", "edgeworth_cc")
DEFINITIONS = (
    ("Model", "X ~ Bin(n, p), q = 1 − p, μ = np, σ = √(npq); F(k) = P(X ≤ k), F(−1) = 0."),
    ("Approximation", "Each method gives G(k), an estimate of P(X ≤ k) at every integer "
     "k = −1..n; an interval probability is approximated by P(a ≤ X ≤ b) ≈ G(b) − G(a − 1)."),
    ("Interval error", "W(n, p) = max over 0 ≤ a ≤ b ≤ n of |P(a ≤ X ≤ b) − (G(b) − G(a − 1))| "
     "= max D − min D, with D(k) = F(k) − G(k) on k = −1..n (the metric 'interval')."),
    ("CDF error", "max over 0 ≤ k ≤ n of |F(k) − G(k)| (the metric 'cdf')."),
    ("Minimum n", "min_n(p, tol): the smallest N such that the error is at most tol at every "
     "integer n ≥ N, not only at grid n: grid values, the engine where the error can still "
     "cross tol, a proven one-step growth bound between, a Berry-Esseen bound beyond."),
    ("Rule audit", "For a rule such as np ≥ 5 and nq ≥ 5: the largest error over the grid cells "
     "(n, p) the rule admits, where it occurs, and the share of those cells within each "
     "tolerance. Shares count grid cells, so they depend on the grid's density."),
)  # fmt: skip


def _where(atlas):
    """The atlas file's name (not its directory, which is the machine's business)."""
    path = getattr(atlas, "path", None)
    return Path(path).name if path is not None else "(in memory)"


# ---- HTML pieces ---------------------------------------------------------------------------


def _html_table(header, rows, *, numeric_from=1, caption=None):
    out = ["<table>"]
    if caption:
        out.append(f"<caption>{html.escape(caption)}</caption>")
    out.append("<thead><tr>" + "".join(f"<th>{html.escape(h)}</th>" for h in header)
               + "</tr></thead><tbody>")  # fmt: skip
    for row in rows:
        cells = []
        for k, cell in enumerate(row):
            cls = ' class="num"' if k >= numeric_from else ""
            # A comparison stays on one line ("np >= 10"); edgeworth_cc may break after "_".
            text = re.sub(r" (>=|<=|==|!=|>|<|=) ", "\u00a0\\1\u00a0", str(cell))
            text = html.escape(text).replace("_", "_<wbr>")
            cells.append(f"<td{cls}>{text}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


# ---- the printable sheet -------------------------------------------------------------------


def _headline(ds, methods):
    held = figures.atlas_methods(ds)
    if methods is None:
        chosen = [m for m in HEADLINE_METHODS if m in held] or list(held[:2])
    else:
        chosen = [figures.check_atlas_method(ds, m, "methods") for m in methods]
    if not chosen:
        raise ValueError("`methods` must name at least one method; got an empty sequence.")
    return tuple(chosen)


#: Paper sizes in inches, landscape (width, height): ISO A4 (297 x 210 mm) and US Letter.
PAPERS = {"a4": (297 / 25.4, 210 / 25.4), "letter": (11.0, 8.5)}
#: Territories whose locales print on US Letter (glibc's LC_PAPER): every other prints on A4.
LETTER_TERRITORIES = frozenset(
    {"US", "CA", "MX", "PH", "BO", "CL", "CO", "CR", "GT", "NI", "PA", "PR", "SV", "VE"}
)
_CHAR_WIDTH = 0.55  # DejaVu Sans: mean advance of a character, in em (monospace: 0.6)
_TOP, _BOTTOM = 0.89, 0.13  # the body of a text page, as fractions of its height


def default_paper(environ=None):
    """The paper of the locale: ``"letter"`` for a territory in ``LETTER_TERRITORIES``, else
    ``"a4"``.

    The locale is the first of ``LC_ALL``, ``LC_PAPER`` and ``LANG`` that is set and not
    empty (the POSIX order); its territory is the two letters after the underscore
    (``en_US.UTF-8`` -> US). No locale, or ``C`` / ``POSIX``, gives ``"a4"``.

    Examples
    --------
    >>> default_paper({"LANG": "en_US.UTF-8"}), default_paper({"LANG": "de_DE.UTF-8"})
    ('letter', 'a4')
    >>> default_paper({"LC_ALL": "fr_CA.UTF-8", "LANG": "en_GB.UTF-8"}), default_paper({})
    ('letter', 'a4')
    """
    env = os.environ if environ is None else environ
    for key in ("LC_ALL", "LC_PAPER", "LANG"):
        value = env.get(key)
        if value:
            match = re.match(r"^[A-Za-z]+_([A-Za-z]{2})\b", value)
            territory = match.group(1).upper() if match else ""
            return "letter" if territory in LETTER_TERRITORIES else "a4"
    return "a4"


def check_paper(paper):
    """The paper's name (``None``: :func:`default_paper`); ValueError for another name."""
    if paper is None:
        return default_paper()
    return figures.check_choice(paper, "paper", tuple(PAPERS))


def _text_page(title, size):
    mpl = figures.mpl()
    fig = mpl.figure.Figure(figsize=size, dpi=100)
    fig.text(0.04, 0.955, title, fontsize=15, weight="bold", va="top", gid="title")
    return fig


class _Flow:
    """Paragraphs set from the top of a text page down, a new page when one is full."""

    def __init__(self, title, size):
        self.title = title
        self.size = size
        self.pages = []
        self._new_page()

    def _new_page(self):
        suffix = " (continued)" if self.pages else ""
        self.fig = _text_page(self.title + suffix, self.size)
        self.pages.append(self.fig)
        self.y = _TOP

    def para(self, text, *, left=0.04, right=0.96, size=9.5, mono=False, term=None, gap=0.012,
             **style):  # fmt: skip
        width_pt = (right - left) * self.size[0] * 72
        chars = max(20, int(width_pt / (size * (0.63 if mono else _CHAR_WIDTH))))
        body = "\n".join(textwrap.fill(part, chars) if part else "" for part in text.split("\n"))
        lines = body.count("\n") + 1
        height = lines * size * 1.35 / (72 * self.size[1])
        if self.y - height < _BOTTOM and self.y < _TOP:
            self._new_page()
        if term is not None:
            self.fig.text(0.04, self.y, term, fontsize=size, weight="bold", va="top",
                          color=style.get("color", "black"))  # fmt: skip
        self.fig.text(left, self.y, body, fontsize=size, va="top", linespacing=1.35,
                      family="DejaVu Sans Mono" if mono else "DejaVu Sans", **style)  # fmt: skip
        self.y -= height + gap


def _draw_table(fig, rect, header, rows, *, title=None, fontsize=8.5, col_widths=None,
                text_columns=1):  # fmt: skip
    """A table filling the rectangle (left, bottom, width, height) of the figure."""
    ax = fig.add_axes(rect)
    ax.set_axis_off()
    if title:
        ax.set_title(title, loc="left", fontsize=10.5, weight="bold", pad=4)
    table = ax.table(cellText=rows, colLabels=header, bbox=(0, 0, 1, 1), cellLoc="right",
                     colLoc="right", colWidths=col_widths)  # fmt: skip
    table.auto_set_font_size(False)
    table.set_fontsize(fontsize)
    for (r, c), cell in table.get_celld().items():
        cell.set_edgecolor("#999999")
        cell.set_linewidth(0.5)
        cell.PAD = 0.04
        if r == 0:
            cell.set_facecolor("#E6E6E6")
            cell.get_text().set_weight("bold")
        if c < text_columns:
            cell.get_text().set_horizontalalignment("left")
    return ax


def _page_number(fig, page, pages):
    fig.text(0.985, 0.985, f"page {page} of {pages}", fontsize=8, ha="right", va="top",
             color=TEXT_COLOUR, gid="page-number")  # fmt: skip


def _page_marks(fig, ds, page, pages):
    """The provenance and caution at the foot of a page, its number at the top right."""
    chars = int(0.92 * fig.get_figwidth() * 72 / (figures.FOOTER_STYLE["fontsize"] * 0.6))
    fig.text(0.04, 0.02, "\n".join(figures.footer_lines(ds, chars)), va="bottom", gid="footer",
             **figures.FOOTER_STYLE)  # fmt: skip
    _page_number(fig, page, pages)


def _wrap(text, fontsize, page_width, width=0.92):
    return textwrap.fill(text, int(width * page_width * 72 / (fontsize * _CHAR_WIDTH)))


def _tables_page(tables, size):
    fig = _text_page("Minimum n for each tolerance", size)
    note = (
        "The smallest N such that the worst-case error is within the tolerance at every "
        "integer n ≥ N (checked or bounded at every integer; see Definitions). "
        f"'> N': the error at the atlas's end, n = {tables[0].n_max:,}, exceeds the tolerance."
    )
    marks = {note for table in tables for note in table.notes()[2:]}
    if marks:
        note += " " + " ".join(sorted(marks))
    fig.text(0.04, 0.905, _wrap(note, 9, size[0]), fontsize=9, va="top", linespacing=1.35)
    cols = 2 if len(tables) > 1 else 1
    per_col = math.ceil(len(tables) / cols)
    width = (0.92 - 0.04 * (cols - 1)) / cols
    slot = 0.70 / per_col
    for k, table in enumerate(tables):
        col, row = k % cols, k // cols
        header, rows = table.to_rows()
        height = min(slot - 0.07, 0.034 * (len(rows) + 1))
        top = 0.80 - row * slot
        rect = (0.04 + col * (width + 0.04), top - height, width, height)
        _draw_table(fig, rect, header, rows, title=f"{table.method}, {table.metric} error",
                    col_widths=[0.14] + [0.86 / len(table.tols)] * len(table.tols))  # fmt: skip
    return fig


def _audit_pages(audit, size, per_page=22):
    header = audit.header()
    rows = audit.to_rows()
    shares = len(audit.tols)
    widths = [0.2, 0.13, 0.075, 0.075, 0.09, 0.09, 0.1] + [0.24 / shares] * shares
    pages = []
    for start in range(0, max(len(rows), 1), per_page):
        chunk = rows[start : start + per_page]
        fig = _text_page("Rules of thumb: the worst error each admits"
                         + (" (continued)" if start else ""), size)  # fmt: skip
        fig.text(0.04, 0.905, _wrap(" ".join(audit.notes()), 9, size[0]), fontsize=9, va="top",
                 linespacing=1.35)  # fmt: skip
        height = min(0.70, 0.03 * (len(chunk) + 1))
        _draw_table(fig, (0.04, 0.80 - height, 0.92, height), header, chunk, col_widths=widths,
                    text_columns=3)  # fmt: skip
        pages.append(fig)
    return pages


def _definitions_pages(ds, where, size):
    flow = _Flow("Definitions", size)
    for term, text in DEFINITIONS:
        flow.para(text, left=0.2, term=term)
    flow.y -= 0.01
    flow.para("The methods", size=11, weight="bold")
    for method in figures.atlas_methods(ds):
        label = METHOD_LABELS.get(method, "")
        formula = cube.METHOD_DESCRIPTIONS.get(method, "")
        flow.para(f"{label}; G(k) = {formula}", left=0.2, term=method, size=9, gap=0.006)
    pages = flow.pages
    flow = _Flow("Provenance and caution", size)
    flow.para("The atlas these pages were drawn from (its NetCDF global attributes):", size=9.5)
    entries = [("file", where)] + [(k, str(v)) for k, v in ds.attrs.items()
                                   if k not in ("comment", *cube.FORMAT_ATTRIBUTES)]  # fmt: skip
    for key, value in entries:  # every value whole, wrapped: none is cut short
        flow.para(value, left=0.2, term=key, size=8, mono=True, gap=0.008)
    flow.y -= 0.02
    flow.para(cube.CAUTION, left=0.2, term="Caution", size=10, color="#8B0000", gid="caution")
    return pages + flow.pages


def sheet_figures(atlas, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS,
                  audit_tols=AUDIT_TOLS, paper=None):  # fmt: skip
    """The pages of the reference sheet, as a list of Figures (see :func:`write_sheet`)."""
    ds = figures.as_dataset(atlas)
    check_metric(metric)
    size = PAPERS[check_paper(paper)]
    chosen = _headline(ds, methods)
    pages = [charts.error_map(ds, method=m, metric=metric, width=size[0], height=size[1])
             for m in chosen]  # fmt: skip
    tables = [threshold_table(atlas, tols, ps, method=m, metric=x) for m in chosen
              for x in METRICS]  # fmt: skip
    pages.append(_tables_page(tables, size))
    pages += _audit_pages(rule_audit(ds, methods=chosen, tols=audit_tols), size)
    pages += _definitions_pages(ds, _where(atlas), size)
    for k, fig in enumerate(pages, start=1):
        if k > len(chosen):  # the maps carry their own footer
            _page_marks(fig, ds, k, len(pages))
        else:
            _page_number(fig, k, len(pages))
    return pages


def write_sheet(atlas, path, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS,
                paper=None):  # fmt: skip
    """Write the printable multi-page PDF reference sheet, atomically.

    Pages: an error map for each headline method (normal_cc and edgeworth_cc when the atlas
    holds them), the threshold tables (both metrics), the rule audit, then the definitions,
    the provenance (the atlas's attributes) and the caution. Every page is the paper's size
    (landscape) and prints at 100 %; no text is smaller than 8 points and no line is cut short
    (long ones wrap).

    Parameters
    ----------
    atlas : Atlas
    path : str or os.PathLike
        Ending in ``.pdf``.
    methods : sequence of str, optional
        The methods of the maps, tables and audit.
    metric : {"interval", "cdf"}, optional
        The metric of the maps.
    tols, ps : sequence of float, optional
        For the threshold tables.
    paper : {"a4", "letter"}, optional
        The paper; default :func:`default_paper`, from the locale (US Letter for the
        territories of ``LETTER_TERRITORIES``, else A4).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ValueError
        If ``path`` does not end in ``.pdf``, or for bad methods, metric, tols, ps or paper.
    FileNotFoundError
        If the target's directory does not exist.
    """
    mpl = figures.mpl()
    from matplotlib.backends.backend_pdf import PdfPages

    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    paper = check_paper(paper)
    with replacing(path) as tmp:  # refuses a missing directory before any drawing
        pages = sheet_figures(atlas, methods=methods, metric=metric, tols=tols, ps=ps,
                              paper=paper)  # fmt: skip
        metadata = {"Title": "approx-atlas reference sheet", "CreationDate": None}
        with mpl.rc_context({"pdf.fonttype": 42}), PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                pdf.savefig(fig, dpi=figures.PNG_DPI)  # the rasterized colour fills, for print
    return path


# ---- the wiki page -------------------------------------------------------------------------

_CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; margin: 2em auto;
       max-width: 70em; padding: 0 1em; color: #111; line-height: 1.45; }
h1 { font-size: 1.7em; } h2 { margin-top: 2em; border-bottom: 1px solid #999; }
figure { margin: 1.5em 0; } figure img { width: 100%; height: auto; border: 1px solid #ccc; }
figcaption { font-size: 0.9em; color: #333; }
p, li, dd, dt, caption, code { overflow-wrap: anywhere; }
table { max-width: 100%; } td.num { white-space: nowrap; }
table { border-collapse: collapse; margin: 0.8em 0 0.4em; font-size: 0.92em; }
caption { text-align: left; font-weight: bold; padding-bottom: 0.3em; }
th, td { border: 1px solid #999; padding: 0.25em 0.6em; }
th { background: #e6e6e6; } td.num { text-align: right; font-variant-numeric: tabular-nums; }
.caution { border: 2px solid #8b0000; padding: 0.6em 1em; background: #fff4f4; }
.notes { font-size: 0.9em; color: #333; } code { font-size: 0.95em; }
dl dt { font-weight: bold; margin-top: 0.5em; }
@media print { figure { page-break-inside: avoid; } }
/* last, so that it overrides the rules above on a narrow window */
@media (max-width: 900px) { table { font-size: 0.74em; } th, td { padding: 0.15em 0.3em; } }
"""


def _wiki_charts(ds, chosen, metric):
    """(file name, caption, figure factory) for each chart of the page."""
    items = [
        (f"map_{m}_{metric}.svg", f"Worst-case {metric} error of {m}",
         lambda m=m: charts.error_map(ds, method=m, metric=metric))
        for m in chosen
    ]  # fmt: skip
    if len(chosen) >= 2:
        a, b = chosen[0], chosen[1]
        items.append(
            (
                f"compare_{a}_{b}_{metric}.svg",
                f"{a} and {b} on one colour scale, one above the other",
                lambda: charts.compare_map(ds, method=a, method2=b, metric=metric, stacked=True),
            )
        )
        items.append(
            (
                f"gain_{b}_over_{a}_{metric}.svg",
                f"Which of {a} and {b} is better, and by how many times",
                lambda: charts.gain_map(ds, method=b, method2=a, metric=metric),
            )
        )
    if len(figures.atlas_methods(ds)) >= 2:
        items.append(
            (
                f"best_{metric}.svg",
                "The method with the smallest worst-case error",
                lambda: charts.best_method_map(ds, metric=metric),
            )
        )
    return items


def write_wiki(atlas, directory, *, methods=None, metric="interval", tols=TABLE_TOLS,
               ps=TABLE_PS, overwrite=True):  # fmt: skip
    """Write a static wiki page: ``index.html`` and ``index.md`` with SVG charts beside them.

    The page has the charts, the threshold tables, the rule audit, the definitions, the
    provenance and the caution; it links only to files in ``directory`` by relative names, holds
    no script and no external address, and so opens offline.

    Parameters
    ----------
    atlas : Atlas
    directory : str or os.PathLike
        Created (its parent must exist), or an empty directory; a directory of an earlier page
        is replaced if ``overwrite``.
    methods, metric, tols, ps
        As for :func:`write_sheet`.
    overwrite : bool, optional
        Replace a non-empty directory that holds only page files (``.html``, ``.md``,
        ``.svg``, ...); a directory holding anything else is never replaced.

    Returns
    -------
    list of pathlib.Path
        The files written: the SVG charts, ``index.md`` and ``index.html``.

    Raises
    ------
    ValueError
        For bad methods, metric, tols or ps, or an atlas whose data cannot be read.
    FileNotFoundError
        If the parent of ``directory`` does not exist.
    FileExistsError
        If ``directory`` is not empty and ``overwrite`` is False, or holds other files.

    Notes
    -----
    The page is written into a temporary directory beside ``directory`` and renamed into place
    when complete (:func:`atlas.files.replacing_directory`): a failure leaves nothing behind.
    """
    ds = figures.as_dataset(atlas)
    check_metric(metric)
    chosen = _headline(ds, methods)
    directory = Path(directory)
    with replacing_directory(directory, overwrite=overwrite) as folder:
        tables = [threshold_table(atlas, tols, ps, method=m, metric=x) for m in chosen
                  for x in METRICS]  # fmt: skip
        audit = rule_audit(ds, methods=chosen)
        names = []
        images = []
        for name, caption, make in _wiki_charts(ds, chosen, metric):
            figures.save_figure(make(), folder / name)
            names.append(name)
            images.append((name, caption))
        provenance = provenance_line(ds)
        where = _where(atlas)
        page = _wiki_markdown(ds, images, tables, audit, provenance, where)
        save_text(folder / "index.md", page)
        save_text(folder / "index.html", _wiki_html(ds, images, tables, audit, provenance, where))
    return [directory / name for name in (*names, "index.md", "index.html")]


def _wiki_markdown(ds, images, tables, audit, provenance, where):
    out = ["# approx-atlas: where the approximations to the binomial are safe", ""]
    out += [f"> **Caution.** {cube.CAUTION}", ""]
    out += [f"_{provenance}_", "", "## Charts", ""]
    for name, caption in images:
        out += [f"![{caption}]({name})", "", f"*{caption}.*", ""]
    out += ["## Minimum n for each tolerance", ""]
    for table in tables:
        out.append(table.to_markdown())
    out += ["## Rules of thumb", "", audit.to_markdown(), "## Definitions", ""]
    out += [f"- **{term}.** {text}" for term, text in DEFINITIONS]
    out += [""] + [
        f"- `{m}`: {METHOD_LABELS.get(m, m)}; G(k) = {cube.METHOD_DESCRIPTIONS.get(m, '')}"
        for m in figures.atlas_methods(ds)
    ]
    out += ["", "## Provenance", "", f"- file: `{where}`"]
    out += [f"- {k}: {escape_markdown(v)}" for k, v in ds.attrs.items()
            if k not in cube.FORMAT_ATTRIBUTES]  # fmt: skip
    out += ["", "## Caution", "", cube.CAUTION, ""]
    return "\n".join(out)


def _wiki_html(ds, images, tables, audit, provenance, where):
    e = html.escape
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           "<title>approx-atlas: where the approximations to the binomial are safe</title>",
           f"<style>{_CSS}</style>", "</head>", "<body>",
           "<h1>approx-atlas: where the approximations to the binomial are safe</h1>",
           f'<p class="caution"><strong>Caution.</strong> {e(cube.CAUTION)}</p>',
           f'<p class="notes">{e(provenance)}</p>', "<h2>Charts</h2>"]  # fmt: skip
    for name, caption in images:
        # The image links to itself: at a narrow page width a reader opens it full size.
        out.append(f'<figure><a href="{e(name)}"><img src="{e(name)}" alt="{e(caption)}"></a>'
                   f"<figcaption>{e(caption)} (select the chart to open it full size)."
                   "</figcaption></figure>")  # fmt: skip
    out.append("<h2>Minimum n for each tolerance</h2>")
    for table in tables:
        header, rows = table.to_rows()
        out.append(_html_table(header, rows, caption=table.title()))
        out.append('<ul class="notes">' + "".join(f"<li>{e(x)}</li>" for x in table.notes())
                   + "</ul>")  # fmt: skip
    out.append("<h2>Rules of thumb: the worst error each admits</h2>")
    out.append(_html_table(audit.header(), audit.to_rows(), numeric_from=3))
    out.append('<ul class="notes">' + "".join(f"<li>{e(x)}</li>" for x in audit.notes())
               + "</ul>")  # fmt: skip
    out.append("<h2>Definitions</h2><dl>")
    out += [f"<dt>{e(term)}</dt><dd>{e(text)}</dd>" for term, text in DEFINITIONS]
    out.append("</dl><ul>")
    out += [
        f"<li><code>{e(m)}</code>: {e(METHOD_LABELS.get(m, m))}; G(k) = "
        f"{e(cube.METHOD_DESCRIPTIONS.get(m, ''))}</li>"
        for m in figures.atlas_methods(ds)
    ]
    out.append("</ul><h2>Provenance</h2><dl>")
    out.append(f"<dt>file</dt><dd><code>{e(where)}</code></dd>")
    out += [f"<dt>{e(k)}</dt><dd>{e(str(v))}</dd>" for k, v in ds.attrs.items()
            if k not in cube.FORMAT_ATTRIBUTES]  # fmt: skip
    out.append("</dl>")
    out.append(f'<h2>Caution</h2><p class="caution">{e(cube.CAUTION)}</p>')
    out += ["</body>", "</html>", ""]
    return "\n".join(out)


__all__ = [
    "DEFINITIONS",
    "HEADLINE_METHODS",
    "LETTER_TERRITORIES",
    "PAPERS",
    "check_paper",
    "default_paper",
    "sheet_figures",
    "write_sheet",
    "write_wiki",
]
