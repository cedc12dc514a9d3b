"""The size of a binomial test whose p-value comes from an approximation, and the exact test's.

Testing H0: p = p0 at nominal level alpha, X ~ Bin(n, p0), b the binomial pmf, F the CDF and G
an approximation of it (:mod:`atlas.approximations`):

- ``less`` (lower one-sided): size = sum of b(k) over k with G(k) <= alpha;
- ``greater`` (upper one-sided): size = sum of b(k) over k with 1 - G(k - 1) <= alpha;
- ``two-sided``: size = sum of b(k) over k with G(k) <= alpha/2 or 1 - G(k - 1) <= alpha/2.

The exact test's attained size is the same sum with F in place of G (for the upper tail,
P(X >= k) in place of 1 - G(k - 1)); it is at most alpha, the gap being the level the exact test
gives away. The alternatives are named as ``scipy.stats.binomtest`` names them.

How the sums are made exactly
-----------------------------
Each side is read from its far end (:class:`atlas.tails.Side`: j = k below, j = n - k above),
T(j) the exact tail, increasing in j, and A(j) the approximated one. The exact test rejects the
run j <= j_F, j_F the last j with T(j) <= alpha (bisection), so its size is T(j_F). For the
approximate test, with c the bound of :func:`atlas.tails.error_bound` on |T(j) - A(j)|:

- every j with T(j) <= alpha - c is rejected (A(j) <= T(j) + c <= alpha), and so is every j in
  the far tail on the same side beyond 9 sigma + 10 from the mean where |A| <= alpha there (every
  G is monotone in its far tails: :mod:`atlas.engine`);
- no j with T(j) > alpha + c is rejected;
- every j between is evaluated.

So size = T(j1) + the sum of b over the evaluated j with A(j) <= alpha, j1 the last certainly
rejected j; nothing is sampled. For the methods whose G increases with k at every k
(``normal_cc``, ``normal``: Phi of an increasing score; ``poisson``: a CDF), the rejected counts
between are a run, whose end is found by halving, and the size is T at that end. Up to n = 2048
every count is evaluated in one vectorised pass instead (:class:`atlas.tails.Profile`), which
costs less than the bound.

The two-sided set is the union of the two one-sided sets at alpha/2; where they could meet (only
when alpha + 2c >= 1, at very small n), the counts in both are evaluated and counted once.

Accuracy
--------
T is Boost's incomplete beta (relative error about 1e-13, see :mod:`atlas.tails`) and b its pmf;
sums of positive terms keep that relative accuracy, so both sizes are accurate to about 1e-12
relative. A count whose approximated p-value lies within rounding (1e-16 relative) of alpha may
be counted either way, as in any computation of the test.
"""

from dataclasses import dataclass

import numpy as np

from atlas.approximations import check_method
from atlas.engine import check_n, check_p
from atlas.tails import DIRECT_MAX, Profile, Side, _cells, check_alpha, error_bound

__all__ = ["ALTERNATIVES", "TestSize", "check_alternative", "test_size"]

ALTERNATIVES = ("two-sided", "less", "greater")

_BLOCK = 1 << 16
#: The monotone methods' halving reads A from one call where the counts in question are fewer.
_AHEAD = 2048
#: Methods whose G(k) increases with k at every k (a normal CDF of an increasing score, or the
#: Poisson CDF): their rejection regions are runs, found by halving.
MONOTONE = ("normal_cc", "normal", "poisson")
_FAR_SIGMAS = 9.0
_FAR_MARGIN = 10.0


def check_alternative(alternative):
    """Return ``alternative`` if it is one of :data:`ALTERNATIVES`, else raise ValueError."""
    if not isinstance(alternative, str) or alternative not in ALTERNATIVES:
        valid = ", ".join(repr(a) for a in ALTERNATIVES)
        raise ValueError(f"`alternative` must be one of {valid}; got {alternative!r}.")
    return alternative


@dataclass(frozen=True)
class TestSize:
    """Sizes of the approximate and the exact binomial test of H0: p = p0.

    Attributes
    ----------
    size : float or numpy.ndarray
        The probability, under H0, that the test with the approximation's p-value rejects.
    exact_size : float or numpy.ndarray
        The same for the exact test (p-values from F): at most ``alpha``.
    alpha : float or numpy.ndarray
        The nominal level.
    alternative : str
        ``"two-sided"``, ``"less"`` or ``"greater"``.
    method : str
        The approximation.
    """

    __test__ = False  # not a pytest test class, despite its name

    size: object
    exact_size: object
    alpha: object
    alternative: str
    method: str


def _far_reject(side, level, first=None):
    """The last j of the same-side far tail where every A(j') (j' <= j) is <= ``level``, or -1.

    Starts 9 sigma + 10 from the mean (:func:`_far_index`) and doubles the distance until
    |A| <= level there; ``first`` is A at the first j, if known.
    """
    reach = _far_reach(side)
    while True:
        j = _far_index(side, reach)
        if j < 0:
            return -1
        a = float(side.approx(j)) if first is None else float(first)
        if abs(a) <= level:
            return j
        first = None
        reach *= 2.0


def _far_reach(side):
    """9 sigma + 10: the first distance from the mean :func:`_far_reject` tries."""
    mu = side.n * side.p
    return _FAR_SIGMAS * np.sqrt(mu * (1.0 - side.p)) + _FAR_MARGIN


def _far_index(side, reach):
    """The index j of the count ``reach`` from the mean on the side's own far end (may be < 0)."""
    mu = side.n * side.p
    k = np.ceil(mu + reach) if side.upper else np.floor(mu - reach)
    return int(side.n - k) if side.upper else int(k)


class _Ahead:
    """A(j) of one side on the counts first..last and at one more count, in one call.

    Read back by index where every count asked for is among them, else computed; a method's G
    costs nearly as much for one count as for a thousand, and each value is the one a call for
    it alone gives (every G is elementwise).
    """

    def __init__(self, side, first, last, extra):
        self.side, self.first = side, first
        got = side.approx(np.append(np.arange(first, last + 1, dtype=np.int64), extra))
        self.values, self.extra = got[:-1], got[-1]

    def __call__(self, j):
        j = np.asarray(j, dtype=np.int64)
        if ((j >= self.first) & (j < self.first + self.values.size)).all():
            return self.values[j - self.first]
        return self.side.approx(j)


def _rejected(side, levels, bound):
    """Both sizes of one side's test at each level, and the ends (j1, j2) of its sums.

    All j <= j1 are rejected, j in (j1, j2] where A(j) <= level, none beyond j2 (module notes).
    """
    m = levels.size
    found = side.last_at_most(np.concatenate([levels, levels - bound, levels + bound]))
    j_exact, low, high = found[:m], found[m : 2 * m], found[2 * m :]
    exact_size = np.where(j_exact >= 0, side.exact(np.maximum(j_exact, 0)), 0.0)
    near = np.where(levels - bound > 0, low, -1)
    # A on the counts in question as they are when the far tail's first point is rejected (the
    # usual case), with that point, in one call (_Ahead); any other count is computed.
    j_far = _far_index(side, _far_reach(side))
    start = np.maximum(near, j_far)
    first, last = int(start.min()) + 1, int(np.maximum(high, start).max())
    if last - first >= (_AHEAD if side.method in MONOTONE else _BLOCK):
        last = first - 1  # too many: the far point only
    approx = _Ahead(side, first, last, max(j_far, 0))
    j1 = np.maximum(near, _far_reject(side, levels.min(), approx.extra if j_far >= 0 else None))
    j2 = np.maximum(high, j1)
    if side.method in MONOTONE:
        # A increases with j: the rejected counts are the run j <= j*, j* the last j of
        # [j1, j2] with A(j) <= level, found by halving; the size is T(j*).
        lo, hi = j1.copy(), j2 + 1  # A(lo) <= level (or lo = -1); every j >= hi is kept
        idx = np.flatnonzero(hi - lo > 1)
        while idx.size:
            mid = (lo[idx] + hi[idx]) // 2
            hit = approx(mid) <= levels[idx]
            lo[idx[hit]] = mid[hit]
            hi[idx[~hit]] = mid[~hit]
            idx = idx[hi[idx] - lo[idx] > 1]
        approx_size = np.where(lo >= 0, side.exact(np.maximum(lo, 0)), 0.0)
        return approx_size, exact_size, list(zip(j1.tolist(), j2.tolist(), strict=True))
    approx_size = np.where(j1 >= 0, side.exact(np.maximum(j1, 0)), 0.0)
    first, last = int(j1.min()) + 1, int(j2.max())
    if last - first < _BLOCK:
        # One pass over the union of the counts in question, every level at once.
        j = np.arange(first, last + 1, dtype=np.int64)
        between = (j[None, :] > j1[:, None]) & (j[None, :] <= j2[:, None])
        hit = between & (approx(j)[None, :] <= levels[:, None])
        approx_size = approx_size + np.where(hit, side.mass(j)[None, :], 0.0).sum(axis=1)
    else:
        for i, level in enumerate(levels):
            for start in range(int(j1[i]) + 1, int(j2[i]) + 1, _BLOCK):
                j = np.arange(start, min(int(j2[i]) + 1, start + _BLOCK), dtype=np.int64)
                hit = side.approx(j) <= level
                approx_size[i] += float(side.mass(j[hit]).sum())
    return approx_size, exact_size, list(zip(j1.tolist(), j2.tolist(), strict=True))


def _overlap(n, p, method, level, lower_end, upper_end):
    """The mass counted by both one-sided sets at ``level`` (zero unless they can meet)."""
    low_side, up_side = Side(n, p, method, False), Side(n, p, method, True)
    first = n - upper_end[1]  # the upper set holds only k >= n - j2 of the upper side
    last = lower_end[1]  # the lower set holds only k <= j2 of the lower side
    total = 0.0
    for start in range(max(first, 0), min(last, n) + 1, _BLOCK):
        k = np.arange(start, min(min(last, n) + 1, start + _BLOCK), dtype=np.int64)
        in_lower = (k <= lower_end[0]) | (low_side.approx(k) <= level)
        in_upper = (n - k <= upper_end[0]) | (up_side.approx(n - k) <= level)
        total += float(low_side.mass(k[in_lower & in_upper]).sum())
    return total


def _profile_sizes(profile, alphas, alternative):
    """Both sizes from every count of a small cell (:class:`atlas.tails.Profile`)."""
    mass = profile.mass
    size = rejected_mass(mass, profile.g, profile.gu, alphas, alternative)
    return size, rejected_mass(mass, profile.lower, profile.upper, alphas, alternative)


def rejected_mass(mass, lower, upper, alphas, alternative):
    """The mass of the counts a test rejects, from every count of small cells.

    ``mass`` is b(k) and ``lower``, ``upper`` the lower tail and the upper tail P(X >= k) the
    test takes its p-values from (G and 1 - G(k - 1) for the approximate test, F and U for the
    exact one), each of shape (..., n + 1) (broadcast together); returns shape (..., levels),
    every row summed as one.
    """
    level = alphas[:, None] if alternative != "two-sided" else alphas[:, None] / 2.0
    lower, upper = lower[..., None, :], upper[..., None, :]
    if alternative == "less":
        hit = lower <= level
    elif alternative == "greater":
        hit = upper <= level
    else:
        hit = (lower <= level) | (upper <= level)
    return np.where(hit, mass[..., None, :], 0.0).sum(axis=-1)


def cell_all_sizes(n, p, method, alphas, *, bound=None, shared=None):
    """Both sizes of every alternative at one (n, p0): {alternative: (size, exact_size)}.

    The one-sided tests at alpha and the two-sided test's sides at alpha/2 share one pass per
    side; ``shared`` (:func:`atlas.tails.share`) keeps the method-free work for the other
    methods of the cell.
    """
    alphas = np.atleast_1d(np.asarray(alphas, dtype=np.float64))
    if n <= DIRECT_MAX:
        profile = Profile(n, p, method)
        return {alt: _profile_sizes(profile, alphas, alt) for alt in ALTERNATIVES}
    if bound is None:
        bound = error_bound(n, p, method)
    m = alphas.size
    levels = np.concatenate([alphas, alphas / 2.0])
    lower = _rejected(Side(n, p, method, False, shared=shared), levels, bound)
    upper = _rejected(Side(n, p, method, True, shared=shared), levels, bound)
    out = {"less": (lower[0][:m], lower[1][:m]), "greater": (upper[0][:m], upper[1][:m])}
    size = lower[0][m:] + upper[0][m:]
    for i, level in enumerate(levels[m:]):
        lo_end, up_end = lower[2][m + i], upper[2][m + i]
        if lo_end[1] >= n - up_end[1]:
            size[i] -= _overlap(n, p, method, level, lo_end, up_end)
    out["two-sided"] = (size, lower[1][m:] + upper[1][m:])
    return out


def cell_sizes(n, p, method, alphas, alternative, *, bound=None):
    """Approximate and exact test sizes at one (n, p0) for several levels.

    Returns
    -------
    size, exact_size : numpy.ndarray
        One value per level.
    """
    alphas = np.atleast_1d(np.asarray(alphas, dtype=np.float64))
    if n <= DIRECT_MAX:
        return _profile_sizes(Profile(n, p, method), alphas, alternative)
    if bound is None:
        bound = error_bound(n, p, method)
    if alternative == "less":
        return _rejected(Side(n, p, method, False), alphas, bound)[:2]
    if alternative == "greater":
        return _rejected(Side(n, p, method, True), alphas, bound)[:2]
    half = alphas / 2.0
    lo_size, lo_exact, lo_ends = _rejected(Side(n, p, method, False), half, bound)
    up_size, up_exact, up_ends = _rejected(Side(n, p, method, True), half, bound)
    size = lo_size + up_size
    for i, level in enumerate(half):
        if lo_ends[i][1] >= n - up_ends[i][1]:  # the two sets could share counts
            size[i] -= _overlap(n, p, method, level, lo_ends[i], up_ends[i])
    # The exact sets cannot meet: F(k) <= alpha/2 and P(X >= k) <= alpha/2 would give
    # 1 + b(k) <= alpha.
    return size, lo_exact + up_exact


def test_size(n, p0, alpha, *, method="normal_cc", alternative="two-sided"):
    """Size of the binomial test of H0: p = p0 with the approximation's p-value, and the exact one.

    Parameters
    ----------
    n : int or array_like of int
        Number of trials, n >= 1.
    p0 : float or array_like of float
        The success probability under the null hypothesis, 0 < p0 < 1.
    alpha : float or array_like of float
        Nominal level, 0 < alpha < 1. ``n``, ``p0`` and ``alpha`` broadcast together.
    method : str, optional
        One of :data:`atlas.METHODS`; default ``"normal_cc"``.
    alternative : {"two-sided", "less", "greater"}, optional
        As in ``scipy.stats.binomtest``: reject for small X (``"less"``), large X
        (``"greater"``) or either, at alpha/2 each (``"two-sided"``, the default).

    Returns
    -------
    TestSize
        ``.size`` (the approximate test's) and ``.exact_size``: floats for scalar inputs, else
        arrays of the broadcast shape.

    Raises
    ------
    ValueError
        If n is not an integer >= 1, p0 or alpha is outside (0, 1), or method or alternative is
        unknown.

    Notes
    -----
    less: sum of b(k) over G(k) <= alpha; greater: over 1 - G(k - 1) <= alpha; two-sided: over
    G(k) <= alpha/2 or 1 - G(k - 1) <= alpha/2; exact_size: the same with F. Every count is
    accounted for (see the module notes); both sizes are accurate to about 1e-12 relative.

    Examples
    --------
    >>> t = test_size(50, 0.1, 0.05, alternative="greater")
    >>> round(t.size, 4), round(t.exact_size, 4)  # the shortcut rejects 5.8% of the time
    (0.0579, 0.0245)
    """
    n_arr = check_n(n)
    with _renamed("p", "p0"):
        p_arr = check_p(p0)
    a_arr = check_alpha(alpha)
    method = check_method(method)
    alternative = check_alternative(alternative)
    shape, flat_a, pairs = _cells(n_arr, p_arr, a_arr)
    size = np.empty(flat_a.size)
    exact = np.empty(flat_a.size)
    for (cell_n, cell_p), where in pairs.items():
        where = np.asarray(where)
        got = cell_sizes(int(cell_n), float(cell_p), method, flat_a[where], alternative)
        size[where], exact[where] = got
    size, exact, alpha_b = size.reshape(shape), exact.reshape(shape), flat_a.reshape(shape)
    if size.ndim == 0:
        size, exact, alpha_b = float(size), float(exact), float(alpha_b)
    return TestSize(size, exact, alpha_b, alternative, method)


class _renamed:
    """Retell a ValueError about `old` as one about `new` (the engine checks p; here it is p0)."""

    def __init__(self, old, new):
        self.old, self.new = old, new

    def __enter__(self):
        return self

    def __exit__(self, kind, error, _tb):
        if isinstance(error, ValueError):
            raise ValueError(str(error).replace(f"`{self.old}`", f"`{self.new}`")) from None
        return False


test_size.__test__ = False  # a function of the API, not a pytest test
