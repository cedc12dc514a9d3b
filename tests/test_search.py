"""The engine's window and nested search against evaluation at every integer.

The engine evaluates D = F - G on a window around the mean, and on wide windows it searches
instead of evaluating every integer (see the notes of atlas/engine.py). These tests check both
shortcuts against the plain evaluation; the expected values are computed here, not literals.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy import stats

from atlas import METHODS, engine
from atlas.approximations import approximate_cdf

P_VALUES = np.array([1e-4, 0.003, 0.02, 0.1, 0.25, 0.5, 0.61, 0.9, 0.99, 0.9999])


def full_range(n, p, method):
    """Interval and CDF errors from D at every k = -1..n (scipy.stats.binom for F)."""
    k = np.arange(-1, n + 1)
    d = stats.binom.cdf(k, n, p) - approximate_cdf(k, n, p, method)
    return d.max() - d.min(), np.abs(d[1:]).max()


@pytest.mark.parametrize("n", [1, 2, 7, 40, 333, 2500])
def test_window_loses_nothing(n):
    # The window leaves out only k where |D| < TAIL_TOL = 1e-17, so it must agree with the
    # evaluation over all k = -1..n to rounding (1e-14 covers summing ~3000 pmf terms).
    ev = engine.evaluate(n, P_VALUES)
    for i, method in enumerate(METHODS):
        for j, p in enumerate(P_VALUES):
            interval, cdf = full_range(n, p, method)
            assert_allclose(ev.interval[i, j], interval, rtol=1e-11, atol=1e-14)
            assert_allclose(ev.cdf[i, j], cdf, rtol=1e-11, atol=1e-14)


@pytest.mark.parametrize("n", [30_000, 250_000, 2_000_000])
def test_nested_search_finds_the_extremes(n):
    # Wide windows are searched; full=True evaluates every integer of the same window.
    p = np.array([0.002, 0.05, 0.3, 0.5, 0.77, 0.95])
    fast = engine.evaluate(n, p)
    slow = engine.evaluate(n, p, full=True)
    # F comes from one incomplete beta plus a pmf sum in both, summed from different points:
    # they differ by rounding only (measured below 1e-13).
    assert_allclose(fast.interval, slow.interval, rtol=1e-10, atol=2e-13)
    assert_allclose(fast.cdf, slow.cdf, rtol=1e-10, atol=2e-13)


def test_nested_search_is_used_at_large_sigma():
    # The search path must really run in the test above: its window exceeds FULL_LIMIT.
    lo, hi, _ = engine._windows(250_000, np.array([0.3]), METHODS)
    assert (hi - lo + 1)[0] > engine.FULL_LIMIT


def test_result_of_a_p_does_not_depend_on_its_neighbours():
    # Builds split the p axis in chunks; each cell must come out bit for bit the same.
    p = np.array([0.001, 0.02, 0.3, 0.5, 0.9])
    for n in (3, 900, 40_000, 5_000_000):
        together = engine.evaluate(n, p)
        for j in range(p.size):
            alone = engine.evaluate(n, p[j : j + 1])
            assert_array_equal(together.interval[:, j], alone.interval[:, 0])
            assert_array_equal(together.cdf[:, j], alone.cdf[:, 0])
            assert_array_equal(together.lo[:, j], alone.lo[:, 0])
            assert_array_equal(together.hi[:, j], alone.hi[:, 0])


def test_window_tail_bound_holds():
    # Outside the window F and G are both within TAIL_TOL of 0 (below) or 1 (above).
    for n in (50, 5000, 10**6):
        lo, hi, _ = engine._windows(n, P_VALUES, METHODS)
        for j, p in enumerate(P_VALUES):
            if lo[j] > 0:
                assert stats.binom.cdf(lo[j] - 1, n, p) <= engine.TAIL_TOL
                for method in METHODS:
                    assert abs(approximate_cdf(lo[j] - 1, n, p, method)) <= engine.TAIL_TOL
            if hi[j] < n - 1:
                assert stats.binom.sf(hi[j], n, p) <= engine.TAIL_TOL
                for method in METHODS:
                    assert abs(1 - approximate_cdf(hi[j], n, p, method)) <= engine.TAIL_TOL


def test_private_binomial_ufuncs_match_scipy_stats():
    # The engine calls the ufuncs behind scipy.stats.binom directly, for speed.
    k = np.array([0, 3, 17, 299_000, 300_000, 301_234])
    n, p = 10**6, 0.3
    assert_array_equal(engine._binom_cdf(k, n, p), stats.binom.cdf(k, n, p))
    assert_array_equal(engine._binom_sf(k, n, p), stats.binom.sf(k, n, p))
    assert_array_equal(engine._binom_pmf(k, n, p), stats.binom.pmf(k, n, p))


def test_evaluate_cells_keeps_the_order_of_mixed_and_repeated_cells():
    # Cells in any order, with repeats, must come back in their own order, each equal to the
    # engine's value for that (n, p) alone.
    n = np.array([50, 7, 50, 3000, 7, 50], dtype=np.int64)
    p = np.array([0.1, 0.9, 0.1, 0.02, 0.5, 0.7])
    interval, cdf, lo, hi = engine.evaluate_cells(n, p, "edgeworth_cc")
    for c in range(n.size):
        alone = engine.evaluate(int(n[c]), [p[c]], methods=("edgeworth_cc",))
        assert interval[c] == alone.interval[0, 0] and cdf[c] == alone.cdf[0, 0]
        assert (lo[c], hi[c]) == (alone.lo[0, 0], alone.hi[0, 0])


def _every_integer_of_the_series(n, p, method, lo, hi):
    """max D, its k, min D, its k over every integer of [lo, hi], D as the wide search computes it
    (the lattice Edgeworth expansion of F, :func:`atlas.engine._deviation`)."""
    k = np.arange(lo, hi + 1)
    order = int(engine._orders(np.sqrt(n * p * (1.0 - p))))
    gamma = engine._series_coefficients(n, np.array([p]), method, order)[0]
    d = engine._deviation(k, n, np.array([p]), method, gamma)
    return d.max(), k[d.argmax()], d.min(), k[d.argmin()]


# Wide windows for every method, the least smooth D among them (poisson, camp_paulson,
# peizer_pratt, edgeworth2_cc, normal), skewed p, and a small mean n p = 20,000 at n = 10^8.
SERIES_CELLS = [(200_000, 0.5), (1_000_000, 0.3), (3_000_000, 0.02), (10**8, 2e-4)]


@pytest.mark.parametrize(("n", "p"), SERIES_CELLS)
def test_nested_search_equals_every_integer_of_the_same_deviation(n, p):
    # The search samples D, brackets its best local maxima and evaluates every integer of the
    # final brackets; against D evaluated at every integer of the same window it must find the
    # same extremes. Where D is flat to its rounding (|D| near 1e-13 with G rounded to 1e-16)
    # the integer maximum of the rounded values is a matter of rounding, and the two may pick
    # different k whose D agree to the accuracy of D: the values are compared to it, the k
    # only where the value is identical.
    lo, hi, _ = engine._windows(n, np.array([p]), METHODS)
    assert hi[0] - lo[0] + 1 > engine.FULL_LIMIT  # the search path
    got = engine._nested_search(n, np.array([p]), lo, hi, METHODS)
    size = np.maximum(np.abs(got[0][:, 0]), np.abs(got[2][:, 0]))
    accuracy = engine._deviation_accuracy(
        n, np.array([p]), METHODS, np.array([False]), size[:, None]
    )
    for i, method in enumerate(METHODS):
        dmax, kmax, dmin, kmin = _every_integer_of_the_series(n, p, method, lo[0], hi[0])
        for value, where, want, want_k in (
            (got[0], got[1], dmax, kmax),
            (got[2], got[3], dmin, kmin),
        ):
            assert abs(value[i, 0] - want) <= accuracy[i, 0], (method, value[i, 0], want)
            if value[i, 0] == want:
                assert where[i, 0] == want_k, method


def test_methods_searched_together_or_alone_agree_bit_for_bit():
    # The search shares the samples' z, phi(z), Phi(z) and series among the methods and refines
    # their candidates together; each method alone on the same window must give the same bits.
    n, p = 2_000_000, np.array([0.003, 0.3, 0.5, 0.8])
    lo, hi, _ = engine._windows(n, p, METHODS)
    together = engine._nested_search(n, p, lo, hi, METHODS)
    for i, method in enumerate(METHODS):
        alone = engine._nested_search(n, p, lo, hi, (method,))
        for whole, part in zip(together, alone, strict=True):
            assert_array_equal(whole[i], part[0])


@pytest.mark.parametrize("n", [300_000, 2_000_000, 10**8, 10**12])
def test_shared_refinement_changes_no_value(monkeypatch, n):
    # Candidates of several methods are refined with shared z, phi(z) and series when they are
    # few (_SHARED_POINTS); method by method must give the same bits, one cell or several.
    p = np.array([1e-5, 0.003, 0.3, 0.5, 0.8, 0.99999])
    for cells in (p, p[2:3], p[-1:]):
        monkeypatch.setattr(engine, "_SHARED_POINTS", 10**9)
        shared = engine.evaluate(n, cells)
        monkeypatch.setattr(engine, "_SHARED_POINTS", 0)
        apart = engine.evaluate(n, cells)
        monkeypatch.undo()
        for name, value in _all_fields(shared).items():
            assert_array_equal(value, getattr(apart, name), err_msg=name)


def test_width_groups_change_no_value(monkeypatch):
    # Narrow windows are evaluated in groups of similar width; one padded rectangle for all the
    # rows (the grouping switched off) must give the same bits.
    p = np.array([1e-9, 1e-4, 0.003, 0.02, 0.1, 0.37, 0.5, 0.9, 0.999])
    for n in (5, 700, 1963, 30_000):
        grouped = engine.evaluate(n, p)
        monkeypatch.setattr(engine, "_GROUP_RATIO", np.inf)
        monkeypatch.setattr(engine, "_GROUP_SMALL", 10**9)
        single = engine.evaluate(n, p)
        monkeypatch.undo()
        for name in ("interval", "cdf", "lo", "hi", "interval_accuracy", "cdf_accuracy"):
            assert_array_equal(getattr(grouped, name), getattr(single, name), err_msg=name)


NARROW_P = np.array([1e-6, 2e-3, 0.011, 0.04, 0.13, 0.3, 0.5, 0.77, 0.96, 0.9993])


def _all_fields(ev):
    return {f: getattr(ev, f) for f in ("interval", "cdf", "lo", "hi", "interval_accuracy",
                                        "cdf_accuracy")}  # fmt: skip


@pytest.mark.parametrize("core_sigmas", [0.5, 2.0, 6.0])
def test_narrow_core_changes_no_value(monkeypatch, core_sigmas):
    # Narrow windows compute G on a core around the mean and keep it only when the bounds
    # outside the core prove the extremes lie inside. Every integer of the window (no core)
    # must give the same bits; a core of half a sigma forces the whole-window fallback often.
    monkeypatch.setattr(engine, "_NARROW_CORE_SIGMAS", core_sigmas)
    monkeypatch.setattr(engine, "_NARROW_CORE_MARGIN", 0.0)
    monkeypatch.setattr(engine, "_CORE_MIN_POINTS", 0)  # ten p: small groups take the core too
    for n in (9, 150, 1200, 20_000):
        with_core = _all_fields(engine.evaluate(n, NARROW_P))
        monkeypatch.setattr(engine, "_TAIL_BOUNDED", frozenset())
        without = _all_fields(engine.evaluate(n, NARROW_P))
        monkeypatch.setattr(engine, "_TAIL_BOUNDED", engine._TAIL_BOUNDED_METHODS)
        for name, values in with_core.items():
            assert_array_equal(values, without[name], err_msg=f"{name} at n={n}")


@pytest.mark.parametrize("method", sorted(engine._TAIL_BOUNDED_METHODS))
@pytest.mark.parametrize("n", [40, 900, 1999])
def test_tail_envelopes_bound_g_outside_the_core(method, n):
    # U bounds |G(k)| below the core and V bounds |1 - G(k)| above it: checked at every
    # integer of the window outside the core (G computed directly).
    p = NARROW_P
    lo, hi, _ = engine._windows(n, p, (method,))
    core_lo, core_hi = engine._core(n, p, lo, hi)
    u, v = engine._tail_envelopes(n, p, lo, hi, core_lo, core_hi, method)
    for j in range(p.size):
        below = np.arange(lo[j], core_lo[j])
        above = np.arange(core_hi[j] + 1, hi[j] + 1)
        if below.size:
            assert np.abs(approximate_cdf(below, n, p[j], method)).max() <= u[j]
        if above.size:
            assert np.abs(1.0 - approximate_cdf(above, n, p[j], method)).max() <= v[j]
