"""The close-up: one matrix enlarged, query tokens down the side, key tokens across the top.

It fits the panel by default and zooms and pans on long sentences: the wheel
zooms around the pointer, dragging (or Left/Right, Page Up/Down) pans, ``+`` /
``-`` zoom and ``0`` fits the whole matrix again. Token labels are drawn at a
readable size, never clipped: when the rows are thinner than a line of text,
only every k-th label is drawn (plus the query and the hovered row and column)
and the others are read by hovering; zooming in brings them all back. The query
row is kept in view when it moves.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from PySide6.QtCore import QPointF, QRect, QRectF, QSize, Qt, Signal
from PySide6.QtGui import (
    QColor,
    QFont,
    QFontMetricsF,
    QImage,
    QKeyEvent,
    QMouseEvent,
    QPainter,
    QPalette,
    QPen,
    QWheelEvent,
)
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import accent, colour_bar_image, dim_text, rgba_image, to_rgba
from ui.widgets.hover_view import HoverView
from ui.widgets.labels import short_label

LABEL_PX = 11
"""Pixel size of the token labels: readable on a 768-pixel-high laptop screen."""
LABEL_GAP = 5
"""Space between a label and the matrix."""
LABEL_SPACE = 2
"""Pixels kept free between two labels."""
LABEL_CHARS = 12
"""Longer token labels are shortened with an ellipsis (the whole token is on hover)."""
MAX_PITCH = 48.0
"""Zooming stops when a cell is this many pixels wide (or at the fitted size, if that is larger)."""
ZOOM_STEP = 1.25
DRAG_START = 4
"""Pixels the pointer moves with a button held before a press becomes a pan instead of a click."""


@dataclass(frozen=True)
class CloseUpGeometry:
    """Where the matrix sits: the on-screen rectangle of its visible part, cell size and pan offset."""

    view: QRectF
    """The visible part of the matrix, in widget coordinates."""
    pitch: float
    """Cell size in pixels."""
    offset_x: float
    offset_y: float
    """Matrix pixels hidden left of / above ``view`` (the pan)."""
    size: int
    """Tokens on each axis."""
    fit_pitch: float
    """Cell size when the whole matrix fits the panel (zoom 1)."""

    def cell_rect(self, q: int, k: int) -> QRectF:
        return QRectF(
            self.view.x() + k * self.pitch - self.offset_x,
            self.view.y() + q * self.pitch - self.offset_y,
            self.pitch,
            self.pitch,
        )

    def visible(self, axis: str) -> range:
        """Rows (``axis='row'``) or columns whose centre lies inside the view."""
        offset, extent = (
            (self.offset_y, self.view.height()) if axis == "row" else (self.offset_x, self.view.width())
        )
        first = max(int(math.ceil(offset / self.pitch - 0.5)), 0)
        last = min(int(math.floor((offset + extent) / self.pitch - 0.5)), self.size - 1)
        return range(first, last + 1)

    def cell_at(self, x: float, y: float) -> tuple[int, int] | None:
        if not self.view.contains(QPointF(x, y)):
            return None
        q = int((y - self.view.y() + self.offset_y) / self.pitch)
        k = int((x - self.view.x() + self.offset_x) / self.pitch)
        return min(q, self.size - 1), min(k, self.size - 1)

    @property
    def zoomed(self) -> bool:
        return self.pitch > self.fit_pitch * 1.0001


@dataclass(frozen=True)
class AxisLabel:
    """One token label as drawn: which token, on which axis, where its text sits and the cell it names."""

    index: int
    axis: str
    """'row' (query, left of the matrix) or 'col' (key, above it, written upwards)."""
    text: str
    rect: QRectF
    """Bounding box of the drawn text in widget coordinates (for a column label, of the upright text)."""
    cell: QRectF
    """The token's row (or column) of cells, carried across the label margin: the label names this."""
    strong: bool
    """Bold: the query or the hovered token."""


class CloseUp(HoverView):
    """One attention-like matrix, large, with token labels, zoom and pan, and a hover read-out."""

    query_clicked = Signal(int)
    query_move = Signal(int)
    hovered = Signal(str)
    zoom_changed = Signal(str)
    """A short description of the zoom ("whole matrix" or "zoom ×2.5 · rows 10–40, columns 0–30 of 128")."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Close-up", parent)
        self.matrix: np.ndarray | None = None
        """The [m, m] array exactly as painted (rows = queries, columns = keys)."""
        self.vmax = 1.0
        self.query: int | None = None
        self._image: QImage | None = None
        self._zoom = 1.0
        self._offset = QPointF(0.0, 0.0)
        self._press: QPointF | None = None
        self._dragging = False
        self.label_font = QFont(self.font())
        self.label_font.setPixelSize(LABEL_PX)

    def sizeHint(self) -> QSize:
        return QSize(460, 420)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, 160)

    def set_data(
        self,
        matrix: np.ndarray | None,
        labels: list[str],
        special: np.ndarray,
        *,
        query: int | None = None,
        note: str = "",
    ) -> None:
        """Show ``matrix`` (None: show ``note`` instead), coloured from 0 to its largest value.

        The zoom stays (it is clamped to the new size); the query row is scrolled into view.
        """
        self.matrix = None if matrix is None else np.asarray(matrix, dtype=np.float64)
        self.labels, self.special, self.note = list(labels), np.asarray(special, dtype=bool), note
        if self.matrix is not None and self.matrix.size:
            self.vmax = float(max(self.matrix.max(), 1e-12))
            self._image = rgba_image(to_rgba(self.matrix, self.vmax))
        else:
            self._image = None
        self._hover = None
        self.query = query
        self._clamp()
        self.show_query()
        self.update()

    def set_query(self, query: int | None) -> None:
        if query != self.query:
            self.query = query
            self.show_query()
            self.update()

    # -- zoom and pan ------------------------------------------------------------------------------
    @property
    def zoom(self) -> float:
        """Cell size relative to the fitted size (1 = the whole matrix fits)."""
        return self._zoom

    def max_zoom(self) -> float:
        geo = self.geometry_now()
        if geo is None:
            return 1.0
        return max(MAX_PITCH, geo.fit_pitch) / geo.fit_pitch

    def set_zoom(self, zoom: float, anchor: QPointF | None = None) -> None:
        """Zoom to ``zoom`` (clamped to [1, max_zoom]) keeping the matrix point under ``anchor`` in place."""
        geo = self.geometry_now()
        if geo is None:
            return
        zoom = float(np.clip(zoom, 1.0, self.max_zoom()))
        anchor = anchor if anchor is not None else geo.view.center()
        # The matrix point (in cells) under the anchor, before the zoom.
        cx = (anchor.x() - geo.view.x() + geo.offset_x) / geo.pitch
        cy = (anchor.y() - geo.view.y() + geo.offset_y) / geo.pitch
        self._zoom = zoom
        self._offset = QPointF(0.0, 0.0)
        new = self.geometry_now()
        self._offset = QPointF(
            cx * new.pitch - (anchor.x() - new.view.x()), cy * new.pitch - (anchor.y() - new.view.y())
        )
        self._clamp()
        self._zoom_changed()

    def zoom_in(self) -> None:
        self.set_zoom(self._zoom * ZOOM_STEP, self._query_anchor())

    def zoom_out(self) -> None:
        self.set_zoom(self._zoom / ZOOM_STEP, self._query_anchor())

    def _query_anchor(self) -> QPointF | None:
        """Zooming from the keyboard or the buttons holds the query row in place, when it is in view."""
        geo = self.geometry_now()
        if geo is None or self.query is None:
            return None
        y = geo.cell_rect(self.query, 0).center().y()
        return QPointF(geo.view.center().x(), y) if geo.view.top() <= y <= geo.view.bottom() else None

    def fit(self) -> None:
        """Show the whole matrix again."""
        self._zoom, self._offset = 1.0, QPointF(0.0, 0.0)
        self._zoom_changed()

    def pan(self, dx: float, dy: float) -> None:
        """Move the view by ``dx``, ``dy`` pixels of the matrix."""
        self._offset = QPointF(self._offset.x() + dx, self._offset.y() + dy)
        self._clamp()
        self._zoom_changed()

    def show_query(self) -> None:
        """Pan (without zooming) so that the query row is inside the view."""
        geo = self.geometry_now()
        if geo is None or self.query is None or not geo.zoomed:
            return
        top = self.query * geo.pitch
        if top < geo.offset_y:
            self._offset.setY(top)
        elif top + geo.pitch > geo.offset_y + geo.view.height():
            self._offset.setY(top + geo.pitch - geo.view.height())
        self._clamp()
        self._zoom_changed()

    def zoom_text(self) -> str:
        geo = self.geometry_now()
        if geo is None or not geo.zoomed:
            return "whole matrix"
        rows, cols = geo.visible("row"), geo.visible("col")
        span = lambda r: f"{r.start}\u2013{r.stop - 1}" if len(r) else "none"  # noqa: E731
        return f"zoom \u00d7{self._zoom:.1f} \u00b7 rows {span(rows)}, columns {span(cols)} of {geo.size}"

    def _clamp(self) -> None:
        geo = self.geometry_now()
        if geo is None:
            return
        content = geo.pitch * geo.size
        self._offset = QPointF(
            float(np.clip(self._offset.x(), 0.0, max(content - geo.view.width(), 0.0))),
            float(np.clip(self._offset.y(), 0.0, max(content - geo.view.height(), 0.0))),
        )

    def _zoom_changed(self) -> None:
        self.update()
        self.zoom_changed.emit(self.zoom_text())

    def resizeEvent(self, event: object) -> None:
        self._clamp()
        super().resizeEvent(event)

    # -- layout ------------------------------------------------------------------------------------
    def _label_metrics(self) -> tuple[QFontMetricsF, float]:
        """(label font metrics, width of the label margin on the left and above)."""
        fm = QFontMetricsF(self.label_font)
        widest = max((fm.horizontalAdvance(short_label(t, LABEL_CHARS)) for t in self.labels), default=20.0)
        return fm, math.ceil(widest) + 2 * LABEL_GAP

    def _readout_height(self) -> float:
        return QFontMetricsF(self.font()).height() + 6

    def _bar_width(self) -> float:
        return 12 + QFontMetricsF(self.font()).horizontalAdvance(fmt.weight(0.0)) + 10

    def geometry_now(self) -> CloseUpGeometry | None:
        """The matrix geometry at the current size, zoom and pan (None when nothing is shown)."""
        m = len(self.labels) if self.matrix is None else self.matrix.shape[0]
        if self.matrix is None or m == 0:
            return None
        fm, lab = self._label_metrics()
        spill = fm.height() / 2  # a thinned-out label may stand out past the first or last row
        avail_w = max(self.width() - lab - self._bar_width() - 4, 1.0)
        avail_h = max(self.height() - lab - spill - self._readout_height() - 4, 1.0)
        fit = max(min(avail_w, avail_h) / m, 0.05)
        pitch = fit * self._zoom
        content = pitch * m
        view_w, view_h = min(content, avail_w), min(content, avail_h)
        left = lab + max((avail_w - view_w) / 2, 0.0)
        return CloseUpGeometry(
            QRectF(left, lab, view_w, view_h), pitch, self._offset.x(), self._offset.y(), m, fit
        )

    def label_layout(self, geo: CloseUpGeometry | None = None) -> list[AxisLabel]:
        """Every token label that is drawn, with its text rectangle and the cell it names.

        Rows (and columns) thinner than a line of text get a label every ``k`` tokens,
        ``k`` chosen so that labels cannot overlap; the query and the hovered row and
        column are always labelled, and a regular label that would touch them is left
        out. A label is only drawn whole, at :data:`LABEL_PX` pixels.
        """
        geo = geo or self.geometry_now()
        if geo is None or not self.labels:
            return []
        fm = QFontMetricsF(self.label_font)
        h = fm.height()
        step = max(1, int(math.ceil((h + LABEL_SPACE) / geo.pitch - 1e-9)))
        hover_q, hover_k = self._hover_cell()
        out: list[AxisLabel] = []
        placed: list[QRectF] = []  # both axes: near the corner a row and a column label could meet
        for axis, strong in (("row", {hover_q, self.query}), ("col", {hover_k})):
            visible = geo.visible(axis)
            wanted = [i for i in visible if i in strong] + [
                i for i in visible if i % step == 0 and i not in strong
            ]
            for i in wanted:
                label = self._place(axis, i, geo, fm)
                pad = LABEL_SPACE / 2
                if any(label.rect.adjusted(-pad, -pad, pad, pad).intersects(r) for r in placed):
                    continue
                placed.append(label.rect)
                out.append(AxisLabel(i, axis, label.text, label.rect, label.cell, i in strong))
        return out

    def _place(self, axis: str, i: int, geo: CloseUpGeometry, fm: QFontMetricsF) -> AxisLabel:
        text = short_label(self.labels[i], LABEL_CHARS)
        w, h = fm.horizontalAdvance(text), fm.height()
        cell = geo.cell_rect(i, i)
        view = geo.view
        if axis == "row":
            centre = cell.center().y()
            rect = QRectF(view.x() - LABEL_GAP - w, centre - h / 2, w, h)
            band = QRectF(0.0, cell.y(), view.right(), geo.pitch)
        else:
            centre = cell.center().x()
            rect = QRectF(centre - h / 2, view.y() - LABEL_GAP - w, h, w)
            band = QRectF(cell.x(), 0.0, geo.pitch, view.bottom())
        return AxisLabel(i, axis, text, rect, band, False)

    def _hover_cell(self, hit: object = None) -> tuple[int, int]:
        """(query, key) of a hit (default: the hovered one); -1 where it names no row or column."""
        hit = self._hover if hit is None else hit
        if not isinstance(hit, tuple):
            return -1, -1
        if hit[0] == "row":
            return hit[1], -1
        if hit[0] == "col":
            return -1, hit[1]
        return int(hit[0]), int(hit[1])

    # -- hover -------------------------------------------------------------------------------------
    def hit_at(self, x: float, y: float) -> tuple | None:
        """(q, k) over the matrix, ("row", q) / ("col", k) over a label margin, else None."""
        geo = self.geometry_now()
        if geo is None:
            return None
        cell = geo.cell_at(x, y)
        if cell is not None:
            return cell
        view = geo.view
        if 0 <= x < view.x() and view.y() <= y < view.bottom():
            return ("row", min(int((y - view.y() + geo.offset_y) / geo.pitch), geo.size - 1))
        if view.x() <= x < view.right() and 0 <= y < view.y():
            return ("col", min(int((x - view.x() + geo.offset_x) / geo.pitch), geo.size - 1))
        return None

    def cell_at(self, x: float, y: float) -> tuple[int, int] | None:
        geo = self.geometry_now()
        return None if geo is None else geo.cell_at(x, y)

    def hover_text(self, hit: object) -> str:
        return self.readout(hit)

    def on_hover(self, hit: object | None) -> None:
        self.hovered.emit(self.readout() if hit else "")

    # -- drawing -----------------------------------------------------------------------------------
    def paintEvent(self, _event: object) -> None:
        p = self.begin_paint(self._image is not None)
        if p is None:
            return
        geo = self.geometry_now()
        source = QRectF(
            geo.offset_x / geo.pitch,
            geo.offset_y / geo.pitch,
            geo.view.width() / geo.pitch,
            geo.view.height() / geo.pitch,
        )
        p.save()
        p.setClipRect(geo.view)
        p.drawImage(geo.view, self._image, source)
        self._draw_marks(p, geo)
        p.restore()
        self._draw_labels(p)
        self._draw_pan_marks(p, geo)
        self._draw_colour_bar(p, geo.view)
        self._draw_readout(p, geo.view)
        p.end()

    def _label_pen(self, index: int, strong: bool) -> QColor:
        pal = self.palette()
        if strong:
            return accent(pal)
        return dim_text(pal, 0.55) if self.special[index] else pal.color(QPalette.ColorRole.WindowText)

    def _draw_labels(self, p: QPainter) -> None:
        bold = QFont(self.label_font)
        bold.setBold(True)
        flags = Qt.TextFlag.TextDontClip | Qt.AlignmentFlag.AlignVCenter
        for label in self.label_layout():
            p.setFont(bold if label.strong else self.label_font)
            p.setPen(self._label_pen(label.index, label.strong))
            r = label.rect
            if label.axis == "row":
                p.drawText(r, int(flags | Qt.AlignmentFlag.AlignRight), label.text)
            else:
                p.save()
                p.translate(r.left(), r.bottom())
                p.rotate(-90)
                p.drawText(
                    QRectF(0, 0, r.height(), r.width()), int(flags | Qt.AlignmentFlag.AlignLeft), label.text
                )
                p.restore()
        p.setFont(self.font())

    def _draw_marks(self, p: QPainter, geo: CloseUpGeometry) -> None:
        pal = self.palette()
        p.setBrush(Qt.BrushStyle.NoBrush)
        view = geo.view
        if self.query is not None:
            p.setPen(QPen(accent(pal), 2))
            row = geo.cell_rect(self.query, 0)
            p.drawRect(QRectF(view.x() + 1, row.y() - 1, view.width() - 2, geo.pitch + 2))
        q, k = self._hover_cell()
        if q >= 0 and k >= 0:
            p.setPen(QPen(pal.color(QPalette.ColorRole.WindowText), 1.5))
            p.drawRect(geo.cell_rect(q, k))

    def _draw_pan_marks(self, p: QPainter, geo: CloseUpGeometry) -> None:
        """When zoomed, thin bars along the view's right and bottom edges show which part is visible."""
        if not geo.zoomed:
            return
        track, thumb = dim_text(self.palette(), 0.15), dim_text(self.palette(), 0.6)
        content = geo.pitch * geo.size
        view = geo.view
        right = QRectF(view.right() + 2, view.y(), 3, view.height())
        bottom = QRectF(view.x(), view.bottom() + 2, view.width(), 3)
        p.fillRect(right, track)
        p.fillRect(bottom, track)
        p.fillRect(
            QRectF(
                right.x(), view.y() + view.height() * geo.offset_y / content, 3, view.height() ** 2 / content
            ),
            thumb,
        )
        p.fillRect(
            QRectF(
                view.x() + view.width() * geo.offset_x / content, bottom.y(), view.width() ** 2 / content, 3
            ),
            thumb,
        )

    def _draw_colour_bar(self, p: QPainter, view: QRectF) -> None:
        bar = QRect(int(view.right()) + 12, int(view.y()), 10, int(min(view.height(), 220)))
        if bar.height() < 20:
            return
        p.drawImage(bar, colour_bar_image(bar.width(), bar.height(), vertical=True))
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        fm = self.fontMetrics()
        top, bottom = self.scale_texts()
        p.drawText(QPointF(bar.right() + 4, bar.y() + fm.ascent()), top)
        p.drawText(QPointF(bar.right() + 4, bar.bottom()), bottom)

    def scale_texts(self) -> tuple[str, str]:
        """The colour bar's top and bottom labels."""
        return fmt.weight(self.vmax), "0"

    def _draw_readout(self, p: QPainter, view: QRectF) -> None:
        fm = QFontMetricsF(self.label_font)
        top = view.bottom() + fm.height() / 2 + 2
        rect = QRectF(4, top, self.width() - 8, self.height() - top)
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        text = self.fontMetrics().elidedText(self.readout(), Qt.TextElideMode.ElideRight, int(rect.width()))
        p.drawText(rect, int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter), text)

    def readout(self, hit: object = None) -> str:
        """What ``hit`` (default: the hovered cell or label) holds, or how to use the view."""
        q, k = self._hover_cell(hit)
        if self.matrix is None or (q < 0 and k < 0):
            return "Rows: queries, columns: keys \u00b7 hover for a weight \u00b7 click a row for the query \u00b7 wheel zooms"
        if q < 0 or k < 0:
            i = max(q, k)
            return f"{'query' if q >= 0 else 'key'} {i}: \u2018{self.labels[i]}\u2019"
        return (
            f"query \u2018{self.labels[q]}\u2019 ({q}) \u2192 key \u2018{self.labels[k]}\u2019 ({k}): "
            f"{fmt.weight(self.matrix[q, k])}"
        )

    def drawn_text(self) -> list[str]:
        if self._image is None:
            return [self.placeholder()]
        return [label.text for label in self.label_layout()] + [*self.scale_texts(), self.readout()]

    # -- events ------------------------------------------------------------------------------------
    def mousePressEvent(self, event: QMouseEvent) -> None:
        if event.button() in (Qt.MouseButton.LeftButton, Qt.MouseButton.MiddleButton):
            self._press, self._dragging = event.position(), False
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event: QMouseEvent) -> None:
        if self._press is not None and event.buttons() & (
            Qt.MouseButton.LeftButton | Qt.MouseButton.MiddleButton
        ):
            delta = event.position() - self._press
            if self._dragging or abs(delta.x()) + abs(delta.y()) >= DRAG_START:
                self._dragging = True
                self._press = event.position()
                self.pan(-delta.x(), -delta.y())
                return
        super().mouseMoveEvent(event)

    def mouseReleaseEvent(self, event: QMouseEvent) -> None:
        pressed, dragged = self._press, self._dragging
        self._press, self._dragging = None, False
        if event.button() == Qt.MouseButton.LeftButton and pressed is not None and not dragged:
            geo = self.geometry_now()
            pos = event.position()
            if geo is not None and geo.view.y() <= pos.y() < geo.view.bottom() and pos.x() < geo.view.right():
                q = int((pos.y() - geo.view.y() + geo.offset_y) / geo.pitch)
                self.query_clicked.emit(min(q, geo.size - 1))
        super().mouseReleaseEvent(event)

    def wheelEvent(self, event: QWheelEvent) -> None:
        delta = event.angleDelta()
        if event.modifiers() & Qt.KeyboardModifier.ShiftModifier or delta.x():
            geo = self.geometry_now()
            step = delta.x() or delta.y()
            if geo is not None:
                self.pan(-step / 120 * 3 * geo.pitch, 0.0)
        elif delta.y():
            self.set_zoom(self._zoom * ZOOM_STEP ** (delta.y() / 120), event.position())
        event.accept()

    def keyPressEvent(self, event: QKeyEvent) -> None:
        key = Qt.Key(event.key())
        geo = self.geometry_now()
        query = {Qt.Key.Key_Up: -1, Qt.Key.Key_Down: 1}.get(key)
        if query is not None:
            self.query_move.emit(query)
        elif key in (Qt.Key.Key_Plus, Qt.Key.Key_Equal):
            self.zoom_in()
        elif key in (Qt.Key.Key_Minus, Qt.Key.Key_Underscore):
            self.zoom_out()
        elif key == Qt.Key.Key_0:
            self.fit()
        elif geo is not None and key in (Qt.Key.Key_Left, Qt.Key.Key_Right):
            self.pan((1 if key == Qt.Key.Key_Right else -1) * geo.view.width() / 4, 0.0)
        elif geo is not None and key in (Qt.Key.Key_PageUp, Qt.Key.Key_PageDown):
            self.pan(0.0, (1 if key == Qt.Key.Key_PageDown else -1) * geo.view.height() * 0.9)
        else:
            super().keyPressEvent(event)
            return
        event.accept()
