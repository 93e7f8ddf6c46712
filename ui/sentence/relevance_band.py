"""Relevance band: the sentence as wrapped chips, each shaded by the classification token's relevance.

The chips wrap into as many lines as the sentence needs; :class:`BandScroll`
holds the band and scrolls it vertically when the panel is shorter than the
wrapped sentence, so no chip is ever hidden under the caption below it.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QEvent, QPointF, QRectF, QSize, Qt
from PySide6.QtGui import QColor, QPainter, QPalette, QPen
from PySide6.QtWidgets import QFrame, QScrollArea, QSizePolicy, QWidget

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
        self.vmax = 1.0
        """Top of the colour scale."""
        self.excluded: int | None = None
        """The chip left out of the colour scale (the classification token's own entry), if any."""

    def set_data(
        self,
        values: np.ndarray | None,
        labels: list[str],
        special: np.ndarray,
        note: str = "",
        *,
        vmax: float | None = None,
        excluded: int | None = None,
    ) -> None:
        self.values = None if values is None else np.asarray(values, dtype=np.float64)
        self.labels, self.special, self.note = list(labels), np.asarray(special, dtype=bool), note
        top = float(self.values.max()) if self.values is not None and self.values.size else 1.0
        self.vmax = float(max(vmax if vmax is not None else top, 1e-12))
        self.excluded = excluded
        self._hover = None
        self.updateGeometry()
        self.update()

    def chips(self, width: int | None = None) -> list[QRectF]:
        """Every chip's rectangle at ``width`` (default: the current width), in reading order."""
        width = self.width() if width is None else width
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
        chips = self.chips(width)
        return int(chips[-1].bottom() + MARGIN) if chips else 3 * self.fontMetrics().height()

    def sizeHint(self) -> QSize:
        return QSize(600, self.heightForWidth(max(self.width(), 600)))

    def minimumSizeHint(self) -> QSize:
        return QSize(200, self.fontMetrics().height() + 2 * PAD_Y + 2 * MARGIN)

    def hit_at(self, x: float, y: float) -> int | None:
        return self.chip_at(x, y) if self.values is not None else None

    def chip_at(self, x: float, y: float) -> int | None:
        for i, chip in enumerate(self.chips()):
            if chip.contains(QPointF(x, y)):
                return i
        return None

    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.values is not None)
        if p is None:
            return
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        pal = self.palette()
        for i, chip in enumerate(self.chips()):
            off_scale = i == self.excluded
            colour = (
                QColor(pal.color(QPalette.ColorRole.Base))
                if off_scale
                else qcolor_for(float(self.values[i]), self.vmax)
            )
            p.setBrush(colour)
            edge = accent(pal) if i == self._hover else dim_text(pal, 0.6 if off_scale else 0.25)
            style = Qt.PenStyle.DashLine if off_scale else Qt.PenStyle.SolidLine
            p.setPen(QPen(edge, 2.0 if i == self._hover else 1.0, style))
            p.drawRoundedRect(chip, 5, 5)
            text = pal.color(QPalette.ColorRole.Text) if off_scale else readable_text_on(colour)
            if self.special[i]:
                text.setAlphaF(0.7)
            p.setPen(text)
            p.drawText(chip, Qt.AlignmentFlag.AlignCenter, self.labels[i])
        p.end()

    def hover_text(self, i: int) -> str:
        assert self.values is not None
        rank = int((self.values > self.values[i]).sum()) + 1
        text = (
            f"\u2018{self.labels[i]}\u2019: {fmt.weight(self.values[i])}  (rank {rank} of {len(self.values)})"
        )
        if i == self.excluded:
            text += "\nits own entry: left out of the colour scale (drawn unshaded)"
        return text

    def drawn_text(self) -> list[str]:
        return [self.placeholder()] if self.values is None else list(self.labels)


class BandScroll(QScrollArea):
    """Holds a :class:`RelevanceBand` at the panel's width and as tall as its wrapped chips; scrolls vertically."""

    def __init__(self, band: RelevanceBand, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.band = band
        self.setWidget(band)
        self.setWidgetResizable(False)
        self.setFrameShape(QFrame.Shape.NoFrame)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)

    def fit_band(self) -> None:
        """Give the band the viewport's width and the height its chips need at that width."""
        width = self.viewport().width()
        self.band.resize(width, max(self.band.heightForWidth(width), self.viewport().height()))

    def viewportEvent(self, event: QEvent) -> bool:
        if event.type() == QEvent.Type.Resize:
            self.fit_band()  # also when the scroll bar appears or goes and the viewport changes width
        return super().viewportEvent(event)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, self.band.minimumSizeHint().height())

    def sizeHint(self) -> QSize:
        return QSize(600, min(self.band.heightForWidth(max(self.viewport().width(), 600)), 140))
