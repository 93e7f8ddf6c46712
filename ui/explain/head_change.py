"""The per-head change map of a rewording: layers down, heads across, edited minus original.

Each cell is one head; its shade grows with the size of the change (green where
the metric rose, purple where it fell: the two ends of the diverging map, see
:mod:`ui.widgets.signed`) and the signed change is printed in it when it fits. The
heads that changed most are framed in the text colour; the accent frames the
hovered cell only.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QRectF, QSize, Qt
from PySide6.QtGui import QFont, QPalette, QPen
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from inspector.explanation.rewording import HeadChange
from ui.widgets.colormap import accent, dim_text, readable_text_on
from ui.widgets.hover_view import HoverView
from ui.widgets.signed import blend, signed_colour

MARGIN, MAX_CELL_W, MAX_CELL_H, MIN_SHADE = 4, 64, 30, 0.12


class HeadChangeMap(HoverView):
    """Signed change of a per-head metric between two sentences."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Per-head change", parent)
        self.before: np.ndarray | None = None
        self.after: np.ndarray | None = None
        self.top: list[HeadChange] = []

    def set_data(
        self, before: np.ndarray | None, after: np.ndarray | None, top: list[HeadChange], note: str = ""
    ) -> None:
        self.before = None if before is None else np.asarray(before, dtype=np.float64)
        self.after = None if after is None else np.asarray(after, dtype=np.float64)
        self.top, self.note = list(top), note
        self._hover = None
        self.update()

    @property
    def difference(self) -> np.ndarray | None:
        """[layers, heads] as painted: ``after - before``."""
        return None if self.before is None or self.after is None else self.after - self.before

    # -- geometry --------------------------------------------------------------------------------
    def _origin(self) -> tuple[float, float]:
        fm = self.fontMetrics()
        return MARGIN + fm.horizontalAdvance(fmt.layer_name(10)) + 6, MARGIN + fm.height() + 2

    def _cell_size(self) -> tuple[float, float]:
        layers, heads = self.before.shape
        x0, y0 = self._origin()
        w = min((self.width() - x0 - MARGIN) / heads, MAX_CELL_W)
        h = min((self.height() - y0 - MARGIN) / layers, MAX_CELL_H)
        return max(w, 4.0), max(h, 4.0)

    def cell_rect(self, layer: int, head: int) -> QRectF:
        x0, y0 = self._origin()
        w, h = self._cell_size()
        return QRectF(x0 + head * w, y0 + layer * h, w, h)

    def sizeHint(self) -> QSize:
        return QSize(420, 180)

    def minimumSizeHint(self) -> QSize:
        return QSize(160, 90)

    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        if self.before is None:
            return None
        x0, y0 = self._origin()
        w, h = self._cell_size()
        layer, head = int((y - y0) // h), int((x - x0) // w)
        layers, heads = self.before.shape
        return (layer, head) if x >= x0 and y >= y0 and layer < layers and head < heads else None

    def hover_text(self, hit: tuple[int, int]) -> str:
        layer, head = hit
        b, a = float(self.before[layer, head]), float(self.after[layer, head])
        return f"{fmt.head_name(layer, head)}: {fmt.weight(b)} \u2192 {fmt.weight(a)} ({fmt.signed(a - b)})"

    def cell_texts(self) -> list[list[str]]:
        """The signed change printed in each cell, [layer][head], one number of decimals for the whole map."""
        diff = self.difference
        flat = fmt.column(diff.ravel(), 2, sign=True)
        heads = diff.shape[1]
        return [flat[i : i + heads] for i in range(0, len(flat), heads)]

    def drawn_text(self) -> list[str]:
        diff = self.difference
        if diff is None:
            return [self.placeholder()]
        layers, heads = diff.shape
        ticks = [fmt.head_tick(h) for h in range(heads)] + [fmt.layer_name(l) for l in range(layers)]
        return ticks + [text for row in self.cell_texts() for text in row]

    # -- painting --------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        diff = self.difference
        p = self.begin_paint(diff is not None)
        if p is None:
            return
        pal = self.palette()
        base = pal.color(QPalette.ColorRole.Window)
        layers, heads = diff.shape
        peak = float(np.abs(diff).max()) if diff.size else 0.0
        fm = self.fontMetrics()
        x0, y0 = self._origin()
        w, h = self._cell_size()
        p.setPen(dim_text(pal, 0.8))
        for head in range(heads):
            p.drawText(
                QRectF(x0 + head * w, MARGIN, w, fm.height()),
                Qt.AlignmentFlag.AlignCenter,
                fmt.head_tick(head),
            )
        for layer in range(layers):
            p.drawText(
                QRectF(MARGIN, y0 + layer * h, x0 - MARGIN - 6, h),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                fmt.layer_name(layer),
            )
        small = QFont(self.font())
        small.setPointSizeF(self.font().pointSizeF() * 0.82)
        p.setFont(small)
        small_fm = p.fontMetrics()
        framed = {(c.layer, c.head) for c in self.top}
        texts = self.cell_texts()
        for layer in range(layers):
            for head in range(heads):
                value = float(diff[layer, head])
                cell = self.cell_rect(layer, head).adjusted(1, 1, -1, -1)
                share = 0.0 if peak <= 0 else abs(value) / peak
                colour = blend(
                    base, signed_colour(pal, value), MIN_SHADE + (1 - MIN_SHADE) * share if value else 0
                )
                p.fillRect(cell, colour)
                text = texts[layer][head]
                if (
                    small_fm.horizontalAdvance(text) + 4 <= cell.width()
                    and small_fm.height() <= cell.height()
                ):
                    p.setPen(readable_text_on(colour))
                    p.drawText(cell, Qt.AlignmentFlag.AlignCenter, text)
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(QPen(pal.color(QPalette.ColorRole.WindowText), 2.0))
        for layer, head in framed:
            p.drawRect(self.cell_rect(layer, head).adjusted(1, 1, -1, -1))
        if self._hover is not None:
            p.setPen(QPen(accent(pal), 2.0))
            p.drawRect(self.cell_rect(*self._hover))
        p.end()
