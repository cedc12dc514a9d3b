"""The binomial CDF at large sigma by its lattice Edgeworth expansion, with a remainder bound.

At n = 10^9 and beyond, the incomplete beta function of Boost (behind ``scipy.stats.binom``)
has absolute errors of 1e-12 to 1e-9, as large as the errors of the approximations themselves
(``tests/data/large_n_references.json``). Where sigma is large, F is computed here instead, from
an asymptotic expansion whose terms fall like sigma^-e and whose first omitted term bounds the
remainder; the difference D = F - G is then formed without cancellation for the normal family.

The expansion
-------------
For X ~ Bin(n, p) and integer k, let z = (k + 1/2 - mu) / sigma. The pmf equals, up to terms
of order exp(-2 pi^2 sigma^2), the Edgeworth density g of X at the integers (the Fourier
integral of the pmf over (-pi, pi) and that of g over the real line differ only where the
characteristic function is below exp(-2 sigma^2)). Summing g over j <= k is the midpoint rule,
so by the Euler-Maclaurin formula

    F(k) = sum_{j <= k} g(j) = [exp(-sum_m B_2m / (2m) / (2m)! D^2m)] G_X(k + 1/2),

with D the derivative and B the Bernoulli numbers: the operator subtracts the cumulants of
U ~ Uniform(-1/2, 1/2) (kappa_2 = 1/12, kappa_4 = -1/120, kappa_6 = 1/252) from those of X.
(Adding them, as for P(X + U <= k + 1/2), gives the wrong sign of the lattice term; the
references decide: ``tests/test_asymptotic.py``.) So F(k) is the Edgeworth CDF of a formal
variable Y with cumulants kappa_j(Y) = n kappa_j(Bernoulli) - kappa_j(U), j >= 2:

    F(k) = Phi(z) - phi(z) sum_{e >= 1} sigma^-e P_e(z),   P_e = sum_m c_{m,e} He_{m-1}(z),

where sum_{m,e} c_{m,e} s^m eps^e = exp( sum_{j >= 2} lambda_j s^j / j! ), with
lambda_j = a_j eps^(j-2) - [j even] B_j / j eps^j, a_j = kappa_j(Bernoulli) / (p q) (a_2 taken
out: it is the normal part), and eps = 1 / sigma. The Bernoulli cumulants follow from
kappa_{j+1} = p q d kappa_j / dp; with w = p q and d = q - p, a_3 = d, a_4 = 1 - 6 w,
a_5 = d (1 - 12 w), a_6 = 1 - 30 w + 120 w^2, ... (Kendall & Stuart 1977, The Advanced Theory
of Statistics, vol. 1, 5.13; Esseen 1945, Acta Math. 77, 1-125, for the lattice terms; Kolassa
2006, Series Approximation Methods in Statistics, 3rd ed., ch. 3). P_1 and P_2 are the terms of
``edgeworth_cc`` and ``edgeworth2_cc`` (their lattice term z phi / (24 sigma^2) is the kappa_2(U)
term), so for these methods D is the tail of the series from e = 2 or e = 3, computed directly.

The expansion is summed to some order R <= ORDER and the next two terms bound the remainder:
:func:`remainder_bound` returns SAFETY times the largest phi(z) (|T_{R+1}(z)| + |T_{R+2}(z)|)
over z, T_e = sigma^-e P_e. ``tests/test_asymptotic.py`` checks, against 25-digit mpmath
values of F at sigma = 30 .. 10^4, that the error of the expansion summed to every order from 1
to 5 is below that bound.
"""

from fractions import Fraction
from functools import cache

import numpy as np
from scipy import special

ORDER = 6
SAFETY = 4.0
_SQRT_2PI = np.sqrt(2.0 * np.pi)
# Cumulants of Uniform(-1/2, 1/2): B_j / j for even j.
_UNIFORM = {2: Fraction(1, 12), 4: Fraction(-1, 120), 6: Fraction(1, 252), 8: Fraction(-1, 240)}


def _poly_mul(a, b):
    out = [Fraction(0)] * (len(a) + len(b) - 1)
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def _poly_add(a, b):
    out = [Fraction(0)] * max(len(a), len(b))
    for i, x in enumerate(a):
        out[i] += x
    for i, x in enumerate(b):
        out[i] += x
    return out


def _bernoulli_a(j_max):
    """a_j = kappa_j / (p q) as polynomials in w = p q (odd j: the factor d = q - p left out)."""
    # kappa_j = w P(w) for even j, w d Q(w) for odd j; kappa_{j+1} = w d kappa_j / dp with
    # dw/dp = d, dd/dp = -2, d^2 = 1 - 4 w.
    out = {2: [Fraction(1)]}
    poly = [Fraction(1)]
    for j in range(2, j_max):
        deriv = [i * c for i, c in enumerate(poly)][1:] or [Fraction(0)]
        # P + w P' (even j) or Q + w Q' (odd j)
        both = _poly_add(poly, [Fraction(0), *deriv])
        if j % 2 == 0:
            poly = both
        else:
            poly = _poly_add(
                _poly_mul([Fraction(1), Fraction(-4)], both), [0, *(-2 * c for c in poly)]
            )
        out[j + 1] = poly
    return out


@cache
def _coefficients(order):
    """c_{m,e} for e = 1..order as {(m, e): polynomial in w}, the d factor implied by e odd."""
    a = _bernoulli_a(order + 2)
    # The exponent: terms (m, e, poly) with the Taylor 1/j! folded in.
    exponent = {}
    factorial = 1
    for j in range(2, order + 3):
        factorial *= j
        if j >= 3:
            exponent[(j, j - 2)] = [c / factorial for c in a[j]]
        if j in _UNIFORM and j <= order:
            key = (j, j)
            exponent[key] = _poly_add(exponent.get(key, []), [-_UNIFORM[j] / factorial])

    def times(x, y):
        out = {}
        for (m1, e1), p1 in x.items():
            for (m2, e2), p2 in y.items():
                if e1 + e2 > order:
                    continue
                prod = _poly_mul(p1, p2)
                if e1 % 2 and e2 % 2:  # d * d = 1 - 4 w
                    prod = _poly_mul(prod, [Fraction(1), Fraction(-4)])
                key = (m1 + m2, e1 + e2)
                out[key] = _poly_add(out.get(key, []), prod)
        return out

    total = dict(exponent)
    power = dict(exponent)
    for r in range(2, order + 1):
        power = {key: [c / r for c in poly] for key, poly in times(power, exponent).items()}
        for key, poly in power.items():
            total[key] = _poly_add(total.get(key, []), poly)
    table = {}
    for (m, e), poly in total.items():
        while len(poly) > 1 and poly[-1] == 0:
            poly = poly[:-1]
        if any(poly):
            table.setdefault(e, []).append((m, tuple(float(c) for c in poly)))
    return {e: sorted(table[e]) for e in sorted(table)}


@cache
def _tables(order):
    """For each order e <= ``order``: (m - 1 indices, coefficient matrix in powers of w)."""
    out = {}
    for e, terms in _coefficients(order).items():
        width = max(len(poly) for _, poly in terms)
        matrix = np.zeros((len(terms), width))
        for row, (_, poly) in enumerate(terms):
            matrix[row, : len(poly)] = poly
        out[e] = (np.array([m - 1 for m, _ in terms]), matrix)
    return out


def coefficients(sigma, p, first, last):
    """gamma_j = sum_{e=first}^{last} sigma^-e c_{j+1,e}(p): the series is sum_j gamma_j He_j(z).

    Parameters
    ----------
    sigma, p : numpy.ndarray
        Broadcast together; the result has their shape plus a last axis for j.
    first, last : int
        The orders summed, 1 <= first <= last.

    Returns
    -------
    numpy.ndarray
        gamma_j for j = 0 .. 3 last - 1.
    """
    sigma = np.asarray(sigma, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    sigma, p = np.broadcast_arrays(sigma, p)
    q = 1.0 - p
    w = p * q
    d = q - p
    eps = 1.0 / sigma
    orders, index, matrix = _stacked(first, last)
    gamma = np.zeros((*p.shape, 3 * last))
    # Horner in w, elementwise (a matrix product could round differently with the batch), for
    # every order at once: the rows of the shorter polynomials are padded with leading zeros,
    # and 0 w + 0 = 0 exactly until their first coefficient, so each row's value is the same
    # as from its own Horner.
    values = np.broadcast_to(matrix[:, -1], (*w.shape, matrix.shape[0]))
    for column in range(matrix.shape[1] - 2, -1, -1):
        values = values * w[..., None] + matrix[:, column]
    start = 0
    for e, count in orders:
        scale = eps**e * (d if e % 2 else 1.0)
        rows = slice(start, start + count)
        gamma[..., index[rows]] += values[..., rows] * scale[..., None]
        start += count
    return gamma


@cache
def _stacked(first, last):
    """The tables of orders first..last stacked: ((e, rows), ...), j indices, one matrix."""
    tables = _tables(last)
    present = [e for e in range(first, last + 1) if e in tables]
    width = max(tables[e][1].shape[1] for e in present)
    matrix = np.zeros((sum(len(tables[e][0]) for e in present), width))
    row = 0
    for e in present:
        m = tables[e][1]
        matrix[row : row + m.shape[0], : m.shape[1]] = m
        row += m.shape[0]
    index = np.concatenate([tables[e][0] for e in present])
    orders = tuple((e, len(tables[e][0])) for e in present)
    for array in (matrix, index):
        array.flags.writeable = False
    return orders, index, matrix


def hermite_sum(z, gamma):
    """sum_j gamma_j He_j(z) by Clenshaw's recurrence; gamma has a last axis for j.

    With He_{j+1} = z He_j - j He_{j-1}: b_j = gamma_j + z b_{j+1} - (j + 1) b_{j+2}, and the
    sum is b_0.
    """
    top = gamma.shape[-1]
    shape = np.broadcast(z, gamma[..., 0]).shape
    b1, b2, t = np.zeros(shape), np.zeros(shape), np.empty(shape)
    # In place, to spare an allocation per operation on the engine's small arrays: the same
    # operations in the same order as (gamma_j + z b1) - (j + 1) b2, so the same values.
    for j in range(top - 1, -1, -1):
        np.multiply(z, b1, out=t)
        np.add(gamma[..., j], t, out=t)
        np.multiply(b2, j + 1, out=b2)  # b_{j+2} is not needed again
        np.subtract(t, b2, out=b2)
        b1, b2 = b2, b1
    return b1


def series(z, sigma, p, first, last):
    """sum_{e=first}^{last} sigma^-e P_e(z), broadcasting z, sigma and p.

    Parameters
    ----------
    z : numpy.ndarray
        Continuity-corrected standard scores (k + 1/2 - mu) / sigma.
    sigma : float or numpy.ndarray
        sqrt(n p q).
    p : float or numpy.ndarray
        Success probability.
    first, last : int
        The orders summed, 1 <= first <= last.

    Returns
    -------
    numpy.ndarray
        The sum; F(k) = Phi(z) - phi(z) series(z, sigma, p, 1, R) to the remainder.
    """
    return hermite_sum(z, coefficients(sigma, p, first, last))


def cdf(z, sigma, p, order=ORDER):
    """F(k) from the expansion summed to ``order``, at z = (k + 1/2 - mu) / sigma."""
    density = np.exp(-0.5 * z * z) / _SQRT_2PI
    return special.ndtr(z) - density * series(z, sigma, p, 1, order)


# |P_e| is even in z (P_e(-z) = (-1)^(e-1) P_e(z), as m = e mod 2), so z >= 0 suffices.
_Z_GRID = np.linspace(0.0, 12.0, 241)


_PEAKS = {}


def _peak(p, e):
    """max over z of phi(z) |P_e(z)| for each p (cached by value: it depends on p alone)."""
    out = np.empty(p.size)
    todo = []
    for i, value in enumerate(p.tolist()):
        got = _PEAKS.get((value, e))
        if got is None:
            todo.append(i)
        else:
            out[i] = got
    if todo:
        rows = p[todo]
        gamma = coefficients(np.ones(rows.size), rows, e, e)[:, None, :]
        z = _Z_GRID[None, :]
        density = np.exp(-0.5 * z * z) / _SQRT_2PI
        peaks = np.max(density * np.abs(hermite_sum(z, gamma)), axis=1)
        out[todo] = peaks
        if len(_PEAKS) > 100_000:
            _PEAKS.clear()
        _PEAKS.update(((v, e), x) for v, x in zip(rows.tolist(), peaks.tolist(), strict=True))
    return out


def remainder_bound(sigma, p, order=ORDER):
    """A bound on |F(k) - cdf(z, sigma, p, order)| at every integer k.

    SAFETY times sum_{e = order+1, order+2} sigma^-e max_z phi(z) |P_e(z)|, the maximum taken
    over 0 <= z <= 12 on a grid of step 0.05 and multiplied by 1.05 for the grid's miss
    (checked against a grid of step 0.001 in ``tests/test_asymptotic.py``). Both omitted terms
    count because the odd ones vanish at p = 1/2 (and are small near it), where the remainder is
    the even term after. |P_e| is even in z (P_e(-z) = (-1)^(e-1) P_e(z), as m = e mod 2), so
    z >= 0 suffices; beyond z = 12, phi(z) < 6e-32.

    Parameters
    ----------
    sigma, p : array_like
        One-dimensional (or scalars), broadcast together.
    order : int, optional
        The last order summed.

    Returns
    -------
    numpy.ndarray
        The bound, one value per (sigma, p).
    """
    sigma, p = np.broadcast_arrays(
        np.atleast_1d(np.asarray(sigma, dtype=np.float64)),
        np.atleast_1d(np.asarray(p, dtype=np.float64)),
    )
    total = sum(sigma ** (-e) * _peak(p, e) for e in (order + 1, order + 2))
    return SAFETY * 1.05 * total
