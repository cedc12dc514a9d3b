"""Numbers written for people and for files: every p and n reads back as the same value, and an
error is written with the digits its source holds.

- :func:`format_p`: the shortest text that reads back as the same float (Python's ``repr``,
  without the exponent's leading zero): 0.9999999 stays ``0.9999999``, never ``1``.
- :func:`error_digits`: the significant digits an error holds: 7 for a float32 atlas (what
  its ``error_precision`` attribute says), 17 for float64 (written as the shortest round trip).
- :func:`rounded`: a float cut to those digits, for JSON.
- :func:`value_digits`, :func:`format_value`: an error with no more digits than its accuracy
  leaves it; :func:`bound_up`, :func:`format_bound`: a bound (an accuracy, an upper limit)
  rounded *up* to a few digits, so that it stays a bound.
- :func:`parse_probability`: a command-line p as a number, a fraction ``a/b`` or a percentage
  (:func:`read_probability` without the error).
- :func:`plural`: "1 value", "2 values".
"""

import math
from fractions import Fraction

__all__ = [
    "FLOAT32_DIGITS",
    "FLOAT64_DIGITS",
    "bound_up",
    "error_digits",
    "format_bound",
    "format_n",
    "format_p",
    "format_p_brief",
    "format_beside",
    "format_value",
    "parse_probability",
    "plural",
    "read_probability",
    "rounded",
    "value_digits",
]

#: Significant digits of a float32 error (the atlas's ``error_precision`` attribute).
FLOAT32_DIGITS = 7
#: Significant digits that write any float64 so that it reads back unchanged.
FLOAT64_DIGITS = 17


def format_p(p):
    """A p (or any float) as the shortest text that reads back as the same float.

    Examples
    --------
    >>> [format_p(x) for x in (0.1, 0.9999999, 1 / 3, 1e-05, 0.5)]
    ['0.1', '0.9999999', '0.3333333333333333', '1e-5', '0.5']
    """
    text = repr(float(p))
    mantissa, sep, exponent = text.partition("e")
    if sep:
        sign = "-" if exponent.startswith("-") else ""
        text = f"{mantissa}e{sign}{exponent.lstrip('+-').lstrip('0') or '0'}"
    return text


def format_p_brief(p, digits=4):
    """A p for a narrow table cell: whole when it has at most ``digits`` significant digits,
    else rounded to ``digits`` and marked with "≈" so that nobody takes it for the exact value.

    Machine-readable outputs (csv, JSON) use :func:`format_p`, which always reads back.

    Examples
    --------
    >>> [format_p_brief(x) for x in (0.1, 0.0005, 0.004987164074638706, 0.99999994)]
    ['0.1', '0.0005', '≈0.004987', '≈0.9999999']
    """
    whole = format_p(p)
    short = f"{float(p):.{digits}g}"
    while float(short) in (0.0, 1.0) and float(p) not in (0.0, 1.0):  # never "≈1" for p < 1
        digits += 1
        short = f"{float(p):.{digits}g}"
    return whole if float(short) == float(p) else f"≈{short}"


def format_beside(value, other, digits=4):
    """``value`` with the fewest significant digits (at least ``digits``) that tell it apart
    from ``other``: an error just above a tolerance never reads as the tolerance itself.

    Examples
    --------
    >>> format_beside(0.0010000123, 0.001), format_beside(0.0123456, 0.01)
    ('0.00100001', '0.01235')
    """
    for d in range(digits, 18):
        text = f"{float(value):.{d}g}"
        if float(text) != float(other):
            return text
    return format_p(value)


def format_n(n):
    """An n as the integer it is (no rounding, no exponent).

    >>> format_n(100000000)
    '100000000'
    """
    return str(int(n))


def error_digits(precision):
    """The significant digits of errors stored at ``precision``.

    Parameters
    ----------
    precision : str or numpy.dtype
        An ``error_precision`` attribute ("float32 (7 significant digits)", "float64") or a
        dtype.

    Returns
    -------
    int
        7 for float32, 17 for float64 (the digits that write any float64 exactly).

    Examples
    --------
    >>> error_digits("float32 (7 significant digits)"), error_digits("float64")
    (7, 17)
    """
    return FLOAT32_DIGITS if str(precision).startswith("float32") else FLOAT64_DIGITS


def rounded(value, digits):
    """``value`` as a float with at most ``digits`` significant digits (17: unchanged).

    >>> rounded(0.04006076604127884, 7), rounded(0.04006076604127884, 17)
    (0.04006077, 0.04006076604127884)
    """
    if value is None or digits >= FLOAT64_DIGITS or not math.isfinite(value):
        return value
    return float(f"{value:.{digits}g}")


def bound_up(value, digits=2):
    """``value`` rounded *up* to ``digits`` significant digits: never below ``value``.

    >>> bound_up(1.6e-15), bound_up(1.61e-15), bound_up(3e-15, 1), bound_up(0.0)
    (1.6e-15, 1.7e-15, 3e-15, 0.0)
    """
    value = float(value)
    if not math.isfinite(value) or value <= 0.0:
        return value
    out = float(f"{value:.{digits}g}")
    if out < value:  # rounded down: one unit of the last digit kept, then rounded again
        unit = 10.0 ** (math.floor(math.log10(out)) - digits + 1)
        out = float(f"{out + unit:.{digits}g}")
        if out < value:  # pragma: no cover - guards the text rounding of out + unit
            out = math.nextafter(value, math.inf)
    return out


def format_bound(value, digits=2):
    """A bound for people: :func:`bound_up` written with those digits.

    >>> format_bound(1.61e-15), format_bound(2.6e-15, 1)
    ('1.7e-15', '3e-15')
    """
    return f"{bound_up(value, digits):.{digits}g}"


def value_digits(value, accuracy, digits=FLOAT64_DIGITS):
    """The significant digits ``value`` has when it is known to within ``accuracy``.

    Those down to the place of the accuracy's leading digit, at least 1 and at most ``digits``
    (the digits it is stored with).

    >>> value_digits(0.04006076604127884, 3e-15), value_digits(2.654e-9, 6e-12, 7)
    (14, 4)
    """
    value, accuracy = abs(float(value)), float(accuracy)
    if not (math.isfinite(value) and value > 0.0) or not accuracy > 0.0:
        return digits
    has = math.floor(math.log10(value)) - math.floor(math.log10(accuracy)) + 1
    return max(1, min(digits, has))


def format_value(value, accuracy, digits=4):
    """``value`` written with no more digits than it has (:func:`value_digits`), at most
    ``digits``.

    >>> format_value(0.04006076604127884, 3e-15), format_value(2.654321e-9, 6e-12)
    ('0.04006', '2.654e-09')
    """
    return f"{float(value):.{value_digits(value, accuracy, digits)}g}"


def parse_probability(text, option):
    """A command-line probability: ``0.05``, ``1e-3``, a fraction ``1/20`` or a percentage
    ``5%``, as a float (the nearest to the exact value). Its range is left to the API.

    Parameters
    ----------
    text : str
    option : str
        The option's name for the message (``"--p"``).

    Returns
    -------
    float

    Raises
    ------
    ValueError
        If ``text`` is none of the three forms.

    Examples
    --------
    >>> parse_probability("1/3", "--p"), parse_probability("5%", "--p")
    (0.3333333333333333, 0.05)
    >>> parse_probability("0.3%", "--p")
    0.003
    >>> parse_probability("five", "--p")
    Traceback (most recent call last):
    ...
    ValueError: `--p` is not a number: got 'five' (write 0.05, 1/20 or 5%).
    """
    value = read_probability(text)
    if value is None:
        raise ValueError(
            f"`{option}` is not a number: got {str(text).strip()!r} (write 0.05, 1/20 or 5%)."
        )
    return value


def read_probability(text):
    """``text`` read as a number, a fraction ``a/b`` or a percentage ``x%``; None if it is none.

    >>> read_probability("1/4"), read_probability("2.5%"), read_probability("1/0")
    (0.25, 0.025, None)
    """
    text = str(text).strip()
    try:
        return float(text)  # also 'nan' and 'inf', for the API to refuse by their value
    except ValueError:
        pass
    try:
        if text.endswith("%"):
            return float(Fraction(text[:-1].strip()) / 100)
        top, sep, bottom = text.partition("/")
        if sep:
            return float(Fraction(top.strip()) / Fraction(bottom.strip()))
    except (ValueError, ZeroDivisionError):
        pass
    return None


def plural(count, noun, nouns=None):
    """``"1 value"``, ``"2 values"``.

    >>> plural(1, "value"), plural(4, "value"), plural(2, "n", "n")
    ('1 value', '4 values', '2 n')
    """
    return f"{count} {noun if count == 1 else (nouns or noun + 's')}"
