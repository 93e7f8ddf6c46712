"""The close-up: one matrix enlarged, query tokens down the side, key tokens across the top."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPoint, QRect, QRectF, QSize, Qt, Signal
from PySide6.QtGui import (
    QColor,
    QFont,
    QFontMetrics,
    QImage,
    QKeyEvent,
    QMouseEvent,
    QPainter,
    QPalette,
    QPen,
)
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import accent, colour_bar_image, dim_text, rgba_image, to_rgba
from ui.widgets.hover_view import HoverView
from ui.widgets.labels import label_step, short_label

AXES_TEXT = "query \u2193  key \u2192"


class CloseUp(HoverView):
    """One attention-like matrix, large, with token labels and a hover read-out."""

    query_clicked = Signal(int)
    query_move = Signal(int)
    hovered = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Close-up", parent)
        self.matrix: np.ndarray | None = None
        """The [m, m] array exactly as painted (rows = queries, columns = keys)."""
        self.vmax = 1.0
        self.query: int | None = None
        self._image: QImage | None = None

    def sizeHint(self) -> QSize:
        return QSize(460, 420)

    def minimumSizeHint(self) -> QSize:
        return QSize(220, 200)

    def set_data(
        self,
        matrix: np.ndarray | None,
        labels: list[str],
        special: np.ndarray,
        *,
        query: int | None = None,
        note: str = "",
    ) -> None:
        """Show ``matrix`` (None: show ``note`` instead), coloured from 0 to its largest value."""
        self.matrix = None if matrix is None else np.asarray(matrix, dtype=np.float64)
        self.labels, self.special, self.note = list(labels), np.asarray(special, dtype=bool), note
        self.query = query
        if self.matrix is not None and self.matrix.size:
            self.vmax = float(max(self.matrix.max(), 1e-12))
            self._image = rgba_image(to_rgba(self.matrix, self.vmax))
        else:
            self._image = None
        self._hover = None
        self.update()

    def set_query(self, query: int | None) -> None:
        if query != self.query:
            self.query = query
            self.update()

    # -- layout ------------------------------------------------------------------------------------
    def _label_font(self, pitch: float) -> QFont:
        font = QFont(self.font())
        font.setPixelSize(int(np.clip(pitch * 0.75, 9, 13)))
        return font

    def _layout(self) -> tuple[QRect, float, QFont]:
        """(matrix rectangle, cell pitch, label font)."""
        m = len(self.labels)
        base = QFontMetrics(self.font())
        bar_w = 12 + base.horizontalAdvance(fmt.weight(0.0)) + 12
        readout = base.height() + 8
        # First pass with a nominal font, then refine with the font that fits the pitch.
        font = self._label_font(12)
        for _ in range(2):
            fm = QFontMetrics(font)
            lab = max((fm.horizontalAdvance(short_label(t)) for t in self.labels), default=20) + 18
            avail_w = self.width() - lab - bar_w - 8
            avail_h = self.height() - lab - readout - 6
            pitch = max(min(avail_w, avail_h) / max(m, 1), 1.0)
            font = self._label_font(pitch)
        size = int(pitch * m)
        left = lab + max((avail_w - size) // 2, 0)
        return QRect(left, lab, size, size), pitch, font

    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        return self.cell_at(x, y)

    def hover_text(self, hit: object) -> str:
        return self.readout(hit)

    def on_hover(self, hit: object | None) -> None:
        self.hovered.emit(self.readout() if hit else "")

    def cell_at(self, x: float, y: float) -> tuple[int, int] | None:
        if self.matrix is None:
            return None
        rect, pitch, _ = self._layout()
        if not rect.contains(int(x), int(y)):
            return None
        m = self.matrix.shape[0]
        q = min(int((y - rect.y()) / pitch), m - 1)
        k = min(int((x - rect.x()) / pitch), m - 1)
        return q, k

    # -- drawing -----------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self._image is not None)
        if p is None:
            return
        rect, pitch, font = self._layout()
        p.drawImage(rect, self._image)
        self._draw_axes(p, rect, pitch, font)
        self._draw_marks(p, rect, pitch)
        self._draw_colour_bar(p, rect)
        self._draw_readout(p, rect)
        p.end()

    def _label_pen(self, index: int, active: set[int]) -> tuple[QColor, bool]:
        pal = self.palette()
        if index in active:
            return accent(pal), True
        return (
            dim_text(pal, 0.55) if self.special[index] else pal.color(QPalette.ColorRole.WindowText)
        ), False

    def _draw_axes(self, p: QPainter, rect: QRect, pitch: float, font: QFont) -> None:
        fm = QFontMetrics(font)
        m = len(self.labels)
        step = label_step(m, pitch, fm.height() * 0.95)
        hover_q, hover_k = self._hover if self._hover else (-1, -1)
        rows = {hover_q} | ({self.query} if self.query is not None else set())
        cols = {hover_k}
        bold = QFont(font)
        bold.setBold(True)
        for i, label in enumerate(self.labels):
            text = short_label(label)
            if i % step == 0 or i in rows:
                colour, strong = self._label_pen(i, rows)
                p.setFont(bold if strong else font)
                p.setPen(colour)
                y = rect.y() + i * pitch
                p.drawText(
                    QRectF(0, y, rect.x() - 8, pitch),
                    Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                    text,
                )
            if i % step == 0 or i in cols:
                colour, strong = self._label_pen(i, cols)
                p.setFont(bold if strong else font)
                p.setPen(colour)
                p.save()
                p.translate(rect.x() + (i + 0.5) * pitch, rect.y() - 6)
                p.rotate(-90)
                p.drawText(QRectF(0, -pitch / 2, rect.y(), pitch), Qt.AlignmentFlag.AlignVCenter, text)
                p.restore()
        p.setFont(self.font())
        p.setPen(dim_text(self.palette()))
        p.drawText(
            QRect(0, 0, rect.x() - 8, rect.y() - 4),
            Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignBottom,
            AXES_TEXT,
        )

    def _draw_marks(self, p: QPainter, rect: QRect, pitch: float) -> None:
        pal = self.palette()
        p.setBrush(Qt.BrushStyle.NoBrush)
        if self.query is not None:
            p.setPen(QPen(accent(pal), 2))
            p.drawRect(QRectF(rect.x() - 1, rect.y() + self.query * pitch - 1, rect.width() + 2, pitch + 2))
        if self._hover is not None:
            q, k = self._hover
            p.setPen(QPen(pal.color(QPalette.ColorRole.WindowText), 1.5))
            p.drawRect(QRectF(rect.x() + k * pitch, rect.y() + q * pitch, pitch, pitch))

    def _draw_colour_bar(self, p: QPainter, rect: QRect) -> None:
        bar = QRect(rect.right() + 12, rect.y(), 10, min(rect.height(), 220))
        p.drawImage(bar, colour_bar_image(bar.width(), bar.height(), vertical=True))
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        fm = self.fontMetrics()
        top, bottom = self.scale_texts()
        p.drawText(QPoint(bar.right() + 4, bar.y() + fm.ascent()), top)
        p.drawText(QPoint(bar.right() + 4, bar.bottom()), bottom)

    def scale_texts(self) -> tuple[str, str]:
        """The colour bar's top and bottom labels."""
        return fmt.weight(self.vmax), "0"

    def _draw_readout(self, p: QPainter, rect: QRect) -> None:
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        p.drawText(
            QRect(4, rect.bottom() + 4, self.width() - 8, self.height() - rect.bottom() - 4),
            Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter,
            self.readout(),
        )

    def readout(self, hit: tuple[int, int] | None = None) -> str:
        """What the cell ``hit`` (default: the hovered cell) holds, or how to use the view."""
        hit = hit if hit is not None else self._hover
        if hit is None or self.matrix is None:
            return "Hover a cell for its weight; click a row to make it the query."
        q, k = hit
        return (
            f"query \u2018{self.labels[q]}\u2019 ({q}) \u2192 key \u2018{self.labels[k]}\u2019 ({k}): "
            f"{fmt.weight(self.matrix[q, k])}"
        )

    def drawn_text(self) -> list[str]:
        if self._image is None:
            return [self.placeholder()]
        return [short_label(t) for t in self.labels] + [AXES_TEXT, *self.scale_texts(), self.readout()]

    # -- events ------------------------------------------------------------------------------------
    def mousePressEvent(self, event: QMouseEvent) -> None:
        if event.button() == Qt.MouseButton.LeftButton and self.matrix is not None:
            rect, pitch, _ = self._layout()
            y = event.position().y() - rect.y()
            if 0 <= y < rect.height() and event.position().x() < rect.right():
                self.query_clicked.emit(min(int(y / pitch), self.matrix.shape[0] - 1))
        super().mousePressEvent(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:
        step = {Qt.Key.Key_Up: -1, Qt.Key.Key_Down: 1}.get(Qt.Key(event.key()))
        if step is None:
            super().keyPressEvent(event)
            return
        self.query_move.emit(step)
        event.accept()
