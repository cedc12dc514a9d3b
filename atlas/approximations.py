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


def _split(v):
    """Veltkamp's split v = hi + lo, with hi holding the leading 25 bits of v.

    Then n * hi is exact for integer n < 2^28, so n v = n hi + n lo carries only the tiny
    rounding of n lo (Dekker 1971, Numer. Math. 18, 224-242).
    """
    c = v * 268435457.0  # 2^28 + 1
    hi = c - (c - v)
    return hi, v - hi


def _offset(x, n, p, q):
    """x - n p, computed without the rounding of the product n p.

    A rounded n p is off by up to half an ulp of a number as large as n p, which moves z by that
    much over sigma (1e-12 of G at n = 10^8). Writing n p = n hi + n lo (see :func:`_split`)
    makes the difference exact to rounding of the result. For p > 1/2 the difference is taken as
    (x - n) + n q, since q = 1 - p is exact there (Sterbenz) and n q is the small number.
    Both cases are ((x - shift) - a) - b with shift, a, b computed once per (n, p).
    """
    if p.size == 1 and n.size == 1 and p.ndim <= x.ndim and n.ndim <= x.ndim:
        # One (n, p): the same arithmetic on Python floats, without numpy's per-call overhead.
        nf, pf = float(n.flat[0]), float(p.flat[0])
        if pf <= 0.5:
            hi, lo = _split(pf)
            return (x - nf * hi) - nf * lo
        hi, lo = _split(1.0 - pf)
        return ((x - nf) + nf * hi) + nf * lo
    upper = p > 0.5
    hi, lo = _split(np.where(upper, q, p))
    shift = np.where(upper, n, 0.0)
    sign = np.where(upper, -1.0, 1.0)
    return ((x - shift) - sign * n * hi) - sign * n * lo


def _phi(z):
    """Standard normal density."""
    return np.exp(-0.5 * z * z) / _SQRT_2PI


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
    return special.ndtr(_offset(k + 0.5, n, p, q) / sigma)


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
    z = _offset(k + 0.5, n, p, q) / sigma
    return special.ndtr(z) - (q - p) / (6.0 * sigma) * (z * z - 1.0) * _phi(z)


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
    z = _offset(k + 0.5, n, p, q) / sigma
    z2 = z * z
    g1 = (q - p) / sigma
    g2 = (1.0 - 6.0 * p * q) / (sigma * sigma)
    he2 = z2 - 1.0
    he3 = z * (z2 - 3.0)
    he5 = z * (z2 * (z2 - 10.0) + 15.0)
    density = _phi(z)
    return (
        special.ndtr(z)
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
    return special.ndtr(_offset(k, n, p, q) / sigma)


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
    k, n, p, q, mu, sigma = np.broadcast_arrays(*_moments(k, n, p))
    out = np.empty(k.shape)
    low = p <= 0.5
    # special.pdtr is scipy.stats.poisson.cdf without its argument checks; it gives NaN for
    # k < 0, where the CDF is 0.
    out[low] = np.where(k[low] < 0, 0.0, special.pdtr(np.maximum(k[low], 0.0), mu[low]))
    high = ~low
    # P(Y >= n - k) = sf(n - k - 1); the count of failures has mean n q.
    m = n[high] - k[high] - 1.0
    out[high] = np.where(m < 0, 1.0, special.pdtrc(np.maximum(m, 0.0), (n * q)[high]))
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

    Examples
    --------
    >>> round(float(camp_paulson(2, 50, 0.1)), 6)
    0.110925
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    r3 = np.cbrt((kk + 1.0) * q / (p * (n - kk)))
    a = 1.0 / (9.0 * (n - kk))
    b = 1.0 / (9.0 * (kk + 1.0))
    value = special.ndtr(((1.0 - b) * r3 - (1.0 - a)) / np.sqrt(b * r3 * r3 + a))
    return _at_ends(k, n, value)


def _pp_g(t):
    """Peizer-Pratt's g(t) = (1 - t^2 + 2 t ln t) / (1 - t)^2, with g(1) = 0.

    Near t = 1 the numerator cancels to third order, so there the series
    g = sum_{j >= 1} 2 u^j / ((j + 1)(j + 2)), u = 1 - t, is used (|u| < 0.01, six terms,
    truncation below 1e-15 relative).
    """
    u = 1.0 - t
    near = np.abs(u) < 1e-2
    safe_t = np.where(near, 0.5, t)
    direct = (1.0 - safe_t * safe_t + 2.0 * safe_t * np.log(safe_t)) / (1.0 - safe_t) ** 2
    series = np.zeros_like(u)
    for j in range(6, 0, -1):
        series = (series + 2.0 / ((j + 1.0) * (j + 2.0))) * u
    return np.where(near, series, direct)


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

    Examples
    --------
    >>> round(float(peizer_pratt(2, 50, 0.1)), 6)
    0.111534
    """
    k, n, p, q, mu, sigma = _moments(k, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    s = kk + 0.5
    t = n - kk - 0.5
    # k + 2/3 - (n + 1/3) p = (k - n p) + 2/3 - p/3, with k - n p taken exactly (see _offset).
    centre = _offset(kk, n, p, q) + (2.0 / 3.0 - p / 3.0)
    d = centre + 0.02 * (q / (kk + 1.0) - p / (n - kk) + (q - 0.5) / (n + 1.0))
    spread = (1.0 + q * _pp_g(s / mu) + p * _pp_g(t / (n * q))) / ((n + 1.0 / 6.0) * p * q)
    value = special.ndtr(d * np.sqrt(spread))
    return _at_ends(k, n, value)


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
