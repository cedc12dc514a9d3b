"""The commands about what the atlas guarantees over its whole p range (``atlas.guarantees``)
and the thresholds as code (``atlas.exports``):

- ``rule-constants``: for each family of rules (``npq >= c`` and the others, or ``--family``),
  the constant that guarantees ``--tol``, the worst error it then admits and what it gives away;
- ``export``: the threshold n*(p) in bands with ``within_tolerance(n, p)`` as Python, C, JSON
  or CSV.

Registered by :func:`add_commands` from :func:`atlas.cli._build_parser`. Errors are one line,
``approx-atlas: error: ...``, exit status 2.
"""

from atlas import METHODS
from atlas.cli import _open_atlas
from atlas.cli_common import check_output, emit
from atlas.notation import parse_probability

_NAMES = {"tol": "--tol", "method": "--method", "metric": "--metric", "family": "--family",
          "format": "--format", "fmt": "--format", "path": "-o", "alpha": "--alpha",
          "limit": "--tol", "rel_tol": "--tol", "max_size": "--tol", "tail": "--tail",
          "alternative": "--alternative"}  # fmt: skip


def _cmd_rule_constants(args):
    """Print (or write) the constant each family of rules needs for the tolerance."""
    from atlas.guarantees import parse_family, rule_constants, threshold_bands

    tol = parse_probability(args.tol, "--tol")
    families = [parse_family(text) for text in args.family] if args.family else None
    if args.metric in ("tail", "size"):  # the metrics of atlas.decisions: no atlas file
        from atlas.decision_constants import decision_rule_constants, render_decision_constants

        if args.alpha is None:
            raise ValueError(f"`--alpha` must be given with --metric {args.metric}.")
        alpha = parse_probability(args.alpha, "--alpha")
        check_output(args)
        rows = decision_rule_constants(args.metric, alpha, tol, method=args.method,
                                       tail=args.tail, alternative=args.alternative,
                                       families=families)  # fmt: skip
        text = render_decision_constants(rows, "json" if args.json else "md", metric=args.metric,
                                         alpha=alpha, limit=tol, method=args.method)  # fmt: skip
        return emit(text, args.output)
    check_output(args)
    atlas = _open_atlas(args)
    bands = threshold_bands(atlas, tol, method=args.method, metric=args.metric)
    out = rule_constants(atlas, tol, method=args.method, metric=args.metric, families=families,
                         bands=bands)  # fmt: skip
    return emit(out.render("json" if args.json else "md"), args.output)


def _cmd_export(args):
    """Write the threshold bands and within_tolerance(n, p) as code or data."""
    from atlas.exports import format_for, write_export
    from atlas.guarantees import threshold_bands

    tol = parse_probability(args.tol, "--tol")
    fmt = format_for(args.format, args.output)
    check_output(args)
    bands = threshold_bands(_open_atlas(args), tol, method=args.method, metric=args.metric)
    print(write_export(bands, args.output, fmt))
    return 0


def add_commands(commands):
    """Register ``rule-constants`` and ``export`` on the ``approx-atlas`` subparsers."""

    def question(sub):
        sub.add_argument("--tol", required=True, help="the tolerance, e.g. 0.01 or 1%%")
        sub.add_argument("--method", default="normal_cc",
                         help=f"the approximation, one of {', '.join(METHODS)} "
                              "(default normal_cc)")  # fmt: skip
        sub.add_argument(
            "--metric",
            default="interval",
            help="interval (default: any P(a <= X <= b)) or cdf (any P(X <= k))",
        )
        sub.add_argument("--atlas", metavar="FILE", help="atlas file (default: the embedded one)")
        sub.add_argument("--force", action="store_true", help="replace an existing FILE")

    rules = commands.add_parser(
        "rule-constants",
        help="the constant each family of rules needs to guarantee a tolerance (minutes)",
    )
    question(rules)
    rules.add_argument("--family", action="append", metavar="EXPR",
                       help="a family in n, p, q and the constant c, e.g. 'n*p*q >= c' "
                            "(repeatable; default the four of the README)")  # fmt: skip
    rules.add_argument("--json", action="store_true", help="print JSON instead of Markdown")
    rules.add_argument("--alpha", help="with --metric tail or size: the level (e.g. 0.05)")
    rules.add_argument("--tail", default="both", help="with --metric tail: lower, upper or both")
    rules.add_argument("--alternative", default="two-sided",
                       help="with --metric size: two-sided, less or greater")  # fmt: skip
    rules.add_argument("-o", "--output", metavar="FILE", help="write FILE instead of printing")
    rules.set_defaults(handler=_cmd_rule_constants, names=_NAMES)

    export = commands.add_parser(
        "export", help="the threshold n*(p) as within_tolerance(n, p) in Python, C, JSON or CSV"
    )
    question(export)
    export.add_argument("--format", help="python, c, json or csv (default: from -o's suffix)")
    export.add_argument("-o", "--output", required=True, metavar="FILE", help="the file to write")
    export.set_defaults(handler=_cmd_export, names=_NAMES)
