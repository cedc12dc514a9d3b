"""Upper tails of the approximations, 1 - G(k - 1), formed without cancellation.

The upper tail P(X >= k) is approximated by 1 - G(k - 1). Subtracting from one loses every
significant digit of a small upper tail (1 - G carries an absolute error of about 1e-16, so a
tail of 1e-12 keeps four digits). This module writes the complement of each method's formula
directly, term by term, so that the upper tail has the same relative accuracy as the lower tail
G(k) itself:

- ``normal_cc``, ``normal``, ``camp_paulson``, ``peizer_pratt``: G = Phi(w(k)), so
  1 - G = Phi(-w(k)) (``scipy.special.ndtr`` of the negated score; Phi(-w) is accurate in
  relative terms for every w).
- ``edgeworth_cc``, ``edgeworth2_cc``: G = Phi(z) - h(z) with h a Hermite polynomial times
  phi(z), so 1 - G = Phi(-z) + h(z). Where the two terms cancel (the far tail, where the
  expansion itself fails), the result carries the absolute error of h, about 1e-16 (|Phi(-z)|
  + |h(z)|): the relative error is that over |1 - G|.
- ``poisson``: 1 - P(Y <= j) = P(Y > j) by ``scipy.special.pdtrc`` (the regularized incomplete
  gamma function, accurate in relative terms) and, for p > 1/2, its mirror.

This is a small hook beside :mod:`atlas.approximations`: it reuses that module's helpers (the
exact offset k - n p and the moments) and restates each method's standard score. The tests pin
every function to ``1 - approximate_cdf(k - 1)`` where that is accurate, and to the mirror
identity 1 - G(k - 1; n, p) = G(n - k; n, 1 - p), which holds for every method (for the Poisson
method at p != 1/2) and is exact in floating point when p > 1/2 (1 - p is then exact).
"""

import numpy as np
from scipy import special

from atlas.approximations import _moments, _offset, _phi, _pp_g, check_method

__all__ = ["approximate_upper"]


def _ends(k, n, value):
    """1 - G(k - 1) with the end values of the methods defined for 0 <= k - 1 < n only:
    G(-1) = 0 gives 1 at k = 0, G(n) = 1 gives 0 at k = n + 1."""
    return np.where(k - 1 < 0, 1.0, np.where(k - 1 >= n, 0.0, value))


def _normal_cc(j, n, p):
    k, n, p, q, mu, sigma = _moments(j, n, p)
    return special.ndtr(-_offset(k + 0.5, n, p, q) / sigma)


def _normal(j, n, p):
    k, n, p, q, mu, sigma = _moments(j, n, p)
    return special.ndtr(-_offset(k, n, p, q) / sigma)


def _edgeworth_cc(j, n, p):
    # G = Phi(z) - (q - p)/(6 sigma) (z^2 - 1) phi(z), so 1 - G = Phi(-z) + the same term.
    k, n, p, q, mu, sigma = _moments(j, n, p)
    z = _offset(k + 0.5, n, p, q) / sigma
    return special.ndtr(-z) + (q - p) / (6.0 * sigma) * (z * z - 1.0) * _phi(z)


def _edgeworth2_cc(j, n, p):
    # The complement of atlas.approximations.edgeworth2_cc, term by term.
    k, n, p, q, mu, sigma = _moments(j, n, p)
    z = _offset(k + 0.5, n, p, q) / sigma
    z2 = z * z
    g1 = (q - p) / sigma
    g2 = (1.0 - 6.0 * p * q) / (sigma * sigma)
    he2 = z2 - 1.0
    he3 = z * (z2 - 3.0)
    he5 = z * (z2 * (z2 - 10.0) + 15.0)
    density = _phi(z)
    return (
        special.ndtr(-z)
        + density * (g1 / 6.0 * he2 + g2 / 24.0 * he3 + g1 * g1 / 72.0 * he5)
        - z * density / (24.0 * sigma * sigma)
    )


def _poisson(j, n, p):
    k, n, p, q, mu, sigma = np.broadcast_arrays(*_moments(j, n, p))
    out = np.empty(k.shape)
    low = p <= 0.5
    # G(j) = P(Y <= j), Y ~ Poisson(n p): 1 - G(j) = P(Y > j) = pdtrc(j, mu); G(-1) = 0.
    jl = k[low]
    out[low] = np.where(jl < 0, 1.0, special.pdtrc(np.maximum(jl, 0.0), mu[low]))
    high = ~low
    # G(j) = P(Y >= n - j), Y ~ Poisson(n q): 1 - G(j) = P(Y <= n - j - 1); 0 when n - j <= 0.
    m = n[high] - k[high] - 1.0
    out[high] = np.where(m < 0, 0.0, special.pdtr(np.maximum(m, 0.0), (n * q)[high]))
    return out


def _camp_paulson(j, n, p):
    # The score of atlas.approximations.camp_paulson; 1 - Phi(w) = Phi(-w).
    k, n, p, q, mu, sigma = _moments(j, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    r3 = np.cbrt((kk + 1.0) * q / (p * (n - kk)))
    a = 1.0 / (9.0 * (n - kk))
    b = 1.0 / (9.0 * (kk + 1.0))
    value = special.ndtr(-((1.0 - b) * r3 - (1.0 - a)) / np.sqrt(b * r3 * r3 + a))
    return _ends(k + 1.0, n, value)


def _peizer_pratt(j, n, p):
    # The score z' of atlas.approximations.peizer_pratt; 1 - Phi(z') = Phi(-z').
    k, n, p, q, mu, sigma = _moments(j, n, p)
    kk = np.clip(k, 0.0, n - 1.0)
    s = kk + 0.5
    t = n - kk - 0.5
    centre = _offset(kk, n, p, q) + (2.0 / 3.0 - p / 3.0)
    d = centre + 0.02 * (q / (kk + 1.0) - p / (n - kk) + (q - 0.5) / (n + 1.0))
    spread = (1.0 + q * _pp_g(s / mu) + p * _pp_g(t / (n * q))) / ((n + 1.0 / 6.0) * p * q)
    value = special.ndtr(-d * np.sqrt(spread))
    return _ends(k + 1.0, n, value)


_COMPLEMENTS = {
    "normal_cc": _normal_cc,
    "edgeworth_cc": _edgeworth_cc,
    "edgeworth2_cc": _edgeworth2_cc,
    "normal": _normal,
    "poisson": _poisson,
    "camp_paulson": _camp_paulson,
    "peizer_pratt": _peizer_pratt,
}


def approximate_upper(k, n, p, method):
    """The approximation 1 - G(k - 1) to the upper tail P(X >= k), without cancellation.

    Parameters
    ----------
    k : array_like of int
        Counts, 0 <= k <= n + 1.
    n, p : array_like
        Trials n >= 1 and success probability 0 < p < 1, broadcast against ``k``.
    method : str
        One of :data:`atlas.METHODS`.

    Returns
    -------
    numpy.ndarray
        1 - G(k - 1), equal to it up to rounding, with the relative accuracy of G's own
        formula in the upper tail (see the module notes).

    Raises
    ------
    ValueError
        If ``method`` is not one of :data:`atlas.METHODS`.

    Examples
    --------
    >>> float(approximate_upper(60, 100, 0.5, "normal_cc"))  # Phi(-1.9) = 0.0287...
    0.028716559816001803
    """
    j = np.asarray(k, dtype=np.float64) - 1.0
    return _COMPLEMENTS[check_method(method)](j, n, p)
