"""A labelled heat map: one shaded cell per matrix entry, row names down the left, column names up the top.

Used by the corpus page for the confusion matrix (gold down, predicted across),
the head importance map (layers x heads) and the head similarity map (every
head against every head). Shades come from the window's one weight map
(:mod:`ui.widgets.colormap`, cividis); a cell's number is printed in it when it fits,
and hovering a cell shows what it holds (``describe``).

Names fit the space instead of being clipped: column names are written upwards
when they would not fit across a cell, the name margins take at most a share of
the map (:data:`NAME_SHARE`) and longer names are shortened with an ellipsis;
when cells are thinner than a line of text, only every k-th name is written, or,
for a map cut into blocks (``block``), one name per block (``block_names``, e.g.
the layer of a head). Hovering any name shows it in full.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from PySide6.QtCore import QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QFont, QFontMetricsF, QPalette, QPen
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import accent, dim_text, readable_text_on, rgba_image, to_rgba
from ui.widgets.hover_view import HoverView

MARGIN = 4
MAX_CELL = 56
NAME_SHARE = 0.3
"""The row names take at most this share of the width, the column names this share of the height."""
NAME_MIN_PX = 10
"""Names shrink to this pixel size (not below: it must stay readable) before they are thinned out."""
MARK_MIN = 7.0
"""Framed cells (``marked``) are drawn at least this many pixels wide, so a frame never shrinks to a dot."""


@dataclass(frozen=True)
class MapName:
    """One name as drawn: its axis, the rows/columns it names, the text and its rectangle."""

    axis: str
    """'row' or 'col'."""
    first: int
    last: int
    """The rows (or columns) it names, inclusive: one, or a whole block."""
    text: str
    rect: QRectF
    """Bounding box of the drawn text in widget coordinates (upright box for upright column names)."""
    upright: bool


@dataclass(frozen=True)
class MapLayout:
    """Where things go at the current size: name font, name margins, origin and cell size."""

    font: QFont
    fm: QFontMetricsF
    left: float
    """Width of the row names' margin."""
    top: float
    """Height of the column names' margin."""
    upright: bool
    """Column names written upwards."""
    x0: float
    y0: float
    cell: float


class MatrixMap(HoverView):
    """Shade ``values`` [rows, cols] with the weight map; optional text per cell and block separators.

    A click (or Enter on the hovered cell) on a cell emits :attr:`cell_clicked` with its row and column.
    """

    cell_clicked = Signal(int, int)

    def __init__(self, name: str, parent: QWidget | None = None) -> None:
        super().__init__(name, parent)
        self.values: np.ndarray | None = None
        self.texts: list[list[str]] | None = None
        self.row_names: list[str] = []
        self.col_names: list[str] = []
        self.block_names: list[str] = []
        """Names of the blocks of ``block`` rows/columns, used when single names cannot fit."""
        self.vmin, self.vmax = 0.0, 1.0
        self.block = 0
        """Draw a separator every ``block`` rows and columns (0: none)."""
        self.marked: set[tuple[int, int]] = set()
        """Cells framed in the text colour (e.g. the diagonal, or grouped heads)."""
        self.describe: Callable[[int, int], str] = lambda r, c: fmt.number(self.values[r, c])
        self._version = 0
        self._layout: tuple[tuple, MapLayout] | None = None

    def set_data(
        self,
        values: np.ndarray | None,
        row_names: list[str],
        col_names: list[str],
        *,
        texts: list[list[str]] | None = None,
        vmin: float = 0.0,
        vmax: float | None = None,
        block: int = 0,
        block_names: list[str] | None = None,
        marked: set[tuple[int, int]] | None = None,
        describe: Callable[[int, int], str] | None = None,
        note: str = "",
    ) -> None:
        self.values = None if values is None else np.asarray(values, dtype=np.float64)
        self.row_names, self.col_names, self.texts = list(row_names), list(col_names), texts
        peak = float(np.nanmax(self.values)) if self.values is not None and self.values.size else 1.0
        self.vmin, self.vmax = vmin, (peak if vmax is None else vmax)
        self.block, self.marked, self.note = block, set(marked or ()), note
        self.block_names = list(block_names or [])
        if describe is not None:
            self.describe = describe
        self._hover = None
        self._version += 1
        self.updateGeometry()
        self.update()

    def sizeHint(self) -> QSize:
        return QSize(420, 360)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, 160)

    # -- geometry --------------------------------------------------------------------------------
    def layout_now(self) -> MapLayout:
        """Font of the names, their margins and the cell size at the current widget size.

        The names use the widget's font, or a smaller one (down to :data:`NAME_MIN_PX`)
        when the rows are thinner than a line of text.
        """
        key = (self.width(), self.height(), self._version, self.font().key())
        if self._layout is not None and self._layout[0] == key:
            return self._layout[1]
        font = QFont(self.font())
        layout = self._layout_with(font)
        px = font.pixelSize() if font.pixelSize() > 0 else round(font.pointSizeF() * self.logicalDpiY() / 72)
        while layout.cell < layout.fm.height() and px > NAME_MIN_PX:
            px -= 1
            font.setPixelSize(px)
            layout = self._layout_with(font)
        self._layout = (key, layout)
        return layout

    def _layout_with(self, font: QFont) -> MapLayout:
        fm = QFontMetricsF(font)
        rows, cols = self.values.shape

        def widest(names: list[str]) -> float:
            return max((fm.horizontalAdvance(n) for n in names), default=0.0)

        left = min(widest(self.row_names) + 8, NAME_SHARE * self.width())
        top = fm.height() + 4
        fits = min(
            (self.width() - left - 2 * MARGIN) / cols, (self.height() - top - 2 * MARGIN) / rows, MAX_CELL
        )
        upright = widest(self.col_names) + 4 > fits
        if upright:
            top = min(widest(self.col_names) + 6, NAME_SHARE * self.height())
        x0, y0 = MARGIN + left, MARGIN + top
        cell = max(
            min((self.width() - x0 - MARGIN) / cols, (self.height() - y0 - MARGIN) / rows, MAX_CELL), 1.0
        )
        return MapLayout(font, fm, left, top, upright, x0, y0, cell)

    def cell_rect(self, row: int, col: int) -> QRectF:
        layout = self.layout_now()
        s = layout.cell
        return QRectF(layout.x0 + col * s, layout.y0 + row * s, s, s)

    def name_layout(self) -> list[MapName]:
        """Every row and column name that is drawn, where, and which rows/columns it names."""
        if self.values is None or not self.values.size:
            return []
        lay = self.layout_now()
        fm, h, s = lay.fm, lay.fm.height(), lay.cell
        rows, cols = self.values.shape
        out: list[MapName] = []
        for axis, names, count in (("row", self.row_names, rows), ("col", self.col_names, cols)):
            across = axis == "col" and not lay.upright
            room = (lay.left - 8) if axis == "row" else (lay.top - 6 if lay.upright else s - 4)
            widest = max((fm.horizontalAdvance(n) for n in names), default=0.0)
            needed = (widest + 4) if across else h  # along the axis, per name
            for first, last, name in self._groups(names, count, s, needed):
                text = fm.elidedText(name, Qt.TextElideMode.ElideRight, max(room, 0.0))
                if not text:
                    continue
                w = fm.horizontalAdvance(text)
                mid = (first + last + 1) / 2 * s
                if axis == "row":
                    rect = QRectF(lay.x0 - 6 - w, lay.y0 + mid - h / 2, w, h)
                elif across:
                    rect = QRectF(lay.x0 + mid - w / 2, MARGIN, w, h)
                else:
                    rect = QRectF(lay.x0 + mid - h / 2, lay.y0 - 4 - w, h, w)
                out.append(MapName(axis, first, last, text, rect, axis == "col" and lay.upright))
        return out

    def _groups(self, names: list[str], count: int, s: float, needed: float) -> list[tuple[int, int, str]]:
        """(first, last, name): one per row/column when they fit, else per block, else every k-th."""
        if s >= needed:
            return [(i, i, names[i]) for i in range(count)]
        if self.block and self.block_names and self.block * s >= needed:
            return [
                (b * self.block, min((b + 1) * self.block, count) - 1, self.block_names[b])
                for b in range(min(len(self.block_names), math.ceil(count / self.block)))
            ]
        step = max(1, math.ceil(needed / s))
        return [(i, i, names[i]) for i in range(0, count, step)]

    def hit_at(self, x: float, y: float) -> tuple | None:
        """(row, col) over a cell; ("name", axis, index) over a row or column name; else None."""
        if self.values is None:
            return None
        lay = self.layout_now()
        x0, y0, s = lay.x0, lay.y0, lay.cell
        rows, cols = self.values.shape
        row, col = int((y - y0) // s), int((x - x0) // s)
        if x >= x0 and y >= y0 and row < rows and col < cols:
            return row, col
        if x < x0 and y >= y0 and row < rows:
            return ("name", "row", row)
        if y < y0 and x >= x0 and col < cols:
            return ("name", "col", col)
        return None

    def hover_text(self, hit: tuple) -> str:
        if hit and hit[0] == "name":
            names = self.row_names if hit[1] == "row" else self.col_names
            return names[hit[2]]
        return self.describe(*hit)

    def mousePressEvent(self, event) -> None:
        hit = self.hit_at(event.position().x(), event.position().y())
        if hit is not None and event.button() == Qt.MouseButton.LeftButton:
            self.cell_clicked.emit(*hit)
        super().mousePressEvent(event)

    def drawn_text(self) -> list[str]:
        if self.values is None or not self.values.size:
            return [self.placeholder()]
        names = [name.text for name in self.name_layout()]
        return names + [text for line in self.texts or [] for text in line if text]

    # -- painting --------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.values is not None and self.values.size > 0)
        if p is None:
            return
        pal = self.palette()
        rows, cols = self.values.shape
        lay = self.layout_now()
        x0, y0, s = lay.x0, lay.y0, lay.cell
        rgba = to_rgba(self.values, self.vmax, self.vmin)
        p.drawImage(QRectF(x0, y0, cols * s, rows * s), rgba_image(rgba))
        self._draw_names(p)
        self._cell_texts(p, rgba, s)
        if self.block and self.block < max(rows, cols):
            p.setPen(QPen(pal.color(QPalette.ColorRole.Window), 1.0))
            for k in range(self.block, max(rows, cols), self.block):
                if k < cols:
                    p.drawLine(QPointF(x0 + k * s, y0), QPointF(x0 + k * s, y0 + rows * s))
                if k < rows:
                    p.drawLine(QPointF(x0, y0 + k * s), QPointF(x0 + cols * s, y0 + k * s))
        self._draw_marks(p, s)
        if self._hover is not None and self._hover[0] != "name":
            p.setPen(QPen(accent(pal), 2.0))
            p.drawRect(self.cell_rect(*self._hover))
        p.end()

    def _draw_names(self, p) -> None:
        p.setPen(dim_text(self.palette(), 0.85))
        p.setFont(self.layout_now().font)
        flags = int(Qt.AlignmentFlag.AlignVCenter | Qt.TextFlag.TextDontClip)
        for name in self.name_layout():
            r = name.rect
            if name.upright:
                p.save()
                p.translate(r.left(), r.bottom())
                p.rotate(-90)
                p.drawText(QRectF(0, 0, r.height(), r.width()), flags | Qt.AlignmentFlag.AlignLeft, name.text)
                p.restore()
            else:
                align = Qt.AlignmentFlag.AlignRight if name.axis == "row" else Qt.AlignmentFlag.AlignHCenter
                p.drawText(r, flags | align, name.text)
        p.setFont(self.font())

    def _draw_marks(self, p, s: float) -> None:
        """Outline the marked cells: the border of each marked region, and a frame of at least
        :data:`MARK_MIN` pixels around a marked cell that stands alone (so it never shrinks to a dot)."""
        if not self.marked:
            return
        pal = self.palette()
        p.setBrush(Qt.BrushStyle.NoBrush)
        lines: list[tuple[QPointF, QPointF]] = []
        frames: list[QRectF] = []
        grow = max((MARK_MIN - s) / 2, -1.0)
        for r, c in self.marked:
            rect = self.cell_rect(r, c)
            sides = {
                (r - 1, c): (rect.topLeft(), rect.topRight()),
                (r + 1, c): (rect.bottomLeft(), rect.bottomRight()),
                (r, c - 1): (rect.topLeft(), rect.bottomLeft()),
                (r, c + 1): (rect.topRight(), rect.bottomRight()),
            }
            open_sides = [line for cell, line in sides.items() if cell not in self.marked]
            if len(open_sides) == 4:
                frames.append(rect.adjusted(-grow, -grow, grow, grow))
            else:
                lines += open_sides
        for pen in (
            QPen(pal.color(QPalette.ColorRole.Window), 3.5),
            QPen(pal.color(QPalette.ColorRole.WindowText), 1.5),
        ):
            p.setPen(pen)  # a light halo under a dark line: visible on any shade
            for a, b in lines:
                p.drawLine(a, b)
            for frame in frames:
                p.drawRect(frame)

    def _cell_texts(self, p, rgba: np.ndarray, s: float) -> None:
        if self.texts is None:
            return
        small = QFont(self.font())
        small.setPointSizeF(self.font().pointSizeF() * 0.85)
        p.setFont(small)
        fm = p.fontMetrics()
        if fm.height() > s:
            p.setFont(self.font())
            return
        for r, line in enumerate(self.texts):
            for c, text in enumerate(line):
                if not text or fm.horizontalAdvance(text) + 4 > s:
                    continue
                colour = QColor(*(int(v) for v in rgba[r, c, :3]))
                p.setPen(readable_text_on(colour))
                p.drawText(self.cell_rect(r, c), Qt.AlignmentFlag.AlignCenter, text)
        p.setFont(self.font())
