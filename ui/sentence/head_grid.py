"""The head mosaic: every head's attention for the sentence, one row per layer.

Layout (readable from 4 x 4 to 24 x 16 heads): the layers are dealt into one or
more side-by-side blocks of consecutive layers (``L0``-``L11`` | ``L12``-``L23``),
each with its own layer names on the left and head names on top. The number of
blocks is the one that gives the largest cells for the widget's size
(:func:`plan_blocks`): a tall model in a short panel wraps, a small one stays in
one block.

Drawing path (fast at every size): all cells are resampled to the on-screen cell
size and coloured in numpy with one lookup-table pass, assembled into a single
RGBA image with the gaps, block aisles and metric meters already in place,
wrapped in one QImage and cached. A repaint is then one ``drawImage`` plus the
layer/head labels and the selection frame.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from PySide6.QtCore import QPoint, QPointF, QRect, QSize, Qt, Signal
from PySide6.QtGui import QColor, QFont, QImage, QKeyEvent, QMouseEvent, QPainter, QPalette, QPen, QPolygonF
from PySide6.QtWidgets import QWidget

from inspector import formatting as fmt
from ui.widgets.colormap import LUT, accent, dim_text, rgba_image, to_codes
from ui.widgets.hover_view import HoverView
from ui.widgets.legend import meter_colours

MAX_CELL = 150
BLOCK_SPACE = 8
"""Pixels between one block's last column of cells and the next block's layer names."""
READABLE_CELL = 12
"""Cells smaller than this get the thin meter and 2-pixel gaps (:func:`fit_cells`); the page widens
the mosaic (up to 60% of its row) rather than draw them (common practice, no source)."""
NUMBER_LANE = 17
"""Height of the lane under a cell when the metric value is printed there."""
BAR_LANE = 6
THIN_LANE = 4
"""Lane of the smallest cells: a 2-pixel meter, so the metric stays visible even at 24 x 16 heads."""


@dataclass(frozen=True)
class GridGeometry:
    """Where the cells sit inside the widget.

    Layer ``l`` is row ``l % rows`` of block ``l // rows``; the blocks stand side by
    side, ``aisle`` pixels apart (room for the next block's layer names).
    """

    left: int
    top: int
    cell: int
    gap: int
    lane: int
    layers: int
    heads: int
    rows: int = 0
    """Layers per block (0: all of them, one block)."""
    aisle: int = 0
    """Pixels between one block's last cell pitch and the next block's first cell."""

    @property
    def pitch_x(self) -> int:
        return self.cell + self.gap

    @property
    def pitch_y(self) -> int:
        return self.cell + self.lane + self.gap

    @property
    def block_rows(self) -> int:
        return self.rows if 0 < self.rows < self.layers else self.layers

    @property
    def blocks(self) -> int:
        return -(-self.layers // max(self.block_rows, 1))

    @property
    def block_pitch(self) -> int:
        """From one block's first cell to the next block's first cell."""
        return self.heads * self.pitch_x + self.aisle

    def block_left(self, block: int) -> int:
        """The x of a block's first column of cells."""
        return self.left + block * self.block_pitch

    def block_layers(self, block: int) -> range:
        first = block * self.block_rows
        return range(first, min(first + self.block_rows, self.layers))

    def image_size(self) -> tuple[int, int]:
        """(width, height) of the cells, gaps, lanes and aisles from the first cell to the last."""
        width = (self.blocks - 1) * self.block_pitch + self.heads * self.pitch_x - self.gap
        return width, self.block_rows * self.pitch_y - self.gap

    def cell_rect(self, layer: int, head: int) -> QRect:
        block, row = divmod(layer, self.block_rows)
        return QRect(
            self.block_left(block) + head * self.pitch_x, self.top + row * self.pitch_y, self.cell, self.cell
        )

    def slot_rect(self, layer: int, head: int) -> QRect:
        """The cell plus its meter lane."""
        r = self.cell_rect(layer, head)
        return QRect(r.x(), r.y(), self.cell, self.cell + self.lane)

    def cell_at(self, x: int, y: int) -> tuple[int, int] | None:
        """(layer, head) of the cell or meter lane under the point, or None (gaps, aisles, labels)."""
        cx, cy = x - self.left, y - self.top
        if cx < 0 or cy < 0:
            return None
        block, within = divmod(cx, self.block_pitch)
        head, row = within // self.pitch_x, cy // self.pitch_y
        layer = block * self.block_rows + row
        if head >= self.heads or row >= self.block_rows or layer >= self.layers:
            return None
        if within - head * self.pitch_x >= self.cell or cy - row * self.pitch_y >= self.cell + self.lane:
            return None
        return int(layer), int(head)


def resample_cells(attention: np.ndarray, cell: int) -> np.ndarray:
    """Resize every head's [m, m] map to [cell, cell].

    Enlarging repeats pixels (nearest); shrinking takes the **maximum** of each
    block, so a thin pattern such as a previous-token diagonal never vanishes
    from a small cell.
    """
    m = attention.shape[-1]
    if cell >= m:
        idx = np.arange(cell) * m // cell
        return np.take(np.take(attention, idx, axis=-2), idx, axis=-1)
    return _block_max(_block_max(attention, cell, attention.ndim - 2), cell, attention.ndim - 1)


def _block_max(a: np.ndarray, cell: int, axis: int) -> np.ndarray:
    """Maximum over ``cell`` near-equal consecutive blocks along ``axis``.

    Along the last axis it gathers the j-th element of every block for j < k (the longest
    block) and keeps the running maximum: k vectorised passes, fast where a reduction over a
    tiny innermost axis is not. Along any other axis each block is reduced in place (whole
    rows at a time): one pass over the array.
    """
    m = a.shape[axis]
    starts = np.arange(cell) * m // cell
    ends = np.append(starts[1:], m)
    axis %= a.ndim
    if axis != a.ndim - 1:
        shape = list(a.shape)
        shape[axis] = cell
        out = np.empty(shape, dtype=a.dtype)
        before = (slice(None),) * axis
        for i, (s, e) in enumerate(zip(starts, ends)):
            np.max(a[(*before, slice(s, e))], axis=axis, out=out[(*before, i)])
        return out
    out = np.take(a, starts, axis=axis)
    for j in range(1, int((ends - starts).max())):
        np.maximum(out, np.take(a, np.minimum(starts + j, ends - 1), axis=axis), out=out)
    return out


def head_codes(attention: np.ndarray, cell: int, *, per_head: bool) -> np.ndarray:
    """Every head resized to ``cell`` x ``cell`` pixels as colour-map codes, [layers, heads, cell, cell] uint8.

    Shrinking takes block maxima of the weights first and colours the small cells
    (every weight is read once); enlarging colours the small matrices first and then
    repeats pixels. Either way the result is the same: the map is monotonic, so the code
    of a block maximum is the block maximum of codes, and each head's largest weight
    (its own scale) survives the block maxima.
    """
    if cell >= attention.shape[-1]:
        vmax = attention.max(axis=(-2, -1))[..., None, None] if per_head else 1.0
        return resample_cells(to_codes(attention, vmax), cell)
    small = resample_cells(attention, cell)
    vmax = small.max(axis=(-2, -1))[..., None, None] if per_head else 1.0
    return to_codes(small, vmax)


def mosaic_rgba(
    attention: np.ndarray | None,
    geometry: GridGeometry,
    *,
    per_head: bool,
    meter: np.ndarray | None,
    background: tuple[int, int, int, int],
    track: tuple[int, int, int, int],
    fill: tuple[int, int, int, int],
    codes: np.ndarray | None = None,
) -> np.ndarray:
    """Colour every head and lay the cells out in one RGBA array.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, m, m)
        Ignored when ``codes`` are given.
    geometry : GridGeometry
        Cell size, gap and lane height in pixels.
    per_head : bool
        Scale each head from 0 to its own largest weight (else 0 to 1).
    meter : ndarray of shape (layers, heads) in [0, 1], optional
        Fill fraction of each cell's meter bar.
    codes : ndarray of shape (layers, heads, cell, cell), optional
        :func:`head_codes` of the attention at this cell size, if already built.

    Returns
    -------
    ndarray of shape (height, width, 4), uint8
        ``geometry.image_size()`` plus one trailing gap on each axis: the blocks of
        ``geometry.block_rows`` layers side by side, ``geometry.aisle`` pixels apart,
        the cell of (layer, head) at ``geometry.cell_rect(layer, head)`` less
        ``(geometry.left, geometry.top)``.
    """
    c, g, lane = geometry.cell, geometry.gap, geometry.lane
    if codes is None:
        codes = head_codes(attention, c, per_head=per_head)
    L, H = codes.shape[:2]
    rows, blocks = geometry.block_rows, geometry.blocks
    cells = LUT32[codes]  # one packed RGBA word per pixel
    # [block, row in block, y in slot, head, x in slot]; layers past the last one stay background
    out = np.empty((blocks * rows, c + lane + g, H, c + g), dtype=np.uint32)
    out[...] = _pack(background)
    out[:L, :c, :, :c] = cells.transpose(0, 2, 1, 3)
    if meter is not None and lane > 0:
        bar_top, bar_h = (c + 1, 2) if lane <= THIN_LANE else (c + 2, min(lane - 2, 4))
        filled = np.arange(c)[None, None, :] < np.rint(np.clip(meter, 0, 1) * c)[:, :, None]  # [L, H, c]
        colours = np.where(filled, _pack(fill), _pack(track))
        out[:L, bar_top : bar_top + bar_h, :, :c] = colours[:, None]
    height, row_width = rows * (c + lane + g), H * (c + g)
    if blocks == 1:
        flat = out.reshape(height, row_width)
    else:
        pitch = geometry.block_pitch
        flat = np.empty((height, blocks, pitch), dtype=np.uint32)
        flat[...] = _pack(background)
        flat[:, :, :row_width] = out.reshape(blocks, height, row_width).transpose(1, 0, 2)
        flat = flat.reshape(height, blocks * pitch)[:, : (blocks - 1) * pitch + row_width]
    flat = np.ascontiguousarray(flat)
    return flat.view(np.uint8).reshape(flat.shape[0], flat.shape[1], 4)


LUT32: np.ndarray = LUT.view(np.uint32).reshape(256)
"""The weight map's lookup table with each RGBA entry packed in one 32-bit word (native byte order)."""


def _pack(rgba: tuple[int, int, int, int]) -> np.uint32:
    return np.array(rgba, dtype=np.uint8).view(np.uint32)[0]


def _blend(colour: QColor, background: QColor) -> tuple[int, int, int, int]:
    a = colour.alphaF()
    return tuple(
        int(round(a * x + (1 - a) * y)) for x, y in zip(colour.getRgb()[:3], background.getRgb()[:3])
    ) + (255,)


def fit_cells(avail_w: float, avail_h: float, layers: int, heads: int) -> tuple[int, int, int]:
    """(cell, gap, lane) in pixels: the largest cells that fit, with the largest meter lane the size allows.

    Printed numbers under cells of 46 pixels or more, a bar under smaller ones, a
    thin bar (and 2-pixel gaps) under cells below 12 pixels.
    """

    def fit(gap: int, lane: int) -> int:
        return int(min(avail_w / heads - gap, avail_h / layers - gap - lane))

    gap, lane = 3, NUMBER_LANE
    cell = fit(gap, lane)
    if cell < 46:
        lane = BAR_LANE
        cell = fit(gap, lane)
    if cell < READABLE_CELL:
        gap, lane = 2, THIN_LANE
        cell = fit(gap, lane)
    return int(np.clip(cell, 2, MAX_CELL)), gap, lane


def plan_blocks(
    avail_w: float, avail_h: float, layers: int, heads: int, aisle: int
) -> tuple[int, int, int, int]:
    """(rows, cell, gap, lane): the layers per block that give the largest cells, and those cells.

    Every way of dealing ``layers`` into blocks of ``rows`` consecutive layers, set side by
    side, is sized with :func:`fit_cells` (``blocks * heads`` columns of cells in the width
    left after ``blocks - 1`` aisles, ``rows`` rows in the height); the largest cell wins,
    and a tie goes to fewer blocks (one block when it is as good).

    Parameters
    ----------
    avail_w, avail_h : float
        Pixels for the cells: the width after the first block's layer names, the height
        after the head names.
    layers, heads : int
        The model's shape.
    aisle : int
        Pixels between two blocks (the next block's layer names and a margin).
    """
    best: tuple[int, int, int, int] | None = None
    for rows in sorted({-(-layers // blocks) for blocks in range(1, layers + 1)}, reverse=True):
        blocks = -(-layers // rows)
        cell, gap, lane = fit_cells(avail_w - (blocks - 1) * aisle, avail_h, rows, blocks * heads)
        if best is None or cell > best[1]:
            best = (rows, cell, gap, lane)
    return best


class HeadGrid(HoverView):
    """All heads at a glance: click or use the arrow keys to pick one; switch heads off and on.

    Space (or a double click) switches the selected head off or on, Shift+Space
    (or Shift + double click) its whole layer. A switched-off head is veiled and
    crossed out, with "off" written on it when the cell is large enough.
    """

    head_clicked = Signal(int, int)
    move_requested = Signal(int, int)
    hovered = Signal(int, int)
    """layer, head under the pointer; (-1, -1) when it leaves the cells."""
    toggle_requested = Signal(int, int)
    """Switch this head off (or back on)."""
    layer_toggle_requested = Signal(int)
    """Switch this whole layer off (or back on)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Head mosaic", parent)
        self.attention: np.ndarray | None = None
        """[layers, heads, m, m] as drawn."""
        self.metric_values: np.ndarray | None = None
        """[layers, heads] metric values as printed under the cells."""
        self._meter: np.ndarray | None = None
        self.windows: list[int | None] = []
        """Per layer, the local attention window (None: global); windowed layers are labelled ``L1 ±2``."""
        self._per_head = True
        self._selected = (0, 0)
        self._off: frozenset[tuple[int, int]] = frozenset()
        self._summary: Callable[[int, int], str] | None = None
        self._version = 0
        self._cache_key: tuple | None = None
        self._image: QImage | None = None
        self._heads_version = 0
        """Changes only when the drawn matrices (or their colour scale) change, not with the meters."""
        self._codes_key: tuple | None = None
        self._codes: np.ndarray | None = None
        self._offered: dict[int, tuple[np.ndarray, int, bool, np.ndarray]] = {}
        """Cells prepared in the background for other matrices: id -> (matrices, cell, per_head, codes)."""
        self.rebuilds = 0
        """How many times the mosaic image was rebuilt (for tests and the benchmark)."""
        self.overlay: np.ndarray | None = None
        """[layers, heads] non-negative change per head drawn as corner wedges (NaN: none), or None."""
        self._overlay_peak = 1.0

    # -- data --------------------------------------------------------------------------------------
    def set_data(
        self,
        attention: np.ndarray,
        metric: np.ndarray,
        metric_range: tuple[float, float],
        *,
        per_head: bool,
        summary: Callable[[int, int], str] | None = None,
        windows: list[int | None] | None = None,
    ) -> None:
        if attention is not self.attention or per_head != self._per_head:
            self._heads_version += 1
        self.attention = attention
        self.windows = list(windows or [])
        self.metric_values = metric
        lo, hi = metric_range
        self._meter = (metric - lo) / max(hi - lo, 1e-12)
        self._per_head = per_head
        self._summary = summary
        self._version += 1
        self.update()

    def clear(self, note: str = "") -> None:
        self.note = note
        self.attention = self.metric_values = self._meter = None
        self._version += 1
        self._heads_version += 1
        self.update()

    def set_overlay(self, values: np.ndarray | None, peak: float = 1.0) -> None:
        """Mark each head with a wedge in its top-right corner whose area grows with ``values / peak``.

        Used for the change of each head against a second model; NaN or 0 draws no wedge.
        """
        self.overlay = None if values is None else np.asarray(values, dtype=np.float64)
        self._overlay_peak = peak if peak > 0 else 1.0
        self.update()

    def overlay_wedges(self, geo: GridGeometry) -> list[tuple[int, int, int]]:
        """(layer, head, leg length in pixels) of every wedge drawn: area proportional to the value."""
        if self.overlay is None:
            return []
        out = []
        layers, heads = min(self.overlay.shape[0], geo.layers), min(self.overlay.shape[1], geo.heads)
        for layer in range(layers):
            for head in range(heads):
                v = self.overlay[layer, head]
                if np.isfinite(v) and v > 0:
                    share = min(v / self._overlay_peak, 1.0)
                    out.append((layer, head, max(3, int(round(np.sqrt(share) * geo.cell * 0.5)))))
        return out

    def set_selection(self, layer: int, head: int) -> None:
        if (layer, head) != self._selected:
            self._selected = (layer, head)
            self.update()

    def selection(self) -> tuple[int, int]:
        return self._selected

    def set_off(self, heads: frozenset[tuple[int, int]] | set[tuple[int, int]]) -> None:
        """Mark these heads as switched off (drawn over the cached mosaic image)."""
        heads = frozenset(heads)
        if heads != self._off:
            self._off = heads
            self.update()

    def off_heads(self) -> frozenset[tuple[int, int]]:
        return self._off

    def cell_count(self) -> int:
        return 0 if self.attention is None else int(self.attention.shape[0] * self.attention.shape[1])

    # -- layout ------------------------------------------------------------------------------------
    def sizeHint(self) -> QSize:
        return QSize(520, 420)

    def minimumSizeHint(self) -> QSize:
        return QSize(200, 160)

    def _margins(self, layers: int) -> tuple[int, int]:
        """(left, top): room for the layer names on the left and the head names on top."""
        fm = self.fontMetrics()
        names = [self.layer_label(layer) for layer in range(layers)] or [fmt.layer_name(0)]
        return max(fm.horizontalAdvance(name) for name in names) + 10, fm.height() + 4

    def layout_for(self, width: int, height: int, layers: int, heads: int) -> GridGeometry:
        """The geometry of ``layers`` x ``heads`` cells in a widget of this size (blocks chosen, centred)."""
        left, top = self._margins(layers)
        aisle = left + BLOCK_SPACE
        avail_w, avail_h = width - left - 4, height - top - 4
        rows, cell, gap, lane = plan_blocks(avail_w, avail_h, layers, heads, aisle)
        geo = GridGeometry(0, 0, cell, gap, lane, layers, heads, rows, aisle)
        used_w, used_h = geo.image_size()
        left += max((avail_w - used_w) // 2, 0)
        top += max((avail_h - used_h) // 2, 0)
        return GridGeometry(left, top, cell, gap, lane, layers, heads, rows, aisle)

    def width_for_height(self, height: int, layers: int, heads: int, max_width: int) -> int:
        """The narrowest width, up to ``max_width``, at which the cells are as large as at ``max_width``.

        A mosaic that is bound by the height in one block needs no more width than its
        cells use; one that wraps into blocks grows with the width, up to ``max_width``.
        """
        geo = self.layout_for(max_width, height, layers, heads)
        left, _top = self._margins(layers)
        # every block's cell pitches (trailing gap included) and the aisles between them
        used_w = geo.blocks * geo.block_pitch - geo.aisle
        return int(min(left + used_w + 4, max_width))

    def grid_geometry(self) -> GridGeometry | None:
        if self.attention is None:
            return None
        L, H = self.attention.shape[:2]
        return self.layout_for(self.width(), self.height(), L, H)

    def layer_label(self, layer: int) -> str:
        """``L3``, or ``L3 ±64`` for a layer that attends within a local window of 64 tokens each side."""
        window = self.windows[layer] if layer < len(self.windows) else None
        name = fmt.layer_name(layer)
        return name if window is None else f"{name} ±{window}"

    # -- drawing -----------------------------------------------------------------------------------
    def _mosaic(self, geo: GridGeometry) -> QImage:
        pal = self.palette()
        bg = pal.color(QPalette.ColorRole.Window)
        key = (self._version, geo, bg.rgba(), self._per_head)
        if key == self._cache_key and self._image is not None:
            return self._image
        track, fill = meter_colours(pal)
        rgba = mosaic_rgba(
            self.attention,
            geo,
            per_head=self._per_head,
            meter=self._meter,
            background=bg.getRgb(),
            track=_blend(track, bg),
            fill=_blend(fill, bg),
            codes=self._head_codes(geo.cell),
        )
        image = rgba_image(rgba)
        if geo.lane == NUMBER_LANE and self.metric_values is not None:
            self._print_numbers(image, geo)
        self._image, self._cache_key = image, key
        self.rebuilds += 1
        return image

    def number_texts(self) -> list[list[str]]:
        """The metric value printed under each cell, [layer][head] (when the cells are large enough)."""
        # NaN: a meter left empty on purpose (see SentencePage.metric_hidden), no number printed
        return [
            [fmt.weight(v, 2) if np.isfinite(v) else "" for v in row]
            for row in np.asarray(self.metric_values)
        ]

    def drawn_text(self) -> list[str]:
        geo = self.grid_geometry()
        if geo is None:
            return [self.placeholder()]
        ticks = [fmt.head_tick(h) for h in self.drawn_ticks(geo)] + [
            self.layer_label(l) for l in self.drawn_layer_names(geo)
        ]
        numbers = self.number_texts() if geo.lane == NUMBER_LANE and self.metric_values is not None else []
        off = ["off"] * len(self._off) if geo.cell >= 30 else []
        return ticks + [text for row in numbers for text in row if text] + off

    def _head_codes(self, cell: int) -> np.ndarray:
        """The coloured per-head cells, built once per set of matrices and cell size.

        A new meter metric, palette or selection reuses them; only new matrices (another
        sentence, the word view, special tokens hidden), another colour scale or a new cell
        size rebuild them.
        """
        key = (self._heads_version, cell)
        if key != self._codes_key or self._codes is None:
            offered = self._offered.get(id(self.attention))
            if (
                offered is not None
                and offered[0] is self.attention
                and offered[1:3] == (cell, self._per_head)
            ):
                self._codes = offered[3]
            else:
                self._codes = head_codes(self.attention, cell, per_head=self._per_head)
            self._codes_key = key
        return self._codes

    def offer_codes(self, attention: np.ndarray, cell: int, per_head: bool, codes: np.ndarray) -> None:
        """Keep :func:`head_codes` of ``attention`` built elsewhere (a worker), for when it is shown.

        Only the last few offers are kept; each holds its matrices, so the identity check stays valid.
        """
        self._offered[id(attention)] = (attention, cell, per_head, codes)
        while len(self._offered) > 4:
            self._offered.pop(next(iter(self._offered)))

    def forget_offers(self) -> None:
        """Drop cells prepared for matrices that will not be shown (a new sentence)."""
        self._offered.clear()

    def _print_numbers(self, image: QImage, geo: GridGeometry) -> None:
        p = QPainter(image)
        font = QFont(self.font())
        font.setPixelSize(10)
        p.setFont(font)
        p.setPen(self.palette().color(QPalette.ColorRole.WindowText))
        for layer, row in enumerate(self.number_texts()):
            for head, text in enumerate(row):
                r = geo.cell_rect(layer, head).translated(-geo.left, -geo.top)
                p.drawText(
                    QRect(r.x(), r.y() + geo.cell + 6, geo.cell, geo.lane - 6),
                    Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                    text,
                )
        p.end()

    def paintEvent(self, _event: object) -> None:
        geo = self.grid_geometry()
        p = self.begin_paint(geo is not None)
        if p is None:
            return
        p.drawImage(QPoint(geo.left, geo.top), self._mosaic(geo))
        self._draw_off(p, geo)
        self._draw_labels(p, geo)
        self._draw_marks(p, geo)
        p.end()

    def _draw_off(self, p: QPainter, geo: GridGeometry) -> None:
        """Veil and cross out every switched-off head (a shape, not only a colour), "off" when it fits."""
        off = [(l, h) for l, h in self._off if l < geo.layers and h < geo.heads]
        if not off:
            return
        pal = self.palette()
        veil = QColor(pal.color(QPalette.ColorRole.Window))
        veil.setAlphaF(0.62)
        ink = pal.color(QPalette.ColorRole.WindowText)
        pen = QPen(ink, 2 if geo.cell >= 24 else 1)
        font = QFont(self.font())
        font.setPixelSize(max(9, min(13, geo.cell // 4)))
        font.setBold(True)
        p.save()
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.setFont(font)
        label_w = p.fontMetrics().horizontalAdvance("off") + 6
        for layer, head in off:
            r = geo.cell_rect(layer, head)
            p.fillRect(r, veil)
            p.setPen(pen)
            inset = r.adjusted(1, 1, -1, -1)
            p.drawLine(inset.topLeft(), inset.bottomRight())
            p.drawLine(inset.topRight(), inset.bottomLeft())
            if geo.cell >= 30:
                box = QRect(r.center().x() - label_w // 2, r.center().y() - 8, label_w, 16)
                p.fillRect(box, pal.color(QPalette.ColorRole.Window))
                p.setPen(ink)
                p.drawText(box, Qt.AlignmentFlag.AlignCenter, "off")
        p.restore()

    def _tick_heads(self, geo: GridGeometry) -> list[int]:
        """The heads named on top of a block: every few heads when the cells are narrow, and the selected one."""
        sel_head = self._selected[1]
        step = max(
            1, int(np.ceil((self.fontMetrics().horizontalAdvance(fmt.head_tick(10)) + 4) / geo.pitch_x))
        )
        return [h for h in range(geo.heads) if h == sel_head or (h % step == 0 and abs(h - sel_head) >= step)]

    def drawn_ticks(self, geo: GridGeometry) -> list[int]:
        """The heads named on top of the mosaic, block after block (the same ones over every block)."""
        return self._tick_heads(geo) * geo.blocks

    def drawn_layer_names(self, geo: GridGeometry) -> list[int]:
        """The layers named left of their block: every few rows when the rows are thin, and the selected one."""
        sel_layer = self._selected[0]
        step = max(1, int(np.ceil(self.fontMetrics().height() / geo.pitch_y)))
        out = []
        for block in range(geo.blocks):
            layers = geo.block_layers(block)
            for layer in layers:
                near = sel_layer in layers and abs(layer - sel_layer) < step
                if layer == sel_layer or ((layer - layers.start) % step == 0 and not near):
                    out.append(layer)
        return out

    def _draw_labels(self, p: QPainter, geo: GridGeometry) -> None:
        pal = self.palette()
        dim = dim_text(pal)
        sel_layer, sel_head = self._selected
        sel_block = sel_layer // geo.block_rows
        bold = QFont(self.font())
        bold.setBold(True)
        fm = self.fontMetrics()
        heads = self._tick_heads(geo)
        for block in range(geo.blocks):
            for head in heads:
                r = geo.cell_rect(geo.block_layers(block).start, head)
                is_sel = head == sel_head and block == sel_block
                p.setFont(bold if is_sel else self.font())
                p.setPen(accent(pal) if is_sel else dim)
                # centred on the column, never clipped: narrow columns are named every few heads
                p.drawText(
                    QRect(r.x() - 8, 0, r.width() + 16, geo.top - 2),
                    Qt.AlignmentFlag.AlignHCenter | Qt.AlignmentFlag.AlignBottom | Qt.TextFlag.TextDontClip,
                    fmt.head_tick(head),
                )
        names_w = geo.aisle - BLOCK_SPACE - 6  # the block's layer names end 6 pixels before its cells
        for layer in self.drawn_layer_names(geo):
            r = geo.cell_rect(layer, 0)
            is_sel = layer == sel_layer
            p.setFont(bold if is_sel else self.font())
            p.setPen(accent(pal) if is_sel else dim)
            # A line-high box centred on the cell, never clipped: cells may be thinner than the text.
            p.drawText(
                QRect(r.x() - 6 - names_w, r.center().y() - fm.height() // 2, names_w, fm.height()),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter | Qt.TextFlag.TextDontClip,
                self.layer_label(layer),
            )
        p.setFont(self.font())

    def _draw_marks(self, p: QPainter, geo: GridGeometry) -> None:
        pal = self.palette()
        wedges = self.overlay_wedges(geo)
        if wedges:
            p.setPen(QPen(pal.color(QPalette.ColorRole.Window), 1))
            p.setBrush(pal.color(QPalette.ColorRole.WindowText))
            for layer, head, leg in wedges:
                r = geo.cell_rect(layer, head)
                right, top = r.x() + r.width(), r.y()
                p.drawPolygon(
                    QPolygonF([QPointF(right, top), QPointF(right - leg, top), QPointF(right, top + leg)])
                )
        if self._hover is not None and self._hover != self._selected:
            pen = QPen(pal.color(QPalette.ColorRole.WindowText), 1, Qt.PenStyle.DashLine)
            p.setPen(pen)
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawRect(geo.slot_rect(*self._hover).adjusted(-1, -1, 0, 0))
        width = 2 if geo.gap >= 3 else 1
        r = geo.slot_rect(*self._selected).adjusted(-width, -width, width - 1, width - 1)
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(
            QPen(
                accent(pal), width, Qt.PenStyle.SolidLine, Qt.PenCapStyle.SquareCap, Qt.PenJoinStyle.MiterJoin
            )
        )
        p.drawRect(r)
        if self.hasFocus():
            p.setPen(QPen(pal.color(QPalette.ColorRole.Highlight), 1, Qt.PenStyle.DotLine))
            p.drawRect(self.rect().adjusted(0, 0, -1, -1))

    # -- events ------------------------------------------------------------------------------------
    def mousePressEvent(self, event: QMouseEvent) -> None:
        hit = self.hit_at(event.position().x(), event.position().y())
        if hit is not None and event.button() == Qt.MouseButton.LeftButton:
            self.head_clicked.emit(*hit)
        super().mousePressEvent(event)

    def hit_at(self, x: float, y: float) -> tuple[int, int] | None:
        geo = self.grid_geometry()
        return geo.cell_at(int(x), int(y)) if geo else None

    def hover_text(self, hit: object) -> str:
        text = self._summary(*hit) if self._summary is not None else ""
        return text + "\nDouble-click or Space: switch off/on \u00b7 Shift: the whole layer"

    def on_hover(self, hit: object | None) -> None:
        self.hovered.emit(*(hit or (-1, -1)))

    def mouseDoubleClickEvent(self, event: QMouseEvent) -> None:
        hit = self.hit_at(event.position().x(), event.position().y())
        if hit is not None and event.button() == Qt.MouseButton.LeftButton:
            if event.modifiers() & Qt.KeyboardModifier.ShiftModifier:
                self.layer_toggle_requested.emit(hit[0])
            else:
                self.toggle_requested.emit(*hit)
            event.accept()
            return
        super().mouseDoubleClickEvent(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:
        if event.key() in (Qt.Key.Key_Space, Qt.Key.Key_Delete) and self.attention is not None:
            if event.modifiers() & Qt.KeyboardModifier.ShiftModifier:
                self.layer_toggle_requested.emit(self._selected[0])
            else:
                self.toggle_requested.emit(*self._selected)
            event.accept()
            return
        moves = {
            Qt.Key.Key_Up: (-1, 0),
            Qt.Key.Key_Down: (1, 0),
            Qt.Key.Key_Left: (0, -1),
            Qt.Key.Key_Right: (0, 1),
            Qt.Key.Key_PageUp: (-100, 0),
            Qt.Key.Key_PageDown: (100, 0),
            Qt.Key.Key_Home: (0, -100),
            Qt.Key.Key_End: (0, 100),
        }
        step = moves.get(Qt.Key(event.key()))
        if step is None or self.attention is None:
            super().keyPressEvent(event)
            return
        self.move_requested.emit(*step)
        event.accept()
