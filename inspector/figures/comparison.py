"""Exported figures of a comparison between two checkpoints (matplotlib, Agg, no pyplot state).

Two heat maps, for a labelled set (``headcount compare``, the Comparison tab) and for one sentence
(the sentence page with a second model):

* the **head change map**: B's heads, layers down and heads across, each against A's head at the
  same position;
* the **head matching map**: every head of B against every head of A, each B head's closest A head
  framed.

Both hold mean Jensen-Shannon divergences in bits, which are never negative, so both use the one
sequential map (:mod:`inspector.palette`), print the number in each cell wherever it fits, frame in
ink (the accent marks the selection only), keep every text at 7 pt or more and fit A4 and US Letter.
They are laid out in inches like the corpus figures (:mod:`inspector.figures.grids`) and written as
PNG and SVG by :func:`inspector.figures.corpus.save_figure`.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from inspector import palette
from inspector.comparison.matching import HeadMatching
from inspector.figures.grids import (
    cell_texts,
    colour_bar,
    frame_cells,
    head_grid,
    head_ticks,
    layer_lines,
    top_of,
)
from inspector.figures.paper import (
    FITS_BOTH,
    MIN_FONT,
    axes_at,
    caption_height,
    draw_caption,
    draw_heading,
    fitted_figure,
    heading_height,
    shorten,
    text_width,
)
from inspector.formatting import bits, count, head_name, layer_name, weight

SCALE_LABEL = "mean JS divergence (bits)"
BAR_ROOM = 1.15
"""Inches right of a map for its colour bar, the bar's ticks and its label."""
LEFT = 0.7
"""Inches left of the head change map for the layer names and the axis title."""
MIN_BODY = 1.6
"""Inches a map's colour bar needs at least, so its label fits beside it."""


def change_caption(matching: HeadMatching, model_a: str, model_b: str, where: str) -> str:
    """What the head change map shows, in words."""
    same = matching.same_position
    missing = int(np.isnan(same).sum())
    blank = f"; blank: {count(missing, 'position')} {model_a} does not have" if missing else ""
    return (
        f"Each cell: the head of B ({model_b}) against the head at the same layer and head of A ({model_a}), "
        f"mean Jensen-Shannon divergence between their attention rows over "
        f"{count(matching.rows_compared, 'query row')} of {where} (bits; 0 = identical, 1 = disjoint). "
        f"'=' marks {count(int(matching.unchanged.sum()), 'head')} with exactly the same weights in both{blank}. "
        f"Colour: {palette.SEQUENTIAL_TEXT}, from 0 to the largest change ({bits(top_of(same))})."
    )


def change_map_figure(matching: HeadMatching, model_a: str, model_b: str, where: str) -> Figure:
    """B's heads (layers down, heads across) shaded by their same-position change against A, in bits.

    Each cell prints its divergence with two decimals, ``=`` for a head whose weights did not change;
    positions A does not have are left blank.
    """
    same = matching.same_position
    layers, heads = same.shape
    cell = float(np.clip(6.2 / max(heads, layers * 0.8), 0.22, 0.5))
    grid_w, grid_h = cell * heads, cell * layers
    heading = f"How much each head changed: B ({model_b}) against A ({model_a})"
    caption = change_caption(matching, model_a, model_b, where)
    width = max(LEFT + grid_w + BAR_ROOM, 5.6)
    top = heading_height(heading, width)
    body = max(grid_h, MIN_BODY)
    height = top + body + 0.5 + caption_height(caption, width)
    fig = fitted_figure(width, height)
    draw_heading(fig, heading)
    ax = axes_at(fig, LEFT, top, grid_w, grid_h)
    texts = [t for row in matching.change_texts() for t in row]
    im = head_grid(ax, same, cell, texts=texts)
    ax.set_xlabel("head of B", fontsize=MIN_FONT + 1)
    colour_bar(fig, im, LEFT + grid_w + 0.15, top, body, SCALE_LABEL)
    draw_caption(fig, caption, top + body + 0.5)
    return fig


def matching_caption(matching: HeadMatching, model_a: str, model_b: str, where: str) -> str:
    """What the head matching map shows, in words."""
    best = np.argmin(matching.js, axis=1)
    moved = sum(
        1 for j, i in enumerate(best) if _position(j, matching.heads_b) != _position(i, matching.heads_a)
    )
    return (
        f"Row: a head of B ({model_b}); column: a head of A ({model_a}); each cell the mean Jensen-Shannon "
        f"divergence between their attention rows over {count(matching.rows_compared, 'query row')} of "
        f"{where} (bits). Framed: the closest A head of each B head (lowest divergence); "
        f"{count(moved, 'head')} of B {'is' if moved == 1 else 'are'} closest to an A head at another position. "
        f"Colour: {palette.SEQUENTIAL_TEXT}, from 0 (the same attention) to the largest divergence "
        f"({bits(top_of(matching.js))})."
    )


def _name_room(layers: int, heads: int, cell: float) -> float:
    """Inches the head (or layer) names and the axis title take beside a heads-by-heads axis."""
    longest = head_name(layers - 1, heads - 1) if cell * 72.0 >= 1.35 * MIN_FONT else layer_name(layers - 1)
    return 0.2 + text_width(longest, MIN_FONT) + 0.3


def matching_figure(matching: HeadMatching, model_a: str, model_b: str, where: str) -> Figure:
    """Every head of B against every head of A (mean JS, bits); each B head's closest A head is framed.

    Heads are ordered layer by layer (white lines between layers) and named one by one where the
    names fit, else by layer; the divergence is printed in each cell where it fits.
    """
    js = matching.js
    kb, ka = js.shape
    heading = "Which head of A does each head of B resemble?"
    caption = matching_caption(matching, model_a, model_b, where)
    room_guess = 0.2 + text_width(head_name(max(matching.layers_a, matching.layers_b), 99), MIN_FONT) + 0.3
    cell = min((FITS_BOTH[0] - room_guess - BAR_ROOM - 0.2) / ka, 7.2 / kb, 0.32)
    left = _name_room(matching.layers_b, matching.heads_b, cell)
    below = _name_room(matching.layers_a, matching.heads_a, cell)
    matrix_w, matrix_h = cell * ka, cell * kb
    width = max(left + matrix_w + BAR_ROOM, 5.6)
    top = heading_height(heading, width)
    body = max(matrix_h, MIN_BODY)
    height = top + body + below + caption_height(caption, width)
    fig = fitted_figure(width, height)
    draw_heading(fig, heading)
    ax = axes_at(fig, left, top, matrix_w, matrix_h)
    peak = top_of(js)
    im = ax.imshow(js, cmap=palette.sequential_map(), vmin=0.0, vmax=peak, aspect="auto")
    head_ticks(ax, "x", matching.layers_a, matching.heads_a, matrix_w)
    head_ticks(ax, "y", matching.layers_b, matching.heads_b, matrix_h)
    layer_lines(ax, matching.layers_a, matching.heads_a, matching.layers_b, matching.heads_b)
    cell_texts(ax, js, [weight(v, 2) for v in js.ravel()], cell, peak)
    frame_cells(ax, [(j, int(i)) for j, i in enumerate(np.argmin(js, axis=1))], cell)
    ax.set_xlabel(shorten(f"head of A ({model_a})", matrix_w, MIN_FONT + 1), fontsize=MIN_FONT + 1)
    ax.set_ylabel(shorten(f"head of B ({model_b})", matrix_h, MIN_FONT + 1), fontsize=MIN_FONT + 1)
    colour_bar(fig, im, left + matrix_w + 0.15, top, body, SCALE_LABEL)
    draw_caption(fig, caption, top + body + below)
    return fig


def _position(flat: int, heads: int) -> tuple[int, int]:
    return flat // heads, flat % heads
