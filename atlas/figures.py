"""What the charts, tables and sheets share: the atlas they are drawn from, the words for methods
and metrics, the provenance line and caution at the foot of every page, the figure style, and
saving a figure atomically.

matplotlib is imported inside the functions (:func:`mpl`), so ``import atlas`` does not import
it; figures are built without :mod:`matplotlib.pyplot` (no display, no backend, no global
figure registry).
"""

import math
import re
import textwrap
from pathlib import Path

import numpy as np

from atlas import cube, store
from atlas.approximations import METHODS
from atlas.engine import check_metric
from atlas.files import replacing
from atlas.notation import format_p

__all__ = [
    "FOOTER_STYLE",
    "FORMATS",
    "METHOD_LABELS",
    "METRIC_FORMULAS",
    "METRIC_LABELS",
    "MIN_PNG_WIDTH",
    "MIN_TEXT_SIZE",
    "PNG_DPI",
    "TEXT_COLOUR",
    "VECTOR_RASTER_DPI",
    "as_dataset",
    "atlas_methods",
    "check_atlas_method",
    "check_choice",
    "errors_on_grid",
    "figure_format",
    "footer",
    "footer_lines",
    "format_level",
    "format_power",
    "mpl",
    "power_of_ten",
    "provenance_line",
    "save_figure",
]

FORMATS = ("png", "svg", "pdf")
MIN_PNG_WIDTH = 1600  # pixels
PNG_DPI = 200
VECTOR_RASTER_DPI = {"svg": 150, "pdf": 200}  # the fills of a vector file: screen, print
TEXT_COLOUR = "#333333"  # dark grey: footers, page numbers, notes
#: The text of every footer: the provenance line and the caution (points, colour, line spacing).
FOOTER_STYLE = {"fontsize": 8.0, "color": TEXT_COLOUR, "linespacing": 1.35}
#: The smallest text on any chart or page, in points: what stays legible in print.
MIN_TEXT_SIZE = 8.0
METHOD_LABELS = {
    "normal_cc": "normal, continuity-corrected",
    "edgeworth_cc": "one-term Edgeworth, continuity-corrected",
    "edgeworth2_cc": "two-term Edgeworth, continuity-corrected",
    "normal": "normal, uncorrected",
    "poisson": "Poisson",
    "camp_paulson": "Camp-Paulson",
    "peizer_pratt": "Peizer-Pratt",
}
METRIC_LABELS = {"interval": "interval probabilities", "cdf": "the cumulative distribution"}
METRIC_FORMULAS = {
    "interval": "max over 0 ≤ a ≤ b ≤ n of |P(a ≤ X ≤ b) − (G(b) − G(a−1))|",
    "cdf": "max over 0 ≤ k ≤ n of |P(X ≤ k) − G(k)|",
}
_VARIABLES = {"interval": "interval_error", "cdf": "cdf_error"}


def mpl():
    """Import matplotlib's object-oriented pieces (not pyplot) and return the package."""
    import matplotlib
    import matplotlib.colors
    import matplotlib.figure
    import matplotlib.lines
    import matplotlib.patches
    import matplotlib.patheffects
    import matplotlib.ticker

    return matplotlib


# ---- the atlas behind an output ----------------------------------------------------------------


def as_dataset(atlas):
    """The Dataset of an Atlas (or a Dataset passed as is); TypeError for anything else."""
    ds = getattr(atlas, "dataset", atlas)
    if not hasattr(ds, "data_vars") or "interval_error" not in ds:
        kind = type(atlas).__name__
        raise TypeError(f"`atlas` must be an Atlas or an atlas Dataset; got {kind}.")
    return ds


def _stored_methods(ds):
    """The approximation names in the order the Dataset stores them (alphabetical)."""
    return [str(m) for m in ds[store.APPROXIMATION].values]


def atlas_methods(ds):
    """The methods of an atlas Dataset, a tuple of str, in the order figures and tables list
    them: that of :data:`atlas.METHODS` (normal_cc first), then any other name alphabetically.
    The file itself stores them alphabetically.
    """
    rank = {m: i for i, m in enumerate(METHODS)}
    return tuple(sorted(_stored_methods(ds), key=lambda m: (rank.get(m, len(rank)), m)))


def check_atlas_method(ds, method, name="method"):
    """Return ``method`` if the atlas holds it, else raise ValueError listing those it holds."""
    held = atlas_methods(ds)
    if not isinstance(method, str) or method not in held:
        valid = ", ".join(repr(m) for m in held)
        raise ValueError(f"`{name}` must be one of {valid} (the atlas's methods); got {method!r}.")
    return method


def check_choice(value, name, options):
    """Return ``value`` if it is one of ``options``, else raise ValueError listing them."""
    if not isinstance(value, str) or value not in options:
        valid = ", ".join(repr(o) for o in options)
        raise ValueError(f"`{name}` must be one of {valid}; got {value!r}.")
    return value


def errors_on_grid(atlas, method, metric):
    """The (n, p) array of one method's errors, read from the Dataset, as float64."""
    ds = as_dataset(atlas)
    check_metric(metric)
    check_atlas_method(ds, method)
    index = _stored_methods(ds).index(method)
    try:
        return np.asarray(ds[_VARIABLES[metric]].isel(approximation=index).values, dtype=np.float64)
    except (RuntimeError, OSError) as err:  # netCDF4/HDF5 on a chunk failing Fletcher-32
        source = ds.encoding.get("source")
        where = f" from {str(source)!r}" if source else ""
        raise ValueError(
            f"the atlas is corrupt: {_VARIABLES[metric]} of {method} cannot be read{where} "
            f"({type(err).__name__}: {err})."
        ) from None


# ---- words -------------------------------------------------------------------------------------


def format_level(value):
    """0.01, 0.005, 0.001, 1e-4: a tolerance as people write it.

    Examples
    --------
    >>> [format_level(v) for v in (0.01, 1e-4, 2.5e-5)]
    ['0.01', '1e-4', '2.5e-5']
    """
    if value >= 1e-3:
        return f"{value:g}"
    mantissa, exponent = f"{value:.2e}".split("e")
    return f"{mantissa.rstrip('0').rstrip('.')}e{int(exponent)}"


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def power_of_ten(exponent):
    """10 to an integer power as printed on the charts' axes and colour bars: 10⁻³, 10⁰, 10⁸.

    Examples
    --------
    >>> power_of_ten(-3), power_of_ten(0), power_of_ten(8)
    ('10⁻³', '10⁰', '10⁸')
    """
    return "10" + str(int(exponent)).translate(_SUPERSCRIPT)


def format_power(value):
    """A tolerance in the charts' notation, that of their colour bars: 10⁻², 5×10⁻³, 2.5×10⁻⁵.

    Examples
    --------
    >>> [format_power(v) for v in (0.01, 0.005, 1e-4, 2.5e-5)]
    ['10⁻²', '5×10⁻³', '10⁻⁴', '2.5×10⁻⁵']
    """
    mantissa, exponent = f"{float(value):.6e}".split("e")
    mantissa = mantissa.rstrip("0").rstrip(".")
    power = power_of_ten(int(exponent))
    return power if mantissa == "1" else f"{mantissa}×{power}"


def _build_date(ds):
    """The date (YYYY-MM-DD) the atlas was built, from the first line of its history."""
    match = re.search(r"\d{4}-\d{2}-\d{2}", str(ds.attrs.get("history", "")))
    return match.group(0) if match else "unknown date"


def _axis_text(values, show):
    """The range and count of an axis, such as "from 1 to 10 (10 values)" or "5 (1 value)"."""
    if values.size == 1:
        return f"{show(values[0])} (1 value)"
    return f"from {show(values[0])} to {show(values[-1])} ({values.size:,} values)"


def provenance_line(atlas):
    """One line on where the atlas came from: version, schema, build date, grid and the whole
    checksum (a line that is too long is wrapped where it is set, never cut short)."""
    ds = as_dataset(atlas)
    n, p = ds["n"].values, ds["p"].values
    checksum = str(ds.attrs.get("checksum", "")) or "no checksum"
    return (
        f"Atlas: {ds.attrs.get('source', 'approx-atlas')}, schema {ds.attrs.get('atlas_schema')}, "
        f"built {_build_date(ds)}; grid n {_axis_text(n, lambda x: f'{x:,}')}, "
        f"p {_axis_text(p, format_p)}; "
        f"{str(ds.attrs.get('error_precision', '')).split(' ')[0]}; "
        f"checksum {checksum}"
    )


def footer_lines(atlas, width, note=None):
    """The provenance line, a note and the caution, wrapped at ``width`` characters."""
    lines = textwrap.wrap(provenance_line(atlas), width)
    if note:
        lines += textwrap.wrap(note, width)
    return lines + textwrap.wrap("Caution: " + cube.CAUTION, width)


def footer(fig, ds, note=None):
    """The provenance, a note and the caution at the foot of a figure with a constrained layout;
    the layout's lower edge is set above it, however many lines it takes."""
    size = FOOTER_STYLE["fontsize"]
    width = int(0.96 * fig.get_figwidth() * 72 / (size * 0.6))  # characters per line
    lines = footer_lines(ds, width, note)
    fig.text(0.012, 0.012, "\n".join(lines), ha="left", va="bottom", gid="footer",
             **FOOTER_STYLE)  # fmt: skip
    bottom = 0.012 + (len(lines) * size * 1.35 + 10) / (72 * fig.get_figheight())
    engine = fig.get_layout_engine()
    left, lower, width, height = engine.get()["rect"]
    engine.set(rect=(left, bottom, width, lower + height - bottom))


# ---- files -------------------------------------------------------------------------------------


def figure_format(path):
    """The format of a figure file by its extension: "png", "svg" or "pdf"; else ValueError."""
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in FORMATS:
        valid = ", ".join(f"'.{f}'" for f in FORMATS)
        raise ValueError(f"`path` must end in one of {valid}; got {str(path)!r}.")
    return suffix


def save_figure(fig, path, *, dpi=None):
    """Write a figure to PNG, SVG or PDF, chosen by the file's extension, atomically.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : str or os.PathLike
        Ending in ``.png``, ``.svg`` or ``.pdf``.
    dpi : float, optional
        PNG resolution; raised if needed so that the image is at least ``MIN_PNG_WIDTH`` = 1600
        pixels wide (default 200 dpi). In SVG and PDF files only the colour fills are raster
        images, at ``VECTOR_RASTER_DPI`` (150 and 200 dpi) unless ``dpi`` is given; text and
        lines stay vectors.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    ValueError
        For another extension (the message lists the valid ones).
    FileNotFoundError
        If the target's directory does not exist.

    Notes
    -----
    The file is written to a temporary name in the target's directory and renamed when complete.
    Vector files carry no creation date and fixed element ids, so a rerun writes the same bytes.
    """
    matplotlib = mpl()
    path = Path(path)
    fmt = figure_format(path)
    if fmt == "png":
        resolution = max(float(dpi or PNG_DPI), math.ceil(MIN_PNG_WIDTH / fig.get_figwidth()))
    else:
        resolution = float(dpi or VECTOR_RASTER_DPI[fmt])
    metadata = {
        "png": None,
        "svg": {"Creator": None, "Date": None, "Format": None, "Type": None},  # no RDF block
        "pdf": {"CreationDate": None},
    }[fmt]
    with replacing(path) as tmp:
        with matplotlib.rc_context({"svg.hashsalt": "approx-atlas", "svg.fonttype": "path"}):
            fig.savefig(tmp, format=fmt, dpi=resolution, metadata=metadata)
    return path
