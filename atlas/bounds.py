"""Bounds on the error of the approximations: its growth from n to n + 1, and for large n.

For X_n ~ Bin(n, p), F_{n+1}(k) = q F_n(k) + p F_n(k - 1) (one more trial), so with
D_n = F_n - G_n,

    D_{n+1}(k) = q D_n(k) + p D_n(k - 1) + R_n(k),  R_n(k) = q G_n(k) + p G_n(k - 1) - G_{n+1}(k),

and R_n involves G only. A mixture of two values of D_n lies between min D_n and max D_n, so
after m steps, for the interval metric,

    W(n + m) <= W(n) + 2 E_n + 2 (rho_n + ... + rho_{n+m-1}),    rho_j >= sup_k |R_j(k)|,

and for the CDF metric max|D_{n+m}| <= max(C(n), E_n) + rho_n + ... + rho_{n+m-1}. E_n
(:func:`extension_bound`) bounds what the integers outside [-1, n] that the recursion reaches
can add; the proof is in its notes.

rho_n (:func:`step_bound`). G_n(x) = Phi(z) + sum_j c_j(n) Phi^(j)(z), z = (x + s - n p) /
sigma_n, for the normal forms (``normal``: s = 0; ``normal_cc``: s = 1/2; the Edgeworth forms
add Hermite terms, as in :mod:`atlas.approximations`; :func:`hermite_form`). Let
B ~ Bernoulli(p) and Y ~ N(p, pq), which share their first two moments. Taylor's theorem with
the Lagrange remainder about k - p gives

    |E G_n(k - B) - E G_n(k - Y)| <= sup|G_n'''| / 6 (E|B - p|^3 + E|Y - p|^3)
                                   = sup|G_n'''| / 6 (pq (p^2 + q^2) + 2 sqrt(2/pi) (pq)^1.5),

and smoothing by Y is exact for these forms: E Phi^(j)(z_n(x - Y)) =
(sigma_n / sigma_{n+1})^j Phi^(j)(z_{n+1}(x)) (normal curves are closed under convolution),
which leaves only the mismatch of the coefficients, |c_j(n) r^j - c_j(n + 1)| sup|Phi^(j)| with
r = sigma_n / sigma_{n+1} = sqrt(n / (n + 1)). With c_j(n) = kappa_j sigma_n^-e_j this is
|kappa_j| sigma_{n+1}^-e_j (1 - r^(j - e_j)) sup|Phi^(j)|, j >= e_j. Both parts are
non-increasing in n, so rho_n bounds every later step too. For ``poisson``, R_n(k) is a
difference of the laws of Y_n + B and Y_n + Z, Z ~ Poisson(p), so
|R_n| <= d_TV(Bernoulli(p), Poisson(p)) = p (1 - e^-p) (q for p > 1/2, where the method counts
failures). Where sigma is small, :func:`numeric_steps` computes max_k |R_n(k)| directly at every
integer k; it is the only step bound for ``camp_paulson`` and ``peizer_pratt``. No closed-form
bound is derived for those two (their G is not of the Hermite form above): where sigma > 3 the
answers that rely on a step bound (:mod:`atlas.thresholds`, :mod:`atlas.regions`) check them
at the n evaluated only, and say so.

Large n (:func:`tail_bound`), non-increasing in n. For the normal forms, Berry-Esseen with
Shevtsova's constant, sup_x |F(x) - Phi((x - np)/sigma)| <= 0.4748 (p^2 + q^2) / sigma, plus
|Phi(z_s) - Phi(z_0)| <= s phi(0) / sigma and the Hermite terms sum_j |c_j| sup|Phi^(j)|; twice
that for the interval metric. For ``poisson``, d_TV(Bin(n, p), Poisson(np)) <= p (1 - e^-np)
<= p (Barbour and Hall 1984).

References
----------
Shevtsova, I. G. (2011). On the absolute constants in the Berry-Esseen type inequalities for
identically distributed summands. arXiv:1111.6554.
Barbour, A. D. and Hall, P. (1984). On the rate of Poisson convergence. Math. Proc. Cambridge
Philos. Soc. 95, 473-480.
"""

import math
from functools import cache

import numpy as np
from scipy import special

from atlas.approximations import approximate_cdf

__all__ = ["BERRY_ESSEEN", "NUMERIC_SIGMA", "extension_bound", "extension_cap", "hermite_form",
           "hermite_sup",
           "numeric_steps", "step_bound", "tail_bound"]  # fmt: skip

BERRY_ESSEEN = 0.4748  # Shevtsova (2011), identically distributed summands
NUMERIC_SIGMA = 3.0  # numeric_steps is used where sigma_n is at most this
_ABS_Z3 = 2.0 * math.sqrt(2.0 / math.pi)  # E|Z|^3 for a standard normal Z
_PHI0 = 1.0 / math.sqrt(2.0 * math.pi)


@cache
def _sup_table():
    """|Phi^(j)(z)| for j = 1..10 on a fine grid of |z| in [0, 40], and its tail maxima."""
    z = np.linspace(0.0, 40.0, 400001)
    phi = np.exp(-0.5 * z * z) * _PHI0
    rows = []
    for j in range(1, 11):
        # Phi^(j) = phi^(j-1) = (-1)^(j-1) He_{j-1}(z) phi(z)
        coef = np.zeros(j)
        coef[-1] = 1.0
        rows.append(np.abs(np.polynomial.hermite_e.hermeval(z, coef)) * phi)
    values = np.array(rows)
    # The tail maximum over |z| >= z_i, as a non-increasing function of z_i.
    tails = np.maximum.accumulate(values[:, ::-1], axis=1)[:, ::-1]
    return z, values, tails


@cache
def hermite_sup(j):
    """sup over real z of |Phi^(j)(z)| = |He_{j-1}(z)| phi(z), for j = 1..10.

    Computed on a grid of step 1e-4 and raised by 1e-6 relative, more than the grid can miss
    (the grid misses at most step^2 / 8 sup|Phi^(j+2)|, below 1e-7 of the value).

    Examples
    --------
    >>> round(hermite_sup(1), 5), round(hermite_sup(3), 5)  # phi(0), |He_2(0)| phi(0)
    (0.39894, 0.39894)
    """
    return float(_sup_table()[1][j - 1].max()) * (1 + 1e-6)


def _tail_sup(j, z0):
    """sup over |z| >= z0 of |Phi^(j)(z)|, for arrays z0 >= 0 (an upper bound)."""
    grid, _, tails = _sup_table()
    i = np.clip(np.searchsorted(grid, z0, side="right") - 1, 0, grid.size - 1)
    return tails[j - 1][i] * (1 + 1e-6)


def _hermite_terms(method, p):
    """(s, terms) with G_n(x) = Phi(z) + sum kappa sigma^-e Phi^(j)(z), z = (x + s - np)/sigma.

    ``terms`` holds (j, e, kappa); None for the methods that are not of this form.
    """
    q = 1.0 - p
    if method == "normal":
        return 0.0, ()
    if method == "normal_cc":
        return 0.5, ()
    # He2 phi = Phi^(3), He3 phi = -Phi^(4), He5 phi = -Phi^(6), z phi = -Phi^(2).
    skew = (3, 1, -(q - p) / 6.0)
    if method == "edgeworth_cc":
        return 0.5, (skew,)
    if method == "edgeworth2_cc":
        return 0.5, (skew, (4, 2, (1 - 6 * p * q) / 24.0), (6, 2, (q - p) ** 2 / 72.0),
                     (2, 2, -1.0 / 24.0))  # fmt: skip
    return None


def hermite_form(x, n, p, method):
    """G_n(x) of a normal form from its Hermite representation (for the tests), or None."""
    form = _hermite_terms(method, p)
    if form is None:
        return None
    s, terms = form
    sigma = math.sqrt(n * p * (1 - p))
    z = (np.asarray(x, dtype=np.float64) + s - n * p) / sigma
    out = special.ndtr(z)
    phi = np.exp(-0.5 * z * z) * _PHI0
    for j, e, kappa in terms:
        coef = np.zeros(j)
        coef[-1] = 1.0
        out = out + kappa * sigma**-e * (-1.0) ** (j - 1) * np.polynomial.hermite_e.hermeval(
            z, coef) * phi  # fmt: skip
    return out


def step_bound(method, n, p):
    """An upper bound rho_n on sup_k |R_n(k)|, non-increasing in n; None if none is known.

    Parameters
    ----------
    method : str
    n : array_like of int
        n >= 1.
    p : float or array_like of float
        0 < p < 1; an array is broadcast against ``n`` (one bound per cell).

    Returns
    -------
    numpy.ndarray or None
        rho_n for each n (see the module notes): the Taylor part and the coefficient mismatch
        for the normal forms, p (1 - e^-p) for ``poisson``.

    Examples
    --------
    >>> round(float(step_bound("poisson", [10], 0.1)[0]), 9)  # 0.1 (1 - e^-0.1)
    0.009516258
    """
    n = np.asarray(n, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)  # a float, or an array broadcast against n
    shape = np.broadcast_shapes(n.shape, p.shape)
    q = 1.0 - p
    if method == "poisson":
        r = np.minimum(p, q)
        return np.broadcast_to(r * -np.expm1(-r), shape).astype(np.float64)
    form = _hermite_terms(method, p)
    if form is None:
        return None
    _, terms = form
    sigma = np.sqrt(n * p * q)
    sigma_next = np.sqrt((n + 1) * p * q)
    third = hermite_sup(3) / sigma**3  # sup |G'''| from Phi(z): sup|Phi^(3)| / sigma^3
    mismatch = np.zeros(shape)
    log_r = 0.5 * np.log1p(-1.0 / (n + 1))  # r = sigma_n / sigma_{n+1} = sqrt(n / (n + 1))
    for j, e, kappa in terms:
        third = third + abs(kappa) * hermite_sup(j + 3) / sigma ** (e + 3)
        # |c_j(n) r^j - c_j(n+1)| sup|Phi^(j)| = |kappa| sigma_{n+1}^-e (1 - r^(j-e)) sup|Phi^(j)|
        shrink = -np.expm1((j - e) * log_r) * (1 + 1e-12)
        mismatch = mismatch + abs(kappa) * hermite_sup(j) * shrink / sigma_next**e
    moments = p * q * (p * p + q * q) + _ABS_Z3 * (p * q) ** 1.5
    return third / 6.0 * moments + mismatch


def tail_bound(method, n, p, metric):
    """An upper bound on the error at n, non-increasing in n; None if none is known.

    Parameters
    ----------
    method : str
    n : array_like of int
    p : float
    metric : {"interval", "cdf"}

    Returns
    -------
    numpy.ndarray or None
        Berry-Esseen (Shevtsova 2011) plus the distance of G from Phi((x - np)/sigma) for the
        normal forms, twice for the interval metric; min(p, q) for ``poisson`` (Barbour and
        Hall 1984).

    Examples
    --------
    >>> b = tail_bound("normal_cc", [10**6], 0.5, "cdf")[0]  # (0.4748 / 2 + phi(0) / 2) / 500
    >>> round(float(b), 7)
    0.0008737
    """
    n = np.asarray(n, dtype=np.float64)
    q = 1.0 - p
    if method == "poisson":
        return np.full(n.shape, min(p, q))
    form = _hermite_terms(method, p)
    if form is None:
        return None
    s, terms = form
    sigma = np.sqrt(n * p * q)
    out = (BERRY_ESSEEN * (p * p + q * q) + s * _PHI0) / sigma
    for j, e, kappa in terms:
        out = out + abs(kappa) * hermite_sup(j) / sigma**e
    return 2.0 * out if metric == "interval" else out


_FAR_Z = 12.0  # beyond |z| = 12 the tails of the normal forms are below 1e-30


def extension_bound(method, n, p, metric):
    """E_n: what the integers outside [-1, n] that the recursion reaches can add to the error.

    Returns E (one per n) with osc over all k of D_n <= W(n) + 2 E (interval) and
    max over k outside [0, n] of |D_n(k)| <= E (cdf).

    Notes
    -----
    Outside [-1, n], D_n(k) = -G_n(k) (k < -1) or 1 - G_n(k) (k > n). The maximum of D_n over
    [-1, n] is at least max(D(-1), D(n)) and the minimum at most min(D(-1), D(n)), so the
    extended values raise the oscillation by at most
    max(0, max_ext - max(D(-1), D(n))) + max(0, min(D(-1), D(n)) - min_ext).

    For the CDF-valued methods (Poisson, Camp-Paulson, Peizer-Pratt: monotone in k, between 0
    and 1) the extended values lie between D(-1) = -G(-1) <= 0 and D(n) = 1 - G(n) >= 0, so E = 0
    for the interval error, and E = max(G(-1), 1 - G(n)) for the CDF metric. So do those of
    ``normal`` and ``normal_cc``: G = Phi(z) with z increasing in k, also monotone and between 0
    and 1.

    For the normal forms G = Phi(z) + sum_j c_j Phi^(j)(z), the extended values are computed at
    every integer with |z| < 12; beyond, |G| (below) and |1 - G| (above) are at most
    Phi(-12) + sum |c_j| sup_{|t| >= 12} |Phi^(j)(t)|, which widens the range of the values by
    that much.
    """
    n = np.atleast_1d(np.asarray(n, dtype=np.int64))
    form = _hermite_terms(method, p)
    if form is None or method in ("normal", "normal_cc"):  # monotone G in [0, 1]: the notes
        if metric == "interval":
            return np.zeros(n.shape)
        k = np.stack([np.full(n.shape, -1), n])
        g = approximate_cdf(k, n, p, method)
        return np.maximum(np.abs(g[0]), np.abs(1.0 - g[1]))
    s_shift, terms = form
    nf = n.astype(np.float64)
    sig = np.sqrt(nf * p * (1 - p))
    far_all = special.ndtr(-_FAR_Z) + sum(
        abs(kappa) * sig**-e * float(_tail_sup(j, _FAR_Z)) for j, e, kappa in terms
    )
    # Where z(-1) <= -12 and z(n) >= 12, every extended value and D(-1), D(n) are within
    # `far` of 0: the maximum rises and the minimum falls by at most 3 far each.
    remote = ((-1.0 + s_shift - nf * p) / sig <= -_FAR_Z) & (
        (nf + s_shift - nf * p) / sig >= _FAR_Z
    )
    out = np.where(remote, (3.0 if metric == "interval" else 2.0) * far_all, np.nan)
    for i in np.flatnonzero(~remote).tolist():
        m = int(n[i])
        sigma = math.sqrt(m * p * (1 - p))
        far = special.ndtr(-_FAR_Z) + sum(
            abs(kappa) * sigma**-e * float(_tail_sup(j, _FAR_Z)) for j, e, kappa in terms
        )
        reach = int(math.ceil(_FAR_Z * sigma)) + 2
        mu = m * p
        low = np.arange(min(-2, int(math.floor(mu - reach))), -1)  # k <= -2 with |z| < 12
        low = low[low >= mu - reach]
        high = np.arange(m + 1, max(m + 2, int(math.ceil(mu + reach)) + 1))
        high = high[high <= mu + reach]
        ends = approximate_cdf(np.array([-1, m]), m, p, method)
        d_first, d_last = -ends[0], 1.0 - ends[1]
        ext = np.concatenate([-approximate_cdf(low, m, p, method),
                              1.0 - approximate_cdf(high, m, p, method), [far, -far]])  # fmt: skip
        if metric == "interval":
            up = max(0.0, float(ext.max()) + far - max(d_first, d_last))
            down = max(0.0, min(d_first, d_last) - float(ext.min()) + far)
            out[i] = 0.5 * (up + down)
        else:
            out[i] = max(float(np.abs(ext).max()) + far, abs(d_first))
    return out


def numeric_steps(method, ns, p):
    """max over k of |R_j(k)| for each j in ``ns`` (small sigma), computed at every integer k.

    R_j(k) = q G_j(k) + p G_j(k - 1) - G_{j+1}(k) on k = -1..j+1; integers more than
    40 sigma + 5 from the mean are covered by the tail values of G at the window's edges.
    """
    ns = np.asarray(ns, dtype=np.int64)
    q = 1.0 - p
    sigma = math.sqrt((int(ns.max()) + 1) * p * q)
    half = int(math.ceil(40.0 * sigma + 5.0))
    mu = (ns + 1) * p
    lo = np.maximum(-1, np.floor(mu).astype(np.int64) - half)
    hi = np.minimum(ns + 1, np.floor(mu).astype(np.int64) + half)
    width = int((hi - lo).max()) + 1
    k = lo[:, None] + np.arange(width)[None, :]
    valid = k <= hi[:, None]
    k = np.minimum(k, hi[:, None])
    n_col = ns[:, None]
    g0 = approximate_cdf(k, n_col, p, method)
    g1 = approximate_cdf(k - 1, n_col, p, method)
    g_next = approximate_cdf(k, n_col + 1, p, method)
    r = np.where(valid, np.abs(q * g0 + p * g1 - g_next), 0.0)
    # Outside the window: every |R| <= |G| terms at the edges (monotone far tails).
    below = np.stack([lo - 2, lo - 1])
    above = np.stack([hi + 1, hi + 1])
    tails = np.zeros(ns.size)
    for m in (ns, ns + 1):
        g_below = np.abs(approximate_cdf(below, m, p, method)).max(axis=0)
        g_above = np.abs(1.0 - approximate_cdf(above, m, p, method)).max(axis=0)
        tails += np.where(lo > -1, g_below, 0.0) + np.where(hi < ns + 1, g_above, 0.0)
    return r.max(axis=1) + 2.0 * tails + 1e-15


def extension_cap(method, n, p, metric):
    """A cheap upper bound on :func:`extension_bound` at cells (n, p) given as arrays.

    Returns None for the methods whose extension bound is already cheap (the monotone ones).

    Notes
    -----
    For the Edgeworth forms, with z_lo = z(-1) < 0 and z_hi = z(n) > 0, every k <= -1 has
    |z(k)| >= |z_lo| and every k >= n has z(k) >= z_hi, so
    |G(k)| <= b_lo = Phi(z_lo) + sum |c_j| sup_{|t| >= |z_lo|} |Phi^(j)(t)| below and
    |1 - G(k)| <= b_hi = Phi(-z_hi) + sum |c_j| sup_{|t| >= z_hi} |Phi^(j)(t)| above. With
    b = max(b_lo, b_hi), every extended value, D(-1) and D(n) lie in [-b, b], so the
    oscillation rises by at most 4 b (E = 2 b, interval) and |D| outside [0, n] is at most b
    (E = b, cdf).
    """
    if method not in ("edgeworth_cc", "edgeworth2_cc"):
        return None
    n = np.asarray(n, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    s, terms = _hermite_terms(method, p)
    sigma = np.sqrt(n * p * (1.0 - p))
    z_lo = (-1.0 + s - n * p) / sigma
    z_hi = (n + s - n * p) / sigma
    b_lo = special.ndtr(z_lo)
    b_hi = special.ndtr(-z_hi)
    for j, e, kappa in terms:
        scale = np.abs(kappa) * sigma**-e
        b_lo = b_lo + scale * _tail_sup(j, np.abs(z_lo))
        b_hi = b_hi + scale * _tail_sup(j, np.maximum(z_hi, 0.0))
    b = np.maximum(b_lo, b_hi)
    return 2.0 * b if metric == "interval" else b
