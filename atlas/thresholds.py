"""From which n on is the error within a tolerance: at every integer n, not only at grid n.

:meth:`atlas.Atlas.min_n` asks for the smallest N such that the worst-case error W(n, p) of a
method is within ``tol`` at *every integer* n >= N. The grid (the cube) says where to look; the
bounds of :mod:`atlas.bounds` and the engine prove the rest.

1. **Between known n.** A value W(a) certifies the integers after a as far as the growth
   allowance of :mod:`atlas.bounds`, W(a) + 2 E_a + 2 (rho_a + ...), stays within ``tol``.
   A gap between grid n that it does not certify is split (as far as the lower value reaches,
   else at the midpoint), the engine evaluating the new point, upper part first, until an
   integer above ``tol`` is found or every integer of the gap is evaluated or certified.
2. **Large n.** Once the large-n bound (Berry-Esseen, Shevtsova 2011) is within ``tol`` it
   stays so for every larger n.
3. **Beyond the atlas's end.** When the atlas's largest n is within ``tol`` but the large-n
   bound is not yet, the engine evaluates n beyond the end, each as far from the last as the
   one-step bound allows, until the large-n bound takes over (up to ``EXTEND_MAX``).

Every answer says which of these it used, and which gaps (if any) it could not cover
(:class:`Threshold`): a method without a step bound where one is needed, or a question that
would need more than ``MAX_EVALUATIONS`` engine evaluations.
"""

import math
from dataclasses import dataclass, field

import numpy as np

from atlas.bounds import NUMERIC_SIGMA, extension_bound, numeric_steps, step_bound, tail_bound
from atlas.engine import evaluate

__all__ = ["EXTEND_MAX", "MAX_EVALUATIONS", "RangeThreshold", "Threshold", "minimum_n",
           "minimum_n_over"]  # fmt: skip

EXTEND_MAX = 10**12  # the largest n evaluated beyond the atlas's end
MAX_EVALUATIONS = 3000  # engine evaluations per question before giving up (said in the answer)
_GAP_BUDGET = 1000  # a gap that needs more evaluations is left to its known n (said)
# Slack added to every certified bound: rounding in the bound. Every value also carries its
# own accuracy (the engine's, or the cube's interval_accuracy / cdf_accuracy, which include
# the float32 rounding of a compact atlas, |value| 2^-24): a value counts as within tol only
# when value + accuracy <= tol, and a stored value whose side of tol its accuracy leaves open
# is computed again by the engine.
_SLACK = 1e-12
_NUMERIC_MAX_STEPS = 200000
_BISECT_UNBOUNDED = 64  # gaps up to this wide are evaluated at every integer without a bound


@dataclass
class _Question:
    """One p: the known values, the bounds, and the engine calls made."""

    p: float
    tol: float
    method: str
    metric: str
    known: dict = field(default_factory=dict)  # n -> error (grid, engine, extension)
    accuracy: dict = field(default_factory=dict)  # n -> accuracy of the known error (0 if absent)
    evaluated: int = 0
    numeric: dict = field(default_factory=dict)  # n -> numeric rho_n
    uncovered: list = field(default_factory=list)  # gaps (a, b) left to their grid n
    gap_start: int = 0  # evaluations made before the gap being examined
    budget: int = MAX_EVALUATIONS  # engine evaluations allowed in all

    def value(self, n):
        """The error at integer n: a known value, else computed by the engine."""
        v = self.known.get(n)
        if v is None:
            if self.evaluated >= self.budget:
                raise _Exhausted
            ev = evaluate(int(n), [self.p], methods=(self.method,))
            interval = self.metric == "interval"
            v = float((ev.interval if interval else ev.cdf)[0, 0])
            self.known[n] = v
            self.accuracy[n] = float((ev.interval_accuracy if interval else ev.cdf_accuracy)[0, 0])
            self.evaluated += 1
        return v

    def upper(self, n):
        """An upper bound on the true error at n: its value plus its accuracy."""
        return self.value(n) + self.accuracy.get(n, 0.0)

    def safe(self, n):
        return self.upper(n) <= self.tol

    def step_sum(self, a, count):
        """An upper bound on rho_a + ... + rho_{a+count-1}; inf if none is known."""
        if count <= 0:
            return 0.0
        best = math.inf
        rho = step_bound(self.method, [a], self.p)
        if rho is not None:
            best = count * float(rho[0])  # rho is non-increasing in n
        sigma = math.sqrt(a * self.p * (1 - self.p))
        if sigma <= NUMERIC_SIGMA and count <= _NUMERIC_MAX_STEPS:
            missing = [j for j in range(a, a + count) if j not in self.numeric]
            for start in range(0, len(missing), 4096):
                part = np.array(missing[start : start + 4096])
                for j, r in zip(part.tolist(), numeric_steps(self.method, part, self.p).tolist(),
                                strict=True):  # fmt: skip
                    self.numeric[j] = r
            total = math.fsum(self.numeric[j] for j in range(a, a + count))
            best = min(best, total * (1 + 1e-12))
        return best

    def certifies(self, a, b):
        """Whether the known value at a certifies every integer strictly between a and b."""
        count = b - a - 1
        if count <= 0:
            return True
        va = self.upper(a)
        if not va <= self.tol:
            return False
        steps = self.step_sum(a, count)
        if not math.isfinite(steps):
            return False
        ext = float(extension_bound(self.method, [a], self.p, self.metric)[0])
        if self.metric == "interval":
            bound = va + 2.0 * ext + 2.0 * steps
        else:
            bound = max(va, ext) + steps
        return bound + _SLACK <= self.tol

    def reach(self, a):
        """How many integers after a its value certifies (for stepping beyond the atlas)."""
        va = self.upper(a)
        rho = step_bound(self.method, [a], self.p)
        if rho is None or not va <= self.tol:
            return 0
        ext = float(extension_bound(self.method, [a], self.p, self.metric)[0])
        room = self.tol - _SLACK - (va + 2.0 * ext if self.metric == "interval" else max(va, ext))
        per = (2.0 if self.metric == "interval" else 1.0) * float(rho[0])
        return int(max(0.0, min(room / per, float(a)))) if per > 0 else a

    def largest_unsafe(self, a, b):
        """The largest integer strictly between a and b whose error exceeds tol, or None.

        Every integer above the one returned (up to b - 1) is certified or evaluated safe.
        """
        return self._search(a, b, upper_first=True)

    def smallest_unsafe(self, a, b):
        """The smallest integer strictly between a and b whose error exceeds tol, or None.

        Every integer below the one returned (down to a + 1) is certified or evaluated safe.
        """
        return self._search(a, b, upper_first=False)

    def _search(self, a, b, *, upper_first):
        """Split (a, b) until every piece is certified; the first unsafe split point in order.

        A piece (a, b) is split at c = a + reach(a) + 1 when a is within tol (the value at a
        certifies every integer up to c - 1, so the piece below c needs no more evaluations),
        else at the midpoint. Pieces are examined from the top (``upper_first``) or the bottom.
        """
        stack = [("gap", a, b)]
        while stack:
            item = stack.pop()
            if item[0] == "point":
                if not self.safe(item[1]):
                    return item[1]
                continue
            _, lo, hi = item
            if hi - lo <= 1 or self.certifies(lo, hi):
                continue
            self._affordable(lo, hi)
            reach = self.reach(lo) if self.safe(lo) else 0
            c = lo + reach + 1 if reach >= 1 and lo + reach + 1 < hi else (lo + hi) // 2
            self.value(c)
            order = [("gap", lo, c), ("point", c), ("gap", c, hi)]
            stack += order if upper_first else order[::-1]
        return None

    def _affordable(self, a, b):
        """Raise _Exhausted when bisecting (a, b) would evaluate every integer (no step bound)
        or the gap being examined has used up its share of engine evaluations."""
        if self.evaluated - self.gap_start > _GAP_BUDGET:
            raise _Exhausted
        count = b - a - 1
        if count <= _BISECT_UNBOUNDED:
            return
        steps = self.step_sum(a, count)
        if not math.isfinite(steps):
            raise _Exhausted  # no step bound: bisection would evaluate every integer
        # Even with errors of 0 the pieces could be no longer than tol / (2 rho): too many?
        if (2.0 if self.metric == "interval" else 1.0) * steps / self.tol > _GAP_BUDGET:
            raise _Exhausted

    def gap(self, a, b, finder):
        """``finder(a, b)``, or the gap recorded as left to its grid n when it cannot be done."""
        self.gap_start = self.evaluated
        try:
            return finder(a, b)
        except _Exhausted:
            self.uncovered.append((a, b))
            return None


class _Exhausted(Exception):
    """More engine evaluations would be needed than MAX_EVALUATIONS allows."""


@dataclass(frozen=True)
class Threshold:
    """The answer to "from which n on is the error within tol, at every integer n?".

    Attributes
    ----------
    n : int or None
        The smallest N such that the error is within ``tol`` at every integer n from N to
        ``upto`` (to infinity when ``upto`` is None); None when the largest n examined is not
        within ``tol``.
    p, tol : float
    method, metric : str
    upto : int or None
        None: the claim holds for every integer n >= N (a large-n bound covers the n beyond
        those examined); else the largest n the claim covers (the atlas's end, or the last n
        evaluated beyond it).
    exact : bool
        True when every integer from N on is covered: evaluated, or certified by the one-step
        bound. False when some gaps above N are left to their grid n (``uncovered``).
    failing : tuple or None
        ``(N - 1, error)``: the integer just below N and its error (above tol), when N > 1.
    runs : tuple of tuple
        ``(first, last, safe, every_integer)`` from n = 1 to the largest n examined: stretches
        of n within tol (``safe``) and not. ``every_integer``: every integer of the stretch is
        known to have that status; else only the n evaluated in it (the grid's n and others).
    uncovered : tuple of tuple
        Gaps ``(a, b)`` above N whose integers strictly between a and b are not all covered (no
        step bound for the method there, or too many evaluations needed).
    grid_values : int
        Values of the atlas grid used.
    evaluated : int
        Integers evaluated by the engine beyond the grid (in gaps and beyond the atlas's end).
    beyond : str or None
        The argument for the n beyond those examined, in words.
    grid_end : int
        The atlas's largest n.
    at_most : bool
        True when the search stopped early because another p decides (:func:`minimum_n_over`):
        every integer from ``n`` on is within tol, and smaller n were not examined, so ``n``
        is an upper bound on this p's answer.
    """

    n: object
    p: float
    tol: float
    method: str
    metric: str
    upto: object
    exact: bool
    failing: object
    runs: tuple
    uncovered: tuple
    grid_values: int
    evaluated: int
    beyond: object
    grid_end: int
    at_most: bool = False
    failing_accuracy: float = 0.0

    @property
    def resolved(self):
        """False when the error at N - 1 exceeds tol by less than its accuracy: N - 1 is counted
        as failing on the accuracy (conservative), and the true minimum may be smaller."""
        if self.failing is None:
            return True
        return bool(self.failing[1] - self.failing_accuracy > self.tol)

    def basis(self):
        """What the answer rests on, in words."""
        used = f"{self.grid_values:,} grid n"
        if self.evaluated:
            used += f" and {self.evaluated:,} more integers computed by the engine"
        if self.n is None:
            last = self.runs[-1][1] if self.runs else self.grid_end
            return (f"not within the tolerance at n = {last:,}, the largest n examined "
                    f"({used}); see the stretches below")  # fmt: skip
        end = "on" if self.upto is None else f"to {self.upto:,}"
        text = f"every integer n from {self.n:,} {end} is within the tolerance: {used}"
        if self.at_most:
            text += " (smaller n not examined: another p decides)"
        if self.exact:
            text += ", every other integer bounded by the one-step bound W(n+1) <= W(n) + 2 rho(n)"
        else:
            first = min(a for a, _ in self.uncovered)
            last = max(b for _, b in self.uncovered)
            text += (
                f"; the one-step bound covers the rest except {len(self.uncovered)} gap(s) "
                f"between n = {first:,} and {last:,}, where only the n evaluated are checked "
                "(no step bound for this method there, or too many evaluations needed)"
            )
        if not self.resolved:
            text += (f"; n = {self.n - 1:,} exceeds the tolerance only by less than the "
                     "accuracy of its error (below the resolution of the exact side): counted "
                     "as failing, so the answer is conservative")  # fmt: skip
        if self.beyond:
            text += f"; {self.beyond}"
        elif self.upto is not None:
            text += f"; beyond n = {self.upto:,} no bound is established"
        return text

    def describe_runs(self):
        """The stretches of n within the tolerance and not, one line each."""
        lines = []
        for first, last, safe, every in self.runs:
            span = f"n = {first:,}" if first == last else f"n = {first:,} to {last:,}"
            status = "within the tolerance" if safe else "not within the tolerance"
            if first == last or every:
                how = "" if first == last else " at every integer"
            else:
                how = " at the n evaluated (not every integer between them)"
            lines.append(f"{span}: {status}{how}")
        if self.n is not None and self.upto is None:
            lines[-1] = lines[-1].replace(f"to {self.runs[-1][1]:,}", "on", 1)
        return lines


def minimum_n(grid_n, values, p, tol, *, method, metric, runs=False, floor=None,
              budget=None, accuracy=None):  # fmt: skip
    """The exact minimum n at one p: see :class:`Threshold` and the module notes.

    Parameters
    ----------
    grid_n : numpy.ndarray of int64
        The atlas's n axis, increasing.
    values : numpy.ndarray of float64
        The errors at ``grid_n`` (from the cube, or computed), the same length.
    p, tol : float
        0 < p < 1, tol > 0.
    method, metric : str
        Checked names.
    runs : bool, optional
        Also find the exact ends of the stretches within tol below N (more engine calls).
    floor : int, optional
        Stop once every integer from ``floor`` on is known to be within tol: the answer is
        then only an upper bound (``at_most``), enough where another p decides.
    budget : int, optional
        Engine evaluations allowed (default ``MAX_EVALUATIONS``); gaps left when it is spent
        are reported in ``uncovered``.
    accuracy : numpy.ndarray of float64, optional
        The accuracy of ``values`` (the cube's ``interval_accuracy`` / ``cdf_accuracy``); if
        omitted, the float32 rounding 2^-23 |value| is assumed.

    Returns
    -------
    Threshold

    Notes
    -----
    The gaps between the known n are walked from the top down. A gap whose lower end is within
    tol and whose growth allowance (module notes, item 1) stays within tol is certified as a
    whole; any other gap is bisected, the engine evaluating the midpoint, upper half first, until
    an integer above tol is found (then N is the next integer) or every integer of the gap is
    evaluated or certified. Only the gaps above N are examined this way.
    """
    question = _Question(p=float(p), tol=float(tol), method=method, metric=metric)
    question.budget = MAX_EVALUATIONS if budget is None else int(budget)
    grid_n = np.asarray(grid_n, dtype=np.int64)
    values = np.asarray(values, dtype=np.float64)
    if accuracy is None:
        accuracy = 2.0**-23 * np.abs(values)
    accuracy = np.asarray(accuracy, dtype=np.float64)
    question.known.update(zip(grid_n.tolist(), values.tolist(), strict=True))
    question.accuracy.update(zip(grid_n.tolist(), accuracy.tolist(), strict=True))
    # A stored value whose accuracy leaves its side of tol open (within float32 rounding of
    # tol, say) is computed again, so that its side of tol is the engine's.
    close = np.flatnonzero(np.abs(values - tol) <= accuracy)
    for n in grid_n[close].tolist():
        del question.known[n]
        del question.accuracy[n]
        question.value(n)
    grid_end = int(grid_n[-1])
    points = grid_n.tolist()
    certified = _certified_gaps(question, grid_n)
    upto, beyond = _beyond_the_end(question, points, grid_end)
    n_star = failing = None
    at_most = False
    if question.safe(points[-1]):
        n_star = points[-1]
        for i in range(len(points) - 1, 0, -1):
            a, b = points[i - 1], points[i]
            if floor is not None and b <= floor:
                at_most = True  # every integer from b <= floor on is covered: enough
                break
            if (a, b) in certified:  # certified by the value at a (computed for all at once)
                n_star = a
                continue
            if floor is not None and a < floor - 1:  # only the integers from floor on matter
                try:
                    question.value(floor - 1)
                except _Exhausted:
                    question.uncovered.append((a, b))
                    at_most, n_star = True, floor
                    break
                u = question.gap(floor - 1, b, question.largest_unsafe)
                if u is None and not question.uncovered:
                    at_most, n_star = True, floor
                    break
                if u is not None:
                    n_star, failing = u + 1, (u, question.known[u])
                    break
                at_most, n_star = True, floor
                break
            u = question.gap(a, b, question.largest_unsafe)
            if u is not None:
                n_star, failing = u + 1, (u, question.known[u])
                break
            if not question.safe(a):
                n_star, failing = a + 1, (a, question.known[a])
                break
            n_star = a
    stretches = () if at_most else _runs(question, points, n_star, refine=runs)
    return Threshold(
        n=n_star, p=float(p), tol=float(tol), method=method, metric=metric,
        upto=upto, exact=not question.uncovered, failing=failing, runs=stretches,
        uncovered=tuple(question.uncovered), grid_values=int(grid_n.size),
        evaluated=question.evaluated, beyond=beyond, grid_end=grid_end, at_most=at_most,
        failing_accuracy=0.0 if failing is None else question.accuracy.get(failing[0], 0.0),
    )  # fmt: skip


def _certified_gaps(question, grid_n):
    """The grid gaps (a, b) that the value at a certifies, found for all gaps at once.

    The same test as :meth:`_Question.certifies` with the closed-form step bound, vectorised;
    gaps it leaves out are examined one by one.
    """
    a, b = grid_n[:-1], grid_n[1:]
    count = b - a - 1
    wide = count > 0
    a, b, count = a[wide], b[wide], count[wide]
    rho = step_bound(question.method, a, question.p) if a.size else None
    if rho is None:
        return set()
    va = np.array([question.upper(n) for n in a.tolist()])
    ext = extension_bound(question.method, a, question.p, question.metric)
    if question.metric == "interval":
        bound = va + 2.0 * ext + 2.0 * count * rho
    else:
        bound = np.maximum(va, ext) + count * rho
    ok = (va <= question.tol) & (bound + _SLACK <= question.tol)
    return set(zip(a[ok].tolist(), b[ok].tolist(), strict=True))


def _beyond_the_end(question, points, grid_end):
    """Step beyond the atlas's end until the large-n bound holds; (upto, words).

    Appends the n evaluated to ``points``. ``upto`` is None when every larger n is covered.
    """
    method, metric, p, tol = question.method, question.metric, question.p, question.tol
    if not question.safe(grid_end):
        return grid_end, None
    tail = tail_bound(method, [grid_end], p, metric)
    if tail is None:
        return grid_end, None
    n_tail = _tail_start(method, p, metric, tol)
    if tail[0] + _SLACK <= tol:
        return None, _tail_words(method, metric, min(n_tail or grid_end, grid_end))
    if n_tail is None or n_tail > EXTEND_MAX:
        return grid_end, None
    a = grid_end
    try:
        while a < n_tail:
            # As far as the value at a certifies (its growth allowance), at most doubling.
            b = min(n_tail, a + max(1, question.reach(a)) + 1)
            question.value(b)
            points.append(b)
            a = b
    except _Exhausted:
        return points[-1], None
    words = (f"n = {grid_end:,} to {n_tail:,} beyond the atlas's end evaluated "
             f"where needed; {_tail_words(method, metric, n_tail)}")  # fmt: skip
    return None, words


def _tail_words(method, metric, n):
    what = ("Berry-Esseen with Shevtsova's constant 0.4748 plus the distance of G from the "
            "normal curve" if method != "poisson" else "the Poisson distance bound "
            "p (1 - e^-np) <= p (Barbour and Hall 1984)")  # fmt: skip
    return f"from n = {n:,} on, {what} keeps the {metric} error within tol"


def _tail_start(method, p, metric, tol):
    """The smallest n with tail_bound(n) + slack <= tol (the bound is non-increasing), or None."""
    lo, hi = 1, 1
    while tail_bound(method, [hi], p, metric)[0] + _SLACK > tol:
        lo, hi = hi, hi * 2
        if hi > 10**18:
            return None
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if tail_bound(method, [mid], p, metric)[0] + _SLACK <= tol:
            hi = mid
        else:
            lo = mid
    return hi


def _runs(question, points, n_star, *, refine):
    """Stretches of n within tol and not, from n = 1 to the largest n examined.

    From N on, the answer's stretch. Below N, the known n grouped by status; with ``refine``,
    each stretch within tol has its ends found exactly by bisection (the first integer above tol
    after it, the last one before it) and its gaps certified, where the bounds allow.
    """
    tol = question.tol
    known = question.known
    limit = n_star if n_star is not None else points[-1] + 1
    below = [n for n in points if n < limit]
    runs = []
    for n in below:
        safe = question.upper(n) <= tol
        if runs and runs[-1][2] == safe:
            runs[-1][1] = n
        else:
            runs.append([n, n, safe])
    out = []
    for i, (first, last, safe) in enumerate(runs):
        every = _consecutive(below, first, last)
        if refine and safe:
            every, first, last = _refine_run(question, below, runs, i, first, last)
        out.append((first, last, safe, every))
    # Unsafe stretches start after the safe one before them and end before the next.
    fixed = []
    for k, (first, last, safe, every) in enumerate(out):
        if not safe:
            if k > 0:
                first = fixed[-1][1] + 1
            if k + 1 < len(out):
                last = out[k + 1][0] - 1
            elif n_star is not None:
                last = n_star - 1
            every = every and _consecutive(sorted(known), first, last)
        fixed.append((int(first), int(last), bool(safe), bool(every)))
    if n_star is not None:
        fixed.append((n_star, points[-1], True, not question.uncovered))
    return tuple(fixed)


def _consecutive(ns, first, last):
    """Whether the known n from first to last are every integer between them."""
    i = np.searchsorted(ns, first)
    j = np.searchsorted(ns, last, side="right")
    return bool(j - i == last - first + 1)


def _refine_run(question, below, runs, i, first, last):
    """Exact ends of the i-th stretch (within tol) of known n, and its gaps certified."""
    every = True
    start = below.index(first)
    stop = below.index(last)
    for a, b in zip(below[start:stop], below[start + 1 : stop + 1], strict=True):
        if question.gap(a, b, question.smallest_unsafe) is not None or (a, b) in question.uncovered:
            every = False
    if i > 0:  # the integers after the unsafe n before the stretch
        v = runs[i - 1][1]
        u = question.gap(v, first, question.largest_unsafe)
        if (v, first) not in question.uncovered:
            first = (u if u is not None else v) + 1
        else:
            every = False
    if i + 1 < len(runs):  # the integers before the unsafe n after it
        w = runs[i + 1][0]
        u = question.gap(last, w, question.smallest_unsafe)
        if (last, w) not in question.uncovered:
            last = (u if u is not None else w) - 1
        else:
            every = False
    return every, first, last


REFINE_ROUNDS = 8  # rounds of bisection in p for min_n_over
REFINE_PER_ROUND = 4  # new p per round at most
_RANGE_BUDGET = 300  # engine evaluations for each p after the first in min_n_over
REFINE_SPREAD = 0.02  # neighbours within this share of the largest N are bisected


@dataclass(frozen=True)
class RangeThreshold:
    """The answer to "from which n on is the error within tol for every p in [p_lo, p_hi]?".

    Attributes
    ----------
    n : int or None
        The largest of the per-p answers (the smallest N that serves every p checked); None
        when some p checked has none.
    p_lo, p_hi, tol : float
    method, metric : str
    per_p : tuple of Threshold
        The answer at each p checked, in increasing p.
    grid_p : int
        How many of the p checked are grid p (the rest: both ends and the p added by bisection).
    worst_p : float
        The p whose answer decides ``n`` (the first None, else the largest N).
    """

    n: object
    p_lo: float
    p_hi: float
    tol: float
    method: str
    metric: str
    per_p: tuple
    grid_p: int
    worst_p: float

    @property
    def exact(self):
        """Whether every per-p answer covers every integer from its N on."""
        return all(t.exact for t in self.per_p)

    @property
    def upto(self):
        """The largest n the claim covers at every p checked; None for every n."""
        ends = [t.upto for t in self.per_p if t.upto is not None]
        return min(ends) if ends else None

    def checked(self):
        """Which p were checked, in words."""
        ps = np.array([t.p for t in self.per_p])
        logit = np.log(ps / (1 - ps))
        spacing = float(np.diff(logit).max()) if ps.size > 1 else 0.0
        added = ps.size - self.grid_p
        return (f"{ps.size} p checked in [{self.p_lo:g}, {self.p_hi:g}]: the grid's {self.grid_p}, "
                f"and {added} more (both ends, and midpoints in log-odds next to the largest "
                f"minimum n or between neighbours within {REFINE_SPREAD:.0%} of it); "
                f"largest log-odds step between p checked {spacing:.3g}; the p between them "
                "are not computed")  # fmt: skip

    def basis(self):
        """What the answer rests on, in words."""
        worst = next(t for t in self.per_p if t.p == self.worst_p)
        return f"{self.checked()}; decided at p = {self.worst_p:.6g}: {worst.basis()}"


def minimum_n_over(grid_n, grid_p, column, p_lo, p_hi, tol, *, method, metric):
    """The minimum n for every p of [p_lo, p_hi]: per p as :func:`minimum_n`, refined in p.

    Parameters
    ----------
    grid_n : numpy.ndarray of int64
        The atlas's n axis.
    grid_p : numpy.ndarray of float64
        The grid p inside [p_lo, p_hi].
    column : callable
        ``column(ps)`` returns the errors at ``grid_n`` for each p of ``ps``, shape
        (len(grid_n), len(ps)), or the pair (errors, their accuracies).
    p_lo, p_hi, tol : float
    method, metric : str

    Returns
    -------
    RangeThreshold

    Notes
    -----
    Safe at every n >= N for every p means N >= N(p) for every p, so the answer is the
    largest per-p N. The p checked are the grid p in the range, both ends, and midpoints in
    log-odds added in rounds next to the p of the largest N and between neighbours whose N both
    come within ``REFINE_SPREAD`` of it (``REFINE_ROUNDS`` rounds of at most
    ``REFINE_PER_ROUND``): where a p between two checked ones could come out largest.
    """
    results = {}
    estimate = {}  # p -> its answer, or the grid's lower bound on it where only bounded above

    def solve(ps):
        ps = np.array(sorted(set(ps) - set(results)), dtype=np.float64)
        if not ps.size:
            return
        got = column(ps)  # errors, or (errors, accuracies)
        values, accuracy = got if isinstance(got, tuple) else (got, None)
        # The grid's lower bound on each answer: one past the largest grid n above tol.
        lower = []
        for j in range(ps.size):
            bad = np.flatnonzero(~(values[:, j] <= tol))
            lower.append(1 if bad.size == 0 else int(grid_n[bad[-1]]) + 1)
        # Largest lower bound first: the p likely to decide is searched in full, and the
        # others only down to the largest answer so far (their answers cannot exceed it then).
        for j in sorted(range(ps.size), key=lambda j: -lower[j]):
            p = float(ps[j])
            known = [t.n for t in results.values() if not t.at_most]
            top = None if not known or None in known else max(known)
            # Only the first p searched gets the whole budget: the others need only show that
            # no integer from the largest answer on exceeds tol.
            budget = None if top is None else _RANGE_BUDGET
            answer = minimum_n(grid_n, values[:, j], p, tol, method=method, metric=metric,
                               floor=top, budget=budget,
                               accuracy=None if accuracy is None else accuracy[:, j])  # fmt: skip
            results[p] = answer
            estimate[p] = lower[j] if answer.at_most else answer.n

    grid_p = [float(x) for x in grid_p]
    solve(grid_p + [float(p_lo), float(p_hi)])
    for _ in range(REFINE_ROUNDS):
        if any(t.n is None for t in results.values()):
            break  # the answer is None whatever lies between
        ps = sorted(results)
        top = max(estimate[p] for p in ps)
        new = []
        for pa, pb in zip(ps[:-1], ps[1:], strict=True):
            # Bisect where a p between could come out largest: next to the largest N, or
            # where both neighbours come within REFINE_SPREAD of it.
            ea, eb = estimate[pa], estimate[pb]
            if min(ea, eb) >= (1 - REFINE_SPREAD) * top or top in (ea, eb):
                la, lb = math.log(pa / (1 - pa)), math.log(pb / (1 - pb))
                mid = 1.0 / (1.0 + math.exp(-(la + lb) / 2))
                if pa < mid < pb and (pb - pa) > 1e-9 * pb:
                    new.append((max(ea, eb), mid))
        if not new:
            break
        new.sort(reverse=True)  # the largest neighbours first
        solve([mid for _, mid in new[:REFINE_PER_ROUND]])
    per_p = tuple(results[p] for p in sorted(results))
    missing = [t for t in per_p if t.n is None]
    if missing:
        n_star, worst_p = None, missing[0].p
    else:
        top = max(per_p, key=lambda t: (t.n, not t.at_most))
        n_star, worst_p = top.n, top.p
    return RangeThreshold(n=n_star, p_lo=float(p_lo), p_hi=float(p_hi), tol=float(tol),
                          method=method, metric=metric, per_p=per_p,
                          grid_p=len(set(grid_p)), worst_p=worst_p)  # fmt: skip
