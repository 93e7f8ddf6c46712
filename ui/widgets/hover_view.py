"""Base of the interactive views: keyboard focus, hover tracking and hover tooltips."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtGui import QMouseEvent, QPainter, QPalette
from PySide6.QtWidgets import QSizePolicy, QToolTip, QWidget


class HoverView(QWidget):
    """A view that knows what is under the pointer (``hit_at``) and what to say about it (``hover_text``)."""

    def __init__(self, name: str, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        self.setMouseTracking(True)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)
        self.setAccessibleName(name)
        self.labels: list[str] = []
        """Token labels on the current axis."""
        self.special = np.zeros(0, dtype=bool)
        self.note = ""
        """Shown instead of the view when there is nothing to draw."""
        self._hover: object | None = None

    def begin_paint(self, has_data: bool) -> QPainter | None:
        """A painter over the cleared background, or None after drawing ``note`` when there is no data."""
        p = QPainter(self)
        pal = self.palette()
        p.fillRect(self.rect(), pal.color(QPalette.ColorRole.Window))
        if has_data:
            return p
        p.setPen(pal.color(QPalette.ColorRole.PlaceholderText))
        p.drawText(
            self.rect().adjusted(8, 8, -8, -8),
            Qt.AlignmentFlag.AlignCenter | Qt.TextFlag.TextWordWrap,
            self.placeholder(),
        )
        p.end()
        return None

    def placeholder(self) -> str:
        """The text drawn instead of the view when there is nothing to draw."""
        return self.note or "No sentence analysed yet"

    def drawn_text(self) -> list[str]:
        """Every string the view paints with its current data (labels, numbers, notes), as plain text.

        Lets tests and tools read what a person sees without grabbing pixels; each view
        builds these strings with the same helpers its ``paintEvent`` uses.
        """
        return []

    def hit_at(self, x: float, y: float) -> object | None:
        """What lies under the point (a token index, a cell ...), or None."""
        return None

    def hover_text(self, hit: object) -> str:
        return ""

    def on_hover(self, hit: object | None) -> None:
        """Called when the thing under the pointer changes (None: nothing)."""

    def mouseMoveEvent(self, event: QMouseEvent) -> None:
        hit = self.hit_at(event.position().x(), event.position().y())
        if hit != self._hover:
            self._hover = hit
            self.update()
            self.on_hover(hit)
            text = self.hover_text(hit) if hit is not None else ""
            if text:
                QToolTip.showText(event.globalPosition().toPoint(), text, self)
            else:
                QToolTip.hideText()
        super().mouseMoveEvent(event)

    def leaveEvent(self, event: object) -> None:
        if self._hover is not None:
            self._hover = None
            self.update()
            self.on_hover(None)
        super().leaveEvent(event)
