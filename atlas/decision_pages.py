"""A page for tail p-values and tests: a wiki page (HTML and Markdown with SVG charts) and a
printable PDF, computed on demand.

- :func:`write_decision_page`: ``index.html`` and ``index.md`` with the SVG charts beside them,
  opening offline (no script, no external address).
- :func:`write_decision_sheet`: the same content as a multi-page PDF.

The page holds the definitions (the contract of :mod:`atlas.tails` and :mod:`atlas.sizes`), the
maps of the tail relative error, the size of the invented inspection lot's test against alpha,
the minimum-n tables and the rule audits, with the caution (:func:`section`); the main sheet and
wiki page (:mod:`atlas.sheets`) compose it with the others, set by :mod:`atlas.sections`.
Nothing reads an atlas file.
"""

import functools
from pathlib import Path

from atlas import __version__
from atlas.approximations import check_method
from atlas.decision_charts import size_chart, tail_error_maps
from atlas.decision_rules import size_rule_audit, tail_rule_audit
from atlas.decision_search import N_MAX
from atlas.decision_tables import size_table, tail_table
from atlas.sections import Chart, Section, Table, write_page, write_pdf

__all__ = ["DEFINITIONS", "section", "write_decision_page", "write_decision_sheet"]

KEY = "tests"
TITLE = "Tail p-values and tests: how far the shortcut goes wrong"
INTRO = (
    "An absolute error misleads where the approximation decides something: a tail of 0.002 "
    "approximated as 0.006 is off by 0.004 but three times too large. This section measures "
    "the error of what a p-value shortcut, a control limit or a test computes.",
)
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


@functools.cache
def section(method="normal_cc", *, n_max=N_MAX):
    """The section on tail p-values and tests, as content (:class:`atlas.sections.Section`).

    The maps of the tail relative error, the size of the invented lot's test against alpha,
    the minimum-n tables (every integer n up to ``n_max``), the rule audits, the definitions.
    Nothing reads an atlas file: every number is computed on demand (about a minute and a half
    at ``n_max`` = 10^5, most of it the tail table); kept once made, per argument.

    Parameters
    ----------
    method : str, optional
        One of :data:`atlas.METHODS`.
    n_max : int, optional
        The largest n of the minimum-n tables.

    Returns
    -------
    atlas.sections.Section
    """
    check_method(method)
    n, p0 = DEMO
    charts = (
        Chart("decision_tail_maps.svg", f"Tail relative error of {method}, one panel per level α",
              lambda **size: tail_error_maps(method=method, **size)),
        Chart("decision_size_lot.svg",
              f"Invented lot: n = {n}, claimed rate p0 = {p0}; upper one-sided test, size "
              "against α",
              lambda **size: size_chart(n, p0, method=method, alternative="greater", **size)),
    )  # fmt: skip
    tables = []
    for table in (tail_table(method=method, n_max=n_max),
                  size_table(method=method, alternative="greater", n_max=n_max)):  # fmt: skip
        header, rows = table.to_rows()
        header[0] = f"p \\ {table.column}"
        tables.append(Table(table.title, tuple(header), tuple(tuple(r) for r in rows),
                            tuple(table.notes())))  # fmt: skip
    audits = (
        ("Rules of thumb: the tail relative error they admit", tail_rule_audit(method=method)),
        ("Rules of thumb: the upper one-sided test's size they admit",
         size_rule_audit(method=method, alternative="greater")),
    )  # fmt: skip
    lists = tuple((f"{title} (grid: {rows[0].grid})", tuple(r.explain() for r in rows))
                  for title, rows in audits)  # fmt: skip
    return Section(KEY, TITLE, intro=INTRO, definitions=DEFINITIONS, charts=charts,
                   tables=tuple(tables), lists=lists, provenance=_provenance())  # fmt: skip


def _provenance():
    return f"Computed exactly on demand by approx-atlas {__version__}; no atlas file is read."


def write_decision_page(directory, *, method="normal_cc", overwrite=True):
    """Write the section alone as a page: ``index.html``, ``index.md`` and the SVG charts,
    into ``directory`` (the main wiki page holds the same section, :mod:`atlas.sheets`).

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
    return write_page(section(method), directory, overwrite=overwrite)


def write_decision_sheet(path, *, method="normal_cc"):
    """Write the section alone as a PDF: definitions, charts, tables and rule audits (the main
    sheet holds the same pages, :mod:`atlas.sheets`).

    Parameters
    ----------
    path : str or os.PathLike
        Ending in ``.pdf``; written under a temporary name and renamed when complete.
    method : str, optional

    Returns
    -------
    pathlib.Path
    """
    if Path(path).suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    return write_pdf(section(method), path)
