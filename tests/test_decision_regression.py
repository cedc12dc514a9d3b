"""Regression of atlas.decision_cube: the decisions group on a sample of its grid, bit for bit.

Source of every expected value: tests/data/decision_regression.npz, "computed, regression value"
(the per-cell path's own values at the commit stored in the file, written by
build_scripts/make_decision_regression.py, as float64 before the group's cast to float32). They
are not references: they pin the values so that sharing work across methods or batching cannot
move them.
"""

import pathlib

import numpy as np
import pytest
from numpy.testing import assert_array_equal

from atlas.decision_cube import decision_dataset

DATA = pathlib.Path(__file__).parent / "data" / "decision_regression.npz"


@pytest.fixture(scope="module")
def stored():
    with np.load(DATA, allow_pickle=False) as f:
        assert str(f["label"]) == "computed, regression value"
        return {key: f[key] for key in f.files}


@pytest.fixture(scope="module")
def fresh(stored):
    return decision_dataset(
        stored["n"],
        stored["p"],
        methods=[str(m) for m in stored["methods"]],
        tail_levels=stored["tail_levels"],
        test_levels=stored["test_levels"],
        dtype="float64",
    )


def test_tail_errors_identical_bit_for_bit(stored, fresh):
    # source: computed, regression value (tests/data/decision_regression.npz)
    got = fresh.tail_error.transpose("approximation", "decision_n", "decision_p", "tail",
                                     "tail_level")  # fmt: skip
    assert_array_equal(got.values, stored["tail_error"])


def test_test_sizes_identical_bit_for_bit(stored, fresh):
    # source: computed, regression value (tests/data/decision_regression.npz)
    got = fresh.test_size.transpose("approximation", "decision_n", "decision_p", "alternative",
                                    "test_level")  # fmt: skip
    assert_array_equal(got.values, stored["test_size"])


def test_exact_sizes_identical_bit_for_bit_for_every_method(stored, fresh):
    # source: computed, regression value (tests/data/decision_regression.npz): stored for each
    # method, computed once per cell by the group.
    got = fresh.exact_test_size.transpose("decision_n", "decision_p", "alternative",
                                          "test_level")  # fmt: skip
    for exact in stored["exact_test_size"]:
        assert_array_equal(got.values, exact)


def test_the_sample_covers_the_grid(stored):
    # Both regimes (every count up to n = 2048, the bounded scan above), both extreme p.
    n, p = stored["n"], stored["p"]
    assert n.min() == 1 and n.max() == 10**8 and (n <= 2048).sum() >= 10 and (n > 2048).sum() >= 20
    assert p.min() == 1e-4 and p.max() == 0.9999 and 0.5 in p
    assert stored["tail_error"].shape == (7, n.size, p.size, 2, 4)
    assert np.isfinite(stored["tail_error"]).all() and np.isfinite(stored["test_size"]).all()
