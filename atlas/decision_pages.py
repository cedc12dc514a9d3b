"""A page for tail p-values and tests: a wiki page (HTML and Markdown with SVG charts) and a
printable PDF, computed on demand.

- :func:`write_decision_page`: ``index.html`` and ``index.md`` with the SVG charts beside them,
  opening offline (no script, no external address).
- :func:`write_decision_sheet`: the same content as a multi-page PDF.

The page holds the definitions (the contract of :mod:`atlas.tails` and :mod:`atlas.sizes`), the
maps of the tail relative error, the size of the invented inspection lot's test against alpha,
the minimum-n tables and the rule audits, with the caution. Nothing reads an atlas file; the
main sheet and wiki page (:mod:`atlas.sheets`) can take these pieces in.
"""

import html
import textwrap
from pathlib import Path

from atlas import __version__, cube, figures
from atlas.decision_charts import size_chart, tail_error_maps
from atlas.decision_rules import size_rule_audit, tail_rule_audit
from atlas.decision_tables import size_table, tail_table
from atlas.files import replacing, replacing_directory, save_text

__all__ = ["DEFINITIONS", "write_decision_page", "write_decision_sheet"]

TITLE = "Tail p-values and tests: how far the shortcut goes wrong"
DEMO = (80, 0.025)  # the invented inspection lot of the demo: 80 fasteners, claimed rate 2.5%
DEFINITIONS = (
    ("Model", "X ~ Bin(n, p), q = 1 − p, F(k) = P(X ≤ k), G(k) an approximation of F, b the "
     "binomial pmf."),
    ("Tail relative error", "lower(α) = max over k with F(k) ≥ α of |G(k)/F(k) − 1|; "
     "upper(α) = max over k with P(X ≥ k) ≥ α of |(1 − G(k − 1))/P(X ≥ k) − 1|; both = the "
     "larger. Every tail probability of at least α is approximated within it."),
    ("Test size", "H0: p = p0 at nominal level α, X ~ Bin(n, p0): less = Σ b(k) over "
     "G(k) ≤ α; greater = Σ b(k) over 1 − G(k − 1) ≤ α; two-sided = Σ b(k) over G(k) ≤ α/2 or "
     "1 − G(k − 1) ≤ α/2. The exact test's size is the same sum with F; it is at most α."),
    ("Exact", "No count is sampled: every admitted tail and every count whose decision is in "
     "doubt is evaluated; tails in relative terms (P(X ≥ k) as an incomplete beta, never 1 − F)."),
)  # fmt: skip


def _content(method):
    """Figures (name, caption, factory), tables and audits of the page."""
    n, p0 = DEMO
    charts = [
        ("decision_tail_maps.svg", f"Tail relative error of {method}, one panel per level α",
         lambda: tail_error_maps(method=method)),
        ("decision_size_lot.svg",
         f"Invented lot: n = {n}, claimed rate p0 = {p0}; upper one-sided test, size against α",
         lambda: size_chart(n, p0, method=method, alternative="greater")),
    ]  # fmt: skip
    tables = [tail_table(method=method), size_table(method=method, alternative="greater")]
    audits = [
        ("Rules of thumb: the tail relative error they admit", tail_rule_audit(method=method)),
        ("Rules of thumb: the upper one-sided test's size they admit",
         size_rule_audit(method=method, alternative="greater")),
    ]  # fmt: skip
    return charts, tables, audits


def _provenance():
    return f"Computed exactly on demand by approx-atlas {__version__}; no atlas file is read."


def _markdown(images, tables, audits):
    out = [f"# {TITLE}", ""]
    out += [f"- **{term}.** {text}" for term, text in DEFINITIONS] + [""]
    for name, caption in images:
        out += [f"![{caption}]({name})", "", f"*{caption}*", ""]
    for table in tables:
        out += [table.to_markdown(), ""]
    for title, rows in audits:
        out += [f"**{title}** (grid: {rows[0].grid})", ""]
        out += [f"- {row.explain()}" for row in rows] + [""]
    out += [_provenance(), "", f"> **Caution.** {cube.CAUTION}", ""]
    return "\n".join(out)


def _html(images, tables, audits):
    esc = html.escape
    body = [f"<h1>{esc(TITLE)}</h1>", "<dl>"]
    body += [f"<dt>{esc(term)}</dt><dd>{esc(text)}</dd>" for term, text in DEFINITIONS]
    body.append("</dl>")
    for name, caption in images:
        body.append(f'<figure><img src="{esc(name)}" alt="{esc(caption)}" style="max-width:100%">'
                    f"<figcaption>{esc(caption)}</figcaption></figure>")  # fmt: skip
    for table in tables:
        header, rows = table.to_rows()
        body.append(
            f"<table><caption>{esc(table.title)}</caption><thead><tr>"
            + "".join(f"<th>{esc(h)}</th>" for h in header)
            + "</tr></thead><tbody>"
        )
        body += ["<tr>" + "".join(f"<td>{esc(c)}</td>" for c in row) + "</tr>" for row in rows]
        body.append("</tbody></table>")
        body += [f"<p><small>{esc(line)}</small></p>" for line in table.notes()]
    for title, rows in audits:
        body.append(f"<h2>{esc(title)}</h2><p><small>Grid: {esc(rows[0].grid)}</small></p><ul>")
        body += [f"<li>{esc(row.explain())}</li>" for row in rows]
        body.append("</ul>")
    body += [f"<p>{esc(_provenance())}</p>",
             f"<p><strong>Caution.</strong> {esc(cube.CAUTION)}</p>"]  # fmt: skip
    style = (
        "body{font-family:sans-serif;max-width:60em;margin:2em auto;color:#222}"
        "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;"
        "padding:.2em .6em;text-align:right}caption{font-weight:bold;text-align:left}"
    )
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{esc(TITLE)}</title><style>{style}</style></head><body>\n"
            + "\n".join(body) + "\n</body></html>\n")  # fmt: skip


def write_decision_page(directory, *, method="normal_cc", overwrite=True):
    """Write the page: ``index.html``, ``index.md`` and the SVG charts, into ``directory``.

    Parameters
    ----------
    directory : str or os.PathLike
        Created (its parent must exist), or an empty directory; an earlier page's directory is
        replaced if ``overwrite`` (see :func:`atlas.files.replacing_directory`).
    method : str, optional
    overwrite : bool, optional

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    directory = Path(directory)
    with replacing_directory(directory, overwrite=overwrite) as folder:
        charts, tables, audits = _content(method)
        images = []
        for name, caption, make in charts:
            figures.save_figure(make(), folder / name)
            images.append((name, caption))
        save_text(folder / "index.md", _markdown(images, tables, audits))
        save_text(folder / "index.html", _html(images, tables, audits))
    return [directory / name for name, _ in images] + [directory / "index.md",
                                                       directory / "index.html"]  # fmt: skip


def _text_figure(title, paragraphs):
    """A page of text: a title and wrapped paragraphs (A4 landscape)."""
    matplotlib = figures.mpl()
    fig = matplotlib.figure.Figure(figsize=(11.69, 8.27))
    fig.text(0.04, 0.95, title, fontsize=14, va="top", weight="bold")
    y = 0.89
    for para in paragraphs:
        lines = textwrap.wrap(para, 150) or [""]
        fig.text(0.04, y, "\n".join(lines), fontsize=8.5, va="top", family="monospace"
                 if para.startswith("|") else None, linespacing=1.3)  # fmt: skip
        y -= 0.022 * len(lines) + 0.012
    fig.text(0.04, 0.03, f"{_provenance()} Caution: {cube.CAUTION}", fontsize=7,
             color=figures.TEXT_COLOUR, wrap=True)  # fmt: skip
    return fig


def write_decision_sheet(path, *, method="normal_cc"):
    """Write the page as a PDF: definitions, charts, tables and rule audits.

    Parameters
    ----------
    path : str or os.PathLike
        Ending in ``.pdf``; written under a temporary name and renamed when complete.
    method : str, optional

    Returns
    -------
    pathlib.Path
    """
    from matplotlib.backends.backend_pdf import PdfPages

    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    charts, tables, audits = _content(method)
    pages = [_text_figure(TITLE, [f"{term}. {text}" for term, text in DEFINITIONS])]
    pages += [make() for _, _, make in charts]
    table_text = []
    for table in tables:
        table_text += [table.title] + table.to_markdown().splitlines()[2:] + [""]
    pages.append(_text_figure("Minimum n", table_text))
    for title, rows in audits:
        pages.append(_text_figure(title, [f"Grid: {rows[0].grid}"]
                                  + [row.explain() for row in rows]))  # fmt: skip
    with replacing(path) as tmp, PdfPages(tmp, metadata={"CreationDate": None}) as pdf:
        for fig in pages:
            pdf.savefig(fig)
    return path
