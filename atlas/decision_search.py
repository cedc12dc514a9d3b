"""The minimum n for tail tolerances and test sizes, at every integer n.

"From which n on is every tail of at least alpha within 10%?" asks for the smallest N such that
the metric v(n) (:func:`atlas.tails.tail_error` or the size of :func:`atlas.sizes.test_size`) is
within the limit at *every* integer n from N to ``n_max``. Neither metric is monotone in n (the
size of a test is a sawtooth), so no value settles its neighbours by itself. The search:

1. Every integer n up to ``dense_to`` is evaluated (each costs less than a bound there).
2. Above it, a ladder of n about 5% apart, and ``n_max``, says where to look: the ladder is
   walked from the top, and each gap (a, b) between ladder points is either **certified** (a
   bound from a's own values shows v <= limit at every integer of the gap) or split at its
   midpoint, the upper half first, until a failing integer is found or every integer is
   evaluated or certified. Gaps of at most ``_EVERY`` integers are evaluated at every integer.
   For ``normal_cc``, ``normal`` and ``poisson`` test sizes the search needs no bound: the sizes
   of thousands of n are computed in one vectorised pass (:func:`sweep_sizes`), so every
   integer above ``dense_to`` is evaluated.

The first failing integer found from the top, n_f, gives N = n_f + 1; every integer from N to
``n_max`` is accounted for, and :class:`Search` counts how many were evaluated and how many
certified.

The bounds (proofs)
-------------------
Notation of :mod:`atlas.bounds`: D_n(k) = F_n(k) - G_n(k) for every integer k, rho_n >=
sup_k |R_n(k)| the one-step residual (non-increasing in n), and
delta_a = max(C(a), |G_a(-1)|, E_a) >= sup over every integer k of |D_a(k)| (C the engine's
CDF error with the margin of :func:`atlas.tails.error_bound`, E_a
:func:`atlas.bounds.extension_bound`).
For m = a + s, B_s ~ Bin(s, p) with weights w_i, unrolling the recursion s times gives

    F_m(k) = sum_i w_i F_a(k - i),   D_m(k) = sum_i w_i D_a(k - i) + r,   |r| <= s rho_a,   (1)

since X_m = X_a + B_s, and each step adds a convex combination of R_j(.) with j >= a.

*Sizes.* The test with G's p-value rejects x only where its p-value is at most alpha, so the
exact p-value there is at most alpha + sup|D_m|; and P(exact p-value <= t) <= t for every t
(the exact test is valid). Hence size(m) <= alpha + c sup_k |D_m(k)| (c = 1 one-sided, 2
two-sided, each side at alpha/2), and by (1) sup_k |D_m(k)| <= delta_a + s rho_a. For every m in
(a, b): size(m) <= alpha + c (delta_a + (b - a - 1) rho_a).

*Lower tails.* Let k_m be the first k with L_m(k) >= alpha (every tail admitted at m has
k >= k_m), I an upper quantile of B_s, j0 = max(k_m - I, 0) and beta = L_a(j0). In (1), the
terms with i <= I have k - i >= j0, so L_a(k - i) >= beta and |D_a(k - i)| <= e L_a(k - i)
with e = max(lower(beta) at a, delta_a) (L_a = 1 above a, where |D_a| <= delta_a); the terms
with i > I weigh P(B_s > I) in all and each |D_a| <= delta_a. With L_m(k) =
sum_i w_i L_a(k - i) >= alpha:

    |D_m(k)| / L_m(k) <= e + (delta_a P(B_s > I) + s rho_a) / alpha.

*Upper tails.* U_m(k) = P(X_m >= k) = sum_i w_i U_a(k - i), and the error of the approximated
tail is D_m(k - 1). Let k_m be the last k with U_m(k) >= alpha, J a lower quantile of B_s and
j1 = k_m - J (no bound if j1 > a). The terms with i >= J have k - i <= j1, so U_a(k - i) >=
beta = U_a(j1) (U_a = 1 below 0); the others weigh P(B_s < J):

    |D_m(k - 1)| / U_m(k) <= max(upper(beta) at a, delta_a) + (delta_a P(B_s < J)
                             + s rho_a) / alpha.

The gap is cut into at most 32 blocks [m1, m2]. Adding trials moves mass up (X_{m+1} = X_m +
a Bernoulli), so L_m(k) falls and U_m(k) grows with m: within a block k_m >= k_{m1} below and
k_m <= k_{m2} above; P(B_s > I) grows with s (take s = m2 - a) and P(B_s < J) falls (take
s = m1 - a), and the drift is at most (m2 - a) rho_a. The bound is the largest over the blocks
of the smallest over three quantiles (1e-2, 1e-4, 1e-7), all the levels beta asked of a in one
scan (:func:`atlas.tails.cell_tail_errors`). Centred on k_m, the levels beta stay within a few
sqrt(s p q) of alpha's tail, whatever the gap's drift s p.

``tests/test_decision_search.py`` checks both bounds against the values computed at every
integer of gaps, and the answers against every-integer evaluation.
"""

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from atlas.approximations import approximate_cdf
from atlas.bounds import extension_bound, step_bound
from atlas.complements import approximate_upper
from atlas.engine import _binom_cdf, _binom_sf
from atlas.sizes import MONOTONE, cell_sizes
from atlas.tails import cell_tail_errors, error_bound

__all__ = ["DENSE_TO", "N_MAX", "MinN", "Search", "ladder", "min_ns", "sweep_sizes"]

DENSE_TO = 2048
N_MAX = 10**5
LADDER = 1.05
_ANCHOR = 256  # tail values take their scan bound from an anchor this far apart at most
_BLOCKS = 32  # blocks of a gap bounded apart (tail_gap_bound)
_EVERY = 16  # gaps of at most this many integers are evaluated at every integer
_SWEEP_BLOCK = 4096
_SLACK = 1e-12  # rounding in the bounds and the values (the values carry ~1e-12 relative)
_BAD_MASS = (1e-2, 1e-4, 1e-7)  # the quantiles of B_s tried (module notes)


def ladder(dense_to, n_max):
    """Every integer to ``dense_to``, then n about 5% apart, and ``n_max``; increasing.

    Examples
    --------
    >>> ladder(3, 10)
    [1, 2, 3, 4, 5, 6, 7, 8, 9, 10]
    >>> ladder(100, 130)
    [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23, 24, 25, 26, 27, 28, 29, 30, 31, 32, 33, 34, 35, 36, 37, 38, 39, 40, 41, 42, 43, 44, 45, 46, 47, 48, 49, 50, 51, 52, 53, 54, 55, 56, 57, 58, 59, 60, 61, 62, 63, 64, 65, 66, 67, 68, 69, 70, 71, 72, 73, 74, 75, 76, 77, 78, 79, 80, 81, 82, 83, 84, 85, 86, 87, 88, 89, 90, 91, 92, 93, 94, 95, 96, 97, 98, 99, 100, 105, 110, 116, 122, 128, 130]
    """  # noqa: E501 - a doctest's output line cannot be wrapped
    points = list(range(1, min(dense_to, n_max) + 1))
    n = dense_to
    while True:
        n = max(n + 1, int(round(n * LADDER)))
        if n >= n_max:
            break
        points.append(n)
    if n_max > dense_to:
        points.append(n_max)
    return sorted(set(points))


def _runs_text(runs, answer, dense_to):
    """The stretches of passing n below the answer, in words (at most five, then a count)."""
    below = [(a, b) for a, b, safe in runs if safe and b < answer - 1]
    spans = [f"{a:,}" if a == b else f"{a:,} to {b:,}" for a, b in below]
    if len(spans) > 5:
        spans = spans[:5] + [f"... ({len(below)} stretches in all)"]
    listed = spans[0] if len(spans) == 1 else ", ".join(spans[:-1]) + " and " + spans[-1]
    unseen = ""
    if answer - 2 > dense_to:
        unseen = f"; {dense_to + 1:,} to {answer - 2:,} not examined"
    return (
        f"below it, also n = {listed} (every n to {min(dense_to, answer - 1):,} evaluated{unseen})"
    )


@dataclass(frozen=True)
class MinN:
    """The smallest n from which a condition holds at every integer n up to ``n_max``.

    Attributes
    ----------
    n : int or None
        The answer N: every integer from N to ``n_max`` passes and N - 1 fails (or N = 1); None
        when ``n_max`` itself fails.
    previous : int or None
        The largest failing n (N - 1), None when every n from 1 passes.
    dense_to : int
        Every integer up to here is evaluated.
    n_max : int
        The largest n asked about.
    evaluated : int
        Integers above ``dense_to`` evaluated exactly.
    certified : int
        Integers above ``dense_to`` covered by a bound (:mod:`atlas.decision_search`) instead.
    runs : tuple of (int, int, bool)
        Stretches (first, last, within) of consecutive n, every n of each evaluated or
        certified: from 1 to ``min(dense_to, N - 1)``, N - 1, and N to ``n_max`` (integers
        between ``dense_to`` and N - 1 are not examined: the answer does not need them). More
        than one "within" stretch means the n that pass are not one run from N upward.
    """

    n: object
    previous: object
    dense_to: int
    n_max: int
    evaluated: int = 0
    certified: int = 0
    runs: tuple = field(default=())

    @property
    def scattered(self):
        """True when some n below N - 1 passes too: the passing n are not one run."""
        return sum(1 for run in self.runs if run[2]) > 1

    def explain(self):
        """What was checked, in one line (plus the stretches where the passing n are not one
        run).

        Examples
        --------
        >>> MinN(17, 16, 2048, 200).explain()
        'from n = 17: every integer n from 17 to 200 checked; n = 16 fails'
        """
        if self.n is None:
            return f"at no n up to {self.n_max:,}: n = {self.n_max:,} fails"
        fails = "" if self.previous is None else f"; n = {self.previous:,} fails"
        how = ""
        if self.certified:
            how = (f" ({self.evaluated:,} above {self.dense_to:,} evaluated, "
                   f"{self.certified:,} covered by a bound)")  # fmt: skip
        elif self.evaluated:
            how = f" (all {self.evaluated:,} above {self.dense_to:,} evaluated)"
        text = (f"from n = {self.n:,}: every integer n from {self.n:,} to {self.n_max:,} "
                f"checked{how}{fails}")  # fmt: skip
        if self.scattered:
            text += (f"; the n that pass are not one run: "
                     f"{_runs_text(self.runs, self.n, self.dense_to)}")  # fmt: skip
        return text


class Search:
    """One question at one p: the values, the gap bounds and the counts of the search.

    Parameters
    ----------
    value : callable
        n -> the metric at n (exact).
    gap_bound : callable or None
        (a, b) -> an upper bound on the metric at every integer strictly between a and b
        (``math.inf`` when none is known).
    sweep : callable or None
        array of n -> the metric at each (exact, vectorised); when given, every integer above
        ``dense_to`` is evaluated with it and no bound is used.
    """

    def __init__(self, value, gap_bound=None, sweep=None):
        self.value_at, self.gap_bound_at, self.sweep = value, gap_bound, sweep
        self.values = {}
        self.bounds = {}

    def value(self, n):
        v = self.values.get(n)
        if v is None:
            v = self.values[n] = float(self.value_at(n))
        return v

    def gap_bound(self, a, b):
        if self.gap_bound_at is None:
            return math.inf
        key = (a, b)
        if key not in self.bounds:
            self.bounds[key] = float(self.gap_bound_at(a, b))
        return self.bounds[key]

    def largest_failing(self, a, b, limit, counts):
        """The largest integer strictly between a and b whose value exceeds ``limit``, or None.

        Every integer above the one returned (up to b - 1) is evaluated or certified (and
        counted in ``counts``).
        """
        if b - a <= 1:
            return None
        # A bound from a is at least a's own value (its levels beta are at most alpha but for
        # rounding): try one only where a is within the limit.
        wide = b - a - 1 > _EVERY
        if wide and self.value(a) <= limit and self.gap_bound(a, b) + _SLACK <= limit:
            counts["certified"] += b - a - 1
            return None
        if b - a - 1 <= _EVERY:
            for n in range(b - 1, a, -1):
                counts["evaluated"] += 1
                if not self.value(n) <= limit:
                    return n
            return None
        mid = (a + b) // 2
        found = self.largest_failing(mid, b, limit, counts)
        if found is not None:
            return found
        counts["evaluated"] += 1
        if not self.value(mid) <= limit:
            return mid
        return self.largest_failing(a, mid, limit, counts)

    def swept_failing(self, lo, hi, limit, counts):
        """The largest n in [lo, hi] whose value exceeds ``limit`` (every n evaluated from the
        top, in blocks), or None."""
        top = hi
        while top >= lo:
            bottom = max(lo, top - _SWEEP_BLOCK + 1)
            ns = np.arange(bottom, top + 1, dtype=np.int64)
            got = self.sweep_values(ns)
            bad = np.flatnonzero(~(got <= limit))
            if bad.size:
                counts["evaluated"] += top - int(ns[bad[-1]]) + 1
                return int(ns[bad[-1]])
            counts["evaluated"] += top - bottom + 1
            top = bottom - 1
        return None

    def sweep_values(self, ns):
        missing = [n for n in ns.tolist() if n not in self.values]
        if missing:
            got = self.sweep(np.asarray(missing, dtype=np.int64))
            self.values.update(zip(missing, got.tolist(), strict=True))
        return np.array([self.values[n] for n in ns.tolist()])


def _runs(flags):
    """[(first, last, within)] of consecutive n from a dict n -> within."""
    runs = []
    for n in sorted(flags):
        if runs and runs[-1][1] == n - 1 and runs[-1][2] == flags[n]:
            runs[-1][1] = n
        else:
            runs.append([n, n, flags[n]])
    return tuple(tuple(r) for r in runs)


def min_ns(search, limits, n_max, dense_to, *, runs=False):
    """For each limit, the smallest N from which the metric is within it at every integer n
    from N to ``n_max`` (see the module notes).

    Parameters
    ----------
    search : Search
    limits : sequence of float
    n_max, dense_to : int
        Checked integers (n_max, dense_to >= 1).
    runs : bool
        Also evaluate every n from 1 to ``min(dense_to, N - 1)``, for the stretches of
        :class:`MinN` (a single answer wants them; a table does not).

    Returns
    -------
    list of MinN
    """
    points = ladder(dense_to, n_max)
    dense = [n for n in points if n <= dense_to]
    above = [n for n in points if n > dense_to]
    out = []
    for limit in limits:
        counts = {"evaluated": 0, "certified": 0}
        failing = None
        if above and search.sweep is not None:
            failing = search.swept_failing(dense_to + 1, n_max, limit, counts)
        elif above:
            chain = [dense[-1] if dense else 0] + above
            for i in range(len(chain) - 1, 0, -1):
                b = chain[i]
                if i == len(chain) - 1:
                    counts["evaluated"] += 1
                    if not search.value(b) <= limit:
                        failing = b
                        break
                failing = search.largest_failing(chain[i - 1], b, limit, counts)
                if failing is not None:
                    break
                a = chain[i - 1]
                if a > dense_to:
                    counts["evaluated"] += 1
                    if not search.value(a) <= limit:
                        failing = a
                        break
        if failing is None:
            for n in reversed(dense):
                if not search.value(n) <= limit:
                    failing = n
                    break
        answer = None if failing == n_max else (1 if failing is None else failing + 1)
        stretches = ()
        if runs:
            below = failing if failing is not None else 0
            flags = {n: search.value(n) <= limit for n in dense if n < below}
            if failing is not None:
                flags[failing] = False
            stretches = _runs(flags)
            if answer is not None:
                stretches += ((answer, n_max, True),)
        out.append(MinN(answer, failing, dense_to, n_max, counts["evaluated"],
                        counts["certified"], stretches))  # fmt: skip
    return out


# --- the tail relative error --------------------------------------------------------------


def _delta(n, p, method):
    """delta_n >= sup over every integer k of |D_n(k)| (module notes)."""
    ext = float(extension_bound(method, [n], p, "cdf")[0])
    return max(error_bound(n, p, method), ext)


def _sf(t, s, p):
    """P(B_s > t), B_s ~ Bin(s, p); 1 for t < 0."""
    return 1.0 if t < 0 else float(special.bdtrc(t, s, p)) if t < s else 0.0


def _first_at_least(ns, p, alpha, upper):
    """For each n: the first k with F_n(k) >= alpha (lower), or the last k with
    P(X_n >= k) >= alpha (upper); exact comparisons, halving for every n at once."""
    zero = np.zeros(ns.shape, dtype=np.int64)
    below = np.nextafter(alpha, 0.0)
    if not upper:
        return _last_below(lambda k, i: _binom_cdf(k, ns[i], p), zero, ns, below) + 1

    def minus_tail(k, i):  # -P(X >= k), increasing in k
        return -np.where(k <= 0, 1.0, _binom_sf(np.maximum(k - 1, 0), ns[i], p))

    return _last_below(minus_tail, zero, ns, -alpha)


def tail_gap_bound(n_a, n_b, p, alpha, method, tail):
    """An upper bound on the tail relative error at every integer n strictly between n_a and
    n_b (module notes); ``math.inf`` when the method has no step bound.

    Examples
    --------
    >>> from atlas.tails import tail_error
    >>> b = tail_gap_bound(5000, 5100, 0.1, 0.01, "normal_cc", "both")
    >>> b >= max(tail_error(n, 0.1, 0.01) for n in (5001, 5050, 5099))
    True
    """
    rho = step_bound(method, [n_a], p)
    if rho is None or n_b - n_a < 2:
        return math.inf if rho is None else 0.0
    # Blocks [m1, m2] of the gap; within each, k_m and the masses are bounded by their values
    # at the block's ends (module notes).
    edges = np.unique(np.linspace(n_a + 1, n_b, _BLOCKS + 1).astype(np.int64))
    m1, m2 = edges[:-1], edges[1:] - 1
    s1, s2 = (m1 - n_a).astype(np.float64), (m2 - n_a).astype(np.float64)
    drift = s2 * float(rho[0]) / alpha
    delta = _delta(n_a, p, method)
    sides = []  # (upper, bad mass, the level beta at n_a) for each block and quantile
    k_low = _first_at_least(m1, p, alpha, False) if tail != "upper" else None
    k_up = _first_at_least(m2, p, alpha, True) if tail != "lower" else None
    for mass in _BAD_MASS:
        if k_low is not None:
            i_m = np.floor(np.nan_to_num(special.bdtrik(1.0 - mass, s2, p), nan=1e18)) + 1
            i_m = np.minimum(i_m, s2).astype(np.int64)  # P(B_s > i_m) is then about mass
            j0 = np.maximum(k_low - i_m, 0)
            bad = np.where(i_m >= s2, 0.0, special.bdtrc(i_m, s2.astype(np.int64), p))
            beta = np.where(j0 > n_a, 1.0, _binom_cdf(np.minimum(j0, n_a), n_a, p))
            sides.append((False, bad, beta))
        if k_up is not None:
            low = np.ceil(np.nan_to_num(special.bdtrik(mass, s1, p), nan=0.0)) - 1
            low = np.maximum(low, 0).astype(np.int64)  # P(B_s < low) is then about mass
            j1 = k_up - low
            bad = np.where(
                low <= 0, 0.0, special.bdtr(np.maximum(low - 1, 0), s1.astype(np.int64), p)
            )
            if (j1 > n_a).any():
                return math.inf
            beta = np.where(j1 <= 0, 1.0, _binom_sf(np.maximum(j1 - 1, 0), n_a, p))
            sides.append((True, bad, beta))
    levels = np.concatenate([b for _, _, b in sides])
    if not (levels > 0.0).all():
        return math.inf
    # Admit the tail at j0 (or j1) itself whatever the rounding of beta; each distinct level
    # once (many m share one j0).
    distinct, where = np.unique(levels, return_inverse=True)
    lower, upper = cell_tail_errors(n_a, p, method, distinct * (1.0 - 1e-9),
                                    bound=error_bound(n_a, p, method))  # fmt: skip
    lower, upper = lower[where], upper[where]
    best = {False: np.full(m1.size, math.inf), True: np.full(m1.size, math.inf)}
    start = 0
    for is_upper, bad, beta in sides:
        e = (upper if is_upper else lower)[start : start + beta.size]
        start += beta.size
        got = np.maximum(e, delta) + delta * bad / alpha + drift
        best[is_upper] = np.minimum(best[is_upper], got)
    worst = [best[False].max()] if tail in ("lower", "both") else []
    worst += [best[True].max()] if tail in ("upper", "both") else []
    return float(max(worst))


def _scan_bound(p, method):
    """n -> a bound on sup_k |D_n(k)| for the tail scan's stopping rule (the role of
    :func:`atlas.tails.error_bound`, which costs an engine evaluation): by (1) of the module
    notes, delta_a + (n - a) rho_a from the anchor a = n rounded down to a multiple of
    ``_ANCHOR`` (one engine evaluation per anchor). Any bound ends the scan correctly; a looser
    one only scans a few more counts."""
    anchors = {}

    def bound(n):
        a = max(n - n % _ANCHOR, 1)
        if a not in anchors:
            rho = step_bound(method, [a], p)
            anchors[a] = (_delta(a, p, method), None if rho is None else float(rho[0]))
        delta, rho = anchors[a]
        if rho is None:
            return None
        return delta + (n - a) * rho

    return bound


def tail_search(p, alpha, method, tail):
    """The :class:`Search` of the tail relative error at p."""
    scan_bound = _scan_bound(p, method)

    def value(n):
        lower, upper = cell_tail_errors(n, p, method, [alpha], bound=scan_bound(n))
        return {"lower": lower[0], "upper": upper[0]}.get(tail, max(lower[0], upper[0]))

    return Search(value, lambda a, b: tail_gap_bound(a, b, p, alpha, method, tail))


# --- the size of the test -----------------------------------------------------------------


def size_gap_bound(n_a, n_b, p, alpha, method, alternative):
    """An upper bound on the test's size at every integer strictly between n_a and n_b:
    alpha + c (delta_a + (n_b - n_a - 1) rho_a) (module notes); ``math.inf`` without a step
    bound."""
    rho = step_bound(method, [n_a], p)
    if rho is None:
        return math.inf
    c = 2.0 if alternative == "two-sided" else 1.0
    return alpha + c * (_delta(n_a, p, method) + (n_b - n_a - 1) * float(rho[0]))


def _last_below(f, lo, hi, level):
    """For arrays: the last k in [lo, hi] with f(k) <= level, f increasing in k; lo - 1 if none.

    Halving on the integers, every comparison made on f itself.
    """
    lo, hi = lo.copy() - 1, hi.copy() + 1  # f(lo) <= level (lo below the range), f(hi) > level
    idx = np.flatnonzero(hi - lo > 1)
    while idx.size:
        mid = (lo[idx] + hi[idx]) // 2
        hit = f(mid, idx) <= level
        lo[idx[hit]] = mid[hit]
        hi[idx[~hit]] = mid[~hit]
        idx = idx[hi[idx] - lo[idx] > 1]
    return lo


def sweep_sizes(ns, p, method, alpha, alternative):
    """The approximate test's size at every n of ``ns`` at once, for a method whose G increases
    with k at every k (:data:`atlas.sizes.MONOTONE`).

    The rejected counts are then a run from the far end of each side (:mod:`atlas.sizes`): the
    last k with G(k) <= level below, the first k with 1 - G(k - 1) <= level above, found by
    halving for every n at once; the size is F or P(X >= k) at that end (both sides at alpha/2,
    and the whole mass if they meet). ``tests/test_decision_search.py`` compares it with
    :func:`atlas.sizes.cell_sizes` at every integer of a range.

    Examples
    --------
    >>> from atlas.sizes import cell_sizes
    >>> got = sweep_sizes([50, 3000], 0.1, "normal_cc", 0.05, "greater")
    >>> round(float(got[0]), 4)  # the issue's example: 5.8% at nominal 5%
    0.0579
    >>> float(got[1]) == float(cell_sizes(3000, 0.1, "normal_cc", [0.05], "greater")[0][0])
    True
    """
    if method not in MONOTONE:
        raise ValueError(f"`method` must be one of {', '.join(map(repr, MONOTONE))}; "
                         f"got {method!r}.")  # fmt: skip
    ns = np.asarray(ns, dtype=np.int64)
    level = alpha / 2.0 if alternative == "two-sided" else alpha
    zero = np.zeros(ns.shape, dtype=np.int64)
    size = np.zeros(ns.shape)
    k_low = k_up = None
    if alternative in ("less", "two-sided"):
        k_low = _last_below(lambda k, i: approximate_cdf(k, ns[i], p, method), zero, ns, level)
        size += np.where(k_low >= 0, _binom_cdf(np.maximum(k_low, 0), ns, p), 0.0)
    if alternative in ("greater", "two-sided"):
        # 1 - G(k - 1) decreases in k: j = n - k increases it; the last j with A <= level.
        def upper(j, i):
            return approximate_upper(ns[i] - j, ns[i], p, method)

        j_up = _last_below(upper, zero, ns, level)
        k_up = ns - j_up  # the first rejected k (n + 1: none)
        tail = np.where(k_up <= 0, 1.0, _binom_sf(np.maximum(k_up - 1, 0), ns, p))
        size += np.where(j_up >= 0, tail, 0.0)
    if k_low is not None and k_up is not None:
        size = np.where(k_low + 1 >= k_up, 1.0, size)  # the two runs meet: every count
    return size


def size_search(p, alpha, method, alternative):
    """The :class:`Search` of the test's size at p0 = p."""

    def value(n):
        return float(cell_sizes(n, p, method, [alpha], alternative)[0][0])

    sweep = None
    if method in MONOTONE:

        def sweep(ns):
            return sweep_sizes(ns, p, method, alpha, alternative)

    return Search(value, lambda a, b: size_gap_bound(a, b, p, alpha, method, alternative), sweep)
