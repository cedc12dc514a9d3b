"""Tests of atlas.decisions: the questions about tails and test sizes.

Sources: "issue 11" (its figures, computed to its definitions); "definition" (the answer
recomputed from atlas.tail_error / atlas.test_size, themselves checked against mpmath in
test_tails.py and test_sizes.py); "computed, regression value" where marked.
"""

import numpy as np
import pytest

import atlas
from atlas import decisions
from atlas.approximations import METHODS


def test_tail_verdict_issue_figure():
    # issue 11: n = 100, p = 0.1, normal_cc, tails of at least 0.001: relative error 2.19.
    v = decisions.tail_verdict(100, 0.1, 0.001, 0.1, tail="lower")
    assert not v.within
    assert round(v.error, 2) == 2.19
    assert v.error == atlas.tail_error(100, 0.1, 0.001, tail="lower")  # definition
    assert v.explain() == (
        "Bin(n=100, p=0.1), normal_cc: every lower tail P(X <= k) of at least 0.001 within "
        "10%? no: worst relative error 219%"
    )
    assert decisions.tail_verdict(100, 0.1, 0.001, 3.0, tail="lower").within


def test_size_verdict_issue_figure():
    # issue 11: n = 50, p0 = 0.1, upper one-sided test at nominal 5% rejects 5.8% of the time.
    v = decisions.size_verdict(50, 0.1, 0.05, max_size=0.055, alternative="greater")
    assert not v.keeps and round(v.size, 3) == 0.058
    t = atlas.test_size(50, 0.1, 0.05, alternative="greater")  # definition
    assert (v.size, v.exact_size) == (t.size, t.exact_size)
    assert v.explain() == (
        "Bin(n=50, p0=0.1), normal_cc p-values, upper one-sided test (greater) at nominal 5%: "
        "size 5.79% <= 5.5%? no; the exact test: 2.45%"
    )
    # max_size defaults to alpha: "does the test keep its level?"
    assert decisions.size_verdict(50, 0.1, 0.05, alternative="greater").max_size == 0.05
    assert decisions.size_verdict(50, 0.1, 0.05, max_size=0.06, alternative="greater").keeps


@pytest.mark.parametrize("tail", ["lower", "both"])
def test_tail_min_n_against_definition(tail):
    # Every integer n is checked up to n_max = dense_to = 400: the answer passes at every n
    # from it to 400 and n - 1 fails (definition, by tail_error at every n).
    got = decisions.tail_min_n(0.2, 0.01, 0.3, tail=tail, n_max=400, dense_to=400)
    errors = atlas.tail_error(np.arange(1, 401), 0.2, 0.01, tail=tail)
    passing = errors <= 0.3
    assert got.n is not None
    assert passing[got.n - 1 :].all()
    assert not passing[got.n - 2]
    assert got.previous == got.n - 1


def test_size_min_n_against_definition():
    got = decisions.size_min_n(0.1, 0.05, max_size=0.055, alternative="greater", n_max=300,
                               dense_to=300)  # fmt: skip
    sizes = atlas.test_size(np.arange(1, 301), 0.1, 0.05, alternative="greater").size
    passing = sizes <= 0.055  # definition
    assert passing[got.n - 1 :].all() and not passing[got.n - 2]
    assert got.explain().startswith(
        f"from n = {got.n}: every integer n from {got.n} to 300 checked; n = {got.n - 1} fails"
    )


def test_min_n_above_dense_to_and_none():
    # Above dense_to every integer is evaluated or covered by a bound: the answer passes and
    # the one before fails (definition, by tail_error).
    got = decisions.tail_min_n(0.1, 0.01, 0.1, n_max=5000, dense_to=100)
    assert got.n > 100 and got.previous == got.n - 1
    assert f"every integer n from {got.n:,} to 5,000 checked" in got.explain()
    assert atlas.tail_error(got.n, 0.1, 0.01) <= 0.1  # definition
    assert atlas.tail_error(got.previous, 0.1, 0.01) > 0.1  # definition
    # A tolerance never met up to n_max: no answer.
    none = decisions.tail_min_n(0.1, 1e-6, 1e-4, n_max=60, dense_to=60)
    assert none.n is None and none.previous == 60
    assert none.explain() == "at no n up to 60: n = 60 fails"


def test_min_n_says_when_the_passing_n_are_not_one_run():
    # The size of the upper test at p0 = 0.1 is a sawtooth in n: some n below the answer pass
    # too, and the answer lists the stretches (checked here against test_size at every n).
    got = decisions.size_min_n(0.1, 0.05, max_size=0.055, alternative="greater", n_max=300,
                               dense_to=300)  # fmt: skip
    sizes = atlas.test_size(np.arange(1, 301), 0.1, 0.05, alternative="greater").size
    passing = sizes <= 0.055  # definition
    assert got.scattered == (sum(r[2] for r in got.runs) > 1) and got.scattered
    for first, last, within in got.runs:
        assert (passing[first - 1 : last] == within).all()
    assert got.runs[-1] == (got.n, 300, True)
    assert "the n that pass are not one run" in got.explain()


def test_best_methods_ranked():
    ranking = decisions.best_tail_method(100, 0.1, 0.001)
    assert [m for m, _ in ranking] != [] and sorted(m for m, _ in ranking) == sorted(METHODS)
    errors = [e for _, e in ranking]
    assert errors == sorted(errors)
    for m, e in ranking:
        assert e == atlas.tail_error(100, 0.1, 0.001, method=m)  # definition
    rows = decisions.best_size_method(50, 0.1, 0.05, alternative="greater")
    # A test above its level ranks below every test that keeps it.
    keeps = [size <= 0.05 for _, size, _ in rows]
    assert keeps == sorted(keeps, reverse=True)
    assert rows[-1][0] == "normal_cc"  # the only one above 5% here (5.79%)


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (
            lambda: decisions.tail_verdict(100, 0.1, 0.01, -1),
            r"^`rel_tol` must be a positive finite number; got -1\.$",
        ),
        (
            lambda: decisions.tail_verdict(100, 0.1, 0.01, "x"),
            r"^`rel_tol` must be a positive finite number; got 'x'\.$",
        ),
        (
            lambda: decisions.tail_verdict([1, 2], 0.1, 0.01, 0.1),
            r"^`n` must be a single integer here; got shape \(2,\)\.$",
        ),
        (
            lambda: decisions.size_verdict(50, 0.1, 0.05, max_size=1.5),
            r"^`max_size` must be in the open interval \(0, 1\); got 1\.5\.$",
        ),
        (
            lambda: decisions.size_verdict(50, 2.0, 0.05),
            r"^`p0` must be in the open interval \(0, 1\); got 2\.0\.$",
        ),
        (
            lambda: decisions.tail_min_n(0.1, 0.01, 0.1, n_max=0),
            r"^`n_max` must be an integer >= 1; got 0\.$",
        ),
        (
            lambda: decisions.best_tail_method(100, 0.1, 0.01, methods=()),
            r"^`methods` must name at least one method; got none\.$",
        ),
        (
            lambda: decisions.best_size_method(100, 0.1, 0.01, alternative="up"),
            r"^`alternative` must be one of 'two-sided', 'less', 'greater'; got 'up'\.$",
        ),
    ],
)
def test_errors(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_public_names():
    for name in ("tail_verdict", "size_verdict", "tail_min_n", "size_min_n",
                 "best_tail_method", "best_size_method"):  # fmt: skip
        assert getattr(atlas, name) is getattr(decisions, name)
        assert name in atlas.__all__
