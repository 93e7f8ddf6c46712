"""Relevance band: the sentence as wrapped chips, each shaded by the classification token's relevance."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF, QRectF, QSize, Qt
from PySide6.QtGui import QPainter, QPen
from PySide6.QtWidgets import QSizePolicy, QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import accent, dim_text, qcolor_for, readable_text_on
from ui.widgets.hover_view import HoverView

PAD_X, PAD_Y, GAP, MARGIN = 7, 4, 5, 6


class RelevanceBand(HoverView):
    """Words (or pieces) in reading order, wrapped; colour = relevance, numbers on hover."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Relevance band", parent)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        self.values: np.ndarray | None = None
        """Relevance of each shown token, as painted."""

    def set_data(
        self, values: np.ndarray | None, labels: list[str], special: np.ndarray, note: str = ""
    ) -> None:
        self.values = None if values is None else np.asarray(values, dtype=np.float64)
        self.labels, self.special, self.note = list(labels), np.asarray(special, dtype=bool), note
        self._hover = None
        self.updateGeometry()
        self.update()

    def _chips(self, width: int) -> list[QRectF]:
        fm = self.fontMetrics()
        h = fm.height() + 2 * PAD_Y
        x, y = MARGIN, MARGIN
        chips = []
        for label in self.labels:
            w = fm.horizontalAdvance(label) + 2 * PAD_X
            if x + w > width - MARGIN and x > MARGIN:
                x, y = MARGIN, y + h + GAP
            chips.append(QRectF(x, y, w, h))
            x += w + GAP
        return chips

    def hasHeightForWidth(self) -> bool:
        return True

    def heightForWidth(self, width: int) -> int:
        chips = self._chips(width)
        return int(chips[-1].bottom() + MARGIN) if chips else 3 * self.fontMetrics().height()

    def sizeHint(self) -> QSize:
        return QSize(600, self.heightForWidth(max(self.width(), 600)))

    def minimumSizeHint(self) -> QSize:
        return QSize(200, self.fontMetrics().height() + 2 * PAD_Y + 2 * MARGIN)

    def hit_at(self, x: float, y: float) -> int | None:
        return self.chip_at(x, y) if self.values is not None else None

    def chip_at(self, x: float, y: float) -> int | None:
        for i, chip in enumerate(self._chips(self.width())):
            if chip.contains(QPointF(x, y)):
                return i
        return None

    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.values is not None)
        if p is None:
            return
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        pal = self.palette()
        vmax = float(max(self.values.max(), 1e-12)) if self.values.size else 1.0
        for i, chip in enumerate(self._chips(self.width())):
            colour = qcolor_for(float(self.values[i]), vmax)
            p.setBrush(colour)
            edge = accent(pal) if i == self._hover else dim_text(pal, 0.25)
            p.setPen(QPen(edge, 2.0 if i == self._hover else 1.0))
            p.drawRoundedRect(chip, 5, 5)
            text = readable_text_on(colour)
            if self.special[i]:
                text.setAlphaF(0.7)
            p.setPen(text)
            p.drawText(chip, Qt.AlignmentFlag.AlignCenter, self.labels[i])
        p.end()

    def hover_text(self, i: int) -> str:
        assert self.values is not None
        rank = int((self.values > self.values[i]).sum()) + 1
        return (
            f"\u2018{self.labels[i]}\u2019: {fmt.weight(self.values[i])}  (rank {rank} of {len(self.values)})"
        )

    def drawn_text(self) -> list[str]:
        return [self.placeholder()] if self.values is None else list(self.labels)
