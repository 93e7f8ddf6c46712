"""A labelled heat map: one shaded cell per matrix entry, row names down the left, column names up the top.

Used by the corpus page for the confusion matrix (gold down, predicted across),
the head importance map (layers x heads) and the head similarity map (every
head against every head). Shades come from the window's one weight map
(:mod:`ui.widgets.colormap`, cividis); a cell's number is printed in it when it fits,
and hovering a cell shows what it holds (``describe``). Column names are
written upwards when they would not fit across.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from PySide6.QtCore import QPointF, QRectF, QSize, Qt
from PySide6.QtGui import QColor, QFont, QPalette, QPen
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import accent, dim_text, readable_text_on, rgba_image, to_rgba
from ui.widgets.hover_view import HoverView
from ui.widgets.labels import label_step, short_label

MARGIN = 4
MAX_CELL = 56
NAME_CHARS = 22


class MatrixMap(HoverView):
    """Shade ``values`` [rows, cols] with the weight map; optional text per cell and block separators."""

    def __init__(self, name: str, parent: QWidget | None = None) -> None:
        super().__init__(name, parent)
        self.values: np.ndarray | None = None
        self.texts: list[list[str]] | None = None
        self.row_names: list[str] = []
        self.col_names: list[str] = []
        self.vmin, self.vmax = 0.0, 1.0
        self.block = 0
        """Draw a separator every ``block`` rows and columns (0: none)."""
        self.marked: set[tuple[int, int]] = set()
        """Cells framed in the text colour (e.g. the diagonal, or grouped heads)."""
        self.describe: Callable[[int, int], str] = lambda r, c: fmt.number(self.values[r, c])

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
        marked: set[tuple[int, int]] | None = None,
        describe: Callable[[int, int], str] | None = None,
        note: str = "",
    ) -> None:
        self.values = None if values is None else np.asarray(values, dtype=np.float64)
        self.row_names, self.col_names, self.texts = list(row_names), list(col_names), texts
        peak = float(np.nanmax(self.values)) if self.values is not None and self.values.size else 1.0
        self.vmin, self.vmax = vmin, (peak if vmax is None else vmax)
        self.block, self.marked, self.note = block, set(marked or ()), note
        if describe is not None:
            self.describe = describe
        self._hover = None
        self.updateGeometry()
        self.update()

    def sizeHint(self) -> QSize:
        return QSize(420, 360)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, 160)

    # -- geometry --------------------------------------------------------------------------------
    def _names_width(self, names: list[str]) -> int:
        fm = self.fontMetrics()
        return max((fm.horizontalAdvance(short_label(n, NAME_CHARS)) for n in names), default=0) + 8

    def _upright(self) -> bool:
        """True when column names are written upwards (they would not fit across a cell)."""
        if self.values is None:
            return False
        cols = self.values.shape[1]
        across = (self.width() - self._names_width(self.row_names) - 2 * MARGIN) / max(cols, 1)
        return self._names_width(self.col_names) > across

    def _origin(self) -> tuple[float, float]:
        fm = self.fontMetrics()
        top = self._names_width(self.col_names) if self._upright() else fm.height() + 4
        return MARGIN + self._names_width(self.row_names), MARGIN + top

    def _cell(self) -> float:
        rows, cols = self.values.shape
        x0, y0 = self._origin()
        side = min((self.width() - x0 - MARGIN) / cols, (self.height() - y0 - MARGIN) / rows, MAX_CELL)
        return max(side, 1.0)

    def cell_rect(self, row: int, col: int) -> QRectF:
        x0, y0 = self._origin()
        s = self._cell()
        return QRectF(x0 + col * s, y0 + row * s, s, s)

    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        if self.values is None:
            return None
        x0, y0 = self._origin()
        s = self._cell()
        row, col = int((y - y0) // s), int((x - x0) // s)
        rows, cols = self.values.shape
        return (row, col) if x >= x0 and y >= y0 and row < rows and col < cols else None

    def hover_text(self, hit: tuple[int, int]) -> str:
        return self.describe(*hit)

    def drawn_text(self) -> list[str]:
        if self.values is None or not self.values.size:
            return [self.placeholder()]
        names = [short_label(n, NAME_CHARS) for n in [*self.row_names, *self.col_names]]
        return names + [text for line in self.texts or [] for text in line if text]

    # -- painting --------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.values is not None and self.values.size > 0)
        if p is None:
            return
        pal = self.palette()
        rows, cols = self.values.shape
        x0, y0 = self._origin()
        s = self._cell()
        rgba = to_rgba(self.values, self.vmax, self.vmin)
        p.drawImage(QRectF(x0, y0, cols * s, rows * s), rgba_image(rgba))
        fm = self.fontMetrics()
        p.setPen(dim_text(pal, 0.85))
        step = label_step(rows, s, fm.height())
        for r in range(0, rows, step):
            p.drawText(
                QRectF(MARGIN, y0 + r * s, x0 - MARGIN - 6, s),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                short_label(self.row_names[r], NAME_CHARS),
            )
        upright = self._upright()
        step = label_step(cols, s, fm.height() if upright else self._names_width(self.col_names))
        for c in range(0, cols, step):
            name = short_label(self.col_names[c], NAME_CHARS)
            if upright:
                p.save()
                p.translate(QPointF(x0 + (c + 0.5) * s + fm.ascent() / 2 - 1, y0 - 4))
                p.rotate(-90)
                p.drawText(QPointF(0, 0), name)
                p.restore()
            else:
                p.drawText(QRectF(x0 + c * s, MARGIN, s, y0 - MARGIN - 2), Qt.AlignmentFlag.AlignCenter, name)
        self._cell_texts(p, rgba, s)
        text_pen = QPen(pal.color(QPalette.ColorRole.WindowText), 1.5)
        if self.block and self.block < max(rows, cols):
            p.setPen(QPen(pal.color(QPalette.ColorRole.Window), 1.0))
            for k in range(self.block, max(rows, cols), self.block):
                if k < cols:
                    p.drawLine(QPointF(x0 + k * s, y0), QPointF(x0 + k * s, y0 + rows * s))
                if k < rows:
                    p.drawLine(QPointF(x0, y0 + k * s), QPointF(x0 + cols * s, y0 + k * s))
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(text_pen)
        for r, c in self.marked:
            p.drawRect(self.cell_rect(r, c).adjusted(1, 1, -1, -1))
        if self._hover is not None:
            p.setPen(QPen(accent(pal), 2.0))
            p.drawRect(self.cell_rect(*self._hover))
        p.end()

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
