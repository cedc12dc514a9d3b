"""Tests for atlas.grid: the n and p axes."""

import math
import re

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from atlas.grid import (
    DEFAULT_N_SPEC,
    DEFAULT_P_SPEC,
    default_n,
    default_p,
    describe_grid,
    parse_n,
    parse_p,
)

# The round values of p written out by hand (mirrors as decimals), independent of atlas.grid.
ROUND_P = [0.0001, 0.0002, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.025, 0.05, 0.1, 0.15, 0.2,
           0.25, 0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 0.975,
           0.98, 0.99, 0.995, 0.998, 0.999, 0.9995, 0.9998, 0.9999]  # fmt: skip


# ---- parse_n: valid specs (expected arrays follow from the definition of each item) ----


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ("7", [7]),
        ("1:5", [1, 2, 3, 4, 5]),
        ("5:5", [5]),
        ("10, 3 ,1:2", [1, 2, 3, 10]),  # sorted; spaces around items are ignored
        ("1:3,2:4,3", [1, 2, 3, 4]),  # overlaps are merged
        ("log:1:1000:4", [1, 10, 100, 1000]),  # 10^(3 i / 3)
        ("log:2:50:3", [2, 10, 50]),  # geometric mean of 2 and 50 is 10
        ("log:10:20:2", [10, 20]),  # endpoints only
        ("log:1:3:5", [1, 2, 3]),  # 3^(i/4) = 1, 1.32, 1.73, 2.28, 3 rounds to 1, 1, 2, 2, 3
        ("1e3,2E2", [200, 1000]),  # integral decimals read as integers
        ("log:2000:100000000:2", [2000, 100000000]),
    ],
)
def test_parse_n_valid(spec, expected):
    n = parse_n(spec)
    assert n.dtype == np.int64
    assert_array_equal(n, expected)


def test_parse_n_endpoints_exact():
    # Whatever the rounding of interior points, both ends of a log item are exact.
    n = parse_n("log:7:99991:13")
    assert (n[0], n[-1], n.size) == (7, 99991, 13)


@pytest.mark.parametrize(
    ("values", "expected"),
    [
        ([3, 1, 3], [1, 3]),
        (np.array([5, 2], dtype=np.int32), [2, 5]),
        ([4.0, 2.0], [2, 4]),
        (9, [9]),
    ],
)
def test_parse_n_sequence(values, expected):
    n = parse_n(values)
    assert n.dtype == np.int64
    assert_array_equal(n, expected)


# ---- parse_n: every refusal, matched word for word ----


def _message(rule, item, spec):
    return re.escape(f"`n` {rule}; got item {item!r} in {spec!r}.")


FORMS_N = "items must be 'k', 'a:b' or 'log:a:b:m'"
TOO_MANY = "must have at most 10000000 values"


@pytest.mark.parametrize(
    ("spec", "rule", "item"),
    [
        ("0", "values must be from 1 to 9007199254740992", "0"),
        ("3,-2", "values must be from 1 to 9007199254740992", "-2"),
        ("0:5", "values must be from 1 to 9007199254740992", "0:5"),
        ("log:0:10:3", "values must be from 1 to 9007199254740992", "log:0:10:3"),
        ("9007199254740993", "values must be from 1 to 9007199254740992", "9007199254740993"),
        ("1:5,10.5", "values must be integers", "10.5"),
        ("1:2.5", "values must be integers", "1:2.5"),
        ("nan", "values must be integers", "nan"),
        ("5:1", "ranges must have a <= b", "5:1"),
        ("log:10:1:3", "ranges must have a <= b", "log:10:1:3"),
        ("log:1:10:1", "point counts m must be integers >= 2", "log:1:10:1"),
        ("log:1:10:0", "point counts m must be integers >= 2", "log:1:10:0"),
        ("log:1:10:2.5", "point counts m must be integers >= 2", "log:1:10:2.5"),
        ("log:1:10:x", "point counts m must be integers >= 2", "log:1:10:x"),
        ("1:", FORMS_N, "1:"),
        (":4", FORMS_N, ":4"),
        ("log:5", FORMS_N, "log:5"),
        ("log:1:5", FORMS_N, "log:1:5"),
        ("1:2:3", FORMS_N, "1:2:3"),
        ("abc", FORMS_N, "abc"),
        ("1,,2", FORMS_N, ""),
        ("1,2,", FORMS_N, ""),
        ("", FORMS_N, ""),
        ("1:100000000", TOO_MANY, "1:100000000"),
        ("log:1:100000000:10000001", TOO_MANY, "log:1:100000000:10000001"),
    ],
)
def test_parse_n_refuses(spec, rule, item):
    with pytest.raises(ValueError, match=_message(rule, item, spec)):
        parse_n(spec)


def test_parse_n_refuses_too_many_in_total():
    # Each item is within the limit; together they give 10**7 + 1 distinct values.
    spec = "1:10000000,10000001"
    with pytest.raises(ValueError, match=re.escape(
        f"`n` must have at most 10000000 values; got 10000001 in {spec!r}."
    )):  # fmt: skip
        parse_n(spec)


@pytest.mark.parametrize(
    ("values", "match"),
    [
        ([], "`n` must have 1 to 10000000 values; got 0."),
        ([0, 3], "`n` values must be from 1 to 9007199254740992; got [0]."),
        ([1.5, 2.0], "`n` values must be integers; got [1.5]."),
        ([math.inf], "`n` values must be integers; got [inf]."),
    ],
)
def test_parse_n_sequence_refuses(values, match):
    with pytest.raises(ValueError, match=re.escape(match)):
        parse_n(values)


@pytest.mark.parametrize("values", [["a"], [[1, 2]], [True], None])
def test_parse_n_type_errors(values):
    with pytest.raises(TypeError, match=r"^`n` must be a spec string or a 1-d sequence of numbers"):
        parse_n(values)


# ---- parse_p: valid specs ----


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ("0.5", [0.5]),
        ("0.3,0.1, 0.2", [0.1, 0.2, 0.3]),
        ("1e-4", [1e-4]),
        ("lin:0.1:0.5:5", [0.1, 0.2, 0.3, 0.4, 0.5]),
        ("log:0.001:0.1:3", [0.001, 0.01, 0.1]),
        ("logit:0.1:0.9:3", [0.1, 0.5, 0.9]),  # logit(0.9) = -logit(0.1): midpoint 0 -> 1/2
        ("logit:0.2:0.8:2", [0.2, 0.8]),
        # log-odds of 1/11 and 10/11 are -log 10 and log 10: midpoint 0, quarter points +-log 10 / 2
        ("logit:0.09090909090909091:0.9090909090909091:5",
         [1 / 11, 1 / (1 + 10**0.5), 0.5, 10**0.5 / (1 + 10**0.5), 10 / 11]),
    ],
)  # fmt: skip
def test_parse_p_valid(spec, expected):
    p = parse_p(spec)
    assert p.dtype == np.float64
    # Generated values carry a few ulps of rounding; 1e-14 relative allows for it.
    assert_allclose(p, expected, rtol=1e-14, atol=0)


def test_parse_p_prefers_explicit_values():
    # linspace gives 0.30000000000000004 for the middle point; the explicit 0.3 replaces it.
    assert np.linspace(0.1, 0.5, 5)[2] != 0.3
    p = parse_p("lin:0.1:0.5:5,0.3")
    assert p.size == 5
    assert 0.3 in p.tolist()
    # Two generated points a rounding error apart count once.
    assert parse_p("lin:0.1:0.5:5,lin:0.1:0.9:9").size == 9


def test_parse_p_keeps_distinct_explicit_values():
    # Typed values (single values and the ends of ranges) are kept however close; only
    # generated ones give way.
    assert parse_p("0.3,0.30000000000000004").size == 2
    # Near 1 the logit points crowd within 1e-12 of the end; the typed end 1 - 2**-52 stays.
    b = 1 - 2**-52
    p = parse_p(f"logit:0.5:{b!r}:34")
    assert p[-1] == b
    assert np.all(np.diff(p) > 1e-12 * p[1:])


def test_parse_p_endpoints_exact():
    for kind in ("lin", "log", "logit"):
        p = parse_p(f"{kind}:0.0003:0.77:17")
        assert (p[0], p[-1], p.size) == (0.0003, 0.77, 17)


def test_parse_p_sequence():
    assert_array_equal(parse_p([0.5, 0.25, 0.5]), [0.25, 0.5])
    assert_array_equal(parse_p(0.125), [0.125])


# ---- parse_p: every refusal ----

FORMS_P = "items must be 'x', 'lin:a:b:m', 'log:a:b:m' or 'logit:a:b:m'"
OPEN = "values must be in the open interval (0, 1)"


@pytest.mark.parametrize(
    ("spec", "rule", "item"),
    [
        ("0", OPEN, "0"),
        ("0.5,1", OPEN, "1"),
        ("1.5", OPEN, "1.5"),
        ("-0.1", OPEN, "-0.1"),
        ("nan", OPEN, "nan"),
        ("inf", OPEN, "inf"),
        ("lin:0:0.5:3", OPEN, "lin:0:0.5:3"),
        ("logit:0.5:1:3", OPEN, "logit:0.5:1:3"),
        ("log:nan:0.5:3", OPEN, "log:nan:0.5:3"),
        ("lin:0.5:0.4:3", "ranges must have a <= b", "lin:0.5:0.4:3"),
        ("logit:0.9:0.1:3", "ranges must have a <= b", "logit:0.9:0.1:3"),
        ("lin:0.1:0.5:1", "point counts m must be integers >= 2", "lin:0.1:0.5:1"),
        ("log:0.1:0.5:-3", "point counts m must be integers >= 2", "log:0.1:0.5:-3"),
        ("logit:0.1:0.5:3.5", "point counts m must be integers >= 2", "logit:0.1:0.5:3.5"),
        ("lin:0.1:0.5:10000001", TOO_MANY, "lin:0.1:0.5:10000001"),
        ("lin:0.1:0.5", FORMS_P, "lin:0.1:0.5"),
        ("0.1:0.5", FORMS_P, "0.1:0.5"),
        ("foo:0.1:0.5:3", FORMS_P, "foo:0.1:0.5:3"),
        ("lin:a:0.5:3", FORMS_P, "lin:a:0.5:3"),
        ("abc", FORMS_P, "abc"),
        ("0.1,", FORMS_P, ""),
        ("", FORMS_P, ""),
    ],
)
def test_parse_p_refuses(spec, rule, item):
    with pytest.raises(ValueError, match=re.escape(f"`p` {rule}; got item {item!r} in {spec!r}.")):
        parse_p(spec)


def test_parse_p_refuses_too_many_in_total():
    spec = "lin:0.1:0.2:6000000,lin:0.3:0.4:6000000"
    with pytest.raises(ValueError, match=re.escape(
        f"`p` must have at most 10000000 values; got 12000000 in {spec!r}."
    )):  # fmt: skip
        parse_p(spec)


@pytest.mark.parametrize(
    ("values", "match"),
    [
        ([], "`p` must have 1 to 10000000 values; got 0."),
        ([0.3, 1.0], "`p` values must be in the open interval (0, 1); got [1.0]."),
        ([math.nan], "`p` values must be in the open interval (0, 1); got [nan]."),
    ],
)
def test_parse_p_sequence_refuses(values, match):
    with pytest.raises(ValueError, match=re.escape(match)):
        parse_p(values)


def test_parse_p_type_error():
    with pytest.raises(TypeError, match=r"^`p` must be a spec string or a 1-d sequence of numbers"):
        parse_p(["0.5"])


# ---- the default grid ----


def test_default_n():
    n = default_n()
    assert_array_equal(n, parse_n(DEFAULT_N_SPEC))
    assert_array_equal(n[:2000], np.arange(1, 2001))  # every integer to 2000
    assert n[-1] == 10**8
    # At least 100 points in every decade [x, 10 x) with 2000 <= x and 10 x <= 10**8.
    starts = n[(n >= 2000) & (10 * n <= 10**8)]
    per_decade = np.searchsorted(n, 10 * starts) - np.searchsorted(n, starts)
    assert per_decade.min() >= 100


def test_default_p():
    p = default_p()
    assert_array_equal(p, parse_p(DEFAULT_P_SPEC))
    values = set(p.tolist())
    missing = [x for x in ROUND_P if x not in values]  # exact membership, not isclose
    assert missing == []
    assert (p[0], p[-1]) == (0.0001, 0.9999)
    # Symmetric: 1 - p is on the grid for every p, up to 1e-15 (a few ulps of values near 1).
    mirror = np.sort(1 - p)
    assert np.max(np.abs(mirror - p)) <= 1e-15


def test_default_p_logit_points_symmetric():
    p = parse_p("logit:0.0001:0.9999:161")
    assert p.size == 161
    assert p[80] == 0.5  # the midpoint, log-odds 0
    assert np.max(np.abs(p + p[::-1] - 1)) <= 1e-15


def test_describe_grid():
    assert describe_grid("1:10", [0.25, 0.5]) == (
        "n: 10 values from 1 to 10; p: 2 values from 0.25 to 0.5; 20 (n, p) points"
    )
    # Counts: 2000 integers + 470 log points above 2000 (computed, regression value);
    # 161 logit points + 37 round values - 3 shared (0.0001, 0.5, 0.9999).
    assert describe_grid(DEFAULT_N_SPEC, DEFAULT_P_SPEC) == (
        "n: 2470 values from 1 to 100000000; p: 195 values from 0.0001 to 0.9999; "
        "481650 (n, p) points"
    )


# ---- properties ----

_p_values = st.floats(min_value=0.0, max_value=1.0, exclude_min=True, exclude_max=True)


@st.composite
def _p_items(draw):
    kind = draw(st.sampled_from(["x", "lin", "log", "logit"]))
    if kind == "x":
        x = draw(_p_values)
        return repr(x), [x]
    a, b = sorted([draw(_p_values), draw(_p_values)])
    return f"{kind}:{a!r}:{b!r}:{draw(st.integers(2, 40))}", [a, b]


@given(st.lists(_p_items(), min_size=1, max_size=6))
def test_parse_p_properties(items):
    spec = ",".join(text for text, _ in items)
    p = parse_p(spec)
    assert p.dtype == np.float64
    assert np.all(np.diff(p) > 0)  # sorted and unique
    assert np.all((p > 0) & (p < 1))
    # Every value typed in the spec, single or the end of a range, is on the axis exactly.
    typed = {v for _, values in items for v in values}
    assert typed <= set(p.tolist())


@given(st.lists(st.integers(1, 10**6), min_size=1, max_size=20))
def test_parse_n_matches_values(values):
    # The spec of explicit integers and the sequence give the same sorted unique axis.
    spec = ",".join(str(v) for v in values)
    assert_array_equal(parse_n(spec), np.unique(values))
    assert_array_equal(parse_n(values), np.unique(values))


def test_spacing_is_numpys_on_the_reference_path():
    # The tests run on the reference float path (tests/conftest.py), where numpy's exp, log and
    # pow are the C library's: the standard-library spacing gives numpy's values bit for bit.
    from atlas.grid import _geomspace, _logistic

    rng = np.random.default_rng(11)
    for _ in range(200):
        a, b = sorted(float(v) for v in 10.0 ** rng.uniform(-300, 0, 2))
        m = int(rng.integers(2, 400))
        assert np.array_equal(_geomspace(a, b, m), np.geomspace(a, b, m))
        x = np.linspace(-rng.uniform(0, 700), rng.uniform(0, 700), m)
        assert np.array_equal(_logistic(x), np.exp(-np.logaddexp(0.0, -x)))
