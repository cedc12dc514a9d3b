"""Tail relative error: how far off, in relative terms, is every tail probability of at least alpha.

X ~ Bin(n, p), F(k) = P(X <= k), G(k) an approximation of F (:mod:`atlas.approximations`).
Lower tails L(k) = F(k) are approximated by G(k); upper tails U(k) = P(X >= k) = 1 - F(k - 1)
by 1 - G(k - 1). For 0 < alpha < 1:

- ``lower(alpha)`` = max over 0 <= k <= n with L(k) >= alpha of |G(k) / L(k) - 1|,
- ``upper(alpha)`` = max over 0 <= k <= n with U(k) >= alpha of |(1 - G(k - 1)) / U(k) - 1|,
- ``both`` = the larger of the two.

In words: every tail probability of at least alpha is approximated within that relative error.

Both sides in one frame
-----------------------
Each side is read from its far end: j = k on the lower side, j = n - k on the upper side, so
that T(j) (the exact tail L(k) or U(k)) increases with j from T(0) = b(0) or b(n) to T(n) = 1,
and T(j) is the binomial mass of the j + 1 counts farthest out on that side. A(j) is the
approximated tail. The tails admitted at level alpha are one run, j_alpha <= j <= n, j_alpha the
first j with T(j) >= alpha (found by bisection).

Exactness, and the one shortcut
-------------------------------
Every admitted j is evaluated, from j_alpha upward, except those that provably cannot raise the
maximum. With c the largest absolute error |T(j) - A(j)| over every j (the engine's exact CDF
error, max over k = 0..n of |F(k) - G(k)|, together with |G(-1)|, plus a margin of 1e-9
relative and 1e-12 absolute for its own rounding), every j' >= j has
|A(j') / T(j') - 1| <= c / T(j') <= c / T(j), as T increases. So the scan, in blocks, stops at
the first j with c / T(j) <= the maximum found so far for every level asked. A second bound
stops it in the opposite far tail (j at least 9 sigma + 10 past the mean, where the engine's
notes show every G monotone): there |T(j') - A(j')| <= (1 - T(j)) + |1 - A(j)| for j' > j. The
last point j = n is always evaluated. Near the mean the relative error is of the order of the
absolute one, so the scan ends within a few sigma of the mean at worst (a few thousand integers
at n = 10^6) and, for the far tails that matter, usually within a fraction of a sigma of j_alpha.
When every error found is below ``FLOOR`` = 1e-11, the scan also stops once c / T(j) <= 1e-11:
the result is then exact to within an absolute 1e-11, which is below the rounding noise of
relative errors of tails (F itself carries about 1e-14 absolute at n = 10^6, 1e-13 at 10^8, so
a relative error of a tail of 0.05 is uncertain by about 1e-12 there). This matters only where
the approximation is accurate to rounding (peizer_pratt at p = 1/2, large n), where the scan
would otherwise run to the far side. ``full=True`` evaluates every admitted j instead; the
tests compare the two. Up to n =
``DIRECT_MAX`` (2048) every count is evaluated in one vectorised pass (:class:`Profile`, tails
summed from the pmf), which costs less than the bound.

Work shared by the methods
--------------------------
T, its blocks and the answers of the bisection do not depend on the method: :func:`share`
keeps them for every method of one (n, p), and :class:`Counts` holds the exact part of every
count of a small n at many p; :func:`error_bounds` asks the engine for every p of one n at once
(its result at a p does not depend on the other p). Each value is then the one computed alone,
bit for bit (tests/test_decision_regression.py); :mod:`atlas.decision_cube` builds on them.

Accuracy
--------
T comes from Boost's incomplete beta behind ``scipy.stats.binom`` (``_binom_cdf`` for L(k) =
I_{1-p}(n - k, k + 1) and ``_binom_sf`` for U(k) = I_p(k, n - k + 1), each computed directly,
never as one minus the other): tests/test_tails.py measures it against mpmath in relative
terms (about 1e-13 down to tails of 1e-300 at n up to 10^4). A is the method's own formula for
the lower tail and :func:`atlas.complements.approximate_upper` for the upper one, accurate in
relative terms (for the Edgeworth forms, to an absolute 1e-16 of their two terms). The returned
error r therefore carries an error of about (1 + r) 1e-12 at most (1e-11 absolute where the
noise floor ended the scan), plus, at a level alpha within a relative 1e-13 of some T(j), the
question of whether that tail is admitted.
"""

import warnings

import numpy as np
from scipy.special import ndtri

from atlas.approximations import approximate_cdf, check_method
from atlas.complements import approximate_upper
from atlas.engine import _binom_cdf, _binom_pmf, _binom_sf, _evaluate, check_n, check_p

try:
    from scipy.special._ufuncs import _binom_ppf  # Boost's quantile: a first guess only
except ImportError:  # pragma: no cover - a SciPy that has moved it
    from scipy.stats import binom as _binom

    _binom_ppf = _binom.ppf

__all__ = ["TAILS", "check_alpha", "check_tail", "tail_error"]

TAILS = ("lower", "upper", "both")

#: Up to this n every count is evaluated and the engine's bound c is not needed.
DIRECT_MAX = 2048
#: Relative errors below this are rounding noise (F carries 1e-14 absolute at n = 10^6 and
#: 1e-13 at 10^8): the scan does not go on to find a maximum smaller than it.
FLOOR = 1e-11
_MARGIN_REL = 1e-9
_MARGIN_ABS = 1e-12
_FAR_SIGMAS = 9.0
_FAR_MARGIN = 10.0
_FIRST_BLOCK = 64
_MAX_BLOCK = 1 << 16
_AHEAD_MAX = 1024


def _show(value):
    if isinstance(value, np.generic):
        value = value.item()
    return repr(value)


def check_alpha(alpha, name="alpha"):
    """Return ``alpha`` as a float64 array, or raise ValueError unless every value is in (0, 1).

    Examples
    --------
    >>> check_alpha(1.5)
    Traceback (most recent call last):
    ...
    ValueError: `alpha` must be in the open interval (0, 1); got 1.5.
    """
    try:
        arr = np.asarray(alpha, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(
            f"`{name}` must be in the open interval (0, 1); got {_show(alpha)}."
        ) from None
    if np.asarray(alpha).dtype == bool:
        raise ValueError(f"`{name}` must be in the open interval (0, 1); got {_show(alpha)}.")
    flat = arr.ravel()
    bad = ~((flat > 0.0) & (flat < 1.0))
    if bad.any():
        raise ValueError(
            f"`{name}` must be in the open interval (0, 1); got {_show(flat[bad][0])}."
        )
    return arr


def check_tail(tail):
    """Return ``tail`` if it is one of :data:`TAILS`, else raise ValueError listing them."""
    if not isinstance(tail, str) or tail not in TAILS:
        valid = ", ".join(repr(t) for t in TAILS)
        raise ValueError(f"`tail` must be one of {valid}; got {tail!r}.")
    return tail


class Side:
    """One side of Bin(n, p) read from its far end: j = k (lower) or j = n - k (upper).

    Attributes
    ----------
    n : int
    p : float
    method : str
    upper : bool
    """

    def __init__(self, n, p, method, upper, *, shared=None):
        self.n, self.p, self.method, self.upper = n, p, method, upper
        # The exact side's results that do not depend on the method (:func:`share`), kept for
        # the other methods of the same (n, p); None keeps nothing.
        self._known = None
        if shared is not None:
            if shared["cell"] != (n, p):
                raise ValueError(f"`shared` is for (n, p) = {shared['cell']}; got {(n, p)}.")
            self._known = shared[bool(upper)]

    def exact_at(self, j):
        """T(j) at one index j, as a float (kept for the other methods when shared)."""
        if self._known is None:
            return float(self.exact(j))
        known = self._known.setdefault("exact", {})
        if j not in known:
            known[j] = float(self.exact(j))
        return known[j]

    def block(self, j0, j1):
        """T on j0 <= j < j1: T(j0) and the masses summed from it (kept when shared).

        Positive terms: a relative error below (j1 - j0) ulps.
        """
        known = None if self._known is None else self._known.setdefault("block", {})
        if known is not None and (j0, j1) in known:
            return known[j0, j1]
        j = np.arange(j0 + 1, j1, dtype=np.int64)
        t = float(self.exact(j0)) + np.concatenate([[0.0], np.cumsum(self.mass(j))])
        if known is not None:
            known[j0, j1] = t
        return t

    def k(self, j):
        """The count k of index j."""
        return self.n - j if self.upper else j

    def exact(self, j):
        """T(j): L(k) = F(k), or U(k) = P(X >= k), each computed directly (relative accuracy)."""
        j = np.asarray(j, dtype=np.int64)
        if self.upper:
            # U(0) = 1; Boost's sf gives NaN at k - 1 = -1.
            below = self.n - j - 1
            return np.where(below < 0, 1.0, _binom_sf(np.maximum(below, 0), self.n, self.p))
        return _binom_cdf(j, self.n, self.p)

    def approx(self, j):
        """A(j): G(k), or 1 - G(k - 1) without cancellation."""
        j = np.asarray(j, dtype=np.int64)
        if self.upper:
            return approximate_upper(self.n - j, self.n, self.p, self.method)
        return approximate_cdf(j, self.n, self.p, self.method)

    def mass(self, j):
        """b(k(j)), the binomial probability of the count at index j."""
        return _binom_pmf(self.k(np.asarray(j, dtype=np.int64)), self.n, self.p)

    def far(self):
        """The first j at least 9 sigma + 10 past the mean on the opposite side (may be > n)."""
        mu = self.n * self.p
        sigma = np.sqrt(mu * (1.0 - self.p))
        reach = _FAR_SIGMAS * sigma + _FAR_MARGIN
        k = np.ceil(mu + reach) if not self.upper else np.floor(mu - reach)
        return int(self.n - k) if self.upper else int(k)

    def last_at_most(self, x, *, strict=False):
        """For each x, the largest j in -1..n with T(j) <= x (T(j) < x if ``strict``).

        Boost's quantile gives a first guess (a cheaper normal one when the side is shared,
        :func:`share`); a bracket [lo, hi] with T(lo) <= x < T(hi) is then grown from it by
        doubling steps and halved to width one, every comparison made on the exact tail itself
        (T(-1) counts as 0 and T(n + 1) as above any x < 1), so the answer does not depend on
        the guess. A shared side also keeps each answer with its bracket for the other methods.
        """
        x = np.atleast_1d(np.asarray(x, dtype=np.float64))
        if self._known is None:
            return self._last_at_most(x, strict)
        # Answers found for another method of the cell are kept with the bracket that proves
        # them, T(j) <= x < T(j + 1) (T(j) < x <= T(j + 1) if strict, T(-1) = -inf and
        # T(n + 1) = inf): T increases, so any x in a kept bracket has that answer, the one the
        # search below finds from any guess. The others are searched for, and their brackets kept.
        lows, highs, answers = self._known.setdefault(("last", strict), ([], [], []))
        out = np.empty(x.size, dtype=np.int64)
        todo = np.ones(x.size, dtype=bool)
        if answers:
            low, high = np.array(lows), np.array(highs)
            col = x[:, None]
            inside = ((low < col) & (col <= high)) if strict else ((low <= col) & (col < high))
            kept = inside.any(axis=1)
            out[kept] = np.array(answers)[inside[kept].argmax(axis=1)]
            todo = ~kept
        if todo.any():
            found = self._last_at_most(x[todo], strict, quick=True)
            out[todo] = found
            n = self.n
            t = self.exact(np.clip(np.concatenate([found, found + 1]), 0, n))
            lows += np.where(found >= 0, t[: found.size], -np.inf).tolist()
            highs += np.where(found < n, t[found.size :], np.inf).tolist()
            answers += found.tolist()
        return out

    def _guess(self, x):
        """Boost's quantile at each x, clipped to -1..n: the first guess of :meth:`last_at_most`."""
        q = 1.0 - self.p if self.upper else self.p  # a guess only: rounding does not matter
        with np.errstate(all="ignore"), warnings.catch_warnings():
            # Boost warns where it gives up on a quantile: the guess is checked anyway.
            warnings.simplefilter("ignore", RuntimeWarning)
            guess = _binom_ppf(np.clip(x, 1e-300, 1.0), self.n, q)
        guess = np.where(np.isfinite(guess), guess, self.n / 2.0)
        return np.clip(guess, -1, self.n).astype(np.int64)

    def _quick_guess(self, x):
        """A first guess of :meth:`last_at_most` from the normal quantile, skew corrected.

        Cornish-Fisher's first term: the quantile of Bin(n, q) (q = p below, 1 - p above) at x
        is about mu + sigma (z + (z^2 - 1) (1 - 2 q) / (6 sigma)), z = Phi^-1(x); fifty to a
        hundred times cheaper than Boost's quantile and within a few counts of it mostly (the
        search then takes a few more halvings).
        """
        q = 1.0 - self.p if self.upper else self.p
        mu = self.n * q
        sigma = np.sqrt(mu * (1.0 - q))
        with np.errstate(all="ignore"):
            z = ndtri(np.clip(x, 1e-300, 1.0))
            guess = np.ceil(mu + sigma * z + (z * z - 1.0) * (1.0 - 2.0 * q) / 6.0 - 0.5)
        guess = np.where(np.isnan(guess), self.n / 2.0, guess)  # clipped below, as infinities
        return np.clip(guess, -1, self.n).astype(np.int64)

    def _last_at_most(self, x, strict, *, quick=False):
        """:meth:`last_at_most` on a 1-D float64 array, from Boost's guess or the quick one."""
        n = self.n
        guess = self._quick_guess(x) if quick else self._guess(x)

        def below(j, xs):
            inside = (j >= 0) & (j <= n)
            t = self.exact(np.clip(j, 0, n))
            hit = (t < xs) if strict else (t <= xs)
            return np.where(inside, hit, j < 0)

        lo = guess - 1
        hi = guess.copy()
        # A negative x has no j with T(j) <= x (T >= 0): the answer is -1 at once.
        lo[x < 0] = -1
        hi[x < 0] = 0
        # Grow down until T(lo) <= x (or lo = -1), up until T(hi) > x (or hi = n + 1), each
        # step twice the last; then halve. Only the unsettled entries are evaluated.
        idx = np.flatnonzero(lo > -1)
        step = np.ones(idx.size, dtype=np.int64)
        while idx.size:
            bad = ~below(lo[idx], x[idx])
            idx, step = idx[bad], step[bad]
            hi[idx] = lo[idx]
            lo[idx] = np.maximum(lo[idx] - step, -1)
            step = 2 * step
            keep = lo[idx] > -1
            idx, step = idx[keep], step[keep]
        idx = np.flatnonzero(hi <= n)
        step = np.ones(idx.size, dtype=np.int64)
        while idx.size:
            bad = below(hi[idx], x[idx])
            idx, step = idx[bad], step[bad]
            lo[idx] = hi[idx]
            hi[idx] = np.minimum(hi[idx] + step, n + 1)
            step = 2 * step
            keep = hi[idx] <= n
            idx, step = idx[keep], step[keep]
        idx = np.flatnonzero(hi - lo > 1)
        while idx.size:
            mid = (lo[idx] + hi[idx]) // 2
            hit = below(mid, x[idx])
            lo[idx[hit]] = mid[hit]
            hi[idx[~hit]] = mid[~hit]
            idx = idx[hi[idx] - lo[idx] > 1]
        return np.minimum(lo, n)


def share(n, p):
    """A store for the work at one (n, p) that every method repeats, for :class:`Side`.

    The exact tails T(j), the blocks of T that :func:`side_errors` sums and the answers of
    :meth:`Side.last_at_most` do not depend on the method: passed as ``shared`` to
    :func:`cell_tail_errors` and :func:`atlas.sizes.cell_all_sizes` for each method of one
    (n, p), they are computed once and reused as they are, so every result is the one computed
    without it, bit for bit.

    Examples
    --------
    >>> shared = share(5000, 0.1)
    >>> both = [cell_tail_errors(5000, 0.1, m, [0.01], shared=shared)
    ...         for m in ("normal", "poisson")]
    >>> bool(np.array_equal(both[1], cell_tail_errors(5000, 0.1, "poisson", [0.01])))
    True
    """
    return {"cell": (n, p), False: {}, True: {}}


def error_bound(n, p, method):
    """c: a bound on |T(j) - A(j)| over every j of both sides, from the engine.

    The engine's CDF error is max over k = 0..n of |F(k) - G(k)|; the upper tails also meet
    D(-1) = -G(-1). The margin covers the engine's own rounding (1e-12 absolute at large n).
    """
    ev = _evaluate(n, np.array([p], dtype=np.float64), (method,))
    return _bound(ev.cdf[0, 0], approximate_cdf(-1, n, p, method))


def error_bounds(n, p, method):
    """:func:`error_bound` at one n and each p of a 1-D array, in one call of the engine.

    The engine's result at a p does not depend on the other p computed with it (its module
    notes: builds are identical however they are split), and G(-1) is elementwise, so each
    bound is the one :func:`error_bound` gives, bit for bit.
    """
    p = np.asarray(p, dtype=np.float64)
    ev = _evaluate(n, p, (method,))
    g_first = approximate_cdf(-1, n, p, method)
    return [_bound(c, g) for c, g in zip(ev.cdf[0], g_first, strict=True)]


def _bound(cdf_error, g_first):
    """c from the engine's CDF error and G(-1), with the margin for their rounding."""
    c = max(float(cdf_error), abs(float(g_first)))
    return c * (1.0 + _MARGIN_REL) + _MARGIN_ABS


def side_errors(side, alphas, bound, *, full=False):
    """Tail relative errors of one side at each level of ``alphas`` (1-D, any order).

    Parameters
    ----------
    side : Side
    alphas : numpy.ndarray
        Levels, each 0 < alpha < 1.
    bound : float
        c of :func:`error_bound`.
    full : bool
        Evaluate every admitted j (no shortcut).

    Returns
    -------
    numpy.ndarray
        The error at each level.
    """
    n = side.n
    starts = side.last_at_most(alphas, strict=True) + 1  # first j with T(j) >= alpha
    order = np.argsort(starts)
    best = np.zeros(alphas.size)
    far = side.far()
    j0 = int(starts.min())
    block = _FIRST_BLOCK
    ahead = (j0, j0, None, None)  # A on [start, end) and at j = n, evaluated ahead
    # The running maximum of r over [start_a, j) for each level a with start_a < j.
    while j0 <= n:
        j1 = min(n + 1, j0 + block)
        # T on the block: one exact value at its start and the masses summed from it,
        # re-anchored at every block.
        t = side.block(j0, j1)
        if j1 > ahead[1]:
            # A on this block, the next two while they are small (the scan mostly ends within
            # them) and at j = n, in one call: G costs nearly as much for one count as for a
            # thousand. Each value is the one a call for its block alone gives (elementwise).
            end = min(n + 1, j0 + (7 * block if block <= _AHEAD_MAX else block))
            got = side.approx(np.append(np.arange(j0, end, dtype=np.int64), n))
            ahead = (j0, end, got[:-1], got[-1])
        a = ahead[2][j0 - ahead[0] : j1 - ahead[0]]
        r = np.abs(a / t - 1.0)
        # Suffix maxima within the block give each level's maximum over its part of the block.
        suffix = np.maximum.accumulate(r[::-1])[::-1]
        for i in order:
            s = starts[i]
            if s >= j1:
                break
            best[i] = max(best[i], suffix[max(s - j0, 0)])
        j0 = j1
        block = min(2 * block, _MAX_BLOCK)
        if j0 > n or full:
            continue
        started = starts < j0
        if not started.all():
            continue
        t_next = side.exact_at(j0)
        limit = bound / t_next
        if j0 - 1 >= far:
            tail = (1.0 - float(t[-1])) + abs(1.0 - float(a[-1]))
            limit = min(limit, tail / t_next)
        if (limit <= np.maximum(best, FLOOR)).all():
            # The last point j = n is evaluated in every case (its G is set apart by some
            # methods); the rest cannot raise any level's maximum.
            r_last = abs(float(ahead[3]) / side.exact_at(n) - 1.0)
            return np.maximum(best, r_last)
    return best


class Profile:
    """Every count of one small cell at once: k = 0..n, b, L, U, G(k) and 1 - G(k - 1).

    L and U are running sums of the pmf from each far end (positive terms: relative error
    below n ulps, so relative accuracy in the far tails too). Used up to n = ``DIRECT_MAX``,
    where one vectorised pass costs less than the engine's bound.
    """

    def __init__(self, n, p, method):
        self.n = n
        self.k = np.arange(n + 1, dtype=np.int64)
        self.mass = _binom_pmf(self.k, n, p)
        self.lower = np.cumsum(self.mass)
        self.upper = np.cumsum(self.mass[::-1])[::-1]
        self.lower[-1] = self.upper[0] = 1.0  # the whole mass, exactly
        self.g = approximate_cdf(self.k, n, p, method)
        self.gu = approximate_upper(self.k, n, p, method)

    def tail_errors(self, alphas):
        """lower(alpha), upper(alpha) for each level."""
        return profile_tail_errors(self.lower, self.upper, self.g, self.gu, alphas)


class Counts:
    """The exact part of :class:`Profile` at one n and several p, shared by every method.

    ``k``, and ``mass``, ``lower`` and ``upper`` of shape (p, n + 1): each row is the
    :class:`Profile` of that p, computed by the same operations row by row, so the same values.
    """

    def __init__(self, n, p):
        self.n = n
        self.p = np.atleast_1d(np.asarray(p, dtype=np.float64))
        self.k = np.arange(n + 1, dtype=np.int64)
        self.mass = _binom_pmf(self.k, n, self.p[:, None])
        self.lower = np.cumsum(self.mass, axis=1)
        self.upper = np.cumsum(self.mass[:, ::-1], axis=1)[:, ::-1]
        self.lower[:, -1] = self.upper[:, 0] = 1.0  # the whole mass, exactly

    def approx(self, method):
        """G(k) and 1 - G(k - 1) of one method at every count and p, each of shape (p, n + 1)."""
        k, p = self.k[None, :], self.p[:, None]
        return approximate_cdf(k, self.n, p, method), approximate_upper(k, self.n, p, method)

    def tail_errors(self, method, alphas):
        """lower(alpha), upper(alpha) of one method, each of shape (p, levels)."""
        return profile_tail_errors(self.lower, self.upper, *self.approx(method), alphas)


def profile_tail_errors(lower, upper, g, gu, alphas):
    """lower(alpha), upper(alpha) from every count: L, U, G and 1 - G(k - 1) of shape (..., n + 1).

    Returns arrays of shape (..., levels), one row per row of the inputs.
    """
    with np.errstate(divide="ignore", invalid="ignore"):  # underflowed tails: not admitted
        r_low = np.abs(g / lower - 1.0)
        r_up = np.abs(gu / upper - 1.0)
    r_low = np.where(lower > 0, r_low, 0.0)
    r_up = np.where(upper > 0, r_up, 0.0)
    # Lower: admitted k >= the first with L >= alpha; upper: k <= the last with U >= alpha.
    suffix = np.maximum.accumulate(r_low[..., ::-1], axis=-1)[..., ::-1]
    prefix = np.maximum.accumulate(r_up, axis=-1)
    n = lower.shape[-1] - 1
    first = np.empty(lower.shape[:-1] + alphas.shape, dtype=np.int64)
    last = np.empty_like(first)
    for row in np.ndindex(lower.shape[:-1]):
        first[row] = np.searchsorted(lower[row], alphas, side="left")
        last[row] = n - np.searchsorted(upper[row][::-1], alphas, side="left")
    lower_error = np.take_along_axis(suffix, np.minimum(first, n), axis=-1)
    upper_error = np.take_along_axis(prefix, np.maximum(last, 0), axis=-1)
    return lower_error, upper_error


def cell_tail_errors(n, p, method, alphas, *, bound=None, full=False, shared=None):
    """Lower and upper tail relative errors at one (n, p) for several levels.

    ``shared`` (:func:`share`) keeps the method-free work for the other methods of the cell.

    Returns
    -------
    lower, upper : numpy.ndarray
        One value per level.
    """
    alphas = np.atleast_1d(np.asarray(alphas, dtype=np.float64))
    if n <= DIRECT_MAX and not full:
        return Profile(n, p, method).tail_errors(alphas)
    if bound is None and not full:
        bound = error_bound(n, p, method)
    lower = side_errors(Side(n, p, method, False, shared=shared), alphas, bound, full=full)
    upper = side_errors(Side(n, p, method, True, shared=shared), alphas, bound, full=full)
    return lower, upper


def _cells(n, p, alpha):
    """Broadcast checked n, p, alpha; return the shape, flat arrays and the distinct (n, p)."""
    n_b, p_b, a_b = np.broadcast_arrays(n, p, alpha)
    flat_n, flat_p, flat_a = (x.ravel() for x in (n_b, p_b, a_b))
    pairs = {}
    for i, key in enumerate(zip(flat_n.tolist(), flat_p.tolist(), strict=True)):
        pairs.setdefault(key, []).append(i)
    return n_b.shape, flat_a.astype(np.float64), pairs


def tail_error(n, p, alpha, *, method="normal_cc", tail="both"):
    """Exact tail relative error of an approximation to Bin(n, p) at level alpha.

    Parameters
    ----------
    n : int or array_like of int
        Number of trials, n >= 1.
    p : float or array_like of float
        Success probability, 0 < p < 1.
    alpha : float or array_like of float
        The smallest tail probability that counts, 0 < alpha < 1. ``n``, ``p`` and ``alpha``
        broadcast together.
    method : str, optional
        One of :data:`atlas.METHODS`; default ``"normal_cc"``.
    tail : {"both", "lower", "upper"}, optional
        Which tails: P(X <= k), P(X >= k), or both (the larger error); default ``"both"``.

    Returns
    -------
    float or numpy.ndarray
        max |approximated tail / exact tail - 1| over the tails of probability >= alpha; a float
        for scalar inputs, else an array of the broadcast shape.

    Raises
    ------
    ValueError
        If n is not an integer >= 1, p or alpha is outside (0, 1), or method or tail is unknown.

    Notes
    -----
    lower(alpha) = max over k with F(k) >= alpha of |G(k)/F(k) - 1|; upper(alpha) = max over k
    with P(X >= k) >= alpha of |(1 - G(k - 1))/P(X >= k) - 1|. Every admitted k is accounted
    for (see the module notes); the result carries an error of about (1 + r) 1e-12.

    Examples
    --------
    >>> round(tail_error(100, 0.1, 0.001, tail="lower"), 4)  # P(X <= 2) = 0.0019 vs 0.0062
    2.1928
    """
    n_arr = check_n(n)
    p_arr = check_p(p)
    a_arr = check_alpha(alpha)
    method = check_method(method)
    tail = check_tail(tail)
    shape, flat_a, pairs = _cells(n_arr, p_arr, a_arr)
    out = np.empty(flat_a.size)
    for (cell_n, cell_p), where in pairs.items():
        where = np.asarray(where)
        lower, upper = cell_tail_errors(int(cell_n), float(cell_p), method, flat_a[where])
        out[where] = {"lower": lower, "upper": upper}.get(tail, np.maximum(lower, upper))
    out = out.reshape(shape)
    return float(out) if out.ndim == 0 else out
