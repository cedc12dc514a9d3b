"""Threshold tables, rule-of-thumb audits, printable reference sheets and wiki pages.

- :func:`threshold_table`: the minimum n (:meth:`atlas.Atlas.min_n`) for each tolerance and p.
- :func:`rule_audit`: for each rule of thumb (an expression in n, p and q, see
  :mod:`atlas.rules`), method and metric, the worst error the rule admits on the atlas grid,
  where it happens, and the share of the rule's cells that meet each tolerance.
- :func:`write_sheet`: a multi-page PDF: maps, tables, audit, definitions, provenance, caution.
- :func:`write_wiki`: ``index.html`` and ``index.md`` with SVG charts beside them; the page
  opens offline (no scripts, no external addresses).

Every file is written to a temporary name in its directory and renamed when complete.
"""

import csv
import html
import io
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from atlas import charts, cube
from atlas.engine import METRICS, check_metric
from atlas.rules import CLASSIC_RULES, parse_rule, rule_name

TABLE_TOLS = (0.01, 0.005, 0.001, 0.0001)
TABLE_PS = (0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.5)
AUDIT_TOLS = (0.01, 0.005, 0.001)
TABLE_FORMATS = ("csv", "md", "json")
AUDIT_FORMATS = ("md", "json")
DEFINITIONS = (
    ("Model", "X ~ Bin(n, p), q = 1 − p, μ = np, σ = √(npq); F(k) = P(X ≤ k), F(−1) = 0."),
    ("Approximation", "Each method gives G(k), an estimate of P(X ≤ k) at every integer "
     "k = −1..n; an interval probability is approximated by P(a ≤ X ≤ b) ≈ G(b) − G(a − 1)."),
    ("Interval error", "W(n, p) = max over 0 ≤ a ≤ b ≤ n of |P(a ≤ X ≤ b) − (G(b) − G(a − 1))| "
     "= max D − min D, with D(k) = F(k) − G(k) on k = −1..n (the metric 'interval')."),
    ("CDF error", "max over 0 ≤ k ≤ n of |F(k) − G(k)| (the metric 'cdf')."),
    ("Minimum n", "min_n(p, tol): the smallest n of the atlas grid such that the error is at "
     "most tol at that n and at every larger grid n."),
    ("Rule audit", "For a rule such as np ≥ 5 and nq ≥ 5: the largest error over the grid cells "
     "(n, p) the rule admits, where it occurs, and the share of those cells within each "
     "tolerance. Shares count grid cells, so they depend on the grid's density."),
)  # fmt: skip


def _dataset(atlas):
    return charts._dataset(atlas)


def _as_atlas(atlas):
    """An Atlas for the query API (a Dataset is wrapped)."""
    if hasattr(atlas, "min_n"):
        return atlas
    from atlas.query import Atlas

    return Atlas(_dataset(atlas))


def _where(atlas):
    """The atlas file's name (not its directory, which is the machine's business)."""
    path = getattr(atlas, "path", None)
    return Path(path).name if path is not None else "(in memory)"


def save_text(path, data):
    """Write text (UTF-8) or bytes to ``path`` atomically: a temporary file in the same
    directory, renamed over the target when complete.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    FileNotFoundError
        If the target's directory does not exist.
    """
    path = Path(path)
    if not path.parent.is_dir():
        raise FileNotFoundError(f"`path` is in a directory that does not exist: {str(path)!r}.")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        if isinstance(data, str):
            tmp.write_text(data, encoding="utf-8", newline="")
        else:
            tmp.write_bytes(data)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def _numbers(values, name, *, low=0.0, high=1.0):
    """A non-empty tuple of floats in the open interval (low, high)."""
    if isinstance(values, (int, float, np.number)):
        values = (values,)
    try:
        out = tuple(float(v) for v in values)
    except (TypeError, ValueError):
        raise ValueError(
            f"`{name}` must be a sequence of numbers in ({low:g}, {high:g}); got {values!r}."
        ) from None
    if not out:
        raise ValueError(f"`{name}` must hold at least one number; got an empty sequence.")
    for v in out:
        if not (low < v < high):
            raise ValueError(f"`{name}` must hold numbers in ({low:g}, {high:g}); got {v!r}.")
    return out


def _check_format(fmt, options):
    return charts._check_choice(fmt, "format", options)


def _fmt_error(x):
    return "—" if x is None else f"{x:.3g}"


def _fmt_p(x):
    return f"{x:.6g}"


_SUPERSCRIPTS = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")


def _compact_n(n):
    """100,000,000 as 10⁸ (a power of ten from 10⁵ up), else with thousands separators."""
    exponent = round(math.log10(n)) if n > 0 else 0
    if exponent >= 5 and 10**exponent == n:
        return "10" + str(exponent).translate(_SUPERSCRIPTS)
    return f"{n:,}"


def _fmt_share(x):
    return "—" if x is None else f"{100 * x:.1f}%"


# ---- threshold tables ----------------------------------------------------------------------


@dataclass(frozen=True)
class ThresholdTable:
    """The minimum n for each p (rows) and tolerance (columns).

    Attributes
    ----------
    method, metric : str
    tols : tuple of float
    ps : tuple of float
    min_n : tuple of tuple
        ``min_n[i][j]`` for ``ps[i]`` and ``tols[j]``: an int, or None when even the largest n of
        the grid fails.
    n_max : int
        The largest n of the atlas grid.
    dense_n : int
        Up to this n the grid holds every integer, and a minimum n there is exact for every
        integer; beyond it only grid n are checked.
    provenance : str
        :func:`atlas.charts.provenance_line` of the atlas.
    """

    method: str
    metric: str
    tols: tuple
    ps: tuple
    min_n: tuple
    n_max: int
    dense_n: int
    provenance: str

    def title(self):
        return f"Minimum n for {self.method}, {self.metric} error"

    def _cell(self, value):
        if value is None:
            return f"> {_compact_n(self.n_max)}"
        return f"{value:,}" + (" †" if value > self.dense_n else "")

    def notes(self):
        """The footnotes of the table, as a list of sentences."""
        return [
            f"Each entry is the smallest n of the atlas grid from which on the worst-case "
            f"{self.metric} error of {self.method} stays within the tolerance "
            f"({charts.METRIC_FORMULAS[self.metric]}).",
            f"'> {_compact_n(self.n_max)}': not reached within the grid (n up to {self.n_max:,}).",
            f"†: beyond n = {self.dense_n:,} only the grid's n are checked, not every integer.",
        ]

    def to_rows(self):
        """Header and rows of display strings (for the sheet and the wiki)."""
        header = ["p"] + [f"tol {charts._format_level(t)}" for t in self.tols]
        rows = [
            [_fmt_p(p)] + [self._cell(v) for v in values]
            for p, values in zip(self.ps, self.min_n, strict=True)
        ]
        return header, rows

    def to_csv(self):
        """CSV: a column ``p`` and one column per tolerance; an empty cell for None."""
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["p"] + [f"tol={t:g}" for t in self.tols])
        for p, values in zip(self.ps, self.min_n, strict=True):
            writer.writerow([repr(p)] + ["" if v is None else v for v in values])
        return buffer.getvalue()

    def to_markdown(self):
        """A Markdown table with its title and footnotes."""
        header, rows = self.to_rows()
        lines = [f"### {self.title()}", "", _md_table(header, rows, align="r"), ""]
        lines += [f"- {note}" for note in self.notes()]
        return "\n".join(lines) + "\n"

    def to_json(self):
        """JSON: the parameters, ``min_n`` as a list of rows (null for None) and provenance."""
        return (
            json.dumps(
                {
                    "method": self.method,
                    "metric": self.metric,
                    "definition": charts.METRIC_FORMULAS[self.metric],
                    "tols": list(self.tols),
                    "ps": list(self.ps),
                    "min_n": [list(row) for row in self.min_n],
                    "n_max": self.n_max,
                    "dense_n": self.dense_n,
                    "atlas": self.provenance,
                },
                indent=2,
                ensure_ascii=False,
            )
            + "\n"
        )

    def render(self, fmt):
        """The table as ``"csv"``, ``"md"`` or ``"json"`` text."""
        _check_format(fmt, TABLE_FORMATS)
        return {"csv": self.to_csv, "md": self.to_markdown, "json": self.to_json}[fmt]()


def threshold_table(atlas, tols=TABLE_TOLS, ps=TABLE_PS, *, method="normal_cc",
                    metric="interval"):  # fmt: skip
    """The minimum n for each tolerance and p, from :meth:`atlas.Atlas.min_n`.

    Parameters
    ----------
    atlas : Atlas
        An opened atlas.
    tols : sequence of float, optional
        Tolerances in (0, 1); default (0.01, 0.005, 0.001, 0.0001).
    ps : sequence of float, optional
        Success probabilities in (0, 1); default (0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.5). A p
        off the atlas's p axis is computed exactly by the engine over the grid's n.
    method : str, optional
        Default ``"normal_cc"``.
    metric : {"interval", "cdf"}, optional

    Returns
    -------
    ThresholdTable
        With ``to_csv``, ``to_markdown`` and ``to_json``.

    Raises
    ------
    ValueError
        For tolerances or p outside (0, 1), an unknown method or metric.

    Examples
    --------
    >>> from atlas import Atlas, build_atlas
    >>> at = Atlas(build_atlas(n="1:40", p="0.5", methods="normal_cc", progress=False))
    >>> threshold_table(at, [0.01], [0.5]).min_n  # W(5, 1/2) = 0.01114 > 0.01 >= W(6..40, 1/2)
    ((6,),)
    """
    tols = _numbers(tols, "tols")
    ps = _numbers(ps, "ps")
    check_metric(metric)
    atlas = _as_atlas(atlas)
    values = tuple(
        tuple(atlas.min_n(p, tol, method=method, metric=metric) for tol in tols) for p in ps
    )
    return ThresholdTable(
        method=method,
        metric=metric,
        tols=tols,
        ps=ps,
        min_n=values,
        n_max=int(atlas.n[-1]),
        dense_n=int(atlas.dense_n),
        provenance=charts.provenance_line(atlas),
    )


# ---- rule audits ---------------------------------------------------------------------------


@dataclass(frozen=True)
class AuditRow:
    """One rule, method and metric of a :class:`RuleAudit`.

    Attributes
    ----------
    rule : str
        The expression as written (``"n*p >= 5 and n*q >= 5"``).
    name : str
        Its textbook name (``"np >= 5 and nq >= 5"``), or the expression.
    method, metric : str
    cells : int
        Grid cells (n, p) the rule admits.
    worst_error : float or None
        The largest error over those cells; None if the rule admits none.
    worst_n : int or None
    worst_p : float or None
        The cell of the worst error (the first in (n, p) order on a tie).
    shares : tuple of float or None
        For each tolerance of the audit, the share of the rule's cells with error <= tol.
    """

    rule: str
    name: str
    method: str
    metric: str
    cells: int
    worst_error: object
    worst_n: object
    worst_p: object
    shares: tuple

    def as_dict(self, tols):
        out = {
            "rule": self.rule,
            "name": self.name,
            "method": self.method,
            "metric": self.metric,
            "cells": self.cells,
            "worst_error": self.worst_error,
            "worst_n": self.worst_n,
            "worst_p": self.worst_p,
        }
        out["share_within"] = {f"{t:g}": s for t, s in zip(tols, self.shares, strict=True)}
        return out


@dataclass(frozen=True)
class RuleAudit:
    """The worst error each rule of thumb admits on the atlas grid.

    Attributes
    ----------
    rows : tuple of AuditRow
        In the order rule, method, metric.
    tols : tuple of float
    grid_cells : int
        Cells of the atlas grid (len(n) x len(p)).
    provenance : str
    """

    rows: tuple
    tols: tuple
    grid_cells: int
    provenance: str

    def header(self):
        return ["rule", "method", "metric", "cells", "worst error", "at n", "at p"] + [
            f"≤ {charts._format_level(t)}" for t in self.tols
        ]

    def to_rows(self, rows=None):
        """Display strings for the given rows (all by default)."""
        out = []
        for row in self.rows if rows is None else rows:
            out.append(
                [
                    row.name,
                    row.method,
                    row.metric,
                    f"{row.cells:,}",
                    _fmt_error(row.worst_error),
                    "—" if row.worst_n is None else f"{row.worst_n:,}",
                    "—" if row.worst_p is None else f"{row.worst_p:.4g}",
                ]
                + [_fmt_share(s) for s in row.shares]
            )
        return out

    def notes(self):
        return [
            "worst error: the largest error over the grid cells (n, p) the rule admits; "
            "at n, at p: where it occurs.",
            "≤ tol: the share of the rule's grid cells whose error is within tol "
            f"(of {self.grid_cells:,} grid cells in all; shares count cells, so they follow the "
            "grid's density).",
        ]

    def to_markdown(self):
        """A Markdown table with its notes."""
        lines = ["### Rules of thumb: the worst error each admits", ""]
        lines += [_md_table(self.header(), self.to_rows(), align="lllrrrr" + "r" * len(self.tols))]
        lines += [""] + [f"- {note}" for note in self.notes()]
        return "\n".join(lines) + "\n"

    def to_json(self):
        """JSON: the tolerances, one object per row, and provenance."""
        return (
            json.dumps(
                {
                    "tols": list(self.tols),
                    "grid_cells": self.grid_cells,
                    "rows": [row.as_dict(self.tols) for row in self.rows],
                    "atlas": self.provenance,
                },
                indent=2,
                ensure_ascii=False,
            )
            + "\n"
        )

    def render(self, fmt):
        """The audit as ``"md"`` or ``"json"`` text."""
        _check_format(fmt, AUDIT_FORMATS)
        return self.to_markdown() if fmt == "md" else self.to_json()


def rule_audit(atlas, rules=None, *, methods=None, metrics=METRICS, tols=AUDIT_TOLS):
    """Audit rules of thumb against the atlas: the worst error each admits on the grid.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    rules : sequence of str, optional
        Rules as expressions in n, p and q (see :mod:`atlas.rules`); default the classic ones,
        :data:`atlas.rules.CLASSIC_RULES`.
    methods : sequence of str, optional
        Methods of the atlas (default all).
    metrics : sequence of str, optional
        Default ("interval", "cdf").
    tols : sequence of float, optional
        Tolerances in (0, 1) for the shares; default (0.01, 0.005, 0.001).

    Returns
    -------
    RuleAudit

    Raises
    ------
    ValueError
        For a rule the parser refuses, a method the atlas does not hold, a bad metric or tol.

    Notes
    -----
    For a rule R, method m and metric e: worst = max over grid cells (n, p) with R(n, p) of
    e_m(n, p); share(tol) = #{cells of R with e_m <= tol} / #{cells of R}.

    Examples
    --------
    >>> from atlas import build_atlas
    >>> ds = build_atlas(n="10,20,40", p="0.5", methods="normal_cc", progress=False)
    >>> row = rule_audit(ds, ["n*p >= 5 and n*q >= 5"], metrics=["interval"]).rows[0]
    >>> row.cells, row.worst_n, round(row.worst_error, 6)  # W(10, 1/2), REFERENCES.md
    (3, 10, 0.005372)
    """
    ds = _dataset(atlas)
    if isinstance(rules, str):
        rules = (rules,)
    parsed = [parse_rule(r) for r in (CLASSIC_RULES if rules is None else rules)]
    if not parsed:
        raise ValueError("`rules` must hold at least one rule; got an empty sequence.")
    methods = charts._methods(ds) if methods is None else tuple(methods)
    for m in methods:
        charts.check_atlas_method(ds, m, "methods")
    metrics = tuple(check_metric(x) for x in ((metrics,) if isinstance(metrics, str) else metrics))
    tols = _numbers(tols, "tols")
    n = np.asarray(ds["n"].values, dtype=np.int64)
    p = np.asarray(ds["p"].values, dtype=np.float64)
    masks = [rule(n[:, None], p[None, :]) for rule in parsed]
    rows = []
    errors = {}
    for rule, mask in zip(parsed, masks, strict=True):
        cells = int(mask.sum())
        for method in methods:
            for metric in metrics:
                key = (method, metric)
                if key not in errors:
                    errors[key] = charts.errors_on_grid(ds, method, metric)
                rows.append(_audit_row(rule, method, metric, mask, cells, errors[key], n, p, tols))
    return RuleAudit(tuple(rows), tols, int(n.size * p.size), charts.provenance_line(ds))


def _audit_row(rule, method, metric, mask, cells, values, n, p, tols):
    if cells == 0:
        return AuditRow(rule.text, rule_name(rule), method, metric, 0, None, None, None,
                        tuple(None for _ in tols))  # fmt: skip
    admitted = np.where(mask, values, -np.inf)
    admitted = np.where(np.isnan(admitted), np.inf, admitted)  # a NaN cell counts as worst
    flat = int(np.argmax(admitted))  # the first in (n, p) order on a tie
    i, j = np.unravel_index(flat, values.shape)
    inside = values[mask]
    shares = tuple(float(np.count_nonzero(inside <= t)) / cells for t in tols)
    return AuditRow(rule.text, rule_name(rule), method, metric, cells,
                    float(values[i, j]), int(n[i]), float(p[j]), shares)  # fmt: skip


# ---- Markdown and HTML pieces --------------------------------------------------------------


def _md_escape(text):
    return str(text).replace("|", "\\|")


def _md_table(header, rows, *, align="l"):
    widths = len(header)
    spec = (align * widths)[:widths] if len(align) == 1 else align
    rule_line = ["---:" if a == "r" else ":---" for a in spec]
    lines = ["| " + " | ".join(_md_escape(h) for h in header) + " |",
             "| " + " | ".join(rule_line) + " |"]  # fmt: skip
    lines += ["| " + " | ".join(_md_escape(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


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
            cells.append(f"<td{cls}>{html.escape(str(cell))}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


# ---- the printable sheet -------------------------------------------------------------------


def _headline(ds, methods):
    held = charts._methods(ds)
    if methods is None:
        chosen = [m for m in charts.HEADLINE_METHODS if m in held] or list(held[:2])
    else:
        chosen = [charts.check_atlas_method(ds, m, "methods") for m in methods]
    if not chosen:
        raise ValueError("`methods` must name at least one method; got an empty sequence.")
    return tuple(chosen)


PAGE_SIZE = (10.0, 7.4)  # inches, landscape; the maps use the same size
_CHAR_WIDTH = 0.55  # DejaVu Sans: mean advance of a character, in em (monospace: 0.6)
_TOP, _BOTTOM = 0.89, 0.11  # the body of a text page, as fractions of its height


def _text_page(title):
    mpl = charts._mpl()
    fig = mpl.figure.Figure(figsize=PAGE_SIZE, dpi=100)
    fig.text(0.04, 0.955, title, fontsize=15, weight="bold", va="top", gid="title")
    return fig


class _Flow:
    """Paragraphs set from the top of a text page down, a new page when one is full."""

    def __init__(self, title):
        self.title = title
        self.pages = []
        self._new_page()

    def _new_page(self):
        suffix = " (continued)" if self.pages else ""
        self.fig = _text_page(self.title + suffix)
        self.pages.append(self.fig)
        self.y = _TOP

    def para(self, text, *, left=0.04, right=0.96, size=9.5, mono=False, term=None, gap=0.012,
             **style):  # fmt: skip
        import textwrap

        width_pt = (right - left) * PAGE_SIZE[0] * 72
        chars = max(20, int(width_pt / (size * (0.63 if mono else _CHAR_WIDTH))))
        body = "\n".join(textwrap.fill(part, chars) if part else "" for part in text.split("\n"))
        lines = body.count("\n") + 1
        height = lines * size * 1.35 / (72 * PAGE_SIZE[1])
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


def _page_marks(fig, ds, page, pages):
    """The provenance and caution at the foot of a page, its number at the top right."""
    import textwrap

    lines = [charts.provenance_line(ds), "Caution: " + cube.CAUTION]
    wrapped = [w for line in lines for w in textwrap.wrap(line, 165)]
    fig.text(0.04, 0.02, "\n".join(wrapped), fontsize=7.5, color="#333333", va="bottom",
             linespacing=1.35, gid="footer")  # fmt: skip
    fig.text(0.985, 0.985, f"page {page} of {pages}", fontsize=8, ha="right", va="top",
             color="#333333", gid="page-number")  # fmt: skip


def _wrap(text, size, width=0.92):
    import textwrap

    return textwrap.fill(text, int(width * PAGE_SIZE[0] * 72 / (size * _CHAR_WIDTH)))


def _tables_page(tables):
    fig = _text_page("Minimum n for each tolerance")
    note = (
        "The smallest grid n from which on the worst-case error stays within the tolerance. "
        f"'> N': not reached on the grid (n up to {tables[0].n_max:,}); †: beyond "
        f"n = {tables[0].dense_n:,} only the grid's n are checked, not every integer."
    )
    fig.text(0.04, 0.905, _wrap(note, 9), fontsize=9, va="top", linespacing=1.35)
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


def _audit_pages(audit, per_page=22):
    header = audit.header()
    rows = audit.to_rows()
    shares = len(audit.tols)
    widths = [0.2, 0.13, 0.075, 0.075, 0.09, 0.09, 0.1] + [0.24 / shares] * shares
    pages = []
    for start in range(0, max(len(rows), 1), per_page):
        chunk = rows[start : start + per_page]
        fig = _text_page("Rules of thumb: the worst error each admits"
                         + (" (continued)" if start else ""))  # fmt: skip
        fig.text(0.04, 0.905, _wrap(" ".join(audit.notes()), 9), fontsize=9, va="top",
                 linespacing=1.35)  # fmt: skip
        height = min(0.70, 0.03 * (len(chunk) + 1))
        _draw_table(fig, (0.04, 0.80 - height, 0.92, height), header, chunk, col_widths=widths,
                    text_columns=3)  # fmt: skip
        pages.append(fig)
    return pages


def _definitions_pages(ds, where):
    flow = _Flow("Definitions")
    for term, text in DEFINITIONS:
        flow.para(text, left=0.2, term=term)
    flow.y -= 0.01
    flow.para("The methods", size=11, weight="bold")
    for method in charts._methods(ds):
        label = charts.METHOD_LABELS.get(method, "")
        formula = cube.METHOD_DESCRIPTIONS.get(method, "")
        flow.para(f"{label}; G(k) = {formula}", left=0.2, term=method, size=9, gap=0.006)
    pages = flow.pages
    flow = _Flow("Provenance and caution")
    flow.para("The atlas these pages were drawn from (its NetCDF global attributes):", size=9.5)
    entries = [("file", where)] + [(k, str(v)) for k, v in ds.attrs.items() if k != "comment"]
    for key, value in entries:
        if key in ("n_spec", "p_spec") and len(value) > 150:
            value = value[:150] + " …"
        flow.para(value, left=0.2, term=key, size=8, mono=True, gap=0.008)
    flow.y -= 0.02
    flow.para(cube.CAUTION, left=0.2, term="Caution", size=10, color="#8B0000", gid="caution")
    return pages + flow.pages


def sheet_figures(atlas, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS,
                  audit_tols=AUDIT_TOLS):  # fmt: skip
    """The pages of the reference sheet, as a list of Figures (see :func:`write_sheet`)."""
    ds = _dataset(atlas)
    check_metric(metric)
    chosen = _headline(ds, methods)
    pages = [charts.error_map(ds, method=m, metric=metric) for m in chosen]
    tables = [threshold_table(atlas, tols, ps, method=m, metric=x) for m in chosen
              for x in METRICS]  # fmt: skip
    pages.append(_tables_page(tables))
    pages += _audit_pages(rule_audit(ds, methods=chosen, tols=audit_tols))
    pages += _definitions_pages(ds, _where(atlas))
    for k, fig in enumerate(pages, start=1):
        if k > len(chosen):  # the maps carry their own footer
            _page_marks(fig, ds, k, len(pages))
        else:
            fig.text(0.985, 0.985, f"page {k} of {len(pages)}", fontsize=8, ha="right",
                     va="top", color="#333333", gid="page-number")  # fmt: skip
    return pages


def write_sheet(atlas, path, *, methods=None, metric="interval", tols=TABLE_TOLS, ps=TABLE_PS):
    """Write the printable multi-page PDF reference sheet, atomically.

    Pages: an error map for each headline method (normal_cc and edgeworth_cc when the atlas
    holds them), the threshold tables (both metrics), the rule audit, then the definitions,
    the provenance (the atlas's attributes) and the caution.

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

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ValueError
        If ``path`` does not end in ``.pdf``, or for bad methods, metric, tols or ps.
    FileNotFoundError
        If the target's directory does not exist.
    """
    mpl = charts._mpl()
    from matplotlib.backends.backend_pdf import PdfPages

    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"`path` is in a directory that does not exist: {str(path)!r}.")
    pages = sheet_figures(atlas, methods=methods, metric=metric, tols=tols, ps=ps)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        metadata = {"Title": "approx-atlas reference sheet", "CreationDate": None}
        with mpl.rc_context({"pdf.fonttype": 42}), PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                pdf.savefig(fig, dpi=charts.PNG_DPI)  # the rasterized colour fills, for print
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


# ---- the wiki page -------------------------------------------------------------------------

_CSS = """
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; margin: 2em auto;
       max-width: 70em; padding: 0 1em; color: #111; line-height: 1.45; }
h1 { font-size: 1.7em; } h2 { margin-top: 2em; border-bottom: 1px solid #999; }
figure { margin: 1.5em 0; } figure img { width: 100%; height: auto; border: 1px solid #ccc; }
figcaption { font-size: 0.9em; color: #333; }
table { border-collapse: collapse; margin: 0.8em 0 0.4em; font-size: 0.92em; }
caption { text-align: left; font-weight: bold; padding-bottom: 0.3em; }
th, td { border: 1px solid #999; padding: 0.25em 0.6em; }
th { background: #e6e6e6; } td.num { text-align: right; font-variant-numeric: tabular-nums; }
.caution { border: 2px solid #8b0000; padding: 0.6em 1em; background: #fff4f4; }
.notes { font-size: 0.9em; color: #333; } code { font-size: 0.95em; }
dl dt { font-weight: bold; margin-top: 0.5em; }
@media print { figure { page-break-inside: avoid; } }
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
                f"{a} and {b} on one colour scale",
                lambda: charts.compare_map(ds, method=a, method2=b, metric=metric),
            )
        )
        items.append(
            (
                f"gain_{b}_over_{a}_{metric}.svg",
                f"How many times smaller the error of {b} is than that of {a}",
                lambda: charts.gain_map(ds, method=b, method2=a, metric=metric),
            )
        )
    if len(charts._methods(ds)) >= 2:
        items.append(
            (
                f"best_{metric}.svg",
                "The method with the smallest worst-case error",
                lambda: charts.best_method_map(ds, metric=metric),
            )
        )
    return items


def write_wiki(atlas, directory, *, methods=None, metric="interval", tols=TABLE_TOLS,
               ps=TABLE_PS):  # fmt: skip
    """Write a static wiki page: ``index.html`` and ``index.md`` with SVG charts beside them.

    The page has the charts, the threshold tables, the rule audit, the definitions, the
    provenance and the caution; it links only to files in ``directory`` by relative names, holds
    no script and no external address, and so opens offline.

    Parameters
    ----------
    atlas : Atlas
    directory : str or os.PathLike
        Created if missing (its parent must exist).
    methods, metric, tols, ps
        As for :func:`write_sheet`.

    Returns
    -------
    list of pathlib.Path
        The files written: the SVG charts, ``index.md`` and ``index.html``.

    Raises
    ------
    ValueError
        For bad methods, metric, tols or ps.
    FileNotFoundError
        If the parent of ``directory`` does not exist.
    """
    ds = _dataset(atlas)
    check_metric(metric)
    chosen = _headline(ds, methods)
    directory = Path(directory)
    if not directory.parent.is_dir():
        raise FileNotFoundError(
            f"`directory` is in a directory that does not exist: {str(directory)!r}."
        )
    directory.mkdir(exist_ok=True)
    tables = [threshold_table(atlas, tols, ps, method=m, metric=x) for m in chosen
              for x in METRICS]  # fmt: skip
    audit = rule_audit(ds, methods=chosen)
    written = []
    figures = []
    for name, caption, make in _wiki_charts(ds, chosen, metric):
        written.append(charts.save_figure(make(), directory / name))
        figures.append((name, caption))
    provenance = charts.provenance_line(ds)
    where = _where(atlas)
    written.append(
        save_text(
            directory / "index.md", _wiki_markdown(ds, figures, tables, audit, provenance, where)
        )
    )
    written.append(
        save_text(
            directory / "index.html", _wiki_html(ds, figures, tables, audit, provenance, where)
        )
    )
    return written


def _wiki_markdown(ds, figures, tables, audit, provenance, where):
    out = ["# approx-atlas: where the approximations to the binomial are safe", ""]
    out += [f"> **Caution.** {cube.CAUTION}", ""]
    out += [f"_{provenance}_", "", "## Charts", ""]
    for name, caption in figures:
        out += [f"![{caption}]({name})", "", f"*{caption}.*", ""]
    out += ["## Minimum n for each tolerance", ""]
    for table in tables:
        out.append(table.to_markdown())
    out += ["## Rules of thumb", "", audit.to_markdown(), "## Definitions", ""]
    out += [f"- **{term}.** {text}" for term, text in DEFINITIONS]
    out += [""] + [
        f"- `{m}`: {charts.METHOD_LABELS.get(m, m)}; G(k) = {cube.METHOD_DESCRIPTIONS.get(m, '')}"
        for m in charts._methods(ds)
    ]
    out += ["", "## Provenance", "", f"- file: `{where}`"]
    out += [f"- {k}: {_md_escape(v)}" for k, v in ds.attrs.items()]
    out += ["", "## Caution", "", cube.CAUTION, ""]
    return "\n".join(out)


def _wiki_html(ds, figures, tables, audit, provenance, where):
    e = html.escape
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           "<title>approx-atlas: where the approximations to the binomial are safe</title>",
           f"<style>{_CSS}</style>", "</head>", "<body>",
           "<h1>approx-atlas: where the approximations to the binomial are safe</h1>",
           f'<p class="caution"><strong>Caution.</strong> {e(cube.CAUTION)}</p>',
           f'<p class="notes">{e(provenance)}</p>', "<h2>Charts</h2>"]  # fmt: skip
    for name, caption in figures:
        out.append(f'<figure><img src="{e(name)}" alt="{e(caption)}">'
                   f"<figcaption>{e(caption)}.</figcaption></figure>")  # fmt: skip
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
        f"<li><code>{e(m)}</code>: {e(charts.METHOD_LABELS.get(m, m))}; G(k) = "
        f"{e(cube.METHOD_DESCRIPTIONS.get(m, ''))}</li>"
        for m in charts._methods(ds)
    ]
    out.append("</ul><h2>Provenance</h2><dl>")
    out.append(f"<dt>file</dt><dd><code>{e(where)}</code></dd>")
    out += [f"<dt>{e(k)}</dt><dd>{e(str(v))}</dd>" for k, v in ds.attrs.items()]
    out.append("</dl>")
    out.append(f'<h2>Caution</h2><p class="caution">{e(cube.CAUTION)}</p>')
    out += ["</body>", "</html>", ""]
    return "\n".join(out)


__all__ = [
    "AUDIT_TOLS",
    "AuditRow",
    "RuleAudit",
    "TABLE_PS",
    "TABLE_TOLS",
    "ThresholdTable",
    "rule_audit",
    "save_text",
    "sheet_figures",
    "threshold_table",
    "write_sheet",
    "write_wiki",
]
