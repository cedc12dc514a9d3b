"""The text pages of the printed sheets: a title, paragraphs set from the top down (a new page
when one is full), tables drawn in a rectangle, page numbers; one style for every section of the
sheet (:mod:`atlas.sheets`, :mod:`atlas.sections`). matplotlib is imported on first use.
"""

import textwrap

from atlas import figures
from atlas.figures import TEXT_COLOUR

__all__ = ["BOTTOM", "CHAR_WIDTH", "TOP", "Flow", "draw_table", "page_number", "text_page", "wrap"]

CHAR_WIDTH = 0.55  # DejaVu Sans: mean advance of a character, in em (monospace: 0.6)
TOP, BOTTOM = 0.89, 0.13  # the body of a text page, as fractions of its height


def text_page(title, size):
    """A blank page of ``size`` (inches) with its title at the top left."""
    mpl = figures.mpl()
    fig = mpl.figure.Figure(figsize=size, dpi=100)
    fig.text(0.04, 0.955, title, fontsize=15, weight="bold", va="top", gid="title")
    return fig


class Flow:
    """Paragraphs set from the top of a text page down, a new page when one is full."""

    def __init__(self, title, size):
        self.title = title
        self.size = size
        self.pages = []
        self._new_page()

    def _new_page(self):
        suffix = " (continued)" if self.pages else ""
        self.fig = text_page(self.title + suffix, self.size)
        self.pages.append(self.fig)
        self.y = TOP

    def para(self, text, *, left=0.04, right=0.96, size=9.5, mono=False, term=None, gap=0.012,
             **style):  # fmt: skip
        width_pt = (right - left) * self.size[0] * 72
        chars = max(20, int(width_pt / (size * (0.63 if mono else CHAR_WIDTH))))
        body = "\n".join(textwrap.fill(part, chars) if part else "" for part in text.split("\n"))
        lines = body.count("\n") + 1
        height = lines * size * 1.35 / (72 * self.size[1])
        if self.y - height < BOTTOM and self.y < TOP:
            self._new_page()
        if term is not None:
            self.fig.text(0.04, self.y, term, fontsize=size, weight="bold", va="top",
                          color=style.get("color", "black"))  # fmt: skip
        self.fig.text(left, self.y, body, fontsize=size, va="top", linespacing=1.35,
                      family="DejaVu Sans Mono" if mono else "DejaVu Sans", **style)  # fmt: skip
        self.y -= height + gap


def draw_table(fig, rect, header, rows, *, title=None, fontsize=8.5, col_widths=None,
                text_columns=1):  # fmt: skip
    """A table filling the rectangle (left, bottom, width, height) of the figure."""
    ax = fig.add_axes(rect)
    ax.set_axis_off()
    if title:
        ax.set_title(title, loc="left", fontsize=10.5, weight="bold", pad=4)
    table = ax.table(cellText=rows, colLabels=header, bbox=(0, 0, 1, 1), cellLoc="right",
                     colLoc="right", colWidths=col_widths)  # fmt: skip
    table.auto_set_font_size(False)
    table.set_fontsize(fontsize)
    for (r, c), cell in table.get_celld().items():
        cell.set_edgecolor("#999999")
        cell.set_linewidth(0.5)
        cell.PAD = 0.04
        if r == 0:
            cell.set_facecolor("#E6E6E6")
            cell.get_text().set_weight("bold")
        if c < text_columns:
            cell.get_text().set_horizontalalignment("left")
    return ax


def page_number(fig, page, pages):
    """'page k of n' at the top right of a page."""
    fig.text(0.985, 0.985, f"page {page} of {pages}", fontsize=8, ha="right", va="top",
             color=TEXT_COLOUR, gid="page-number")  # fmt: skip


def wrap(text, fontsize, page_width, width=0.92):
    """``text`` wrapped to ``width`` of a page ``page_width`` inches wide at ``fontsize``."""
    return textwrap.fill(text, int(width * page_width * 72 / (fontsize * CHAR_WIDTH)))
