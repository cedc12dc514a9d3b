"""What the atlas guarantees over its whole p range: a threshold in bands of p, and the constant
each family of rules of thumb needs for a tolerance.

**Bands.** The p axis is cut at the grid's p into bands [p_j, p_{j+1}]. At both ends of each
band and at ``INSIDE`` points equally spaced in log-odds inside it, the exact minimum n for
every integer is found (:func:`atlas.thresholds.minimum_n`: the smallest N such that the error
is within tol at *every integer* n >= N up to the atlas's end, gaps between grid n certified by
the one-step bound or evaluated by the engine, and beyond the end where the large-n bound takes
over). A point whose answer is not exact for every integer (:attr:`atlas.thresholds.Threshold.
exact`: the search ran out of engine evaluations) takes the exact answer at tol/2, tol/4 or
tol/8 instead, which is conservative (every n from it on is within the smaller tolerance); the
band is "never" when a point has no answer, or none of these is exact.

**Between the points checked.** The band is then refined by bisection in log-odds
(:func:`atlas.refinement.refine`): a pair of neighbouring checked p is bisected where their
minimum n differ by more than ``REFINE_SPREAD`` (2%) of the larger, or the larger comes within
2% of the band's largest (an interior bump there would decide the band), largest N first, at
most ``REFINE_BUDGET`` (4) new p per band and ``REFINE_DEPTH`` (3) bisections deep (neighbours
1/8 of the band's log-odds width apart). A band's threshold is the largest N of all its points
times ``1 + margin``, rounded up. The margin is, by default, the largest *rise* seen at the
deepest level of this very refinement (N at a new p over the larger N of its two neighbours,
minus 1; 0 when no new p exceeds its neighbours there). On the default atlas (normal_cc at
tol 0.01: 766 p added, none above both its neighbours at any depth; the figures of the other
questions are printed by ``build_scripts/rule_constants_table.py``) the margin is 0.
Pairs next to a point answered at a smaller tolerance are not bisected (each such search costs
thousands of engine evaluations).
No rigorous bound in p is used: the derivative of F in p, -n b(k; n - 1, p), makes the
Lipschitz bound of the error over one band about sqrt(n p q / 2 pi) times the band's log-odds
width, far above any tolerance at the n that matter. So the p between the points checked are
not computed: the claim there rests on this refinement (which found no bump to cover) and on
the random off-grid tests of ``tests/test_exports.py`` (100,000 (n, p) against the engine, none
called safe wrongly). ``budget=0`` gives the bands without refinement.

The guarantee reaches every n from the threshold to the atlas's end, and beyond it when every
point of the band is covered for all n (the Berry-Esseen bound of :mod:`atlas.bounds`, largest
at one of the band's ends).

**Rule constants.** A family is a rule with one free constant ``c``, e.g. ``"n*p*q >= c"``. It
guarantees the tolerance when, at every point checked of every band, it admits no integer n
below the band's threshold (no n up to the atlas's end for a band that is "never"). The rule
is evaluated at the grid n below the threshold and at the integer just below it: a gap between
grid n whose two ends the rule refuses is taken to be refused throughout (exact for a rule
monotone in n, as every family here is). The smallest such c (the largest, for a family that
admits more as c grows) is found by bisection and rounded outward to ``DIGITS`` significant
digits. With it, :func:`atlas.regions.rule_worst` finds the worst error the rule admits over
every integer n and the p it checks, and the share of the grid's safe cells (error <= tol) the
rule refuses is counted: what the rule gives away. The exact per-point thresholds alone (no
band) give the constant needed at the p checked, a lower bound shown beside it.
"""

import ast
import math
import re
from dataclasses import dataclass, field

import numpy as np

from atlas.approximations import check_method
from atlas.engine import check_metric
from atlas.notation import bound_up, format_p
from atlas.refinement import REFINE_BUDGET, REFINE_DEPTH, REFINE_SPREAD, refine
from atlas.rules import parse_rule
from atlas.thresholds import minimum_n

__all__ = ["DIGITS", "FAMILIES", "INSIDE", "Family", "RuleConstant", "RuleConstants",
           "ThresholdBands", "constant_direction", "parse_families", "parse_family",
           "rule_constants", "solve_constant", "threshold_bands"]  # fmt: skip

INSIDE = 1  # points checked inside each band before refinement, equally spaced in log-odds
DIGITS = 3  # significant digits of a constant, rounded outward (towards the stricter rule)
_BISECTIONS = 60

# The families, as expressions in n, p, q and the constant c, with their names.
# n min(p, q) is written without min: 1 - |q - p| = 2 min(p, q), |x| = (x**2)**0.5. The pairs
# (npq, n >= c/(pq)) and (np and nq, n min(p, q)) are the same rule written two ways.
FAMILIES = (
    ("n*p*q >= c", "npq >= c"),
    ("n*p >= c and n*q >= c", "np >= c and nq >= c"),
    ("n >= c/(p*q)", "n >= c/(pq)"),
    ("n*(1 - ((q - p)**2)**0.5)/2 >= c", "n min(p, q) >= c"),
    # The audit's skewness and 3-sigma rules with their constant free (squared where that
    # keeps the comparison's sides the quantities themselves).
    ("n > 5 and (q - p)**2 < c**2*n*p*q", "n > 5 and |q - p|/sqrt(npq) < c"),
    (
        "n*p > c*(n*p*q)**0.5 and n*q > c*(n*p*q)**0.5",
        "np - c sqrt(npq) > 0 and np + c sqrt(npq) < n",
    ),
)


def _logit(p):
    return np.log(p / (1.0 - p))


def _expit(x):
    return 1.0 / (1.0 + np.exp(-x))


@dataclass(frozen=True)
class ThresholdBands:
    """A conservative threshold n*(p) over the atlas's p range, constant in bands of p.

    Attributes
    ----------
    method, metric : str
    tol : float
    edges : numpy.ndarray
        The bands' ends, increasing: band j is [edges[j], edges[j + 1]] (the grid's p).
    n_min : numpy.ndarray of int64
        Each band's threshold: the guarantee holds for every integer n >= n_min; 0 where the
        band is "never".
    n_max : numpy.ndarray of int64
        The largest n the guarantee reaches in each band; 0 for every n (no upper end).
    points : tuple of atlas.thresholds.Threshold
        The answers at every point checked, in increasing p.
    point_band : numpy.ndarray of int64
        The band of each point (a grid p between two bands is counted in the lower).
    grid_end : int
        The atlas's largest n.
    atlas_source, atlas_checksum, atlas_path : str
        Where the atlas came from: its ``source`` attribute (package and version), its stored
        checksum and its file.
    """

    method: str
    metric: str
    tol: float
    edges: np.ndarray
    n_min: np.ndarray
    n_max: np.ndarray
    points: tuple
    grid_end: int
    atlas_source: str = ""
    atlas_checksum: str = ""
    atlas_path: str = ""
    inexact: int = 0
    stricter: int = 0
    refinement: object = None
    margin: float = 0.0

    def within(self, n, p):
        """Whether the bands guarantee the tolerance at broadcast integer n and float p.

        False outside the atlas's p range, below a band's threshold, beyond its reach and in a
        band that is "never"; the same answer as the exported ``within_tolerance``.
        """
        n, p = np.broadcast_arrays(np.asarray(n, dtype=np.int64), np.asarray(p, dtype=float))
        inside = (p >= self.edges[0]) & (p <= self.edges[-1])
        j = np.clip(np.searchsorted(self.edges, np.where(inside, p, self.edges[0]), "right") - 1,
                    0, self.edges.size - 2)  # fmt: skip
        lo, hi = self.n_min[j], self.n_max[j]
        return inside & (lo > 0) & (n >= lo) & ((hi == 0) | (n <= hi))

    def checked(self):
        """What the bands rest on, in words."""
        grid = self.edges.size
        r = self.refinement
        added = 0 if r is None else int(r.added.sum())
        text = (
            f"{len(self.points)} p checked ({grid} grid p, {INSIDE} between each pair equally "
            f"spaced in log-odds, and {added} added by bisection in log-odds"
        )
        if r is not None:
            deepest = r.deepest()
            rise = r.largest_rise(deepest) if deepest else None
            text += (
                f" where neighbours' minimum n differ by more than {r.spread:.0%} or come within "
                f"{r.spread:.0%} of the band's largest, at most {r.budget} per band and "
                f"{r.depth} bisections deep ({r.exhausted} bands stopped on the budget); new p "
                f"exceeding both neighbours: {sum(x > 0 for _, x in r.rises)} of {len(r.rises)}"
            )
            if rise is not None:
                text += f", largest rise at the deepest level ({deepest}) {max(rise, 0.0):.2%}"
        text += (
            "), each with the exact minimum n for every integer up to the atlas's end "
            f"n = {self.grid_end:,} (grid values, the one-step bound between grid n, the engine "
            "where it does not certify; beyond the end the large-n bound where it holds); a "
            "band's threshold is the largest of its points"
        )
        if self.margin:
            text += f" times {1 + self.margin:.4g} (the safety margin), rounded up"
        text += (
            "; the p between the points checked are not computed: there the claim rests on "
            "this refinement and on random off-grid tests (tests/test_exports.py)"
        )
        if self.stricter:
            text += (
                f"; at {self.stricter} points the search for tol ran out of engine evaluations "
                "and the exact answer at tol/2, tol/4 or tol/8 (every n from it on is within "
                "the smaller tolerance, so within tol) is used instead; the pairs next to these "
                "points are not bisected (each search costs thousands of engine evaluations)"
            )
        if self.inexact:
            text += f"; {self.inexact} points not exact for every integer: their bands are never"
        return text


def threshold_bands(atlas, tol, *, method="normal_cc", metric="interval", depth=REFINE_DEPTH,
                    budget=REFINE_BUDGET, spread=REFINE_SPREAD, margin=None):  # fmt: skip
    """The conservative threshold n*(p) in bands of p: see the module notes.

    Parameters
    ----------
    atlas : atlas.Atlas
    tol : float
        0 < tol < inf.
    method, metric : str, optional
    depth, budget, spread : optional
        The bisection in log-odds between the points checked (:func:`atlas.refinement.refine`):
        at most ``depth`` bisections deep and ``budget`` new p per band, where neighbours
        differ by more than ``spread`` of their minimum n or come within it of the band's
        largest. ``budget=0`` checks only the grid p and ``INSIDE`` points per band.
    margin : float, optional
        Each band's threshold is the largest minimum n of its points times ``1 + margin``,
        rounded up; by default the largest rise seen at the deepest level of the refinement
        (0 when no new p exceeds its neighbours there: module notes).

    Returns
    -------
    ThresholdBands

    Raises
    ------
    ValueError
        For a bad tol, method, metric, depth, budget, spread or margin.

    Examples
    --------
    >>> from atlas import Atlas, build_atlas
    >>> at = Atlas(build_atlas(n="1:100", p="0.4,0.5,0.6", methods="normal_cc", progress=False))
    >>> bands = threshold_bands(at, 0.01)
    >>> bands.n_min.tolist(), bands.within([5, 40], [0.5, 0.5]).tolist()
    ([23, 23], [False, True])
    >>> threshold_bands(at, 0.01, margin=0.05).n_min.tolist()  # 23 * 1.05, rounded up
    [25, 25]
    """
    from atlas.query import check_tol

    tol = float(check_tol(tol))
    method, metric = check_method(method), check_metric(metric)
    if margin is not None and not (isinstance(margin, (int, float)) and 0 <= margin < 1):
        raise ValueError(f"`margin` must be None or a number in [0, 1); got {margin!r}.")
    grid_n, grid_p = atlas.n, atlas.p
    logit = _logit(grid_p)
    answers = {}  # log-odds -> Threshold
    counts = {"stricter": 0}
    fixed = set()  # log-odds answered at a smaller tolerance: their pairs are not bisected

    def solve(xs, ps=None):
        """The exact minimum n at each log-odds (p given for grid p: their stored values)."""
        ps = _expit(np.asarray(xs)) if ps is None else ps
        columns = np.asarray(atlas.error(grid_n[:, None], np.asarray(ps)[None, :],
                                         method=method, metric=metric))  # fmt: skip
        out = []
        for i, (x, p) in enumerate(zip(np.asarray(xs).tolist(), np.asarray(ps).tolist(),
                                       strict=True)):  # fmt: skip
            answer = minimum_n(grid_n, columns[:, i], p, tol, method=method, metric=metric)
            if not answer.exact:  # the exact answer at a smaller tolerance serves (module notes)
                for smaller in (tol / 2, tol / 4, tol / 8):
                    other = minimum_n(grid_n, columns[:, i], p, smaller, method=method,
                                      metric=metric)  # fmt: skip
                    if other.exact and other.n is not None:
                        answer = other
                        counts["stricter"] += 1
                        fixed.add(x)
                        break
            answers[x] = answer
            out.append(answer.n if answer.exact else None)
        return out

    steps = np.arange(1, INSIDE + 1) / (INSIDE + 1)
    inside = (logit[:-1, None] + np.diff(logit)[:, None] * steps[None, :]).ravel()
    solve(logit, grid_p)
    if inside.size:
        solve(inside)
    bands_count = max(grid_p.size - 1, 1)
    lo = logit[:-1] if grid_p.size > 1 else logit[:1]
    hi = logit[1:] if grid_p.size > 1 else logit[:1]
    start = []
    for j in range(bands_count):
        xs = [float(lo[j]), *inside[j * INSIDE : (j + 1) * INSIDE].tolist(), float(hi[j])]
        start.append({x: (answers[x].n if answers[x].exact else None) for x in xs})
    refined = refine(lo, hi, start, solve, depth=depth, budget=budget, spread=spread, fixed=fixed)
    if margin is None:
        margin = max(0.0, refined.largest_rise(refined.deepest()) or 0.0)
    n_min = np.zeros(bands_count, dtype=np.int64)
    n_max = np.zeros_like(n_min)
    for j, values in enumerate(refined.points):
        if any(v is None for v in values.values()):
            continue  # "never": some point has no exact answer
        n_min[j] = math.ceil(max(values.values()) * (1.0 + margin))
        finite = [answers[x].upto for x in values if answers[x].upto is not None]
        if finite:  # some point is covered only to an end: the band reaches the smallest
            n_max[j] = min(finite)
            if n_min[j] > n_max[j]:
                n_min[j] = n_max[j] = 0
    points = tuple(answers[x] for x in sorted(answers))
    attrs = atlas.attrs
    edges = grid_p.copy() if grid_p.size > 1 else np.array([grid_p[0], grid_p[0]])
    return ThresholdBands(method=method, metric=metric, tol=tol, edges=edges, n_min=n_min,
                          n_max=n_max, points=points, grid_end=int(grid_n[-1]),
                          atlas_source=str(attrs.get("source", "")),
                          atlas_checksum=str(attrs.get("checksum", "")),
                          atlas_path="" if atlas.path is None else str(atlas.path),
                          inexact=sum(not t.exact for t in points),
                          stricter=counts["stricter"], refinement=refined,
                          margin=float(margin))  # fmt: skip


# ---- rule families with one free constant ---------------------------------------------------


class _Constant(ast.NodeTransformer):
    """Replace the name ``c`` by a number (:func:`atlas.rules.parse_rule` checks the rest)."""

    def __init__(self, value):
        self.value = value

    def visit_Name(self, node):
        if node.id == "c":
            return ast.copy_location(ast.Constant(self.value), node)
        return node


@dataclass(frozen=True)
class Family:
    """A rule of thumb with one free constant ``c``: ``family.at(c)`` is the rule.

    Attributes
    ----------
    text : str
        The expression in n, p, q and c, e.g. ``"n*p*q >= c"``.
    name : str
        How it is written for people (``"npq >= c"``), else the text.
    """

    text: str
    name: str
    _tree: object = field(repr=False, compare=False, default=None)

    def at(self, c):
        """The rule with ``c`` replaced by a number: an :class:`atlas.rules.Expression`."""
        tree = _Constant(float(c)).visit(ast.parse(self.text.strip(), mode="eval"))
        return parse_rule(ast.unparse(tree), name="family")

    def written(self, c):
        """The rule as written with the constant ``c`` (``"n*p*q >= 9.03"``)."""
        if self.name != self.text:
            return re.sub(r"\bc\b", f"{c:.{DIGITS}g}", self.name)
        tree = _Constant(float(f"{c:.{DIGITS}g}")).visit(ast.parse(self.text, mode="eval"))
        return ast.unparse(tree)


def parse_family(text, *, name=None):
    """Check a family of rules: a condition in n, p, q and one free constant ``c``.

    Parameters
    ----------
    text : str
        E.g. ``"n*p*q >= c"``; the names allowed are those of :mod:`atlas.rules` and ``c``.
    name : str, optional
        How it is written for people (default the text).

    Returns
    -------
    Family

    Raises
    ------
    TypeError
        If ``text`` is not a str.
    ValueError
        If it does not hold ``c``, or the rule with a number for ``c`` is refused by
        :func:`atlas.rules.parse_rule` (the message names the family as written).

    Examples
    --------
    >>> family = parse_family("n*p >= c and n*q >= c")
    >>> family.at(5)([10, 100], 0.05).tolist()
    [False, True]
    >>> parse_family("n*p >= 5")
    Traceback (most recent call last):
    ...
    ValueError: `family` must hold the constant c (e.g. 'n*p*q >= c'); got 'n*p >= 5'.
    """
    if not isinstance(text, str):
        raise TypeError(f"`family` must be a str; got {type(text).__name__}.")
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as err:
        raise ValueError(f"`family` is not a valid expression: {err.msg} in {text!r}.") from None
    except (RecursionError, MemoryError):
        raise ValueError(f"`family` is nested too deeply: {text!r}.") from None
    if not any(isinstance(x, ast.Name) and x.id == "c" for x in ast.walk(tree)):
        raise ValueError(f"`family` must hold the constant c (e.g. 'n*p*q >= c'); got {text!r}.")
    family = Family(text.strip(), name or text.strip())
    try:
        family.at(1.0)
    except ValueError as err:
        message = str(err).split(" Got ")[0].split(" in ")[0].rstrip(".")
        raise ValueError(f"{message} (with c as a number); got {text!r}.") from None
    return family


@dataclass(frozen=True)
class RuleConstant:
    """The constant one family needs for a tolerance, and what the rule then admits.

    Attributes
    ----------
    family : Family
    constant : float or None
        The smallest c (the largest, when ``stricter`` is "smaller") that guarantees the
        tolerance, rounded outward to ``DIGITS`` digits; None when no c does (or only one whose
        rule admits no cell of the grid).
    stricter : {"larger", "smaller"}
        Which way of c refuses more.
    at_points : float or None
        The constant needed at the p checked with their own exact thresholds (no band): the
        true constant is at least this.
    worst : atlas.regions.RuleWorst or None
        The worst error the rule with ``constant`` admits, and what was checked.
    refused : float or None
        The share of the grid's safe cells (error <= tol) the rule refuses.
    tol : float
    """

    family: Family
    constant: object
    stricter: str
    at_points: object
    worst: object
    refused: object
    tol: float

    @property
    def guaranteed(self):
        """Whether the worst error found is within the tolerance (None when no c works)."""
        if self.constant is None:
            return None
        return self.worst is None or self.worst.worst is None or self.worst.worst <= self.tol


@dataclass(frozen=True)
class RuleConstants:
    """The constants of every family for one tolerance, method and metric.

    Attributes
    ----------
    rows : tuple of RuleConstant
    bands : ThresholdBands
        The thresholds the constants rest on.
    bands_refused : float
        The share of the grid's safe cells the bands themselves refuse: no rule that is
        monotone in n can give away less than the exact thresholds, and the bands are those
        thresholds made conservative in p.
    safe_cells : int
        Grid cells with error <= tol.
    """

    rows: tuple
    bands: ThresholdBands
    bands_refused: float
    safe_cells: int

    def notes(self):
        from atlas.cube import CAUTION

        b = self.bands
        return [
            f"constant: the smallest c (for a rule that admits more as c grows: the largest) "
            f"such that the rule admits no integer n below the threshold of the band of p, at "
            f"every point checked, rounded outward to {DIGITS} digits. Bands: {b.checked()}.",
            "needed at the p checked: the constant with each point's own threshold, no band; "
            "the true constant lies between the two.",
            "worst admitted: the largest error the rule with that constant admits over every "
            "integer n up to the atlas's end and the p checked by atlas.regions.rule_worst.",
            f"gives away: the share of the grid's {self.safe_cells:,} cells with error <= tol "
            "that the rule refuses (cells, so the grid's density counts); the bands alone "
            f"refuse {self.bands_refused:.1%}.",
            f"Caution: {CAUTION}",
        ]

    def to_markdown(self):
        b = self.bands
        head = ["family", "constant", "needed at the p checked", "worst admitted", "at n",
                "at p", "gives away"]  # fmt: skip
        lines = [f"### Rules that guarantee {b.metric} error <= {format_p(b.tol)} "
                 f"({b.method})", "", "| " + " | ".join(head) + " |",
                 "|" + "---|" * len(head)]  # fmt: skip
        for row in self.rows:
            w = row.worst
            cells = [row.family.name, _show_constant(row.constant, row.stricter),
                     _show_constant(row.at_points, row.stricter),
                     "—" if w is None or w.worst is None else f"{w.worst:.4g}",
                     "—" if w is None or w.n is None else f"{w.n:,}",
                     "—" if w is None or w.p is None else f"{w.p:.4g}",
                     "—" if row.refused is None else f"{row.refused:.1%}"]  # fmt: skip
            lines.append("| " + " | ".join(cells) + " |")
        lines += [""] + [f"- {note}" for note in self.notes()]
        return "\n".join(lines) + "\n"

    def as_dict(self):
        b = self.bands
        rows = []
        for row in self.rows:
            w = row.worst
            rows.append({
                "family": row.family.text, "name": row.family.name, "constant": row.constant,
                "stricter": row.stricter, "needed_at_points": row.at_points,
                "rule": None if row.constant is None else row.family.written(row.constant),
                "worst_error": None if w is None else w.worst,
                "worst_n": None if w is None else w.n, "worst_p": None if w is None else w.p,
                "checked": None if w is None else dict(w.as_dict(), words=w.checked()),
                "guaranteed": row.guaranteed, "refused_share": row.refused,
            })  # fmt: skip
        return {"tol": b.tol, "method": b.method, "metric": b.metric, "rows": rows,
                "bands_refused_share": self.bands_refused, "safe_cells": self.safe_cells,
                "bands_checked": b.checked(),
                "atlas": {"source": b.atlas_source, "checksum": b.atlas_checksum},
                "caution": self.notes()[-1]}  # fmt: skip

    def render(self, fmt):
        """The table as ``"md"`` or ``"json"`` text."""
        import json

        if fmt not in ("md", "json"):
            raise ValueError(f"`format` must be one of 'md', 'json'; got {fmt!r}.")
        if fmt == "md":
            return self.to_markdown()
        return json.dumps(self.as_dict(), indent=1, allow_nan=False) + "\n"


def _show_constant(c, stricter):
    if c is None:
        return "none"
    return f"{c:.{DIGITS}g}" if stricter == "larger" else f"<= {c:.{DIGITS}g}"


def _round_outward(value, up):
    """``value`` to DIGITS significant digits, up (``up``) or down, never past it."""
    if value == 0.0:
        return 0.0
    if up:
        return bound_up(value, DIGITS)
    out = float(f"{value:.{DIGITS}g}")
    if out > value:
        unit = 10.0 ** (math.floor(math.log10(out)) - DIGITS + 1)
        out = float(f"{out - unit:.{DIGITS}g}")
    return out


def _checks(bands, grid_n, per_point):
    """Flat (n, p) at which an admitted n would break the guarantee (module notes)."""
    end = int(grid_n[-1])
    ns, ps = [], []
    if per_point:
        items = [(t.p, t.n if (t.n is not None and t.exact) else end + 1) for t in bands.points]
    else:
        ps_all = np.array([t.p for t in bands.points])
        j = np.clip(np.searchsorted(bands.edges, ps_all, "right") - 1, 0, bands.n_min.size - 1)
        items = []
        for p, b in zip(ps_all.tolist(), j.tolist(), strict=True):
            limits = [bands.n_min[b]] + ([bands.n_min[b - 1]] if p == bands.edges[b] and b else [])
            limit = end + 1 if min(limits) == 0 else max(limits)
            items.append((p, int(limit)))
    for p, limit in items:
        below = grid_n[grid_n < limit]
        if limit > 1:
            below = np.append(below, limit - 1)
        ns.append(below)
        ps.append(np.full(below.size, p))
    return np.concatenate(ns), np.concatenate(ps)


def solve_constant(family, stricter, n_check, p_check):
    """The constant by bisection: the smallest c (``stricter`` "larger", else the largest) whose
    rule admits none of the pairs ``(n_check, p_check)``, rounded outward to ``DIGITS`` digits;
    None when no c does (``math.inf`` for a family that admits none at any c tried)."""

    def valid(c):
        return not family.at(c)(n_check, p_check).any()

    if stricter == "larger":
        if valid(0.0):
            return 0.0
        lo, hi = 0.0, 1.0
        while not valid(hi):
            lo, hi = hi, hi * 2.0
            if hi > 1e300:
                return None
        for _ in range(_BISECTIONS):
            mid = (lo + hi) / 2.0
            lo, hi = (lo, mid) if valid(mid) else (mid, hi)
        c = _round_outward(hi, True)
        while not valid(c):  # pragma: no cover - the rounding keeps c on the valid side
            c = math.nextafter(c, math.inf)
        return c
    lo, hi = 1.0, 1.0  # valid at lo, not at hi
    if valid(1.0):
        while valid(hi):
            lo, hi = hi, hi * 2.0
            if hi > 1e300:
                return math.inf
    else:
        while not valid(lo):
            hi, lo = lo, lo / 2.0
            if lo < 1e-300:
                return None
    for _ in range(_BISECTIONS):
        mid = (lo + hi) / 2.0
        lo, hi = (mid, hi) if valid(mid) else (lo, mid)
    c = _round_outward(lo, False)
    while not valid(c):  # pragma: no cover
        c = math.nextafter(c, -math.inf)
    return c


def constant_direction(family, grid_n, grid_p):
    """ "larger" when a larger c admits fewer grid cells, else "smaller"."""
    n, p = grid_n[:, None], grid_p[None, :]
    for a, b in ((1.0, 10.0), (0.1, 100.0), (0.001, 1000.0)):
        count_a, count_b = int(family.at(a)(n, p).sum()), int(family.at(b)(n, p).sum())
        if count_a != count_b:
            return "larger" if count_b < count_a else "smaller"
    raise ValueError(
        f"`family` must admit more or fewer cells of the grid as c changes; {family.text!r} "
        "admits as many at c = 0.001, 1 and 1000."
    )


def parse_families(families=None):
    """The families as :class:`Family`: default :data:`FAMILIES`, a str parsed by
    :func:`parse_family` (named as in :data:`FAMILIES` when it is one of them)."""
    names = dict(FAMILIES)
    out = []
    for item in FAMILIES if families is None else families:
        if isinstance(item, Family):
            out.append(item)
            continue
        text = item[0] if isinstance(item, tuple) else item
        out.append(parse_family(text, name=names.get(text)))
    return out


def rule_constants(atlas, tol, *, method="normal_cc", metric="interval", families=None,
                   bands=None):  # fmt: skip
    """For each family of rules, the constant that guarantees ``tol`` over the whole atlas.

    Parameters
    ----------
    atlas : atlas.Atlas
    tol : float
        0 < tol < inf.
    method, metric : str, optional
    families : sequence of str or Family, optional
        Default :data:`FAMILIES`; a str is parsed by :func:`parse_family`.
    bands : ThresholdBands, optional
        Computed by :func:`threshold_bands` when not given (the slow part: minutes on
        the default atlas); pass them to ask for several families at one tolerance.

    Returns
    -------
    RuleConstants

    Raises
    ------
    ValueError
        For a bad tol, method, metric or family, or bands of another question.

    Examples
    --------
    >>> from atlas import Atlas, build_atlas
    >>> at = Atlas(build_atlas(n="1:100", p="0.4,0.5,0.6", methods="normal_cc", progress=False))
    >>> out = rule_constants(at, 0.01, families=["n*p*q >= c"])
    >>> row = out.rows[0]
    >>> row.constant, row.at_points  # band [0.4, 0.5]: N = 23, (23 - 1) / 4 = 5.5 at p = 1/2
    (5.51, 5.29)
    >>> row.guaranteed  # at p = 0.4 alone: (23 - 1) * 0.24 = 5.28
    True
    """
    from atlas.regions import rule_worst

    if bands is None:
        bands = threshold_bands(atlas, tol, method=method, metric=metric)
    elif (bands.tol, bands.method, bands.metric) != (float(tol), method, metric):
        raise ValueError(
            f"`bands` must answer the same question; got tol={bands.tol!r}, "
            f"method={bands.method!r}, metric={bands.metric!r}."
        )
    parsed = parse_families(families)
    grid_n, grid_p = atlas.n, atlas.p
    errors = np.asarray(atlas.error(grid_n[:, None], grid_p[None, :], method=bands.method,
                                    metric=bands.metric), dtype=float)  # fmt: skip
    safe = errors <= bands.tol
    safe_count = int(safe.sum())

    def refused(admitted):
        return None if not safe_count else float((safe & ~admitted).sum()) / safe_count

    band_checks = _checks(bands, grid_n, per_point=False)
    point_checks = _checks(bands, grid_n, per_point=True)
    rows = []
    for family in parsed:
        stricter = constant_direction(family, grid_n, grid_p)
        # A constant whose rule admits no cell of the grid is no rule: none guarantees tol.
        c, at_points = (
            x if x is not None and family.at(x)(grid_n[:, None], grid_p[None, :]).any() else None
            for x in (solve_constant(family, stricter, *band_checks),
                      solve_constant(family, stricter, *point_checks))
        )  # fmt: skip
        worst = share = None
        if c is not None and math.isfinite(c):
            rule = family.at(c)
            stored = {(bands.method, bands.metric): errors}
            worst = rule_worst(rule, grid_n, grid_p, stored, (bands.method,), (bands.metric,))[0]
            share = refused(rule(grid_n[:, None], grid_p[None, :]))
        rows.append(RuleConstant(family, c, stricter, at_points, worst, share, bands.tol))
    bands_refused = refused(bands.within(grid_n[:, None], grid_p[None, :]))
    return RuleConstants(tuple(rows), bands, bands_refused, safe_count)
