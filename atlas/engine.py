"""Exact worst-case errors of the approximations, for one (n, p) and for many.

For X ~ Bin(n, p) with CDF F and an approximation G (see :mod:`atlas.approximations`), let
D(k) = F(k) - G(k) on k = -1..n. The two metrics are

- ``interval`` (W(n, p)): max over 0 <= a <= b <= n of |P(a <= X <= b) - (G(b) - G(a-1))|.
  Since P(a <= X <= b) - (G(b) - G(a-1)) = D(b) - D(a-1), this equals max D - min D, attained
  on the interval from one extreme to the other: a - 1 = min(k_max, k_min), b = max(k_max, k_min).
- ``cdf``: max over k = 0..n of |D(k)|.

How the extremes are found, and why it is exact
-----------------------------------------------
1. *Window.* D is evaluated on a window [lo, hi] around the mean, plus the end points k = -1 and
   k = n. The window starts at mu +- (9 sigma + 10) and is doubled until the tails it leaves out
   cannot matter: for k < lo, |D(k)| <= F(lo - 1) + |G(lo - 1)|, and for k > hi,
   |D(k)| <= (1 - F(hi)) + |1 - G(hi)|, because F is monotone and every G is monotone in its far
   tails (each is a normal or Poisson CDF there, or a Hermite polynomial times phi beyond its last
   turning point, which lies below |z| = 3 for skewness above 1/3; at smaller skewness the
   Edgeworth terms beyond |z| = 9, the least the window reaches, are below 5e-18 for
   ``edgeworth_cc`` and 1e-16 for ``edgeworth2_cc``, whose He_5 term is the largest: within
   the margin of ``G_ROUNDING`` = 1e-15 over the 7.8e-16 measured, which every accuracy
   counts). Both bounds are computed for every cell and must be below ``TAIL_TOL`` = 1e-17; so
   the omitted k change neither metric by more than 1e-17 (beyond that margin).
2. *Narrow windows* (at most ``FULL_LIMIT`` integers, so sigma below about 113) are evaluated at
   every integer, many p at once: F from Boost's incomplete beta at lo - 1 (``scipy.stats.binom``)
   and the binomial pmf summed upward from there. G is computed first on the core
   [lo_c, hi_c] = mu -/+ (6 sigma + 2) (sigma >= 1) for the methods whose G is bounded outside
   it, and the core's extremes are those of the whole window when every value D can take
   outside the core lies strictly between them (else the row is computed over the whole
   window). With F summed upward (so monotone as computed) and G computed to ``G_ROUNDING``:
   below the core -U - s <= D(k) <= F(lo_c) + U + s, above it
   F(hi_c) - 1 - V - s <= D(k) <= F(hi) - 1 + V + s, where U bounds |G| below lo_c, V bounds
   |1 - G| above hi_c and s = 4 ``G_ROUNDING`` covers the rounding of G and of the difference.
   For the normal and Poisson CDFs (``normal_cc``, ``poisson``) U and V are |G| and |1 - G|
   at the core's ends, plus ``G_ROUNDING``. For the Edgeworth curves,
   G = Phi(z) + phi(z) sum_j c_j He_j(z) with j <= 5, and |He_j(z)| phi(z) falls as |z| grows
   beyond the largest root of He_{j+1} (its derivative is -He_{j+1}(z) phi(z); 3.3243 for
   He_6), so beyond the core's ends (|z| >= 6) U = Phi(z) + sum |c_j He_j(z)| phi(z) at lo_c
   and V the same with 1 - Phi(z) at hi_c. For ``peizer_pratt`` and ``camp_paulson``,
   G = Phi(w) with w built from parts monotone in k (proofs in
   :func:`atlas.approximations.peizer_pratt_parts` and ``camp_paulson_parts``): U and V come
   from each part's least favourable end of the tail (:func:`_peizer_pratt_envelopes`,
   :func:`_camp_paulson_envelopes`; camp_paulson's w itself is not monotone near k = n at
   small p, its parts are). ``normal`` (its D is positive nearly everywhere, so its minimum
   lies in the tails) is computed over the whole window, and so is a group of rows whose core
   would hold more than ``_CORE_SHARE`` of its window or whose window rectangle holds fewer
   than ``_CORE_MIN_POINTS`` integers (a single p never takes the core). The values, and the
   first k of each extreme, are therefore those of every integer of the window;
   ``tests/test_search.py`` checks it bit for bit (a core of half a sigma forces the fallback)
   and checks U and V at every integer outside the core. The accuracy's ``TAIL_TOL`` term
   reads max D and min D: those are the window's own, as said. Over the default p axis the
   core holds 40 to 55 per cent of the windows' integers (n = 100 to 2000).
3. *Wide windows* (larger sigma) use a nested search on D computed from the lattice Edgeworth
   expansion of F (:mod:`atlas.asymptotic`), not from Boost, whose absolute error grows like
   sqrt(n) (table below) and reaches the size of the errors measured. D is sampled every
   sigma/4 within 4 sigma of the mean and every sigma/2 beyond: every method's D is a sum of
   Hermite polynomials times phi, smooth on the scale of sigma, whose turning points lie within
   about 4.2 sigma. The three best local maxima of the samples (and of -D) are bracketed by
   their neighbouring samples; candidates that cannot beat the best sample by their curvature
   are dropped; a bracket wider than ``BRACKET_LIMIT`` integers is resampled and narrowed; and
   every integer of the final brackets is evaluated. The test suite checks the search against
   every-integer evaluation of the same windows.

How the work is shared (speed, with the same values)
-----------------------------------------------------
None of the following changes a value: each computes the same operations on the same numbers
as evaluating every row and method on its own (float64 arithmetic is elementwise and rounded
the same in any array shape), and ties are broken as numpy.argmax does, at the first k.

- Narrow windows are evaluated in groups of rows of similar width (:func:`_width_groups`), not
  in one rectangle padded to the widest window: F is summed along each row from its own start
  and G is elementwise, so a row's values do not depend on its group. Over the default p axis
  at n = 1000 the padded rectangle held 3.6 times the windows' integers.
- In wide windows every method samples the same points: z, phi(z), Phi(z) and the series of F
  (one per first order of the methods' series) are computed once (:class:`_SharedPoints`); the
  candidates of every method and sign are refined in one pass (for a few cells, at most
  ``_SHARED_POINTS`` points, with z, phi(z) and the series computed once for all methods:
  :func:`_shared_deviation`, 1.16x to 1.3x on one cell with all seven); the final brackets are
  evaluated as one flat array with a maximum per bracket (:func:`_segment_argmax`), not padded
  to the widest.
- The search's decisions (samples, candidates, brackets, the points of each refinement) are
  those described above, unchanged: where D is flat to its rounding (peizer_pratt near n = 10^6,
  |D| ~ 1e-13 with G rounded to 1e-16) the integer maximum of the rounded D depends on which
  integers are evaluated, and a different search would return a different value (within the
  accuracy). ``tests/test_engine_regression.py`` holds the results on 2,088 cells x 7 methods
  (n = 1 .. 10^15, p from 1e-300 to 1 - 1e-12), bit for bit where resolved;
  ``tests/test_search.py`` checks the search against every integer of the same computed D
  (every method, skewed p, a small mean at n = 10^8), methods searched alone against together,
  and the width groups against one rectangle.

Where one wide cell's time goes, and its floor: at n = 10^6, p = 0.3, ``normal_cc`` takes about
0.63 ms, of which the window 0.06 ms, the search 0.45 ms, the end points and accuracy 0.12 ms
(``build_scripts/bench_engine.py``). The search evaluates D in three passes (the coarse samples,
one refinement round, the final brackets), each needing the one before. Each pass is a Clenshaw
sum of 15 Hermite terms (order 5) at four numpy calls a term, and a call costs about 1 us on
arrays this small (60 us for one sum over 53 points), so the three passes alone cost about
0.18 ms. A thousand times the direct evaluation (about 0.15 ms) would need fewer passes or
fewer terms. Either evaluates other integers or rounds D otherwise, and so moves the last bits
where D is flat, which the regression fixture forbids; or it needs a compiled loop, which the
project does not have.

Accuracy
--------
Every value comes with a bound on its absolute error (``Evaluation.interval_accuracy`` and
``cdf_accuracy``; ``worst_error(..., return_accuracy=True)``). For the computed D at each k,

    |D computed - D| <= eps_F + eps_G,

and the metrics inherit 2 (eps_F + eps_G) for ``interval`` (a difference of two values of D)
and eps_F + eps_G for ``cdf``, plus what the omitted tails (|D| <= TAIL_TOL there) could add:
max(0, TAIL_TOL - max D) + max(0, TAIL_TOL + min D) for ``interval``, max(0, TAIL_TOL - max |D|)
for ``cdf``, nothing once the extremes exceed 1e-17. The search finds the exact integer
extremes of the computed D, so it adds nothing. The terms:

- eps_F, narrow windows: 2e-15 + 1e-16 sigma. Measured against 50-digit mpmath sums, the summed
  F errs by at most 4.0e-15 (sigma = 104, n = 52,000, p = 0.3), 3.0e-15 (sigma = 100 at
  n = 10^8, 10^12, 10^15 with small p) and 2.7e-16 (sigma = 10, n = 10^15), 2.5 to 3 times less.
- eps_F, wide windows: :func:`atlas.asymptotic.remainder_bound` at the order used (4 to 6, by
  sigma: see :func:`_orders`): 4 times the largest size of the next two terms. Measured against
  the mpmath Beta-integral values of ``tests/data/large_n_references.json`` at sigma = 30 to
  10^4, the remainder of the expansion is at most 1.6 times its first omitted term. The bound is
  below 2e-16 for every wide window and below 1e-19 from sigma = 400.
- eps_G: the rounding of G, 1e-15 (the largest difference from the mpmath formulas measured
  over n = 1 to 10^15 and p down to 5e-324 is 7.8e-16, ``tests/test_approximations.py``), twice
  that in wide windows for the methods outside the normal family, where D = (Phi(z) - G) + series.
  For ``normal_cc``, ``edgeworth_cc`` and ``edgeworth2_cc`` in wide windows D is the tail of the
  series itself, with no G subtracted, and eps_G is 64 units in the last place of max |D|.

Boost's absolute error in F near the mean (largest over p = 0.5, 0.3, 0.001, 1e-6 and
z = -3..3; ``build_scripts/make_large_n_references.py``), the reason for the expansion:

    n      10^6     10^8     10^9     10^10    10^12    10^13    10^14    10^15
    error  2.5e-14  1.6e-13  6.4e-13  2.6e-12  2.6e-11  6.4e-11  1.6e-10  6.5e-10

A value is resolved (:func:`is_resolved`) when it exceeds ``RESOLUTION_FACTOR`` = 3 times its
accuracy; otherwise it is only known to be below error + accuracy.
"""

import functools
import numbers
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from scipy import special

from atlas import asymptotic
from atlas.approximations import (
    METHODS,
    approximate_cdf,
    camp_paulson_parts,
    check_method,
    offset,
    peizer_pratt_parts,
)

try:
    # The ufuncs behind scipy.stats.binom (Boost's incomplete beta), called directly to skip the
    # generic argument checks of scipy.stats, which cost more than the evaluation on small arrays.
    # tests/test_engine.py checks that they agree with scipy.stats.binom.
    from scipy.special._ufuncs import _binom_cdf, _binom_pmf, _binom_sf
except ImportError:  # pragma: no cover - a SciPy that has moved them
    from scipy import stats

    _binom_cdf, _binom_pmf, _binom_sf = stats.binom.cdf, stats.binom.pmf, stats.binom.sf

METRICS = ("interval", "cdf")

TAIL_TOL = 1e-17
FULL_LIMIT = 2048
BRACKET_LIMIT = 64
_START_SIGMAS = 9.0
_START_MARGIN = 10.0
_CORE_SIGMAS = 4.0
_CORE_STEP = 0.25
_TAIL_STEP = 0.5
_CANDIDATES = 3
_REFINE_POINTS = 32


@dataclass(frozen=True)
class Evaluation:
    """Worst-case errors of several methods at one n over a vector of p.

    Attributes
    ----------
    methods : tuple of str
        The methods, in the order of the first axis.
    interval, cdf : numpy.ndarray
        float64 arrays of shape (len(methods), len(p)).
    lo, hi : numpy.ndarray
        int64 arrays of the same shape: the worst interval [a, b] for the interval metric.
    interval_accuracy, cdf_accuracy : numpy.ndarray
        float64 arrays of the same shape: bounds on the absolute error of ``interval`` and
        ``cdf`` as computed (see :func:`accuracy_model`).
    """

    methods: tuple
    interval: np.ndarray
    cdf: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    interval_accuracy: np.ndarray
    cdf_accuracy: np.ndarray


N_MAX = 10**15


def _real_array(value, name, what):
    """``value`` as a numpy array of real numbers, or TypeError naming ``name``.

    Strings, bytes, booleans and complex numbers are refused rather than converted: numpy would
    parse '0.3', drop the imaginary part of 0.3+1j and read True as 1.
    """
    arr = np.asarray(value)
    if arr.dtype.kind == "O":  # e.g. Fraction or Decimal objects: real numbers are accepted
        flat = arr.ravel().tolist()
        if all(isinstance(x, numbers.Real) and not isinstance(x, bool) for x in flat):
            return np.array(flat, dtype=np.float64).reshape(arr.shape)
    if arr.dtype.kind not in "iuf":
        bad = value
        if arr.ndim:  # name the first element that is not a real number
            items = np.asarray(value, dtype=object).ravel()
            bad = next(
                (x for x in items if not isinstance(x, numbers.Real) or isinstance(x, bool)),
                items[0],
            )
        raise TypeError(f"`{name}` must be {what}; got {_show(bad)}.")
    return arr


def check_n(n):
    """Return ``n`` as an int64 array, or raise naming the bad value.

    Raises
    ------
    TypeError
        For strings, booleans, complex numbers and other non-numbers.
    ValueError
        For numbers that are not integers from 1 to N_MAX.
    """
    if type(n) is int and 1 <= n <= N_MAX:  # the common scalar case, without numpy's checks
        return np.int64(n)
    arr = _real_array(n, "n", "an integer >= 1")
    flat = arr.ravel().astype(np.float64)
    bad = ~np.isfinite(flat) | (flat < 1) | (flat != np.round(flat)) | (flat > N_MAX)
    if bad.any():
        value = arr.ravel()[bad][0]
        if np.isfinite(flat[bad][0]) and flat[bad][0] > N_MAX:
            raise ValueError(f"`n` must be at most {N_MAX:.0e}; got {_show(value)}.")
        raise ValueError(f"`n` must be an integer >= 1; got {_show(value)}.")
    return arr.astype(np.int64)


def check_p(p):
    """Return ``p`` as a float64 array, or raise naming the bad value.

    Raises
    ------
    TypeError
        For strings, booleans, complex numbers and other non-numbers.
    ValueError
        For numbers outside the open interval (0, 1), and NaN.
    """
    if type(p) is float and 0.0 < p < 1.0:
        return np.float64(p)
    arr = _real_array(p, "p", "in the open interval (0, 1)").astype(np.float64)
    flat = arr.ravel()
    bad = ~((flat > 0.0) & (flat < 1.0))
    if bad.any():
        raise ValueError(f"`p` must be in the open interval (0, 1); got {_show(flat[bad][0])}.")
    return arr


def check_metric(metric):
    """Return ``metric`` if valid, else raise ValueError listing the valid ones."""
    if not isinstance(metric, str) or metric not in METRICS:
        valid = ", ".join(repr(m) for m in METRICS)
        raise ValueError(f"`metric` must be one of {valid}; got {metric!r}.")
    return metric


def _show(value):
    """Format a bad value for an error message: 10.5, nan, 'x'."""
    if isinstance(value, np.generic):
        value = value.item()
    return repr(value)


def _windows(n, p, methods):
    """Per-p windows [lo, hi] (0 <= lo <= hi <= n) outside which |D| < TAIL_TOL for all methods.

    Returns
    -------
    lo, hi : numpy.ndarray
        The windows.
    ends : numpy.ndarray
        G(-1) and G(n) of every method, shape (len(methods), 2, len(p)), computed along the way.
    """
    mu = n * p
    sigma = np.sqrt(mu * (1.0 - p))
    width = _START_SIGMAS * sigma + _START_MARGIN
    lo = np.zeros(p.shape, dtype=np.int64)
    hi = np.zeros(p.shape, dtype=np.int64)
    ends = np.empty((len(methods), 2, p.size))
    todo = np.arange(p.size)
    first = True
    while todo.size:
        sub_p = p[todo]
        cand_lo = np.maximum(0, np.floor(mu[todo] - width[todo])).astype(np.int64)
        cand_hi = np.minimum(n, np.ceil(mu[todo] + width[todo])).astype(np.int64)
        lo[todo], hi[todo] = cand_lo, cand_hi
        has_low = cand_lo > 0
        has_high = cand_hi < n - 1
        k_low = np.maximum(cand_lo - 1, 0)
        bound = np.maximum(
            np.where(has_low, _binom_cdf(k_low, n, sub_p), 0.0),
            np.where(has_high, _binom_sf(cand_hi, n, sub_p), 0.0),
        )
        # G at k = lo - 1 and hi bound the tails; on the first pass G(-1) and G(n) come too.
        points = [k_low, cand_hi]
        if first:
            points += [np.full(todo.size, -1), np.full(todo.size, n)]
        points = np.array(points)
        for i, method in enumerate(methods):
            g = approximate_cdf(points, n, sub_p, method)
            tail = np.where(has_low, np.abs(g[0]), 0.0) + np.where(has_high, np.abs(1 - g[1]), 0)
            bound = np.maximum(bound, tail)
            if first:
                ends[i] = g[2:]
        # F's and G's tail bounds add, so half the tolerance for each keeps the sum below it.
        done = (bound <= 0.5 * TAIL_TOL) | ((cand_lo == 0) & (cand_hi >= n - 1))
        width[todo[~done]] *= 2.0
        todo = todo[~done]
        first = False
    return lo, hi, ends


_SQRT_2PI = np.sqrt(2.0 * np.pi)
_NORMAL_FAMILY = {"normal_cc": 1, "edgeworth_cc": 2, "edgeworth2_cc": 3}


def _series_coefficients(n, p, method, order):
    """Hermite coefficients of the part of F - G that the series gives, one row per p.

    Shape (len(p), 1, 3 order), ready to broadcast against (len(p), points) arrays of k.
    """
    sigma = np.sqrt(n * p * (1.0 - p))
    first = _NORMAL_FAMILY.get(method, 1)
    return asymptotic.coefficients(sigma, p, first, order)[:, None, :]


def _deviation(k, n, p, method, gamma):
    """D(k) = F(k) - G(k) from the asymptotic expansion of F (wide windows), p broadcast to k.

    ``gamma`` holds the rows' coefficients from :func:`_series_coefficients`. For the normal
    family G is Phi(z) minus the first terms of the same expansion, so D is the rest of the
    series, computed directly: -phi(z) sum_{e = first}^{order} sigma^-e P_e(z), relative to its
    own size. For the other methods D = (Phi(z) - G) - phi(z) sum_{e=1}^{order} sigma^-e P_e(z).
    """
    z, density = _scores(k, n, p)
    return _with_g(density * asymptotic.hermite_sum(z, gamma), z, k, n, p, method)


def _scores(k, n, p):
    """z = (k + 1/2 - n p) / sigma (the exact offset) and -phi(z) at points k, p broadcast."""
    q = 1.0 - p
    sigma = np.sqrt(n * p * q)
    z = offset(k.astype(np.float64) + 0.5, np.float64(n), p, q) / sigma
    return z, -np.exp(-0.5 * z * z) / _SQRT_2PI


def _with_g(tail, z, k, n, p, method, big_phi=None):
    """D from the series part ``tail`` = -phi(z) sum sigma^-e P_e(z): the tail itself for the
    normal family, (Phi(z) - G) + tail for the other methods (``big_phi``: Phi(z) if known)."""
    if method in _NORMAL_FAMILY:
        return tail
    big_phi = special.ndtr(z) if big_phi is None else big_phi
    return (big_phi - approximate_cdf(k, n, p, method)) + tail


def _orders(sigma):
    """The order of the expansion for each sigma: the remainder falls below about 1e-20.

    The first omitted term is about sigma^-(order+1) times coefficients below 0.05 (see
    :func:`atlas.asymptotic.remainder_bound`, which states the bound actually used). At least
    order 4, so that the D of ``edgeworth2_cc`` (from order 3 on) has two terms.
    """
    sigma = np.asarray(sigma)
    return np.where(sigma >= 1e4, 4, np.where(sigma >= 400, 5, asymptotic.ORDER))


def _cdf_rows(n, p, lo, hi):
    """F(k) at every integer of [lo_r, hi_r] for each row r, padded to a rectangle.

    F is summed upward from F(lo - 1): one incomplete-beta call per row and one pmf per integer,
    since the pmf costs a few per cent of a CDF call near the mean at large n.

    Returns
    -------
    k, valid, cdf : numpy.ndarray
        Integer points (padding repeats hi), the mask of real points, and F at the points.
    """
    width = int((hi - lo).max()) + 1
    k = lo[:, None] + np.arange(width)[None, :]
    valid = k <= hi[:, None]
    k = np.minimum(k, hi[:, None])
    # Mean below 1 (so lo = 0): pmf(0) = exp(n log1p(-p)) and the ratio recurrence
    # pmf(k + 1) = pmf(k) (n - k) p / ((k + 1) q). Boost's pmf errs by up to 5e-14 at k = 0 for
    # p below 1e-200 and overflows inside ibeta_derivative near p = 1e-308; the recurrence
    # multiplies a few rounded ratios onto terms that fall off at least like mu^k / k!.
    small = n * p < 1.0
    pmf = np.empty(k.shape)
    if small.any():
        ps = p[small][:, None]
        kf = k[small][:, :-1].astype(np.float64)
        ratio = ((n - kf) * ps) / ((kf + 1.0) * (1.0 - ps))
        first = np.exp(n * np.log1p(-ps))
        pmf[small] = np.cumprod(np.concatenate([first, ratio], axis=1), axis=1)
    if not small.all():
        pmf[~small] = _binom_pmf(k[~small], n, p[~small][:, None])
    pmf = np.where(valid, pmf, 0.0)
    start = np.where(lo > 0, _binom_cdf(lo - 1, n, p), 0.0)
    return k, valid, start[:, None] + np.cumsum(pmf, axis=1)


def _extremes(shape):
    """Empty arrays for max D, its k, min D, its k."""
    return [np.empty(shape), np.empty(shape, np.int64), np.empty(shape), np.empty(shape, np.int64)]


# Narrow windows: G is computed at mu -/+ (6 sigma + 2) first (module notes, "Narrow windows").
_NARROW_CORE_SIGMAS = 6.0
_NARROW_CORE_MARGIN = 2.0
_CORE_SHARE = 0.75
_CORE_MIN_POINTS = 8192  # a smaller group costs more in bounds and calls than the core saves
_HERMITE_MONOTONE = 3.33  # above the largest root of He_6 (3.3243): |He_j phi| falls beyond, j <= 5
# Methods whose G is bounded outside the core: monotone CDFs, and the Edgeworth curves by the
# Hermite terms of G = Phi(z) + phi(z) sum_j c_j He_j(z), as (c_j, He_j) for sigma, p, q.
_EDGEWORTH_TERMS = {
    "edgeworth_cc": lambda s, p, q: [((q - p) / (6.0 * s), lambda z: z * z - 1.0)],
    "edgeworth2_cc": lambda s, p, q: [
        ((q - p) / (6.0 * s), lambda z: z * z - 1.0),
        ((1.0 - 6.0 * p * q) / (24.0 * s * s), lambda z: z * (z * z - 3.0)),
        (((q - p) / s) ** 2 / 72.0, lambda z: z * (z * z * (z * z - 10.0) + 15.0)),
        (1.0 / (24.0 * s * s), lambda z: z),
    ],
}
# (Not ``normal``: its D = F(k) - Phi((k - mu)/sigma) is positive nearly everywhere, so its
# minimum lies in the tails and the core would be computed for nothing.)
_TAIL_BOUNDED_METHODS = frozenset(
    {"normal_cc", "poisson", "peizer_pratt", "camp_paulson", *_EDGEWORTH_TERMS}
)
_TAIL_BOUNDED = _TAIL_BOUNDED_METHODS  # the methods computed on a core (tests may empty it)


def _core(n, p, lo, hi):
    """Each row's core [lo_c, hi_c] within its window: mu -/+ (``_NARROW_CORE_SIGMAS`` sigma +
    ``_NARROW_CORE_MARGIN``), or the whole window where sigma < 1."""
    mu = n * p
    sigma = np.sqrt(mu * (1.0 - p))
    reach = _NARROW_CORE_SIGMAS * sigma + _NARROW_CORE_MARGIN
    core_lo = np.maximum(lo, np.floor(mu - reach).astype(np.int64))
    core_hi = np.minimum(hi, np.ceil(mu + reach).astype(np.int64))
    small = sigma < 1.0
    return np.where(small, lo, core_lo), np.where(small, hi, core_hi)


def _tail_envelopes(n, p, lo, hi, k_lo, k_hi, method):
    """Bounds U on |G(k)| for every k < k_lo and V on |1 - G(k)| for every k > k_hi.

    For the monotone G (normal and Poisson CDFs) they are |G| and |1 - G| at the core's ends,
    each plus the rounding of G. For the Edgeworth curves G = Phi(z) + phi(z) sum_j c_j He_j(z),
    and each |He_j(z)| phi(z) falls as |z| grows beyond the largest root of He_{j+1} (its
    derivative is -He_{j+1} phi; 3.33 for j = 5): beyond the core's ends (|z| >= 6),
    U = Phi(z) + sum |c_j He_j(z)| phi(z) at k_lo, and V the same with 1 - Phi(z) at k_hi.
    Rows where an end is not that far out get inf (no bound, so no core).
    """
    if method in _SCORE_ENVELOPES:
        return _SCORE_ENVELOPES[method](n, p, lo, hi, k_lo, k_hi)
    if method not in _EDGEWORTH_TERMS:
        g = approximate_cdf(np.stack([k_lo, k_hi]), n, p, method)
        return np.abs(g[0]) + G_ROUNDING, np.abs(1.0 - g[1]) + G_ROUNDING
    q = 1.0 - p
    sigma = np.sqrt(n * p * q)
    bounds = []
    for k, sign in ((k_lo, -1.0), (k_hi, 1.0)):
        z = offset(k + 0.5, np.float64(n), p, q) / sigma
        zc = np.clip(z, -40.0, 40.0)
        terms = sum(np.abs(c * he(zc)) for c, he in _EDGEWORTH_TERMS[method](sigma, p, q))
        envelope = special.ndtr(-sign * z) + terms * np.exp(-0.5 * zc * zc) / _SQRT_2PI
        far = sign * z >= _HERMITE_MONOTONE
        bounds.append(np.where(far, envelope * (1.0 + 1e-12) + G_ROUNDING, np.inf))
    return bounds[0], bounds[1]


def _row_extremes(d, valid, k):
    """Max D, its k, min D, its k of each row, over the valid points (first k of a tie)."""
    rows = np.arange(d.shape[0])
    imax = np.argmax(np.where(valid, d, -np.inf), axis=1)
    imin = np.argmin(np.where(valid, d, np.inf), axis=1)
    return d[rows, imax], k[rows, imax], d[rows, imin], k[rows, imin]


def _score_envelopes(n, hi, k_hi, below, above):
    """U and V for G = Phi(w) from bounds on w: w <= ``below`` under the core (needs below < 0)
    and w >= ``above`` over it (needs above > 0); inf where those fail. Each bound is moved
    towards 0 by 1e-9 of itself for the rounding of its parts; k = n, where G = 1, needs
    nothing."""
    bounds = []
    for reach in (-below * (1.0 - 1e-9), above * (1.0 - 1e-9)):  # lower bounds on |w|
        ok = np.isfinite(reach) & (reach > 0)
        bounds.append(np.where(ok, special.ndtr(-np.where(ok, reach, 0.0)) * (1.0 + 1e-9), np.inf))
    upper_empty = k_hi + 1 > np.minimum(hi, n - 1)
    return bounds[0] + G_ROUNDING, np.where(upper_empty, 0.0, bounds[1]) + G_ROUNDING


def _peizer_pratt_envelopes(n, p, lo, hi, k_lo, k_hi):
    """U and V of :func:`_tail_envelopes` for ``peizer_pratt``, G = Phi(z').

    Below the core (lo <= k < k_lo): d(k) <= d(k_lo - 1), g(S/(n p)) >= its value at k_lo - 1
    and g(T/(n q)) >= its value at lo (:func:`atlas.approximations.peizer_pratt_parts`), so
    z'(k) <= d(k_lo - 1) sqrt(spread) with the spread from those g (when d < 0 there and the
    spread > 0). Above the core the same with the ends exchanged. Each g is lowered by 1e-12
    for its rounding.
    """
    q = 1.0 - p
    scale = (n + 1.0 / 6.0) * p * q
    d_lo, g1_lo, _ = peizer_pratt_parts(k_lo - 1, n, p)
    _, _, g2_lo = peizer_pratt_parts(lo, n, p)
    d_hi, _, g2_hi = peizer_pratt_parts(k_hi + 1, n, p)
    _, g1_hi, _ = peizer_pratt_parts(np.minimum(hi, n - 1), n, p)
    with np.errstate(invalid="ignore"):
        root_lo = np.sqrt((1.0 + q * (g1_lo - 1e-12) + p * (g2_lo - 1e-12)) / scale)
        root_hi = np.sqrt((1.0 + q * (g1_hi - 1e-12) + p * (g2_hi - 1e-12)) / scale)
    return _score_envelopes(n, hi, k_hi, d_lo * root_lo, d_hi * root_hi)


def _camp_paulson_envelopes(n, p, lo, hi, k_lo, k_hi):
    """U and V of :func:`_tail_envelopes` for ``camp_paulson``, G = Phi(N / sqrt(b r^(2/3) + a)).

    The numerator N rises with k, as do r and a, and b falls
    (:func:`atlas.approximations.camp_paulson_parts`). Below the core: N(k) <= N(k_lo - 1) and
    b r^(2/3) + a <= b(lo) r(k_lo - 1)^(2/3) + a(k_lo - 1), so w(k) <= N(k_lo - 1) over the
    root of that (when N < 0 there); above it, w(k) >= N(k_hi + 1) over the root of
    b(k_hi + 1) r(last)^(2/3) + a(last), last = min(hi, n - 1). The root is raised by 1e-12 of
    itself for its rounding.
    """
    num_lo, _, r3_lo, a_lo = camp_paulson_parts(k_lo - 1, n, p)
    _, b_lo, _, _ = camp_paulson_parts(lo, n, p)
    num_hi, b_hi, _, _ = camp_paulson_parts(k_hi + 1, n, p)
    _, _, r3_last, a_last = camp_paulson_parts(np.minimum(hi, n - 1), n, p)
    root_lo = np.sqrt(b_lo * r3_lo * r3_lo + a_lo) * (1.0 + 1e-12)
    root_hi = np.sqrt(b_hi * r3_last * r3_last + a_last) * (1.0 + 1e-12)
    return _score_envelopes(n, hi, k_hi, num_lo / root_lo, num_hi / root_hi)


_SCORE_ENVELOPES = {
    "peizer_pratt": _peizer_pratt_envelopes,
    "camp_paulson": _camp_paulson_envelopes,
}


def _every_integer(n, p, lo, hi, methods):
    """Extremes of D over [lo, hi] evaluated at every integer, for rows of p at one n.

    G is computed at the core's integers (:func:`_core`) for the methods with a tail bound
    (:data:`_TAIL_BOUNDED`); a row's extremes there are those of the whole window when every
    value D could take outside the core lies strictly between them, by the bounds of the module
    notes ("Narrow windows"); any other row is computed over its whole window. Either way the
    values, and the first k of each extreme, are those of evaluating every integer.

    Returns arrays (len(methods), rows) of max D, its k, min D, its k.
    """
    out = _extremes((len(methods), p.size))
    groups = _width_groups(hi - lo + 1)
    cored, envelopes = [False] * len(groups), {}
    if (hi - lo + 1).sum() >= _CORE_MIN_POINTS:  # else no group could take the core
        core_lo, core_hi = _core(n, p, lo, hi)
        # A group takes the core where its rectangle is at most _CORE_SHARE of the window's and
        # the window's rectangle holds at least _CORE_MIN_POINTS integers (else the bounds and
        # the second rectangle cost more than they save: a single p never takes it).
        cored = [
            (core_hi[g] - core_lo[g]).max() + 1 <= _CORE_SHARE * ((hi[g] - lo[g]).max() + 1)
            and g.size * ((hi[g] - lo[g]).max() + 1) >= _CORE_MIN_POINTS
            for g in groups
        ]
        need = np.concatenate([g for g, use in zip(groups, cored, strict=True) if use] + [[]])
        need = np.sort(need.astype(np.int64))
        if need.size:
            for method in _TAIL_BOUNDED.intersection(methods):
                u, v = np.full(p.size, np.inf), np.full(p.size, np.inf)
                bounds = (n, p[need], lo[need], hi[need], core_lo[need], core_hi[need])
                u[need], v[need] = _tail_envelopes(*bounds, method)
                envelopes[method] = u, v
    for group, use in zip(groups, cored, strict=True):
        pg = p[group, None]
        window = _cdf_rows(n, p[group], lo[group], hi[group])
        if use:
            core = _CoreRectangle(window, lo[group], hi[group], core_lo[group], core_hi[group])
        for i, method in enumerate(methods):
            if use and method in envelopes:
                u, v = envelopes[method][0][group], envelopes[method][1][group]
                found = core.extremes(n, pg, method, u, v)
            else:
                found = _window_extremes(window, n, pg, method)
            for j, values in enumerate(found):
                out[j][i, group] = values
    return out


def _window_extremes(window, n, pg, method, rows=slice(None)):
    """Max D, its k, min D, its k over every integer of the windows (``rows`` of them)."""
    k, valid, cdf = window
    d = cdf[rows] - approximate_cdf(k[rows], n, pg[rows], method)
    return _row_extremes(d, valid[rows], k[rows])


class _CoreRectangle:
    """The cores of a group's rows as one rectangle, with F read from the windows' F (so the
    same values), and the extremes of D there proved those of the windows or recomputed."""

    def __init__(self, window, lo, hi, core_lo, core_hi):
        k, valid, cdf = window
        self.window = window
        rows = np.arange(lo.size)
        last = (core_hi - lo)[:, None]
        cols = (core_lo - lo)[:, None] + np.arange(int((core_hi - core_lo).max()) + 1)
        self.valid = cols <= last
        cols = np.minimum(cols, last)
        self.k, self.cdf = k[rows[:, None], cols], cdf[rows[:, None], cols]
        self.has_low, self.has_high = core_lo > lo, core_hi < hi
        # F outside the core, from F summed upward (monotone as computed): below the core at
        # most F(lo_c); above it between F(hi_c) and F(hi).
        self.f_lo, self.f_core_hi = self.cdf[:, 0], cdf[rows, core_hi - lo]
        self.f_hi = cdf[rows, hi - lo]

    def extremes(self, n, pg, method, u, v):
        """The extremes over the windows, given U and V of :func:`_tail_envelopes`."""
        d = self.cdf - approximate_cdf(self.k, n, pg, method)
        found = _row_extremes(d, self.valid, self.k)
        slack = 4.0 * G_ROUNDING
        low, high = self.has_low, self.has_high
        upper = np.maximum(np.where(low, self.f_lo + u, -np.inf),
                           np.where(high, self.f_hi - 1.0 + v, -np.inf)) + slack  # fmt: skip
        lower = np.minimum(np.where(low, -u, np.inf),
                           np.where(high, self.f_core_hi - 1.0 - v, np.inf)) - slack  # fmt: skip
        redo = np.flatnonzero((found[0] <= upper) | (found[2] >= lower))
        if redo.size:
            again = _window_extremes(self.window, n, pg, method, redo)
            for whole, part in zip(found, again, strict=True):
                whole[redo] = part
        return found


_GROUP_RATIO = 1.5
_GROUP_SMALL = 48


def _width_groups(width):
    """Rows grouped so that each group's padded rectangle wastes little.

    Rows are sorted by window width and cut where the width falls below 1 / ``_GROUP_RATIO`` of
    the group's widest; windows of at most ``_GROUP_SMALL`` integers share one group. Every row
    is computed alone within its rectangle (F summed along the row, G elementwise), so the
    grouping changes no value, only the padding evaluated (3.6 times the windows' total at
    n = 1000 over the default p axis without it).
    """
    order = np.argsort(-width, kind="stable")
    sorted_width = width[order]
    groups = []
    start = 0
    while start < order.size:
        top = sorted_width[start]
        floor = _GROUP_SMALL if top <= _GROUP_SMALL else top / _GROUP_RATIO
        stop = start + int(np.searchsorted(-sorted_width[start:], -floor, side="right"))
        stop = order.size if top <= _GROUP_SMALL else max(stop, start + 1)
        groups.append(np.sort(order[start:stop]))
        start = stop
    return groups


def _sample_coordinate(t):
    """Map a standard score t to the coarse-sampling coordinate (4 units per sigma, then 2)."""
    inner = np.minimum(np.abs(t), _CORE_SIGMAS)
    return np.sign(t) * (inner / _CORE_STEP + (np.abs(t) - inner) / _TAIL_STEP)


def _sample_position(c):
    """The inverse of :func:`_sample_coordinate`."""
    edge = _CORE_SIGMAS / _CORE_STEP
    inner = np.minimum(np.abs(c), edge)
    return np.sign(c) * (inner * _CORE_STEP + (np.abs(c) - inner) * _TAIL_STEP)


@functools.cache
def _fractions(count):
    """numpy.linspace(0, 1, count), made once per count (read only)."""
    out = np.linspace(0.0, 1.0, count)
    out.flags.writeable = False
    return out


def _nested_search(n, p, lo, hi, methods):
    """Extremes of D over [lo, hi] by the nested search described in the module notes."""
    mu = n * p
    sigma = np.sqrt(mu * (1.0 - p))
    # Samples are evenly spaced in the coordinate c = _sample_coordinate((k - mu) / sigma): every
    # sigma/4 within 4 sigma of the mean and every sigma/2 beyond. Their number depends on each
    # row's own window only, so that a p's result does not depend on the other p computed with
    # it (builds are identical however they are split).
    c_lo = _sample_coordinate((lo - mu) / sigma)
    c_hi = _sample_coordinate((hi - mu) / sigma)
    counts = np.minimum(np.maximum(np.ceil(c_hi - c_lo), 32), 8192).astype(np.int64) + 1
    # Rows are grouped by sample count and by the order of the expansion, both functions of the
    # row alone.
    orders = _orders(sigma)
    key = counts * 16 + orders
    if key.size > 1 and (key != key[0]).any():
        shape = (len(methods), p.size)
        out = _extremes(shape)
        for c in np.unique(key):
            rows = key == c
            got = _nested_search(n, p[rows], lo[rows], hi[rows], methods)
            for whole, part in zip(out, got, strict=True):
                whole[:, rows] = part
        return out
    frac = _fractions(int(counts[0]))
    c = c_lo[:, None] + frac[None, :] * (c_hi - c_lo)[:, None]
    t = _sample_position(c)
    coarse = np.round(mu[:, None] + sigma[:, None] * t).astype(np.int64)
    coarse = np.minimum(np.maximum(coarse, lo[:, None]), hi[:, None])
    order = int(orders[0])
    # Every method samples the same points: z, phi(z), Phi(z) and the series of F (one per
    # first order of the methods' series) are computed once and shared (the same operations on
    # the same numbers as _deviation, so the same values).
    gammas = {}
    for method in methods:
        first = _NORMAL_FAMILY.get(method, 1)
        if first not in gammas:
            gammas[first] = _series_coefficients(n, p, method, order)
    shared = _SharedPoints(coarse, n, p[:, None], gammas)
    d = np.concatenate([shared.deviation(method) for method in methods])
    # Maxima of D and maxima of -D (the minima of D) are refined together, every method at once:
    # rows (method, sign, p).
    reps = 2 * len(methods)
    mrow = np.repeat(np.arange(len(methods)), 2 * p.size)
    sign = np.tile(np.repeat([1.0, -1.0], p.size), len(methods))
    sd = np.concatenate([np.stack([x, -x]) for x in np.split(d, len(methods))]).reshape(
        reps * p.size, -1
    )
    pidx = np.tile(np.arange(p.size), reps)
    value, where = _refine(n, p, pidx, coarse, sd, sign, mrow, methods, gammas)
    value = value.reshape(len(methods), 2, p.size)
    where = where.reshape(len(methods), 2, p.size)
    return [value[:, 0], where[:, 0], -value[:, 1], where[:, 1]]


class _SharedPoints:
    """D of several methods at the same points k (rows of p): z, phi, Phi(z) computed once."""

    def __init__(self, k, n, p, gammas):
        self.k, self.n, self.p = k, n, p
        self.z, self.density = _scores(k, n, p)
        self.gammas = gammas
        self.tails = {}
        self.big_phi = None

    def deviation(self, method):
        first = _NORMAL_FAMILY.get(method, 1)
        if first not in self.tails:
            self.tails[first] = self.density * asymptotic.hermite_sum(self.z, self.gammas[first])
        if method not in _NORMAL_FAMILY and self.big_phi is None:
            self.big_phi = special.ndtr(self.z)
        return _with_g(self.tails[first], self.z, self.k, self.n, self.p, method, self.big_phi)


def _refine(n, p, pidx, coarse, sd, sign, mrow, methods, gammas):
    """Refine the best local maxima of sampled s D to the exact integer maximum of s D.

    Row r of ``sd`` holds s D on the points ``coarse[pidx[r]]`` for p = ``p[pidx[r]]`` and the
    method ``methods[mrow[r]]``, with s = ``sign[r]``; ``gammas`` maps the first order of a
    method's series to its coefficients, one row per p. Each of the best local maxima is
    bracketed by its two neighbouring samples; a bracket of ``BRACKET_LIMIT`` integers or more
    is resampled on ``_REFINE_POINTS`` points and narrowed around its best sample, and every
    integer of the final brackets is evaluated.
    """
    rows, count = sd.shape
    # Local maxima of the samples (plateaus count); the best _CANDIDATES of each row.
    peak = np.ones(sd.shape, dtype=bool)
    peak[:, 1:] &= sd[:, 1:] >= sd[:, :-1]
    peak[:, :-1] &= sd[:, :-1] >= sd[:, 1:]
    take = min(_CANDIDATES, count)
    best = np.argsort(np.where(peak, -sd, np.inf), axis=1)[:, :take]
    # A sample lies within half a spacing of its peak, so the peak exceeds the sample by at most
    # about |second difference| / 8; keep only candidates whose peak could beat the best sample
    # (with that bound taken 8 times larger, for safety). The best candidate is always kept, and
    # so is a candidate at either end of the samples, whose second difference is unknown.
    r = np.arange(rows)[:, None]
    before, after = np.maximum(best - 1, 0), np.minimum(best + 1, count - 1)
    value = sd[r, best]
    curve = np.abs(sd[r, before] - 2 * value + sd[r, after])
    curve[(best == 0) | (best == count - 1) | ~np.isfinite(curve)] = np.inf
    keep = peak[r, best] & (value + curve >= value[:, :1])
    keep[:, 0] = True
    row_idx, col = np.nonzero(keep)
    idx = best[row_idx, col]
    prow_idx = pidx[row_idx]
    lower = coarse[prow_idx, np.maximum(idx - 1, 0)]
    upper = coarse[prow_idx, np.minimum(idx + 1, count - 1)]
    prow = p[prow_idx]
    mcand = mrow[row_idx]
    steps = _fractions(_REFINE_POINTS)

    def signed_deviation(k, which):
        """s D at points k of the candidates ``which``: one row of k per candidate (2-D), or
        one candidate per point (1-D); each candidate with its own p and method."""
        if len(methods) > 1 and k.size <= _SHARED_POINTS:
            out = _shared_deviation(k, n, prow, prow_idx, which, mcand, methods, gammas)
        else:
            out = np.empty(k.shape)
            split = len(methods) > 1  # one method: no masks
            for i in np.unique(mcand[which]).tolist() if split else [0]:
                method = methods[i]
                at = mcand[which] == i if split else slice(None)
                sub = which[at]
                gamma = gammas[_NORMAL_FAMILY.get(method, 1)][prow_idx[sub]]
                if k.ndim == 1:  # p and the coefficients per point
                    out[at] = _deviation(k[at], n, prow[sub], method, gamma[:, 0])
                else:
                    out[at] = _deviation(k[at], n, prow[sub][:, None], method, gamma)
        return sign[row_idx[which]].reshape(which.shape + (1,) * (k.ndim - 1)) * out

    while (upper - lower >= BRACKET_LIMIT).any():
        wide = np.flatnonzero(upper - lower >= BRACKET_LIMIT)
        span = (upper[wide] - lower[wide]).astype(np.float64)
        pts = np.round(lower[wide][:, None] + steps[None, :] * span[:, None]).astype(np.int64)
        vals = signed_deviation(pts, wide)
        j = np.argmax(vals, axis=1)
        h = np.arange(wide.size)
        lower[wide] = pts[h, np.maximum(j - 1, 0)]
        upper[wide] = pts[h, np.minimum(j + 1, _REFINE_POINTS - 1)]
    # Every integer of the final brackets, evaluated as one flat array (no padding).
    length = upper - lower + 1
    cid = np.repeat(np.arange(length.size), length)
    starts = np.cumsum(length) - length
    k = lower[cid] + (np.arange(cid.size) - starts[cid])
    vals = signed_deviation(k, cid)
    best_k, best_val = _segment_argmax(vals, k, starts, cid)
    value = np.full((rows, take), -np.inf)
    where = np.zeros((rows, take), dtype=np.int64)
    value[row_idx, col] = best_val
    where[row_idx, col] = best_k
    pick = np.argmax(value, axis=1)
    return value[r[:, 0], pick], where[r[:, 0], pick]


# Candidates of several methods share z, phi(z) and the series up to this many points (a few
# cells); beyond it the masks cost more than the numpy calls they save (0.95x at 195 p).
_SHARED_POINTS = 8192


def _shared_deviation(k, n, prow, prow_idx, which, mcand, methods, gammas):
    """D of :func:`_deviation` for candidates of several methods at once.

    z and phi(z) are computed once for every candidate, the series once per first order of the
    methods' series (``normal_cc`` and the methods outside the normal family share order 1),
    and G once per method on its own candidates: the same operations on the same numbers as
    :func:`_deviation` method by method, so the same values.
    """
    pk = prow[which] if k.ndim == 1 else prow[which][:, None]
    z, density = _scores(k, n, pk)
    kinds = mcand[which]
    firsts = np.array([_NORMAL_FAMILY.get(m, 1) for m in methods])[kinds]
    out = np.empty(k.shape)
    for first in np.unique(firsts).tolist():
        at = firsts == first
        gamma = gammas[first][prow_idx[which[at]]]
        gamma = gamma[:, 0] if k.ndim == 1 else gamma
        out[at] = density[at] * asymptotic.hermite_sum(z[at], gamma)
    for i in np.unique(kinds).tolist():
        if methods[i] not in _NORMAL_FAMILY:
            at = kinds == i
            out[at] = _with_g(out[at], z[at], k[at], n, pk[at], methods[i])
    return out


def _segment_argmax(vals, k, starts, segment):
    """For each segment of ``vals`` (starting at ``starts``), its maximum and the k of its first
    occurrence: numpy.argmax row by row, NaN counting as the maximum as it does there."""
    top = np.maximum.reduceat(vals, starts)[segment]
    at_top = np.where(np.isnan(top), np.isnan(vals), vals == top)
    first = np.where(at_top, np.arange(vals.size), vals.size)
    index = np.minimum.reduceat(first, starts)
    return k[index], vals[index]


def evaluate(n, p, *, methods=METHODS, full=False):
    """Worst-case interval and CDF errors of several methods at one n, for a vector of p.

    Parameters
    ----------
    n : int
        Number of trials, n >= 1.
    p : array_like of float
        One-dimensional success probabilities, each 0 < p < 1.
    methods : str or sequence of str, optional
        Methods from :data:`atlas.METHODS` (a single name counts as one method); all of them by
        default.
    full : bool, optional
        Evaluate every integer of the window even when it is wide (slow; for checking the search).

    Returns
    -------
    Evaluation
        Arrays of shape (len(methods), len(p)), each error with its accuracy (see the module
        notes, "Accuracy").

    Raises
    ------
    TypeError
        For n or p that are not real numbers (strings, complex numbers, booleans).
    ValueError
        For n that is not an integer >= 1, p outside (0, 1), or an unknown method.

    Notes
    -----
    interval = max D - min D over k = -1..n; cdf = max |D| over k = 0..n; D = F - G. See the
    module notes for the window and the search, and their guarantee.

    Examples
    --------
    >>> ev = evaluate(10, [0.5], methods=("normal_cc",))
    >>> round(float(ev.interval[0, 0]), 6), int(ev.lo[0, 0]), int(ev.hi[0, 0])
    (0.005372, 2, 8)
    """
    n_arr = check_n(n)
    if n_arr.ndim != 0:
        raise ValueError(f"`n` must be a single integer here; got shape {n_arr.shape}.")
    p = np.atleast_1d(check_p(p)).astype(np.float64)
    if p.ndim != 1:
        raise ValueError(f"`p` must be one-dimensional here; got shape {p.shape}.")
    if isinstance(methods, str):  # one method named on its own, not a sequence of letters
        methods = (methods,)
    return _evaluate(int(n_arr), p, tuple(check_method(m) for m in methods), full)


def _evaluate(n, p, methods, full=False):
    """:func:`evaluate` on checked arguments: int n, 1-D float64 p, a tuple of methods."""
    lo, hi, ends = _windows(n, p, methods)
    shape = (len(methods), p.size)
    dmax, kmax, dmin, kmin = _extremes(shape)
    narrow = full | (hi - lo + 1 <= FULL_LIMIT)
    for rows, finder in ((narrow, _every_integer), (~narrow, _nested_search)):
        if rows.any():
            got = finder(n, p[rows], lo[rows], hi[rows], methods)
            dmax[:, rows], kmax[:, rows], dmin[:, rows], kmin[:, rows] = got
    interval = np.empty(shape)
    cdf = np.empty(shape)
    a = np.empty(shape, np.int64)
    b = np.empty(shape, np.int64)
    for i in range(len(methods)):
        # The end points: D(-1) = -G(-1) counts for the interval metric only; D(n) = 1 - G(n).
        d_first, d_last = -ends[i, 0], 1.0 - ends[i, 1]
        hi_val = np.maximum(dmax[i], d_last)
        hi_k = np.where(d_last > dmax[i], n, kmax[i])
        lo_val = np.minimum(dmin[i], d_last)
        lo_k = np.where(d_last < dmin[i], n, kmin[i])
        cdf[i] = np.maximum(np.abs(hi_val), np.abs(lo_val))
        hi_k = np.where(d_first > hi_val, -1, hi_k)
        hi_val = np.maximum(hi_val, d_first)
        lo_k = np.where(d_first < lo_val, -1, lo_k)
        lo_val = np.minimum(lo_val, d_first)
        # At rounding level (|D| ~ 1e-16) two searches may disagree on which is larger; the
        # error of the interval between the two points is still |D(b) - D(a-1)|.
        interval[i] = np.abs(hi_val - lo_val)
        first, last = np.minimum(hi_k, lo_k), np.maximum(hi_k, lo_k)
        a[i] = np.where(first == last, np.minimum(np.maximum(first, 0), n), first + 1)
        b[i] = np.where(first == last, np.minimum(np.maximum(last, 0), n), last)
    size = np.maximum(np.abs(dmax), np.abs(dmin))
    d_accuracy = _deviation_accuracy(n, p, methods, narrow, size)
    # The omitted tails hold |D| <= TAIL_TOL: they can raise max D only where it is below
    # TAIL_TOL, and lower min D only where it is above -TAIL_TOL.
    tails = np.maximum(TAIL_TOL - dmax, 0.0) + np.maximum(TAIL_TOL + dmin, 0.0)
    interval_accuracy = 2.0 * d_accuracy + tails
    cdf_accuracy = d_accuracy + np.maximum(TAIL_TOL - size, 0.0)
    return Evaluation(methods, interval, cdf, a, b, interval_accuracy, cdf_accuracy)


# The accuracy model (the module notes, "Accuracy", state it and the measurements behind it).
G_ROUNDING = 1e-15
_SUM_ERROR = (2e-15, 1e-16)
_SERIES_ROUNDING = 64 * np.finfo(np.float64).eps


def _deviation_accuracy(n, p, methods, narrow, size):
    """Bound on |D computed - D| at every k, shape (len(methods), len(p)): the module notes."""
    sigma = np.sqrt(n * p * (1.0 - p))
    f_error = np.empty(p.size)
    f_error[narrow] = _SUM_ERROR[0] + _SUM_ERROR[1] * sigma[narrow]
    wide = np.flatnonzero(~narrow)
    if wide.size:
        orders = _orders(sigma[wide])
        for order in np.unique(orders):
            rows = wide[orders == order]
            f_error[rows] = asymptotic.remainder_bound(sigma[rows], p[rows], int(order))
    out = np.empty((len(methods), p.size))
    for i, method in enumerate(methods):
        # Wide windows, normal family: D is the series itself, rounded relative to its size;
        # otherwise G (and Phi(z)) are rounded absolutely.
        g_error = np.where(narrow, G_ROUNDING, 2.0 * G_ROUNDING)
        if method in _NORMAL_FAMILY:
            g_error = np.where(narrow, G_ROUNDING, _SERIES_ROUNDING * size[i])
        out[i] = f_error + g_error
    return out


def evaluate_cells(n, p, method, *, accuracy=False):
    """Errors of one method at cells given as flat arrays of n and p, in any order.

    Cells are grouped by n and each distinct (n, p) is computed once, with the p of one n in
    one call of the engine.

    Parameters
    ----------
    n : numpy.ndarray of int64
        Checked n of the cells (see :func:`check_n`), one-dimensional.
    p : numpy.ndarray of float64
        Checked p of the cells, the same length.
    method : str
        A checked method name.
    accuracy : bool, optional
        Also return the accuracy of ``interval`` and of ``cdf``.

    Returns
    -------
    tuple of numpy.ndarray
        ``interval``, ``cdf``, ``lo``, ``hi`` for each cell, in the cells' order; with
        ``accuracy``, then ``interval_accuracy`` and ``cdf_accuracy``.
    """
    kinds = (float, float, np.int64, np.int64, float, float)
    order = np.lexsort((p, n))
    n_sorted, p_sorted = n[order], p[order]
    # Starts of runs of equal (n, p), and starts of runs of equal n among them.
    new_cell = np.ones(n.size, dtype=bool)
    new_cell[1:] = (n_sorted[1:] != n_sorted[:-1]) | (p_sorted[1:] != p_sorted[:-1])
    cell_of = np.cumsum(new_cell) - 1
    firsts = np.flatnonzero(new_cell)
    cell_n, cell_p = n_sorted[firsts], p_sorted[firsts]
    bounds = np.flatnonzero(np.r_[True, cell_n[1:] != cell_n[:-1], True])
    results = [np.empty(firsts.size, kind) for kind in kinds]
    for start, stop in zip(bounds[:-1], bounds[1:], strict=True):
        ev = _evaluate(int(cell_n[start]), cell_p[start:stop], (method,))
        parts = (ev.interval, ev.cdf, ev.lo, ev.hi, ev.interval_accuracy, ev.cdf_accuracy)
        for whole, part in zip(results, parts, strict=True):
            whole[start:stop] = part[0]
    out = [np.empty(n.size, kind) for kind in kinds]
    for whole, values in zip(out, results, strict=True):
        whole[order] = values[cell_of]
    return tuple(out) if accuracy else tuple(out[:4])


def _broadcast_evaluate(n, p, method):
    """Evaluate one method over broadcast n and p: interval, cdf, lo, hi and the accuracies."""
    n_arr = check_n(n)
    p_arr = check_p(p)
    method = check_method(method)
    if n_arr.ndim == 0 and p_arr.ndim == 0:  # one cell: skip the grouping
        ev = _evaluate(int(n_arr), p_arr.reshape(1).astype(np.float64), (method,))
        parts = (ev.interval, ev.cdf, ev.lo, ev.hi, ev.interval_accuracy, ev.cdf_accuracy)
        return tuple(np.asarray(x[0, 0]) for x in parts)
    n_b, p_b = np.broadcast_arrays(n_arr, p_arr)
    if n_b.size == 0:  # empty input: empty results of the broadcast shape
        kinds = (float, float, np.int64, np.int64, float, float)
        return tuple(np.empty(n_b.shape, kind) for kind in kinds)
    flat = evaluate_cells(n_b.ravel(), p_b.ravel().astype(np.float64), method, accuracy=True)
    return tuple(x.reshape(n_b.shape) for x in flat)


class WorstError(NamedTuple):
    """A worst-case error with the bound on its absolute error (see :func:`worst_error`)."""

    error: float | np.ndarray
    accuracy: float | np.ndarray


RESOLUTION_FACTOR = 3.0


def is_resolved(error, accuracy, *, factor=RESOLUTION_FACTOR):
    """Whether an error is resolved: larger than ``factor`` times its accuracy.

    An error that is not resolved is below the resolution of the computation: its true value
    lies in [error - accuracy, error + accuracy], which is no better than "less than
    error + accuracy", and should be reported that way, never as a precise number.

    Parameters
    ----------
    error, accuracy : float or array_like
        A worst-case error and its accuracy, e.g. from ``worst_error(...,
        return_accuracy=True)``.
    factor : float, optional
        How many times its accuracy the error must exceed; default 3.

    Returns
    -------
    bool or numpy.ndarray of bool

    Examples
    --------
    >>> is_resolved(*worst_error(10**6, 0.3, return_accuracy=True))
    True
    >>> is_resolved(*worst_error(10**15, 0.5, method="camp_paulson", return_accuracy=True))
    False
    """
    out = np.asarray(error) > factor * np.asarray(accuracy)
    return bool(out) if out.ndim == 0 else out


def worst_error(n, p, *, method="normal_cc", metric="interval", return_accuracy=False):
    """Exact worst-case error of an approximation to Bin(n, p).

    Parameters
    ----------
    n : int or array_like of int
        Number of trials, 1 <= n <= 10^15.
    p : float or array_like of float
        Success probability, 0 < p < 1. Broadcast against ``n``.
    method : str, optional
        One of :data:`atlas.METHODS`; default ``"normal_cc"``.
    metric : {"interval", "cdf"}, optional
        ``"interval"`` (default): the largest error of any interval probability P(a <= X <= b);
        ``"cdf"``: the largest error of P(X <= k).
    return_accuracy : bool, optional
        Return a :class:`WorstError` ``(error, accuracy)`` instead of the error alone.

    Returns
    -------
    float or numpy.ndarray or WorstError
        A float for scalar inputs, else an array of the broadcast shape (empty for empty
        input). With ``return_accuracy``, the pair (error, accuracy) of such values: the
        computed error differs from the exact one by at most ``accuracy`` (see the module
        notes, "Accuracy", for the basis), and :func:`is_resolved` says whether it is
        meaningful as a number.

    Raises
    ------
    TypeError
        If n or p is not a real number (a string, a complex number, a boolean).
    ValueError
        If n is not an integer from 1 to 10^15, p is outside (0, 1) or NaN, or method or
        metric is unknown.

    Notes
    -----
    With D(k) = F(k) - G(k), k = -1..n: interval = max D - min D; cdf = max_{k >= 0} |D(k)|.

    Examples
    --------
    >>> round(worst_error(10, 0.5), 6)
    0.005372
    >>> worst_error([10, 20], [[0.5], [0.1]]).shape
    (2, 2)
    >>> error, accuracy = worst_error(10**12, 0.3, return_accuracy=True)
    >>> f"{error:.4g}", accuracy < 1e-15
    ('8.394e-08', True)
    """
    check_metric(metric)
    interval, cdf, _, _, interval_acc, cdf_acc = _broadcast_evaluate(n, p, method)
    out, acc = (interval, interval_acc) if metric == "interval" else (cdf, cdf_acc)
    if out.ndim == 0:
        out, acc = float(out), float(acc)
    return WorstError(out, acc) if return_accuracy else out


def worst_interval(n, p, *, method="normal_cc"):
    """The interval [a, b] on which the interval error of :func:`worst_error` is attained.

    Parameters
    ----------
    n, p : array_like
        As for :func:`worst_error`.
    method : str, optional
        One of :data:`atlas.METHODS`.

    Returns
    -------
    tuple
        ``(a, b)`` with 0 <= a <= b <= n: ints for scalar inputs, else int64 arrays.

    Raises
    ------
    ValueError
        As for :func:`worst_error`.

    Examples
    --------
    >>> worst_interval(10, 0.5)
    (2, 8)
    """
    _, _, a, b, _, _ = _broadcast_evaluate(n, p, method)
    if a.ndim == 0:
        return int(a), int(b)
    return a, b
