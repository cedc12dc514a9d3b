"""A section of the sheet and the wiki page, as content: definitions, charts, tables, lists,
provenance and the caution; and how it is set in HTML, Markdown and PDF pages.

The content of a section is made by its own module (:func:`atlas.decision_pages.section` for tail
p-values and tests, :func:`atlas.coverage_pages.section` for confidence intervals); this module
sets it in one style, which :mod:`atlas.sheets` composes into the main sheet and wiki page, and
which the stand-alone pages of those modules use too (:func:`write_page`, :func:`write_pdf`).

Dependencies: figures, layout -> sections -> decision_pages, coverage_pages -> sheets.
"""

import html
import textwrap
from dataclasses import dataclass, field
from pathlib import Path

from atlas import cube, figures
from atlas.files import replacing, replacing_directory, save_text
from atlas.layout import BOTTOM, Flow, draw_table, text_page, wrap

__all__ = ["CSS", "Chart", "Section", "Table", "html_table", "page_html", "section_html",
           "section_markdown", "section_pages", "write_page", "write_pdf"]  # fmt: skip

CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; margin: 2em auto;
       max-width: 70em; padding: 0 1em; color: #111; line-height: 1.45; }
h1 { font-size: 1.7em; } h2 { margin-top: 2em; border-bottom: 1px solid #999; }
h3 { margin-top: 1.4em; }
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
nav.contents ol { columns: 2; }
@media print { figure { page-break-inside: avoid; } }
/* last, so that it overrides the rules above on a narrow window */
@media (max-width: 900px) { table { font-size: 0.74em; } th, td { padding: 0.15em 0.3em; } }
"""


@dataclass(frozen=True)
class Chart:
    """A chart of a section: its SVG file name, caption, and a factory ``make(width, height)``
    (inches) returning a matplotlib Figure."""

    name: str
    caption: str
    make: object


@dataclass(frozen=True)
class Table:
    """A table of text: a title, the header, rows of strings, notes below it, and how many
    leading columns hold text (left-aligned) rather than numbers."""

    title: str
    header: tuple
    rows: tuple
    notes: tuple = ()
    text_columns: int = 1


@dataclass(frozen=True)
class Section:
    """What a section shows.

    Attributes
    ----------
    key : str
        Its anchor on the wiki page (``#key``).
    title : str
    intro : tuple of str
        Paragraphs before the definitions.
    definitions : tuple of (str, str)
        Term and text.
    charts : tuple of Chart
    tables : tuple of Table
    lists : tuple of (str, tuple of str)
        Titled lists of lines (rule audits).
    provenance : str
        Where the numbers come from, one line.
    """

    key: str
    title: str
    intro: tuple = ()
    definitions: tuple = ()
    charts: tuple = ()
    tables: tuple = ()
    lists: tuple = ()
    provenance: str = ""
    figures_made: dict = field(default_factory=dict, compare=False, repr=False)

    def figure(self, chart, size=None):
        """The chart's Figure at ``size`` (inches). At its own size (None) it is made once and
        kept (saved as SVG, never marked); at a page's size it is made anew, since a sheet
        writes its page number on it."""
        if size is not None:
            return chart.make(width=size[0], height=size[1])
        if chart.name not in self.figures_made:
            self.figures_made[chart.name] = chart.make()
        return self.figures_made[chart.name]


# ---- HTML and Markdown ----------------------------------------------------------------------


def html_table(header, rows, *, numeric_from=1, caption=None):
    """A table as HTML: numbers right-aligned, comparisons kept on one line."""
    import re

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


def section_html(section, *, level=2):
    """The section as an HTML fragment, its heading ``<h{level} id="{key}">``."""
    e = html.escape
    h, sub = f"h{level}", f"h{level + 1}"
    out = [f'<{h} id="{e(section.key)}">{e(section.title)}</{h}>']
    out += [f"<p>{e(text)}</p>" for text in section.intro]
    if section.definitions:
        out.append("<dl>" + "".join(f"<dt>{e(t)}</dt><dd>{e(d)}</dd>"
                                    for t, d in section.definitions) + "</dl>")  # fmt: skip
    for chart in section.charts:
        out.append(f'<figure><a href="{e(chart.name)}"><img src="{e(chart.name)}" '
                   f'alt="{e(chart.caption)}"></a><figcaption>{e(chart.caption)} (select the '
                   "chart to open it full size).</figcaption></figure>")  # fmt: skip
    for table in section.tables:
        out.append(html_table(table.header, table.rows, caption=table.title,
                              numeric_from=table.text_columns))  # fmt: skip
        if table.notes:
            out.append('<ul class="notes">' + "".join(f"<li>{e(x)}</li>" for x in table.notes)
                       + "</ul>")  # fmt: skip
    for title, lines in section.lists:
        out.append(f"<{sub}>{e(title)}</{sub}><ul>" + "".join(f"<li>{e(x)}</li>" for x in lines)
                   + "</ul>")  # fmt: skip
    if section.provenance:
        out.append(f'<p class="notes">{e(section.provenance)}</p>')
    out.append(f'<p class="caution"><strong>Caution.</strong> {e(cube.CAUTION)}</p>')
    return "\n".join(out)


def _md_cell(text):
    return str(text).replace("|", "\\|")


def section_markdown(section, *, level=2):
    """The section as Markdown, its heading of ``level`` hashes."""
    out = [f"{'#' * level} {section.title}", ""]
    for text in section.intro:
        out += [text, ""]
    if section.definitions:
        out += [f"- **{t}.** {d}" for t, d in section.definitions] + [""]
    for chart in section.charts:
        out += [f"![{chart.caption}]({chart.name})", "", f"*{chart.caption}.*", ""]
    for table in section.tables:
        out += [f"**{table.title}**", ""]
        out.append("| " + " | ".join(_md_cell(h) for h in table.header) + " |")
        out.append("|" + "|".join([" --- "] * table.text_columns
                                  + [" ---: "] * (len(table.header) - table.text_columns))
                   + "|")  # fmt: skip
        out += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in table.rows]
        out += [""] + [f"{note}" for note in table.notes] + [""]
    for title, lines in section.lists:
        out += [f"{'#' * (level + 1)} {title}", ""] + [f"- {x}" for x in lines] + [""]
    if section.provenance:
        out += [f"_{section.provenance}_", ""]
    out += [f"> **Caution.** {cube.CAUTION}", ""]
    return "\n".join(out)


def page_html(title, body):
    """A whole HTML page (offline: no script, no external address) around ``body``."""
    return ('<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<title>{html.escape(title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n"
            f"{body}\n</body>\n</html>\n")  # fmt: skip


def save_charts(section, folder):
    """Write the section's charts as SVG into ``folder``; return their paths."""
    return [figures.save_figure(section.figure(c), Path(folder) / c.name) for c in section.charts]


def write_page(section, directory, *, overwrite=True):
    """Write the section alone as a page: ``index.html``, ``index.md`` and its SVG charts, into
    ``directory`` (replaced as a whole, :func:`atlas.files.replacing_directory`).

    Returns
    -------
    list of pathlib.Path
    """
    directory = Path(directory)
    with replacing_directory(directory, overwrite=overwrite) as folder:
        save_charts(section, folder)
        save_text(folder / "index.md", "# " + section_markdown(section, level=1)[2:])
        save_text(folder / "index.html", page_html(section.title, section_html(section, level=1)))
    return [directory / c.name for c in section.charts] + [directory / "index.md",
                                                           directory / "index.html"]  # fmt: skip


# ---- PDF pages ------------------------------------------------------------------------------


def _footer(fig, section):
    text = f"{section.provenance} Caution: {cube.CAUTION}".strip()
    chars = int(0.92 * fig.get_figwidth() * 72 / (figures.FOOTER_STYLE["fontsize"] * 0.6))
    fig.text(0.04, 0.02, "\n".join(textwrap.wrap(text, chars)), va="bottom", gid="footer",
             **figures.FOOTER_STYLE)  # fmt: skip


def _table_pages(section, size):
    """The section's tables, two to a page at most, each with its title and notes."""
    pages = []
    per_page = 2
    for start in range(0, len(section.tables), per_page):
        fig = text_page(f"{section.title}: tables" + (" (continued)" if start else ""), size)
        y = 0.90
        for table in section.tables[start : start + per_page]:
            notes = wrap(" ".join(table.notes), 8.5, size[0]) if table.notes else ""
            fig.text(0.04, y, wrap(table.title, 10.5, size[0]), fontsize=10.5, weight="bold",
                     va="top")  # fmt: skip
            y -= (wrap(table.title, 10.5, size[0]).count("\n") + 1) * 10.5 * 1.3 / (72 * size[1])
            height = 0.032 * (len(table.rows) + 1)
            rest = len(table.header) - table.text_columns
            first = 0.22 if table.text_columns else 0.0
            widths = [first / max(table.text_columns, 1)] * table.text_columns + [
                (1 - first) / max(rest, 1)
            ] * rest
            draw_table(fig, (0.04, y - 0.01 - height, 0.92, height), list(table.header),
                       [list(r) for r in table.rows], col_widths=widths,
                       text_columns=table.text_columns)  # fmt: skip
            y -= 0.01 + height + 0.015
            if notes:
                fig.text(0.04, y, notes, fontsize=8.5, va="top", linespacing=1.3,
                         color=figures.TEXT_COLOUR)  # fmt: skip
                y -= (notes.count("\n") + 1) * 8.5 * 1.3 / (72 * size[1])
            y -= 0.04
        pages.append(fig)
    return pages


def section_pages(section, size):
    """The section as PDF pages of ``size`` (inches, landscape): the definitions, the charts
    (one a page), the tables, the lists, the caution last; text pages carry the section's
    provenance and the caution at their foot."""
    flow = Flow(section.title, size)
    for text in section.intro:
        flow.para(text, size=9.5)
    for term, text in section.definitions:
        flow.para(text, left=0.22, term=term, size=9)
    text_pages = list(flow.pages)
    charts = [section.figure(c, size) for c in section.charts]
    tables = _table_pages(section, size)
    flow = None
    for title, lines in section.lists:
        if flow is None:
            flow = Flow(section.title, size)
        else:
            flow.y -= 0.015
        flow.para(title, size=10.5, weight="bold")
        for line in lines:
            flow.para(line, size=8.5, gap=0.006)
    if flow is None:
        flow = Flow(f"{section.title}: caution", size)
    if flow.y - 0.1 < BOTTOM:
        flow.y = BOTTOM  # the caution starts a new page rather than crowd the last lines
    flow.y -= 0.01
    flow.para(cube.CAUTION, left=0.2, term="Caution", size=10, color="#8B0000", gid="caution")
    lists = flow.pages
    for fig in text_pages + tables + lists:
        _footer(fig, section)
    return text_pages + charts + tables + lists


def write_pdf(section, path, *, size=(11.69, 8.27)):
    """Write the section alone as a PDF, atomically; ``path`` ends in ``.pdf``."""
    mpl = figures.mpl()
    from matplotlib.backends.backend_pdf import PdfPages

    from atlas.layout import page_number

    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    with replacing(path) as tmp:
        pages = section_pages(section, size)
        for k, fig in enumerate(pages, start=1):
            page_number(fig, k, len(pages))
        metadata = {"Title": f"approx-atlas: {section.title}", "CreationDate": None}
        with mpl.rc_context({"pdf.fonttype": 42}), PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                pdf.savefig(fig, dpi=figures.PNG_DPI)
    return path
