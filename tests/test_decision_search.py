"""The minimum n at every integer for tails and sizes (atlas.decision_search)."""

import numpy as np
import pytest

import atlas
from atlas import decision_search as ds
from atlas.sizes import cell_sizes


def _brute_min_n(values, limit, n_max):
    """The definition: the smallest N with every n in [N, n_max] within the limit."""
    failing = [n for n, v in values.items() if not v <= limit and n <= n_max]
    if not failing:
        return 1
    top = max(failing)
    return None if top == n_max else top + 1


@pytest.mark.parametrize(
    ("p", "alpha", "tail", "limits"),
    [(0.1, 0.01, "both", (0.2, 0.12)), (0.3, 0.001, "lower", (0.3, 0.25)),
     (0.05, 0.05, "upper", (0.1, 0.08))],
)  # fmt: skip
def test_tail_min_n_matches_every_integer_evaluation(p, alpha, tail, limits):
    # Every integer from 1 to 2600 evaluated by atlas.tail_error (the definition) against the
    # search with dense_to = 300, which certifies most of the gaps above 300 by the bound.
    n_max = 2600
    ns = np.arange(1, n_max + 1)
    values = dict(zip(ns.tolist(), atlas.tail_error(ns, p, alpha, tail=tail).tolist(),
                      strict=True))  # fmt: skip
    got = ds.min_ns(ds.tail_search(p, alpha, "normal_cc", tail), limits, n_max, 300)
    for limit, result in zip(limits, got, strict=True):
        assert result.n == _brute_min_n(values, limit, n_max)
    assert sum(r.certified for r in got) > 0  # the bound did some of the work


@pytest.mark.parametrize("alternative", ["greater", "less", "two-sided"])
def test_size_min_n_matches_every_integer_evaluation(alternative):
    n_max = 3000
    ns = np.arange(1, n_max + 1)
    sizes = atlas.test_size(ns, 0.2, 0.05, alternative=alternative).size  # the definition
    values = dict(zip(ns.tolist(), sizes.tolist(), strict=True))
    limits = (0.06, 0.052, 0.05)
    for method in ("normal_cc", "edgeworth_cc"):  # the sweep, and the bound with halving
        got = ds.min_ns(ds.size_search(0.2, 0.05, method, alternative), limits, n_max, 200)
        if method == "edgeworth_cc":
            values = {n: float(cell_sizes(n, 0.2, method, [0.05], alternative)[0][0])
                      for n in range(1, n_max + 1)}  # fmt: skip
        for limit, result in zip(limits, got, strict=True):
            assert result.n == _brute_min_n(values, limit, n_max), (method, limit)


@pytest.mark.parametrize("alternative", ["greater", "less", "two-sided"])
@pytest.mark.parametrize(("p", "method"), [(0.1, "normal_cc"), (0.5, "normal"),
                                           (0.02, "poisson")])  # fmt: skip
def test_sweep_equals_cell_sizes_at_every_integer(alternative, p, method):
    ns = np.arange(2049, 2349)
    got = ds.sweep_sizes(ns, p, method, 0.05, alternative)
    want = [float(cell_sizes(int(n), p, method, [0.05], alternative)[0][0]) for n in ns]
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0)  # the same sums, same rounding


@pytest.mark.parametrize(
    ("a", "b", "p", "alpha", "tail"),
    [(3000, 3150, 0.1, 0.01, "both"), (5000, 5250, 0.02, 0.001, "lower"),
     (2500, 2625, 0.5, 0.05, "upper"), (4000, 4200, 0.3, 0.0001, "both")],
)  # fmt: skip
def test_tail_gap_bound_holds_at_every_integer(a, b, p, alpha, tail):
    # The bound (proof in the module notes) against the value computed at every integer.
    bound = ds.tail_gap_bound(a, b, p, alpha, "normal_cc", tail)
    values = atlas.tail_error(np.arange(a + 1, b), p, alpha, tail=tail)
    assert np.isfinite(bound) and values.max() <= bound


def test_tail_gap_bound_is_useful():
    # Where the error is well within a tolerance the bound certifies a 5% gap (computed,
    # regression fact: about 2.6 times the largest value there).
    values = atlas.tail_error(np.arange(3001, 3150), 0.1, 0.01)
    assert ds.tail_gap_bound(3000, 3150, 0.1, 0.01, "normal_cc", "both") < 3.0 * values.max()


@pytest.mark.parametrize("alternative", ["greater", "two-sided"])
def test_size_gap_bound_holds_at_every_integer(alternative):
    a, b = 3000, 3150
    bound = ds.size_gap_bound(a, b, 0.1, 0.05, "edgeworth_cc", alternative)
    sizes = atlas.test_size(np.arange(a + 1, b), 0.1, 0.05, method="edgeworth_cc",
                            alternative=alternative).size  # fmt: skip
    assert sizes.max() <= bound


def test_no_step_bound_means_no_certificate():
    # camp_paulson has no step bound (atlas.bounds): every integer is evaluated instead.
    assert ds.tail_gap_bound(3000, 3100, 0.1, 0.01, "camp_paulson", "both") == np.inf
    got = ds.min_ns(ds.tail_search(0.2, 0.01, "camp_paulson", "both"), [0.05], 2300, 2200)
    assert got[0].certified == 0
