"""Small keys that explain a view's colours and meters."""

from __future__ import annotations

from PySide6.QtCore import QRect, QSize, Qt
from PySide6.QtGui import QColor, QPainter, QPalette
from PySide6.QtWidgets import QSizePolicy, QWidget

from ui.widgets.colormap import colour_bar_image


def meter_colours(palette: QPalette) -> tuple[QColor, QColor]:
    """(track, fill) colours of a metric meter: neutral greys from the palette, never the weight map."""
    text = palette.color(QPalette.ColorRole.WindowText)
    track = QColor(text)
    track.setAlphaF(0.16)
    fill = QColor(text)
    fill.setAlphaF(0.72)
    return track, fill


class _Key(QWidget):
    """A caption, a low label, a sample mark and a high label on one line."""

    SAMPLE_WIDTH = 120
    MIN_SAMPLE_WIDTH = 36
    """On a narrow panel the sample shrinks to this before the caption is shortened."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._caption, self._low, self._high = "", "", ""
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)

    def set_text(self, caption: str, low: str, high: str) -> None:
        self._caption, self._low, self._high = caption, low, high
        self.setToolTip(f"{caption}: {low} to {high}")
        self.updateGeometry()
        self.update()

    def text(self) -> str:
        return f"{self._caption} {self._low} {self._high}"

    def drawn_text(self) -> list[str]:
        """The caption and the two end labels, as painted."""
        return [self._caption, self._low, self._high]

    def sizeHint(self) -> QSize:
        fm = self.fontMetrics()
        width = fm.horizontalAdvance(f"{self._caption}  {self._low}  {self._high}") + self.SAMPLE_WIDTH + 24
        return QSize(width, fm.height() + 6)

    def minimumSizeHint(self) -> QSize:
        return QSize(self.MIN_SAMPLE_WIDTH + 60, self.fontMetrics().height() + 6)

    def draw_sample(self, painter: QPainter, rect: QRect) -> None:
        raise NotImplementedError

    def paintEvent(self, _event: object) -> None:
        p = QPainter(self)
        fm = self.fontMetrics()
        h = self.height()
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        x = 0
        ends = fm.horizontalAdvance(self._low) + fm.horizontalAdvance(self._high) + 22
        # The numbers at both ends are never cut: the sample shrinks first, then the caption.
        # A few pixels of slack: an elided text needs a little more than its measured advance.
        sample = int(
            max(min(self.SAMPLE_WIDTH, self.width() - ends - fm.horizontalAdvance(self._caption) - 4), 0)
        )
        sample = max(sample, self.MIN_SAMPLE_WIDTH)
        room = max(self.width() - ends - sample, 20)
        caption = fm.elidedText(self._caption, Qt.TextElideMode.ElideRight, room)
        p.drawText(QRect(x, 0, fm.horizontalAdvance(caption) + 2, h), Qt.AlignmentFlag.AlignVCenter, caption)
        x += fm.horizontalAdvance(caption) + 10
        p.drawText(
            QRect(x, 0, fm.horizontalAdvance(self._low) + 2, h), Qt.AlignmentFlag.AlignVCenter, self._low
        )
        x += fm.horizontalAdvance(self._low) + 5
        self.draw_sample(p, QRect(x, (h - 10) // 2, sample, 10))
        x += sample + 5
        p.drawText(QRect(x, 0, self.width() - x, h), Qt.AlignmentFlag.AlignVCenter, self._high)
        p.end()


class ColourKey(_Key):
    """Key of the weight colour map: caption, low value, gradient, high value."""

    def draw_sample(self, painter: QPainter, rect: QRect) -> None:
        painter.drawImage(rect, colour_bar_image(rect.width(), rect.height()))


class MeterKey(_Key):
    """Key of the metric meters drawn under the mosaic cells."""

    def draw_sample(self, painter: QPainter, rect: QRect) -> None:
        track, fill = meter_colours(self.palette())
        bar = QRect(rect.x(), rect.y() + 3, rect.width(), 4)
        painter.fillRect(bar, track)
        painter.fillRect(QRect(bar.x(), bar.y(), int(bar.width() * 0.62), bar.height()), fill)
