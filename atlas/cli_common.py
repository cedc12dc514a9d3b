"""What every block of the ``approx-atlas`` command line shares: reading its arguments (numbers,
probabilities, lists, p ranges), refusing an output before any work, printing (text, one JSON
object, a written file's path), one-line errors and the exit statuses.

Imported by :mod:`atlas.cli` (the parser and ``main``), :mod:`atlas.cli_decisions` (tails and
tests) and :mod:`atlas.cli_coverage` (confidence intervals); it imports none of them, so the
three import it at the top and none imports another's private helpers.

Exit statuses: ``OK`` (0) answered, ``NO`` (3) with ``--strict`` when the answer is no,
``ERROR`` (2) a user's mistake (one line ``approx-atlas: error: ...`` on stderr),
``INTERRUPTED`` (130).
"""

import re
import sys

from atlas import METHODS
from atlas.notation import parse_probability

PROG = "approx-atlas"
OK, ERROR, NO, INTERRUPTED = 0, 2, 3, 130
METHOD_LIST = ", ".join(METHODS)
P_FORMS = "a number (0.05), a fraction (1/20) or a percentage (5%%)"


def method_help(default="normal_cc"):
    """The help text of a ``--method`` option."""
    return f"the approximation, one of {METHOD_LIST} (default {default})"


def strict_status(strict, yes):
    """The exit status of a yes-or-no answer: ``NO`` when ``strict`` and the answer is no.

    >>> strict_status(True, False), strict_status(False, False), strict_status(True, True)
    (3, 0, 0)
    """
    return NO if strict and not yes else OK


# --- errors ---------------------------------------------------------------------------------


def fail(message, *, status=ERROR):
    """Print ``approx-atlas: error: <message>`` as one line on stderr and return `status`.

    >>> import contextlib, io
    >>> with contextlib.redirect_stderr(io.StringIO()) as err:
    ...     code = fail("`p` must be in the open interval (0, 1); got 1.5.")
    >>> code, err.getvalue()
    (2, 'approx-atlas: error: `p` must be in the open interval (0, 1); got 1.5.\\n')
    """
    print(f"{PROG}: error: {' '.join(str(message).split())}", file=sys.stderr)
    return status


def describe_error(error, names=None):
    """The message of an exception raised by a command, without Python's decorations, with the
    API's parameter names (`` `p_lo` ``) replaced by the command's options (``names``).

    >>> describe_error(ValueError("`p_lo` must be <= `p_hi`."), {"p_lo": "--p-range"})
    '`--p-range` must be <= `p_hi`.'
    """
    if isinstance(error, OSError) and error.filename is not None:
        message = f"{error.strerror or error}: {error.filename!r}"
    else:
        message = str(error) or type(error).__name__
    if names:
        message = re.sub(r"`(\w+)`", lambda m: f"`{names.get(m.group(1), m.group(1))}`", message)
        message = re.sub(r"\[(`[^`]+`), \1\]", r"\1", message)  # [`--p-range`, `--p-range`]
    return message


class Options:
    """Retell the API's errors raised in the block with the given option names.

    >>> try:
    ...     with Options(p_lo="--p-range"):
    ...         raise ValueError("`p_lo` must be <= `p_hi`.")
    ... except ValueError as err:
    ...     print(err)
    `--p-range` must be <= `p_hi`.
    """

    def __init__(self, **names):
        self.names = names

    def __enter__(self):
        return self

    def __exit__(self, kind, error, _tb):
        plain_os_error = isinstance(error, OSError) and error.filename is None
        if isinstance(error, (ValueError, TypeError)) or plain_os_error:
            raise type(error)(describe_error(error, self.names)) from None
        return False


# --- arguments ------------------------------------------------------------------------------


def number(text):
    """A command-line number as int or float. Other text is passed on unchanged, so that the API
    refuses it with a message naming the argument (e.g. "`n` must be an integer >= 1; got 'x'.").

    >>> number("40"), number("1e6"), number("forty")
    (40, 1000000.0, 'forty')
    """
    for convert in (int, float):
        try:
            return convert(text)
        except ValueError:
            pass
    return text


def integer(text):
    """A command-line integer, or the text unchanged for the API to refuse by name."""
    try:
        return int(text)
    except ValueError:
        return text


def probability(text, option):
    """An optional probability option: None when not given, else
    :func:`atlas.notation.parse_probability` (refusals name ``option``)."""
    return None if text is None else parse_probability(text, option)


def probabilities(text, option):
    """``"0.01,1/3,5%"`` as a list of floats (:func:`atlas.notation.parse_probability`).

    >>> probabilities("0.01,1/4,5%", "--p")
    [0.01, 0.25, 0.05]
    """
    return [parse_probability(item, option) for item in str(text).split(",")]


def number_list(text, option):
    """``"0.01,0.005"`` as a list of floats; the API checks their range."""
    items = [item.strip() for item in str(text).split(",")]
    try:
        return [float(item) for item in items]
    except ValueError:
        raise ValueError(
            f"`{option}` must be comma-separated numbers such as 0.01,0.005; got {text!r}."
        ) from None


def p_range(text):
    """``LO:HI`` as two probabilities, LO <= HI (their range is left to the API to check).

    >>> p_range("5%:1/2")
    (0.05, 0.5)
    """
    lo, sep, hi = text.partition(":")
    if not sep or not lo.strip() or not hi.strip() or ":" in hi:
        raise ValueError(f"`--p-range` must be LO:HI, such as 0.05:0.95; got {text!r}.")
    lo, hi = parse_probability(lo, "--p-range"), parse_probability(hi, "--p-range")
    if lo > hi:
        raise ValueError(f"`--p-range` LO:HI must have LO <= HI; got {text!r}.")
    return lo, hi


def check_format(text, formats):
    """Refuse a ``--format`` that is not one of ``formats``, before any work."""
    if text not in formats:
        valid = ", ".join(repr(f) for f in formats)
        raise ValueError(f"`--format` must be one of {valid}; got {text!r}.")


# --- output ---------------------------------------------------------------------------------


def check_output(args):
    """Refuse ``-o`` (if given) before any work: it exists without --force, or cannot be written."""
    if args.output is not None:
        from atlas.files import check_target

        check_target(args.output, overwrite=args.force, name="-o")


def check_figure_output(args):
    """Refuse a figure's ``-o`` with a bad extension, or existing without --force, before any
    computation."""
    from atlas import figures

    with Options(path="-o"):
        figures.figure_format(args.output)
    check_output(args)


def print_json(record):
    """Print ``record`` as one JSON object on one line (no NaN: they are not JSON)."""
    import json

    print(json.dumps(record, allow_nan=False))


def emit(text, output):
    """Print ``text``, or write it atomically to ``output`` and print the path."""
    if output is None:
        sys.stdout.write(text)
    else:
        from atlas.files import save_text

        print(save_text(output, text))
    return OK
