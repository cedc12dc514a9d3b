"""Rules of thumb as expressions in n, p and q, parsed safely and evaluated over arrays.

A rule such as ``"n*p >= 5 and n*q >= 5"`` is parsed with :mod:`ast` and checked against a
whitelist: numbers, the names ``n``, ``p`` and ``q``, the operators ``+ - * / **``, unary ``-``,
the comparisons ``< <= > >= == !=`` (chains included), ``and``, ``or``, ``not`` and
parentheses. Anything else (a call, an attribute, a subscript, another name, a lambda, a string,
...) is refused with a ValueError that names it. The checked tree is compiled into nested
numpy functions; :func:`eval` is never used.

The classic rules are the constants `NP5`, `NP10`, `NPQ9` and `NPQ5`; `CLASSIC_RULES` lists
them and `RULE_NAMES` gives each the name a textbook uses. The audit (`AUDIT_RULES`) adds the
skewness rule `SKEWNESS` and the 3-sigma rule `THREE_SIGMA`, with their sources in
`RULE_SOURCES` (:func:`rule_source`).
"""

import ast
import operator

import numpy as np

MAX_LENGTH = 500  # characters of an expression; bounds the parser's work and the tree's depth
MAX_DEPTH = 60  # nesting of the checked tree
REL_TOL = 1e-12  # comparisons: sides this close (relative) are equal, see `Expression`

NP5 = "n*p >= 5 and n*q >= 5"
NP10 = "n*p >= 10 and n*q >= 10"
NPQ9 = "n*p*q > 9"
NPQ5 = "n*p*q >= 5"
CLASSIC_RULES = (NP5, NP10, NPQ9, NPQ5)
# |skewness| = |q - p| / sqrt(npq) < 0.3, squared (both sides are non-negative); Box, Hunter and
# Hunter, Statistics for Experimenters (from memory).
SKEWNESS = "n > 5 and (q - p)**2 < 0.09*n*p*q"
# np - 3 sqrt(npq) > 0 and np + 3 sqrt(npq) < n, i.e. n > 9q/p and n > 9p/q; common practice,
# no source. Written as np > 3 sqrt(npq) and nq > 3 sqrt(npq), so that the comparison's two
# sides are the quantities themselves and a boundary (n = 21, p = 0.3) holds as written.
THREE_SIGMA = "n*p > 3*(n*p*q)**0.5 and n*q > 3*(n*p*q)**0.5"
AUDIT_RULES = (*CLASSIC_RULES, SKEWNESS, THREE_SIGMA)
RULE_NAMES = {
    NP5: "np >= 5 and nq >= 5",
    NP10: "np >= 10 and nq >= 10",
    NPQ9: "npq > 9",
    NPQ5: "npq >= 5",
    SKEWNESS: "n > 5 and |q - p|/sqrt(npq) < 0.3",
    THREE_SIGMA: "np - 3 sqrt(npq) > 0 and np + 3 sqrt(npq) < n",
}
RULE_SOURCES = {
    SKEWNESS: "Box, Hunter and Hunter, Statistics for Experimenters (from memory)",
    THREE_SIGMA: "common practice, no source",
}

_ALLOWED = "numbers, n, p, q, + - * / **, unary -, < <= > >= == !=, and, or, not, parentheses"
_BINARY = {ast.Add: np.add, ast.Sub: np.subtract, ast.Mult: np.multiply, ast.Div: np.divide,
           ast.Pow: np.power}  # fmt: skip
_COMPARE = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">=", ast.Eq: "==",
            ast.NotEq: "!="}  # fmt: skip
# Names of the refused constructs, for the error message.
_REFUSED = {
    ast.Call: "a function call",
    ast.Attribute: "an attribute",
    ast.Subscript: "a subscript",
    ast.Lambda: "a lambda",
    ast.IfExp: "a conditional expression",
    ast.NamedExpr: "an assignment expression (:=)",
    ast.List: "a list",
    ast.Tuple: "a tuple",
    ast.Set: "a set",
    ast.Dict: "a dict",
    ast.ListComp: "a comprehension",
    ast.SetComp: "a comprehension",
    ast.DictComp: "a comprehension",
    ast.GeneratorExp: "a generator expression",
    ast.JoinedStr: "an f-string",
    ast.Starred: "a starred expression",
    ast.Await: "an await expression",
    ast.Yield: "a yield expression",
    ast.YieldFrom: "a yield expression",
    ast.Slice: "a slice",
    ast.FloorDiv: "the operator //",
    ast.Mod: "the operator %",
    ast.MatMult: "the operator @",
    ast.BitAnd: "the operator &",
    ast.BitOr: "the operator |",
    ast.BitXor: "the operator ^",
    ast.LShift: "the operator <<",
    ast.RShift: "the operator >>",
    ast.Invert: "the operator ~",
    ast.UAdd: "unary +",
    ast.Is: "the operator is",
    ast.IsNot: "the operator is not",
    ast.In: "the operator in",
    ast.NotIn: "the operator not in",
}


class Expression:
    """A checked expression in n, p and q, callable on arrays.

    Parameters
    ----------
    text : str
        The expression as written.
    kind : {"number", "condition"}
        What it yields: a number (arithmetic) or a condition (a comparison or a combination of
        comparisons).
    function : callable
        ``function(n, p, q) -> numpy.ndarray``, built by :func:`parse_expression`.

    Notes
    -----
    Values are float64; q = 1 - p. Arithmetic follows IEEE 754 (a division by zero gives inf,
    without a warning). A comparison treats its two sides as equal when ``a == b`` or when
    ``|a - b|`` is finite and at most ``REL_TOL * max(|a|, |b|)``, so that a decimal boundary
    holds as written despite
    binary rounding: at n = 100, p = 0.05 the product n*p is 5 and ``n*p >= 5`` is true, and at
    n = 36, p = 0.5 ``n*p*q > 9`` is false.
    """

    def __init__(self, text, kind, function):
        self.text = text
        self.kind = kind
        self._function = function

    def __call__(self, n, p):
        """Evaluate at broadcast arrays ``n`` and ``p``.

        Parameters
        ----------
        n, p : array_like
            Numbers of trials and success probabilities, broadcast together; q = 1 - p.

        Returns
        -------
        numpy.ndarray
            bool for a condition, float64 for a number, of the broadcast shape.
        """
        n_arr = np.asarray(n, dtype=np.float64)
        p_arr = np.asarray(p, dtype=np.float64)
        n_arr, p_arr = np.broadcast_arrays(n_arr, p_arr)
        with np.errstate(all="ignore"):
            out = self._function(n_arr, p_arr, 1.0 - p_arr)
        dtype = bool if self.kind == "condition" else np.float64
        return np.broadcast_to(np.asarray(out, dtype=dtype), n_arr.shape).copy()

    def __repr__(self):
        return f"<Expression {self.kind}: {self.text!r}>"

    def __eq__(self, other):
        return isinstance(other, Expression) and (self.text, self.kind) == (other.text, other.kind)

    def __hash__(self):
        return hash((self.text, self.kind))


def parse_expression(text, *, name="rule"):
    """Parse and check an expression in n, p and q.

    Parameters
    ----------
    text : str
        At most ``MAX_LENGTH`` characters, e.g. ``"n*p >= 5 and n*q >= 5"`` or ``"n*p*q"``.
    name : str, optional
        The argument's name in error messages.

    Returns
    -------
    Expression

    Raises
    ------
    TypeError
        If ``text`` is not a str.
    ValueError
        If it is empty, too long, not an expression, uses anything outside the whitelist
        (the message names the construct), or mixes numbers and conditions (``(n > 5) + 1``).

    Examples
    --------
    >>> rule = parse_expression("n*p >= 5 and n*q >= 5")
    >>> rule([10, 100], 0.05).tolist()
    [False, True]
    >>> parse_expression("n*p*q")(36, 0.5).item()
    9.0
    """
    if not isinstance(text, str):
        raise TypeError(f"`{name}` must be a str; got {type(text).__name__}.")
    if not text.strip():
        raise ValueError(f"`{name}` must be an expression in n, p and q; got an empty string.")
    if len(text) > MAX_LENGTH:
        raise ValueError(
            f"`{name}` must be at most {MAX_LENGTH} characters long; got {len(text)} characters."
        )
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as err:
        raise ValueError(f"`{name}` is not a valid expression: {err.msg} in {text!r}.") from None
    except (RecursionError, MemoryError):
        raise ValueError(f"`{name}` is nested too deeply: {text!r}.") from None
    kind, function = _compile(tree.body, name, text, 0)
    return Expression(text, kind, function)


def parse_rule(text, *, name="rule"):
    """Parse a rule: an expression that is a condition on n, p and q.

    Parameters
    ----------
    text : str or Expression
        E.g. ``"n*p*q > 9"``.
    name : str, optional
        The argument's name in error messages.

    Returns
    -------
    Expression
        Of kind ``"condition"``.

    Raises
    ------
    TypeError, ValueError
        As :func:`parse_expression`; ValueError also if the expression is a number rather
        than a condition.

    Examples
    --------
    >>> parse_rule(NPQ9)([36, 37], 0.5).tolist()
    [False, True]
    """
    expr = text if isinstance(text, Expression) else parse_expression(text, name=name)
    if expr.kind != "condition":
        raise ValueError(
            f"`{name}` must be a condition (a comparison such as 'n*p >= 5'); got the number "
            f"expression {expr.text!r}."
        )
    return expr


def rule_name(rule):
    """The textbook name of a classic rule ("np >= 5 and nq >= 5"), else the text as written."""
    text = rule.text if isinstance(rule, Expression) else str(rule)
    return RULE_NAMES.get(text, text)


def rule_source(rule):
    """Where a rule comes from, when known (``RULE_SOURCES``), else None.

    >>> rule_source(THREE_SIGMA), rule_source("n > 3")
    ('common practice, no source', None)
    """
    text = rule.text if isinstance(rule, Expression) else str(rule)
    return RULE_SOURCES.get(text)


def _refuse(node, name, text):
    """Raise the ValueError for a construct outside the whitelist."""
    if isinstance(node, ast.Name):
        hint = " (write n*p for np)" if len(node.id) > 1 and set(node.id) <= set("npq") else ""
        what = f"the name {node.id!r}{hint}"
    elif isinstance(node, ast.Constant):
        value = node.value
        if isinstance(value, bool) or value is None:
            what = f"the constant {value!r}"
        elif isinstance(value, str):
            what = "a string"
        elif isinstance(value, bytes):
            what = "a bytes literal"
        elif isinstance(value, complex):
            what = "a complex number"
        else:
            what = f"the constant {value!r}"
    else:
        what = _REFUSED.get(type(node), f"a {type(node).__name__} expression")
    raise ValueError(f"`{name}` may not contain {what}; allowed: {_ALLOWED}. Got {text!r}.")


def _number(value, name, text):
    try:
        number = float(value)
    except OverflowError:
        raise ValueError(f"`{name}` holds a number too large for float64; got {text!r}.") from None
    return lambda n, p, q: number


def _compile(node, name, text, depth):
    """Check ``node`` against the whitelist and return (kind, function(n, p, q))."""
    if depth > MAX_DEPTH:
        raise ValueError(f"`{name}` is nested too deeply (more than {MAX_DEPTH} levels): {text!r}.")
    depth += 1
    if isinstance(node, ast.Constant):
        if type(node.value) in (int, float):
            return "number", _number(node.value, name, text)
        _refuse(node, name, text)
    if isinstance(node, ast.Name):
        if node.id == "n":
            return "number", lambda n, p, q: n
        if node.id == "p":
            return "number", lambda n, p, q: p
        if node.id == "q":
            return "number", lambda n, p, q: q
        _refuse(node, name, text)
    if isinstance(node, ast.BinOp):
        ufunc = _BINARY.get(type(node.op))
        if ufunc is None:
            _refuse(node.op, name, text)
        left = _operand(node.left, "number", name, text, depth)
        right = _operand(node.right, "number", name, text, depth)
        return "number", lambda n, p, q: ufunc(left(n, p, q), right(n, p, q))
    if isinstance(node, ast.UnaryOp):
        if isinstance(node.op, ast.USub):
            inner = _operand(node.operand, "number", name, text, depth)
            return "number", lambda n, p, q: np.negative(inner(n, p, q))
        if isinstance(node.op, ast.Not):
            inner = _operand(node.operand, "condition", name, text, depth)
            return "condition", lambda n, p, q: np.logical_not(inner(n, p, q))
        _refuse(node.op, name, text)
    if isinstance(node, ast.Compare):
        for op in node.ops:
            if type(op) not in _COMPARE:
                _refuse(op, name, text)
        sides = [_operand(x, "number", name, text, depth) for x in (node.left, *node.comparators)]
        symbols = [_COMPARE[type(op)] for op in node.ops]
        return "condition", _chain(sides, symbols)
    if isinstance(node, ast.BoolOp):
        parts = [_operand(x, "condition", name, text, depth) for x in node.values]
        combine = np.logical_and if isinstance(node.op, ast.And) else np.logical_or
        return "condition", _fold(parts, combine)
    _refuse(node, name, text)


def _operand(node, want, name, text, depth):
    """Compile ``node`` and check that it yields ``want`` ("number" or "condition")."""
    kind, function = _compile(node, name, text, depth)
    if kind != want:
        piece = ast.get_source_segment(text.strip(), node) or ast.dump(node)
        if want == "number":
            raise ValueError(
                f"`{name}` uses the condition {piece!r} as a number; a comparison yields true "
                f"or false, not a value. Got {text!r}."
            )
        raise ValueError(
            f"`{name}` uses the number {piece!r} as a condition; compare it with something "
            f"(e.g. {piece} >= 5). Got {text!r}."
        )
    return function


def _compare(symbol, a, b):
    """``a <symbol> b`` with sides within REL_TOL (relative) counted as equal."""
    diff = np.abs(a - b)
    scale = np.maximum(np.abs(a), np.abs(b))
    close = (a == b) | (np.isfinite(diff) & (diff <= REL_TOL * scale))
    if symbol == "==":
        return close
    if symbol == "!=":
        return ~close
    strict = {"<": operator.lt, "<=": operator.lt, ">": operator.gt, ">=": operator.gt}[symbol]
    result = strict(a, b) & ~close
    return result | close if symbol in ("<=", ">=") else result


def _chain(sides, symbols):
    """A comparison chain a < b <= c as (a < b) and (b <= c), each side evaluated once."""

    def function(n, p, q):
        values = [side(n, p, q) for side in sides]
        result = _compare(symbols[0], values[0], values[1])
        for i in range(1, len(symbols)):
            result = np.logical_and(result, _compare(symbols[i], values[i], values[i + 1]))
        return result

    return function


def _fold(parts, combine):
    def function(n, p, q):
        result = parts[0](n, p, q)
        for part in parts[1:]:
            result = combine(result, part(n, p, q))
        return result

    return function
