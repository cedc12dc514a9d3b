"""The command-line questions about tail p-values and test sizes (``atlas.decisions``).

Commands, registered by :func:`add_commands` by :mod:`atlas.cli`:

- ``tail``: the tail relative error at (n, p) and level alpha; with ``--rel-tol``, the verdict
  "is every tail of at least alpha within it?".
- ``size``: the size of the test with the approximation's p-value and the exact test's; the
  verdict "is the size at most ``--max-size``?" (alpha by default).
- ``tail-min-n``, ``size-min-n``: the smallest n from which either holds.
- ``tail-compare``, ``size-compare``: every method ranked.

Exit statuses as for ``query``: 0 answered, 3 with ``--strict`` when the answer is no, 2 with
one line ``approx-atlas: error: ...`` for a user's mistake. Nothing here reads an atlas file:
every number is computed exactly on demand.
"""

from atlas.cli_common import (
    OK,
    Options,
    check_figure_output,
    check_format,
    check_output,
    emit,
    method_help,
    number,
    print_json,
    probabilities,
    probability,
    strict_status,
)
from atlas.cli_common import P_FORMS as _P_FORMS
from atlas.notation import format_p, parse_probability

_TAILS = "lower (P(X <= k)), upper (P(X >= k)) or both (default)"
_ALTERNATIVES = "two-sided (default), less (lower one-sided) or greater (upper one-sided)"
_TAIL_TEXT = {
    "lower": "lower tails P(X <= k)",
    "upper": "upper tails P(X >= k)",
    "both": "tails P(X <= k) and P(X >= k)",
}
_ONE_TAIL = {
    "lower": "lower tail P(X <= k)",
    "upper": "upper tail P(X >= k)",
    "both": "tail P(X <= k) or P(X >= k)",
}
_TEST_TEXT = {
    "less": "lower one-sided test (less)",
    "greater": "upper one-sided test (greater)",
    "two-sided": "two-sided test",
}
_SOURCE = "computed exactly on demand (no atlas file is read)"


def _percent(x):
    return f"{100.0 * x:.4g}%"


def _cmd_tail(args):
    """The tail relative error at (n, p), and the verdict when --rel-tol is given."""
    from atlas import decisions

    p = parse_probability(args.p, "--p")
    alpha = parse_probability(args.alpha, "--alpha")
    rel_tol = probability(args.rel_tol, "--rel-tol")
    if rel_tol is None:
        from atlas.tails import tail_error

        n = number(args.n)
        error = tail_error(n, p, alpha, method=args.method, tail=args.tail)
        verdict = None
    else:
        verdict = decisions.tail_verdict(
            number(args.n), p, alpha, rel_tol, method=args.method, tail=args.tail
        )
        n, error = verdict.n, verdict.error
    if args.json:
        print_json(
            {
                "n": int(n),
                "p": p,
                "alpha": alpha,
                "tail": args.tail,
                "method": args.method,
                "tail_error": error,
                "rel_tol": rel_tol,
                "within": None if verdict is None else verdict.within,
                "explain": None if verdict is None else verdict.explain(),
                "source": "computed",
            }
        )
    else:
        lines = [
            f"Bin(n={int(n)}, p={format_p(p)}), {args.method}, {_TAIL_TEXT[args.tail]} of at "
            f"least {format_p(alpha)}",
            f"  tail relative error  {error:.4g}  ({_percent(error)}): every such tail is "
            "approximated within it",
        ]
        if verdict is not None:
            lines += [
                f"  tolerance            {format_p(rel_tol)}  ({_percent(rel_tol)})",
                "  verdict              "
                + (
                    "within: every such tail is within the tolerance"
                    if verdict.within
                    else "NOT within: some tail misses the tolerance"
                ),
            ]
        lines.append(f"  source               {_SOURCE}")
        print("\n".join(lines))
    return strict_status(args.strict, verdict is None or verdict.within)


def _cmd_size(args):
    """The sizes of the approximate and exact tests and the verdict on --max-size."""
    from atlas import decisions

    p0 = parse_probability(args.p0, "--p0")
    alpha = parse_probability(args.alpha, "--alpha")
    max_size = probability(args.max_size, "--max-size")
    v = decisions.size_verdict(
        number(args.n),
        p0,
        alpha,
        max_size=max_size,
        method=args.method,
        alternative=args.alternative,
    )
    if args.json:
        print_json(
            {
                "n": v.n,
                "p0": v.p0,
                "alpha": v.alpha,
                "alternative": v.alternative,
                "method": v.method,
                "size": v.size,
                "exact_size": v.exact_size,
                "max_size": v.max_size,
                "keeps": v.keeps,
                "explain": v.explain(),
                "source": "computed",
            }
        )
    else:
        verdict = (
            "keeps it: the size is at most the largest size"
            if v.keeps
            else "EXCEEDS it: the test rejects a true null too often"
        )
        test = _TEST_TEXT[v.alternative]
        lines = [
            f"Bin(n={v.n}, p0={format_p(v.p0)}), {test} at nominal level {format_p(v.alpha)}, "
            f"p-values from {v.method}",
            f"  size            {v.size:.4g}  ({_percent(v.size)}): P(reject | H0 true)",
            f"  exact test      {v.exact_size:.4g}  ({_percent(v.exact_size)}): the same with "
            "exact p-values (at most the level)",
            f"  largest size    {format_p(v.max_size)}",
            f"  verdict         {verdict}",
            f"  source          {_SOURCE}",
        ]
        print("\n".join(lines))
    return strict_status(args.strict, v.keeps)


def _asked(args):
    """The point and level of a tail or size command: (p, alpha), p from --p or --p0."""
    option = "--p" if args.family == "tail" else "--p0"
    p = parse_probability(args.p if args.family == "tail" else args.p0, option)
    return p, parse_probability(args.alpha, "--alpha")


def _cmd_min_n(args):
    """The smallest n from which every tail is within --rel-tol, or the test keeps --max-size."""
    from atlas import decisions

    p, alpha = _asked(args)
    search = {"method": args.method, "n_max": number(args.n_max),
              "dense_to": number(args.dense_to)}  # fmt: skip
    if args.family == "tail":
        rel_tol = parse_probability(args.rel_tol, "--rel-tol")
        result = decisions.tail_min_n(p, alpha, rel_tol, tail=args.tail, **search)
        head = (f"{args.method}: every {_ONE_TAIL.get(args.tail, args.tail)} of at least "
                f"{format_p(alpha)} within {_percent(rel_tol)} at p = {format_p(p)}")  # fmt: skip
        record = {"p": p, "alpha": alpha, "rel_tol": rel_tol, "tail": args.tail}
    else:
        max_size = probability(args.max_size, "--max-size")
        result = decisions.size_min_n(p, alpha, max_size=max_size,
                                      alternative=args.alternative, **search)  # fmt: skip
        limit = alpha if max_size is None else max_size
        test = _TEST_TEXT[args.alternative]
        head = (f"{args.method} p-values, {test} at level {format_p(alpha)}: size at most "
                f"{format_p(limit)} at p0 = {format_p(p)}")  # fmt: skip
        record = {"p0": p, "alpha": alpha, "max_size": limit, "alternative": args.alternative}
    if args.json:
        print_json(record | {
            "method": args.method,
            "min_n": result.n,
            "previous": result.previous,
            "dense_to": result.dense_to,
            "n_max": result.n_max,
            "every_integer": True,
            "evaluated": result.evaluated,
            "certified": result.certified,
            "runs": [{"first": a, "last": b, "within": w} for a, b, w in result.runs],
            "explain": result.explain(),
            "source": "computed",
        })  # fmt: skip
    else:
        print(f"{head}: {result.explain()}\n  source: {_SOURCE}")
    return OK


def _cmd_compare(args):
    """Every method ranked by its tail relative error, or by its test's size against alpha."""
    from atlas import decisions

    p, alpha = _asked(args)
    n = number(args.n)
    if args.family == "tail":
        rows = [(m, e, None) for m, e in decisions.best_tail_method(n, p, alpha, tail=args.tail)]
        key, which, what = "tail_error", {"tail": args.tail}, "p"
        head = (f"Bin(n={int(n)}, p={format_p(p)}), tail relative error, {_TAIL_TEXT[args.tail]} "
                f"of at least {format_p(alpha)}, best first")  # fmt: skip
    else:
        rows = decisions.best_size_method(n, p, alpha, alternative=args.alternative)
        key, which, what = "size", {"alternative": args.alternative}, "p0"
        head = (f"Bin(n={int(n)}, p0={format_p(p)}), {_TEST_TEXT[args.alternative]} at level "
                f"{format_p(alpha)}: sizes, best first (at most the level first, then nearest "
                "it)")  # fmt: skip
    if args.json:
        record = {"n": int(n), what: p, "alpha": alpha} | which | {"source": "computed"}
        if args.family == "size":
            record["exact_size"] = rows[0][2]
        print_json(record | {"ranking": [{"method": m, key: v} for m, v, _ in rows]})
        return OK
    lines = [head]
    for i, (m, v, exact) in enumerate(rows, start=1):
        if exact is None:
            lines.append(f"  {i:>2}  {m:<14} {v:.3e}")
        else:
            above = "" if v <= alpha else "  above"
            lines.append(f"  {i:>2}  {m:<14} {v:.4g}  ({_percent(v)}){above}")
    if args.family == "size":
        lines.append(f"  exact test      {rows[0][2]:.4g}  ({_percent(rows[0][2])})")
    lines.append(f"  source: {_SOURCE}")
    print("\n".join(lines))
    return OK


def _cmd_rules(args, audit, what_option, what):
    """Print (or write as JSON) the rule audit of tails or sizes."""
    levels = None
    if args.alpha is not None:
        levels = [parse_probability(x, "--alpha") for x in str(args.alpha).split(",")]
    options = {"method": args.method, what_option: what}
    if levels is not None:
        options["alpha"] = levels
    if args.n_grid is not None:
        options["n"] = args.n_grid
    if args.p_grid is not None:
        options["p"] = args.p_grid
    rows = audit(args.rule, **options)
    if args.json:
        print_json(
            {
                "grid": rows[0].grid,
                "rows": [
                    {
                        "rule": r.rule,
                        "name": r.name,
                        "method": r.method,
                        what_option: r.what,
                        "alpha": r.alpha,
                        "cells": r.cells,
                        "worst": r.worst,
                        "worst_n": r.worst_n,
                        "worst_p": r.worst_p,
                        "exact_size": r.exact_size,
                        "explain": r.explain(),
                    }
                    for r in rows
                ],
                "source": "computed",
            }
        )
        return 0
    print("\n".join([f"audit grid: {rows[0].grid}"] + [r.explain() for r in rows]))
    return 0


def _cmd_tail_rules(args):
    from atlas.decision_rules import tail_rule_audit

    return _cmd_rules(args, tail_rule_audit, "tail", args.tail)


def _cmd_size_rules(args):
    from atlas.decision_rules import size_rule_audit

    return _cmd_rules(args, size_rule_audit, "alternative", args.alternative)


def _cmd_table(args):
    """Print (or write) the minimum n for each p and relative tolerance, or p0 and size."""
    from atlas.decision_tables import FORMATS, size_table, tail_table

    check_format(args.format, FORMATS)
    alpha = parse_probability(args.alpha, "--alpha")
    search = {"alpha": alpha, "method": args.method, "n_max": number(args.n_max),
              "dense_to": number(args.dense_to)}  # fmt: skip
    if args.family == "tail":
        limits, ps = probabilities(args.rel_tol, "--rel-tol"), probabilities(args.p, "--p")
        check_output(args)
        table = tail_table(limits, ps, tail=args.tail, **search)
    else:
        limits, ps = probabilities(args.max_size, "--max-size"), probabilities(args.p0, "--p0")
        check_output(args)
        table = size_table(limits, ps, alternative=args.alternative, **search)
    return emit(table.render(args.format), args.output)


def _cmd_tail_chart(args):
    """Draw the maps of the tail relative error, one panel per level."""
    from atlas import figures
    from atlas.decision_charts import MAP_N, MAP_P, tail_error_maps

    check_figure_output(args)
    levels = probabilities(args.alpha, "--alpha")
    fig = tail_error_maps(method=args.method, tail=args.tail, alphas=levels,
                          n=args.n_grid or MAP_N, p=args.p_grid or MAP_P)  # fmt: skip
    print(figures.save_figure(fig, args.output))
    return 0


def _cmd_size_chart(args):
    """Draw the test's size against the nominal level."""
    from atlas import figures
    from atlas.decision_charts import size_chart

    p0 = parse_probability(args.p0, "--p0")
    check_figure_output(args)
    fig = size_chart(number(args.n), p0, method=args.method, alternative=args.alternative)
    print(figures.save_figure(fig, args.output))
    return 0


def _cmd_decision_page(args):
    """Write the wiki page for p-values and tests into a directory."""
    from atlas.decision_pages import write_decision_page
    from atlas.files import check_directory_target

    with Options(path="-o", directory="-o"):
        check_directory_target(args.output, overwrite=args.force)
    from atlas.approximations import check_method

    check_method(args.method)
    for path in write_decision_page(args.output, method=args.method, overwrite=args.force):
        print(path)
    return 0


def _cmd_decision_sheet(args):
    """Write the printable PDF for p-values and tests."""
    from atlas.decision_pages import write_decision_sheet

    if not str(args.output).lower().endswith(".pdf"):
        raise ValueError(f"`-o` must end in '.pdf'; got {args.output!r}.")
    check_output(args)
    print(write_decision_sheet(args.output, method=args.method))
    return 0


def demo_lines(n, p0, *, alpha=0.05, tail_alpha=0.01, rel_tol=0.1):
    """The demo's questions about p-values: hold the lot when the upper one-sided p-value of
    the defects found is at most ``alpha`` (H0: the claimed rate ``p0``)."""
    from atlas import decisions

    size = decisions.size_verdict(n, p0, alpha, alternative="greater")
    tail = decisions.tail_verdict(n, p0, tail_alpha, rel_tol, tail="upper")
    best = decisions.best_size_method(n, p0, alpha, alternative="greater")[0]
    return [
        f"  release or hold: holding the lot when the normal_cc p-value P(X >= x) is at most "
        f"{_percent(alpha)} holds a lot at the claimed rate {_percent(size.size)} of the time "
        f"(exact p-values: {_percent(size.exact_size)}; best shortcut {best[0]}, "
        f"{_percent(best[1])}); upper-tail p-values of at least {format_p(tail_alpha)} are off "
        f"by up to {_percent(tail.error)}",
        f"  next: approx-atlas size --n {n} --p0 {format_p(p0)} --alpha {format_p(alpha)} "
        f"--alternative greater; approx-atlas tail --n {n} --p {format_p(p0)} --alpha "
        f"{format_p(tail_alpha)} --tail upper",
    ]


def add_commands(commands):
    """Register the tail and size commands on the ``approx-atlas`` subparsers."""

    def method(sub):
        sub.add_argument("--method", default="normal_cc", help=method_help())

    def tail_option(sub):
        sub.add_argument("--tail", default="both", help=f"which tails: {_TAILS}")

    def alternative_option(sub):
        sub.add_argument("--alternative", default="two-sided", help=f"the test: {_ALTERNATIVES}")

    def ladder(sub):
        sub.add_argument("--n-max", default="100000", help="the largest n checked (100000)")
        sub.add_argument(
            "--dense-to",
            default="2048",
            help="every integer n is evaluated up to here (2048); above it a ladder of n "
            "about 5%% apart says where to look, and every integer between is evaluated or "
            "covered by a proven bound",
        )

    def json_option(sub):
        sub.add_argument("--json", action="store_true", help="print one JSON object")

    alpha_tail = f"the smallest tail probability that counts, 0 < alpha < 1: {_P_FORMS}"
    alpha_test = f"the nominal level of the test, 0 < alpha < 1: {_P_FORMS}"
    rel_help = "relative tolerance, > 0: a number (0.1) or a percentage (10%%)"
    max_help = f"the largest acceptable size (default: alpha): {_P_FORMS}"
    common = {
        "n": "--n",
        "method": "--method",
        "alpha": "--alpha",
        "tail": "--tail",
        "alternative": "--alternative",
        "n_max": "--n-max",
        "dense_to": "--dense-to",
        "rel_tol": "--rel-tol",
        "max_size": "--max-size",
        "p0": "--p0",
    }

    tail = commands.add_parser(
        "tail", help="the relative error of every tail probability of at least alpha at (n, p)"
    )
    tail.add_argument("--n", required=True, help="number of trials, n >= 1")
    tail.add_argument("--p", required=True, help=f"success probability: {_P_FORMS}")
    tail.add_argument("--alpha", required=True, help=alpha_tail)
    tail.add_argument("--rel-tol", help=rel_help + "; gives a verdict")
    tail_option(tail)
    method(tail)
    json_option(tail)
    tail.add_argument(
        "--strict", action="store_true", help="exit with status 3 when not within --rel-tol"
    )
    tail.set_defaults(handler=_cmd_tail, names=common | {"p": "--p"})

    size = commands.add_parser(
        "size", help="the size of the test of p = p0 with the approximation's p-value"
    )
    size.add_argument("--n", required=True, help="number of trials, n >= 1")
    size.add_argument("--p0", required=True, help=f"the null hypothesis' p: {_P_FORMS}")
    size.add_argument("--alpha", required=True, help=alpha_test)
    size.add_argument("--max-size", help=max_help)
    alternative_option(size)
    method(size)
    json_option(size)
    size.add_argument(
        "--strict", action="store_true", help="exit with status 3 when the size exceeds --max-size"
    )
    size.set_defaults(handler=_cmd_size, names=common | {"p": "--p0"})

    tail_min = commands.add_parser(
        "tail-min-n", help="the smallest n from which every tail of at least alpha is within tol"
    )
    tail_min.add_argument("--p", required=True, help=f"success probability: {_P_FORMS}")
    tail_min.add_argument("--alpha", required=True, help=alpha_tail)
    tail_min.add_argument("--rel-tol", required=True, help=rel_help)
    tail_option(tail_min)
    method(tail_min)
    ladder(tail_min)
    json_option(tail_min)
    tail_min.set_defaults(handler=_cmd_min_n, family="tail", names=common | {"p": "--p"})

    size_min = commands.add_parser(
        "size-min-n", help="the smallest n from which the test keeps its size at most a limit"
    )
    size_min.add_argument("--p0", required=True, help=f"the null hypothesis' p: {_P_FORMS}")
    size_min.add_argument("--alpha", required=True, help=alpha_test)
    size_min.add_argument("--max-size", help=max_help)
    alternative_option(size_min)
    method(size_min)
    ladder(size_min)
    json_option(size_min)
    size_min.set_defaults(handler=_cmd_min_n, family="size", names=common | {"p": "--p0"})

    tail_cmp = commands.add_parser(
        "tail-compare", help="every method ranked by its tail relative error at (n, p)"
    )
    tail_cmp.add_argument("--n", required=True, help="number of trials, n >= 1")
    tail_cmp.add_argument("--p", required=True, help=f"success probability: {_P_FORMS}")
    tail_cmp.add_argument("--alpha", required=True, help=alpha_tail)
    tail_option(tail_cmp)
    json_option(tail_cmp)
    tail_cmp.set_defaults(handler=_cmd_compare, family="tail", names=common | {"p": "--p"})

    size_cmp = commands.add_parser(
        "size-compare", help="every method ranked by its test's size against the level"
    )
    size_cmp.add_argument("--n", required=True, help="number of trials, n >= 1")
    size_cmp.add_argument("--p0", required=True, help=f"the null hypothesis' p: {_P_FORMS}")
    size_cmp.add_argument("--alpha", required=True, help=alpha_test)
    alternative_option(size_cmp)
    json_option(size_cmp)
    size_cmp.set_defaults(handler=_cmd_compare, family="size", names=common | {"p": "--p0"})

    def audit_options(sub, levels):
        sub.add_argument(
            "--rule",
            action="append",
            help="a rule in n, p and q, such as 'n*p >= 5 and n*q >= 5'; may be "
            "repeated (default: the classic rules)",
        )
        sub.add_argument("--alpha", help=f"levels, comma-separated (default {levels})")
        sub.add_argument(
            "--n-grid", help="the audit grid's n spec (default 1:100,log:100:100000:41)"
        )
        sub.add_argument(
            "--p-grid", help="the audit grid's p spec (default logit:0.001:0.999:41,0.5)"
        )
        method(sub)
        json_option(sub)

    audit_names = common | {"rules": "--rule", "n": "--n-grid", "p": "--p-grid"}
    tail_rules = commands.add_parser(
        "tail-rules", help="the worst tail relative error each rule of thumb admits"
    )
    audit_options(tail_rules, "0.05,0.01,0.001,0.0001")
    tail_option(tail_rules)
    tail_rules.set_defaults(handler=_cmd_tail_rules, names=audit_names)
    size_rules = commands.add_parser(
        "size-rules", help="the largest test size each rule of thumb admits"
    )
    audit_options(size_rules, "0.1,0.05,0.01,0.001")
    alternative_option(size_rules)
    size_rules.set_defaults(handler=_cmd_size_rules, names=audit_names)

    def table_output(sub):
        sub.add_argument("--format", default="md", help="csv, md (default) or json")
        sub.add_argument("-o", "--output", metavar="FILE", help="write FILE instead of printing")
        sub.add_argument("--force", action="store_true", help="replace FILE if it exists")

    table_names = common | {"rel_tols": "--rel-tol", "max_sizes": "--max-size", "path": "-o",
                            "ps": "--p"}  # fmt: skip
    tail_tab = commands.add_parser(
        "tail-table", help="the minimum n for each p and relative tolerance of the tails"
    )
    tail_tab.add_argument("--rel-tol", default="0.5,0.2,0.1,0.05",
                          help="relative tolerances (0.5,0.2,0.1,0.05)")  # fmt: skip
    tail_tab.add_argument("--p", default="0.01,0.05,0.1,0.2,0.5",
                          help=f"p values (0.01,0.05,0.1,0.2,0.5), each {_P_FORMS}")  # fmt: skip
    tail_tab.add_argument("--alpha", default="0.01", help=alpha_tail + " (default 0.01)")
    tail_option(tail_tab)
    method(tail_tab)
    ladder(tail_tab)
    table_output(tail_tab)
    tail_tab.set_defaults(handler=_cmd_table, family="tail", names=table_names | {"p": "--p"})

    size_tab = commands.add_parser(
        "size-table", help="the minimum n for each p0 and largest size of the test"
    )
    size_tab.add_argument("--max-size", default="0.06,0.055,0.0525",
                          help="largest sizes (0.06,0.055,0.0525)")  # fmt: skip
    size_tab.add_argument("--p0", default="0.01,0.05,0.1,0.2,0.5",
                          help=f"p0 values (0.01,0.05,0.1,0.2,0.5), each {_P_FORMS}")  # fmt: skip
    size_tab.add_argument("--alpha", default="0.05", help=alpha_test + " (default 0.05)")
    alternative_option(size_tab)
    method(size_tab)
    ladder(size_tab)
    table_output(size_tab)
    size_tab.set_defaults(
        handler=_cmd_table, family="size", names=table_names | {"p": "--p0", "ps": "--p0"}
    )

    def chart_output(sub):
        sub.add_argument("-o", "--output", required=True, metavar="FILE",
                         help="the figure: .png, .svg or .pdf")  # fmt: skip
        sub.add_argument("--force", action="store_true", help="replace FILE if it exists")

    tail_chart = commands.add_parser(
        "tail-chart", help="maps of the tail relative error over (n, p), one per level"
    )
    tail_chart.add_argument(
        "--alpha",
        default="0.05,0.01,0.001,0.0001",
        help="levels, one panel each, at most four (0.05,0.01,0.001,0.0001)",
    )
    tail_chart.add_argument("--n-grid", help="the map's n spec (default log:5:100000:41)")
    tail_chart.add_argument("--p-grid", help="the map's p spec (default "
                                             "logit:0.001:0.999:41,0.5)")  # fmt: skip
    tail_option(tail_chart)
    method(tail_chart)
    chart_output(tail_chart)
    tail_chart.set_defaults(handler=_cmd_tail_chart,
                            names=common | {"n": "--n-grid", "p": "--p-grid", "alphas": "--alpha",
                                            "path": "-o"})  # fmt: skip

    size_chart = commands.add_parser(
        "size-chart", help="the test's size against the nominal level, beside the exact test's"
    )
    size_chart.add_argument("--n", required=True, help="number of trials, n >= 1")
    size_chart.add_argument("--p0", required=True, help=f"the null hypothesis' p: {_P_FORMS}")
    alternative_option(size_chart)
    method(size_chart)
    chart_output(size_chart)
    size_chart.set_defaults(handler=_cmd_size_chart, names=common | {"path": "-o"})

    page = commands.add_parser(
        "decision-page", help="write the wiki page for p-values and tests (HTML, Markdown, SVG)"
    )
    page.add_argument(
        "-o",
        "--output",
        required=True,
        metavar="DIR",
        help="the page's directory: new, empty, or with --force an earlier page's",
    )
    page.add_argument("--force", action="store_true", help="replace an earlier page's directory")
    method(page)
    page.set_defaults(handler=_cmd_decision_page, names=common | {"path": "-o"})
    sheet = commands.add_parser(
        "decision-sheet", help="write the printable PDF for p-values and tests"
    )
    sheet.add_argument("-o", "--output", required=True, metavar="FILE", help="the PDF")
    sheet.add_argument("--force", action="store_true", help="replace FILE if it exists")
    method(sheet)
    sheet.set_defaults(handler=_cmd_decision_sheet, names=common | {"path": "-o"})
