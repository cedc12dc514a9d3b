"""Regression of atlas.engine: today's results on a grid over the domain, kept bit for bit.

Source of every expected value: tests/data/engine_regression.npz, "computed, regression value"
(the engine's own results at the commit stored in the file, written by
build_scripts/make_engine_regression.py). They are not references: they pin the results so that
a faster search or a shared evaluation cannot move them. Where a stored error is resolved
(above 3 times its accuracy, :func:`atlas.engine.is_resolved`) the result must be identical bit
for bit, with its accuracy and worst interval; where it is not, the value is known only to its
accuracy, and the new one must lie within the stored accuracy of it.
"""

import pathlib

import numpy as np
import pytest

from atlas.engine import evaluate, evaluate_cells, is_resolved

DATA = pathlib.Path(__file__).parent / "data" / "engine_regression.npz"


@pytest.fixture(scope="module")
def stored():
    with np.load(DATA, allow_pickle=False) as f:
        assert str(f["label"]) == "computed, regression value"
        return {key: f[key] for key in f.files}


@pytest.fixture(scope="module")
def fresh(stored):
    methods = tuple(str(m) for m in stored["methods"])
    fields = ("interval", "cdf", "lo", "hi", "interval_accuracy", "cdf_accuracy")
    out = {f: np.empty_like(stored[f]) for f in fields}
    for j, n in enumerate(stored["n"].tolist()):
        ev = evaluate(n, stored["p"], methods=methods)
        for f in fields:
            out[f][:, j] = getattr(ev, f)
    return out


@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_resolved_results_identical_bit_for_bit(stored, fresh, metric):
    # source: computed, regression value (tests/data/engine_regression.npz)
    error, accuracy = stored[metric], stored[f"{metric}_accuracy"]
    resolved = is_resolved(error, accuracy)
    assert resolved.sum() > 0.6 * resolved.size  # the grid is mostly resolved values
    np.testing.assert_array_equal(fresh[metric][resolved], error[resolved])
    np.testing.assert_array_equal(fresh[f"{metric}_accuracy"][resolved], accuracy[resolved])
    if metric == "interval":
        for end in ("lo", "hi"):
            np.testing.assert_array_equal(fresh[end][resolved], stored[end][resolved])


@pytest.mark.parametrize("metric", ["interval", "cdf"])
def test_unresolved_results_within_accuracy(stored, fresh, metric):
    # source: computed, regression value (tests/data/engine_regression.npz); an unresolved
    # error is known only to within its accuracy.
    error, accuracy = stored[metric], stored[f"{metric}_accuracy"]
    loose = ~is_resolved(error, accuracy)
    assert np.all(np.abs(fresh[metric][loose] - error[loose]) <= accuracy[loose])


def test_cells_in_any_order_match_the_grid(stored):
    # source: computed, regression value; evaluate_cells computes one method at a time, whose
    # windows (the union over the methods computed together) and so the start of the summed F
    # can differ from the grid's, and a window narrow for one method may be wide for all seven
    # (summed F for one, the series for the other): the values agree to the larger accuracy.
    rng = np.random.default_rng(14)
    j = rng.integers(0, stored["n"].size, 300)
    i = rng.integers(0, stored["p"].size, 300)
    for m, method in enumerate(stored["methods"].tolist()):
        got = evaluate_cells(stored["n"][j], stored["p"][i], method, accuracy=True)
        for g, f in ((0, "interval"), (1, "cdf")):
            want, accuracy = stored[f][m, j, i], stored[f"{f}_accuracy"][m, j, i]
            bound = np.maximum(accuracy, got[4 + g])
            assert np.all(np.abs(got[g] - want) <= bound), (method, f)
