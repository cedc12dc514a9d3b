"""Tests for atlas.rules: the safe parser and evaluator of rules in n, p and q."""

import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_array_equal

from atlas.rules import (
    AUDIT_RULES,
    CLASSIC_RULES,
    MAX_LENGTH,
    NP5,
    NP10,
    NPQ5,
    NPQ9,
    RULE_NAMES,
    SKEWNESS,
    THREE_SIGMA,
    Expression,
    parse_expression,
    parse_rule,
    rule_name,
    rule_source,
)

# ---- the classic rules (expected values: arithmetic on the rule's definition) ----


@pytest.mark.parametrize(
    ("rule", "n", "p", "expected"),
    [
        (NP5, 100, 0.05, True),  # np = 5 exactly (decimal), nq = 95
        (NP5, 99, 0.05, False),  # np = 4.95
        (NP5, 100, 0.95, True),  # nq = 5 exactly, although 1 - 0.95 is not 0.05 in binary
        (NP5, 10, 0.5, True),  # np = nq = 5
        (NP5, 9, 0.5, False),  # np = 4.5
        (NP10, 200, 0.05, True),  # np = 10
        (NP10, 199, 0.05, False),  # np = 9.95
        (NP10, 1000, 0.99, True),  # nq = 10
        (NPQ9, 36, 0.5, False),  # npq = 9 exactly: the rule is strict
        (NPQ9, 37, 0.5, True),  # npq = 9.25
        (NPQ9, 100, 0.1, False),  # npq = 9 exactly
        (NPQ5, 20, 0.5, True),  # npq = 5 exactly
        (NPQ5, 19, 0.5, False),  # npq = 4.75
    ],
)
def test_classic_rules(rule, n, p, expected):
    got = parse_rule(rule)(n, p)
    assert got.dtype == bool and got.shape == ()
    assert bool(got) is expected


@pytest.mark.parametrize(
    ("rule", "n", "p", "expected"),
    [
        # |q - p| / sqrt(npq) < 0.3 at p = 0.1: 0.64 < 0.09 * n * 0.09, i.e. n > 79.01
        (SKEWNESS, 80, 0.1, True),
        (SKEWNESS, 79, 0.1, False),
        (SKEWNESS, 80, 0.9, True),  # symmetric in p and q
        (SKEWNESS, 6, 0.5, True),  # skewness 0, n > 5
        (SKEWNESS, 5, 0.5, False),  # n > 5 is strict
        # n > 9q/p and n > 9p/q: at p = 0.1, n > 81; at n = 81, np = 8.1 = 3 sqrt(7.29) exactly
        (THREE_SIGMA, 81, 0.1, False),
        (THREE_SIGMA, 82, 0.1, True),
        (THREE_SIGMA, 82, 0.9, True),
        (THREE_SIGMA, 81, 0.9, False),
        (THREE_SIGMA, 9, 0.5, False),  # np = 4.5 = 3 sqrt(2.25)
        (THREE_SIGMA, 10, 0.5, True),
    ],
)
def test_audit_rules(rule, n, p, expected):
    # Expected values: arithmetic on each rule's definition (in the comments).
    assert bool(parse_rule(rule)(n, p)) is expected


def test_audit_rules_carry_their_sources():
    assert AUDIT_RULES == (*CLASSIC_RULES, SKEWNESS, THREE_SIGMA)
    assert rule_name(SKEWNESS) == "n > 5 and |q - p|/sqrt(npq) < 0.3"
    assert rule_source(parse_rule(SKEWNESS)) == (
        "Box, Hunter and Hunter, Statistics for Experimenters (from memory)"
    )
    assert rule_source(THREE_SIGMA) == "common practice, no source"
    assert rule_source(NP5) is None


def test_classic_rules_listed_with_names():
    assert CLASSIC_RULES == (NP5, NP10, NPQ9, NPQ5)
    assert NP5 == "n*p >= 5 and n*q >= 5"
    assert [RULE_NAMES[r] for r in CLASSIC_RULES] == [
        "np >= 5 and nq >= 5",
        "np >= 10 and nq >= 10",
        "npq > 9",
        "npq >= 5",
    ]
    assert rule_name(parse_rule(NPQ9)) == "npq > 9"
    assert rule_name("n > 3") == "n > 3"


def test_vectorised_and_broadcast():
    rule = parse_rule(NP5)
    n = np.array([[10], [100], [1000]])
    p = np.array([0.001, 0.01, 0.05, 0.5])
    got = rule(n, p)
    assert got.shape == (3, 4)
    # np >= 5 and nq >= 5 worked by hand for each cell (nq >= 5 holds throughout).
    expected = [[False, False, False, True], [False, False, True, True],
                [False, True, True, True]]  # fmt: skip
    assert_array_equal(got, expected)
    assert not np.shares_memory(got, n)


def test_number_expressions():
    expr = parse_expression("n*p*q")
    assert expr.kind == "number"
    assert float(expr(36, 0.5)) == 9.0  # 36 * 0.5 * 0.5
    assert float(parse_expression("-n + 2**3 / 4")(1, 0.5)) == 1.0  # -1 + 8/4
    assert float(parse_expression("(n - 1) * (p + q)")(5, 0.3)) == 4.0  # q = 1 - p
    assert float(parse_expression("1e3")(1, 0.5)) == 1000.0


def test_chained_and_boolean():
    rule = parse_rule("5 <= n*p < 10")
    assert_array_equal(rule([50, 100, 200], 0.1), [True, False, False])  # np = 5, 10, 20
    assert_array_equal(parse_rule("not n > 5")([5, 6], 0.5), [True, False])
    assert_array_equal(parse_rule("n < 2 or n > 8")([1, 5, 9], 0.5), [True, False, True])
    assert_array_equal(parse_rule("n == 4")([4, 5], 0.5), [True, False])
    assert_array_equal(parse_rule("n != 4")([4, 5], 0.5), [False, True])
    assert_array_equal(parse_rule("(n > 1) and (p < 0.5 or q < 0.1)")([2, 2, 2], [0.2, 0.6, 0.95]),
                       [True, False, True])  # fmt: skip


def test_infinity_and_division_by_zero():
    # IEEE 754: 1e999 is inf, n/0 is inf; neither warns, and inf is not "close" to a finite value.
    assert bool(parse_rule("1e999 > n")(5, 0.5))
    assert bool(parse_rule("n/0 > 1e308")(5, 0.5))
    assert not bool(parse_rule("n/0 < 1e308")(5, 0.5))


def test_expression_object():
    a, b = parse_rule(NP5), parse_rule(NP5)
    assert isinstance(a, Expression) and a == b and hash(a) == hash(b)
    assert repr(a) == "<Expression condition: 'n*p >= 5 and n*q >= 5'>"
    assert parse_rule(a) is a


# ---- refusals: anything but arithmetic and comparisons in n, p, q ----

_ALLOWED = re.escape("allowed: numbers, n, p, q, + - * / **, unary -")


@pytest.mark.parametrize(
    ("text", "what"),
    [
        ("abs(n) > 1", "a function call"),
        ("__import__('os').system('true')", "a function call"),
        ("max(n, p) > 1", "a function call"),
        ("n.real > 1", "an attribute"),
        ("n.__class__ > 1", "an attribute"),
        ("(1).__class__ > n", "an attribute"),
        ("[n][0] > 1", "a subscript"),
        ("x > 1", "the name 'x'"),
        ("N > 1", "the name 'N'"),
        ("np >= 5", "the name 'np' (write n*p for np)"),
        ("npq > 9", "the name 'npq' (write n*p for np)"),
        ("e > n", "the name 'e'"),
        ("__builtins__ > n", "the name '__builtins__'"),
        ("(lambda: 1)() > n", "a function call"),
        ("lambda: n > 1", "a lambda"),
        ("'a' < n", "a string"),
        ("b'a' < n", "a bytes literal"),
        ("f'{n}' < n", "an f-string"),
        ("True", "the constant True"),
        ("None == n", "the constant None"),
        ("1j > n", "a complex number"),
        ("n if p else q", "a conditional expression"),
        ("(y := n) > 1", "an assignment expression"),
        ("[n] == [1]", "a list"),
        ("(n, p) == (1, 2)", "a tuple"),
        ("{n} == {1}", "a set"),
        ("{n: 1} == {}", "a dict"),
        ("[x for x in n] == 1", "a comprehension"),
        ("n // 2 > 1", "the operator //"),
        ("n % 2 == 0", "the operator %"),
        ("n @ p > 1", "the operator @"),
        ("n & 1 == 0", "the operator &"),
        ("(n > 1) | (p > 1)", "the operator |"),
        ("n ^ 1 == 0", "the operator ^"),
        ("n << 1 > 0", "the operator <<"),
        ("n >> 1 > 0", "the operator >>"),
        ("~n > 0", "the operator ~"),
        ("+n > 0", "unary +"),
        ("n is p", "the operator is"),
        ("n is not p", "the operator is not"),
        ("n in p", "the operator in"),
        ("n not in p", "the operator not in"),
        ("...", "the constant Ellipsis"),
    ],
)
def test_refuses_constructs(text, what):
    with pytest.raises(ValueError, match=r"^`rule` may not contain " + re.escape(what)) as info:
        parse_rule(text)
    assert re.search(_ALLOWED, str(info.value))
    assert str(info.value).endswith(f"Got {text!r}.")


@pytest.mark.parametrize(
    "text",
    ["import os", "n = 5", "n >", "n > 5; p", "def f(): pass", "n >= 5 and", "(n > 5"],
)
def test_refuses_what_is_not_an_expression(text):
    with pytest.raises(ValueError, match=r"^`rule` is not a valid expression: "):
        parse_rule(text)


def test_refuses_mixed_kinds():
    with pytest.raises(ValueError, match=r"uses the condition 'n > 5' as a number"):
        parse_rule("(n > 5) + 1 > 0")
    with pytest.raises(ValueError, match=r"uses the number 'n' as a condition"):
        parse_rule("n and p < 1")
    with pytest.raises(ValueError, match=r"uses the number 'n\*p' as a condition"):
        parse_rule("not n*p")
    with pytest.raises(ValueError, match=r"^`rule` must be a condition .*got the number "
                                         r"expression 'n\*p'\.$"):  # fmt: skip
        parse_rule("n*p")


def test_refuses_bad_input():
    with pytest.raises(TypeError, match=r"^`rule` must be a str; got int\.$"):
        parse_rule(5)
    with pytest.raises(ValueError, match=r"^`rule` must be an expression in n, p and q; got an "):
        parse_rule("   ")
    long = "n > 1 and " * (MAX_LENGTH // 10) + "n > 1"
    with pytest.raises(ValueError, match=rf"^`rule` must be at most {MAX_LENGTH} characters long"):
        parse_rule(long)
    with pytest.raises(ValueError, match=r"holds a number too large for float64"):
        parse_rule("1" * 400 + " > n")
    with pytest.raises(ValueError, match=r"nested too deeply"):
        parse_rule("-" * 100 + "n > 0")
    with pytest.raises(ValueError, match=r"^`--rule` may not"):
        parse_rule("abs(n) > 1", name="--rule")


# ---- evaluation against a direct numpy formula (hypothesis) ----

_LEAVES = st.sampled_from(
    [("n", lambda n, p: n), ("p", lambda n, p: p), ("q", lambda n, p: 1.0 - p),
     ("2", lambda n, p: 2.0), ("0.5", lambda n, p: 0.5), ("10", lambda n, p: 10.0),
     ("3.25", lambda n, p: 3.25)]
)  # fmt: skip
_OPS = {"+": np.add, "-": np.subtract, "*": np.multiply, "/": np.divide}


def _extend(children):
    binary = st.tuples(children, st.sampled_from(sorted(_OPS)), children).map(
        lambda t: (f"({t[0][0]} {t[1]} {t[2][0]})",
                   lambda n, p, a=t[0][1], op=_OPS[t[1]], b=t[2][1]: op(a(n, p), b(n, p)))
    )  # fmt: skip
    negate = children.map(lambda c: (f"-({c[0]})", lambda n, p, a=c[1]: np.negative(a(n, p))))
    power = st.tuples(children, st.sampled_from([2, 3])).map(
        lambda t: (f"({t[0][0]}) ** {t[1]}",
                   lambda n, p, a=t[0][1], k=t[1]: np.power(a(n, p), float(k)))
    )  # fmt: skip
    return binary | negate | power


_ARITHMETIC = st.recursive(_LEAVES, _extend, max_leaves=8)
_N = st.lists(st.integers(1, 10**6), min_size=1, max_size=5)
_P = st.floats(1e-6, 1 - 1e-6)


@settings(max_examples=150, deadline=None)
@given(expr=_ARITHMETIC, n=_N, p=_P)
def test_arithmetic_matches_numpy(expr, n, p):
    text, direct = expr
    n_arr = np.asarray(n, dtype=np.float64)
    with np.errstate(all="ignore"):
        expected = np.broadcast_to(direct(n_arr, np.float64(p)), n_arr.shape)
    got = parse_expression(text)(n, p)
    assert got.dtype == np.float64
    assert_array_equal(got, expected)  # the same IEEE operations in the same order


_SYMBOLS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal,
            "==": np.equal, "!=": np.not_equal}  # fmt: skip


@settings(max_examples=150, deadline=None)
@given(left=_ARITHMETIC, symbol=st.sampled_from(sorted(_SYMBOLS)), right=_ARITHMETIC, n=_N,
       p=_P)  # fmt: skip
def test_comparison_matches_numpy_away_from_ties(left, symbol, right, n, p):
    n_arr = np.asarray(n, dtype=np.float64)
    with np.errstate(all="ignore"):
        a = np.broadcast_to(left[1](n_arr, np.float64(p)), n_arr.shape)
        b = np.broadcast_to(right[1](n_arr, np.float64(p)), n_arr.shape)
        expected = _SYMBOLS[symbol](a, b)
        # Sides within 1e-12 (relative) count as equal by design: compare elsewhere only.
        diff = np.abs(a - b)
        tied = (a == b) | (np.isfinite(diff) & (diff <= 1e-12 * np.maximum(np.abs(a), np.abs(b))))
    got = parse_rule(f"{left[0]} {symbol} {right[0]}")(n, p)
    keep = ~tied & np.isfinite(a) & np.isfinite(b)
    assert_array_equal(got[keep], expected[keep])
    if symbol in ("<=", ">=", "=="):
        assert got[tied].all()
    else:
        assert not got[tied].any()


@settings(max_examples=100, deadline=None)
@given(n=_N, p=_P, c1=st.floats(0.5, 50), c2=st.floats(0.5, 50))
def test_boolean_combinations_match_numpy(n, p, c1, c2):
    n_arr = np.asarray(n, dtype=np.float64)
    q = 1.0 - p
    a, b = n_arr * p > c1, n_arr * q < c2
    near = (np.abs(n_arr * p - c1) <= 1e-9 * c1) | (np.abs(n_arr * q - c2) <= 1e-9 * c2)
    for text, expected in [
        (f"n*p > {c1!r} and n*q < {c2!r}", a & b),
        (f"n*p > {c1!r} or n*q < {c2!r}", a | b),
        (f"not (n*p > {c1!r}) and not n*q < {c2!r}", ~a & ~b),
    ]:
        got = parse_rule(text)(n, p)
        assert_array_equal(got[~near], expected[~near])
