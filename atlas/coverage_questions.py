"""Questions about confidence intervals for p, answered exactly from :mod:`atlas.confidence`.

- :func:`check_coverage`: does an interval cover at least ``floor`` for every p in a band, at n?
- :func:`coverage_min_n`: from which n on does it, for every n checked after?
- :func:`shortest_interval`: which interval is the shortest that keeps coverage >= ``floor``?

Each answer is an object holding the numbers it rests on, with ``explain()`` for people and
``to_dict()`` for JSON. The minimum coverage is the exact infimum over the band
(:func:`atlas.confidence.min_coverage`), never a sample of p.

Coverage does not settle monotonically in n (Brown, Cai and DasGupta 2001): an interval can meet a
floor at n and miss it at n + 1. So :func:`coverage_min_n` checks *every* integer n from 1 to a
stated limit ``n_max`` and reports the runs of n where the floor holds; its answer is the start
of the last run when that run reaches ``n_max``, and it promises nothing beyond ``n_max``.
"""

from dataclasses import asdict, dataclass

import numpy as np

from atlas.confidence import (
    INTERVALS,
    _show,
    check_interval,
    check_level,
    check_n,
    check_p,
    mean_width,
    min_coverage,
)

N_MAX_LIMIT = 100_000


def _check_floor(floor):
    try:
        value = float(floor)
    except (TypeError, ValueError):
        value = None
    if isinstance(floor, bool) or value is None or not 0.0 < value < 1.0:
        raise ValueError(f"`floor` must be in the open interval (0, 1); got {_show(floor)}.")
    return value


def _check_band(p_lo, p_hi):
    lo, hi = check_p(p_lo, "p_lo"), check_p(p_hi, "p_hi")
    if lo.ndim or hi.ndim:
        raise ValueError("`p_lo` and `p_hi` must be single numbers here.")
    lo, hi = float(lo), float(hi)
    if lo > hi:
        raise ValueError(f"`p_lo` must be <= `p_hi`; got p_lo={lo!r} > p_hi={hi!r}.")
    return lo, hi


def _single_n(n, name="n", limit=None):
    arr = check_n(n, name)
    if arr.ndim:
        raise ValueError(f"`{name}` must be a single integer here; got shape {arr.shape}.")
    if limit is not None and int(arr) > limit:
        raise ValueError(f"`{name}` must be an integer from 1 to {limit}; got {_show(n)}.")
    return int(arr)


def _band_text(p_lo, p_hi):
    return f"p = {p_lo:g}" if p_lo == p_hi else f"every p in [{p_lo:g}, {p_hi:g}]"


@dataclass(frozen=True)
class CoverageVerdict:
    """Whether an interval covers at least ``floor`` for every p in [p_lo, p_hi] at n.

    Attributes
    ----------
    holds : bool
        ``min_coverage >= floor``.
    min_coverage : float
        The exact infimum of the coverage over the band.
    worst_p : float
        Where it is attained or approached; ``approach`` says which (see
        :class:`atlas.confidence.MinCoverage`).
    margin : float
        ``min_coverage - floor``.
    """

    n: int
    p_lo: float
    p_hi: float
    floor: float
    interval: str
    level: float
    holds: bool
    min_coverage: float
    worst_p: float
    approach: str
    margin: float

    def explain(self):
        """One sentence for people."""
        verb = "covers at least" if self.holds else "does NOT cover at least"
        limit = {"attained": "at", "from below": "as p rises to", "from above": "as p falls to"}
        return (
            f"the {self.level:g} {self.interval} interval at n = {self.n} {verb} "
            f"{self.floor:g} for {_band_text(self.p_lo, self.p_hi)}: its minimum coverage is "
            f"{self.min_coverage:.6f}, {limit[self.approach]} p = {self.worst_p:.6g}."
        )

    def to_dict(self):
        return {**asdict(self), "explain": self.explain()}


def check_coverage(n, p_lo, p_hi, floor, *, interval="wald", level=0.95):
    """Does the interval cover at least ``floor`` for every p in [p_lo, p_hi] at n?

    Parameters
    ----------
    n : int
        Number of trials, ``n >= 1``.
    p_lo, p_hi : float
        The band of p, ``0 < p_lo <= p_hi < 1``.
    floor : float
        The coverage wanted, ``0 < floor < 1``.
    interval : str
        One of :data:`atlas.confidence.INTERVALS`.
    level : float
        The nominal level, ``0 < level < 1``.

    Returns
    -------
    CoverageVerdict

    Examples
    --------
    >>> v = check_coverage(40, 0.05, 0.5, 0.93, interval="wilson")
    >>> v.holds, round(v.min_coverage, 4), round(v.worst_p, 4)
    (False, 0.9278, 0.2008)
    """
    n = _single_n(n)
    p_lo, p_hi = _check_band(p_lo, p_hi)
    check_interval(interval)
    level = check_level(level)
    floor = _check_floor(floor)
    m = min_coverage(n, p_lo, p_hi, interval=interval, level=level, detail=True)
    return CoverageVerdict(
        n,
        p_lo,
        p_hi,
        floor,
        interval,
        level,
        bool(m.value >= floor),
        m.value,
        m.p,
        m.approach,
        m.value - floor,
    )


@dataclass(frozen=True)
class CoverageMinN:
    """The smallest n from which the floor holds at every n checked, up to ``n_max``.

    Attributes
    ----------
    min_n : int or None
        The start of the last run of n where the floor holds, if that run reaches ``n_max``;
        None when the floor fails at ``n_max``.
    runs : tuple of (int, int)
        Every maximal run [a, b] of consecutive n in 1..n_max where the floor holds.
    n_max : int
        The largest n checked; every integer n from 1 to n_max was checked, none beyond.
    last_failure : int or None
        The largest n <= n_max where the floor fails.
    worst_at_n_max : float
        The minimum coverage over the band at n_max.
    """

    p_lo: float
    p_hi: float
    floor: float
    interval: str
    level: float
    n_max: int
    min_n: int | None
    runs: tuple
    last_failure: int | None
    worst_at_n_max: float

    def explain(self):
        """A few sentences for people, saying what was checked."""
        head = (
            f"the {self.level:g} {self.interval} interval covering at least {self.floor:g} for "
            f"{_band_text(self.p_lo, self.p_hi)}"
        )
        checked = f"every integer n from 1 to {self.n_max} checked, none beyond"
        if not self.runs:
            return f"{head}: at no n up to {self.n_max} ({checked})."
        runs = ", ".join(f"{a}" if a == b else f"{a}..{b}" for a, b in self.runs)
        if self.min_n is None:
            return (
                f"{head}: not at n = {self.n_max}, so no n from which it holds is known "
                f"({checked}); it holds at n in {runs}."
            )
        tail = (
            ""
            if self.last_failure is None
            else f"; the last n where it fails is {self.last_failure}"
        )
        return (
            f"{head}: from n = {self.min_n} on, up to n = {self.n_max} ({checked}){tail}. "
            f"It holds at n in {runs}."
        )

    def to_dict(self):
        record = asdict(self)
        record["runs"] = [list(r) for r in self.runs]
        return {**record, "explain": self.explain()}


def coverage_min_n(p_lo, p_hi, floor, *, interval="wald", level=0.95, n_max=1000):
    """From which n on does the interval cover at least ``floor`` for every p in the band?

    Parameters
    ----------
    p_lo, p_hi : float
        The band of p, ``0 < p_lo <= p_hi < 1``.
    floor : float
        The coverage wanted, ``0 < floor < 1``.
    interval, level
        As :func:`check_coverage`.
    n_max : int
        The largest n checked, ``1 <= n_max <= 100000``; every integer n from 1 to n_max is
        checked with the exact minimum coverage (the cost grows as n_max^2: a few seconds at 1000).

    Returns
    -------
    CoverageMinN

    Notes
    -----
    Coverage is not monotone in n, so no n checked can vouch for a larger one: the answer is
    exact for 1..n_max and silent beyond.

    Examples
    --------
    >>> r = coverage_min_n(0.05, 0.5, 0.93, interval="wilson", n_max=200)
    >>> r.min_n, r.last_failure, r.runs
    (116, 115, ((43, 51), (56, 61), (116, 200)))
    """
    p_lo, p_hi = _check_band(p_lo, p_hi)
    check_interval(interval)
    level = check_level(level)
    floor = _check_floor(floor)
    n_max = _single_n(n_max, "n_max", limit=N_MAX_LIMIT)
    worst = _worst_by_n(p_lo, p_hi, interval, level, n_max)
    return _answer(worst, p_lo, p_hi, floor, interval, level)


def _worst_by_n(p_lo, p_hi, interval, level, n_max):
    """The exact minimum coverage over the band at every n = 1..n_max (checked arguments)."""
    return np.array(
        [min_coverage(n, p_lo, p_hi, interval=interval, level=level) for n in range(1, n_max + 1)]
    )


def _answer(worst, p_lo, p_hi, floor, interval, level):
    """The :class:`CoverageMinN` for the minimum coverages ``worst`` at n = 1..len(worst)."""
    n_max = worst.size
    ns = np.arange(1, n_max + 1)
    ok = worst >= floor
    runs, start = [], None
    for n, good in zip(ns.tolist(), ok.tolist(), strict=True):
        if good and start is None:
            start = n
        elif not good and start is not None:
            runs.append((start, n - 1))
            start = None
    if start is not None:
        runs.append((start, n_max))
    failures = ns[~ok]
    last_failure = int(failures[-1]) if failures.size else None
    min_n = runs[-1][0] if runs and runs[-1][1] == n_max else None
    return CoverageMinN(
        p_lo,
        p_hi,
        floor,
        interval,
        level,
        n_max,
        min_n,
        tuple(runs),
        last_failure,
        float(worst[-1]),
    )


@dataclass(frozen=True)
class CoverageTable:
    """The minimum n for each interval and coverage floor over a band (every n to n_max checked).

    Attributes
    ----------
    answers : dict
        ``{(interval, floor): CoverageMinN}``.
    """

    p_lo: float
    p_hi: float
    level: float
    n_max: int
    intervals: tuple
    floors: tuple
    answers: dict

    def cell(self, interval, floor):
        """The table's text for one cell: the minimum n, with ``*`` if it also held below a
        failure (not monotone), or ``> n_max``."""
        answer = self.answers[(interval, floor)]
        if answer.min_n is None:
            return f"> {self.n_max}"
        return f"{answer.min_n}*" if len(answer.runs) > 1 else str(answer.min_n)

    def render(self, fmt="md"):
        """The table as ``"md"``, ``"csv"`` or ``"json"`` text."""
        if fmt not in TABLE_FORMATS:
            valid = ", ".join(repr(f) for f in TABLE_FORMATS)
            raise ValueError(f"`format` must be one of {valid}; got {fmt!r}.")
        if fmt == "json":
            import json

            record = {
                "p_lo": self.p_lo,
                "p_hi": self.p_hi,
                "level": self.level,
                "n_max": self.n_max,
                "rows": [
                    {
                        "interval": i,
                        "floor": f,
                        "min_n": a.min_n,
                        "runs": [list(r) for r in a.runs],
                        "last_failure": a.last_failure,
                    }
                    for (i, f), a in self.answers.items()
                ],
            }
            return json.dumps(record, allow_nan=False) + "\n"
        head = ["interval", *[f"floor {f:g}" for f in self.floors]]
        rows = [[i, *[self.cell(i, f) for f in self.floors]] for i in self.intervals]
        if fmt == "csv":
            return "\n".join(",".join(r) for r in [head, *rows]) + "\n"
        lines = [
            f"Minimum n from which the {self.level:g} interval covers at least the floor for "
            f"{_band_text(self.p_lo, self.p_hi)}, at every n checked up to {self.n_max}",
            "",
            "| " + " | ".join(head) + " |",
            "|" + "---|" * len(head),
            *["| " + " | ".join(r) + " |" for r in rows],
            "",
            f"Every integer n from 1 to {self.n_max} checked with the exact minimum coverage; "
            f"`> {self.n_max}`: the floor fails at n = {self.n_max}; `*`: the floor also held "
            "at some smaller n and failed again after (coverage is not monotone in n).",
        ]
        return "\n".join(lines) + "\n"


TABLE_FORMATS = ("md", "csv", "json")


def coverage_table(p_lo, p_hi, floors, *, level=0.95, intervals=None, n_max=1000):
    """The minimum n for each interval and coverage floor over the band p_lo <= p <= p_hi.

    Parameters
    ----------
    p_lo, p_hi : float
        The band, ``0 < p_lo <= p_hi < 1``.
    floors : sequence of float
        Coverage floors, each ``0 < floor < 1``.
    level : float
        The nominal level of every interval.
    intervals : sequence of str, optional
        Default: all of :data:`atlas.confidence.INTERVALS`.
    n_max : int
        As :func:`coverage_min_n`; the minimum coverage at each n is computed once per interval
        and shared by the floors.

    Returns
    -------
    CoverageTable

    Examples
    --------
    >>> table = coverage_table(0.05, 0.5, [0.93, 0.94], intervals=["wald", "wilson"], n_max=200)
    >>> print(table.render("csv"), end="")
    interval,floor 0.93,floor 0.94
    wald,> 200,> 200
    wilson,116*,> 200
    """
    p_lo, p_hi = _check_band(p_lo, p_hi)
    level = check_level(level)
    floors = tuple(dict.fromkeys(_check_floor(f) for f in np.atleast_1d(floors).tolist()))
    if not floors:
        raise ValueError("`floors` must hold at least one floor; got none.")
    names = INTERVALS if intervals is None else tuple(dict.fromkeys(intervals))
    if not names:
        raise ValueError("`intervals` must name at least one interval; got none.")
    for name in names:
        check_interval(name)
    n_max = _single_n(n_max, "n_max", limit=N_MAX_LIMIT)
    answers = {}
    for name in names:
        worst = _worst_by_n(p_lo, p_hi, name, level, n_max)
        for floor in floors:
            answers[(name, floor)] = _answer(worst, p_lo, p_hi, floor, name, level)
    return CoverageTable(p_lo, p_hi, level, n_max, names, floors, answers)


@dataclass(frozen=True)
class IntervalChoice:
    """The intervals ranked for a band at n: which keep the floor, and what each costs in width.

    Attributes
    ----------
    best : str or None
        The interval with the smallest mean expected width among those whose minimum coverage
        over the band is >= floor; None if none is.
    rows : tuple of dict
        One per interval, narrowest first: ``interval``, ``min_coverage``, ``worst_p``,
        ``mean_width`` (E[hi - lo] averaged over p uniform on the band) and ``meets``.
    """

    n: int
    p_lo: float
    p_hi: float
    floor: float
    level: float
    best: str | None
    rows: tuple

    def explain(self):
        """A few lines for people."""
        where = f"n = {self.n}, {_band_text(self.p_lo, self.p_hi)}"
        if self.best is None:
            head = (
                f"no interval at level {self.level:g} keeps coverage >= {self.floor:g} at {where}"
            )
        else:
            width = next(r["mean_width"] for r in self.rows if r["interval"] == self.best)
            head = (
                f"the shortest {self.level:g} interval keeping coverage >= {self.floor:g} at "
                f"{where} is {self.best} (mean expected width {width:.4f})"
            )
        return head + "."

    def to_dict(self):
        return {**asdict(self), "rows": [dict(r) for r in self.rows], "explain": self.explain()}


def shortest_interval(n, p_lo, p_hi, floor, *, level=0.95, intervals=None):
    """Which interval is the shortest that keeps coverage >= ``floor`` for every p in the band?

    Parameters
    ----------
    n : int
        Number of trials, ``n >= 1``.
    p_lo, p_hi : float
        The band of p, ``0 < p_lo <= p_hi < 1`` (equal for a single p).
    floor : float
        The coverage wanted, ``0 < floor < 1``.
    level : float
        The nominal level of every interval, ``0 < level < 1``.
    intervals : sequence of str, optional
        The candidates; all of :data:`atlas.confidence.INTERVALS` by default.

    Returns
    -------
    IntervalChoice

    Notes
    -----
    "Shortest" is by the expected width E[hi(X) - lo(X)], X ~ Bin(n, p), averaged over p uniform
    on the band (:func:`atlas.confidence.mean_width`, exact); at a single p it is the expected
    width there. Coverage is the exact minimum over the band.

    Examples
    --------
    >>> choice = shortest_interval(40, 0.05, 0.5, 0.93)
    >>> choice.best
    'agresti_coull'
    """
    n = _single_n(n)
    p_lo, p_hi = _check_band(p_lo, p_hi)
    level = check_level(level)
    floor = _check_floor(floor)
    names = INTERVALS if intervals is None else tuple(intervals)
    if not names:
        raise ValueError("`intervals` must name at least one interval; got none.")
    for name in names:
        check_interval(name)
    rows = []
    for name in dict.fromkeys(names):
        m = min_coverage(n, p_lo, p_hi, interval=name, level=level, detail=True)
        width = mean_width(n, p_lo, p_hi, interval=name, level=level)
        rows.append(
            {
                "interval": name,
                "min_coverage": m.value,
                "worst_p": m.p,
                "approach": m.approach,
                "mean_width": width,
                "meets": m.value >= floor,
            }
        )
    rows.sort(key=lambda r: r["mean_width"])
    best = next((r["interval"] for r in rows if r["meets"]), None)
    return IntervalChoice(n, p_lo, p_hi, floor, level, best, tuple(rows))
