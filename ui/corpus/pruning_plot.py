"""The pruning curve: accuracy against the fraction of heads switched off, one line per removal order.

Lines differ by dash pattern and marker shape as well as by shade, so they read
apart without colour (and in greyscale print). The chosen set of heads to
remove is marked with a vertical line and a ring on its point. Hover shows the
nearest measured point; a click chooses it (the page's spin boxes do the same from the keyboard).
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QMouseEvent, QPainterPath, QPalette, QPen
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from inspector.corpus.pruning import PruningResult
from ui.widgets.colormap import accent, dim_text
from ui.widgets.hover_view import HoverView

STYLES: tuple[tuple[Qt.PenStyle, str, float], ...] = (
    (Qt.PenStyle.SolidLine, "circle", 1.0),
    (Qt.PenStyle.DashLine, "square", 0.62),
    (Qt.PenStyle.DotLine, "triangle", 0.42),
)
"""(dash, marker, text-colour alpha) per order, in the order the curves come."""
PAD_LEFT, PAD_BOTTOM, PAD_TOP, PAD_RIGHT = 46, 34, 26, 12


def draw_marker(p, centre: QPointF, kind: str, size: float) -> None:
    """A small filled circle, square or triangle."""
    if kind == "circle":
        p.drawEllipse(centre, size, size)
    elif kind == "square":
        p.drawRect(QRectF(centre.x() - size, centre.y() - size, 2 * size, 2 * size))
    else:
        path = QPainterPath(QPointF(centre.x(), centre.y() - size * 1.2))
        path.lineTo(centre.x() + size * 1.1, centre.y() + size * 0.9)
        path.lineTo(centre.x() - size * 1.1, centre.y() + size * 0.9)
        path.closeSubpath()
        p.drawPath(path)


class PruningPlot(HoverView):
    """Accuracy after removing growing prefixes of each order (no retraining)."""

    point_clicked = Signal(int, int)
    """curve index, step index of the measured point the user chose."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Pruning curve", parent)
        self.result: PruningResult | None = None
        self.total = 1
        self.top = 1.0
        """Accuracy at the top of the plot: the next tenth above the best measured point (at most 100%)."""
        self.note = "No pruning simulated yet"

    def mousePressEvent(self, event: QMouseEvent) -> None:
        hit = self.hit_at(event.position().x(), event.position().y())
        if hit is not None and event.button() == Qt.MouseButton.LeftButton:
            self.point_clicked.emit(*hit)
        super().mousePressEvent(event)

    def chosen_point(self) -> tuple[int, int] | None:
        """(curve, step) of the chosen set of heads, if it is a measured point."""
        if self.result is None:
            return None
        for i, curve in enumerate(self.result.curves):
            if curve.order_name == self.result.mask_order and len(self.result.removed) in curve.steps:
                return i, curve.steps.index(len(self.result.removed))
        return None

    def set_result(self, result: PruningResult | None, total_heads: int, note: str = "") -> None:
        self.result, self.total = result, max(total_heads, 1)
        self.note = note or "No pruning simulated yet"
        best = max((max(c.accuracy) for c in result.curves), default=1.0) if result else 1.0
        self.top = min(1.0, max(0.1, np.ceil(best * 10 + 1e-9) / 10))
        self._hover = None
        self.update()

    def sizeHint(self) -> QSize:
        return QSize(460, 300)

    def minimumSizeHint(self) -> QSize:
        return QSize(240, 180)

    # -- geometry --------------------------------------------------------------------------------
    def plot_rect(self) -> QRectF:
        return QRectF(
            PAD_LEFT, PAD_TOP, self.width() - PAD_LEFT - PAD_RIGHT, self.height() - PAD_TOP - PAD_BOTTOM
        )

    def point(self, fraction: float, accuracy: float) -> QPointF:
        r = self.plot_rect()
        return QPointF(r.left() + fraction * r.width(), r.bottom() - accuracy / self.top * r.height())

    def points(self) -> list[tuple[int, int, QPointF]]:
        """(curve index, step index, position) of every measured point."""
        out = []
        for i, curve in enumerate(self.result.curves if self.result else []):
            for k, (f, a) in enumerate(zip(curve.fractions, curve.accuracy)):
                out.append((i, k, self.point(f, a)))
        return out

    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        best, found = 12.0**2, None
        for i, k, pt in self.points():
            d = (pt.x() - x) ** 2 + (pt.y() - y) ** 2
            if d <= best:
                best, found = d, (i, k)
        return found

    def hover_text(self, hit: tuple[int, int]) -> str:
        curve = self.result.curves[hit[0]]
        k = hit[1]
        removed = curve.steps[k]
        last = f"; last removed {fmt.head_name(*curve.order[removed - 1])}" if removed else ""
        return (
            f"{curve.order_name} order: {removed} of {fmt.count(len(curve.order), 'head')} removed "
            f"({fmt.percent(curve.fractions[k])}), accuracy {fmt.percent(curve.accuracy[k])}{last}"
            "\nClick to choose these heads"
        )

    def tick_texts(self) -> tuple[list[str], list[str]]:
        """The accuracy ticks (left) and the share-of-heads ticks (bottom), in sixths of the axes."""
        return (
            [fmt.percent(k / 5 * self.top, 0) for k in range(6)],
            [fmt.percent(k / 5, 0) for k in range(6)],
        )

    def axis_texts(self) -> tuple[str, str]:
        """The bottom axis title and the left axis title."""
        return f"share of the {fmt.count(self.total, 'head')} switched off", "accuracy"

    def chosen_text(self) -> str:
        return f"chosen: {fmt.count(len(self.result.removed), 'head')}"

    def drawn_text(self) -> list[str]:
        if self.result is None:
            return [self.placeholder()]
        left, bottom = self.tick_texts()
        names = [c.order_name for c in self.result.curves]
        return [*left, *bottom, *self.axis_texts(), self.chosen_text(), *names]

    # -- painting --------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.result is not None)
        if p is None:
            return
        p.setRenderHint(p.RenderHint.Antialiasing)
        pal = self.palette()
        ink = pal.color(QPalette.ColorRole.WindowText)
        r = self.plot_rect()
        fm = self.fontMetrics()
        grid = dim_text(pal, 0.18)
        p.setPen(dim_text(pal, 0.85))
        left_ticks, bottom_ticks = self.tick_texts()
        for k in range(6):
            v = k / 5
            y = self.point(0, v * self.top).y()
            x = self.point(v, 0).x()
            p.setPen(QPen(grid, 1))
            p.drawLine(QPointF(r.left(), y), QPointF(r.right(), y))
            p.drawLine(QPointF(x, r.top()), QPointF(x, r.bottom()))
            p.setPen(dim_text(pal, 0.85))
            p.drawText(
                QRectF(0, y - 8, PAD_LEFT - 6, 16),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                left_ticks[k],
            )
            p.drawText(
                QRectF(x - 30, r.bottom() + 2, 60, fm.height()),
                Qt.AlignmentFlag.AlignHCenter,
                bottom_ticks[k],
            )
        bottom_title, left_title = self.axis_texts()
        p.drawText(
            QRectF(r.left(), r.bottom() + fm.height() + 2, r.width(), fm.height()),
            Qt.AlignmentFlag.AlignHCenter,
            bottom_title,
        )
        p.drawText(
            QRectF(r.left(), 2, r.width(), PAD_TOP - 4),
            Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter,
            left_title,
        )
        p.setPen(QPen(ink, 1))
        p.drawLine(r.bottomLeft(), r.bottomRight())
        p.drawLine(r.bottomLeft(), r.topLeft())
        chosen = len(self.result.removed) / self.total
        mark = accent(pal)
        p.setPen(QPen(mark, 1.5, Qt.PenStyle.DashDotLine))
        x = self.point(chosen, 0).x()
        p.drawLine(QPointF(x, r.top()), QPointF(x, r.bottom()))
        p.setPen(mark)
        label = self.chosen_text()
        lx = min(x + 4, r.right() - fm.horizontalAdvance(label))
        p.drawText(QPointF(lx, r.bottom() - fm.descent() - 3), label)
        for i, curve in enumerate(self.result.curves):
            dash, marker, alpha = STYLES[i % len(STYLES)]
            colour = QColor(ink)
            colour.setAlphaF(alpha)
            pts = [self.point(f, a) for f, a in zip(curve.fractions, curve.accuracy)]
            p.setPen(QPen(colour, 2.0, dash))
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawPolyline(pts)
            p.setPen(QPen(colour, 1.0))
            p.setBrush(colour)
            size = 3.0 if len(pts) < 40 else 2.0
            for pt in pts:
                draw_marker(p, pt, marker, size)
        self._legend(p, r, ink)
        chosen_pt = self.chosen_point()
        if chosen_pt is not None:
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.setPen(QPen(mark, 2.5))
            p.drawEllipse(self.points_of(*chosen_pt), 7, 7)
        if self._hover is not None:
            pt = self.points_of(*self._hover)
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.setPen(QPen(accent(pal), 2.0))
            p.drawEllipse(pt, 6, 6)
        p.end()

    def points_of(self, curve: int, step: int) -> QPointF:
        c = self.result.curves[curve]
        return self.point(c.fractions[step], c.accuracy[step])

    def _legend(self, p, r: QRectF, ink: QColor) -> None:
        fm = self.fontMetrics()
        names = [c.order_name for c in self.result.curves]
        x = r.right() - sum(fm.horizontalAdvance(n) + 56 for n in names)
        y = PAD_TOP / 2
        for i, name in enumerate(names):
            dash, marker, alpha = STYLES[i % len(STYLES)]
            colour = QColor(ink)
            colour.setAlphaF(alpha)
            p.setPen(QPen(colour, 2.0, dash))
            p.drawLine(QPointF(x, y), QPointF(x + 32, y))
            p.setPen(QPen(colour, 1.0))
            p.setBrush(colour)
            draw_marker(p, QPointF(x + 16, y), marker, 3.0)
            p.setPen(ink)
            p.drawText(QPointF(x + 38, y + fm.ascent() / 2 - 1), name)
            x += fm.horizontalAdvance(name) + 56
