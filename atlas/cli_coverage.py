"""The command-line block for confidence intervals for p: coverage, coverage-n, shortest,
coverage-table and coverage-map.

Thin over :mod:`atlas.coverage_questions`: parse, call the API, print (text, or one JSON object
with ``--json``). :func:`add_coverage_commands` registers the three commands on the subparsers of
:mod:`atlas.cli`, whose ``main`` runs them: a user's mistake is one line on stderr naming the
option, exit status 2; ``--strict`` exits with status 3 when the answer is no. Kept apart from
``cli.py`` so that the two change independently; the helpers they share are in
:mod:`atlas.cli_common`.
"""

from atlas.cli_common import (
    Options,
    check_format,
    check_output,
    emit,
    number,
    number_list,
    p_range,
    print_json,
    strict_status,
)
from atlas.notation import parse_probability

_INTERVAL_LIST = "wald, wald_cc, wilson, wilson_cc, agresti_coull, jeffreys, clopper_pearson"
_FORMS = "a number (0.95), a fraction or a percentage (95%%)"
_NAMES = {
    "n": "--n",
    "p": "--p",
    "p_lo": "--p-range",
    "p_hi": "--p-range",
    "floor": "--floor",
    "interval": "--interval",
    "intervals": "--interval",
    "level": "--level",
    "n_max": "--n-max",
    "floors": "--floor",
    "variable": "--variable",
    "path": "-o",
    "format": "--format",
}


def _band(args):
    """The band [p_lo, p_hi] from ``--p`` or ``--p-range``."""

    if args.p_range is not None:
        return p_range(args.p_range)
    p = parse_probability(args.p, "--p")
    return p, p


def _level_floor(args):
    level = parse_probability(args.level, "--level")
    floor = level if args.floor is None else parse_probability(args.floor, "--floor")
    return level, floor


def _where(p_lo, p_hi):
    return f"p = {p_lo:g}" if p_lo == p_hi else f"p in [{p_lo:g}, {p_hi:g}]"


def _cmd_coverage(args):
    """Print the exact minimum coverage over the band and whether it keeps the floor."""
    from atlas.coverage_questions import check_coverage

    p_lo, p_hi = _band(args)
    level, floor = _level_floor(args)
    v = check_coverage(number(args.n), p_lo, p_hi, floor, interval=args.interval, level=level)
    if args.json:
        print_json(v.to_dict())
    else:
        where = {
            "attained": "attained there",
            "from below": "the limit as p rises to it",
            "from above": "the limit as p falls to it",
        }[v.approach]
        verdict = (
            "holds: the coverage never falls below the floor"
            if v.holds
            else "FAILS: the coverage falls below the floor"
        )
        lines = [
            f"{v.interval} interval, level {v.level:g}, n = {v.n}, {_where(v.p_lo, v.p_hi)}",
            f"  minimum coverage  {v.min_coverage:.6f}  (exact infimum over the band)",
            f"  worst p           {v.worst_p:.6g}  ({where})",
            f"  floor             {v.floor:g}",
            f"  margin            {v.margin:+.6f}  (minimum coverage - floor)",
            f"  verdict           {verdict}",
        ]
        print("\n".join(lines))
    return strict_status(args.strict, v.holds)


def _cmd_coverage_n(args):
    """Print from which n on the floor holds at every n checked, and the runs where it holds."""
    from atlas.coverage_questions import coverage_min_n

    p_lo, p_hi = _band(args)
    level, floor = _level_floor(args)
    r = coverage_min_n(
        p_lo, p_hi, floor, interval=args.interval, level=level, n_max=number(args.n_max)
    )
    if args.json:
        print_json(r.to_dict())
    else:
        runs = ", ".join(f"{a}" if a == b else f"{a}..{b}" for a, b in r.runs) or "none"
        if r.min_n is not None:
            answer = f"n >= {r.min_n} (every n checked from {r.min_n} to {r.n_max})"
        else:
            answer = f"not known: the floor fails at n = {r.n_max}, the last n checked"
        lines = [
            f"{r.interval} interval, level {r.level:g}, coverage >= {r.floor:g} for every "
            f"{_where(r.p_lo, r.p_hi)}",
            f"  from n on         {answer}",
            f"  holds at n in     {runs}",
            f"  last failure      {'none' if r.last_failure is None else r.last_failure}",
            f"  checked           every integer n from 1 to {r.n_max} (the exact minimum "
            "coverage at each), none beyond: coverage is not monotone in n",
        ]
        print("\n".join(lines))
    return strict_status(args.strict, r.min_n is not None)


def _interval_list(text):
    return None if text is None else [item.strip() for item in text.split(",")]


def _cmd_shortest(args):
    """Print every interval ranked by mean expected width, and the shortest that keeps the floor."""
    from atlas.coverage_questions import shortest_interval

    p_lo, p_hi = _band(args)
    level, floor = _level_floor(args)
    choice = shortest_interval(
        number(args.n), p_lo, p_hi, floor, level=level, intervals=_interval_list(args.interval)
    )
    if args.json:
        print_json(choice.to_dict())
    else:
        lines = [
            f"level {choice.level:g} intervals at n = {choice.n}, {_where(p_lo, p_hi)}, "
            f"floor {choice.floor:g}, narrowest first",
            f"  {'interval':<16}{'mean width':>11}{'min coverage':>14}{'worst p':>11}  meets",
        ]
        for r in choice.rows:
            lines.append(
                f"  {r['interval']:<16}{r['mean_width']:>11.4f}"
                f"{r['min_coverage']:>14.6f}{r['worst_p']:>11.5g}  "
                f"{'yes' if r['meets'] else 'no'}"
            )
        lines.append(f"  shortest that keeps the floor: {choice.best or 'none'}")
        lines.append(
            "  (mean width: E[hi - lo] averaged over p uniform on the band; "
            "min coverage: exact infimum over the band)"
        )
        print("\n".join(lines))
    return strict_status(args.strict, choice.best is not None)


def _cmd_coverage_table(args):
    """Print (or write) the minimum n for each interval and coverage floor over a band."""
    from atlas.coverage_questions import TABLE_FORMATS, coverage_table

    check_format(args.format, TABLE_FORMATS)
    p_lo, p_hi = _band(args)
    level = parse_probability(args.level, "--level")
    floors = number_list(args.floor, "--floor")
    check_output(args)
    table = coverage_table(
        p_lo,
        p_hi,
        floors,
        level=level,
        intervals=_interval_list(args.interval),
        n_max=number(args.n_max),
    )
    return emit(table.render(args.format), args.output)


def _cmd_coverage_map(args):
    """Draw a coverage map from the coverage variables of the embedded atlas (or --atlas FILE)."""
    from atlas import figures
    from atlas.coverage_charts import coverage_map
    from atlas.coverage_cube import open_coverage_cube

    with Options(path="-o"):
        figures.figure_format(args.output)
    check_output(args)
    level = parse_probability(args.level, "--level")
    with Options(path="--atlas"):
        cube = open_coverage_cube(args.atlas)
    fig = coverage_map(cube, interval=args.interval, level=level, variable=args.variable)
    print(figures.save_figure(fig, args.output))
    return 0


def add_coverage_commands(commands):
    """Register coverage, coverage-n and shortest on the subparsers ``commands``."""

    def band(sub):
        where = sub.add_mutually_exclusive_group(required=True)
        where.add_argument("--p", help=f"one success probability, 0 < p < 1: {_FORMS}")
        where.add_argument(
            "--p-range", metavar="LO:HI", help="every p in [LO, HI] (exactly, not a sample)"
        )

    def level_floor(sub, floor_help):
        sub.add_argument("--level", default="0.95", help=f"nominal level (0.95), {_FORMS}")
        sub.add_argument("--floor", help=floor_help)

    def answer(sub, no):
        sub.add_argument("--json", action="store_true", help="print one JSON object")
        sub.add_argument("--strict", action="store_true", help=f"exit with status 3 when {no}")

    interval_help = f"the interval, one of {_INTERVAL_LIST} (default wald)"
    cov = commands.add_parser(
        "coverage", help="exact minimum coverage of a confidence interval for p over a band"
    )
    cov.add_argument("--n", required=True, help="number of trials, n >= 1")
    band(cov)
    cov.add_argument("--interval", default="wald", help=interval_help)
    level_floor(cov, "coverage wanted (default: the level)")
    answer(cov, "the coverage falls below the floor")
    cov.set_defaults(handler=_cmd_coverage, names=_NAMES)

    cov_n = commands.add_parser(
        "coverage-n", help="from which n on an interval keeps a coverage floor over a band"
    )
    band(cov_n)
    cov_n.add_argument("--interval", default="wald", help=interval_help)
    level_floor(cov_n, "coverage wanted (default: the level)")
    cov_n.add_argument("--n-max", default="1000", help="check every n from 1 to this (1000)")
    answer(cov_n, "the floor fails at the largest n checked")
    cov_n.set_defaults(handler=_cmd_coverage_n, names=_NAMES)

    short = commands.add_parser(
        "shortest", help="the shortest confidence interval for p keeping a coverage floor"
    )
    short.add_argument("--n", required=True, help="number of trials, n >= 1")
    band(short)
    short.add_argument(
        "--interval",
        metavar="NAMES",
        help=f"comma-separated candidates (default all: {_INTERVAL_LIST})",
    )
    level_floor(short, "coverage wanted (default: the level)")
    answer(short, "no interval keeps the floor")
    short.set_defaults(handler=_cmd_shortest, names=_NAMES)

    table = commands.add_parser(
        "coverage-table", help="the minimum n for each interval and coverage floor over a band"
    )
    band(table)
    table.add_argument(
        "--interval",
        metavar="NAMES",
        help=f"comma-separated intervals (default all: {_INTERVAL_LIST})",
    )
    table.add_argument("--level", default="0.95", help=f"nominal level (0.95), {_FORMS}")
    table.add_argument(
        "--floor", default="0.93,0.94,0.95", help="comma-separated coverage floors (0.93,0.94,0.95)"
    )
    table.add_argument("--n-max", default="1000", help="check every n from 1 to this (1000)")
    table.add_argument("--format", default="md", help="md (default), csv or json")
    table.add_argument("-o", "--output", metavar="FILE", help="write FILE instead of printing")
    table.add_argument("--force", action="store_true", help="replace an existing FILE")
    table.set_defaults(handler=_cmd_coverage_table, names=_NAMES)

    chart = commands.add_parser(
        "coverage-map", help="map the (minimum) coverage of an interval over n and p"
    )
    chart.add_argument("--interval", default="wald", help=interval_help)
    chart.add_argument("--level", default="0.95", help="a level of the atlas: 0.9, 0.95 or 0.99")
    chart.add_argument(
        "--variable",
        default="min_coverage",
        help="min_coverage (default: the exact minimum over each p-cell) or "
        "coverage (at the grid points)",
    )
    chart.add_argument(
        "--atlas",
        "--cube",  # the name of the option when the coverage cube was a file of its own
        dest="atlas",
        metavar="FILE",
        help="an atlas file holding the coverage variables (default: the embedded atlas)",
    )
    chart.add_argument(
        "-o", "--output", required=True, metavar="FILE", help="FILE.png, FILE.svg or FILE.pdf"
    )
    chart.add_argument("--force", action="store_true", help="replace an existing FILE")
    chart.set_defaults(handler=_cmd_coverage_map, names=_NAMES)
