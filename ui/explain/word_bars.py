"""Word evidence: one line per word, one lane per relevance method, drawn with QPainter.

Words run down in reading order and the methods run across, so a long sentence
and the side-by-side rewording fit without sideways scrolling, and a word's five
readings sit on one line. Each lane is scaled to its own largest magnitude
(the methods have different units); the numbers are printed and given on hover.
Attention lanes (never negative) are shaded with the weight colour map; the
signed lanes (Integrated Gradients, occlusion) use the two-sided bars of
:mod:`ui.widgets.signed`.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from PySide6.QtCore import QRectF, QSize, Qt
from PySide6.QtGui import QFont, QFontMetrics, QPainter, QPalette
from PySide6.QtWidgets import QSizePolicy, QWidget

from ui.explain.state import MethodColumn, disagrees
from ui.widgets.colormap import accent, dim_text, qcolor_for, readable_text_on
from ui.widgets.hover_view import HoverView
from ui.widgets.signed import draw_signed_bar

MARGIN, CELL_PAD, MIN_LANE = 4, 2, 56


class EvidenceTable(HoverView):
    """Relevance of every word of one sentence, by method, for one label."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Word evidence", parent)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        self.columns: list[MethodColumn] = []
        """The lanes as painted (their ``values`` are the core's arrays)."""
        self.changed: set[int] = set()

    def set_data(
        self,
        words: Sequence[str],
        columns: list[MethodColumn],
        changed: set[int] | None = None,
        note: str = "",
    ) -> None:
        self.labels, self.columns = list(words), list(columns)
        self.changed = set(changed or ())
        self.special = np.zeros(len(self.labels), dtype=bool)
        self.note = note
        self._hover = None
        self.updateGeometry()
        self.update()

    def values(self, method: str) -> np.ndarray:
        """The values drawn in the lane of ``method``."""
        return next(c.values for c in self.columns if c.method == method)

    # -- geometry --------------------------------------------------------------------------------
    def _row_height(self) -> int:
        return self.fontMetrics().height() + 6

    def _header_height(self) -> int:
        return 2 * self.fontMetrics().height() + 8

    def _word_width(self, width: int) -> float:
        fm = self.fontMetrics()
        widest = max((fm.horizontalAdvance(w) for w in self.labels), default=40) + 18
        return float(min(max(widest, 60), 0.34 * width))

    def _lanes(self, width: int) -> list[QRectF]:
        """Header-to-bottom rectangle of each lane."""
        left = MARGIN + self._word_width(width)
        lane = max((width - left - MARGIN) / max(len(self.columns), 1), MIN_LANE)
        height = self.heightForWidth(width)
        return [QRectF(left + i * lane, 0, lane, height) for i in range(len(self.columns))]

    def cell_rect(self, row: int, lane: int) -> QRectF:
        col = self._lanes(self.width())[lane]
        top = MARGIN + self._header_height() + row * self._row_height()
        return QRectF(
            col.x() + CELL_PAD, top + CELL_PAD, col.width() - 2 * CELL_PAD, self._row_height() - 2 * CELL_PAD
        )

    def hasHeightForWidth(self) -> bool:
        return True

    def heightForWidth(self, width: int) -> int:
        return 2 * MARGIN + self._header_height() + max(len(self.labels), 1) * self._row_height()

    def sizeHint(self) -> QSize:
        return QSize(540, self.heightForWidth(540))

    def minimumSizeHint(self) -> QSize:
        # all rows: inside its scroll area the table scrolls instead of being squeezed
        return QSize(60 + 5 * MIN_LANE, self.heightForWidth(self.width()))

    # -- hover -----------------------------------------------------------------------------------
    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        if not self.columns:
            return None
        for lane, rect in enumerate(self._lanes(self.width())):
            if rect.left() <= x < rect.right():
                if y < self._shown_top() + MARGIN + self._header_height():
                    return (-1, lane)
                row = int((y - MARGIN - self._header_height()) // self._row_height())
                return (row, lane) if 0 <= row < len(self.labels) else None
        return None

    def hover_text(self, hit: tuple[int, int]) -> str:
        row, lane = hit
        col = self.columns[lane]
        if row < 0:
            return f"{col.tip}\nEach lane is scaled to its own largest magnitude."
        value = float(col.values[row])
        rank = int((np.abs(col.values) > abs(value)).sum()) + 1
        sign = ""
        if col.signed:
            sign = "  (toward the label)" if value > 0 else "  (away from the label)" if value < 0 else ""
        return (
            f"\u2018{self.labels[row]}\u2019 \u00b7 {col.title}: {col.texts()[row]}{sign}\n"
            f"rank {rank} of {len(col.values)} by size"
        )

    @staticmethod
    def header_note(col: MethodColumn) -> str:
        """The lane header's second line: the rho (with a cross when it disagrees) or how occlusion was done."""
        return f"{col.note} \u2715" if disagrees(col.rho) else col.note

    def drawn_text(self) -> list[str]:
        if not self.columns:
            return [self.placeholder()]
        heads = [text for col in self.columns for text in (col.title, self.header_note(col))]
        return list(self.labels) + heads + [text for col in self.columns for text in col.texts()]

    # -- painting --------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(bool(self.columns))
        if p is None:
            return
        pal = self.palette()
        small = QFont(self.font())
        small.setPointSizeF(self.font().pointSizeF() * 0.86)
        small_fm = QFontMetrics(small)
        lanes = self._lanes(self.width())
        row_h, head_h = self._row_height(), self._header_height()
        top = MARGIN + head_h
        stripe = dim_text(pal, 0.05)
        for row in range(len(self.labels)):
            if row % 2:
                p.fillRect(QRectF(0, top + row * row_h, self.width(), row_h), stripe)
        self._paint_words(p, pal, top, row_h)
        for lane, col in enumerate(self.columns):
            peak = float(np.abs(col.values).max()) if col.values.size else 0.0
            p.setFont(small)
            for row, (value, text) in enumerate(zip(col.values, col.texts())):
                cell = self.cell_rect(row, lane)
                if col.signed:
                    self._paint_signed(p, pal, cell, float(value), peak, small_fm, text)
                else:
                    colour = qcolor_for(float(value), peak if peak > 0 else 1.0)
                    p.fillRect(cell, colour)
                    p.setPen(readable_text_on(colour))
                    p.drawText(cell, Qt.AlignmentFlag.AlignCenter, text)
                if self._hover == (row, lane):
                    p.setPen(accent(pal))
                    p.setBrush(Qt.BrushStyle.NoBrush)
                    p.drawRect(cell.adjusted(-1, -1, 1, 1))
            p.setFont(self.font())
        shown = self._shown_top()  # the lane headers stay in sight while the words scroll
        p.fillRect(QRectF(0, shown, self.width(), MARGIN + head_h), pal.color(QPalette.ColorRole.Window))
        for lane, (rect, col) in enumerate(zip(lanes, self.columns)):
            self._paint_header(p, pal, rect, col, shown, lane == (self._hover or (None, None))[1])
        p.end()

    def _shown_top(self) -> float:
        """The y of the first visible pixel row (above 0 when a scroll area has scrolled the table)."""
        return float(max(self.visibleRegion().boundingRect().top(), 0))

    def _paint_words(self, p: QPainter, pal: QPalette, top: float, row_h: int) -> None:
        width = self._word_width(self.width())
        bold = QFont(self.font())
        bold.setBold(True)
        for row, word in enumerate(self.labels):
            rect = QRectF(MARGIN, top + row * row_h, width - 8, row_h)
            edited = row in self.changed
            if edited:
                p.fillRect(
                    QRectF(MARGIN, rect.top() + 3, 3, row_h - 6), pal.color(QPalette.ColorRole.WindowText)
                )
            p.setFont(bold if edited else self.font())
            p.setPen(pal.color(QPalette.ColorRole.WindowText))
            text = QFontMetrics(p.font()).elidedText(
                word, Qt.TextElideMode.ElideMiddle, int(rect.width() - 8)
            )
            p.drawText(rect, Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter, text)
        p.setFont(self.font())

    def _paint_header(
        self, p: QPainter, pal: QPalette, rect: QRectF, col: MethodColumn, top: float, hot: bool
    ) -> None:
        fm = self.fontMetrics()
        bold = QFont(self.font())
        bold.setBold(True)
        line = fm.height()
        box = QRectF(rect.x() + 2, top + MARGIN, rect.width() - 4, line)
        p.setFont(bold)
        p.setPen(accent(pal) if hot else pal.color(QPalette.ColorRole.WindowText))
        title = QFontMetrics(bold).elidedText(col.title, Qt.TextElideMode.ElideRight, int(box.width()))
        p.drawText(box, Qt.AlignmentFlag.AlignCenter, title)
        p.setFont(self.font())
        p.setPen(pal.color(QPalette.ColorRole.WindowText) if disagrees(col.rho) else dim_text(pal, 0.75))
        note = fm.elidedText(self.header_note(col), Qt.TextElideMode.ElideRight, int(box.width()))
        p.drawText(box.translated(0, line + 2), Qt.AlignmentFlag.AlignCenter, note)

    @staticmethod
    def _paint_signed(
        p: QPainter, pal: QPalette, cell: QRectF, value: float, peak: float, fm: QFontMetrics, text: str
    ) -> None:
        bar_rect = cell.adjusted(0, 3, 0, -3)
        draw_signed_bar(p, bar_rect, value, peak, pal)
        half = QRectF(cell.x() + 3, cell.y(), cell.width() / 2 - 6, cell.height())
        if value >= 0:
            align = Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter
        else:
            half.translate(cell.width() / 2, 0)
            align = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
        if fm.horizontalAdvance(text) <= half.width():
            p.setPen(dim_text(pal, 0.85))
            p.drawText(half, align, text)
