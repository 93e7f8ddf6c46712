"""Paper sizes and a page to draw on in inches: the common ground of every printed figure and report page.

Every exported figure fits on A4 and on US Letter (portrait or landscape), and
text is never smaller than :data:`MIN_FONT` points at that size. Full pages (the
figure sheet, the explanation, the review report) are drawn on a :class:`Page`:
one matplotlib figure of the paper's size with an invisible axes whose data
coordinates are inches from the top-left corner, so blocks of text, tables and
bars can be placed where they cannot collide. Heat maps sit in ordinary axes
placed with :meth:`Page.axes`.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from inspector import palette
from inspector.errors import HeadcountError

MM = 1 / 25.4
PAPERS: dict[str, tuple[float, float]] = {"a4": (210 * MM, 297 * MM), "letter": (8.5, 11.0)}
"""Portrait (width, height) in inches: A4 is 210 x 297 mm (ISO 216), US Letter 8.5 x 11 in (ANSI/ASME Y14.1)."""
PAPER_NAMES = {"a4": "A4", "letter": "US Letter"}
DEFAULT_PAPER = "a4"
FITS_BOTH = (8.27, 10.9)
"""Largest (short side, long side) in inches that fits A4 and US Letter alike."""
MIN_FONT = 7.0
"""Smallest font size of any printed text, in points at print size."""
BODY_FONT = 8.0
TITLE_FONT = 11.0
CAPTION_FONT = 7.5
"""Captions under the figures."""
HEADING_FONT = 10.0
"""The one-line heading of a single exported figure."""
MARGIN = 0.45
"""Page margin in inches."""
CHAR_WIDTH = 0.58
"""Average character width as a fraction of the font size (DejaVu Sans, mixed text; a safe overestimate)."""
LINE_HEIGHT = 1.32
"""Line pitch as a multiple of the font size."""


def check_paper(name: str) -> str:
    """The paper's key (``a4`` or ``letter``), or a one-line error."""
    key = str(name).lower().replace(" ", "").replace("us", "")
    if key not in PAPERS:
        raise HeadcountError(f"unknown paper '{name}' (use a4 or letter)")
    return key


def page_size(paper: str, landscape: bool) -> tuple[float, float]:
    """(width, height) in inches of ``paper`` in the given orientation."""
    w, h = PAPERS[check_paper(paper)]
    return (h, w) if landscape else (w, h)


def fit_size(width: float, height: float) -> tuple[float, float]:
    """Shrink (width, height) in inches, keeping its shape, until it fits A4 and Letter in some orientation."""
    short, long = sorted((width, height))
    scale = min(1.0, FITS_BOTH[0] / short, FITS_BOTH[1] / long)
    return width * scale, height * scale


def text_width(text: str, size: float) -> float:
    """Estimated width in inches of one line of ``text`` at ``size`` points."""
    return len(text) * CHAR_WIDTH * size / 72.0


def line_height(size: float) -> float:
    """Line pitch in inches at ``size`` points."""
    return LINE_HEIGHT * size / 72.0


def chars_per_line(width: float, size: float) -> int:
    """How many characters of ``size`` points fit in ``width`` inches."""
    return max(8, int(width * 72.0 / (CHAR_WIDTH * size)))


def wrap(text: str, width: float, size: float) -> list[str]:
    """``text`` wrapped to ``width`` inches at ``size`` points (paragraphs kept on their own lines)."""
    out: list[str] = []
    for para in text.split("\n"):
        out += textwrap.wrap(para, chars_per_line(width, size), break_on_hyphens=False) or [""]
    return out


def shorten(text: str, width: float, size: float) -> str:
    """``text`` cut (with an ellipsis) so it fits ``width`` inches at ``size`` points."""
    room = chars_per_line(width, size)
    return text if len(text) <= room else text[: max(1, room - 1)].rstrip() + "\u2026"


def tick_step(count: int, length: float, size: float, pitch: float = 1.35) -> int:
    """Label every n-th of ``count`` ticks along ``length`` inches so labels of ``size`` points never touch."""
    room = max(1, int(length * 72.0 / (pitch * size)))
    return max(1, math.ceil(count / room))


@dataclass
class Block:
    """Text lines with one font size, as measured for placing."""

    lines: list[str]
    size: float

    @property
    def height(self) -> float:
        return len(self.lines) * line_height(self.size)


class Page:
    """One page (or one fitted figure) with an inch grid from the top-left corner.

    ``page.fig`` is a plain ``matplotlib.figure.Figure`` (no pyplot state, safe in
    a worker thread); :meth:`text`, :meth:`lines` and :meth:`box` draw on an
    invisible full-page axes in inches; :meth:`axes` places a real axes by its
    inch rectangle.
    """

    def __init__(self, width: float, height: float) -> None:
        self.width, self.height = float(width), float(height)
        self.fig = Figure(figsize=(self.width, self.height))
        FigureCanvasAgg(self.fig)
        self.ax = self.fig.add_axes((0, 0, 1, 1))
        self.ax.set_xlim(0, self.width)
        self.ax.set_ylim(self.height, 0)
        self.ax.axis("off")

    @classmethod
    def paper(cls, paper: str, landscape: bool) -> Page:
        return cls(*page_size(paper, landscape))

    @property
    def inner_width(self) -> float:
        return self.width - 2 * MARGIN

    def text(self, x: float, y: float, text: str, size: float = BODY_FONT, **kw) -> None:
        """One line whose top-left (or ``ha``-aligned) corner is at (x, y) inches."""
        kw.setdefault("va", "top")
        kw.setdefault("color", palette.INK)
        self.ax.text(x, y, text, fontsize=max(size, MIN_FONT), **kw)

    def lines(self, x: float, y: float, lines: Sequence[str], size: float = BODY_FONT, **kw) -> float:
        """Lines one under the other from (x, y); returns the y below them."""
        for line in lines:
            if line:
                self.text(x, y, line, size, **kw)
            y += line_height(size)
        return y

    def paragraph(self, x: float, y: float, text: str, width: float, size: float = BODY_FONT, **kw) -> float:
        """``text`` wrapped to ``width`` inches from (x, y); returns the y below it."""
        return self.lines(x, y, wrap(text, width, size), size, **kw)

    def box(self, x: float, y: float, w: float, h: float, **kw) -> None:
        """A rectangle by its top-left corner and size in inches."""
        from matplotlib.patches import Rectangle

        kw.setdefault("linewidth", 0)
        self.ax.add_patch(Rectangle((x, y), w, h, **kw))

    def rule(self, x: float, y: float, w: float, **kw) -> None:
        """A horizontal line."""
        kw.setdefault("color", "#bbbbbb")
        kw.setdefault("linewidth", 0.6)
        self.ax.plot([x, x + w], [y, y], **kw)

    def axes(self, x: float, y: float, w: float, h: float):
        """A real matplotlib axes at the inch rectangle (x, y, w, h) measured from the top-left."""
        return self.fig.add_axes((x / self.width, 1 - (y + h) / self.height, w / self.width, h / self.height))


# -- single figures laid out in inches (corpus and comparison figures) -------------------------------
def fitted_figure(width: float, height: float) -> Figure:
    """A figure of (width, height) inches, shrunk to fit A4 and Letter (see :func:`fit_size`).

    Lay its parts out with :func:`axes_at`, :func:`draw_heading` and :func:`draw_caption`,
    which measure inches from the top-left corner; size it so that nothing needs shrinking.
    """
    return Page(*fit_size(width, height)).fig


def axes_at(fig: Figure, x: float, y: float, w: float, h: float):
    """An axes at (x, y, w, h) inches from the figure's top-left corner."""
    fw, fh = fig.get_size_inches()
    return fig.add_axes((x / fw, 1 - (y + h) / fh, w / fw, h / fh))


def heading_lines(text: str, width: float) -> list[str]:
    """The heading wrapped to a figure ``width`` inches wide."""
    return wrap(text, width - 0.3, HEADING_FONT)


def heading_height(text: str, width: float) -> float:
    """Inches the heading takes from the figure's top edge, with the gap below it."""
    return 0.12 + len(heading_lines(text, width)) * line_height(HEADING_FONT) + 0.15


def draw_heading(fig: Figure, text: str) -> float:
    """The heading at the figure's top-left, wrapped to its width; returns the y below it (inches)."""
    w, h = fig.get_size_inches()
    y = 0.12
    for line in heading_lines(text, w):
        fig.text(0.15 / w, 1 - y / h, line, fontsize=HEADING_FONT, va="top", ha="left", color=palette.INK)
        y += line_height(HEADING_FONT)
    return y + 0.15


def caption_height(text: str, width: float) -> float:
    """Inches a caption takes under a figure ``width`` inches wide (with its top gap)."""
    return 0.15 + len(wrap(text, width - 0.3, CAPTION_FONT)) * line_height(CAPTION_FONT)


def draw_caption(fig: Figure, text: str, top: float) -> None:
    """``text`` wrapped under the body, from ``top`` inches below the figure's top edge."""
    w, h = fig.get_size_inches()
    for k, line in enumerate(wrap(text, w - 0.3, CAPTION_FONT)):
        fig.text(
            0.15 / w,
            1 - (top + k * line_height(CAPTION_FONT)) / h,
            line,
            fontsize=CAPTION_FONT,
            ha="left",
            va="top",
            color=palette.DIM_INK,
        )
