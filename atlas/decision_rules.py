"""Rules of thumb audited on the metrics of tail p-values and tests, computed on demand.

"np >= 5 admits tail errors up to X at alpha = 0.01": for a rule R (an expression in n, p and q,
:mod:`atlas.rules`), a method and a level, the worst tail relative error (or the largest test
size) over the cells (n, p) of an audit grid that R admits, with the cell where it is attained.

No atlas file is read: every cell is computed exactly by :mod:`atlas.tails` and
:mod:`atlas.sizes`. The audit grid is a grid, not a proof for every (n, p): the default
(``AUDIT_N``, ``AUDIT_P``) holds every n from 1 to 100, then 41 n log-spaced to 10^5, and 41 p
logit-spaced from 0.001 to 0.999 with 1/2; the answer names the grid it used.
"""

from dataclasses import dataclass

import numpy as np

from atlas.approximations import check_method
from atlas.grid import describe_grid, parse_n, parse_p
from atlas.rules import CLASSIC_RULES, RULE_NAMES, parse_rule
from atlas.sizes import cell_all_sizes, check_alternative
from atlas.tails import cell_tail_errors, check_alpha, check_tail

__all__ = ["AUDIT_N", "AUDIT_P", "RuleRow", "size_rule_audit", "tail_rule_audit"]

AUDIT_N = "1:100,log:100:100000:41"
AUDIT_P = "logit:0.001:0.999:41,0.5"
TAIL_LEVELS = (0.05, 0.01, 0.001, 0.0001)
SIZE_LEVELS = (0.1, 0.05, 0.01, 0.001)


def _pct(x):
    """0.0568 as '5.68%', 16.9 as '1,690%'."""
    value = 100.0 * x
    return f"{value:.3g}%" if value < 1000 else f"{value:,.0f}%"


@dataclass(frozen=True)
class RuleRow:
    """The worst value a rule admits on the audit grid, for one method and level.

    Attributes
    ----------
    rule : str
        The expression.
    name : str
        Its textbook name where it has one, else the expression.
    method : str
    what : str
        ``"lower"``, ``"upper"``, ``"both"`` (tail relative error) or ``"two-sided"``,
        ``"less"``, ``"greater"`` (test size).
    alpha : float
        The level.
    cells : int
        Grid cells the rule admits.
    worst : float or None
        The largest tail relative error, or the largest size, over those cells (None if none).
    worst_n : int or None
    worst_p : float or None
        Where it is attained (the smallest n, then p, among ties).
    exact_size : float or None
        For sizes: the exact test's size at that cell.
    grid : str
        The audit grid, in words.
    """

    rule: str
    name: str
    method: str
    what: str
    alpha: float
    cells: int
    worst: object
    worst_n: object
    worst_p: object
    exact_size: object
    grid: str

    def explain(self):
        """One line: what the rule admits."""
        if self.worst is None:
            return f"{self.name} admits no cell of the grid ({self.grid})"
        where = f"at n = {self.worst_n}, p = {self.worst_p!r}; {self.cells} cells"
        if self.exact_size is None:
            return (
                f"{self.name} admits {self.method} tail relative errors up to {self.worst:.3g} "
                f"({_pct(self.worst)}) at alpha = {self.alpha!r} ({self.what} tails; {where})"
            )
        return (
            f"{self.name} admits {self.method} {self.what} test sizes up to "
            f"{_pct(self.worst)} at nominal {_pct(self.alpha)} (exact test there: "
            f"{_pct(self.exact_size)}; {where})"
        )


def _setup(rules, n, p):
    if isinstance(rules, str):
        rules = (rules,)
    rules = CLASSIC_RULES if rules is None else tuple(rules)
    if not rules:
        raise ValueError("`rules` must hold at least one rule; got an empty sequence.")
    parsed = [parse_rule(r, name="rules") for r in rules]
    n_axis, p_axis = parse_n(n), parse_p(p)
    masks = [np.asarray(rule(n_axis[:, None], p_axis[None, :]), dtype=bool) for rule in parsed]
    grid = describe_grid(n_axis, p_axis)
    return rules, masks, n_axis, p_axis, grid


def _levels(alphas):
    levels = np.atleast_1d(check_alpha(alphas))
    if levels.ndim != 1 or levels.size == 0:
        raise ValueError("`alpha` must be one level or a list of levels; got none.")
    return levels


def _rows(rules, masks, values, extra, n_axis, p_axis, method, what, levels, grid):
    rows = []
    for rule, mask in zip(rules, masks, strict=True):
        cells = int(mask.sum())
        for i, alpha in enumerate(levels):
            if cells == 0:
                worst = worst_n = worst_p = exact = None
            else:
                v = np.where(mask, values[i], -np.inf)
                a, b = np.unravel_index(int(np.argmax(v)), v.shape)
                worst, worst_n, worst_p = float(v[a, b]), int(n_axis[a]), float(p_axis[b])
                exact = None if extra is None else float(extra[i][a, b])
            name = RULE_NAMES.get(rule, rule)
            rows.append(RuleRow(rule, name, method, what, float(alpha), cells, worst, worst_n,
                                worst_p, exact, grid))  # fmt: skip
    return rows


def tail_rule_audit(
    rules=None, *, method="normal_cc", alpha=TAIL_LEVELS, tail="both", n=AUDIT_N, p=AUDIT_P
):
    """The worst tail relative error each rule admits on the audit grid, at each level.

    Parameters
    ----------
    rules : str or sequence of str, optional
        Rules in n, p and q; default the classic ones (:data:`atlas.rules.CLASSIC_RULES`).
    method : str, optional
    alpha : float or sequence of float, optional
        Levels, each in (0, 1); default 0.05, 0.01, 0.001, 0.0001.
    tail : {"both", "lower", "upper"}, optional
    n, p : str or sequence, optional
        The audit grid, as :func:`atlas.grid.parse_n` and :func:`atlas.grid.parse_p` read it.

    Returns
    -------
    list of RuleRow
        One row per rule and level, in that order.

    Examples
    --------
    >>> row = tail_rule_audit("n*p >= 5 and n*q >= 5", alpha=0.01, n="10:12", p="0.5")[0]
    >>> row.cells, row.worst_n
    (3, 10)
    """
    method, tail = check_method(method), check_tail(tail)
    levels = _levels(alpha)
    rules, masks, n_axis, p_axis, grid = _setup(rules, n, p)
    wanted = np.logical_or.reduce(masks)
    values = np.full((levels.size, n_axis.size, p_axis.size), -np.inf)
    for a, b in zip(*np.nonzero(wanted), strict=True):
        lower, upper = cell_tail_errors(int(n_axis[a]), float(p_axis[b]), method, levels)
        values[:, a, b] = {"lower": lower, "upper": upper}.get(tail, np.maximum(lower, upper))
    return _rows(rules, masks, values, None, n_axis, p_axis, method, tail, levels, grid)


def size_rule_audit(
    rules=None,
    *,
    method="normal_cc",
    alpha=SIZE_LEVELS,
    alternative="two-sided",
    n=AUDIT_N,
    p=AUDIT_P,
):
    """The largest size of the test with the method's p-values each rule admits, at each level.

    Parameters
    ----------
    rules, method, n, p
        As for :func:`tail_rule_audit` (p is the null hypothesis' p0).
    alpha : float or sequence of float, optional
        Nominal levels; default 0.1, 0.05, 0.01, 0.001.
    alternative : {"two-sided", "less", "greater"}, optional

    Returns
    -------
    list of RuleRow
        One row per rule and level; ``exact_size`` is the exact test's size at the worst cell.

    Examples
    --------
    >>> row = size_rule_audit("n*p >= 5", alpha=0.05, alternative="greater", n="50",
    ...                       p="0.1")[0]
    >>> round(row.worst, 4), round(row.exact_size, 4)  # issue 11: 5.8% at n = 50, p0 = 0.1
    (0.0579, 0.0245)
    """
    method, alternative = check_method(method), check_alternative(alternative)
    levels = _levels(alpha)
    rules, masks, n_axis, p_axis, grid = _setup(rules, n, p)
    wanted = np.logical_or.reduce(masks)
    values = np.full((levels.size, n_axis.size, p_axis.size), -np.inf)
    exact = np.full(values.shape, np.nan)
    for a, b in zip(*np.nonzero(wanted), strict=True):
        cell_n, cell_p = int(n_axis[a]), float(p_axis[b])
        size, exact_size = cell_all_sizes(cell_n, cell_p, method, levels)[alternative]
        values[:, a, b], exact[:, a, b] = size, exact_size
    return _rows(rules, masks, values, exact, n_axis, p_axis, method, alternative, levels, grid)
