"""Heat maps of heads on paper: a layers x heads grid with its numbers, a heads x heads matrix cut into
layer blocks, and the colour bar beside either.

Shared by the corpus figures (importance, similarity) and the comparison figures (head change,
head matching). They hold non-negative quantities, so they use the one sequential map
(:func:`inspector.palette.sequential_map`; NaN cells stay blank), print the number in each cell
wherever it fits at :data:`inspector.figures.paper.MIN_FONT`, and frame cells in ink with a white
halo, never in the accent (the accent is the selection's only).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from inspector import formatting as fmt
from inspector import palette
from inspector.figures.paper import MIN_FONT, axes_at, text_width, tick_step

TICK_PITCH = 1.35
"""Line pitch of tick labels, in font sizes (see :func:`inspector.figures.paper.tick_step`)."""


def colour_bar(fig: Figure, image, x: float, y: float, h: float, label: str):
    """A colour bar at (x, y) inches from the top-left, ``h`` inches tall, ticks at the smallest font."""
    cax = axes_at(fig, x, y, 0.14, h)
    bar = fig.colorbar(image, cax=cax)
    bar.set_label(label, fontsize=MIN_FONT + 0.5)
    bar.ax.tick_params(labelsize=MIN_FONT)
    return bar


def top_of(values: np.ndarray) -> float:
    """The largest finite value (the top of the colour scale), or 1 when there is none above 0."""
    finite = values[np.isfinite(values)]
    top = float(finite.max()) if finite.size else 0.0
    return top if top > 0 else 1.0


def cell_texts(ax, values: np.ndarray, texts: Sequence[str], cell: float, top: float) -> bool:
    """Print ``texts`` (row-major, one per cell) in the cells of ``ax`` when every one fits ``cell`` inches.

    Each number is black or white, whichever reads on its cell's shade. Returns whether they were printed.
    """
    rows, cols = values.shape
    if not texts or max(text_width(t, MIN_FONT) for t in texts) >= 0.92 * cell:
        return False
    if cell * 72.0 < TICK_PITCH * MIN_FONT:
        return False
    cmap = palette.sequential_map()
    for r in range(rows):
        for c in range(cols):
            text, v = texts[r * cols + c], float(values[r, c])
            if not text or not np.isfinite(v):
                continue
            colour = palette.text_on(cmap(v / top))
            ax.text(c, r, text, ha="center", va="center", fontsize=MIN_FONT, color=colour)
    return True


def head_grid(
    ax, values: np.ndarray, cell: float, *, decimals: int = 2, texts: Sequence[str] | None = None
) -> object:
    """A [layers, heads] grid on the sequential map from 0 to its largest value, named ``L0..`` / ``H0..``.

    ``texts`` (row-major) are printed in the cells when they all fit; by default each value with
    ``decimals`` decimals (:func:`inspector.formatting.weight`), nothing for NaN. Returns the image.
    """
    layers, heads = values.shape
    top = top_of(values)
    im = ax.imshow(values, cmap=palette.sequential_map(), aspect="auto", vmin=0.0, vmax=top)
    xs = tick_step(heads, cell * heads, MIN_FONT, pitch=2.4)
    ys = tick_step(layers, cell * layers, MIN_FONT)
    ax.set_xticks(range(0, heads, xs), [fmt.head_tick(h) for h in range(0, heads, xs)], fontsize=MIN_FONT)
    ax.set_yticks(range(0, layers, ys), [fmt.layer_name(l) for l in range(0, layers, ys)], fontsize=MIN_FONT)
    ax.set_xlabel("head", fontsize=MIN_FONT + 1)
    ax.set_ylabel("layer", fontsize=MIN_FONT + 1)
    if texts is None:
        texts = ["" if np.isnan(v) else fmt.weight(v, decimals) for v in values.ravel()]
    cell_texts(ax, values, texts, cell, top)
    return im


def head_ticks(ax, axis: str, layers: int, heads: int, length: float) -> None:
    """Name the heads along ``axis`` ('x' or 'y') of a heads-by-heads matrix ``length`` inches long.

    Every head (``L2H3``) when the names fit at the smallest font, else the layers at their blocks'
    centres (every k-th layer when even those would touch).
    """
    count = layers * heads
    name_fits = length / max(count, 1) * 72.0 >= TICK_PITCH * MIN_FONT
    if name_fits:
        ticks = list(range(count))
        names = [fmt.head_name(i // heads, i % heads) for i in ticks]
    else:
        step = tick_step(layers, length, MIN_FONT)
        ticks = [l * heads + (heads - 1) / 2 for l in range(0, layers, step)]
        names = [fmt.layer_name(l) for l in range(0, layers, step)]
    if axis == "x":
        ax.set_xticks(ticks, names, fontsize=MIN_FONT, rotation=90 if name_fits else 0)
    else:
        ax.set_yticks(ticks, names, fontsize=MIN_FONT)


def layer_lines(ax, layers_x: int, heads_x: int, layers_y: int, heads_y: int) -> None:
    """White lines between the layer blocks of a heads-by-heads matrix."""
    for l in range(1, layers_x):
        ax.axvline(l * heads_x - 0.5, color="white", lw=0.6)
    for l in range(1, layers_y):
        ax.axhline(l * heads_y - 0.5, color="white", lw=0.6)


def frame_cells(ax, cells: Iterable[tuple[int, int]], cell: float) -> None:
    """Frame each (row, column) cell in ink over a white halo, so the frame shows on any shade."""
    lw = 1.0 if cell >= 0.12 else 0.6
    for r, c in cells:
        for colour, width in (("white", lw + 1.0), (palette.INK, lw)):
            ax.add_patch(Rectangle((c - 0.5, r - 0.5), 1, 1, fill=False, edgecolor=colour, lw=width))
