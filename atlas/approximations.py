"""Approximations G(k) to the binomial CDF F(k) = P(X <= k), X ~ Bin(n, p).

One small function per method. Every function takes integer-valued ``k`` (any array shape) and
``n``, ``p`` that broadcast against it, and returns G(k) as float64. Each is defined at every
integer k = -1..n so that interval probabilities are differences, P(a <= X <= b) ~ G(b) - G(a-1).

Notation: q = 1 - p, mu = n p, sigma = sqrt(n p q), z = (k + 1/2 - mu) / sigma (the continuity
corrected standard score), phi the standard normal density and Phi its CDF.

Methods that are defined only for 0 <= k < n (``camp_paulson``, ``peizer_pratt``) return exactly
G(-1) = 0 and G(n) = 1, the values of the true CDF there. The Poisson method returns G(-1) = 0 for
p <= 1/2; for p > 1/2 it approximates the count of failures instead (see :func:`poisson`).
"""

import numpy as np
from scipy import special

METHODS = (
    "normal_cc",
    "edgeworth_cc",
    "edgeworth2_cc",
    "normal",
    "poisson",
    "camp_paulson",
    "peizer_pratt",
)

_SQRT_2PI = np.sqrt(2.0 * np.pi)


def _moments(k, n, p):
    """Return k, n, p, q, mu, sigma as float64 arrays that broadcast together (not copied)."""
    k = np.asarray(k, dtype=np.float64)
    n = np.asarray(n, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    q = 1.0 - p
    mu = n * p
    return k, n, p, q, mu, np.sqrt(mu * q)


def _broadcast(*arrays):
    """numpy.broadcast_arrays, skipped when the shapes already agree (it costs microseconds)."""
    shape = arrays[0].shape
    if all(a.shape == shape for a in arrays):
        return arrays
    return np.broadcast_arrays(*arrays)


def _spread(a, shape):
    """numpy.broadcast_to(a, shape), skipped when ``a`` has that shape already."""
    return a if a.shape == shape else np.broadcast_to(a, shape)


def _split(v):
    """Veltkamp's split v = hi + lo, each part holding at most 26 significant bits.

    Products of two such parts are exact in float64 (Dekker 1971, Numer. Math. 18, 224-242).
    """
    c = v * 134217729.0  # 2^27 + 1
    hi = c - (c - v)
    return hi, v - hi


def offset(x, n, p, q):
    """x - n p, computed without the rounding of the product n p.

    A rounded n p is off by up to half an ulp of a number as large as n p, which moves z by that
    much over sigma (1e-12 of G at n = 10^8, 3e-10 at n = 10^15). Dekker's exact product
    n p = P + E (P the rounded product, E its rounding error, both from the splits of n and p,
    exact for every integer n < 2^53) makes x - n p = (x - P) - E, rounded once at the end but
    for the rounding of x - P, which is exact when x and P are within a factor of two (Sterbenz)
    and otherwise relative to the result. For p > 1/2 the difference is taken as
    (x - n) + n q, since q = 1 - p is exact there (Sterbenz) and n q is the small number.
    """
    if p.size == 1 and n.size == 1 and p.ndim <= x.ndim and n.ndim <= x.ndim:
        # One (n, p): the same arithmetic on Python floats, without numpy's per-call overhead.
        nf, pf = float(n.flat[0]), float(p.flat[0])
        if pf <= 0.5:
            big, small = _two_product(nf, pf)
            return (x - big) - small
        big, small = _two_product(nf, 1.0 - pf)
        return ((x - nf) + big) + small
    upper = p > 0.5
    big, small = _two_product(n, np.where(upper, q, p))
    shift = np.where(upper, n, 0.0)
    sign = np.where(upper, -1.0, 1.0)
    return ((x - shift) - sign * big) - sign * small


def _two_product(a, b):
    """(P, E) with P = fl(a b) and P + E = a b exactly (Dekker 1971, mul12)."""
    big = a * b
    a_hi, a_lo = _split(a)
    b_hi, b_lo = _split(b)
    small = ((a_hi * b_hi - big) + a_hi * b_lo + a_lo * b_hi) + a_lo * b_lo
    return big, small


def _phi(z):
    """Standard normal density."""
    return np.exp(-0.5 * z * z) / _SQRT_2PI


def _correction_range(z, sigma):
    """z and sigma clipped for the Edgeworth correction terms, which are phi(z) times a polynomial.

    phi(z) is exactly 0 in float64 for |z| >= 39, and so is every correction term; clipping z
    to [-40, 40] keeps the polynomial finite there (no inf * 0 = NaN for tiny p, where
    |z| >= 0.5 / sigma is huge). For sigma < 1e-3, every |z| is at least 0.5 / sigma - sigma
    > 400 at the integers, so replacing sigma by 1e-3 in the coefficients changes no term
    (each is 0) and keeps 1/sigma^2 finite.
    """
    return np.clip(z, -40.0, 40.0), np.maximum(sigma, 1e-3)


# de Moivre-Laplace with continuity correction: G(k) = Phi((k + 1/2 - mu) / sigma).
# Feller (1968), An Introduction to Probability Theory and Its Applications, vol. 1, ch. VII.
def normal_cc(k, n, p):
    """Normal curve with continuity correction.

    Parameters
    ----------
    k : array_like of int
        Counts, -1 <= k <= n.
    n : int or array_like
        Number of trials, n >= 1.
    p : float or array_like
        Success probability, 0 < p < 1.

    Returns
    -------
    numpy.ndarray
        G(k) = Phi(z), z = (k + 1/2 - n p) / sqrt(n p q).

    Examples
    --------
    >>> round(float(normal_cc(2, 50, 0.1)), 6)
    0.119296
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    return special.ndtr(offset(k + 0.5, n, p, q) / sigma)


# One-term Edgeworth (skewness) correction, the main term of Uspensky (1937), Introduction to
# Mathematical Probability, ch. VII: G(k) = Phi(z) - (q - p) / (6 sigma) (z^2 - 1) phi(z).
def edgeworth_cc(k, n, p):
    """Continuity-corrected normal curve with the one-term Edgeworth skewness correction.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) = Phi(z) - (q - p) / (6 sigma) (z^2 - 1) phi(z).

    Examples
    --------
    >>> round(float(edgeworth_cc(2, 50, 0.1)), 6)
    0.114427
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    z = offset(k + 0.5, n, p, q) / sigma
    zc, sc = _correction_range(z, sigma)
    return special.ndtr(z) - (q - p) / (6.0 * sc) * (zc * zc - 1.0) * _phi(zc)


# Two-term Edgeworth expansion on the lattice. With g1 = (q - p)/sigma (skewness) and
# g2 = (1 - 6 p q)/sigma^2 (excess kurtosis):
#   G(k) = edgeworth_cc - phi(z) [g2/24 He3(z) + g1^2/72 He5(z)] + z phi(z) / (24 sigma^2),
# He3 = z^3 - 3z, He5 = z^5 - 10 z^3 + 15 z. The last term is the lattice (Sheppard) term of the
# continuity-corrected expansion (Esseen 1945, Acta Math. 77; Kolassa 2006, Series Approximation
# Methods in Statistics, ch. 3); without it the second term brings no gain at p = 1/2.
def edgeworth2_cc(k, n, p):
    """Continuity-corrected two-term Edgeworth expansion with its lattice term.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) as given in the module notes.

    Examples
    --------
    >>> round(float(edgeworth2_cc(2, 50, 0.1)), 6)
    0.112052
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    z = offset(k + 0.5, n, p, q) / sigma
    big_phi = special.ndtr(z)
    z, sigma = _correction_range(z, sigma)
    z2 = z * z
    g1 = (q - p) / sigma
    g2 = (1.0 - 6.0 * p * q) / (sigma * sigma)
    he2 = z2 - 1.0
    he3 = z * (z2 - 3.0)
    he5 = z * (z2 * (z2 - 10.0) + 15.0)
    density = _phi(z)
    return (
        big_phi
        - density * (g1 / 6.0 * he2 + g2 / 24.0 * he3 + g1 * g1 / 72.0 * he5)
        + z * density / (24.0 * sigma * sigma)
    )


# The uncorrected normal curve: G(k) = Phi((k - mu) / sigma).
def normal(k, n, p):
    """Normal curve without continuity correction.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) = Phi((k - n p) / sqrt(n p q)).

    Examples
    --------
    >>> round(float(normal(2, 50, 0.1)), 6)
    0.07865
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    return special.ndtr(offset(k, n, p, q) / sigma)


# Poisson limit: G(k) = Poisson(n p) CDF at k. For p > 1/2 the count of failures n - X is the
# rare one, so G(k) = P(Y >= n - k) with Y ~ Poisson(n q); the mirroring is common practice.
def poisson(k, n, p):
    """Poisson approximation, applied to the rarer of successes and failures.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) = P(Y <= k), Y ~ Poisson(n p), for p <= 1/2; G(k) = P(Y >= n - k), Y ~ Poisson(n q),
        for p > 1/2.

    Examples
    --------
    >>> round(float(poisson(2, 50, 0.1)), 6)
    0.124652
    """
    k, n, p, q = _broadcast(*_moments(k, n, p)[:4])
    out = np.empty(k.shape)
    low = p <= 0.5
    # The mean n p (or n q) rounded to float64 is off by up to half an ulp, which moves G by
    # pmf times that (1e-14 at n p = 10^5, 1e-9 at 10^15). With the exact product
    # n p = big + small (Dekker), G(mean) = G(big) -/+ small pmf(big) to second order in small,
    # whose term is below 1e-25 here.
    # special.pdtr is scipy.stats.poisson.cdf without its argument checks; it gives NaN for
    # k < 0, where the CDF is 0.
    if low.any():  # (each side is skipped when it has no points, for speed on small arrays)
        big, small = _two_product(n[low], p[low])
        j = np.maximum(k[low], 0.0)
        below = special.pdtr(j, big) - small * _poisson_pmf(j, big)
        out[low] = np.where(k[low] < 0, 0.0, below)
    high = ~low
    if high.any():
        # P(Y >= n - k) = sf(n - k - 1); the count of failures has mean n q.
        big, small = _two_product(n[high], q[high])
        m = np.maximum(n[high] - k[high] - 1.0, 0.0)
        above = special.pdtrc(m, big) + small * _poisson_pmf(m, big)
        out[high] = np.where(n[high] - k[high] - 1.0 < 0, 1.0, above)
    return out


def poisson_complement(k, n, p):
    """1 - G(k) of :func:`poisson`, formed without a difference from 1.

    The same terms as :func:`poisson` with the complementary Poisson tail (``pdtrc`` for
    ``pdtr``) and the mean's correction with the opposite sign; used for upper tails
    (:mod:`atlas.complements`), whose relative error matters where they are tiny.

    Examples
    --------
    >>> round(float(poisson_complement(2, 50, 0.1)), 6)
    0.875348
    """
    k, n, p, q = _broadcast(*_moments(k, n, p)[:4])
    out = np.empty(k.shape)
    low = p <= 0.5
    if low.any():
        big, small = _two_product(n[low], p[low])
        j = np.maximum(k[low], 0.0)
        above = special.pdtrc(j, big) + small * _poisson_pmf(j, big)
        out[low] = np.where(k[low] < 0, 1.0, above)
    high = ~low
    if high.any():
        big, small = _two_product(n[high], q[high])
        m = np.maximum(n[high] - k[high] - 1.0, 0.0)
        below = special.pdtr(m, big) - small * _poisson_pmf(m, big)
        out[high] = np.where(n[high] - k[high] - 1.0 < 0, 0.0, below)
    return out


def _poisson_pmf(j, mu):
    """Poisson pmf at integers j >= 0, to about 1e-8 relative (enough for the mean's correction).

    ln pmf = -j (t - log1p(t)) - stirlerr(j) - ln(2 pi j) / 2 with t = (mu - j) / j, where
    stirlerr(j) = ln j! - (j + 1/2) ln j + j - ln(2 pi) / 2 = 1/(12 j) - 1/(360 j^3) + ...;
    t - log1p(t) by its series for |t| < 1e-3. Avoids ln j! of huge j, whose rounding alone
    would be several units at j = 10^15 (Loader 2000, "Fast and accurate computation of binomial
    probabilities").
    """
    # Each branch is computed on its own points only (the same operations, so the same values
    # as computing both everywhere and choosing).
    j, mu = _broadcast(np.asarray(j, dtype=np.float64), np.asarray(mu, np.float64))
    jj = np.maximum(j, 1.0)
    t = (mu - jj) / jj
    small_t = np.abs(t) < 1e-3
    gap = np.empty(t.shape)
    ts = t[small_t]
    gap[small_t] = ts * ts * (0.5 - ts * (1.0 / 3.0 - ts * (0.25 - ts * (0.2 - ts / 6.0))))
    td = t[~small_t]
    with np.errstate(divide="ignore", invalid="ignore"):
        gap[~small_t] = td - np.log1p(td)
    stirling = np.empty(t.shape)
    large = jj >= 15
    jl = jj[large]
    stirling[large] = 1.0 / (12.0 * jl) - 1.0 / (360.0 * jl**3) + 1.0 / (1260.0 * jl**5)
    js = jj[~large]
    stirling[~large] = (
        special.gammaln(js + 1.0) - (js + 0.5) * np.log(js) + js - 0.5 * np.log(2.0 * np.pi)
    )
    log_pmf = -jj * gap - stirling - 0.5 * np.log(2.0 * np.pi * jj)
    out = np.asarray(np.exp(log_pmf))
    zero = j < 1.0
    out[zero] = np.exp(-mu[zero])
    return out


def _at_ends(k, n, value):
    """Fill G(-1) = 0 and G(n) = 1 into ``value`` computed for 0 <= k < n."""
    return np.where(k < 0, 0.0, np.where(k >= n, 1.0, value))


# Camp (1951), Ann. Math. Statist. 22, 130-131; Paulson (1942), Ann. Math. Statist. 13, 440-445;
# as given in Johnson, Kemp & Kotz (2005), Univariate Discrete Distributions, 3rd ed., sec. 3.6.1:
# r = (k+1) q / (p (n-k)), a = 1/(9(n-k)), b = 1/(9(k+1)),
# G(k) = Phi( ((1-b) r^(1/3) - (1-a)) / sqrt(b r^(2/3) + a) ).
def camp_paulson(k, n, p):
    """Camp-Paulson cube-root normal approximation.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) by the cube-root formula for 0 <= k < n; G(-1) = 0 and G(n) = 1.

    Notes
    -----
    Near the mean r^(1/3) is 1 + O(1/sigma) and the numerator (1 - b) r^(1/3) - (1 - a) is a
    small difference of numbers near 1; taken as written it loses log10(sigma) digits (1e-12 of
    G at n = 10^8). It is computed instead as (r^(1/3) - 1) - b r^(1/3) + a with
    r^(1/3) - 1 = expm1(log1p(u) / 3) and u = r - 1 = ((k + 1) - (n + 1) p) / (p (n - k)),
    whose numerator is the exact offset of :func:`offset` (for r > 2 or r < 1/2, ln r is summed
    from the logarithms of its factors, which keeps tiny p and tiny q finite). Every step is
    then relative to its result, and G is good to a few units in the last place.

    Examples
    --------
    >>> round(float(camp_paulson(2, 50, 0.1)), 6)
    0.110925
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    return _at_ends(k, n, special.ndtr(camp_paulson_score(k, n, p)))


def camp_paulson_score(k, n, p):
    """The normal deviate w of :func:`camp_paulson`, G(k) = Phi(w), at k clipped to [0, n - 1].

    Also used for the upper tail 1 - G(k) = Phi(-w) (:mod:`atlas.complements`), so that the
    tail is not formed as a difference from 1.
    """
    numerator, b, r3, a = camp_paulson_parts(k, n, p)
    return numerator / np.sqrt(b * r3 * r3 + a)


def camp_paulson_parts(k, n, p):
    """The parts of :func:`camp_paulson_score` at k in [0, n - 1]: numerator, b, r^(1/3), a.

    w = (r^(1/3) - 1 - b r^(1/3) + a) / sqrt(b r^(2/3) + a). The numerator (1 - b) r^(1/3) -
    (1 - a) rises with k (r and a rise, b falls, 1 - b > 0), as do r^(1/3) and a, while b
    falls; the denominator need not be monotone (w itself falls near k = n at small p). Bounds
    on w over a range of k follow from the parts at its ends (:mod:`atlas.engine`).
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    rest = n - kk
    with np.errstate(over="ignore"):
        u = offset(kk + 1.0, n + 1.0, p, q) / (p * rest)
    # ln r: log1p(u) where r is near 1; from the factors where r > 2 or r < 1/2 (u may overflow
    # for tiny p, or round to -1 for tiny q).
    far = (u > 1.0) | (u < -0.5)
    log_r = np.log1p(np.where(far, 0.0, u))
    if far.any():
        log_r = np.where(far, np.log(kk + 1.0) - np.log(rest) + np.log(q) - np.log(p), log_r)
    r3m1 = np.expm1(log_r / 3.0)
    r3 = 1.0 + r3m1
    a = 1.0 / (9.0 * rest)
    b = 1.0 / (9.0 * (kk + 1.0))
    return r3m1 - b * r3 + a, b, r3, a


_PP_TERMS = 24
_PP_NEAR = 0.25
_PP_COEFFICIENTS = {j: 2.0 / ((j + 1.0) * (j + 2.0)) for j in range(1, _PP_TERMS + 1)}
_PP_SCALAR = 16


def _pp_series(u):
    """The series of :func:`_pp_g` at one float u, by the same Horner steps (IEEE double in
    Python as in numpy, so the same value)."""
    series = 0.0
    for j in range(_PP_TERMS, 0, -1):
        series = (series + _PP_COEFFICIENTS[j]) * u
    return series


def _pp_g(t, inv_t=None, log_t=None):
    """Peizer-Pratt's g(t) = (1 - t^2 + 2 t ln t) / (1 - t)^2, with g(1) = 0.

    Three forms, each accurate to a few units in the last place of 1 + g:

    - |1 - t| <= 1/4: the series g = sum_{j >= 1} 2 u^j / ((j + 1)(j + 2)), u = 1 - t, to 24
      terms (truncation below 1e-17 relative), since the numerator cancels to third order;
    - t >= 2: g = h - 1 with h = 2 (ln t - 1 + 1/t) / (t (1 - 1/t)^2), written in 1/t and ln t
      so that huge t (tiny p) neither overflows nor loses 1 + g to rounding (see
      :func:`_pp_spread`);
    - otherwise the formula as written, whose numerator is at least 0.004 there (two digits
      lost at most: 1e-15 of g).

    ``inv_t`` and ``log_t``, when given, are 1/t and ln t computed without forming t.
    """
    t = np.asarray(t, dtype=np.float64)
    if inv_t is None:
        with np.errstate(divide="ignore"):
            inv_t = 1.0 / t
    if log_t is None:
        with np.errstate(divide="ignore"):
            log_t = np.log(t)
    u = 1.0 - t
    near = np.abs(u) <= _PP_NEAR
    far = ~near & (inv_t <= 0.5)
    mid = ~near & ~far
    out = np.empty(np.broadcast(t, inv_t, log_t).shape)
    if near.any():
        un = _spread(u, out.shape)[near]
        if un.size <= _PP_SCALAR:  # a few points: Python floats, without numpy's per-call cost
            series = np.array([_pp_series(v) for v in un.tolist()])
        else:
            series = np.zeros_like(un)
            for j in range(_PP_TERMS, 0, -1):  # (series + c_j) u, in place: the same values
                np.add(series, _PP_COEFFICIENTS[j], out=series)
                np.multiply(series, un, out=series)
        out[near] = series
    if far.any():
        out[far] = _pp_h(_spread(inv_t, out.shape)[far], _spread(log_t, out.shape)[far]) - 1.0
    if mid.any():
        tm = _spread(t, out.shape)[mid]
        lm = _spread(log_t, out.shape)[mid]
        out[mid] = (1.0 - tm * tm + 2.0 * tm * lm) / (1.0 - tm) ** 2
    return out


def _pp_h(inv_t, log_t):
    """h(t) = 1 + g(t) = 2 (1 - t + t ln t) / (1 - t)^2, from 1/t and ln t (t >= 2)."""
    return 2.0 * (log_t - 1.0 + inv_t) * inv_t / (1.0 - inv_t) ** 2


def _pp_gs(s, t, n, p, q):
    """g(t1) and g(t2) of t1 = S / (n p) and t2 = T / (n q), with (1/t, ln t) of each.

    ln t and 1/t are formed without forming t (p may be 1e-320).
    """
    with np.errstate(divide="ignore", over="ignore"):
        inv1 = n * p / s
        inv2 = n * q / t
        log1 = np.log(s) - np.log(n) - np.log(p)
        log2 = np.log(t) - np.log(n) - np.log(q)
        t1 = s / (n * p)
        t2 = t / (n * q)
    return _pp_g(t1, inv1, log1), _pp_g(t2, inv2, log2), (inv1, log1), (inv2, log2)


def _pp_spread(s, t, n, p, q):
    """(1 + q g(S / (n p)) + p g(T / (n q))) / ((n + 1/6) p q), without overflow or cancellation.

    When S / (n p) >= 2 (far above the mean, or tiny p), 1 + q g(S/(n p)) is nearly cancelled;
    with g = h - 1 it is h(S/(n p)) - p g(S/(n p)), and h / (n p) = 2 (ln t - 1 + 1/t) /
    (S (1 - 1/t)^2) needs no division by p. The same holds with S, p and T, q exchanged.
    """
    g1, g2, (inv1, log1), (inv2, log2) = _pp_gs(s, t, n, p, q)
    scale = n + 1.0 / 6.0
    out = (1.0 + q * g1 + p * g2) / (scale * p * q)
    # The far forms are computed on every point and kept where they apply; elsewhere they may
    # divide by zero (at t = 1), which is of no consequence.
    with np.errstate(divide="ignore", invalid="ignore"):
        big1 = inv1 <= 0.5
        if big1.any():
            h_over = 2.0 * (log1 - 1.0 + inv1) / (s * (1.0 - inv1) ** 2)  # h(t1) / (n p)
            out = np.where(big1, (n / scale) * h_over / q + (g2 - g1) / (scale * q), out)
        big2 = inv2 <= 0.5
        if big2.any():
            h_over = 2.0 * (log2 - 1.0 + inv2) / (t * (1.0 - inv2) ** 2)  # h(t2) / (n q)
            out = np.where(big2, (n / scale) * h_over / p + (g1 - g2) / (scale * p), out)
    return out


# Peizer & Pratt (1968), "A normal approximation for binomial, F, beta, and other common, related
# tail probabilities, I", JASA 63, 1416-1456: S = k + 1/2, T = n - k - 1/2,
# d = k + 2/3 - (n + 1/3) p + 0.02 [q/(k+1) - p/(n-k) + (q - 1/2)/(n+1)],
# z' = d sqrt( (1 + q g(S/(n p)) + p g(T/(n q))) / ((n + 1/6) p q) ), G(k) = Phi(z').
def peizer_pratt(k, n, p):
    """Peizer-Pratt normal approximation.

    Parameters
    ----------
    k, n, p : array_like
        As for :func:`normal_cc`.

    Returns
    -------
    numpy.ndarray
        G(k) = Phi(z') for 0 <= k < n; G(-1) = 0 and G(n) = 1.

    Notes
    -----
    g and the spread are evaluated by :func:`_pp_g` and :func:`_pp_spread`, accurate for every
    0 < p < 1 down to the smallest double.

    Examples
    --------
    >>> round(float(peizer_pratt(2, 50, 0.1)), 6)
    0.111534
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    return _at_ends(k, n, special.ndtr(peizer_pratt_score(k, n, p)))


def peizer_pratt_score(k, n, p):
    """The normal deviate z' of :func:`peizer_pratt`, G(k) = Phi(z'), at k clipped to [0, n - 1].

    Also used for the upper tail 1 - G(k) = Phi(-z') (:mod:`atlas.complements`).
    """
    s, t, n, p, q, d = _pp_terms(k, n, p)
    return d * np.sqrt(_pp_spread(s, t, n, p, q))


def _pp_terms(k, n, p):
    """S, T, n, p, q and d of :func:`peizer_pratt_score` at k clipped to [0, n - 1]."""
    k, n, p, q, mu, sigma = _moments(k, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    s = kk + 0.5
    t = n - kk - 0.5
    # k + 2/3 - (n + 1/3) p = (k - n p) + 2/3 - p/3, with k - n p taken exactly (see offset).
    centre = offset(kk, n, p, q) + (2.0 / 3.0 - p / 3.0)
    d = centre + 0.02 * (q / (kk + 1.0) - p / (n - kk) + (q - 0.5) / (n + 1.0))
    return s, t, n, p, q, d


def peizer_pratt_parts(k, n, p):
    """The parts of :func:`peizer_pratt_score` at k in [0, n - 1]: d, g(S/(n p)), g(T/(n q)).

    z' = d sqrt((1 + q g(S/(n p)) + p g(T/(n q))) / ((n + 1/6) p q)). d rises with k (its
    derivative is at least 1 - 0.04), S/(n p) rises and T/(n q) falls, and g falls: with
    g = N/D, N = 1 - t^2 + 2 t ln t, D = (1 - t)^2, g' = 2 (1 - t) h(t) / D^2 with
    h = 2 (1 - t) + (1 + t) ln t, h(1) = 0 and h' = ln t + 1/t - 1 >= 0, so (1 - t) h(t) < 0
    for t != 1. Bounds on z' over a range of k follow from the parts at its ends
    (:mod:`atlas.engine`, narrow windows).
    """
    s, t, n, p, q, d = _pp_terms(k, n, p)
    g1, g2, _, _ = _pp_gs(s, t, n, p, q)
    return d, g1, g2


_FUNCTIONS = {
    "normal_cc": normal_cc,
    "edgeworth_cc": edgeworth_cc,
    "edgeworth2_cc": edgeworth2_cc,
    "normal": normal,
    "poisson": poisson,
    "camp_paulson": camp_paulson,
    "peizer_pratt": peizer_pratt,
}


def check_method(method):
    """Return ``method`` if it names a method, else raise ValueError listing the valid ones."""
    if not isinstance(method, str) or method not in _FUNCTIONS:
        valid = ", ".join(repr(m) for m in METHODS)
        raise ValueError(f"`method` must be one of {valid}; got {method!r}.")
    return method


def approximate_cdf(k, n, p, method):
    """G(k) of the named method.

    Parameters
    ----------
    k : array_like of int
        Counts, -1 <= k <= n.
    n, p : array_like
        Trials n >= 1 and success probability 0 < p < 1, broadcast against ``k``.
    method : str
        One of :data:`METHODS`.

    Returns
    -------
    numpy.ndarray
        The approximation to P(X <= k).

    Raises
    ------
    ValueError
        If ``method`` is not one of :data:`METHODS`.

    Examples
    --------
    >>> approximate_cdf([-1, 10], 10, 0.5, "camp_paulson").tolist()
    [0.0, 1.0]
    """
    return _FUNCTIONS[check_method(method)](k, n, p)
