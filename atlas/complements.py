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

from atlas.approximations import (
    _moments,
    _phi,
    camp_paulson_score,
    check_method,
    offset,
    peizer_pratt_score,
    poisson_complement,
)

__all__ = ["approximate_upper"]


def _ends(k, n, value):
    """1 - G(k - 1) with the end values of the methods defined for 0 <= k - 1 < n only:
    G(-1) = 0 gives 1 at k = 0, G(n) = 1 gives 0 at k = n + 1."""
    return np.where(k - 1 < 0, 1.0, np.where(k - 1 >= n, 0.0, value))


def _normal_cc(j, n, p):
    k, n, p, q, mu, sigma = _moments(j, n, p)
    return special.ndtr(-offset(k + 0.5, n, p, q) / sigma)


def _normal(j, n, p):
    k, n, p, q, mu, sigma = _moments(j, n, p)
    return special.ndtr(-offset(k, n, p, q) / sigma)


def _edgeworth_cc(j, n, p):
    # G = Phi(z) - (q - p)/(6 sigma) (z^2 - 1) phi(z), so 1 - G = Phi(-z) + the same term.
    k, n, p, q, mu, sigma = _moments(j, n, p)
    z = offset(k + 0.5, n, p, q) / sigma
    return special.ndtr(-z) + (q - p) / (6.0 * sigma) * (z * z - 1.0) * _phi(z)


def _edgeworth2_cc(j, n, p):
    # The complement of atlas.approximations.edgeworth2_cc, term by term.
    k, n, p, q, mu, sigma = _moments(j, n, p)
    z = offset(k + 0.5, n, p, q) / sigma
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


def _camp_paulson(j, n, p):
    # 1 - Phi(w) = Phi(-w), w the score of atlas.approximations.camp_paulson.
    k = np.asarray(j, dtype=np.float64)
    return _ends(
        k + 1.0, np.asarray(n, dtype=np.float64), special.ndtr(-camp_paulson_score(j, n, p))
    )


def _peizer_pratt(j, n, p):
    # 1 - Phi(z') = Phi(-z'), z' the score of atlas.approximations.peizer_pratt.
    k = np.asarray(j, dtype=np.float64)
    return _ends(
        k + 1.0, np.asarray(n, dtype=np.float64), special.ndtr(-peizer_pratt_score(j, n, p))
    )


_COMPLEMENTS = {
    "normal_cc": _normal_cc,
    "edgeworth_cc": _edgeworth_cc,
    "edgeworth2_cc": _edgeworth2_cc,
    "normal": _normal,
    "poisson": poisson_complement,
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
