"""The n and p axes of an atlas: grid specs (`parse_n`, `parse_p`) and the default grid."""

import math
import re

import numpy as np

from atlas.notation import format_p, plural, read_probability

__all__ = ["DEFAULT_N_SPEC", "DEFAULT_P_SPEC", "ROUND_P", "default_n", "default_p",
           "describe_grid", "parse_n", "parse_p"]  # fmt: skip

MAX_VALUES = 10**7  # largest axis accepted; checked per item too, which bounds memory
N_MAX = 2**53  # every integer up to here is exact in float64, which log spacing uses
REL_TOL = 1e-12  # a generated p this close (relative) to another p is the same point
DEFAULT_N_SPEC = "1:2000,log:2000:100000000:471"  # 470 steps over 4.699 decades: 100.02/decade

_LOW_P = (0.0001, 0.0002, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.025, 0.05,
          0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45)  # fmt: skip
#: Round values of p in the default grid; the mirrors ``round(1 - x, 12)`` print as decimals.
ROUND_P = _LOW_P + (0.5,) + tuple(round(1 - x, 12) for x in reversed(_LOW_P))
DEFAULT_P_SPEC = "logit:0.0001:0.9999:161," + ",".join(repr(x) for x in ROUND_P)
_FORMS = {"n": "'k', 'a:b' or 'log:a:b:m'", "p": "'x', 'lin:a:b:m', 'log:a:b:m' or 'logit:a:b:m'"}


def _error(name, rule, item, spec=None):  # names the argument, the rule and the bad item
    where = f"{item!r}" if spec is None else f"item {item!r} in {spec!r}"
    return ValueError(f"`{name}` {rule}; got {where}.")


def _number(name, token, item, spec):
    if name == "p":  # also a fraction 1/3 or a percentage 5%
        value = read_probability(token)
        if value is None:
            raise _error(name, f"items must be {_FORMS[name]}", item, spec)
        return value
    try:
        return float(token)
    except ValueError:
        raise _error(name, f"items must be {_FORMS[name]}", item, spec) from None


def _integer(token, item, spec):
    if re.fullmatch(r"[+-]?[0-9]+", token):
        return int(token)
    x = _number("n", token, item, spec)  # integral decimals such as 1e8 are accepted
    if not (math.isfinite(x) and x.is_integer()):
        raise _error("n", "values must be integers", item, spec)
    return int(x)


def _count(name, token, item, spec):
    if not re.fullmatch(r"[0-9]+", token) or int(token) < 2:
        raise _error(name, "point counts m must be integers >= 2", item, spec)
    if int(token) > MAX_VALUES:  # refused before anything is allocated
        raise _error(name, f"must have at most {MAX_VALUES} values", item, spec)
    return int(token)


def _check_p(values, item, spec=None):
    if not np.all((values > 0) & (values < 1)):  # NaN fails too
        raise _error("p", "values must be in the open interval (0, 1)", item, spec)
    return values


def _unique(v):  # np.unique, which in numpy 2.4 takes ~10 s for 10**7 integers, not 0.1 s
    v = np.sort(v)
    return v[np.concatenate(([True], v[1:] != v[:-1]))]


def _cap(name, v, spec):  # the whole axis: at most MAX_VALUES distinct values
    if v.size <= MAX_VALUES:
        return v
    raise ValueError(f"`{name}` must have at most {MAX_VALUES} values; got {v.size} in {spec!r}.")


def _from_values(name, spec):  # an axis given as numbers rather than as a spec string
    v = np.atleast_1d(np.asarray(spec))
    if v.dtype.kind not in "iuf" or v.ndim != 1:
        got = f"{type(spec).__name__} of dtype {v.dtype} and ndim {v.ndim}"
        raise TypeError(f"`{name}` must be a spec string or a 1-d sequence of numbers; got {got}.")
    if not 0 < v.size <= MAX_VALUES:
        raise ValueError(f"`{name}` must have 1 to {MAX_VALUES} values; got {v.size}.")
    if name == "p":
        return _unique(_check_p(v.astype(np.float64), v[~((v > 0) & (v < 1))].tolist()))
    integral = np.isfinite(v) & (np.floor(v) == v)
    if not np.all(integral):
        raise _error("n", "values must be integers", v[~integral].tolist())
    if v.min() < 1 or v.max() > N_MAX:
        raise _error("n", f"values must be from 1 to {N_MAX}", v[(v < 1) | (v > N_MAX)].tolist())
    return _unique(v.astype(np.int64))


def _n_item(item, spec):
    parts = [t.strip() for t in item.split(":")]
    if len(parts) == 4 and parts[0] == "log":
        a, b = _integer(parts[1], item, spec), _integer(parts[2], item, spec)
        m = _count("n", parts[3], item, spec)
    elif len(parts) in (1, 2) and parts[0] != "log":
        a, b, m = _integer(parts[0], item, spec), _integer(parts[-1], item, spec), None
    else:
        raise _error("n", f"items must be {_FORMS['n']}", item, spec)
    if min(a, b) < 1 or max(a, b) > N_MAX:
        raise _error("n", f"values must be from 1 to {N_MAX}", item, spec)
    if a > b:
        raise _error("n", "ranges must have a <= b", item, spec)
    if m is None:
        if b - a + 1 > MAX_VALUES:  # refused before anything is allocated
            raise _error("n", f"must have at most {MAX_VALUES} values", item, spec)
        return np.arange(a, b + 1, dtype=np.int64)
    return np.concatenate(([a], np.rint(_geomspace(a, b, m)[1:-1]).astype(np.int64), [b]))


# Log and logit spacing with the standard library's exp, log and pow (the C library's), not
# numpy's: numpy picks its loops by the processor, and its AVX-512 loops round differently, which
# moved 8 of the 195 default p by an ulp (atlas.floatpath). The operations are numpy's own
# (np.geomspace, np.logaddexp), so the values are those numpy gives on the reference path.
def _geomspace(a, b, m):
    """numpy.geomspace(a, b, m) for 0 < a <= b, the same on every processor."""
    y = np.linspace(math.log10(a), math.log10(b), m)
    out = np.array([math.pow(10.0, v) for v in y.tolist()])
    out[0], out[-1] = a, b
    return out


def _logistic(x):
    """1 / (1 + e^-x) as exp(-logaddexp(0, -x)), numpy's formula, the same on every processor."""

    def log_add_exp(v):  # logaddexp(0, v), as numpy computes it
        if v == 0.0:
            return math.log(2.0)
        if -v > 0:
            return math.log1p(math.exp(v))
        return v + math.log1p(math.exp(-v))

    return np.array([math.exp(-log_add_exp(-v)) for v in x.tolist()])


def parse_n(spec):
    """Parse the n axis of a grid.

    Parameters
    ----------
    spec : str or sequence of int
        Comma-separated ``k``, ``a:b`` (integers a..b) and ``log:a:b:m`` (the m integers
        ``round(a (b/a)^(i/(m-1)))``, i = 0..m-1); ``1e8`` reads as an integer. Or the values.

    Returns
    -------
    numpy.ndarray
        Sorted unique ``int64`` values, ``1 <= n <= 2**53``, at most 10**7 of them.

    Raises
    ------
    ValueError
        For a malformed item, n < 1, a non-integer, a > b, m < 2 or over 10**7 values.
    TypeError
        If `spec` is neither a string nor a sequence of numbers.

    Examples
    --------
    >>> parse_n("1:3,10,log:10:1000:3")
    array([   1,    2,    3,   10,  100, 1000])
    """
    if not isinstance(spec, str):
        return _from_values("n", spec)
    return _cap("n", _unique(np.concatenate([_n_item(i, spec) for i in spec.split(",")])), spec)


def _p_item(item, spec):
    parts = [t.strip() for t in item.split(":")]
    if len(parts) == 1:
        return _check_p(np.array([_number("p", parts[0], item, spec)]), item, spec), [True]
    if len(parts) != 4 or parts[0] not in ("lin", "log", "logit"):
        raise _error("p", f"items must be {_FORMS['p']}", item, spec)
    a, b = (_number("p", t, item, spec) for t in parts[1:3])
    _check_p(np.array([a, b]), item, spec)
    if a > b:
        raise _error("p", "ranges must have a <= b", item, spec)
    m = _count("p", parts[3], item, spec)
    if parts[0] == "lin":
        values = np.linspace(a, b, m)
    elif parts[0] == "log":
        values = _geomspace(a, b, m)
    else:
        x = np.linspace(math.log(a) - math.log1p(-a), math.log(b) - math.log1p(-b), m)
        if abs((1 - b) - a) <= REL_TOL * a:  # mirrored endpoints: make the log-odds exactly odd
            x = (x - x[::-1]) / 2
        values = _logistic(x)  # 1/(1 + e^-x), accurate in both tails
    values = np.clip(values, a, b)
    values[0], values[-1] = a, b
    return values, np.isin(np.arange(m), (0, m - 1))  # the typed ends count as explicit


def parse_p(spec):
    """Parse the p axis of a grid.

    Parameters
    ----------
    spec : str or sequence of float
        Comma-separated items: a number ``x``; ``lin:a:b:m``, ``log:a:b:m`` or ``logit:a:b:m``
        for m points evenly spaced in p, in log p or in log(p/(1-p)). Each number may also be
        written as a fraction ``1/3`` or a percentage ``5%``. Or the values.

    Returns
    -------
    numpy.ndarray
        Sorted unique ``float64`` values, ``0 < p < 1``.

    Raises
    ------
    ValueError
        For a malformed item, p outside (0, 1), NaN, a > b, m < 2 or over 10**7 values.
    TypeError
        If `spec` is neither a string nor a sequence of numbers.

    Notes
    -----
    ``logit:a:b:m`` takes ``p_i = 1 / (1 + exp(-x_i))`` with x_i evenly spaced from
    ``log(a/(1-a))`` to ``log(b/(1-b))``; if ``1 - b == a`` (to ``1e-12`` relative) the x_i are
    made exactly odd, so ``p`` and ``1 - p`` are both present. Generated points keep full
    precision, but one within ``1e-12`` (relative) of a value typed in the spec (a single value
    or the end of a range) gives way to it, so round values stay exact; of generated points that
    close together one is kept.

    Examples
    --------
    >>> parse_p("logit:0.1:0.9:3,0.25")
    array([0.1 , 0.25, 0.5 , 0.9 ])
    """
    if not isinstance(spec, str):
        return _from_values("p", spec)
    items = [_p_item(item, spec) for item in spec.split(",")]
    values = np.concatenate([v for v, _ in items])
    explicit = np.concatenate([e for _, e in items])
    order = np.lexsort((~explicit, values))
    values, explicit = values[order], explicit[order]
    # Runs of points each within REL_TOL of the last: keep their explicit values, else the first.
    start = np.concatenate(([True], np.diff(values) > REL_TOL * values[1:]))
    cluster = np.cumsum(start) - 1
    keep = explicit | (start & (np.bincount(cluster, weights=explicit) == 0)[cluster])
    return _cap("p", _unique(values[keep]), spec)


def default_n():
    """The default n axis: every integer to 2000, then at least 100 points a decade to 10**8.

    >>> n = default_n(); (n.size, int(n[-1]))
    (2470, 100000000)
    """
    return parse_n(DEFAULT_N_SPEC)


def default_p():
    """The default p axis: 161 logit-spaced points, symmetric about 1/2, and `ROUND_P`.

    >>> p = default_p(); (p.size, 0.5 in p, 0.975 in p)
    (195, True, True)
    """
    return parse_p(DEFAULT_P_SPEC)


def describe_grid(n, p):
    """One-line summary of a grid: the count and range of each axis.

    Parameters
    ----------
    n, p : str or sequence
        Anything `parse_n` and `parse_p` accept.

    Returns
    -------
    str

    Examples
    --------
    >>> describe_grid("1:10", "0.1,0.5")
    'n: 10 values from 1 to 10; p: 2 values from 0.1 to 0.5; 20 (n, p) points'
    >>> describe_grid("1000000", "0.9999999")
    'n: 1 value, 1000000; p: 1 value, 0.9999999; 1 (n, p) point'
    """
    n, p = parse_n(n), parse_p(p)

    def axis(name, values, show):
        if values.size == 1:
            return f"{name}: 1 value, {show(values[0])}"
        return f"{name}: {values.size} values from {show(values[0])} to {show(values[-1])}"

    points = plural(n.size * p.size, "(n, p) point")
    return f"{axis('n', n, int)}; {axis('p', p, format_p)}; {points}"
