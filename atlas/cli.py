"""The ``approx-atlas`` command line: parse, call the Python API, print.

Each command is a function ``_cmd_<name>(args) -> int`` registered in `_build_parser`. A user's
mistake (a ValueError, TypeError or OSError from the API) becomes one line on stderr,
``approx-atlas: error: <message>``, and exit status 2, never a traceback. The API names its
parameters in backquotes (`` `p_lo` ``); each command maps those names to its options
(``--p-range``), so that a message names what the user typed.

Every command that writes a file checks, before any work, that it can be written (a probe file
is created and removed in its directory) and refuses to replace an existing one without
``--force``; the file is written under a temporary name and renamed when complete.
"""

import argparse
import sys

from atlas import INTERVALS, METRICS, __version__, is_resolved
from atlas.cli_common import METHOD_LIST as _METHOD_LIST
from atlas.cli_common import P_FORMS as _P_FORMS
from atlas.cli_common import PROG
from atlas.cli_common import Options as _Options
from atlas.cli_common import check_format as _check_format
from atlas.cli_common import check_output as _check_output
from atlas.cli_common import describe_error as _describe_error
from atlas.cli_common import emit as _emit
from atlas.cli_common import fail as _fail
from atlas.cli_common import integer as _integer
from atlas.cli_common import method_help as _method_help
from atlas.cli_common import number as _number
from atlas.cli_common import number_list as _number_list
from atlas.cli_common import p_range as _p_range
from atlas.cli_common import print_json as _print_json
from atlas.cli_common import probabilities as _probabilities
from atlas.cli_coverage import add_coverage_commands
from atlas.cli_decisions import add_commands as add_decision_commands
from atlas.grid import DEFAULT_N_SPEC, DEFAULT_P_SPEC, describe_grid
from atlas.notation import bound_up, format_beside, format_p, parse_probability, rounded

_METRIC_HELP = "interval (default: any P(a <= X <= b)) or cdf (any P(X <= k))"


def _cmd_grid(args):
    """Print a one-line summary of the grid that the n and p specs give."""
    with _Options(n="--n", p="--p"):
        print(describe_grid(args.n, args.p))
    return 0


# --- query, min-n, compare, demo: questions asked of an atlas (atlas.query) ---------------------

# An invented inspection lot: 80 fasteners, a 2.5 % defect rate, a tolerance of 0.01.
_DEMO = {"n": 80, "p": 0.025, "tol": 0.01}


class _EmbeddedAtlas:
    """Retell errors about the embedded atlas without the API's `path` (the user typed none)."""

    def __enter__(self):
        return self

    def __exit__(self, kind, error, _tb):
        if isinstance(error, FileNotFoundError):
            from atlas.store import default_path

            raise FileNotFoundError(
                f"the embedded atlas is missing: {str(default_path())!r}; reinstall "
                "approx-atlas, or pass --atlas FILE."
            ) from None
        if isinstance(error, (ValueError, OSError)) and getattr(error, "filename", None) is None:
            message = _describe_error(error).replace("`path`", "the embedded atlas")
            raise type(error)(message) from None
        return False


def _atlas_errors(given, option="--atlas"):
    """The context that words errors about the atlas file: named by ``option`` if ``given``."""
    return _Options(path=option) if given else _EmbeddedAtlas()


def _open_atlas(args):
    """The atlas named by ``--atlas``, or the embedded default."""
    from atlas.query import open_atlas

    with _atlas_errors(args.atlas is not None):
        return open_atlas(args.atlas)


def _digits(atlas, source):
    """Significant digits of an answer: the atlas's for a stored cell, float64's if computed."""
    from atlas.notation import FLOAT64_DIGITS

    return atlas.error_digits if source == "atlas" else FLOAT64_DIGITS


def _source_text(atlas, source, method):
    """Where an answer came from, for people."""
    if source == "atlas":
        where = "the Dataset in memory" if atlas.path is None else str(atlas.path)
        return f"atlas (a stored cell of {where})"
    if method not in atlas.methods:
        return f"computed exactly by the engine ({method} is not stored in the atlas)"
    return "computed exactly by the engine (not a cell of the atlas grid)"


def _cmd_query(args):
    """Print the verdict at one (n, p); with --strict, exit 3 when unsafe."""
    import dataclasses

    p = parse_probability(args.p, "--p")
    atlas = _open_atlas(args)
    verdict = atlas.is_safe(
        _number(args.n), p, _number(args.tol), method=args.method, metric=args.metric
    )
    a, b = verdict.worst_interval
    digits = _digits(atlas, verdict.source)
    if args.json:
        record = dataclasses.asdict(verdict)
        record["error"] = rounded(verdict.error, digits)
        record["margin"] = rounded(verdict.margin, digits)
        record["accuracy"] = bound_up(verdict.accuracy)
        record["error_digits"] = digits
        record["worst_interval"] = [a, b]
        record["explain"] = verdict.explain(digits)
        record["atlas"] = None if atlas.path is None else str(atlas.path)
        _print_json(record)
    else:
        from atlas.query import describe_error

        label = "worst interval" if verdict.metric == "interval" else "worst interval*"
        lines = [
            f"Bin(n={verdict.n}, p={format_p(verdict.p)}), {verdict.method}, {verdict.metric} "
            "error",
            f"  error           {describe_error(verdict.error, verdict.accuracy, digits)}",
            f"  tolerance       {format_p(verdict.tol)}",
            f"  margin          {verdict.margin:.4g}  (tolerance - error - accuracy)",
            "  verdict         "
            + ("safe: the error is within the tolerance" if verdict.safe
               else "UNSAFE: the error exceeds the tolerance" if verdict.error > verdict.tol
               else "UNSAFE: the error may exceed the tolerance (within its accuracy)"),
            f"  {label:<15} P({a} <= X <= {b})",
            f"  source          {_source_text(atlas, verdict.source, verdict.method)}",
        ]  # fmt: skip
        if verdict.metric != "interval":
            lines.append("  * where the interval error is attained")
        print("\n".join(lines))
    return 3 if args.strict and not verdict.safe else 0


def _cmd_min_n(args):
    """Print the smallest n from which the error stays within tol at every integer n (at p, or
    at every p of a range)."""
    p_range = None if args.p_range is None else _p_range(args.p_range)
    p = None if args.p is None else parse_probability(args.p, "--p")
    atlas = _open_atlas(args)
    tol = _number(args.tol)
    options = {"method": args.method, "metric": args.metric}
    if p_range is not None:
        lo, hi = p_range
        with _Options(p="--p-range", p_lo="--p-range", p_hi="--p-range"):
            answer = atlas.threshold_over(lo, hi, tol, **options)
        decided = next(t for t in answer.per_p if t.p == answer.worst_p)
        where = f"every p in [{format_p(lo)}, {format_p(hi)}]"
        if lo == hi:
            where = f"p = {format_p(lo)}"
    else:
        answer = decided = atlas.threshold(p, tol, **options)
        where = f"p = {format_p(p)}"
    source = "atlas" if atlas.on_grid(p=decided.p, method=args.method) else "computed"
    tol = float(tol)
    failing = decided.failing
    if args.json:
        _print_json({
            "min_n": answer.n,
            "p": None if args.p_range is not None else decided.p,
            "p_range": None if args.p_range is None else [float(lo), float(hi)],
            "p_checked": [t.p for t in answer.per_p] if args.p_range is not None else [decided.p],
            "decided_at_p": decided.p,
            "tol": tol,
            "method": args.method,
            "metric": args.metric,
            "source": source,
            "every_integer": answer.n is not None and answer.exact,
            "upto": answer.upto,
            "failing": None if failing is None else {"n": failing[0], "error": failing[1]},
            "runs": [{"first": a, "last": b, "within": s, "every_integer": e}
                     for a, b, s, e in decided.runs],
            "basis": answer.basis(),
            "n_max": int(atlas.n[-1]),
        })  # fmt: skip
        return 0
    head = f"{args.method} {args.metric} error <= {format_p(tol)} at {where}"
    if answer.n is None:
        last = decided.runs[-1][1] if decided.runs else int(atlas.n[-1])
        lines = [f"{head}: no n from which on every n is within it "
                 f"(at n = {last:,}, the largest n examined, the error exceeds it)"]  # fmt: skip
    else:
        end = "on" if answer.upto is None else f"to {answer.upto:,}"
        scope = (f"every integer n from {answer.n:,} {end}" if answer.exact
                 else "not every integer between the n evaluated: see the basis")  # fmt: skip
        lines = [f"{head}: from n = {answer.n:,} on ({scope})"]
        if failing is not None:
            lines.append(f"  n = {failing[0]:,} is not within it (error "
                         f"{format_beside(failing[1], tol)})")  # fmt: skip
    if args.p_range is not None:
        lines.append(f"  p checked: {answer.checked()}")
        lines.append(f"  decided at p = {format_p(decided.p)}")
    safe_stretches = [r for r in decided.runs if r[2]]
    if answer.n is None or len(safe_stretches) > 1:  # the safe n are not one run upward
        lines.append("  stretches of n:")
        lines += [f"    {line}" for line in decided.describe_runs()]
    lines.append(f"  basis: {decided.basis()}")
    lines.append(f"  source: {_source_text(atlas, source, args.method)}")
    print("\n".join(lines))
    return 0


def _cmd_compare(args):
    """Print every method of the atlas ranked by its error at (n, p)."""
    p = parse_probability(args.p, "--p")
    atlas = _open_atlas(args)
    n = _number(args.n)
    ranking = atlas.best_method(n, p, metric=args.metric, return_accuracy=True)
    source = "atlas" if atlas.on_grid(n, p, method=ranking[0].method) else "computed"
    digits = _digits(atlas, source)
    if args.json:
        _print_json({
            "n": int(n),
            "p": float(p),
            "metric": args.metric,
            "source": source,
            "error_digits": digits,
            "ranking": [{"method": r.method, "error": rounded(r.error, digits),
                         "accuracy": bound_up(r.accuracy), "resolved": is_resolved(*r[1:3]),
                         "rank": r.rank, "tied_with": list(r.tied_with)}
                        for r in ranking],
        })  # fmt: skip
        return 0
    from atlas.query import describe_error

    lines = [f"Bin(n={int(n)}, p={format_p(p)}), {args.metric} error, best first"]
    ties = any(r.tied_with for r in ranking)
    for r in ranking:
        rank = f"={r.rank}" if r.tied_with else f"{r.rank}"
        lines.append(f"  {rank:>3}  {r.method:<14} {describe_error(r.error, r.accuracy, digits)}")
    if ties:
        lines.append("  =k: tied (errors differ by less than their accuracies): the same rank")
    lines.append(f"  source: {_source_text(atlas, source, ranking[0].method)}")
    print("\n".join(lines))
    return 0


def _cmd_demo(args):
    """Answer the main questions for an invented inspection lot, in a few lines."""
    from atlas.query import describe_error

    atlas = _open_atlas(args)
    caution = atlas.attrs.get("comment")  # the caution stored in every atlas
    if not caution:
        from atlas.cube import CAUTION as caution
    n, p, tol = _DEMO["n"], _DEMO["p"], _DEMO["tol"]
    verdict = atlas.is_safe(n, p, tol)
    best = atlas.best_method(n, p, return_accuracy=True)[0]
    smallest = atlas.min_n(p, tol)
    within = "within" if best.error + best.accuracy <= tol else "not within"
    best_digits = _digits(atlas, "atlas" if atlas.on_grid(n, p, method=best.method) else "")
    from_n = f"from n = {smallest} on" if smallest is not None else "at no n of the atlas"
    if smallest is not None:
        from_n += " (every integer n, not only grid n)"
    p_text, tol_text = format_p(p), format_p(tol)
    print("\n".join([
        f"Demo (an invented scenario): an incoming inspection lot of n = {n} fasteners with a "
        f"defect rate of p = {p_text}; every P(a <= X <= b), X ~ Bin({n}, {p_text}), wanted "
        f"within {tol_text}.",
        f"  normal_cc: {verdict.explain(_digits(atlas, verdict.source))}",
        f"  best method here: {best.method}, error "
        f"{describe_error(best.error, best.accuracy, best_digits)}, {within} the tolerance",
        f"  normal_cc is within {tol_text} at p = {p_text} {from_n}",
        f"  next: approx-atlas query --n {n} --p {p_text} --tol {tol_text}; approx-atlas "
        f"compare --n {n} --p {p_text}",
    ] + _decision_demo_lines(n, p) + [
        f"  caution: {caution}",
    ]))  # fmt: skip
    return 0


def _decision_demo_lines(n, p):
    """The demo's questions about p-values and tests (atlas/cli_decisions.py)."""
    from atlas.cli_decisions import demo_lines

    return demo_lines(n, p)


def _add_query_commands(commands):
    """Register query, min-n, compare and demo."""

    def common(sub, *, method=True):
        sub.add_argument("--atlas", metavar="FILE", help="atlas file (default: the embedded one)")
        if method:
            sub.add_argument("--method", default="normal_cc", help=_method_help())
        sub.add_argument("--metric", default="interval", help=_METRIC_HELP)
        sub.add_argument("--json", action="store_true", help="print one JSON object")

    p_help = f"success probability, 0 < p < 1: {_P_FORMS}"
    query = commands.add_parser("query", help="is the approximation within a tolerance at (n, p)?")
    query.add_argument("--n", required=True, help="number of trials, n >= 1")
    query.add_argument("--p", required=True, help=p_help)
    query.add_argument("--tol", required=True, help="tolerance on the error, > 0")
    common(query)
    query.add_argument("--strict", action="store_true", help="exit with status 3 when unsafe")
    query.set_defaults(
        handler=_cmd_query,
        names={"n": "--n", "p": "--p", "tol": "--tol", "method": "--method", "metric": "--metric"},
    )

    min_n = commands.add_parser(
        "min-n", help="the smallest n at which the error is within tol, and stays so above it"
    )
    where = min_n.add_mutually_exclusive_group(required=True)
    where.add_argument("--p", help=p_help)
    where.add_argument("--p-range", metavar="LO:HI",
                       help=f"every p in [LO, HI] (see the basis); LO and HI each "
                            f"{_P_FORMS}")  # fmt: skip
    min_n.add_argument("--tol", required=True, help="tolerance on the error, > 0")
    common(min_n)
    min_n.set_defaults(
        handler=_cmd_min_n,
        names={
            "p": "--p",
            "tol": "--tol",
            "method": "--method",
            "metric": "--metric",
            "p_lo": "--p-range",
            "p_hi": "--p-range",
        },
    )

    compare = commands.add_parser("compare", help="every method ranked by its error at (n, p)")
    compare.add_argument("--n", required=True, help="number of trials, n >= 1")
    compare.add_argument("--p", required=True, help=p_help)
    common(compare, method=False)
    compare.set_defaults(handler=_cmd_compare, names={"n": "--n", "p": "--p", "metric": "--metric"})

    demo = commands.add_parser("demo", help="the main questions for an invented inspection lot")
    demo.add_argument("--atlas", metavar="FILE", help="atlas file (default: the embedded one)")
    demo.set_defaults(handler=_cmd_demo)


# --- build, inspect: making and checking atlas files (atlas.build, atlas.cube) ------------------


def _cmd_build(args):
    """Build an atlas over a grid and write it to a NetCDF file, atomically."""
    import time

    from atlas import cube
    from atlas.build import GROUP_OPTIONS, build_atlas, check_groups, check_methods
    from atlas.files import check_target
    from atlas.grid import parse_n, parse_p

    # Every check that can fail comes before any work: FILE can be written (a probe file is
    # created and removed beside it), the specs, methods and group options are valid.
    target = check_target(args.output, overwrite=args.force, name="-o")
    parse_n(args.n)
    parse_p(args.p)
    check_methods(args.methods)
    groups = {name: getattr(args, name) for name in GROUP_OPTIONS}
    check_groups(**groups)
    options = {
        "methods": args.methods,
        "workers": args.workers,
        "checkpoint": args.checkpoint,
        "progress": True,
        **groups,
    }
    started = time.perf_counter()
    if args.dask is None:
        ds = build_atlas(args.n, args.p, **options)
    else:
        from atlas.distributed import connect, parse_spec

        parse_spec(args.dask)
        with connect(args.dask) as client:
            ds = build_atlas(args.n, args.p, client=client, **options)
    if args.float32:
        ds = cube.compact(ds, "float32")
    cube.save_atlas(ds, target, overwrite=args.force)
    elapsed = time.perf_counter() - started
    sizes = ds.sizes
    methods = sizes["approximation"]
    cells = methods * sizes["n"] * sizes["p"]
    extra = "".join(
        f", {what}" for key, what in (("decision_n", "tail and test-size variables"),
                                      ("coverage_n", "coverage variables")) if key in sizes
    )  # fmt: skip
    print(
        f"wrote {target}: {sizes['n']} n x {sizes['p']} p x {methods} methods = {cells} "
        f"cells in {elapsed:.1f} s ({cells / elapsed:.0f} cells/s), "
        f"{target.stat().st_size / 1e6:.2f} MB, {ds['interval_error'].dtype} errors{extra}"
    )
    return 0


def _cmd_inspect(args):
    """Print an atlas file's grid, methods, variables and provenance, then verify its checksum."""
    from atlas import cube, store

    if args.file is not None and args.atlas is not None and args.file != args.atlas:
        raise ValueError(f"give FILE or `--atlas`, not both; got {args.file!r} and {args.atlas!r}.")
    path = args.file or args.atlas or store.default_path()
    given = args.file is not None or args.atlas is not None
    with _atlas_errors(given, "FILE" if args.file is not None else "--atlas"):
        ds = cube.load_dataset(path)
        try:  # every value is read and checked before anything is printed
            digest = cube.verify_checksum(ds, path)
            lines = cube.describe_dataset(ds, path)
        finally:
            ds.close()
    print("\n".join(lines))
    print(f"checksum: ok ({digest})")
    return 0


def _add_build_commands(commands):
    """Register build and inspect."""
    build = commands.add_parser("build", help="compute an atlas over a grid and write it to NetCDF")
    build.add_argument("--n", default=DEFAULT_N_SPEC, help="n axis spec (default: the atlas's)")
    build.add_argument("--p", default=DEFAULT_P_SPEC, help="p axis spec (default: the atlas's)")
    build.add_argument(
        "--methods", help=f"comma-separated methods of {_METHOD_LIST} (default: all)"
    )
    build.add_argument("-o", "--output", required=True, metavar="FILE", help="the NetCDF file")
    build.add_argument(
        "--workers", type=_integer, metavar="K", help="local worker processes (default: this one)"
    )
    build.add_argument("--force", action="store_true", help="replace an existing FILE")
    build.add_argument(
        "--float32", action="store_true", help="store the errors as float32 (7 digits)"
    )
    build.add_argument("--dask", metavar="SPEC", help="'local:K' or 'tcp://HOST:PORT'")
    build.add_argument("--checkpoint", metavar="DIR", help="keep finished chunks in DIR")
    tails = build.add_argument_group(
        "tail and test-size variables", "on a grid of their own; any of these options adds them"
    )
    tails.add_argument(
        "--decisions",
        action="store_true",
        help="add tail_error, test_size and exact_test_size (default grid)",
    )
    tails.add_argument(
        "--decision-n", metavar="SPEC", help="their n axis (default 1:200,log:200:100000000:121)"
    )
    tails.add_argument(
        "--decision-p", metavar="SPEC", help="their p axis (default logit:0.0001:0.9999:41,0.5)"
    )
    tails.add_argument(
        "--tail-levels", metavar="LIST", help="tail levels alpha (default 0.0001,0.001,0.01,0.05)"
    )
    tails.add_argument(
        "--test-levels", metavar="LIST", help="test levels alpha (default 0.001,0.01,0.05,0.1)"
    )
    cover = build.add_argument_group(
        "coverage variables", "on a grid of their own; any of these options adds them"
    )
    cover.add_argument(
        "--coverage",
        action="store_true",
        help="add coverage, min_coverage and expected_width (default grid)",
    )
    cover.add_argument(
        "--coverage-n",
        metavar="SPEC",
        help="their n axis, n <= 10^6 (default 1:100,log:100:10000:21)",
    )
    cover.add_argument(
        "--coverage-p",
        metavar="SPEC",
        help="their p axis, two p or more (default logit:0.001:0.999:61)",
    )
    cover.add_argument(
        "--intervals",
        metavar="NAMES",
        help=f"comma-separated intervals (default all: {', '.join(INTERVALS)})",
    )
    cover.add_argument(
        "--coverage-levels", metavar="LIST", help="nominal levels (default 0.9,0.95,0.99)"
    )
    build.set_defaults(
        handler=_cmd_build,
        names={"n": "--n", "p": "--p", "methods": "--methods", "method": "--methods",
               "workers": "--workers", "spec": "--dask", "checkpoint": "--checkpoint",
               "path": "-o", "decision_n": "--decision-n", "decision_p": "--decision-p",
               "tail_levels": "--tail-levels", "test_levels": "--test-levels",
               "coverage_n": "--coverage-n", "coverage_p": "--coverage-p",
               "intervals": "--intervals", "coverage_levels": "--coverage-levels"},
    )  # fmt: skip

    inspect = commands.add_parser("inspect", help="describe an atlas file and verify its checksum")
    inspect.add_argument("file", nargs="?", metavar="FILE", help="default: the embedded atlas")
    inspect.add_argument("--atlas", metavar="FILE", help="the same as FILE")
    inspect.set_defaults(handler=_cmd_inspect)


# --- chart, table, rules, sheet, wiki: outputs for people (charts, tables, sheets) -------------


def _cmd_chart(args):
    """Draw a map (or a comparison) and write it as PNG, SVG or PDF by the file's extension."""
    from atlas import charts, figures

    with _Options(path="-o"):
        figures.figure_format(args.output)  # refuse a bad extension before any drawing
    _check_output(args)
    atlas = _open_atlas(args)
    fig = charts.chart(atlas, kind=args.kind, method=args.method, method2=args.method2,
                       metric=args.metric, p_scale=args.p_scale)  # fmt: skip
    print(figures.save_figure(fig, args.output))
    return 0


def _cmd_table(args):
    """Print (or write) the minimum n for each tolerance and p."""
    from atlas.tables import TABLE_FORMATS, threshold_table

    _check_format(args.format, TABLE_FORMATS)
    tols, ps = _number_list(args.tol, "--tol"), _probabilities(args.p, "--p")
    _check_output(args)
    table = threshold_table(_open_atlas(args), tols, ps, method=args.method,
                            metric=args.metric)  # fmt: skip
    return _emit(table.render(args.format), args.output)


def _cmd_rules(args):
    """Print (or write) the audit of the classic rules of thumb and the user's own."""
    from atlas.rules import AUDIT_RULES, parse_rule
    from atlas.tables import AUDIT_FORMATS, rule_audit

    _check_format(args.format, AUDIT_FORMATS)
    extra = [parse_rule(text, name="--rule") for text in args.rule or ()]
    tols = _number_list(args.tol, "--tol")
    _check_output(args)
    audit = rule_audit(
        _open_atlas(args),
        list(AUDIT_RULES) + extra,
        methods=args.method,
        metrics=args.metric or METRICS,
        tols=tols,
        between=not args.grid_only,
    )
    return _emit(audit.render(args.format), args.output)


def _cmd_sheet(args):
    """Write the printable PDF reference sheet."""
    from pathlib import Path

    from atlas.sheets import PAPERS, write_sheet

    if Path(args.output).suffix.lower() != ".pdf":
        raise ValueError(f"`-o` must end in '.pdf'; got {args.output!r}.")
    if args.paper is not None and args.paper not in PAPERS:
        valid = ", ".join(repr(name) for name in PAPERS)
        raise ValueError(f"`--paper` must be one of {valid}; got {args.paper!r}.")
    _check_output(args)
    print(write_sheet(_open_atlas(args), args.output, methods=args.method, paper=args.paper))
    return 0


def _cmd_wiki(args):
    """Write the static wiki page (index.html, index.md and SVG charts) into a directory."""
    from atlas.files import check_directory_target
    from atlas.sheets import write_wiki

    check_directory_target(args.output, overwrite=args.force, name="-o")
    written = write_wiki(_open_atlas(args), args.output, methods=args.method,
                         overwrite=args.force)  # fmt: skip
    print(written[-1])
    return 0


def _add_output_commands(commands):
    """Register chart, table, rules, sheet and wiki."""

    def atlas_option(sub):
        sub.add_argument("--atlas", metavar="FILE", help="atlas file (default: the embedded one)")

    def force_option(sub, what="FILE"):
        sub.add_argument("--force", action="store_true", help=f"replace an existing {what}")

    def page_methods(sub):
        sub.add_argument(
            "--method",
            action="append",
            help=f"a method to map, one of {_METHOD_LIST} (repeatable; default normal_cc and "
            "edgeworth_cc)",
        )

    def text_options(sub, formats):
        """--format, --atlas, -o and --force of a command that prints text or writes a file."""
        sub.add_argument("--format", default="md", help=formats)
        atlas_option(sub)
        sub.add_argument("-o", "--output", metavar="FILE", help="write FILE instead of printing")
        force_option(sub)

    chart = commands.add_parser("chart", help="draw an error map or a comparison of methods")
    chart.add_argument("--method", default="normal_cc", help=_method_help())
    chart.add_argument("--method2", help="the other method of --kind compare or gain")
    chart.add_argument("--metric", default="interval", help=_METRIC_HELP)
    chart.add_argument("--kind", default="map", help="map (default), compare, gain or best")
    chart.add_argument("--p-scale", default="logit", help="p axis: logit (default) or linear")
    atlas_option(chart)
    chart.add_argument("-o", "--output", required=True, metavar="FILE",
                       help="FILE.png (>= 1600 px wide), FILE.svg or FILE.pdf")  # fmt: skip
    force_option(chart)
    chart.set_defaults(handler=_cmd_chart,
                       names={"method": "--method", "method2": "--method2", "metric": "--metric",
                              "kind": "--kind", "p_scale": "--p-scale", "path": "-o"})  # fmt: skip

    table = commands.add_parser("table", help="the minimum n for each tolerance and p")
    table.add_argument("--tol", default="0.01,0.005,0.001", help="tolerances (0.01,0.005,0.001)")
    table.add_argument("--p", default="0.01,0.05,0.1,0.3,0.5",
                       help=f"p values (0.01,0.05,0.1,0.3,0.5), each {_P_FORMS}")  # fmt: skip
    table.add_argument("--method", default="normal_cc", help=_method_help())
    table.add_argument("--metric", default="interval", help=_METRIC_HELP)
    text_options(table, "csv, md (default) or json")
    table.set_defaults(
        handler=_cmd_table,
        names={
            "tols": "--tol",
            "ps": "--p",
            "p": "--p",
            "tol": "--tol",
            "method": "--method",
            "metric": "--metric",
            "path": "-o",
        },
    )

    audit = commands.add_parser("rules", help="audit the rules of thumb (and yours) on the atlas")
    audit.add_argument("--rule", action="append", metavar="EXPR",
                       help="also audit EXPR, e.g. 'n*p*q >= 10' (repeatable)")  # fmt: skip
    audit.add_argument("--method", action="append",
                       help=f"a method of the atlas, of {_METHOD_LIST} (repeatable; default "
                            "all the atlas holds)")  # fmt: skip
    audit.add_argument("--metric", action="append",
                       help="interval or cdf (repeatable; default both)")  # fmt: skip
    audit.add_argument("--tol", default="0.01,0.005,0.001", help="tolerances for the shares")
    audit.add_argument("--grid-only", action="store_true",
                       help="the worst error over the grid cells only (default: every integer n "
                       "and p of the atlas's ranges, as checked)")  # fmt: skip
    text_options(audit, "md (default) or json")
    audit.set_defaults(handler=_cmd_rules,
                       names={"methods": "--method", "metric": "--metric", "metrics": "--metric",
                              "tols": "--tol", "rules": "--rule", "path": "-o"})  # fmt: skip

    sheet = commands.add_parser("sheet", help="write the printable PDF reference sheet")
    page_methods(sheet)
    atlas_option(sheet)
    sheet.add_argument("-o", "--output", required=True, metavar="FILE.pdf", help="the PDF file")
    force_option(sheet)
    sheet.add_argument("--paper", help="a4 or letter, landscape (default: letter where the "
                       "locale's territory prints on it, as US, CA, MX; else a4)")  # fmt: skip
    sheet.set_defaults(handler=_cmd_sheet, names={"methods": "--method", "path": "-o"})

    wiki = commands.add_parser("wiki", help="write a static wiki page with SVG charts")
    page_methods(wiki)
    atlas_option(wiki)
    wiki.add_argument(
        "-o",
        "--output",
        required=True,
        metavar="DIR",
        help="the page's directory: new, empty, or with --force a page's directory to replace",
    )
    force_option(wiki, "page directory DIR")
    wiki.set_defaults(handler=_cmd_wiki,
                      names={"methods": "--method", "directory": "-o", "path": "-o"})  # fmt: skip


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
    grid.add_argument("--p", default=DEFAULT_P_SPEC,
                      help="p axis spec (default: the atlas's); numbers may be fractions "
                           "(1/3) or percentages (5%%)")  # fmt: skip
    grid.set_defaults(handler=_cmd_grid, names={"n": "--n", "p": "--p"})
    _add_query_commands(commands)
    _add_build_commands(commands)
    _add_output_commands(commands)
    add_coverage_commands(commands)  # confidence intervals for p (atlas/cli_coverage.py)
    add_decision_commands(commands)  # tail p-values and test sizes (atlas/cli_decisions.py)
    # Rule constants and exported thresholds (atlas/cli_exports.py), which open an atlas with
    # this module's _open_atlas, so it is imported here rather than at the top.
    from atlas.cli_exports import add_commands as add_export_commands

    add_export_commands(commands)
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
    except BrokenPipeError:  # the reader went away (`approx-atlas inspect | head`): not an error
        sys.stderr.close()
        return 0
    except (ValueError, TypeError, OSError) as error:  # OSError covers FileNotFound/Exists
        return _fail(_describe_error(error, getattr(args, "names", None)))
