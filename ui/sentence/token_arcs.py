"""Token arcs: the sentence on one line, attention drawn as arcs between its tokens.

Design: tokens sit in reading order on a single baseline. An arc leaves the
query token and lands on a key token with a dot; arcs to earlier tokens rise
**above** the line (looking back), arcs to later tokens hang **below** it
(looking ahead). Thickness and opacity grow with the weight. A thin strip at the foot of
every token, in the weight colour map, shows the weight the query gives it. In "every link" mode all query/key pairs above a threshold are drawn.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import (
    QColor,
    QFont,
    QFontMetricsF,
    QKeyEvent,
    QMouseEvent,
    QPainter,
    QPainterPath,
    QPalette,
    QPen,
)
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.sentence.state import arc_links
from ui.widgets.colormap import accent, dim_text, qcolor_for
from ui.widgets.hover_view import HoverView
from ui.widgets.labels import short_label

PAD, SPACING, MARGIN = 8, 6, 12
MIN_SCALE = 0.72
"""Tokens shrink (font, padding, spacing) down to this factor before the view scrolls sideways."""


class TokenArcs(HoverView):
    """Arcs between tokens in reading order; click a token to make it the query."""

    query_clicked = Signal(int)
    query_move = Signal(int)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Token arcs", parent)
        self.matrix: np.ndarray | None = None
        self.query = 0
        self.mode = "query"
        self.threshold = 0.15

    def set_data(
        self,
        matrix: np.ndarray | None,
        labels: list[str],
        special: np.ndarray,
        *,
        query: int,
        mode: str,
        threshold: float,
        note: str = "",
    ) -> None:
        self.matrix = None if matrix is None else np.asarray(matrix, dtype=np.float64)
        self.labels, self.special = list(labels), np.asarray(special, dtype=bool)
        self.query, self.mode, self.threshold, self.note = query, mode, threshold, note
        self._hover = None
        self.setMinimumWidth(min(self._content_width(), 20000))
        self.updateGeometry()
        self.update()

    def links(self) -> list[tuple[int, int, float]]:
        """(query, key, weight) of every drawn arc."""
        if self.matrix is None:
            return []
        return arc_links(self.matrix, self.query, self.mode, self.threshold)

    # -- layout ------------------------------------------------------------------------------------
    def boxes(self) -> list[QRectF]:
        font, pad, spacing = self._fitted()
        fm = QFontMetricsF(font)
        widths = [fm.horizontalAdvance(short_label(t, 18)) + 2 * pad for t in self.labels]
        total = sum(widths) + spacing * max(len(widths) - 1, 0)
        x = max(MARGIN, (self.width() - total) / 2)
        h = fm.height() + 10
        y = self._baseline(h)
        boxes = []
        for w in widths:
            boxes.append(QRectF(x, y, w, h))
            x += w + spacing
        return boxes

    def _baseline(self, token_h: float) -> float:
        """Top of the token line: centred, or near an edge when every arc goes the other way."""
        links = self.links()
        back = any(k < q for q, k, _ in links)
        ahead = any(k > q for q, k, _ in links)
        if ahead and not back:
            return 14.0
        if back and not ahead:
            return self.height() - token_h - 14.0
        return self.height() / 2 - token_h / 2

    def _natural_width(self, scale: float) -> float:
        font = self._scaled_font(scale)
        fm = QFontMetricsF(font)
        inner = sum(
            fm.horizontalAdvance(short_label(t, 18)) + 2 * PAD * scale + SPACING * scale for t in self.labels
        )
        return inner + 2 * MARGIN

    def _scaled_font(self, scale: float) -> QFont:
        font = QFont(self.font())
        if scale < 1.0:
            font.setPointSizeF(self.font().pointSizeF() * scale)
        return font

    def _fitted(self) -> tuple[QFont, float, float]:
        """(font, padding, spacing) shrunk just enough for the tokens to fit the width, within MIN_SCALE."""
        natural = self._natural_width(1.0)
        scale = 1.0 if natural <= self.width() else max(MIN_SCALE, self.width() / natural)
        # Text does not shrink exactly in proportion to the font size: step down until it fits.
        while scale > MIN_SCALE and self._natural_width(scale) > self.width():
            scale = max(MIN_SCALE, scale - 0.02)
        return self._scaled_font(scale), PAD * scale, SPACING * scale

    def _content_width(self) -> int:
        return int(self._natural_width(MIN_SCALE)) + 1

    def sizeHint(self) -> QSize:
        return QSize(max(self._content_width(), 400), 220)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, 80)

    def hit_at(self, x: float, y: float) -> int | None:
        return self.token_at(x, y)

    def token_at(self, x: float, y: float) -> int | None:
        for i, box in enumerate(self.boxes()):
            if box.adjusted(-SPACING / 2, -6, SPACING / 2, 14).contains(QPointF(x, y)):
                return i
        return None

    # -- drawing -----------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self.matrix is not None)
        if p is None:
            return
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        pal = self.palette()
        boxes = self.boxes()
        if self.mode == "threshold" and not self.links():
            p.setPen(pal.color(QPalette.ColorRole.PlaceholderText))
            p.drawText(
                self.rect().adjusted(8, 8, -8, -8),
                Qt.AlignmentFlag.AlignHCenter | Qt.AlignmentFlag.AlignTop,
                self.no_link_text(),
            )
        self._draw_arcs(p, boxes)
        self._draw_tokens(p, boxes)
        p.end()

    def no_link_text(self) -> str:
        """Shown when no pair of tokens reaches the threshold."""
        return f"No link between two tokens reaches {fmt.weight(self.threshold, 2)}; lower the threshold."

    def drawn_text(self) -> list[str]:
        if self.matrix is None:
            return [self.placeholder()]
        empty = [self.no_link_text()] if self.mode == "threshold" and not self.links() else []
        return empty + [short_label(t, 18) for t in self.labels]

    def _draw_arcs(self, p: QPainter, boxes: list[QRectF]) -> None:
        links = self.links()
        if not links:
            return
        text = self.palette().color(QPalette.ColorRole.WindowText)
        top_room = boxes[0].top() - 8
        bottom_room = self.height() - boxes[0].bottom() - 8
        wmax = max(w for _, _, w in links)
        widest = max(abs(boxes[q].center().x() - boxes[k].center().x()) for q, k, _ in links) or 1.0
        query_mode = self.mode == "query"
        for q, k, w in sorted(links, key=lambda t: t[2]):
            back = k < q
            x1, x2 = boxes[q].center().x(), boxes[k].center().x()
            base = boxes[q].top() if back else boxes[q].bottom()
            room = top_room if back else bottom_room
            rise = max(room * (0.3 + 0.7 * abs(x2 - x1) / widest), 10.0) / 0.75
            sign = -1.0 if back else 1.0
            path = QPainterPath(QPointF(x1, base))
            path.cubicTo(QPointF(x1, base + sign * rise), QPointF(x2, base + sign * rise), QPointF(x2, base))
            colour = QColor(text)
            colour.setAlphaF(float(np.clip(0.25 + 0.75 * w / wmax, 0, 1)) if query_mode else 0.55)
            width = 0.8 + (9.0 if query_mode else 6.0) * w
            p.setPen(QPen(colour, width, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawPath(path)
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(colour)
            p.drawEllipse(QPointF(x2, base), 1.5 + width / 2, 1.5 + width / 2)

    def _draw_tokens(self, p: QPainter, boxes: list[QRectF]) -> None:
        pal = self.palette()
        acc = accent(pal)
        text = pal.color(QPalette.ColorRole.WindowText)
        row = self.matrix[self.query] if self.mode == "query" else None
        vmax = float(row.max()) if row is not None and row.size else 1.0
        font = self._fitted()[0]
        bold = QFont(font)
        bold.setBold(True)
        for i, (box, label) in enumerate(zip(boxes, self.labels)):
            is_query = self.mode == "query" and i == self.query
            fill = QColor(pal.color(QPalette.ColorRole.Base))
            p.setBrush(fill)
            border = acc if is_query else (text if i == self._hover else dim_text(pal, 0.35))
            p.setPen(QPen(border, 2.0 if is_query else 1.0))
            p.drawRoundedRect(box, 4, 4)
            p.setFont(bold if is_query else font)
            p.setPen(dim_text(pal, 0.6) if self.special[i] else text)
            p.drawText(box.adjusted(0, 0, 0, -3), Qt.AlignmentFlag.AlignCenter, short_label(label, 18))
            if row is not None and not is_query:
                swatch = QRectF(box.left() + 3, box.bottom() - 5, box.width() - 6, 3)
                p.setPen(Qt.PenStyle.NoPen)
                p.setBrush(qcolor_for(float(row[i]), vmax))
                p.drawRect(swatch)
        p.setFont(self.font())

    def hover_text(self, i: int) -> str:
        if self.matrix is None:
            return ""
        m = self.matrix
        top = np.argsort(-m[i])[:3]
        tops = ", ".join(f"\u2018{self.labels[k]}\u2019 {fmt.weight(m[i, k])}" for k in top)
        first = (
            f"\u2018{self.labels[self.query]}\u2019 \u2192 \u2018{self.labels[i]}\u2019: "
            f"{fmt.weight(m[self.query, i])}"
        )
        return f"{first}\nas query, looks most at: {tops}"

    # -- events ------------------------------------------------------------------------------------
    def mousePressEvent(self, event: QMouseEvent) -> None:
        hit = self.token_at(event.position().x(), event.position().y())
        if hit is not None and event.button() == Qt.MouseButton.LeftButton:
            self.query_clicked.emit(hit)
        super().mousePressEvent(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:
        step = {Qt.Key.Key_Left: -1, Qt.Key.Key_Right: 1}.get(Qt.Key(event.key()))
        if step is None:
            super().keyPressEvent(event)
            return
        self.query_move.emit(step)
        event.accept()
