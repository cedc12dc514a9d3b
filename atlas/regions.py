"""Region answers that hold between the grid's points: rule audits and safe cells.

Two questions are asked of a whole region of (n, p), not of one point:

- :func:`rule_worst`: the worst error a rule of thumb admits over every integer n of the
  atlas's n range and every p of its p range, not only at grid cells.
- :func:`safe_cells`: grid cells at which the error is within a tolerance for every integer n
  of the cell's n-range and every p of its p-cell, not only at the grid point.

**Between grid n: the one-step bound.** At one p, a value W(a) bounds every integer after a by
the one-step bound of :mod:`atlas.bounds`, W(a + m) <= W(a) + 2 E_a + 2 m rho_a (``cdf``:
max(C(a), E_a) + m rho_a) (:func:`gap_certified`). A gap it does not certify is bisected: the
engine evaluates its midpoint and each half is certified from its own lower end, within a
budget of engine evaluations. Methods without a closed-form step bound (``camp_paulson``,
``peizer_pratt``: no bound is derived for them) are checked at the n evaluated only, and every
answer says so. Values read from a float32 cube are raised by their rounding (2^-23 relative)
and every bound by ``_SLACK`` before a comparison.

**The worst error a rule admits.** At each p checked, the admitted integers n are found from
the rule at the grid's n and, in every gap between grid n where the rule's answer changes, at
every integer of the gap (a gap whose two ends the rule answers alike is taken to answer alike
throughout). The worst usually sits on the boundary (the smallest admitted integer n), so the
engine evaluates, at each p checked, the first ``NEIGHBOURS + 1`` admitted integers of each run
of admitted n. The p checked are the grid p and, in ``REFINE_ROUNDS`` rounds, log-odds
midpoints between neighbours whose boundary errors differ by more than ``REFINE_SPREAD`` of
the worst so far, or come within that share of it (at most ``REFINE_PER_ROUND`` per round).
At every grid p, every larger admitted integer is then covered by the cube's values at grid n
and, between them, the one-step bound: a gap it does not certify at the level of the worst so
far is bisected (``GAP_BUDGET`` evaluations per gap, ``ROW_BUDGET`` per answer; an integer
found above the worst becomes the worst). Gaps left when a budget is spent are listed in the
answer (:attr:`RuleWorst.open_gaps`). The p between those checked are not computed: the claim
there rests on the refinement, and the tests draw random off-grid (n, p) against it.

**Safe cells.** The cell of grid point (n_i, p_j) holds the integers n_i <= n < n_{i+1} (n_i
alone at the atlas's end) and the p of its p-cell, between the log-odds midpoints to the
neighbouring grid p (the axis ends for the first and last cell). It is safe when error +
accuracy <= tol (conservative, as verdicts are) at every point checked:

1. *Large n.* A cell whose large-n bound (Berry-Esseen with Shevtsova's constant,
   :func:`atlas.bounds.tail_bound`) at n_i is within tol at both p-edges is safe for every n
   >= n_i and every p of the cell without evaluation: that bound is non-increasing in n and
   in pq (and, for the Edgeworth terms, in |q - p| growing as pq falls), so over a cell it is
   largest at one of its edges (``edgeworth2_cc``: the sum of the two edges' bounds is used,
   every term being non-negative).
2. *In p, at n_i.* The cube gives the grid p. A p-edge is evaluated by the engine unless the
   two grid values beside it are both within ``(1 - CELL_SPREAD)`` tol and differ by at most
   ``CELL_SPREAD`` tol: there the error is taken to vary smoothly (on the default atlas no
   p-edge exceeds the larger of its two grid neighbours by more than 3 per cent of it, from a
   full evaluation of every edge for normal_cc and camp_paulson, both metrics; 10 per cent is
   allowed). A piece between two checked p of a cell (half a grid step) whose larger end is
   above tol / (1 + ``CELL_NEAR``) is then evaluated at 2^``CELL_ROUNDS`` - 1 points evenly
   spaced in log-odds, and every point must be within tol: a piece is allowed a rise above its
   ends in proportion to its width (a kink rises at most so, a smooth bump in proportion to
   the width's square), 10 per cent at a grid step, 5 at half of it, 1.25 at an eighth.
3. *In n, between n_i and n_{i+1}.* At every p point checked in 2, the one-step bound from
   n_i certifies the integers of the n-range; where it does not, the range is bisected in up
   to ``N_ROUNDS`` rounds (the engine at the midpoints, for all such p of the row at once),
   if a piece 2^-``N_ROUNDS`` as long could be certified (or the range is short enough for the
   rounds to reach every integer) and fewer than ``N_BUDGET`` points
   have been computed so. A cell still not certified is counted unsafe (said in the answer).
   For methods without a step bound the n-range of a cell is checked at n_i only (counted and
   said).
"""

import math
from dataclasses import dataclass, field

import numpy as np

from atlas.bounds import extension_bound, extension_cap, step_bound, tail_bound
from atlas.engine import evaluate

__all__ = ["CELL_NEAR", "CELL_ROUNDS", "CELL_SPREAD", "GAP_BUDGET", "NEIGHBOURS", "N_BUDGET",
           "N_ROUNDS", "REFINE_PER_ROUND", "REFINE_ROUNDS", "REFINE_SPREAD", "ROW_BUDGET",
           "RuleWorst", "admitted_runs", "cell_edges", "gap_certified", "has_step_bound",
           "region_words", "rule_worst", "safe_cells"]  # fmt: skip

NEIGHBOURS = 2  # admitted integers after the first one evaluated at each p checked
REFINE_ROUNDS = 5
REFINE_PER_ROUND = 16
REFINE_SPREAD = 0.1
GAP_BUDGET = 16  # engine evaluations per gap between grid n before it is left open (said)
ROW_BUDGET = 200  # engine evaluations for the gaps of one rule audit answer
CELL_ROUNDS = 2  # a piece near tol is cut into 2^CELL_ROUNDS
CELL_SPREAD = 0.1
CELL_NEAR = 0.05  # a piece whose larger end is above tol / (1 + CELL_NEAR) is cut
N_ROUNDS = 6  # rounds of bisection of a cell's n-range (up to 63 points per p)
N_BUDGET = 5_000  # engine points between grid n per safe_cells call; then cells count unsafe
_SLACK = 1e-12  # rounding of the bounds and of the engine's values
_FLOAT32 = 2.0**-23  # a float32 value is within this share of itself from the float64 one
_EXTENSIONS = {}  # (method, metric, p, n) -> E_n, kept across calls (grid n recur)
_EXTENSIONS_MAX = 400_000


def _logit(p):
    return math.log(p / (1.0 - p))


def _mid(pa, pb):
    """The log-odds midpoint of two p."""
    return 1.0 / (1.0 + math.exp(-(_logit(pa) + _logit(pb)) / 2.0))


def has_step_bound(method):
    """Whether :func:`atlas.bounds.step_bound` knows a closed-form bound for ``method``."""
    return step_bound(method, [10], 0.3) is not None


def _extensions(method, metric, n, p):
    """E_n (:func:`atlas.bounds.extension_bound`) at cells (n, p), flat arrays; cached."""
    out = np.empty(n.size)
    missing = []
    for idx, key in enumerate(zip(n.tolist(), p.tolist(), strict=True)):
        value = _EXTENSIONS.get((method, metric, key[1], key[0]))
        if value is None:
            missing.append(idx)
        else:
            out[idx] = value
    if missing:
        missing = np.array(missing)
        if len(_EXTENSIONS) > _EXTENSIONS_MAX:
            _EXTENSIONS.clear()
        for pu in np.unique(p[missing]).tolist():
            rows = missing[p[missing] == pu]
            got = extension_bound(method, n[rows], pu, metric)
            out[rows] = got
            for m, value in zip(n[rows].tolist(), got.tolist(), strict=True):
                _EXTENSIONS[(method, metric, pu, m)] = value
    return out


def gap_certified(method, metric, a, count, p, upper, level):
    """Whether the one-step bound from a keeps the next ``count`` integers within ``level``.

    Parameters
    ----------
    method, metric : str
    a, count : array_like of int
        The known n and how many integers after it are to be covered.
    p : array_like of float
        The p of each gap.
    upper : array_like of float
        An upper bound on the true error at a (the value plus its accuracy).
    level : float or array_like of float

    Returns
    -------
    numpy.ndarray of bool
        True where W(a + m) + ``_SLACK`` <= level is proven for m = 1..count (module notes);
        always True for count = 0, never where the method has no step bound.

    Examples
    --------
    >>> gap_certified("normal_cc", "interval", [10**6], [10**4], [0.3], [0.0001], 0.001).tolist()
    [True]
    """
    a, count, p, upper, level = np.broadcast_arrays(
        np.asarray(a, dtype=np.int64), np.asarray(count, dtype=np.int64),
        np.asarray(p, dtype=np.float64), np.asarray(upper, dtype=np.float64),
        np.asarray(level, dtype=np.float64))  # fmt: skip
    a, count, p, upper, level = (x.ravel() for x in (a, count, p, upper, level))
    ok = count <= 0
    rho = step_bound(method, a, p)
    if rho is None:
        return ok
    grow = (2.0 if metric == "interval" else 1.0) * count * rho
    # The extension term E_a is non-negative: without it the bound is already a lower one.
    trial = ~ok & (upper + grow + _SLACK <= level)
    for exact in (False, True):  # a cheap cap on E_a first, E_a itself where it fails
        if not trial.any():
            break
        ext = extension_cap(method, a[trial], p[trial], metric) if not exact else None
        if ext is None:
            ext, exact = _extensions(method, metric, a[trial], p[trial]), True
        if metric == "interval":
            bound = upper[trial] + 2.0 * ext + grow[trial]
        else:
            bound = np.maximum(upper[trial], ext) + grow[trial]
        ok[trial] = bound + _SLACK <= level[trial]
        trial &= ~ok
        if exact:
            break
    return ok


def _upper(value):
    """An upper bound on the true error from a stored (possibly float32) value."""
    return value + _FLOAT32 * abs(value)


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
        method, or a budget of engine evaluations spent).
    open_gaps : list of tuple
        ``(p, a, b)``: grid p and gaps whose integers strictly between a and b are checked at
        the n evaluated only (a budget spent); empty for a method without a step bound, whose
        every gap is open.
    evaluations : int
        Engine evaluations for this rule (boundary points shared by a rule's rows are counted
        in each row).
    bounded : bool
        Whether the method has a closed-form step bound.
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
    open_gaps: list = field(default_factory=list)
    evaluations: int = 0
    bounded: bool = True

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
                    "evaluated only (no step bound is derived for this method)")  # fmt: skip
        text += (
            f"; every larger admitted integer n bounded (grid values, the one-step bound, "
            f"the engine in the gaps) at {self.grid_p_bounded} of {total} grid p"
        )
        if self.open_gaps:
            first = min(a for _, a, _ in self.open_gaps)
            last = max(b for _, _, b in self.open_gaps)
            text += (f"; {len(self.open_gaps)} gap(s) between n = {first:,} and {last:,} at "
                     f"{self.grid_p_open} grid p left unchecked between their ends (the budget "
                     "of engine evaluations spent)")  # fmt: skip
        return text + "; p between those checked are not computed"

    def open_runs(self):
        """The open gaps with adjacent gaps at one p merged: ``[p, a, b]`` runs, in order."""
        runs = []
        for p, a, b in self.open_gaps:
            if runs and runs[-1][0] == p and runs[-1][2] == a:
                runs[-1][2] = b
            else:
                runs.append([p, a, b])
        return runs

    def as_dict(self):
        """What was checked, for JSON (open gaps merged into runs, :meth:`open_runs`)."""
        return {
            "p_checked": self.p_checked,
            "p_refined": self.p_refined,
            "grid_p_bounded": self.grid_p_bounded,
            "grid_p_open": self.grid_p_open,
            "open_gaps": self.open_runs(),
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
    rows = {k: RuleWorst(k[0], k[1], bounded=has_step_bound(k[0])) for k in keys}
    # The grid cells the rule admits.
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
        _cover_larger(rows[k], grid_n, grid_p, stored[k], runs_at, values)
    for k in keys:
        rows[k].evaluations = values.evaluations
    return [rows[k] for k in keys]


def _run_points(grid_n, runs):
    """The n known or evaluated in the admitted runs, and the run of each, in order."""
    pts, run_of = [], []
    for r, (first, last) in enumerate(runs):
        inside = grid_n[np.searchsorted(grid_n, first) : np.searchsorted(grid_n, last, "right")]
        extra = np.arange(first, min(last, first + NEIGHBOURS) + 1, dtype=np.int64)
        got = np.union1d(np.union1d(inside, extra), [last])
        pts.append(got)
        run_of.append(np.full(got.size, r))
    return np.concatenate(pts), np.concatenate(run_of)


def _cover_larger(row, grid_n, grid_p, column_values, runs_at, values):
    """Raise ``row`` to the worst admitted integer at each grid p, or record the gaps left."""
    key = (row.method, row.metric)
    spent = 0
    for j, p in enumerate(grid_p.tolist()):
        runs = runs_at[p]
        if not runs:
            row.grid_p_bounded += 1
            continue
        if not row.bounded:
            row.grid_p_open += 1
            continue
        pts, run_of = _run_points(grid_n, runs)
        i = np.minimum(np.searchsorted(grid_n, pts), grid_n.size - 1)
        on = grid_n[i] == pts
        vals = np.where(on, column_values[i, j], np.nan)
        for idx in np.flatnonzero(~on).tolist():
            vals[idx] = values.get(int(pts[idx]), p)[key]
        top = int(np.argmax(np.where(np.isnan(vals), np.inf, vals)))
        row.offer(float(vals[top]), pts[top], p)
        a, b = pts[:-1], pts[1:]
        wide = (b - a > 1) & (run_of[:-1] == run_of[1:])
        if not wide.any():
            row.grid_p_bounded += 1
            continue
        va = vals[:-1][wide]
        a, b = a[wide], b[wide]
        ok = gap_certified(row.method, row.metric, a, b - a - 1, p, _upper(va), row.worst)
        left = []
        for lo, hi, v in zip(a[~ok].tolist(), b[~ok].tolist(), va[~ok].tolist(), strict=True):
            budget = max(0, min(GAP_BUDGET, ROW_BUDGET - spent))
            used, gaps = _bisect(row, lo, hi, v, p, values, key, budget)
            spent += used
            left += gaps
        row.open_gaps += [(p, lo, hi) for lo, hi in left]
        if left:
            row.grid_p_open += 1
        else:
            row.grid_p_bounded += 1


def _bisect(row, a, b, va, p, values, key, budget):
    """Cover the integers strictly between a and b by bisection at the level of the worst so
    far: (evaluations, the pieces left when the budget is spent)."""
    spent = 0
    left = []
    stack = [(a, va, b)]
    while stack:
        lo, vlo, hi = stack.pop()
        if hi - lo <= 1:
            continue
        if gap_certified(row.method, row.metric, lo, hi - lo - 1, p, _upper(vlo), row.worst)[0]:
            continue
        if spent >= budget:
            left.append((lo, hi))
            continue
        c = (lo + hi) // 2
        vc = values.get(c, p)[key]
        spent += 1
        row.offer(vc, c, p)
        stack += [(c, vc, hi), (lo, vlo, c)]
    return spent, left


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


def _cell_tails(method, metric, grid_n, edges):
    """The large-n bound over each cell at each grid n (module notes), or None."""
    if tail_bound(method, [10], 0.3, metric) is None:
        return None
    if method == "poisson":  # min(p, q), the same at every n
        r = np.minimum(edges, 1.0 - edges)
        return np.broadcast_to(np.maximum(r[:-1], r[1:]), (grid_n.size, edges.size - 1))
    at = np.stack([tail_bound(method, grid_n, float(e), metric) for e in edges], axis=1)
    if method == "edgeworth2_cc":
        return at[:, :-1] + at[:, 1:]
    return np.maximum(at[:, :-1], at[:, 1:])


def _upper_at(n, ps, method, metric):
    """Error + accuracy of one method at n for the given p (the engine)."""
    ev = evaluate(int(n), np.asarray(ps, dtype=np.float64), methods=(method,))
    if metric == "interval":
        return ev.interval[0] + ev.interval_accuracy[0]
    return ev.cdf[0] + ev.cdf_accuracy[0]


def safe_cells(grid_n, grid_p, errors, tol, *, method, metric, accuracy=None):
    """Grid cells safe for every integer n and p of the cell as checked: see the module notes.

    Parameters
    ----------
    grid_n, grid_p : numpy.ndarray
        The atlas's axes.
    errors : numpy.ndarray
        Errors at the grid's cells, shape (len(grid_n), len(grid_p)).
    tol : float
    method, metric : str
    accuracy : numpy.ndarray, optional
        The accuracy of ``errors`` (the cube's ``interval_accuracy`` / ``cdf_accuracy``), the
        same shape; zero if omitted.

    Returns
    -------
    safe : numpy.ndarray of bool
        Shape of ``errors``.
    stats : dict
        ``evaluated`` (p points at grid n computed by the engine), ``refined`` (of those, added
        by bisection), ``edges_skipped`` (p-edges taken as smooth between their grid
        neighbours), ``bounded_cells`` (cells safe by the large-n bound), ``n_evaluated``
        (points between grid n computed), ``n_uncertified`` (cells counted unsafe: the
        integers between grid n not certified within ``N_ROUNDS``), ``n_open`` (cells whose
        integers between grid n are not checked: no step bound for the method).
    """
    grid_n = np.asarray(grid_n, dtype=np.int64)
    grid_p = np.asarray(grid_p, dtype=np.float64)
    errors = np.asarray(errors, dtype=np.float64)
    upper = errors if accuracy is None else errors + np.asarray(accuracy, dtype=np.float64)
    safe = upper <= tol
    edges = cell_edges(grid_p)
    stats = dict.fromkeys(("evaluated", "refined", "edges_skipped", "bounded_cells",
                           "n_evaluated", "n_uncertified", "n_open"), 0)  # fmt: skip
    tails = _cell_tails(method, metric, grid_n, edges)
    bounded = np.zeros(safe.shape, dtype=bool) if tails is None else safe & (tails + _SLACK <= tol)
    stats["bounded_cells"] = int(bounded.sum())
    next_n = np.append(grid_n[1:], grid_n[-1] + 1)  # the atlas's last n: that n alone
    near, spread = (1.0 - CELL_SPREAD) * tol, CELL_SPREAD * tol
    close = tol / (1.0 + CELL_NEAR)
    for i in np.flatnonzero((safe & ~bounded).any(axis=1)).tolist():
        n, row, cand = int(grid_n[i]), safe[i], safe[i] & ~bounded[i]
        v, u = errors[i], upper[i]
        # p-edges 1..len(p)-1, each between grid p k-1 and k: evaluated unless calm.
        touch = cand[:-1] | cand[1:]
        calm = (row[:-1] & row[1:] & (np.maximum(u[:-1], u[1:]) <= near)
                & (np.abs(v[:-1] - v[1:]) <= spread))  # fmt: skip
        stats["edges_skipped"] += int((touch & calm).sum())
        need = np.flatnonzero(touch & ~calm) + 1
        at_edge = np.full(edges.size, np.nan)  # error + accuracy at the p-edges; NaN: skipped
        at_edge[0], at_edge[-1] = u[0], u[-1]  # the axis ends are grid p
        if need.size:
            at_edge[need] = _upper_at(n, edges[need], method, metric)
            stats["evaluated"] += int(need.size)
        lower, higher = at_edge[:-1], at_edge[1:]  # each cell's two edges
        row &= ~(lower > tol) & ~(higher > tol)  # a skipped edge (NaN) compares False
        refine = row & ~bounded[i] & (np.fmax(lower, higher) > close)
        extra = {}  # cell -> [(p, error + accuracy)] of the points added by bisection
        if refine.any():
            extra = _refine_cells(row, n, np.flatnonzero(refine), grid_p, edges, u, at_edge,
                                  tol, method, metric, stats)  # fmt: skip
        if next_n[i] - n > 1:
            cells = np.flatnonzero(row & ~bounded[i])
            points = _cell_points(cells, grid_p, edges, u, at_edge, extra)
            _between_n(row, n, int(next_n[i]), points, tol, method, metric, stats)
    return safe, stats


def _refine_cells(row, n, cells, grid_p, edges, u, at_edge, tol, method, metric, stats):
    """Subdivide the pieces of ``cells`` near tol (module notes, item 2); update ``row``.

    Returns ``{cell: [(p, error + accuracy), ...]}`` of the points added.
    """
    parts = 2**CELL_ROUNDS
    fractions = np.arange(1, parts) / parts
    pieces = {}
    new = []
    for j in cells.tolist():
        pts = [(float(grid_p[j]), float(u[j]))]
        pts += [(float(edges[k]), float(at_edge[k])) for k in (j, j + 1)
                if not np.isnan(at_edge[k])]  # fmt: skip
        pts.sort()
        pieces[j] = pts
        for (pa, va), (pb, vb) in zip(pts[:-1], pts[1:], strict=True):
            if max(va, vb) > tol / (1.0 + CELL_NEAR) and pb - pa > 1e-12 * pb:
                la, lb = _logit(pa), _logit(pb)
                new += (1.0 / (1.0 + np.exp(-(la + fractions * (lb - la))))).tolist()
    if not new:
        return {}
    new = sorted(set(new))
    values = dict(zip(new, _upper_at(n, new, method, metric).tolist(), strict=True))
    stats["evaluated"] += len(new)
    stats["refined"] += len(new)
    extra = {}
    for j, pts in pieces.items():
        lo, hi = pts[0][0], pts[-1][0]
        added = [(x, v) for x, v in values.items() if lo < x < hi]
        extra[j] = added
        row[j] = all(v <= tol for _, v in pts + added)
    return extra


def _cell_points(cells, grid_p, edges, u, at_edge, extra):
    """(cell, p, error + accuracy) of every p checked in ``cells``, as flat arrays."""
    j = np.concatenate([cells, cells, cells])
    p = np.concatenate([grid_p[cells], edges[cells], edges[cells + 1]])
    up = np.concatenate([u[cells], at_edge[cells], at_edge[cells + 1]])
    keep = ~np.isnan(up)
    j, p, up = j[keep], p[keep], up[keep]
    more = [(c, x, v) for c, pts in extra.items() if c in set(cells.tolist()) for x, v in pts]
    if more:
        j = np.concatenate([j, [m[0] for m in more]]).astype(np.int64)
        p = np.concatenate([p, [m[1] for m in more]])
        up = np.concatenate([up, [m[2] for m in more]])
    return j, p, up


def _between_n(row, n, stop, points, tol, method, metric, stats):
    """Certify the integers n + 1 .. stop - 1 at every p checked of the row's safe cells
    (module notes, item 3), bisecting where the one-step bound does not suffice."""
    cells, ps, ups = points
    if not cells.size:
        return
    if not has_step_bound(method):
        stats["n_open"] += int(np.unique(cells).size)
        return
    count = stop - n - 1
    ok = gap_certified(method, metric, n, count, ps, ups, tol)
    # Bisection only where N_ROUNDS of it could succeed (pieces 2^-N_ROUNDS as long) and the
    # budget of the call allows; the other cells are counted unsafe.
    hopeful = gap_certified(method, metric, n, -(-count // 2**N_ROUNDS), ps, ups, tol)
    hopeful |= count < 2**N_ROUNDS  # bisection then reaches every integer of the range
    give_up = ~ok & ~hopeful
    if stats["n_evaluated"] >= N_BUDGET:
        give_up = ~ok
    for j in set(cells[give_up].tolist()):
        if row[j]:
            row[j] = False
            stats["n_uncertified"] += 1
    ok |= give_up
    # Pending pieces: (cell, p, lo, error + accuracy at lo, hi): the integers between lo and hi.
    bad = ~ok
    triples = zip(cells[bad].tolist(), ps[bad].tolist(), ups[bad].tolist(), strict=True)
    items = [(int(c), float(x), n, float(v), stop) for c, x, v in triples]
    for _ in range(N_ROUNDS):
        if not items:
            return
        by_mid = {}
        for t in items:
            by_mid.setdefault((t[2] + t[4]) // 2, set()).add(t[1])
        got = {}
        for c, group in by_mid.items():
            group = sorted(group)
            values = _upper_at(c, group, method, metric).tolist()
            got.update(((c, x), value) for x, value in zip(group, values, strict=True))
            stats["n_evaluated"] += len(group)
        split = []
        for j, x, lo, ulo, hi in items:
            c = (lo + hi) // 2
            uc = got[(c, x)]
            if not uc <= tol:
                row[j] = False
                continue
            split += [(j, x, lo, ulo, c), (j, x, c, uc, hi)]
        split = [t for t in split if row[t[0]]]
        if not split:
            return
        ok = gap_certified(method, metric, [t[2] for t in split], [t[4] - t[2] - 1 for t in split],
                           [t[1] for t in split], [t[3] for t in split], tol)  # fmt: skip
        items = [t for t, good in zip(split, ok.tolist(), strict=True) if not good]
    left = {t[0] for t in items if row[t[0]]}
    for j in left:
        row[j] = False
    stats["n_uncertified"] += len(left)


def region_words(stats, method):
    """``claim`` and ``checked`` of a safe region from the ``stats`` of :func:`safe_cells`."""
    claim = (
        "error + accuracy <= tol at every integer n from the grid n up to the next grid n (the "
        "last grid n alone) and every p of the p-cell (between the log-odds midpoints to the "
        "neighbouring grid p), as checked"
    )
    checked = (
        f"{stats['bounded_cells']:,} cells by the large-n bound (Berry-Esseen, Shevtsova 2011); "
        f"the others at the grid p and {stats['evaluated']:,} p off the grid computed by the "
        f"engine ({stats['refined']:,} of them in pieces of p-cells within "
        f"{CELL_NEAR:.0%} of tol), "
        f"{stats['edges_skipped']:,} p-edges taken as smooth between grid values within "
        f"{1 - CELL_SPREAD:.0%} of tol and {CELL_SPREAD:.0%} of tol of each other; "
    )
    if has_step_bound(method):
        checked += (
            "integers between grid n by the one-step bound at every p computed, with "
            f"{stats['n_evaluated']:,} engine points where it did not suffice"
        )
        if stats["n_uncertified"]:
            checked += (f"; {stats['n_uncertified']:,} cells counted unsafe (not certified "
                        f"between grid n within {N_ROUNDS} rounds of bisection, or the budget "
                        f"of {N_BUDGET:,} engine points spent)")  # fmt: skip
    else:
        checked += (f"integers between grid n not checked for {method} (no step bound is "
                    f"derived for it): {stats['n_open']:,} safe cells hold at their grid n "
                    "only")  # fmt: skip
    return {"claim": claim, "checked": checked, "unchecked_cells": int(stats["n_open"])}
