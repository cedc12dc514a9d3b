"""Contour line work for print: tolerance lines without specks, and labels along the lines.

- :func:`simplify_level`: the field a tolerance line is drawn from, with specks of a few grid
  cells taken out of the line work. Small safe holes inside an unsafe region are filled (the
  region reads as unsafe, which is on the safe side); small unsafe islands are not hidden but
  returned, to be marked with a symbol instead of a tiny closed line. The colour fill is drawn
  from the true field and is not touched.
- :func:`place_labels`: labels set along contour lines and rule curves, rotated with the line and
  right side up, kept off one another, off other lines, off the axes' edges and off the
  p = 1/2 line, at positions chosen by a fixed rule (the same figure gets the same labels).

Nothing here imports matplotlib at import time; the label class is made on first use.
"""

import functools
import math

import numpy as np

#: Pieces of line work whose extent is below this many grid cells (in n and in p) are specks.
MIN_CELLS = 4
_RAISE = 1e-6  # log10 units: how far above the level a filled hole is set


def _extents(labels, count):
    """The larger side, in cells, of the bounding box of each labelled component."""
    from scipy import ndimage

    boxes = ndimage.find_objects(labels, count)
    return np.array([max(b[0].stop - b[0].start, b[1].stop - b[1].start) for b in boxes])


def simplify_level(z, level, *, min_cells=MIN_CELLS):
    """The field to draw the contour line at ``level`` from, without specks.

    Parameters
    ----------
    z : numpy.ndarray
        A 2-D field (here log10 of the error, shape (n, p)); NaN is read as below the level.
    level : float
        The contour level, in the units of ``z``.
    min_cells : int, optional
        A connected region above or below the level whose bounding box spans fewer than this
        many cells in both directions is a speck; default 4.

    Returns
    -------
    lines : numpy.ndarray
        A copy of ``z`` in which (1) of two cells above the level that touch only at a corner,
        the larger of the two cells between them is raised just above the level, so that the
        line runs around them as one region instead of a chain of beads; (2) the cells of small
        regions below the level enclosed by cells above it are raised just above it; (3) the
        cells of small regions above the level are set just below it.
    islands : list of numpy.ndarray
        The (row, column) indices of the cells of each region removed in (4): regions above the
        level that the line no longer shows, to be marked otherwise.

    Notes
    -----
    Every cell above the level in ``z`` is above it in ``lines`` or belongs to an island, and
    ``lines`` is never below ``z`` outside the islands: the line work shows an unsafe region at
    least as large as the field's, apart from the islands, which the caller marks.
    """
    from scipy import ndimage

    z = np.asarray(z, dtype=np.float64)
    lines = z.copy()
    above = np.where(np.isnan(z), False, z > level)
    # (1) A corner contact: above at (i, j) and (i+1, j+1), below at the other two (or the
    # mirror); raise the larger of the two below the level.
    a, b = above[:-1, :-1], above[1:, 1:]
    c, d = above[:-1, 1:], above[1:, :-1]
    zc = np.nan_to_num(z[:-1, 1:], nan=-np.inf)
    zd = np.nan_to_num(z[1:, :-1], nan=-np.inf)
    za = np.nan_to_num(z[:-1, :-1], nan=-np.inf)
    zb = np.nan_to_num(z[1:, 1:], nan=-np.inf)
    raise_to = np.zeros_like(above)
    first = a & b & ~c & ~d
    second = c & d & ~a & ~b
    pick_c = first & (zc >= zd)
    raise_to[:-1, 1:] |= pick_c
    raise_to[1:, :-1] |= first & ~pick_c
    pick_a = second & (za >= zb)
    raise_to[:-1, :-1] |= pick_a
    raise_to[1:, 1:] |= second & ~pick_a
    lines[raise_to] = level + _RAISE
    above |= raise_to
    # (2) Small holes below the level are filled.
    holes, count = ndimage.label(~above)
    if count:
        small = np.flatnonzero(_extents(holes, count) < min_cells) + 1
        fill = np.isin(holes, small)
        lines[fill] = level + _RAISE
        above |= fill
    # (3) A small region above the level one cell away from another region above it is joined
    # to it: the cells between them are raised just above the level (a chain of specks along a
    # ridge reads as one band).
    for _ in range(len(z)):
        bridge = _bridges(above, min_cells)
        if not bridge.any():
            break
        lines[bridge] = np.maximum(lines[bridge], level + _RAISE)
        above |= bridge
    # (4) Small islands above the level leave the line work; the caller marks them.
    parts, count = ndimage.label(above)
    islands = []
    if count:
        extent = _extents(parts, count)
        for k in np.flatnonzero(extent < min_cells) + 1:
            cells = np.argwhere(parts == k)
            rows, cols = cells[:, 0], cells[:, 1]
            lines[rows, cols] = np.minimum(z[rows, cols], level - _RAISE)
            unsafe = z[rows, cols] > level  # not the cells raised in (1) to (3)
            if unsafe.any():
                islands.append(cells[unsafe])
    return lines, islands


def _bridges(above, min_cells):
    """Cells below the level whose 3 x 3 neighbourhood touches two regions above it, one of
    them small."""
    from scipy import ndimage

    parts, count = ndimage.label(above)
    if count < 2:
        return np.zeros_like(above)
    small = np.flatnonzero(_extents(parts, count) < min_cells) + 1
    if small.size == 0:
        return np.zeros_like(above)
    near_small = ndimage.binary_dilation(np.isin(parts, small), np.ones((3, 3), bool))
    big = count + 1
    lowest = ndimage.minimum_filter(np.where(parts > 0, parts, big), size=3, mode="constant",
                                    cval=big)  # fmt: skip
    highest = ndimage.maximum_filter(parts, size=3, mode="constant", cval=0)
    return ~above & near_small & (lowest < big) & (lowest != highest)


# ---- labels along lines ------------------------------------------------------------------


@functools.cache
def _along_text_class():
    """A Text whose rotation follows the line through two data points, right side up."""
    from matplotlib.text import Text

    class AlongText(Text):
        def __init__(self, x, y, text, *, towards, **kwargs):
            super().__init__(x, y, text, **kwargs)
            self.towards = towards  # two (x, y) data points along the line

        def _update_rotation(self):
            (x0, y0), (x1, y1) = self.axes.transData.transform(self.towards)
            self.set_rotation(upright_angle(math.degrees(math.atan2(y1 - y0, x1 - x0))))

        def draw(self, renderer):
            self._update_rotation()
            super().draw(renderer)

        def get_window_extent(self, renderer=None, dpi=None):
            self._update_rotation()
            return super().get_window_extent(renderer, dpi)

    return AlongText


def upright_angle(degrees):
    """The same direction as ``degrees``, turned by 180 if needed to read right side up.

    Returns an angle in (-90, 90]: text at that rotation never stands upside down.

    Examples
    --------
    >>> [upright_angle(a) for a in (0.0, 120.0, -90.0, 270.0, -135.0)]
    [0.0, -60.0, 90.0, 90.0, 45.0]
    """
    angle = (degrees + 90.0) % 180.0 - 90.0  # in [-90, 90)
    return 90.0 if angle == -90.0 else angle + 0.0


class _Space:
    """Axes-fraction coordinates scaled to inches, for distances on the printed page."""

    def __init__(self, ax):
        fig = ax.figure
        box = ax.get_position()
        self.width = box.width * fig.get_figwidth()
        self.height = box.height * fig.get_figheight()
        self._to_axes = ax.transData + ax.transAxes.inverted()
        self._from_axes = ax.transAxes + ax.transData.inverted()

    def inches(self, xy):
        """Data (x, y) points as inches from the axes' lower left corner."""
        frac = self._to_axes.transform(np.asarray(xy, dtype=np.float64))
        return frac * (self.width, self.height)

    def data(self, inches):
        return self._from_axes.transform(np.asarray(inches) / (self.width, self.height))


def runs(points, keep):
    """Runs of consecutive points where ``keep`` holds, each of at least two points."""
    runs, start = [], None
    for i, flag in enumerate(list(keep) + [False]):
        if flag and start is None:
            start = i
        elif not flag and start is not None:
            if i - start >= 2:
                runs.append(points[start:i])
            start = None
    return runs


def _resample(curve, step):
    """Points every ``step`` inches of arc along a polyline, and their arc lengths."""
    seg = np.hypot(*np.diff(curve, axis=0).T)
    arc = np.concatenate([[0.0], np.cumsum(seg)])
    if arc[-1] <= 0:
        return curve[:1], arc[:1]
    s = np.arange(0.0, arc[-1] + 1e-12, step)
    return np.column_stack([np.interp(s, arc, curve[:, 0]), np.interp(s, arc, curve[:, 1])]), s


class LabelPlacer:
    """Set labels along curves of one axes without overlaps.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        With its scales and limits set.
    spike : float or None, optional
        A y data value (p = 0.5) labels keep off.

    Notes
    -----
    Distances are measured in inches on the page at the axes' current size. A label of width w
    at an arc position s of a curve occupies the curve from s - w/2 to s + w/2, thickened by the
    text's height: it must lie inside the axes (less a margin), keep ``clearance`` from the
    spike line, from every label already placed and from every other line registered as an
    obstacle, and the curve must be nearly straight there. Of the positions allowed, the one
    whose height is nearest the target is taken (ties: the first along the curve), so that the
    result depends on the figure alone.
    """

    def __init__(self, ax, *, spike=None, step=0.03):
        self.ax = ax
        self.space = _Space(ax)
        self.step = step
        self.spike = None
        if spike is not None:  # x of the point does not matter; use a finite one on the axis
            x0 = ax.get_xlim()[0]
            self.spike = float(self.space.inches([[x0, spike]])[0, 1])
        self.labels = []  # (KD tree of the points a placed label covers, its thickness), inches
        self.obstacles = []  # (KD tree of a curve's points in inches, owner key)

    def add_obstacle(self, xy, owner):
        """Register a curve (data points) that labels of other owners must not cover."""
        pts = self.space.inches(xy)
        pts = pts[np.all(np.isfinite(pts), axis=1)]
        if len(pts) >= 2:
            dense, _ = _resample(pts, self.step / 2)
            self.obstacles.append((_tree(dense), owner))

    def add_box(self, x, y, width, height):
        """Register an area (data centre, size in inches) that labels must not cover."""
        cx, cy = self.space.inches([[x, y]])[0]
        xs = np.linspace(cx - width / 2, cx + width / 2, 12)
        pts = np.concatenate([np.column_stack([xs, np.full(12, cy + dy)])
                              for dy in (-height / 2, 0.0, height / 2)])  # fmt: skip
        self.labels.append((_tree(pts), 0.0))

    def _fits(self, window, thick, owner, *, strict):
        lo = thick / 2 + 0.04
        if np.any(window[:, 0] < lo) or np.any(window[:, 0] > self.space.width - lo):
            return False
        if np.any(window[:, 1] < lo) or np.any(window[:, 1] > self.space.height - lo):
            return False
        if self.spike is not None and np.any(np.abs(window[:, 1] - self.spike) < lo + 0.06):
            return False
        for tree, other_thick in self.labels:
            if _closest(window, tree) < (thick + other_thick) / 2 + 0.05:
                return False
        if strict:
            for tree, other in self.obstacles:
                if other != owner and _closest(window, tree) < thick / 2 + 0.02:
                    return False
        return True

    def place(self, curves, text_width, text_height, *, target_y, owner):
        """The best position for a label of the given size along one of ``curves``.

        Parameters
        ----------
        curves : list of numpy.ndarray
            Polylines in data coordinates.
        text_width, text_height : float
            The label's size in inches (its white box included).
        target_y : float
            The preferred height, as a fraction of the axes.
        owner : hashable
            The label's own line: its obstacle curve does not count against it.

        Returns
        -------
        tuple or None
            ``(centre, towards)`` in data coordinates (``towards``: two points of the curve on
            either side of the centre, which give the label its angle), or None if no position
            is allowed.
        """
        half = text_width / 2 + 0.04
        goal = target_y * self.space.height
        k = max(1, int(round(half / self.step)))
        candidates = []
        for ci, curve in enumerate(curves):
            pts = self.space.inches(curve)
            for piece in runs(pts, np.all(np.isfinite(pts), axis=1)):
                dense, s = _resample(piece, self.step)
                if s[-1] < 2 * half:
                    continue
                for i in range(k, len(dense) - k):
                    candidates.append((abs(dense[i, 1] - goal), ci, i, dense))
        candidates.sort(key=lambda c: c[:3])
        for strict in (True, False):
            for _, _, i, dense in candidates:
                window = dense[i - k : i + k + 1]
                if _straight(window, text_height) and self._fits(window, text_height, owner,
                                                                 strict=strict):  # fmt: skip
                    self.labels.append((_tree(window), text_height))
                    centre, left, right = self.space.data([dense[i], dense[i - k], dense[i + k]])
                    return tuple(centre), (tuple(left), tuple(right))
        return None


def _tree(points):
    from scipy.spatial import cKDTree

    return cKDTree(points)


def _closest(points, tree):
    """The smallest distance between one of ``points`` and the points of a KD tree."""
    return float(tree.query(points, k=1)[0].min())


def _straight(window, height, bend=10.0):
    """Whether the curve under a label is straight enough to carry it: it stays within a third
    of the text's height of its chord, and its two halves turn by less than ``bend`` degrees."""
    start, end = window[0], window[-1]
    chord = end - start
    length = math.hypot(*chord)
    if length <= 0:
        return False
    normal = np.array([-chord[1], chord[0]]) / length
    if float(np.abs((window - start) @ normal).max()) > height / 3:
        return False
    middle = window[len(window) // 2]
    a, b = middle - start, end - middle
    turn = math.degrees(abs(math.atan2(a[0] * b[1] - a[1] * b[0], a @ b)))
    return turn < bend


def text_size(text, fontsize, *, pad=0.12):
    """The width and height in inches of a one-line label with its box (an estimate: DejaVu
    Sans, bold, mean advance 0.62 em; mathtext powers count their visible characters)."""
    visible = text.replace("$", "").replace("^", "").replace("{", "").replace("}", "")
    visible = visible.replace("\\times", "×")
    width = len(visible) * 0.62 * fontsize / 72 + 2 * pad * fontsize / 72
    height = 1.25 * fontsize / 72 + 2 * pad * fontsize / 72 + (0.04 if "^" in text else 0.0)
    return width, height


def add_label(ax, text, centre, towards, **style):
    """Add a label along a line: centred at ``centre``, turned along ``towards``, upright."""
    cls = _along_text_class()
    label = cls(*centre, text, towards=towards, ha="center", va="center",
                rotation_mode="anchor", transform=ax.transData, clip_on=True, **style)  # fmt: skip
    label.set_in_layout(False)
    ax.add_artist(label)
    return label


__all__ = ["MIN_CELLS", "LabelPlacer", "add_label", "runs", "simplify_level", "text_size",
           "upright_angle"]  # fmt: skip
