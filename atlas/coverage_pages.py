"""The coverage section of the sheet and wiki page: maps, minimum-n tables, definitions.

- :func:`section`: the content (:class:`atlas.sections.Section`), which the main sheet and wiki
  page (:mod:`atlas.sheets`) compose with the others; its maps come from a dataset passed in,
  or from :func:`load_coverage_data` (the coverage variables of the embedded atlas: the one
  line to change if they move).
- :func:`write_coverage_page`: the section alone, ``coverage.html`` and ``coverage.md`` with an
  SVG map per interval and the minimum-n tables beside them, into an existing directory.
- :func:`write_coverage_sheet`: the section alone as a multi-page PDF.

Every file is written under a temporary name and renamed when complete. The maps come from the
coverage variables of the atlas (:func:`atlas.coverage_cube.open_coverage_cube`), the tables
from :func:`atlas.coverage_table`.
"""

import functools
from pathlib import Path

from atlas.confidence import check_level
from atlas.coverage_questions import coverage_table
from atlas.files import save_text
from atlas.sections import (
    Chart,
    Section,
    Table,
    page_html,
    save_charts,
    section_html,
    section_markdown,
    write_pdf,
)

BANDS = ((0.05, 0.5), (0.01, 0.99))
FLOORS = (0.93, 0.94, 0.95)
KEY = "coverage"
TITLE = "Confidence intervals for p: where they keep their promise"
INTRO = (
    "The interval p̂ ± z √(p̂ q̂ / n) is taught with the same rules of thumb as the normal curve, "
    "and its actual coverage is erratic. This section gives, for each interval, the exact "
    "minimum coverage over p and the n from which it keeps a floor at every n.",
)
#: The definitions of the intervals (the contract of atlas.confidence), for people.
INTERVAL_DEFINITIONS = (
    ("wald", "p̂ ∓ z √(p̂ q̂ / n)"),
    ("wald_cc", "the Wald interval widened by 1/(2n) on each side"),
    ("wilson", "(p̂ + z²/(2n) ∓ z √(p̂ q̂ / n + z²/(4n²))) / (1 + z²/n)"),
    ("wilson_cc", "Newcombe (1998), method 4: the score interval with continuity correction"),
    ("agresti_coull", "ñ = n + z², p̃ = (x + z²/2)/ñ, p̃ ∓ z √(p̃ (1 − p̃)/ñ)"),
    (
        "jeffreys",
        "the (1 − level)/2 and (1 + level)/2 quantiles of Beta(x + ½, n − x + ½); "
        "lo = 0 at x = 0, hi = 1 at x = n",
    ),
    (
        "clopper_pearson",
        "the exact interval: quantiles of Beta(x, n − x + 1) and "
        "Beta(x + 1, n − x); never below its level",
    ),
)
NOTES = (
    "x successes in n trials, p̂ = x/n, q̂ = 1 − p̂, z = the (1 + level)/2 normal quantile.",
    "Coverage C(n, p) = Σ over x of b(x; n, p) [lo(x) ≤ p ≤ hi(x)], closed intervals.",
    "Minimum coverage over a band: the exact infimum over every p in it. C jumps only where p "
    "crosses an endpoint; between two consecutive endpoints the covering x form one run a..b and "
    "C = F(b) − F(a − 1), which rises then falls, so its infimum is a one-sided limit at the end "
    "of a piece: no p is sampled.",
    "Coverage is not monotone in n: the tables check every integer n up to their limit.",
)


def load_coverage_data():
    """The coverage dataset the pages draw their maps from: the embedded atlas's coverage group.

    The one place that says where the coverage variables live; the sheet and wiki page call it
    only when no dataset is passed to them.
    """
    from atlas.coverage_cube import open_coverage_cube

    return open_coverage_cube()


def _tables(level, bands, floors, n_max):
    return [coverage_table(lo, hi, floors, level=level, n_max=n_max) for lo, hi in bands]


def _table(table):
    """A coverage table as section content: the intervals down, the floors across."""
    caption = f"Minimum n, level {table.level:g}, every p in [{table.p_lo:g}, {table.p_hi:g}]"
    note = (
        f"Every integer n from 1 to {table.n_max} checked (the exact minimum coverage at each); "
        f"'> {table.n_max}': fails at n = {table.n_max}; '*': the floor also held at a smaller "
        "n and failed again (coverage is not monotone in n)."
    )
    header = ("interval", *[f"floor {f:g}" for f in table.floors])
    rows = tuple((name, *[table.cell(name, f) for f in table.floors]) for name in table.intervals)
    return Table(caption, header, rows, (note,))


def section(data=None, *, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000):
    """The section on confidence intervals for p, as content (:class:`atlas.sections.Section`).

    Made once per set of arguments when ``data`` is not given (its tables take about half a
    minute at ``n_max`` = 1000).

    Parameters
    ----------
    data : xarray.Dataset, optional
        The coverage variables (a coverage cube); default :func:`load_coverage_data`.
    level : float
        The nominal level of the maps and tables (one the data holds).
    bands : sequence of (float, float)
        The p bands of the minimum-n tables.
    floors : sequence of float
        The coverage floors of the tables.
    n_max : int
        Every n from 1 to ``n_max`` is checked for the tables (a few seconds per interval at
        1000).

    Returns
    -------
    atlas.sections.Section
    """
    bands = tuple(tuple(b) for b in bands)
    floors = tuple(floors)
    if data is None:
        return _default_content(level, bands, floors, n_max)[0]
    return _content(data, level, bands, floors, n_max)[0]


@functools.cache
def _default_content(level, bands, floors, n_max):
    return _content(load_coverage_data(), level, bands, floors, n_max)


def _content(data, level, bands, floors, n_max):
    """The section and its CoverageTable objects."""
    level = check_level(level)
    tag = f"{round(level * 100):d}"
    charts = tuple(
        Chart(f"coverage_{name}_{tag}.svg",
              f"{name}: minimum coverage over each p-cell at the nominal {level:g} (red below "
              "it, blue above)",
              lambda name=name, **size: _map(data, name, level, **size))
        for name in (str(v) for v in data["interval"].values)
    )  # fmt: skip
    tables = _tables(level, bands, floors, n_max)
    definitions = (("Notation", NOTES[0]), ("Coverage", NOTES[1]), ("Exact minimum", NOTES[2]),
                   ("Minimum n", NOTES[3])) + tuple(
        (name, text) for name, text in INTERVAL_DEFINITIONS)  # fmt: skip
    content = Section(KEY, TITLE, intro=INTRO, definitions=definitions, charts=charts,
                      tables=tuple(_table(t) for t in tables),
                      provenance=_provenance(data))  # fmt: skip
    return content, tables


def tables(data=None, *, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000):
    """The minimum-n tables of :func:`section` (:class:`atlas.coverage_questions.CoverageTable`),
    the same objects, for writing them as files (:func:`write_table_files`)."""
    bands, floors = tuple(tuple(b) for b in bands), tuple(floors)
    if data is None:
        return _default_content(level, bands, floors, n_max)[1]
    return _content(data, level, bands, floors, n_max)[1]


def _map(data, name, level, **size):
    from atlas.coverage_charts import coverage_map

    return coverage_map(data, interval=name, level=level, **size)


def _provenance(data):
    source = data.attrs.get("source", "approx-atlas")
    return (f"Maps from the coverage cube ({source}); tables computed exactly on demand, every "
            "integer n checked.")  # fmt: skip


def write_coverage_page(
    directory, *, cube=None, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000
):
    """Write ``coverage.html``, ``coverage.md``, the SVG maps and the tables into ``directory``.

    The main wiki page (:func:`atlas.sheets.write_wiki`) holds the same section; this writes it
    alone, beside other files.

    Parameters
    ----------
    directory : str or os.PathLike
        An existing directory; files of the same names are replaced.
    cube, level, bands, floors, n_max
        As for :func:`section` (``cube`` is its ``data``).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    directory = Path(directory)
    if not directory.is_dir():
        raise FileNotFoundError(f"`directory` is not a directory: {str(directory)!r}.")
    bands, floors = tuple(tuple(b) for b in bands), tuple(floors)
    if cube is None:
        content, tables = _default_content(level, bands, floors, n_max)
    else:
        content, tables = _content(cube, level, bands, floors, n_max)
    written = save_charts(content, directory)
    written += write_table_files(directory, tables)
    written.append(save_text(directory / "coverage.md",
                             "# " + section_markdown(content, level=1)[2:]))  # fmt: skip
    written.append(save_text(directory / "coverage.html",
                             page_html(TITLE, section_html(content, level=1))))  # fmt: skip
    return written


def write_table_files(directory, tables):
    """The minimum-n tables as ``coverage_min_n_<lo>_<hi>.md``, ``.csv`` and ``.json``."""
    written = []
    for table in tables:
        stem = f"coverage_min_n_{table.p_lo:g}_{table.p_hi:g}"
        for fmt in ("md", "csv", "json"):
            written.append(save_text(Path(directory) / f"{stem}.{fmt}", table.render(fmt)))
    return written


def write_coverage_sheet(path, *, cube=None, level=0.95, bands=BANDS, floors=FLOORS, n_max=1000):
    """Write the coverage section alone as a PDF, atomically (the main sheet holds the same
    pages). Parameters as :func:`write_coverage_page`; ``path`` ends in ``.pdf``.

    Returns
    -------
    pathlib.Path
    """
    path = Path(path)
    if path.suffix.lower() != ".pdf":
        raise ValueError(f"`path` must end in '.pdf'; got {str(path)!r}.")
    content = section(cube, level=level, bands=bands, floors=floors, n_max=n_max)
    return write_pdf(content, path)
