"""Region answers that hold between the grid's points: rule audits and safe cells.

Two questions are asked of a whole region of (n, p), not of one point:

- :func:`rule_worst`: the worst error a rule of thumb admits over every integer n of the
  atlas's n range and every p of its p range, not only at grid cells.
- :func:`safe_cells`: grid cells (n_i, p_j) at which the error is within a tolerance at n_i for
  the p of the whole p-cell around p_j, not only at p_j.

**The worst error a rule admits.** At each p checked, the admitted integers n are found from
the rule at the grid's n and, in every gap between grid n where the rule's answer changes, at
every integer of the gap (a gap whose two ends the rule answers alike is taken to answer alike
throughout). The worst usually sits on the boundary (the smallest admitted integer n), so the
engine evaluates, at each p checked, the first ``NEIGHBOURS + 1`` admitted integers of each run
of admitted n. The p checked are the grid p and, in ``REFINE_ROUNDS`` rounds, log-odds
midpoints between neighbours whose boundary errors differ by more than ``REFINE_SPREAD`` of
the worst so far, or come within that share of it (at most ``REFINE_PER_ROUND`` per round).
At every grid p, every larger admitted integer is then covered: the cube's values at grid n,
and between them the one-step bound of :mod:`atlas.bounds`,
W(a + m) <= W(a) + 2 E_a + 2 m rho_a (``cdf``: max(C(a), E_a) + m rho_a), certifies that no
integer of a gap exceeds the worst so far; a gap it does not certify is bisected by the engine,
and an integer found above the worst becomes the worst. Methods without a closed-form step
bound (``camp_paulson``, ``peizer_pratt``) are checked at the evaluated n only; so is a gap
that would need more than ``GAP_BUDGET`` evaluations. The p between those checked are not
computed: the claim there rests on the refinement, and the tests draw random off-grid (n, p)
against it.

**Safe cells.** A cell (n_i, p_j) is safe when the error at n_i is within tol at p_j, at both
edges of its p-cell (the log-odds midpoints to its neighbours; the axis ends for the first and
last cell) and at the points added by bisection between checked points whose errors differ by
more than ``CELL_SPREAD`` tol or of which one is above ``(1 - CELL_SPREAD)`` tol
(``CELL_ROUNDS`` rounds). A cell whose large-n bound (Berry-Esseen with Shevtsova's constant,
:func:`atlas.bounds.tail_bound`) is within tol at both edges is safe for *every* p of the cell
without evaluation: that bound is a non-increasing function of pq (and, for the Edgeworth
terms, of |q - p| growing as pq falls), so over a cell it is largest at one of its edges
(``edgeworth2_cc``: the sum of the two edges' bounds is used, every term being non-negative).
"""

import math
from dataclasses import dataclass, field

import numpy as np

from atlas.bounds import extension_bound, step_bound, tail_bound
from atlas.engine import evaluate

__all__ = ["CELL_ROUNDS", "CELL_SPREAD", "GAP_BUDGET", "NEIGHBOURS", "REFINE_PER_ROUND",
           "REFINE_ROUNDS", "REFINE_SPREAD", "RuleWorst", "admitted_runs", "cell_edges",
           "rule_worst", "safe_cells"]  # fmt: skip

NEIGHBOURS = 2  # admitted integers after the first one evaluated at each p checked
REFINE_ROUNDS = 5
REFINE_PER_ROUND = 16
REFINE_SPREAD = 0.1
GAP_BUDGET = 0  # engine evaluations per gap between grid n (0: uncertified gaps are left open)
CELL_ROUNDS = 3
CELL_SPREAD = 0.1
_SLACK = 1e-12  # rounding of the bounds and of the engine's values


def _logit(p):
    return math.log(p / (1.0 - p))


def _mid(pa, pb):
    """The log-odds midpoint of two p."""
    return 1.0 / (1.0 + math.exp(-(_logit(pa) + _logit(pb)) / 2.0))


def admitted_runs(rule, grid_n, p):
    """The runs ``(first, last)`` of integers n from 1 to ``grid_n[-1]`` that ``rule`` admits at p.

    The rule is evaluated at the grid's n, at every integer below the first grid n, and at every
    integer of each gap between grid n where its answer changes; a gap whose ends it answers
    alike is taken to answer alike throughout.

    Examples
    --------
    >>> from atlas.rules import parse_rule
    >>> admitted_runs(parse_rule("n*p >= 5"), np.array([1, 10, 100]), 0.3)
    [(17, 100)]
    """
    grid_n = np.asarray(grid_n, dtype=np.int64)
    mask = np.asarray(rule(grid_n, p), dtype=bool)
    pieces = []  # (first, last, admitted), in order, covering 1..grid_n[-1]
    prev = 0
    changes = np.flatnonzero(mask[1:] != mask[:-1]) + 1
    for i in [0, *changes.tolist()]:
        lo = 0 if i == 0 else int(grid_n[i - 1])
        if lo > prev:  # grid n between the last scanned gap and this one: as the grid says
            pieces.append((prev + 1, lo, bool(mask[i - 1])))
        seg = np.arange(lo + 1, int(grid_n[i]) + 1, dtype=np.int64)
        adm = np.asarray(rule(seg, p), dtype=bool)
        cuts = np.flatnonzero(adm[1:] != adm[:-1]) + 1
        starts = [0, *cuts.tolist()]
        ends = [*cuts.tolist(), seg.size]
        pieces += [
            (int(seg[a]), int(seg[b - 1]), bool(adm[a])) for a, b in zip(starts, ends, strict=True)
        ]
        prev = int(grid_n[i])
    if prev < int(grid_n[-1]):
        pieces.append((prev + 1, int(grid_n[-1]), bool(mask[-1])))
    runs = []
    for first, last, ok in pieces:
        if not ok:
            continue
        if runs and runs[-1][1] == first - 1:
            runs[-1] = (runs[-1][0], last)
        else:
            runs.append((first, last))
    return runs


@dataclass
class RuleWorst:
    """The worst error a rule admits, for one method and metric, with what was checked.

    Attributes
    ----------
    method, metric : str
    worst : float or None
        The largest error found at an admitted (n, p); None if the rule admits none.
    n : int or None
    p : float or None
        Where it was found.
    p_checked : int
        p at which the boundary (the first admitted integers) was evaluated.
    p_refined : int
        Of those, the p added between grid p.
    grid_p_bounded : int
        Grid p at which every admitted integer n is covered (grid values, the one-step bound,
        the engine).
    grid_p_open : int
        Grid p with admitted integers between grid n left unchecked (no step bound for the
        method, or more than ``GAP_BUDGET`` evaluations needed).
    evaluations : int
        Engine evaluations of this method (boundary points shared by a rule's rows are counted
        in each row).
    """

    method: str
    metric: str
    worst: object = None
    n: object = None
    p: object = None
    p_checked: int = 0
    p_refined: int = 0
    grid_p_bounded: int = 0
    grid_p_open: int = 0
    evaluations: int = 0
    bounded: bool = True  # whether the method has a closed-form step bound

    def offer(self, value, n, p):
        """Take (n, p) as the worst when its value is larger (a NaN counts as worst)."""
        if (
            self.worst is None
            or value > self.worst
            or (math.isnan(value) and not math.isnan(self.worst))
        ):
            self.worst, self.n, self.p = float(value), int(n), float(p)

    def checked(self):
        """What was checked, in words."""
        text = (f"boundary evaluated at {self.p_checked} p ({self.p_refined} between grid p): "
                f"the first {NEIGHBOURS + 1} admitted integers n of each run")  # fmt: skip
        total = self.grid_p_bounded + self.grid_p_open
        if not self.bounded:
            return (text + f"; larger n at the {total} grid p checked at grid n and the n "
                    "evaluated only (no step bound for this method)")  # fmt: skip
        text += (
            f"; every larger admitted integer bounded at {self.grid_p_bounded} of {total} grid p"
        )
        if self.grid_p_open:
            text += f" ({self.grid_p_open} with gaps checked at the n evaluated only)"
        return text

    def as_dict(self):
        return {
            "p_checked": self.p_checked,
            "p_refined": self.p_refined,
            "grid_p_bounded": self.grid_p_bounded,
            "grid_p_open": self.grid_p_open,
            "engine_evaluations": self.evaluations,
            "step_bound": self.bounded,
        }


@dataclass
class _Values:
    """Errors at (n, p) for the audited methods: from the cube on the grid, else the engine."""

    grid_n: np.ndarray
    grid_p: np.ndarray
    stored: dict  # (method, metric) -> (len(n), len(p)) array
    methods: tuple
    cache: dict = field(default_factory=dict)
    evaluations: int = 0

    def get(self, n, p):
        """{(method, metric): value} at (n, p)."""
        key = (int(n), float(p))
        out = self.cache.get(key)
        if out is None:
            i = int(np.searchsorted(self.grid_n, n))
            j = int(np.searchsorted(self.grid_p, p))
            on = (i < self.grid_n.size and self.grid_n[i] == n and j < self.grid_p.size
                  and self.grid_p[j] == p)  # fmt: skip
            if on:
                out = {k: float(v[i, j]) for k, v in self.stored.items()}
            else:
                ev = evaluate(int(n), [float(p)], methods=self.methods)
                self.evaluations += 1
                out = {}
                for r, m in enumerate(self.methods):
                    out[(m, "interval")] = float(ev.interval[r, 0])
                    out[(m, "cdf")] = float(ev.cdf[r, 0])
            self.cache[key] = out
        return out


def rule_worst(rule, grid_n, grid_p, stored, methods, metrics):
    """The worst error ``rule`` admits over the atlas's (n, p) range: see the module notes.

    Parameters
    ----------
    rule : atlas.rules.Expression
        A parsed rule.
    grid_n, grid_p : numpy.ndarray
        The atlas's axes (int64, float64), increasing.
    stored : dict
        ``(method, metric) -> errors`` on the grid, shape (len(grid_n), len(grid_p)).
    methods, metrics : tuple of str

    Returns
    -------
    list of RuleWorst
        One per (method, metric), methods outer.
    """
    grid_n = np.asarray(grid_n, dtype=np.int64)
    grid_p = np.asarray(grid_p, dtype=np.float64)
    values = _Values(grid_n, grid_p, stored, tuple(methods))
    keys = [(m, e) for m in methods for e in metrics]
    rows = {k: RuleWorst(k[0], k[1]) for k in keys}
    # The grid cells the rule admits (as before).
    mask = np.asarray(rule(grid_n[:, None], grid_p[None, :]), dtype=bool)
    for k in keys:
        if mask.any():
            admitted = np.where(mask, stored[k], -np.inf)
            admitted = np.where(np.isnan(admitted), np.inf, admitted)
            i, j = np.unravel_index(int(np.argmax(admitted)), admitted.shape)
            rows[k].offer(float(stored[k][i, j]), grid_n[i], grid_p[j])
    runs_at = {}
    boundary = {}  # p -> {key: largest boundary value}, -inf where nothing is admitted

    def check(p):
        runs = runs_at[p] = admitted_runs(rule, grid_n, p)
        best = dict.fromkeys(keys, -math.inf)
        for first, last in runs:
            for n in range(first, min(last, first + NEIGHBOURS) + 1):
                got = values.get(n, p)
                for k in keys:
                    rows[k].offer(got[k], n, p)
                    best[k] = max(best[k], got[k])
        boundary[p] = best

    for p in grid_p.tolist():
        check(p)
    refined = 0
    for _ in range(REFINE_ROUNDS):
        ps = sorted(boundary)
        new = []
        for pa, pb in zip(ps[:-1], ps[1:], strict=True):
            score = 0.0
            for k in keys:
                top = rows[k].worst
                a, b = boundary[pa][k], boundary[pb][k]
                if top is None or not top > 0 or (a == -math.inf and b == -math.inf):
                    continue
                a, b = max(a, 0.0), max(b, 0.0)
                if abs(a - b) > REFINE_SPREAD * top or max(a, b) >= (1 - REFINE_SPREAD) * top:
                    score = max(score, max(a, b) / top)
            mid = _mid(pa, pb)
            if score > 0 and pa < mid < pb and pb - pa > 1e-9 * pb:
                new.append((score, mid))
        if not new:
            break
        new.sort(reverse=True)
        for _, mid in new[:REFINE_PER_ROUND]:
            check(mid)
            refined += 1
    for k in keys:
        rows[k].p_checked, rows[k].p_refined = len(boundary), refined
    # Every larger admitted integer at each grid p.
    for k in keys:
        _cover_larger(rows[k], rule, grid_n, grid_p, stored[k], runs_at, values)
    for k in keys:
        rows[k].evaluations = values.evaluations
    return [rows[k] for k in keys]


def _cover_larger(row, rule, grid_n, grid_p, column_values, runs_at, values):
    """Raise ``row`` to the worst admitted integer at each grid p, or count the p as open."""
    method, metric = row.method, row.metric
    row.bounded = step_bound(method, [10], 0.3) is not None
    key = (method, metric)
    for j, p in enumerate(grid_p.tolist()):
        runs = runs_at[p]
        if not runs:
            row.grid_p_bounded += 1
            continue
        column = column_values[:, j]
        if not row.bounded:
            row.grid_p_open += 1
            continue
        open_gap = False
        for first, last in runs:
            inside = (grid_n >= first) & (grid_n <= last)
            points = sorted(set(grid_n[inside].tolist()) | {first, last}
                            | set(range(first, min(last, first + NEIGHBOURS) + 1)))  # fmt: skip
            known = {}
            for n in points:
                i = int(np.searchsorted(grid_n, n))
                known[n] = float(column[i]) if grid_n[i] == n else values.get(n, p)[key]
                row.offer(known[n], n, p)
            a = np.array(points[:-1], dtype=np.int64)
            b = np.array(points[1:], dtype=np.int64)
            wide = b - a > 1
            if not wide.any():
                continue
            a, b = a[wide], b[wide]
            rho = step_bound(method, a, p)
            ext = extension_bound(method, a, p, metric)
            va = np.array([known[n] for n in a.tolist()])
            ok = _within(va, ext, (b - a - 1) * rho, metric, row.worst)
            if not ok.all():  # bisection of such gaps: see GAP_BUDGET (0: left open, said)
                open_gap = open_gap or not all(
                    _bisect(row, lo, hi, p, known, values, key)
                    for lo, hi in zip(a[~ok].tolist(), b[~ok].tolist(), strict=True)
                )
        if open_gap:
            row.grid_p_open += 1
        else:
            row.grid_p_bounded += 1


def _within(va, ext, steps, metric, level):
    """Whether the one-step bound keeps every integer of the gaps within ``level``."""
    if metric == "interval":
        bound = va + 2.0 * ext + 2.0 * steps
    else:
        bound = np.maximum(va, ext) + steps
    return bound + _SLACK <= level


def _bisect(row, a, b, p, known, values, key):
    """Cover the integers strictly between a and b (admitted) by bisection; False if left."""
    spent = 0
    stack = [(a, b)]
    while stack:
        lo, hi = stack.pop()
        if hi - lo <= 1:
            continue
        rho = step_bound(row.method, [lo], p)
        ext = extension_bound(row.method, [lo], p, row.metric)
        if _within(np.array([known[lo]]), ext, (hi - lo - 1) * rho, row.metric, row.worst)[0]:
            continue
        if spent >= GAP_BUDGET:
            return False
        c = (lo + hi) // 2
        known[c] = values.get(c, p)[key]
        spent += 1
        row.offer(known[c], c, p)
        stack += [(lo, c), (c, hi)]
    return True


# ---- safe cells ------------------------------------------------------------------------------


def cell_edges(grid_p):
    """The edges of the p-cells: log-odds midpoints between grid p, the axis ends outside.

    Examples
    --------
    >>> [round(float(x), 4) for x in cell_edges(np.array([0.1, 0.5, 0.9]))]
    [0.1, 0.25, 0.75, 0.9]
    """
    grid_p = np.asarray(grid_p, dtype=np.float64)
    logit = np.log(grid_p / (1.0 - grid_p))
    mids = 1.0 / (1.0 + np.exp(-(logit[:-1] + logit[1:]) / 2.0))
    return np.concatenate([grid_p[:1], mids, grid_p[-1:]])


def _cell_tail(method, n, pa, pb, metric):
    """A bound on the error at n for every p in [pa, pb] (module notes), or None."""
    ta = tail_bound(method, [n], pa, metric)
    if ta is None or method == "poisson":
        return None if ta is None else max(min(pa, 1 - pa), min(pb, 1 - pb))
    tb = tail_bound(method, [n], pb, metric)
    if method == "edgeworth2_cc":
        return float(ta[0] + tb[0])
    return float(max(ta[0], tb[0]))


def safe_cells(grid_n, grid_p, errors, tol, *, method, metric):
    """Grid cells safe for every p of their p-cell as checked: see the module notes.

    Parameters
    ----------
    grid_n, grid_p : numpy.ndarray
        The atlas's axes.
    errors : numpy.ndarray
        Errors at the grid's cells, shape (len(grid_n), len(grid_p)).
    tol : float
    method, metric : str

    Returns
    -------
    safe : numpy.ndarray of bool
        Shape of ``errors``.
    stats : dict
        ``evaluated`` (p points computed by the engine, over all n), ``refined`` (of those,
        added by bisection), ``bounded_cells`` (cells safe by the large-n bound).
    """
    grid_n = np.asarray(grid_n, dtype=np.int64)
    errors = np.asarray(errors, dtype=np.float64)
    edges = cell_edges(grid_p)
    safe = errors <= tol
    stats = {"evaluated": 0, "refined": 0, "bounded_cells": 0}
    for i, n in enumerate(grid_n.tolist()):
        row = safe[i]
        if not row.any():
            continue
        cand = np.flatnonzero(row)
        bounded = np.zeros(grid_p.size, dtype=bool)
        for j in cand.tolist():
            bound = _cell_tail(method, n, float(edges[j]), float(edges[j + 1]), metric)
            bounded[j] = bound is not None and bound + _SLACK <= tol
        stats["bounded_cells"] += int(bounded.sum())
        todo = cand[~bounded[cand]]
        if not todo.size:
            continue
        # Edges needed: both edges of every cell still to check (the axis ends are grid p).
        need = np.unique(np.concatenate([todo, todo + 1]))
        inner = need[(need > 0) & (need < grid_p.size)]
        known = {float(grid_p[j]): float(errors[i, j]) for j in todo.tolist()}
        if inner.size:
            ev = evaluate(n, edges[inner], methods=(method,))
            got = ev.interval[0] if metric == "interval" else ev.cdf[0]
            stats["evaluated"] += int(inner.size)
            known.update(zip(edges[inner].tolist(), got.tolist(), strict=True))
        known[float(edges[0])] = float(errors[i, 0])
        known[float(edges[-1])] = float(errors[i, -1])
        # Pieces of each cell between checked points, bisected where the errors call for it.
        pieces = {j: [float(edges[j]), float(grid_p[j]), float(edges[j + 1])] for j in todo}
        for _ in range(CELL_ROUNDS):
            new = []
            for pts in pieces.values():
                if not all(known[x] <= tol for x in pts):
                    continue
                for pa, pb in zip(pts[:-1], pts[1:], strict=True):
                    va, vb = known[pa], known[pb]
                    near = max(va, vb) > (1 - CELL_SPREAD) * tol
                    if (abs(va - vb) > CELL_SPREAD * tol or near) and pb - pa > 1e-12 * pb:
                        new.append(_mid(pa, pb))
            new = sorted(set(new) - set(known))
            if not new:
                break
            ev = evaluate(n, new, methods=(method,))
            got = ev.interval[0] if metric == "interval" else ev.cdf[0]
            stats["evaluated"] += len(new)
            stats["refined"] += len(new)
            known.update(zip(new, got.tolist(), strict=True))
            for j, pts in pieces.items():
                lo, hi = pts[0], pts[-1]
                pieces[j] = sorted(set(pts) | {x for x in new if lo <= x <= hi})
        for j, pts in pieces.items():
            row[j] = all(known[x] <= tol for x in pts)
    return safe, stats
