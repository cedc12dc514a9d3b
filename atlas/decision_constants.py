"""The constant each family of rules needs for the metrics of tail p-values and tests.

The question of :func:`atlas.guarantees.rule_constants`, asked of the tail relative error
(:func:`atlas.tails.tail_error`) and the size of a test (:func:`atlas.sizes.test_size`). At each
p of an audit grid the threshold is the minimum n of :mod:`atlas.decision_search` (through
:func:`atlas.decisions.tail_min_n` and :func:`atlas.decisions.size_min_n`): the smallest N such
that *every integer* n from N to ``n_max`` is within the limit, each integer evaluated or
covered by a proven bound (a ladder of n about 5% apart only says where to look). The constant
is the smallest c (the largest for a family that admits more as c grows) whose rule admits no
integer n below the threshold, every integer from 1 to N - 1 checked (to ``n_max`` where no N
exists), at every p of the grid: nothing here rests on a ladder. Not claimed: the p between
the grid's p (these metrics have no bound on their change in p), and n beyond ``n_max``.
The share a rule gives away is counted on the audit grid's cells.
"""

from dataclasses import dataclass

import numpy as np

from atlas.approximations import check_method
from atlas.decision_rules import AUDIT_N, AUDIT_P
from atlas.decision_search import DENSE_TO, N_MAX
from atlas.decisions import size_min_n, tail_min_n
from atlas.grid import describe_grid, parse_n, parse_p
from atlas.guarantees import constant_direction, parse_families, solve_constant
from atlas.sizes import check_alternative, test_size
from atlas.tails import check_alpha, check_tail, tail_error

__all__ = ["DecisionConstant", "decision_rule_constants", "render_decision_constants"]

_METRICS = ("tail", "size")


@dataclass(frozen=True)
class DecisionConstant:
    """The constant one family needs for a tail or size limit, on an audit grid.

    Attributes
    ----------
    family : atlas.guarantees.Family
    constant : float or None
        Rounded outward to :data:`atlas.guarantees.DIGITS` digits; None when no c works.
    stricter : {"larger", "smaller"}
    worst : float or None
        The largest value of the metric at the first three integers n the rule admits at each
        p of the grid (at most the limit: no n below the exact threshold is admitted).
    refused : float or None
        The share of the audit grid's cells within the limit that the rule refuses.
    checked : str
        What was checked, in words.
    """

    family: object
    constant: object
    stricter: str
    worst: object
    refused: object
    checked: str


def decision_rule_constants(metric, alpha, limit=None, *, method="normal_cc", tail="both",
                            alternative="two-sided", families=None, n=AUDIT_N, p=AUDIT_P,
                            n_max=N_MAX, dense_to=DENSE_TO):  # fmt: skip
    """For each family, the constant that keeps a tail or size metric within ``limit``.

    Parameters
    ----------
    metric : {"tail", "size"}
        The tail relative error at level ``alpha`` (``limit`` the relative tolerance), or the
        size of the test at level ``alpha`` (``limit`` the largest size, default alpha).
    alpha : float
        0 < alpha < 1.
    limit : float, optional
        Required for ``"tail"``.
    method, tail, alternative : str, optional
    families : sequence, optional
        As for :func:`atlas.guarantees.rule_constants`.
    n, p : str, optional
        The audit grid (as :mod:`atlas.decision_rules`): the shares are counted on it, and
        the thresholds found at its p.
    n_max, dense_to : int, optional
        As for :func:`atlas.decisions.tail_min_n`: the thresholds hold to ``n_max``, and every
        integer to ``dense_to`` is evaluated (above it, evaluated or covered by a bound).

    Returns
    -------
    list of DecisionConstant

    Raises
    ------
    ValueError
        For a bad metric, alpha, limit, method, tail, alternative or family.

    Examples
    --------
    >>> rows = decision_rule_constants("tail", 0.05, 0.1, families=["n*p*q >= c"],
    ...                                n="1:60", p="0.2,0.5", n_max=60)
    >>> rows[0].constant  # tail_min_n: 57 at p = 0.2 (1 at 1/2), so c > 56 * 0.16 = 8.96
    8.97
    """
    if metric not in _METRICS:
        raise ValueError(f"`metric` must be one of 'tail', 'size'; got {metric!r}.")
    alpha = float(check_alpha(alpha))
    method = check_method(method)
    if metric == "tail":
        tail = check_tail(tail)
        if limit is None:
            raise ValueError("`limit` must be given for the tail metric (a relative tolerance).")

        def value(nn, pp):
            return tail_error(nn, pp, alpha, method=method, tail=tail)

        def min_n(pp):
            return tail_min_n(pp, alpha, limit, method=method, tail=tail, n_max=n_max,
                              dense_to=dense_to)  # fmt: skip
    else:
        alternative = check_alternative(alternative)
        limit = alpha if limit is None else limit

        def value(nn, pp):
            return test_size(nn, pp, alpha, method=method, alternative=alternative).size

        def min_n(pp):
            return size_min_n(pp, alpha, max_size=limit, method=method, alternative=alternative,
                              n_max=n_max, dense_to=dense_to)  # fmt: skip

    limit = float(limit)
    parsed = parse_families(families)
    n_axis, p_axis = parse_n(n), parse_p(p)
    answers = [min_n(float(x)) for x in p_axis]
    n_check, p_check = [], []
    for x, answer in zip(p_axis.tolist(), answers, strict=True):
        # Every integer below the exact threshold (every integer to n_max where there is none).
        below = np.arange(1, n_max + 1 if answer.n is None else answer.n, dtype=np.int64)
        n_check.append(below)
        p_check.append(np.full(below.size, x))
    n_check, p_check = np.concatenate(n_check), np.concatenate(p_check)
    values = np.array([[value(int(a), float(b)) for b in p_axis] for a in n_axis])
    within = values <= limit
    never = sum(answer.n is None for answer in answers)
    checked = (
        f"thresholds at the {p_axis.size} p of the audit grid ({describe_grid(n_axis, p_axis)}), "
        f"each exact for every integer n to {n_max:,} (atlas.decision_search: every integer to "
        f"{dense_to:,} evaluated, above it each evaluated or covered by a proven bound"
        + (f"; at {never} p no n up to {n_max:,} passes" if never else "")
        + "); the rule checked at every integer n below each threshold; the p between the "
        f"grid's p and n beyond {n_max:,} are not checked; the shares are counted on the grid"
    )
    every = np.arange(1, n_max + 1, dtype=np.int64)  # where a rule first admits n, at each p
    rows = []
    for family in parsed:
        stricter = constant_direction(family, n_axis, p_axis)
        c = solve_constant(family, stricter, n_check, p_check)
        worst = share = None
        if c is not None and np.isfinite(c):
            rule = family.at(c)
            admitted = rule(n_axis[:, None], p_axis[None, :])
            if not admitted.any():
                c = None
            else:
                share = float((within & ~admitted).sum() / max(int(within.sum()), 1))
                firsts = []
                for x in p_axis.tolist():
                    hit = every[rule(every, x)][:3]
                    firsts += [value(int(a), x) for a in hit.tolist()]
                worst = max(firsts) if firsts else None
        rows.append(DecisionConstant(family, c, stricter, worst, share, checked))
    return rows


def render_decision_constants(rows, fmt, *, metric, alpha, limit, method):
    """The rows as ``"md"`` (a table with its notes and the caution) or ``"json"`` text."""
    import json

    from atlas.cube import CAUTION

    what = (f"tail relative error at alpha = {alpha!r} within {limit!r}" if metric == "tail"
            else f"test size at level {alpha!r} at most {limit!r}")  # fmt: skip
    checked = rows[0].checked if rows else ""
    if fmt == "json":
        record = {
            "metric": metric, "alpha": alpha, "limit": limit, "method": method,
            "rows": [{"family": r.family.text, "name": r.family.name, "constant": r.constant,
                      "stricter": r.stricter,
                      "rule": None if r.constant is None else r.family.written(r.constant),
                      "worst_at_boundary": r.worst, "refused_share": r.refused}
                     for r in rows],
            "checked": checked, "caution": CAUTION,
        }  # fmt: skip
        return json.dumps(record, indent=1, allow_nan=False) + "\n"
    if fmt != "md":
        raise ValueError(f"`format` must be one of 'md', 'json'; got {fmt!r}.")
    lines = [
        f"### Rules that keep the {what} ({method})",
        "",
        "| family | constant | worst at the boundary | gives away |",
        "|---|---|---|---|",
    ]
    for r in rows:
        const = "none" if r.constant is None else f"{r.constant:.3g}"
        if r.constant is not None and r.stricter == "smaller":
            const = "<= " + const
        worst = "—" if r.worst is None else f"{r.worst:.4g}"
        share = "—" if r.refused is None else f"{r.refused:.1%}"
        lines.append(f"| {r.family.name} | {const} | {worst} | {share} |")
    lines += ["", f"- Checked: {checked}.",
              "- worst at the boundary: the largest value at the first three integers n the rule "
              "admits at each p; gives away: the share of the audit grid's cells within the limit "
              "that the rule refuses.", f"- Caution: {CAUTION}"]  # fmt: skip
    return "\n".join(lines) + "\n"
