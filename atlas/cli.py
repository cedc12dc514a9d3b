"""The ``approx-atlas`` command line: parse, call the Python API, print.

Each command is a function ``_cmd_<name>(args) -> int`` registered in `_build_parser`. A user's
mistake (a ValueError, TypeError or OSError from the API) becomes one line on stderr,
``approx-atlas: error: <message>``, and exit status 2, never a traceback.
"""

import argparse
import sys

from atlas import __version__
from atlas.grid import DEFAULT_N_SPEC, DEFAULT_P_SPEC, describe_grid

PROG = "approx-atlas"


def _fail(message, *, status=2):
    """Print ``approx-atlas: error: <message>`` as one line on stderr and return `status`.

    >>> import contextlib, io
    >>> with contextlib.redirect_stderr(io.StringIO()) as err:
    ...     code = _fail("`p` must be in the open interval (0, 1); got 1.5.")
    >>> code, err.getvalue()
    (2, 'approx-atlas: error: `p` must be in the open interval (0, 1); got 1.5.\\n')
    """
    print(f"{PROG}: error: {' '.join(str(message).split())}", file=sys.stderr)
    return status


def _describe_error(error):
    """The message of an exception raised by a command, without Python's decorations."""
    if isinstance(error, OSError) and error.filename is not None:
        return f"{error.strerror or error}: {error.filename!r}"
    return str(error) or type(error).__name__


def _cmd_grid(args):
    """Print a one-line summary of the grid that the n and p specs give."""
    print(describe_grid(args.n, args.p))
    return 0


def _build_parser():
    """The argument parser, with one subparser per command."""
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Exact worst-case errors of approximations to the binomial Bin(n, p).",
    )
    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="command")

    grid = commands.add_parser("grid", help="summarize the (n, p) grid a pair of specs gives")
    grid.add_argument("--n", default=DEFAULT_N_SPEC, help="n axis spec (default: the atlas's)")
    grid.add_argument("--p", default=DEFAULT_P_SPEC, help="p axis spec (default: the atlas's)")
    grid.set_defaults(handler=_cmd_grid)
    return parser


def main(argv=None):
    """Run the command line and return its exit status.

    Parameters
    ----------
    argv : list of str, optional
        The arguments after the program name; ``sys.argv[1:]`` by default.

    Returns
    -------
    int
        0 on success, 2 for a usage error or a user's mistake, 130 when interrupted.
    """
    parser = _build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exit_:  # argparse exits for --help, --version and usage errors
        if exit_.code is None:
            return 0
        return exit_.code if isinstance(exit_.code, int) else 2
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    try:
        return args.handler(args)
    except KeyboardInterrupt:
        return _fail("interrupted", status=130)
    except (ValueError, TypeError, OSError) as error:  # OSError covers FileNotFound/Exists
        return _fail(_describe_error(error))
