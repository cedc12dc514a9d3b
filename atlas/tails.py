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

    def __init__(self, n, p, method, upper):
        self.n, self.p, self.method, self.upper = n, p, method, upper

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

        Boost's quantile gives a first guess; a bracket [lo, hi] with T(lo) <= x < T(hi) is
        then grown from it by doubling steps and halved to width one, every comparison made on
        the exact tail itself (T(-1) counts as 0 and T(n + 1) as above any x < 1), so the
        answer does not depend on the guess.
        """
        x = np.atleast_1d(np.asarray(x, dtype=np.float64))
        n = self.n
        q = 1.0 - self.p if self.upper else self.p  # a guess only: rounding does not matter
        with np.errstate(all="ignore"), warnings.catch_warnings():
            # Boost warns where it gives up on a quantile: the guess is checked anyway.
            warnings.simplefilter("ignore", RuntimeWarning)
            guess = _binom_ppf(np.clip(x, 1e-300, 1.0), n, q)
        guess = np.where(np.isfinite(guess), guess, n / 2.0)
        guess = np.clip(guess, -1, n).astype(np.int64)

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


def error_bound(n, p, method):
    """c: a bound on |T(j) - A(j)| over every j of both sides, from the engine.

    The engine's CDF error is max over k = 0..n of |F(k) - G(k)|; the upper tails also meet
    D(-1) = -G(-1). The margin covers the engine's own rounding (1e-12 absolute at large n).
    """
    ev = _evaluate(n, np.array([p], dtype=np.float64), (method,))
    g_first = abs(float(approximate_cdf(-1, n, p, method)))
    c = max(float(ev.cdf[0, 0]), g_first)
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
    # The running maximum of r over [start_a, j) for each level a with start_a < j.
    while j0 <= n:
        j1 = min(n + 1, j0 + block)
        j = np.arange(j0, j1, dtype=np.int64)
        # T on the block: one exact value at its start and the masses summed from it (positive
        # terms: a relative error below (j1 - j0) ulps), re-anchored at every block.
        t = float(side.exact(j0)) + np.concatenate([[0.0], np.cumsum(side.mass(j[1:]))])
        a = side.approx(j)
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
        t_next = float(side.exact(j0))
        limit = bound / t_next
        if j0 - 1 >= far:
            tail = (1.0 - float(t[-1])) + abs(1.0 - float(a[-1]))
            limit = min(limit, tail / t_next)
        if (limit <= np.maximum(best, FLOOR)).all():
            # The last point j = n is evaluated in every case (its G is set apart by some
            # methods); the rest cannot raise any level's maximum.
            r_last = abs(float(side.approx(n)) / float(side.exact(n)) - 1.0)
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
        with np.errstate(divide="ignore", invalid="ignore"):  # underflowed tails: not admitted
            r_low = np.abs(self.g / self.lower - 1.0)
            r_up = np.abs(self.gu / self.upper - 1.0)
        r_low = np.where(self.lower > 0, r_low, 0.0)
        r_up = np.where(self.upper > 0, r_up, 0.0)
        # Lower: admitted k >= the first with L >= alpha; upper: k <= the last with U >= alpha.
        suffix = np.maximum.accumulate(r_low[::-1])[::-1]
        prefix = np.maximum.accumulate(r_up)
        first = np.searchsorted(self.lower, alphas, side="left")
        last = self.n - np.searchsorted(self.upper[::-1], alphas, side="left")
        return suffix[np.minimum(first, self.n)], prefix[np.maximum(last, 0)]


def cell_tail_errors(n, p, method, alphas, *, bound=None, full=False):
    """Lower and upper tail relative errors at one (n, p) for several levels.

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
    lower = side_errors(Side(n, p, method, False), alphas, bound, full=full)
    upper = side_errors(Side(n, p, method, True), alphas, bound, full=full)
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
