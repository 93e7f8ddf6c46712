"""Read-only tables of the pages: one row per item, whole rows selected, and a signed-bar column.

:func:`make_table` and :func:`table_cell` are the common set-up of the corpus and comparison
tables; :class:`SignedBarDelegate` draws a signed number in a cell as a bar left or right of
a zero line with the number beside it (see :mod:`ui.widgets.signed`), so a change reads from
the side and the printed sign, never from colour alone.
"""

from __future__ import annotations

from PySide6.QtCore import QModelIndex, QRectF, Qt
from PySide6.QtGui import QPainter
from PySide6.QtWidgets import (
    QAbstractItemView,
    QStyle,
    QStyledItemDelegate,
    QStyleOptionViewItem,
    QTableWidget,
    QTableWidgetItem,
    QWidget,
)

from ui.widgets.signed import draw_signed_bar

VALUE_ROLE = Qt.ItemDataRole.UserRole + 1
"""Item data role holding the signed number a :class:`SignedBarDelegate` draws."""


def make_table(parent: QWidget, header: tuple[str, ...], name: str) -> QTableWidget:
    """A read-only table selecting whole rows, with alternating row colours and no row numbers."""
    table = QTableWidget(0, len(header), parent)
    table.setHorizontalHeaderLabels(list(header))
    table.setAccessibleName(name)
    table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
    table.verticalHeader().setVisible(False)
    table.setAlternatingRowColors(True)
    return table


def table_cell(text: str, align_right: bool = False, tip: str = "") -> QTableWidgetItem:
    """One cell: text, optionally right-aligned (numbers), with an optional tooltip."""
    item = QTableWidgetItem(text)
    if align_right:
        item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    if tip:
        item.setToolTip(tip)
    return item


class SignedBarDelegate(QStyledItemDelegate):
    """Paint the cell's :data:`VALUE_ROLE` number as a signed bar (scaled to ``peak``) and its text."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.peak = 1.0

    def paint(self, painter: QPainter, option: QStyleOptionViewItem, index: QModelIndex) -> None:
        value = index.data(VALUE_ROLE)
        if value is None:
            super().paint(painter, option, index)
            return
        self.initStyleOption(option, index)
        text = option.text
        option.text = ""
        style = option.widget.style() if option.widget is not None else None
        if style is not None:
            style.drawControl(QStyle.ControlElement.CE_ItemViewItem, option, painter, option.widget)
        r = QRectF(option.rect).adjusted(4, 0, -4, 0)
        text_w = option.fontMetrics.horizontalAdvance(text) + 6
        bar = QRectF(r.x(), r.center().y() - 4, max(r.width() - text_w, 10), 8)
        painter.save()
        draw_signed_bar(painter, bar, float(value), self.peak, option.palette)
        painter.setPen(option.palette.color(option.palette.ColorRole.Text))
        painter.drawText(r, Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter, text)
        painter.restore()
