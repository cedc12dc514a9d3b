"""The lattice Edgeworth expansion of the binomial CDF and its remainder bound.

Reference values: ``tests/data/large_n_references.json``, made by
``build_scripts/make_large_n_references.py`` (mpmath quadrature of the Beta integral of F,
checked there against exact sums to 1.5e-27).
"""

import json
import pathlib

import numpy as np
import pytest
from mpmath import mp, mpf
from numpy.testing import assert_allclose

from atlas import asymptotic
from atlas.approximations import edgeworth2_cc, edgeworth_cc
from atlas.engine import _orders

DATA = pathlib.Path(__file__).parent / "data" / "large_n_references.json"
REFS = json.loads(DATA.read_text())


def _exact_z(n, p, k):
    """z = (k + 1/2 - n p) / sqrt(n p q) at 40 digits, and phi(z), Phi(z), sigma."""
    mp.dps = 40
    pm = mpf(p)
    mu = n * pm
    sigma = mp.sqrt(mu * (1 - pm))
    z = (k + mpf("0.5") - mu) / sigma
    return z, mp.npdf(z), mp.ncdf(z), sigma


def _expansion_error(row, order):
    """|F_ref - expansion to ``order``|, the series summed in float64 and the rest in mpmath."""
    n, p, k = row["n"], row["p"], row["k"]
    z, density, big_phi, sigma = _exact_z(n, p, k)
    series = asymptotic.series(np.array(float(z)), float(sigma), p, 1, order)
    approx = big_phi - density * mpf(float(series))
    return float(abs(mpf(row["cdf"]) - approx)), float(sigma)


@pytest.mark.parametrize("order", [1, 2, 3, 4, 5])
def test_remainder_bound_holds_at_every_order(order):
    # source: large_n_references.json "expansion_checks" (sigma = 30 .. 10^4, p = 0.5, 0.3,
    # 0.001, z = -4 .. 4). The float64 series itself is rounded by about 1e-16 of phi(z) times
    # its size; 2e-16 covers that.
    for row in REFS["expansion_checks"]:
        error, sigma = _expansion_error(row, order)
        bound = asymptotic.remainder_bound(sigma, row["p"], order)[0]
        assert error <= bound + 2e-16, f"{row} order {order}: {error:.3g} > {bound:.3g}"


def test_remainder_is_close_to_the_first_omitted_term():
    # source: large_n_references.json. Where the first omitted term is measurable (> 1e-14) the
    # remainder is within a factor 1.7 of it at every point checked (the module notes quote
    # 1.6), so SAFETY = 4 has room. Points where the omitted term nearly vanishes are skipped.
    ratios = []
    for row in REFS["expansion_checks"]:
        for order in (1, 2, 3, 4):
            n, p, k = row["n"], row["p"], row["k"]
            z, density, _, sigma = _exact_z(n, p, k)
            nxt = float(density) * float(
                asymptotic.series(np.array(float(z)), float(sigma), p, order + 1, order + 2)
            )
            if abs(nxt) < 1e-14:
                continue
            error, _ = _expansion_error(row, order)
            ratios.append(error / abs(nxt))
    assert len(ratios) > 50
    assert max(ratios) < 1.7


def test_lattice_term_has_the_sign_of_x_minus_u():
    # source: large_n_references.json at sigma = 30. F(k) is the expansion of X - U, U uniform
    # on (-1/2, 1/2) (kappa_2(U) = 1/12 subtracted); the expansion of X + U would differ by
    # z phi(z) / (12 sigma^2) and miss the references by far more than the bound.
    rows = [r for r in REFS["expansion_checks"] if abs(r["n"] * r["p"] * (1 - r["p"]) - 900) < 5]
    assert rows
    worst_plus = 0.0
    for row in rows:
        n, p, k = row["n"], row["p"], row["k"]
        z, density, big_phi, sigma = _exact_z(n, p, k)
        series = asymptotic.series(np.array(float(z)), float(sigma), p, 1, 4)
        minus = big_phi - density * mpf(float(series))
        plus = minus - z * density / (12 * sigma**2)
        bound = asymptotic.remainder_bound(float(sigma), p, 4)[0]
        assert abs(mpf(row["cdf"]) - minus) <= bound + 2e-16
        worst_plus = max(worst_plus, float(abs(mpf(row["cdf"]) - plus)))
    assert worst_plus > 1e-6


def test_first_two_orders_are_the_edgeworth_forms():
    # source: the module notes; edgeworth_cc = Phi - phi P_1 / sigma and edgeworth2_cc adds P_2
    # (with its lattice term). float64 agreement.
    n, p = 10_000, 0.3
    k = np.arange(2900, 3100)
    sigma = np.sqrt(n * p * (1 - p))
    z = (k + 0.5 - n * p) / sigma
    assert_allclose(asymptotic.cdf(z, sigma, p, 1), edgeworth_cc(k, n, p), rtol=0, atol=1e-15)
    assert_allclose(asymptotic.cdf(z, sigma, p, 2), edgeworth2_cc(k, n, p), rtol=0, atol=1e-15)


def test_odd_orders_vanish_at_one_half():
    # source: the odd cumulants of the Bernoulli law carry the factor q - p.
    gamma = asymptotic.coefficients(np.array([100.0]), np.array([0.5]), 3, 3)
    assert np.all(gamma == 0)


def test_remainder_bound_grid_misses_little():
    # source: remainder_bound takes the maximum on a grid of step 0.05 times 1.05; a grid of step
    # 0.001 finds at most 0.4 per cent more (p from 1e-6 to 1/2, orders 4 to 6).
    z = np.linspace(0, 12, 12001)[None, :]
    density = np.exp(-z * z / 2) / np.sqrt(2 * np.pi)
    for p in (0.5, 0.45, 0.3, 0.1, 0.001, 1e-6):
        for order in (4, 5, 6):
            fine = 0.0
            for e in (order + 1, order + 2):
                gamma = asymptotic.coefficients(np.array([100.0]), np.array([p]), e, e)
                fine = fine + np.abs(asymptotic.hermite_sum(z, gamma[:, None, :]))
            fine = np.max(density * fine)
            bound = asymptotic.remainder_bound(100.0, p, order)[0]
            assert fine * asymptotic.SAFETY <= bound


def test_asymptotic_f_against_large_n_references():
    # source: large_n_references.json "cdf_points", n = 10^4 .. 10^15. Wherever the engine uses
    # the expansion (sigma above about 113), it matches the references within its bound plus
    # the float64 rounding of F (2e-16); Boost's value stored beside them errs by up to 6.5e-10.
    checked = 0
    for row in REFS["cdf_points"]:
        n, p, k = row["n"], row["p"], row["k"]
        z, density, big_phi, sigma = _exact_z(n, p, k)
        if sigma < 113:
            continue
        order = int(_orders(np.array([float(sigma)]))[0])
        value = asymptotic.cdf(np.array(float(z)), float(sigma), p, order)
        bound = asymptotic.remainder_bound(float(sigma), p, order)[0]
        assert abs(float(mpf(row["cdf"]) - mpf(float(value)))) <= bound + 2.5e-16, row
        checked += 1
    assert checked > 100


def test_boost_error_measurement_recorded():
    # source: large_n_references.json; the figures quoted in the engine's module notes.
    worst = {}
    for row in REFS["cdf_points"]:
        worst[row["n"]] = max(worst.get(row["n"], 0.0), float(row["scipy_abs_err"]))
    assert worst[10**6] == pytest.approx(2.5e-14, rel=0.05)
    assert worst[10**12] == pytest.approx(2.6e-11, rel=0.05)
    assert worst[10**15] == pytest.approx(6.5e-10, rel=0.05)
