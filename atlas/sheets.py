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
from pathlib import Path

from atlas import charts, cube, figures
from atlas.engine import METRICS, check_metric
from atlas.figures import METHOD_LABELS, provenance_line
from atlas.files import replacing, replacing_directory, save_text
from atlas.layout import Flow as _Flow
from atlas.layout import draw_table as _draw_table
from atlas.layout import page_number as _page_number
from atlas.layout import text_page as _text_page
from atlas.layout import wrap as _wrap
from atlas.sections import CSS, save_charts, section_html, section_markdown, section_pages
from atlas.sections import html_table as _html_table
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


def _page_marks(fig, ds, page, pages):
    """The provenance and caution at the foot of a page, its number at the top right."""
    chars = int(0.92 * fig.get_figwidth() * 72 / (figures.FOOTER_STYLE["fontsize"] * 0.6))
    fig.text(0.04, 0.02, "\n".join(figures.footer_lines(ds, chars)), va="bottom", gid="footer",
             **figures.FOOTER_STYLE)  # fmt: skip
    _page_number(fig, page, pages)


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


def default_sections(method="normal_cc", *, coverage=None):
    """The sections the sheet and the wiki page add to the error atlas's: tail p-values and
    tests (:func:`atlas.decision_pages.section`, for ``method``) and confidence intervals
    (:func:`atlas.coverage_pages.section`, its maps from ``coverage``, by default
    :func:`atlas.coverage_pages.load_coverage_data`). Each is made once per process and
    arguments (about two minutes in all the first time)."""
    from atlas import coverage_pages, decision_pages

    return (decision_pages.section(method), coverage_pages.section(coverage))


def _sections(sections, chosen):
    return default_sections(chosen[0]) if sections is None else tuple(sections)


def sheet_figures(atlas, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS,
                  audit_tols=AUDIT_TOLS, paper=None, sections=None):  # fmt: skip
    """The pages of the reference sheet, as a list of Figures (see :func:`write_sheet`)."""
    ds = figures.as_dataset(atlas)
    check_metric(metric)
    size = PAPERS[check_paper(paper)]
    chosen = _headline(ds, methods)
    extra = _sections(sections, chosen)
    pages = [charts.error_map(ds, method=m, metric=metric, width=size[0], height=size[1])
             for m in chosen]  # fmt: skip
    tables = [threshold_table(atlas, tols, ps, method=m, metric=x) for m in chosen
              for x in METRICS]  # fmt: skip
    pages.append(_tables_page(tables, size))
    pages += _audit_pages(rule_audit(ds, methods=chosen, tols=audit_tols), size)
    own_marks = set(range(1, len(chosen) + 1))  # the maps carry their own footer
    for section in extra:
        part = section_pages(section, size)
        own_marks.update(range(len(pages) + 1, len(pages) + len(part) + 1))
        pages += part
    pages += _definitions_pages(ds, _where(atlas), size)
    for k, fig in enumerate(pages, start=1):
        if k in own_marks:
            _page_number(fig, k, len(pages))
        else:
            _page_marks(fig, ds, k, len(pages))
    return pages


def write_sheet(atlas, path, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS,
                paper=None, sections=None):  # fmt: skip
    """Write the printable multi-page PDF reference sheet, atomically.

    Pages: an error map for each headline method (normal_cc and edgeworth_cc when the atlas
    holds them), the threshold tables (both metrics), the rule audit, the sections on tail
    p-values and tests and on confidence intervals (definitions, charts, tables, rule audits,
    caution), then the definitions, the provenance (the atlas's attributes) and the caution.
    Every page is the paper's size (landscape) and prints at 100 %; no text is smaller than 8
    points and no line is cut short (long ones wrap).

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
    sections : sequence of atlas.sections.Section, optional
        The sections after the rule audit; default :func:`default_sections` (pass ``()`` for
        the error atlas's pages alone).

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
                              paper=paper, sections=sections)  # fmt: skip
        metadata = {"Title": "approx-atlas reference sheet", "CreationDate": None}
        with mpl.rc_context({"pdf.fonttype": 42}), PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                pdf.savefig(fig, dpi=figures.PNG_DPI)  # the rasterized colour fills, for print
    return path


# ---- the wiki page -------------------------------------------------------------------------


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
               ps=TABLE_PS, overwrite=True, sections=None):  # fmt: skip
    """Write a static wiki page: ``index.html`` and ``index.md`` with SVG charts beside them.

    The page has a table of contents, the charts, the threshold tables, the rule audit, the
    sections on tail p-values and tests and on confidence intervals (their charts beside the
    page's), the definitions, the provenance and the caution; it links only to files in
    ``directory`` by relative names, holds no script and no external address, and so opens
    offline.

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
    sections : sequence of atlas.sections.Section, optional
        As for :func:`write_sheet`.

    Returns
    -------
    list of pathlib.Path
        The files written: the SVG charts (the sections' too), ``index.md`` and
        ``index.html``.

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
    extra = _sections(sections, chosen)
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
        for section in extra:
            names += [path.name for path in save_charts(section, folder)]
        provenance = provenance_line(ds)
        where = _where(atlas)
        page = _wiki_markdown(ds, images, tables, audit, provenance, where, extra)
        save_text(folder / "index.md", page)
        save_text(folder / "index.html",
                  _wiki_html(ds, images, tables, audit, provenance, where, extra))  # fmt: skip
    return [directory / name for name in (*names, "index.md", "index.html")]


def _contents(extra):
    """(anchor, title) of every part of the wiki page, in order."""
    return ([("charts", "Charts"), ("min-n", "Minimum n for each tolerance"),
             ("rules", "Rules of thumb: the worst error each admits")]
            + [(section.key, section.title) for section in extra]
            + [("definitions", "Definitions"), ("provenance", "Provenance"),
               ("caution", "Caution")])  # fmt: skip


def _wiki_markdown(ds, images, tables, audit, provenance, where, extra=()):
    out = ["# approx-atlas: where the approximations to the binomial are safe", ""]
    out += [f"> **Caution.** {cube.CAUTION}", ""]
    out += [f"_{provenance}_", "", "Contents:", ""]
    out += [f"{k}. [{title}](#{key})" for k, (key, title) in enumerate(_contents(extra), 1)]
    out += ["", "## Charts", ""]
    for name, caption in images:
        out += [f"![{caption}]({name})", "", f"*{caption}.*", ""]
    out += ["## Minimum n for each tolerance", ""]
    for table in tables:
        out.append(table.to_markdown())
    out += ["## Rules of thumb", "", audit.to_markdown()]
    for section in extra:
        out.append(section_markdown(section))
    out += ["## Definitions", ""]
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


def _wiki_html(ds, images, tables, audit, provenance, where, extra=()):
    e = html.escape
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           "<title>approx-atlas: where the approximations to the binomial are safe</title>",
           f"<style>{CSS}</style>", "</head>", "<body>",
           "<h1>approx-atlas: where the approximations to the binomial are safe</h1>",
           f'<p class="caution"><strong>Caution.</strong> {e(cube.CAUTION)}</p>',
           f'<p class="notes">{e(provenance)}</p>',
           '<nav class="contents"><h2 id="contents">Contents</h2><ol>']  # fmt: skip
    out += [f'<li><a href="#{e(key)}">{e(title)}</a></li>' for key, title in _contents(extra)]
    out += ["</ol></nav>", '<h2 id="charts">Charts</h2>']
    for name, caption in images:
        # The image links to itself: at a narrow page width a reader opens it full size.
        out.append(f'<figure><a href="{e(name)}"><img src="{e(name)}" alt="{e(caption)}"></a>'
                   f"<figcaption>{e(caption)} (select the chart to open it full size)."
                   "</figcaption></figure>")  # fmt: skip
    out.append('<h2 id="min-n">Minimum n for each tolerance</h2>')
    for table in tables:
        header, rows = table.to_rows()
        out.append(_html_table(header, rows, caption=table.title()))
        out.append('<ul class="notes">' + "".join(f"<li>{e(x)}</li>" for x in table.notes())
                   + "</ul>")  # fmt: skip
    out.append('<h2 id="rules">Rules of thumb: the worst error each admits</h2>')
    out.append(_html_table(audit.header(), audit.to_rows(), numeric_from=3))
    out.append('<ul class="notes">' + "".join(f"<li>{e(x)}</li>" for x in audit.notes())
               + "</ul>")  # fmt: skip
    out += [section_html(section) for section in extra]
    out.append('<h2 id="definitions">Definitions</h2><dl>')
    out += [f"<dt>{e(term)}</dt><dd>{e(text)}</dd>" for term, text in DEFINITIONS]
    out.append("</dl><ul>")
    out += [
        f"<li><code>{e(m)}</code>: {e(METHOD_LABELS.get(m, m))}; G(k) = "
        f"{e(cube.METHOD_DESCRIPTIONS.get(m, ''))}</li>"
        for m in figures.atlas_methods(ds)
    ]
    out.append('</ul><h2 id="provenance">Provenance</h2><dl>')
    out.append(f"<dt>file</dt><dd><code>{e(where)}</code></dd>")
    out += [f"<dt>{e(k)}</dt><dd>{e(str(v))}</dd>" for k, v in ds.attrs.items()
            if k not in cube.FORMAT_ATTRIBUTES]  # fmt: skip
    out.append("</dl>")
    out.append(f'<h2 id="caution">Caution</h2><p class="caution">{e(cube.CAUTION)}</p>')
    out += ["</body>", "</html>", ""]
    return "\n".join(out)


__all__ = [
    "DEFINITIONS",
    "HEADLINE_METHODS",
    "LETTER_TERRITORIES",
    "PAPERS",
    "check_paper",
    "default_paper",
    "default_sections",
    "sheet_figures",
    "write_sheet",
    "write_wiki",
]
