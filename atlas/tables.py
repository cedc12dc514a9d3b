"""Threshold tables and rule-of-thumb audits: the data, and their CSV, Markdown and JSON text.

- :func:`threshold_table`: the minimum n (:meth:`atlas.Atlas.min_n`) for each tolerance and p.
- :func:`rule_audit`: for each rule of thumb (an expression in n, p and q, see
  :mod:`atlas.rules`), method and metric, the worst error the rule admits on the atlas grid,
  where it happens, and the share of the rule's cells that meet each tolerance.

The printable sheet and the wiki page (:mod:`atlas.sheets`) set the same tables on paper and
in HTML.
"""

import csv
import io
import json
import math
from dataclasses import dataclass

import numpy as np

from atlas import figures
from atlas.engine import METRICS, check_metric
from atlas.figures import METRIC_FORMULAS, format_level, provenance_line
from atlas.notation import FLOAT64_DIGITS, error_digits, format_p, format_p_brief, rounded
from atlas.rules import AUDIT_RULES, parse_rule, rule_name, rule_source

TABLE_TOLS = (0.01, 0.005, 0.001, 0.0001)
TABLE_PS = (0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.5)
AUDIT_TOLS = (0.01, 0.005, 0.001)
TABLE_FORMATS = ("csv", "md", "json")
AUDIT_FORMATS = ("md", "json")


def _as_atlas(atlas):
    """An Atlas for the query API (a Dataset is wrapped)."""
    if hasattr(atlas, "min_n"):
        return atlas
    from atlas.query import Atlas

    return Atlas(figures.as_dataset(atlas))


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
    return figures.check_choice(fmt, "format", options)


def _fmt_error(x):
    return "—" if x is None else f"{x:.3g}"


def _fmt_p(x):
    return format_p(x)


_SUPERSCRIPTS = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")


def _compact_n(n):
    """100,000,000 as 10⁸ (a power of ten from 10⁵ up), else with thousands separators."""
    exponent = round(math.log10(n)) if n > 0 else 0
    if exponent >= 5 and 10**exponent == n:
        return "10" + str(exponent).translate(_SUPERSCRIPTS)
    return f"{n:,}"


def _fmt_share(x):
    return "—" if x is None else f"{100 * x:.1f}%"


def _json_text(record):
    """A record as indented JSON text (UTF-8 characters kept), ending in a newline."""
    return json.dumps(record, indent=2, ensure_ascii=False) + "\n"


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
        ``min_n[i][j]`` for ``ps[i]`` and ``tols[j]``: an int N such that the error is within the
        tolerance at every integer n >= N (:meth:`atlas.Atlas.threshold`), or None when the
        largest n examined fails.
    n_max : int
        The largest n of the atlas grid.
    dense_n : int
        Up to this n the grid holds every integer.
    provenance : str
        :func:`atlas.figures.provenance_line` of the atlas.
    """

    method: str
    metric: str
    tols: tuple
    ps: tuple
    min_n: tuple
    n_max: int
    dense_n: int
    provenance: str
    partial: tuple = ()  # (i, j) of entries not covered at every integer (see notes)
    bounded: tuple = ()  # (i, j) of entries covered only up to the atlas's end
    unresolved: tuple = ()  # (i, j) of entries decided within the accuracy of the exact side

    def title(self):
        return f"Minimum n for {self.method}, {self.metric} error"

    def basis(self, value, where=None):
        """What the entry at ``where`` = (i, j) rests on: ``"exact"``, ``"evaluated_only"``,
        ``"to_atlas_end"`` or ``"not_reached"`` (see :meth:`basis_meanings`)."""
        if value is None:
            return "not_reached"
        if where in self.unresolved:
            return "below_resolution"
        if where in self.partial:
            return "evaluated_only"
        return "to_atlas_end" if where in self.bounded else "exact"

    def basis_meanings(self):
        """The meaning of each basis code."""
        return {
            "exact": "every integer n from the entry on is within the tolerance: the grid's "
            "values, the engine at the integers where the error can still cross it, a proven "
            "bound on its growth between them, and a Berry-Esseen bound beyond",
            "evaluated_only": "no step bound for this method in some gaps above the entry; "
            "there only the n evaluated are checked",
            "to_atlas_end": f"every integer n from the entry to {self.n_max}, the atlas's end, "
            "is within the tolerance; no bound is established beyond it",
            "below_resolution": "the error at N - 1 exceeds the tolerance only by less than "
            "its accuracy (the resolution of the exact side): counted as failing, so N is "
            "conservative and the true minimum may be smaller",
            "not_reached": f"not reached: the error exceeds the tolerance at the atlas's end, "
            f"n = {self.n_max}",
        }

    def _cell(self, value, where=None):
        if value is None:
            return f"> {_compact_n(self.n_max)}"
        mark = " ‡" if where in self.partial else (" §" if where in self.bounded else "")
        if where in self.unresolved:
            mark += " ¶"
        return f"{value:,}{mark}"

    def notes(self):
        """The footnotes of the table, as a list of sentences."""
        notes = [
            f"Each entry N is the smallest n such that the worst-case {self.metric} error of "
            f"{self.method} is within the tolerance at every integer n >= N "
            f"({METRIC_FORMULAS[self.metric]}): the grid's values, the engine at the integers "
            "where the error can still cross the tolerance, a proven bound on its growth from "
            "one n to the next in between, and a Berry-Esseen bound beyond (atlas.thresholds).",
            f"'> {_compact_n(self.n_max)}': the error at n = {self.n_max:,}, the atlas's end, "
            "exceeds the tolerance.",
        ]
        if self.partial:
            notes.append("‡: no step bound for this method in some gaps above N; there only the "
                         "n evaluated are checked.")  # fmt: skip
        if self.bounded:
            notes.append(f"§: covered up to n = {self.n_max:,}, the atlas's end; no bound "
                         "is established beyond it.")  # fmt: skip
        if self.unresolved:
            notes.append("¶: below the resolution of the exact side: the error at N - 1 "
                         "exceeds the tolerance only by less than its accuracy; N is "
                         "conservative.")  # fmt: skip
        return notes

    def to_rows(self):
        """Header and rows of display strings (for the sheet and the wiki)."""
        header = ["p"] + [f"tol {format_level(t)}" for t in self.tols]
        rows = [
            [_fmt_p(p)] + [self._cell(v, (i, j)) for j, v in enumerate(values)]
            for i, (p, values) in enumerate(zip(self.ps, self.min_n, strict=True))
        ]
        return header, rows

    def to_csv(self):
        """CSV, one row per p and tolerance: ``p, tol, min_n, basis``.

        ``min_n`` is an integer, or ``> N`` (N the largest grid n) when not reached; ``basis``
        is ``exact``, ``evaluated_only``, ``to_atlas_end`` or ``not_reached``
        (:meth:`basis_meanings`).
        """
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["p", "tol", "min_n", "basis"])
        for i, (p, values) in enumerate(zip(self.ps, self.min_n, strict=True)):
            for j, (tol, v) in enumerate(zip(self.tols, values, strict=True)):
                shown = f"> {self.n_max}" if v is None else v
                writer.writerow([format_p(p), format_p(tol), shown, self.basis(v, (i, j))])
        return buffer.getvalue()

    def to_markdown(self):
        """A Markdown table with its title and footnotes."""
        header, rows = self.to_rows()
        lines = [f"### {self.title()}", "", markdown_table(header, rows, align="r"), ""]
        lines += [f"- {note}" for note in self.notes()]
        return "\n".join(lines) + "\n"

    def to_json(self):
        """JSON: the parameters, ``min_n`` as a list of rows (null when not reached), ``basis``
        beside it (rows of basis codes), their meanings, provenance."""
        return _json_text(
            {
                "method": self.method,
                "metric": self.metric,
                "definition": METRIC_FORMULAS[self.metric],
                "tols": list(self.tols),
                "ps": list(self.ps),
                "min_n": [list(row) for row in self.min_n],
                "basis": [
                    [self.basis(v, (i, j)) for j, v in enumerate(row)]
                    for i, row in enumerate(self.min_n)
                ],
                "basis_meanings": self.basis_meanings(),
                "n_max": self.n_max,
                "dense_n": self.dense_n,
                "every_integer": [
                    [(i, j) not in self.partial for j in range(len(self.tols))]
                    for i in range(len(self.ps))
                ],
                "beyond_the_end": [
                    [(i, j) not in self.bounded for j in range(len(self.tols))]
                    for i in range(len(self.ps))
                ],
                "atlas": self.provenance,
            }
        )

    def render(self, fmt):
        """The table as ``"csv"``, ``"md"`` or ``"json"`` text."""
        _check_format(fmt, TABLE_FORMATS)
        return {"csv": self.to_csv, "md": self.to_markdown, "json": self.to_json}[fmt]()


def threshold_table(atlas, tols=TABLE_TOLS, ps=TABLE_PS, *, method="normal_cc",
                    metric="interval"):  # fmt: skip
    """The minimum n for each tolerance and p, from :meth:`atlas.Atlas.threshold`.

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
    answers = [[atlas.threshold(p, tol, method=method, metric=metric, runs=False) for tol in tols]
               for p in ps]  # fmt: skip
    values = tuple(tuple(a.n for a in row) for row in answers)
    cells = [(i, j, a) for i, row in enumerate(answers) for j, a in enumerate(row) if a.n]
    return ThresholdTable(
        method=method,
        metric=metric,
        tols=tols,
        ps=ps,
        min_n=values,
        n_max=int(atlas.n[-1]),
        dense_n=int(atlas.dense_n),
        provenance=provenance_line(atlas),
        partial=tuple((i, j) for i, j, a in cells if not a.exact),
        bounded=tuple((i, j) for i, j, a in cells if a.exact and a.upto is not None),
        unresolved=tuple((i, j) for i, j, a in cells if not a.resolved),
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
    checked: object = None  # atlas.regions.RuleWorst when checked between grid points

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
        out["share_within"] = {format_p(t): s for t, s in zip(tols, self.shares, strict=True)}
        out["source"] = rule_source(self.rule)
        if self.checked is not None:
            out["checked"] = dict(self.checked.as_dict(), words=self.checked.checked())
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
    error_digits : int
        Significant digits of the atlas's errors: 7 for float32 storage, 17 for float64.
    """

    rows: tuple
    tols: tuple
    grid_cells: int
    provenance: str
    error_digits: int = FLOAT64_DIGITS

    def header(self):
        return ["rule", "method", "metric", "cells", "worst error", "at n", "at p"] + [
            f"≤ {format_level(t)}" for t in self.tols
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
                    _fmt_error(row.worst_error) + (" †" if _left_open(row) else ""),
                    "—" if row.worst_n is None else f"{row.worst_n:,}",
                    # a grid p such as 0.004987164074638706 would not fit the column
                    "—" if row.worst_p is None else format_p_brief(row.worst_p),
                ]
                + [_fmt_share(s) for s in row.shares]
            )
        return out

    def notes(self):
        between = next((r.checked for r in self.rows if r.checked is not None), None)
        if between is not None:
            first = [
                "worst error: the largest error found over every integer n and p of the atlas's "
                "ranges the rule admits: grid cells, the rule's boundary (the first admitted "
                f"integers n) at {between.p_checked} p ({between.p_refined} refined between grid "
                "p), and every larger admitted n at each grid p bounded by the one-step bound, "
                "with the engine in the gaps it does not certify, within a budget; p between "
                "those checked are not computed. ≈: p rounded to 4 digits; the JSON holds it "
                "whole.",
            ]
            if any(_left_open(r) for r in self.rows):
                first.append(
                    "†: integers between grid n left unchecked at some p (no step bound is "
                    "derived for the method, or the budget of engine evaluations spent): only the "
                    "n evaluated there count; the JSON lists them per row."
                )
        else:
            first = [
                "worst error: the largest error over the grid cells (n, p) the rule admits; "
                "at n, at p: where it occurs (≈: p rounded to 4 digits; the JSON holds it whole).",
            ]
        sources = [
            f"{rule_name(rule)}: {source}."
            for rule, source in dict.fromkeys((r.rule, rule_source(r.rule)) for r in self.rows)
            if source
        ]
        return first + [
            "≤ tol: the share of the rule's grid cells whose error is within tol "
            f"(of {self.grid_cells:,} grid cells in all; shares count cells, so they follow the "
            "grid's density).",
            "—: the rule admits no cell of the grid.",
            *sources,
        ]

    def to_markdown(self):
        """A Markdown table with its notes."""
        lines = ["### Rules of thumb: the worst error each admits", ""]
        align = "lllrrrr" + "r" * len(self.tols)
        lines += [markdown_table(self.header(), self.to_rows(), align=align)]
        lines += [""] + [f"- {note}" for note in self.notes()]
        return "\n".join(lines) + "\n"

    def to_json(self):
        """JSON: the tolerances, one object per row (errors to ``error_digits`` significant
        digits; null where the rule admits no cell), and provenance."""
        rows = [row.as_dict(self.tols) for row in self.rows]
        for row in rows:
            row["worst_error"] = rounded(row["worst_error"], self.error_digits)
        return _json_text(
            {
                "tols": list(self.tols),
                "grid_cells": self.grid_cells,
                "error_digits": self.error_digits,
                "rows": rows,
                "atlas": self.provenance,
            }
        )

    def render(self, fmt):
        """The audit as ``"md"`` or ``"json"`` text."""
        _check_format(fmt, AUDIT_FORMATS)
        return self.to_markdown() if fmt == "md" else self.to_json()


def _left_open(row):
    """Whether some integers between grid n are left unchecked for an audit row."""
    w = row.checked
    return w is not None and row.cells > 0 and (bool(w.open_gaps) or not w.bounded)


def rule_audit(atlas, rules=None, *, methods=None, metrics=METRICS, tols=AUDIT_TOLS, between=True):
    """Audit rules of thumb against the atlas: the worst error each admits on the grid.

    Parameters
    ----------
    atlas : Atlas or xarray.Dataset
    rules : sequence of str, optional
        Rules as expressions in n, p and q (see :mod:`atlas.rules`); default the classic ones,
        the skewness rule and the 3-sigma rule, :data:`atlas.rules.AUDIT_RULES`.
    methods : sequence of str, optional
        Methods of the atlas (default all).
    metrics : sequence of str, optional
        Default ("interval", "cdf").
    tols : sequence of float, optional
        Tolerances in (0, 1) for the shares; default (0.01, 0.005, 0.001).
    between : bool, optional
        True (default): the worst error over every integer n and p of the atlas's ranges the
        rule admits, checked as :func:`atlas.regions.rule_worst` says (``AuditRow.checked``
        says what was computed and which gaps, if any, are left unchecked); False: over the
        grid cells only. The shares count grid cells either way.

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
    ds = figures.as_dataset(atlas)
    if isinstance(rules, str):
        rules = (rules,)
    parsed = [parse_rule(r) for r in (AUDIT_RULES if rules is None else rules)]
    if not parsed:
        raise ValueError("`rules` must hold at least one rule; got an empty sequence.")
    methods = figures.atlas_methods(ds) if methods is None else tuple(methods)
    for m in methods:
        figures.check_atlas_method(ds, m, "methods")
    metrics = tuple(check_metric(x) for x in ((metrics,) if isinstance(metrics, str) else metrics))
    tols = _numbers(tols, "tols")
    n = np.asarray(ds["n"].values, dtype=np.int64)
    p = np.asarray(ds["p"].values, dtype=np.float64)
    masks = [rule(n[:, None], p[None, :]) for rule in parsed]
    rows = []
    errors = {(m, e): figures.errors_on_grid(ds, m, e) for m in methods for e in metrics}
    for rule, mask in zip(parsed, masks, strict=True):
        cells = int(mask.sum())
        found = {}
        if between:
            from atlas.regions import rule_worst

            for w in rule_worst(rule, n, p, errors, methods, metrics):
                found[(w.method, w.metric)] = w
        for method in methods:
            for metric in metrics:
                key = (method, metric)
                row = _audit_row(rule, method, metric, mask, cells, errors[key], n, p, tols)
                w = found.get(key)
                if w is not None and w.worst is not None:
                    row = AuditRow(row.rule, row.name, method, metric, cells, w.worst, w.n, w.p,
                                   row.shares, w)  # fmt: skip
                rows.append(row)
    precision = ds.attrs.get("error_precision", ds["interval_error"].dtype)
    return RuleAudit(tuple(rows), tols, int(n.size * p.size), provenance_line(ds),
                     error_digits(precision))  # fmt: skip


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


# ---- Markdown -------------------------------------------------------------------------------


def escape_markdown(text):
    """``text`` with its ``|`` escaped, for a Markdown table cell or list item."""
    return str(text).replace("|", "\\|")


def markdown_table(header, rows, *, align="l"):
    """A Markdown table; ``align`` is one letter per column ("l" or "r"), or one for all."""
    widths = len(header)
    spec = (align * widths)[:widths] if len(align) == 1 else align
    rule_line = ["---:" if a == "r" else ":---" for a in spec]
    lines = ["| " + " | ".join(escape_markdown(h) for h in header) + " |",
             "| " + " | ".join(rule_line) + " |"]  # fmt: skip
    lines += ["| " + " | ".join(escape_markdown(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


__all__ = [
    "AUDIT_FORMATS",
    "AUDIT_TOLS",
    "TABLE_FORMATS",
    "TABLE_PS",
    "TABLE_TOLS",
    "AuditRow",
    "RuleAudit",
    "ThresholdTable",
    "escape_markdown",
    "markdown_table",
    "rule_audit",
    "threshold_table",
]
