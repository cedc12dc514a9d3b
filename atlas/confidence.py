"""Confidence intervals for a binomial p, and their exact coverage.

x successes in n trials, p-hat = x/n, q-hat = 1 - p-hat, z = the (1 + level)/2 quantile of the
standard normal. Each interval maps every x = 0..n to a closed interval [lo(x), hi(x)]:

================  =================================================================================
name              [lo(x), hi(x)]
================  =================================================================================
wald              p-hat -+ z sqrt(p-hat q-hat / n)
wald_cc           the Wald interval widened by 1/(2n) on each side
wilson            (p-hat + z^2/(2n) -+ z sqrt(p-hat q-hat / n + z^2/(4 n^2))) / (1 + z^2/n);
                  lo(0) = 0 and hi(n) = 1 are written exactly (the formula's exact values there)
wilson_cc         Newcombe (1998), method 4, the score interval with continuity correction:
                  lo = (2 n p-hat + z^2 - 1 - z sqrt(z^2 - 2 - 1/n + 4 p-hat (n q-hat + 1)))
                  / (2 (n + z^2)), and lo(0) = 0;
                  hi = (2 n p-hat + z^2 + 1 + z sqrt(z^2 + 2 - 1/n + 4 p-hat (n q-hat - 1)))
                  / (2 (n + z^2)), and hi(n) = 1
agresti_coull     n~ = n + z^2, p~ = (x + z^2/2) / n~, p~ -+ z sqrt(p~ (1 - p~) / n~)
jeffreys          the (1 - level)/2 and (1 + level)/2 quantiles of Beta(x + 1/2, n - x + 1/2);
                  lo(0) = 0, hi(n) = 1
clopper_pearson   lo = the (1 - level)/2 quantile of Beta(x, n - x + 1), lo(0) = 0;
                  hi = the (1 + level)/2 quantile of Beta(x + 1, n - x), hi(n) = 1
================  =================================================================================

No endpoint is clipped to [0, 1] beyond what the table says: the Wald, wald_cc and Agresti-Coull
endpoints may fall below 0 or above 1 (which changes no coverage, as 0 < p < 1).

Coverage and its minimum
------------------------
The coverage at (n, p) is C(n, p) = sum over x of b(x; n, p) [lo(x) <= p <= hi(x)], closed
intervals, b the binomial pmf.

*The covering x form one run.* For every interval above and every 0 < p < 1, the x with
lo(x) <= p are an initial run 0..A(p) and the x with hi(x) >= p a final run B(p)..n, so the x
covering p are the run B(p)..A(p) (empty when B > A), and C(n, p) = F(A) - F(B - 1) with F the
binomial CDF. Why: lo(0) <= 0 < p for each (0 for wald, wilson, wilson_cc, jeffreys and
clopper_pearson, -1/(2n) for wald_cc, and p~(0) - z sqrt(p~ q~ / n~) < 0 for agresti_coull:
with p~(0) = z^2/(2 n~) that is p~(0) < z^2 (1 - p~(0)) / n~, i.e. p~(0) < 1/2, true as
n~ = n + z^2 > z^2); and lo is either nondecreasing in x (wilson, wilson_cc: the score
statistic's acceptance region |x - n p| <= z sqrt(n p q) (+ 1/2 with the correction) moves up
with p; jeffreys and
clopper_pearson: a Beta(a, b) quantile increases with a and decreases with b) or convex in x
(wald, wald_cc: x/n minus the concave z sqrt(x (n - x)) / n^1.5; agresti_coull: the same in p~,
affine in x). A convex or nondecreasing function that is <= p at x = 0 is <= p exactly on an
initial run. The mirror argument (hi(n) >= 1 > p, hi concave or nondecreasing) gives the final
run. `tests/test_confidence.py` checks this on the computed endpoints for many n and levels.
So A(p) and B(p) are found by bisection over x, evaluating only about 2 log2(n) endpoints: a
single cell at n = 10^6 costs well under a millisecond.

*The minimum over a band is attained at the ends of the pieces.* C(n, p) changes its covering
run only where p crosses an endpoint. Between two consecutive endpoints t_i < t_{i+1} the run
a..b is fixed and C(p) = F(b; n, p) - F(a - 1; n, p). Since d F(k; n, p) / dp = -n b(k; n-1, p),

    C'(p) = n [b(a - 1; n - 1, p) - b(b; n - 1, p)],

and b(a - 1; n-1, p) / b(b; n-1, p) = [C(n-1, a-1) / C(n-1, b)] (q/p)^(b - a + 1) decreases
strictly in p, so C' changes sign at most once, from + to - (C is increasing, then decreasing;
for a = 0 it only decreases and for b = n it only increases). Hence C has no interior minimum on
a piece: its infimum over the open piece is min(C(t_i+), C(t_{i+1}-)), the one-sided limits. At a
jump the closed-interval indicators make C upper semicontinuous (C(t) >= both one-sided limits),
so the value at the jump never lowers the infimum. The exact infimum over p_lo <= p <= p_hi is the
smallest one-sided limit at the ends of the pieces; it may be approached and not attained.

References
----------
Brown, L. D., Cai, T. T. and DasGupta, A. (2001). Interval estimation for a binomial proportion.
Statistical Science 16(2), 101-133.
Newcombe, R. G. (1998). Two-sided confidence intervals for the single proportion: comparison of
seven methods. Statistics in Medicine 17, 857-872 (method 4).
Wilson, E. B. (1927). Probable inference, the law of succession, and statistical inference.
Journal of the American Statistical Association 22, 209-212.
Agresti, A. and Coull, B. A. (1998). Approximate is better than "exact" for interval estimation
of binomial proportions. The American Statistician 52, 119-126.
Clopper, C. J. and Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated
in the case of the binomial. Biometrika 26, 404-413.
"""

from dataclasses import dataclass

import numpy as np
from scipy import special

try:
    # The ufuncs behind scipy.stats.binom (Boost), called directly as atlas.engine does.
    from scipy.special._ufuncs import _binom_cdf, _binom_pmf
except ImportError:  # pragma: no cover - a SciPy that has moved them
    from scipy import stats

    _binom_cdf, _binom_pmf = stats.binom.cdf, stats.binom.pmf

INTERVALS = (
    "wald",
    "wald_cc",
    "wilson",
    "wilson_cc",
    "agresti_coull",
    "jeffreys",
    "clopper_pearson",
)

# min_coverage evaluates the endpoints of every x that can cover a p of the band; beyond this
# many it refuses rather than fill the memory.
MAX_CANDIDATES = 50_000_000
# Up to this n, min_coverage finds the candidate x from all endpoints rather than by bisection.
_DIRECT_N = 4096


def _show(value):
    return repr(value.item() if isinstance(value, np.generic) else value)


def check_interval(interval):
    """Return ``interval`` if it names an interval, else raise ValueError listing them."""
    if not isinstance(interval, str) or interval not in INTERVALS:
        valid = ", ".join(repr(name) for name in INTERVALS)
        raise ValueError(f"`interval` must be one of {valid}; got {interval!r}.")
    return interval


def check_level(level):
    """Return ``level`` as a float in (0, 1), else raise ValueError naming it."""
    try:
        value = float(level)
    except (TypeError, ValueError):
        value = None
    if isinstance(level, bool) or value is None or not 0.0 < value < 1.0:
        raise ValueError(f"`level` must be in the open interval (0, 1); got {_show(level)}.")
    return value


def check_n(n, name="n"):
    """Return ``n`` as an int64 array of integers >= 1, else raise ValueError naming it."""
    arr = np.asarray(n)
    numeric = np.issubdtype(arr.dtype, np.integer) or np.issubdtype(arr.dtype, np.floating)
    if arr.dtype == bool or not numeric:
        raise ValueError(f"`{name}` must be an integer >= 1; got {_show(n)}.")
    flat = arr.ravel().astype(np.float64)
    bad = ~np.isfinite(flat) | (flat < 1) | (flat != np.round(flat)) | (flat > 1e15)
    if bad.any():
        raise ValueError(f"`{name}` must be an integer >= 1; got {_show(arr.ravel()[bad][0])}.")
    return arr.astype(np.int64)


def check_p(p, name="p"):
    """Return ``p`` as a float64 array in (0, 1), else raise ValueError naming it."""
    try:
        arr = np.asarray(p, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(f"`{name}` must be in the open interval (0, 1); got {_show(p)}.") from None
    if isinstance(p, bool) or np.asarray(p).dtype == bool:
        raise ValueError(f"`{name}` must be in the open interval (0, 1); got {_show(p)}.")
    flat = arr.ravel()
    bad = ~((flat > 0.0) & (flat < 1.0))
    if bad.any():
        raise ValueError(
            f"`{name}` must be in the open interval (0, 1); got {_show(flat[bad][0])}."
        )
    return arr


def z_value(level):
    """The (1 + level)/2 quantile of the standard normal.

    >>> round(z_value(0.95), 6)
    1.959964
    """
    return float(special.ndtri((1.0 + check_level(level)) / 2.0))


def _lower(x, n, interval, level):
    """lo(x) of ``interval`` for arrays x (0 <= x <= n) and n, as float64 (see the table)."""
    x = np.asarray(x, dtype=np.float64)
    n = np.asarray(n, dtype=np.float64)
    z = z_value(level)
    z2 = z * z
    with np.errstate(invalid="ignore", divide="ignore"):
        if interval in ("wald", "wald_cc"):
            ph = x / n
            lo = ph - z * np.sqrt(ph * (1.0 - ph) / n)
            return lo - 0.5 / n if interval == "wald_cc" else lo
        if interval == "wilson":
            ph = x / n
            centre = ph + z2 / (2.0 * n)
            half = z * np.sqrt(ph * (1.0 - ph) / n + z2 / (4.0 * n * n))
            return np.where(x == 0, 0.0, (centre - half) / (1.0 + z2 / n))
        if interval == "wilson_cc":
            # Newcombe (1998), method 4, with 4 p-hat (n q-hat + 1) = 4 x (n - x + 1) / n.
            root = np.sqrt(z2 - 2.0 - 1.0 / n + 4.0 * x * (n - x + 1.0) / n)
            lo = (2.0 * x + z2 - 1.0 - z * root) / (2.0 * (n + z2))
            return np.where(x == 0, 0.0, lo)
        if interval == "agresti_coull":
            nt = n + z2
            pt = (x + z2 / 2.0) / nt
            return pt - z * np.sqrt(pt * (1.0 - pt) / nt)
        alpha = (1.0 - level) / 2.0
        if interval == "jeffreys":
            lo = special.betaincinv(x + 0.5, n - x + 0.5, alpha)
        else:  # clopper_pearson
            lo = special.betaincinv(np.maximum(x, 1.0), n - x + 1.0, alpha)
        return np.where(x == 0, 0.0, lo)


def _upper(x, n, interval, level):
    """hi(x) of ``interval`` for arrays x (0 <= x <= n) and n, as float64 (see the table)."""
    x = np.asarray(x, dtype=np.float64)
    n = np.asarray(n, dtype=np.float64)
    z = z_value(level)
    z2 = z * z
    with np.errstate(invalid="ignore", divide="ignore"):
        if interval in ("wald", "wald_cc"):
            ph = x / n
            hi = ph + z * np.sqrt(ph * (1.0 - ph) / n)
            return hi + 0.5 / n if interval == "wald_cc" else hi
        if interval == "wilson":
            ph = x / n
            centre = ph + z2 / (2.0 * n)
            half = z * np.sqrt(ph * (1.0 - ph) / n + z2 / (4.0 * n * n))
            return np.where(x == n, 1.0, (centre + half) / (1.0 + z2 / n))
        if interval == "wilson_cc":
            # Newcombe (1998), method 4, with 4 p-hat (n q-hat - 1) = 4 x (n - x - 1) / n.
            root = np.sqrt(z2 + 2.0 - 1.0 / n + 4.0 * x * (n - x - 1.0) / n)
            hi = (2.0 * x + z2 + 1.0 + z * root) / (2.0 * (n + z2))
            return np.where(x == n, 1.0, hi)
        if interval == "agresti_coull":
            nt = n + z2
            pt = (x + z2 / 2.0) / nt
            return pt + z * np.sqrt(pt * (1.0 - pt) / nt)
        beta = (1.0 + level) / 2.0
        if interval == "jeffreys":
            hi = special.betaincinv(x + 0.5, n - x + 0.5, beta)
        else:  # clopper_pearson
            hi = special.betaincinv(x + 1.0, np.maximum(n - x, 1.0), beta)
        return np.where(x == n, 1.0, hi)


def interval_endpoints(n, *, interval="wald", level=0.95):
    """The interval [lo(x), hi(x)] for every x = 0..n.

    Parameters
    ----------
    n : int
        Number of trials, ``n >= 1``.
    interval : str
        One of :data:`INTERVALS`.
    level : float
        The nominal confidence level, ``0 < level < 1``.

    Returns
    -------
    lo, hi : numpy.ndarray
        float64 arrays of length n + 1, indexed by x; not clipped beyond the definitions (see
        the module's table).

    Examples
    --------
    >>> lo, hi = interval_endpoints(10, interval="wilson")
    >>> print(f"{lo[3]:.4f} {hi[3]:.4f}")
    0.1078 0.6032
    """
    n = _single_n(n)
    check_interval(interval)
    level = check_level(level)
    x = np.arange(n + 1, dtype=np.float64)
    return _lower(x, n, interval, level), _upper(x, n, interval, level)


def _single_n(n):
    arr = check_n(n)
    if arr.ndim:
        raise ValueError(f"`n` must be a single integer here; got shape {arr.shape}.")
    return int(arr)


def _initial_run(predicate, n):
    """The length of the initial run of x = 0..n where ``predicate(x)`` holds, by bisection.

    ``predicate`` is true on an initial run and false after it (the module's lemma), for each
    element of the array ``n``; it is evaluated at about log2(n) + 1 arrays of x.
    """
    true_at = np.full(n.shape, -1, dtype=np.int64)  # the largest x known to satisfy it
    false_at = n + 1  # the smallest x known not to
    while True:
        open_ = false_at - true_at > 1
        if not open_.any():
            return true_at + 1
        mid = (true_at + false_at) // 2
        probe = np.where(open_, mid, 0)
        holds = predicate(probe) & open_
        true_at = np.where(holds, mid, true_at)
        false_at = np.where(open_ & ~holds, mid, false_at)


def _run_mass(a, b, n, p):
    """P(a <= X <= b) for X ~ Bin(n, p), elementwise; 0 where the run a..b is empty."""
    upper = _binom_cdf(np.clip(b, 0, n), n, p)
    below = np.where(a >= 1, _binom_cdf(np.maximum(a - 1, 0), n, p), 0.0)
    return np.where(b >= a, upper - below, 0.0)


def covering_run(n, p, *, interval="wald", level=0.95):
    """The run of x whose interval covers p: (B, A) with B..A covering (empty when B > A).

    Parameters and broadcasting as :func:`coverage`.

    Returns
    -------
    first, last : numpy.ndarray
        int64 arrays: B(p), the smallest x with hi(x) >= p, and A(p), the largest x with
        lo(x) <= p.

    Examples
    --------
    >>> first, last = covering_run(20, 0.3, interval="wilson")
    >>> print(first, last)
    2 10
    """
    check_interval(interval)
    level = check_level(level)
    n, p = np.broadcast_arrays(check_n(n), check_p(p))
    last = _initial_run(lambda x: _lower(x, n, interval, level) <= p, n) - 1
    first = _initial_run(lambda x: _upper(x, n, interval, level) < p, n)
    return first, last


def coverage(n, p, *, interval="wald", level=0.95):
    """The coverage probability of a confidence interval for p at (n, p).

    Parameters
    ----------
    n : int or array_like of int
        Number of trials, ``n >= 1``.
    p : float or array_like of float
        The true success probability, ``0 < p < 1``; broadcast against ``n``.
    interval : str
        One of :data:`INTERVALS` (see the module's table).
    level : float
        The nominal confidence level, ``0 < level < 1``.

    Returns
    -------
    float or numpy.ndarray
        C(n, p) = sum over x of b(x; n, p) [lo(x) <= p <= hi(x)].

    Raises
    ------
    ValueError
        If an argument is out of its domain; the message names it.

    Notes
    -----
    Only the run of x that covers p is sought (by bisection, see the module's notes), so the cost
    grows as log(n): no endpoint of an x that cannot cover p is computed.

    Examples
    --------
    The nominal 95% Wald interval at p = 0.005 (Brown, Cai and DasGupta 2001, Example 1):

    >>> print(f"{coverage(591, 0.005):.3f} {coverage(592, 0.005):.3f}")
    0.945 0.792
    """
    first, last = covering_run(n, p, interval=interval, level=level)
    n, p = np.broadcast_arrays(check_n(n), check_p(p))
    result = _run_mass(first, last, n, p)
    return float(result) if result.ndim == 0 else result


@dataclass(frozen=True)
class MinCoverage:
    """The exact infimum of the coverage over a band of p, and where it is approached.

    Attributes
    ----------
    value : float
        inf over p_lo <= p <= p_hi of C(n, p).
    p : float
        The p at which the infimum is attained or approached.
    approach : str
        ``"attained"`` (C(n, p) equals it), ``"from below"`` (the limit as p rises to ``p``;
        C jumps up at ``p``) or ``"from above"`` (the limit as p falls to ``p``).
    first, last : int
        The run of covering x on the side of ``p`` where the infimum is approached.
    """

    n: int
    p_lo: float
    p_hi: float
    interval: str
    level: float
    value: float
    p: float
    approach: str
    first: int
    last: int


def _band(n, p_lo, p_hi, interval, level):
    """The exact minimum coverage at one n over [p_lo, p_hi] (checked arguments)."""
    n_arr = np.int64(n)
    every = None
    if n <= _DIRECT_N:  # every endpoint costs less than the bisections' overhead
        x = np.arange(n + 1, dtype=np.float64)
        every = _lower(x, n, interval, level), _upper(x, n, interval, level)
        x0 = int(np.count_nonzero(every[1] < p_lo))
        x1 = int(np.count_nonzero(every[0] <= p_hi)) - 1
    else:
        x0 = int(_initial_run(lambda x: _upper(x, n_arr, interval, level) < p_lo, n_arr))
        x1 = int(_initial_run(lambda x: _lower(x, n_arr, interval, level) <= p_hi, n_arr)) - 1
    if x1 - x0 + 1 > MAX_CANDIDATES:
        raise ValueError(
            f"`n` is too large for this band: {x1 - x0 + 1} values of x can cover a p in it "
            f"(at most {MAX_CANDIDATES}); narrow the band."
        )
    if x1 < x0:  # no x covers any p of the band: C = 0 throughout
        return MinCoverage(n, p_lo, p_hi, interval, level, 0.0, p_lo, "attained", x0, x1)
    # Only x0..x1 matter: an x < x0 has hi(x) < p_lo (and lo(x) <= hi(x)), an x > x1 has
    # lo(x) > p_hi. So A(t) = x0 - 1 + #{x in x0..x1: lo(x) <= t} and
    # B(t) = x0 + #{x in x0..x1: hi(x) < t} for every t in the band.
    if every is None:
        xs = np.arange(x0, x1 + 1, dtype=np.float64)
        lo, hi = np.sort(_lower(xs, n, interval, level)), np.sort(_upper(xs, n, interval, level))
    else:
        lo, hi = np.sort(every[0][x0 : x1 + 1]), np.sort(every[1][x0 : x1 + 1])
    inner = np.concatenate([lo[(lo > p_lo) & (lo < p_hi)], hi[(hi > p_lo) & (hi < p_hi)]])
    t = np.unique(np.concatenate([[p_lo, p_hi], inner]))
    if t.size == 1:  # p_lo == p_hi: the coverage at that p
        first = x0 + np.searchsorted(hi, p_lo, side="left")
        last = x0 - 1 + np.searchsorted(lo, p_lo, side="right")
        value = float(_run_mass(first, last, n_arr, p_lo))
        return MinCoverage(
            n, p_lo, p_hi, interval, level, value, p_lo, "attained", int(first), int(last)
        )
    left, right = t[:-1], t[1:]
    # The run on the open piece (t_i, t_{i+1}): no endpoint lies strictly inside it.
    last = x0 - 1 + np.searchsorted(lo, left, side="right")
    first = x0 + np.searchsorted(hi, right, side="left")
    at_left = _run_mass(first, last, n_arr, left)  # C(t_i+), the limit from above
    at_right = _run_mass(first, last, n_arr, right)  # C(t_{i+1}-), the limit from below
    i_left, i_right = int(np.argmin(at_left)), int(np.argmin(at_right))
    if at_right[i_right] < at_left[i_left]:
        i, p_worst, value, side = i_right, float(right[i_right]), at_right[i_right], "from below"
    else:
        i, p_worst, value, side = i_left, float(left[i_left]), at_left[i_left], "from above"
    # Attained when C at p_worst itself (closed intervals) is no larger than the limit.
    first_at = x0 + np.searchsorted(hi, p_worst, side="left")
    last_at = x0 - 1 + np.searchsorted(lo, p_worst, side="right")
    if _run_mass(first_at, last_at, n_arr, p_worst) <= value:
        side = "attained"
    return MinCoverage(
        n, p_lo, p_hi, interval, level, float(value), p_worst, side, int(first[i]), int(last[i])
    )


def min_coverage(n, p_lo, p_hi, *, interval="wald", level=0.95, detail=False):
    """The exact minimum (infimum) of the coverage over every p in [p_lo, p_hi].

    Parameters
    ----------
    n : int or array_like of int
        Number of trials, ``n >= 1``.
    p_lo, p_hi : float or array_like of float
        The band of p, ``0 < p_lo <= p_hi < 1``; broadcast against ``n``.
    interval : str
        One of :data:`INTERVALS`.
    level : float
        The nominal confidence level, ``0 < level < 1``.
    detail : bool
        Return a :class:`MinCoverage` (the worst p and how it is approached) instead of the
        number; only for a single n and band.

    Returns
    -------
    float, numpy.ndarray or MinCoverage
        inf over p_lo <= p <= p_hi of C(n, p).

    Raises
    ------
    ValueError
        If an argument is out of its domain, or ``p_lo > p_hi``; the message names it.

    Notes
    -----
    Exact, not sampled: the infimum is the smallest one-sided limit of C at the ends of the
    pieces between consecutive endpoints lying in the band (see the module's notes for why C has
    no minimum inside a piece). Only the endpoints of the x that can cover a p of the band enter
    (for n above 4096 only those are computed, found by bisection; below, all n + 1 are
    computed, which is cheaper than the bisection).

    Examples
    --------
    >>> m = min_coverage(40, 0.05, 0.5, interval="wilson", detail=True)
    >>> print(f"{m.value:.4f} at p = {m.p:.5f} ({m.approach})")
    0.9278 at p = 0.20085 (from below)
    """
    check_interval(interval)
    level = check_level(level)
    n_arr, lo_arr, hi_arr = np.broadcast_arrays(
        check_n(n), check_p(p_lo, "p_lo"), check_p(p_hi, "p_hi")
    )
    bad = lo_arr > hi_arr
    if bad.any():
        a, b = lo_arr[bad].ravel()[0], hi_arr[bad].ravel()[0]
        raise ValueError(f"`p_lo` must be <= `p_hi`; got p_lo={_show(a)} > p_hi={_show(b)}.")
    if detail:
        if n_arr.ndim:
            raise ValueError(f"`n` must be a single integer with detail=True; got {n_arr.shape}.")
        return _band(int(n_arr), float(lo_arr), float(hi_arr), interval, level)
    out = np.empty(n_arr.shape, dtype=np.float64)
    for index in np.ndindex(n_arr.shape):
        out[index] = _band(
            int(n_arr[index]), float(lo_arr[index]), float(hi_arr[index]), interval, level
        ).value
    return float(out) if out.ndim == 0 else out


def min_coverage_cells(n, edges, *, interval="wald", level=0.95):
    """The exact minimum coverage over each cell [edges[j], edges[j + 1]] of a partition of p.

    One pass for all cells at one n: the same argument as :func:`min_coverage` (the infimum
    over a closed cell is the smallest one-sided limit at the ends of the pieces between
    consecutive endpoints and cell edges), with every endpoint computed once.

    Parameters
    ----------
    n : int
        Number of trials, ``n >= 1``.
    edges : array_like of float
        Strictly increasing, ``0 < edges < 1``, at least two.
    interval, level
        As :func:`coverage`.

    Returns
    -------
    numpy.ndarray
        float64 of length ``len(edges) - 1``.

    Examples
    --------
    >>> cells = min_coverage_cells(40, [0.05, 0.2, 0.5], interval="wilson")
    >>> print(", ".join(f"{c:.4f}" for c in cells))
    0.9283, 0.9278
    """
    n = _single_n(n)
    check_interval(interval)
    level = check_level(level)
    edges = check_p(edges, "edges")
    if edges.ndim != 1 or edges.size < 2 or np.any(np.diff(edges) <= 0):
        raise ValueError("`edges` must be a strictly increasing sequence of at least two p.")
    n_arr = np.int64(n)
    x0 = int(_initial_run(lambda x: _upper(x, n_arr, interval, level) < edges[0], n_arr))
    x1 = int(_initial_run(lambda x: _lower(x, n_arr, interval, level) <= edges[-1], n_arr)) - 1
    if x1 < x0:
        return np.zeros(edges.size - 1)
    if x1 - x0 + 1 > MAX_CANDIDATES:
        raise ValueError(f"`n` is too large for these cells: {x1 - x0 + 1} candidate x.")
    xs = np.arange(x0, x1 + 1, dtype=np.float64)
    lo, hi = np.sort(_lower(xs, n, interval, level)), np.sort(_upper(xs, n, interval, level))
    inside = np.concatenate([lo, hi])
    inside = inside[(inside > edges[0]) & (inside < edges[-1])]
    t = np.unique(np.concatenate([edges, inside]))
    left, right = t[:-1], t[1:]
    last = x0 - 1 + np.searchsorted(lo, left, side="right")
    first = x0 + np.searchsorted(hi, right, side="left")
    piece = np.minimum(_run_mass(first, last, n_arr, left), _run_mass(first, last, n_arr, right))
    starts = np.searchsorted(t, edges[:-1])  # the first piece of each cell
    return np.minimum.reduceat(piece, starts)


def expected_width(n, p, *, interval="wald", level=0.95):
    """The expected width E[hi(X) - lo(X)] of a confidence interval, X ~ Bin(n, p).

    Parameters and broadcasting as :func:`coverage`.

    Returns
    -------
    float or numpy.ndarray
        sum over x of b(x; n, p) (hi(x) - lo(x)), with the endpoints as defined (unclipped).

    Notes
    -----
    For n above 20 000 the sum runs over mu +- (12 sigma + 12) only; the omitted pmf mass is
    below 1e-25 and every width is below 2, so the sum changes by less than that.

    Examples
    --------
    >>> print(f"{expected_width(40, 0.2, interval='wilson'):.4f}")
    0.2385
    """
    check_interval(interval)
    level = check_level(level)
    n_arr, p_arr = np.broadcast_arrays(check_n(n), check_p(p))
    out = np.empty(n_arr.shape, dtype=np.float64)
    for value in np.unique(n_arr):
        where = n_arr == value
        ps = p_arr[where]
        if value <= 20_000:
            x0, x1 = 0, int(value)
        else:
            mu, sd = value * ps, np.sqrt(value * ps * (1 - ps))
            x0 = max(0, int(np.floor((mu - 12 * sd - 12).min())))
            x1 = min(int(value), int(np.ceil((mu + 12 * sd + 12).max())))
        xs = np.arange(x0, x1 + 1, dtype=np.float64)
        width = _upper(xs, value, interval, level) - _lower(xs, value, interval, level)
        pmf = _binom_pmf(xs[None, :], value, ps[:, None])
        out[where] = pmf @ width
    return float(out) if out.ndim == 0 else out


def mean_width(n, p_lo, p_hi, *, interval="wald", level=0.95):
    """The expected width averaged over p uniform on [p_lo, p_hi] (at p_lo if they are equal).

    Exact: the integral of b(x; n, p) over p from 0 to t is I_t(x + 1, n - x + 1) / (n + 1), with
    I the regularized incomplete beta function, so the average is
    sum over x of (hi(x) - lo(x)) [I_{p_hi} - I_{p_lo}](x + 1, n - x + 1) / ((n + 1)(p_hi - p_lo)).

    Examples
    --------
    >>> print(f"{mean_width(40, 0.05, 0.5, interval='wilson'):.4f}")
    0.2498
    """
    check_interval(interval)
    level = check_level(level)
    n = _single_n(n)
    p_lo, p_hi = float(check_p(p_lo, "p_lo")), float(check_p(p_hi, "p_hi"))
    if p_lo > p_hi:
        raise ValueError(f"`p_lo` must be <= `p_hi`; got p_lo={p_lo!r} > p_hi={p_hi!r}.")
    if p_lo == p_hi:
        return expected_width(n, p_lo, interval=interval, level=level)
    xs = np.arange(n + 1, dtype=np.float64)
    width = _upper(xs, n, interval, level) - _lower(xs, n, interval, level)
    a, b = xs + 1.0, n - xs + 1.0
    mass = special.betainc(a, b, p_hi) - special.betainc(a, b, p_lo)
    return float(width @ mass / ((n + 1) * (p_hi - p_lo)))
