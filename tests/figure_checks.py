"""Checks of a drawn matplotlib figure as a reader of the printed page would see it (test helper).

- :func:`text_overlaps`: every pair of visible, non-empty text artists whose
  boxes overlap (two labels printed on top of each other);
- :func:`small_fonts`: text below the minimum size at print size;
- :func:`outside`: text that runs off the figure's edge;
- :func:`maps_used`: the colour maps of every image, mesh and colour bar.

The figure is drawn at 72 dpi so one display unit is one point at print size.
"""

from __future__ import annotations

from itertools import combinations

from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.cm import ScalarMappable
from matplotlib.text import Text

TOLERANCE = 0.6
"""Points two boxes may share before they count as overlapping (anti-aliasing and rounding)."""


def drawn_texts(fig) -> list[tuple[Text, object]]:
    """(text artist, its box in points) for every visible, non-empty text after drawing (drawn once per
    figure: the result is kept on the figure)."""
    cached = getattr(fig, "_headcount_drawn_texts", None)
    if cached is not None:
        return cached
    fig.set_dpi(72)
    canvas = (
        FigureCanvasAgg(fig) if fig.canvas is None or not hasattr(fig.canvas, "get_renderer") else fig.canvas
    )
    canvas.draw()
    renderer = canvas.get_renderer()
    hidden = _undrawn_tick_labels(fig)
    out = []
    for t in fig.findobj(Text):
        if not t.get_visible() or not t.get_text().strip() or id(t) in hidden:
            continue
        axes = t.axes
        if axes is not None and not axes.get_visible():
            continue
        box = t.get_window_extent(renderer)
        if box.width <= 0 or box.height <= 0:
            continue
        out.append((t, box))
    fig._headcount_drawn_texts = out
    return out


def _undrawn_tick_labels(fig) -> set[int]:
    """Ids of tick labels that exist but are not drawn (their tick lies outside the axis' view limits).

    Uses the axis' own choice of ticks to draw (``Axis._update_ticks``, matplotlib internals).
    """
    hidden: set[int] = set()
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            ticks = axis.get_major_ticks() + axis.get_minor_ticks()
            drawn = {id(t) for t in axis._update_ticks()} if ax.axison and axis.get_visible() else set()
            for tick in ticks:
                if id(tick) not in drawn:
                    hidden.update({id(tick.label1), id(tick.label2)})
    return hidden


def text_overlaps(fig) -> list[str]:
    """One message per pair of text boxes that overlap by more than :data:`TOLERANCE` points both ways."""
    items = drawn_texts(fig)
    found = []
    for (a, ba), (b, bb) in combinations(items, 2):
        dx = min(ba.x1, bb.x1) - max(ba.x0, bb.x0)
        dy = min(ba.y1, bb.y1) - max(ba.y0, bb.y0)
        if dx > TOLERANCE and dy > TOLERANCE:
            found.append(f"{a.get_text()!r} overlaps {b.get_text()!r} ({dx:.1f} x {dy:.1f} pt)")
    return found


def small_fonts(fig, minimum: float) -> list[str]:
    return [
        f"{t.get_text()!r} at {t.get_fontsize():.1f} pt"
        for t, _ in drawn_texts(fig)
        if t.get_fontsize() < minimum - 1e-9
    ]


def outside(fig) -> list[str]:
    """Text whose box leaves the figure (by more than one point)."""
    w, h = fig.get_size_inches() * 72
    return [
        f"{t.get_text()!r} leaves the page"
        for t, b in drawn_texts(fig)
        if b.x0 < -1 or b.y0 < -1 or b.x1 > w + 1 or b.y1 > h + 1
    ]


def maps_used(fig) -> set[str]:
    """Names of the colour maps of every image, mesh, scatter and colour bar in ``fig``."""
    return {
        a.get_cmap().name
        for a in fig.findobj(lambda x: isinstance(x, ScalarMappable))
        if a.get_array() is not None
    }
