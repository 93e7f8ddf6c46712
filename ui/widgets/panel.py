"""A titled panel (header with controls, body, optional footer) and the in-window message bar."""

from __future__ import annotations

from PySide6.QtCore import QEvent, QSize, Qt, Signal
from PySide6.QtGui import QFont, QPainter, QPalette
from PySide6.QtWidgets import (
    QFrame,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QSizePolicy,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from ui.widgets.colormap import dim_text


def column(
    parent: QWidget, items: list, *, margins: int | tuple[int, int, int, int], spacing: int
) -> QVBoxLayout:
    """Stack widgets and layouts vertically; an item given as ``(item, stretch)`` gets that stretch."""
    layout = QVBoxLayout(parent)
    layout.setContentsMargins(*((margins,) * 4 if isinstance(margins, int) else margins))
    layout.setSpacing(spacing)
    for item in items:
        thing, stretch = item if isinstance(item, tuple) else (item, 0)
        if isinstance(thing, QWidget):
            layout.addWidget(thing, stretch)
        else:
            layout.addLayout(thing, stretch)
    return layout


class ElidedLabel(QLabel):
    """One line of plain text that shortens itself with an ellipsis instead of widening its parent.

    The whole text stays in the tooltip, so nothing is lost on a narrow screen.
    """

    MIN_WIDTH = 40

    def __init__(self, text: str = "", parent: QWidget | None = None) -> None:
        super().__init__(text, parent)
        self.setTextFormat(Qt.TextFormat.PlainText)
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Preferred)

    def minimumSizeHint(self) -> QSize:
        return QSize(min(self.MIN_WIDTH, super().sizeHint().width()), super().minimumSizeHint().height())

    def shown_text(self) -> str:
        """The text as painted at the current width."""
        return self.fontMetrics().elidedText(self.text(), Qt.TextElideMode.ElideRight, self.width())

    def paintEvent(self, _event: object) -> None:
        p = QPainter(self)
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        p.drawText(self.rect(), int(self.alignment() | Qt.AlignmentFlag.AlignVCenter), self.shown_text())
        p.end()


class Panel(QFrame):
    """A view with a bold title, a dimmer subtitle, controls on the right and a body below."""

    def __init__(self, title: str, body: QWidget, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.setFrameShadow(QFrame.Shadow.Plain)
        self.body = body
        self.title = QLabel(title, self)
        font = QFont(self.title.font())
        font.setBold(True)
        self.title.setFont(font)
        self.subtitle = ElidedLabel("", self)
        self._dim_subtitle()
        self.header = QHBoxLayout()
        self.header.setContentsMargins(8, 6, 8, 2)
        self.header.setSpacing(8)
        self.header.addWidget(self.title)
        self.header.addWidget(self.subtitle, 1)
        self.footer = QHBoxLayout()
        self.footer.setContentsMargins(8, 0, 8, 6)
        self.footer.setSpacing(18)
        column(self, [self.header, (body, 1), self.footer], margins=1, spacing=2)

    def _dim_subtitle(self) -> None:
        pal = QPalette(self.palette())
        pal.setColor(QPalette.ColorRole.WindowText, dim_text(self.palette(), 0.75))
        self.subtitle.setPalette(pal)

    def changeEvent(self, event: QEvent) -> None:
        if event.type() == QEvent.Type.PaletteChange:
            self._dim_subtitle()
        super().changeEvent(event)

    def add_control(self, widget: QWidget, label: str | None = None) -> QWidget:
        """Put a control (with an optional buddy label carrying an accelerator) in the header."""
        if label:
            text = QLabel(label, self)
            text.setBuddy(widget)
            self.header.addWidget(text)
        self.header.addWidget(widget)
        return widget

    def set_subtitle(self, text: str) -> None:
        self.subtitle.setText(text)
        self.subtitle.setToolTip(text)


class MessageBar(QFrame):
    """A dismissible line at the top of the window for problems the user can fix."""

    closed = Signal()

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("messageBar")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.icon = QLabel("\u26a0", self)
        self.label = QLabel("", self)
        self.label.setWordWrap(True)
        self.label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        close = QToolButton(self)
        close.setText("\u2715")
        close.setToolTip("Dismiss (Esc)")
        close.setAutoRaise(True)
        close.clicked.connect(self.dismiss)
        row = QHBoxLayout(self)
        row.setContentsMargins(10, 6, 6, 6)
        row.addWidget(self.icon)
        row.addWidget(self.label, 1)
        row.addWidget(close)
        self.hide()

    def show_message(self, text: str) -> None:
        colour = self.palette().color(QPalette.ColorRole.WindowText).name()
        self.setStyleSheet(f"#messageBar {{ border: 1px solid {colour}; border-left: 5px solid {colour}; }}")
        self.label.setText(text)
        self.show()

    def text(self) -> str:
        return "" if self.isHidden() else self.label.text()

    def dismiss(self) -> None:
        self.hide()
        self.closed.emit()


def buddy_label(text: str, widget: QWidget, parent: QWidget) -> QLabel:
    """A label whose ``&`` accelerator moves the keyboard focus to ``widget``."""
    label = QLabel(text, parent)
    label.setBuddy(widget)
    return label


def control_grid(box: QWidget) -> QGridLayout:
    """The compact grid that holds a page's row of controls."""
    grid = QGridLayout(box)
    grid.setContentsMargins(8, 4, 8, 2)
    grid.setHorizontalSpacing(8)
    grid.setVerticalSpacing(4)
    return grid
