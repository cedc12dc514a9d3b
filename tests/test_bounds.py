"""Tests of atlas.bounds: the growth bound from n to n + 1, the tails, and the large-n bound.

Sources of the expected values, named beside each check:

- "brute force": the quantity the bound bounds, computed at every integer k (or n) it covers:
  R_n(k) = q G_n(k) + p G_n(k-1) - G_{n+1}(k) from :func:`atlas.approximations.approximate_cdf`,
  and errors from the engine.
- "closed form": a value the formula gives by hand (phi(0) = 1/sqrt(2 pi), He_2(0) = -1, ...).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

import atlas
from atlas import bounds
from atlas.approximations import approximate_cdf
from atlas.bounds import extension_bound, extension_cap, step_bound
from atlas.engine import worst_error

HERMITE_METHODS = ("normal", "normal_cc", "edgeworth_cc", "edgeworth2_cc")


def test_hermite_sup_closed_forms():
    phi0 = 1.0 / math.sqrt(2.0 * math.pi)
    # closed form: sup|phi| = phi(0); sup|z phi| = phi(1); sup|(z^2-1) phi| = phi(0) (at z = 0);
    # sup|He_4 phi| = 3 phi(0) (at z = 0). The table is raised by 1e-6 relative on purpose.
    for j, value in [(1, phi0), (2, phi0 * math.exp(-0.5)), (3, phi0), (5, 3 * phi0)]:
        assert_allclose(bounds.hermite_sup(j), value, rtol=2e-6)
        assert bounds.hermite_sup(j) >= value


@pytest.mark.parametrize("method", HERMITE_METHODS)
def test_hermite_form_is_the_method(method):
    # The representation the step bound is derived from is the method itself (to rounding).
    for n, p in [(10, 0.3), (1000, 0.01), (57, 0.8), (5000, 0.5)]:
        k = np.arange(-3, n + 3)
        form = bounds.hermite_form(k, n, p, method)
        assert_allclose(form, approximate_cdf(k, n, p, method), rtol=0, atol=1e-15)


@pytest.mark.parametrize("method", HERMITE_METHODS + ("poisson",))
def test_step_bound_holds(method):
    # rho_n >= max over k of |q G_n(k) + p G_n(k-1) - G_{n+1}(k)|, computed at every k (brute
    # force), at random n and p; and rho_n does not grow with n (the sum over a gap uses it).
    rng = np.random.default_rng(7)
    for _ in range(150):
        p = float(np.exp(rng.uniform(np.log(1e-4), np.log(0.9999))))
        n = int(np.exp(rng.uniform(0, np.log(20000))))
        k = np.arange(-1, n + 2)
        q = 1.0 - p
        g = approximate_cdf(k, n, p, method)
        g_before = approximate_cdf(k - 1, n, p, method)
        r = np.abs(q * g + p * g_before - approximate_cdf(k, n + 1, p, method)).max()
        rho = bounds.step_bound(method, [n, n + 1, 2 * n], p)
        assert r <= rho[0] * (1 + 1e-9) + 1e-15, (method, n, p, r, rho[0])
        assert rho[1] <= rho[0] and rho[2] <= rho[1]


@pytest.mark.parametrize("method", ["normal_cc", "camp_paulson", "peizer_pratt", "poisson"])
def test_numeric_step_is_the_maximum(method):
    # The direct step bound for small sigma is the maximum over every k (brute force, k = -1..n+1).
    p = 0.003
    ns = np.array([5, 50, 400, 2000])
    got = bounds.numeric_steps(method, ns, p)
    for n, value in zip(ns, got, strict=True):
        k = np.arange(-1, n + 2)
        r = (1 - p) * approximate_cdf(k, n, p, method) + p * approximate_cdf(k - 1, n, p, method)
        r = np.abs(r - approximate_cdf(k, n + 1, p, method)).max()
        assert r <= value <= r + 1e-12


@pytest.mark.parametrize("method", HERMITE_METHODS)
@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_tail_bound_holds(method, metric):
    # Berry-Esseen (Shevtsova 2011) plus the distance of G from the normal curve bounds the
    # error computed by the engine (brute force) at every n tried.
    for p in (0.001, 0.05, 0.3, 0.5, 0.97):
        ns = np.array([3, 30, 300, 3000, 30000, 300000])
        errors = worst_error(ns, p, method=method, metric=metric)
        bound = bounds.tail_bound(method, ns, p, metric)
        assert np.all(errors <= bound), (p, errors, bound)
        assert np.all(np.diff(bound) <= 0)


def test_extension_bound_covers_the_far_tails():
    # With D_n extended to 200 integers either side of [-1, n] (brute force): the oscillation
    # grows by at most 2 E (interval), and |D| outside [0, n] is at most E (cdf).
    for method in HERMITE_METHODS + ("poisson", "camp_paulson"):
        for n, p in [(5, 0.3), (40, 0.02), (300, 0.5), (1000, 0.001), (80, 0.9), (3, 0.01)]:
            k = np.arange(-200, n + 200)
            f = np.clip(atlas.engine._binom_cdf(k, n, p), 0, 1)
            d = np.where(k < 0, 0.0, np.where(k >= n, 1.0, f)) - approximate_cdf(k, n, p, method)
            inside = (k >= -1) & (k <= n)
            w = d[inside].max() - d[inside].min()
            e = bounds.extension_bound(method, [n], p, "interval")[0]
            assert d.max() - d.min() <= w + 2 * e + 1e-15, (method, n, p)
            outside = (k < 0) | (k > n)
            e_cdf = bounds.extension_bound(method, [n], p, "cdf")[0]
            assert np.abs(d[outside]).max() <= e_cdf + 1e-15, (method, n, p)


def test_step_bound_takes_an_array_of_p():
    p = np.array([0.001, 0.3, 0.7, 0.999])
    for method in ("normal_cc", "edgeworth2_cc", "poisson"):
        together = step_bound(method, [50, 500, 5000, 50000], p)
        ns = [50, 500, 5000, 50000]
        apart = [step_bound(method, [n], x)[0] for n, x in zip(ns, p, strict=True)]
        assert_allclose(together, apart, rtol=1e-15)


def test_extension_cap_bounds_the_extension():
    # The cap (notes of extension_cap) is never below extension_bound, computed at every integer
    # with |z| < 12; random cells, including small n p where the extension matters.
    rng = np.random.default_rng(12)
    n = np.exp(rng.uniform(0, np.log(1e6), size=120)).astype(np.int64) + 1
    p = 10 ** rng.uniform(-4, -0.01, size=120)
    for method in ("edgeworth_cc", "edgeworth2_cc"):
        for metric in ("interval", "cdf"):
            cap = extension_cap(method, n, p, metric)
            exact = np.array([extension_bound(method, [a], b, metric)[0]
                              for a, b in zip(n.tolist(), p.tolist(), strict=True)])  # fmt: skip
            # extension_bound counts a flat allowance (up to 1e-24 at sigma ~ 0.01) for |z| >= 12,
            # where the cap follows the tails themselves (far smaller there).
            assert (cap >= exact - 1e-20).all()
            assert (cap > 1e-6).any()  # and some cells where the extension matters
    assert extension_cap("normal_cc", [10], [0.3], "cdf") is None
