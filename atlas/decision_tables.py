"""Tables of the minimum n for tail p-values and test sizes, computed on demand.

- :func:`tail_table`: for each p and relative tolerance, the smallest n from which every tail
  of at least alpha is within the tolerance (:func:`atlas.decisions.tail_min_n`).
- :func:`size_table`: for each p0 and largest size, the smallest n from which the test at
  level alpha keeps its size within it (:func:`atlas.decisions.size_min_n`).

Each p is searched once for all the tolerances (:func:`atlas.decision_search.min_ns`, values
shared). A cell is the n from which every integer n up to ``n_max`` passes (each evaluated or
covered by a proven bound); ``> n_max`` marks a tolerance not met at ``n_max``. CSV, Markdown
and JSON, as the threshold tables.
"""

import csv
import io
import json
from dataclasses import dataclass

from atlas.approximations import check_method
from atlas.decision_search import DENSE_TO, N_MAX, min_ns, size_search, tail_search
from atlas.decisions import _alpha, _point, _search_options, check_rel_tol
from atlas.notation import format_p
from atlas.sizes import check_alternative
from atlas.tables import markdown_table
from atlas.tails import check_tail

__all__ = ["DecisionTable", "size_table", "tail_table"]

TAIL_TOLS = (0.5, 0.2, 0.1, 0.05)
SIZE_LIMITS = (0.06, 0.055, 0.0525)
TABLE_PS = (0.01, 0.05, 0.1, 0.2, 0.5)
FORMATS = ("csv", "md", "json")


@dataclass(frozen=True)
class DecisionTable:
    """A table of minimum n: rows p, columns the limits.

    Attributes
    ----------
    title : str
    column : str
        What the columns hold ("relative tolerance" or "largest size").
    limits : tuple of float
    ps : tuple of float
    cells : tuple of tuple of MinN
        ``cells[i][j]`` for ``ps[i]`` and ``limits[j]``.
    """

    title: str
    column: str
    limits: tuple
    ps: tuple
    cells: tuple

    @staticmethod
    def _text(result):
        if result.n is None:
            return f"> {result.n_max}"
        return f"{result.n}"

    def notes(self):
        """The footnotes, as lines."""
        first = self.cells[0][0]
        return [
            f"Each n: every integer from it to {first.n_max} is within the limit (each "
            f"evaluated, or above {first.dense_to} covered by a proven bound) and the one "
            f"before is not; > {first.n_max}: not met at {first.n_max}. Computed exactly on "
            "demand."
        ]

    def to_rows(self):
        """Header and rows of text."""
        header = ["p"] + [format_p(x) for x in self.limits]
        rows = [[format_p(p)] + [self._text(c) for c in row] for p, row in zip(
            self.ps, self.cells, strict=True)]  # fmt: skip
        return header, rows

    def to_csv(self):
        """CSV text."""
        header, rows = self.to_rows()
        out = io.StringIO()
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)
        return out.getvalue()

    def to_markdown(self):
        """Markdown: the title, the table with the limits over the columns, the notes."""
        header, rows = self.to_rows()
        header[0] = f"p \\ {self.column}"
        return (
            "\n".join(
                [f"**{self.title}**", "", markdown_table(header, rows, align="r"), ""]
                + [f"{line}" for line in self.notes()]
            )
            + "\n"
        )

    def to_json(self):
        """JSON text: every cell with what was checked."""
        record = {
            "title": self.title,
            "column": self.column,
            "limits": list(self.limits),
            "rows": [
                {
                    "p": p,
                    "min_n": [c.n for c in row],
                    "previous": [c.previous for c in row],
                    "evaluated": [c.evaluated for c in row],
                    "certified": [c.certified for c in row],
                }
                for p, row in zip(self.ps, self.cells, strict=True)
            ],
            "dense_to": self.cells[0][0].dense_to,
            "n_max": self.cells[0][0].n_max,
            "notes": self.notes(),
        }
        return json.dumps(record, allow_nan=False) + "\n"

    def render(self, fmt):
        """The table as ``"csv"``, ``"md"`` or ``"json"`` text."""
        if fmt not in FORMATS:
            valid = ", ".join(repr(f) for f in FORMATS)
            raise ValueError(f"`format` must be one of {valid}; got {fmt!r}.")
        return {"csv": self.to_csv, "md": self.to_markdown, "json": self.to_json}[fmt]()


def _ps(ps, name):
    if isinstance(ps, int | float):
        ps = (ps,)
    ps = tuple(ps)
    if not ps:
        raise ValueError(f"`{name}` must hold at least one value; got an empty sequence.")
    return tuple(_point(1, p, name)[1] for p in ps)


def tail_table(
    rel_tols=TAIL_TOLS,
    ps=TABLE_PS,
    *,
    alpha=0.01,
    method="normal_cc",
    tail="both",
    n_max=N_MAX,
    dense_to=DENSE_TO,
):
    """The minimum n from which every tail of at least ``alpha`` is within each tolerance.

    Parameters
    ----------
    rel_tols : sequence of float, optional
        Relative tolerances, each > 0; default 0.5, 0.2, 0.1, 0.05.
    ps : sequence of float, optional
        Default 0.01, 0.05, 0.1, 0.2, 0.5.
    alpha, method, tail, n_max, dense_to
        As for :func:`atlas.decisions.tail_min_n`.

    Returns
    -------
    DecisionTable

    Examples
    --------
    >>> t = tail_table([0.5], [0.5], n_max=300)
    >>> t.cells[0][0].n == __import__("atlas").tail_min_n(0.5, 0.01, 0.5, n_max=300).n
    True
    """
    if isinstance(rel_tols, int | float):
        rel_tols = (rel_tols,)
    tols = tuple(check_rel_tol(t) for t in rel_tols)
    if not tols:
        raise ValueError("`rel_tols` must hold at least one value; got an empty sequence.")
    ps = _ps(ps, "ps")
    alpha, method, tail = _alpha(alpha), check_method(method), check_tail(tail)

    n_max, dense_to = _search_options(n_max, dense_to)
    cells = tuple(tuple(min_ns(tail_search(p, alpha, method, tail), tols, n_max, dense_to))
                  for p in ps)  # fmt: skip
    words = {"lower": "lower tail", "upper": "upper tail", "both": "tail"}[tail]
    title = (f"Minimum n: every {words} of at least {format_p(alpha)} within the relative "
             f"tolerance ({method})")  # fmt: skip
    return DecisionTable(title, "relative tolerance", tols, ps, cells)


def size_table(
    max_sizes=SIZE_LIMITS,
    ps=TABLE_PS,
    *,
    alpha=0.05,
    method="normal_cc",
    alternative="two-sided",
    n_max=N_MAX,
    dense_to=DENSE_TO,
):
    """The minimum n from which the test at level ``alpha`` keeps its size within each limit.

    Parameters
    ----------
    max_sizes : sequence of float, optional
        Largest sizes, each in (0, 1); default 0.06, 0.055, 0.0525.
    ps : sequence of float, optional
        The null hypothesis' p0; default 0.01, 0.05, 0.1, 0.2, 0.5.
    alpha, method, alternative, n_max, dense_to
        As for :func:`atlas.decisions.size_min_n`.

    Returns
    -------
    DecisionTable
    """
    if isinstance(max_sizes, int | float):
        max_sizes = (max_sizes,)
    limits = tuple(_alpha(x, "max_sizes") for x in max_sizes)
    if not limits:
        raise ValueError("`max_sizes` must hold at least one value; got an empty sequence.")
    ps = _ps(ps, "ps")
    alpha = _alpha(alpha)
    method, alternative = check_method(method), check_alternative(alternative)

    n_max, dense_to = _search_options(n_max, dense_to)
    cells = tuple(tuple(min_ns(size_search(p, alpha, method, alternative), limits, n_max,
                               dense_to)) for p in ps)  # fmt: skip
    title = (f"Minimum n: the {alternative} test at level {format_p(alpha)} keeps its size "
             f"within the limit ({method} p-values)")  # fmt: skip
    return DecisionTable(title, "largest size", limits, ps, cells)
