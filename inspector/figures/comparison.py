"""Exported figures of a comparison between two checkpoints (matplotlib, Agg, no pyplot state).

Divergences are non-negative, so both maps use the one sequential map (``cividis``); numbers
are printed in the cells so no value is read from colour alone. Written as PNG and SVG by
:func:`inspector.figures.corpus.save_figure`.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from inspector.comparison.matching import HeadMatching
from inspector.figures.corpus import _caption, _figure
from inspector.figures.sentence import CMAP_NAME, _cmap
from inspector.formatting import count, head_name, layer_name

_ANNOTATE_UP_TO = 16 * 16
_MATCH_LABELS_UP_TO = 48


def _text_colour(value: float, top: float) -> str:
    return "black" if top > 0 and value > 0.6 * top else "white"


def change_map_figure(matching: HeadMatching, model_a: str, model_b: str, where: str) -> Figure:
    """B's heads (layers down, heads across) shaded by their same-position change against A, in bits.

    Unchanged heads print ``=``; positions A does not have are left blank.
    """
    same = matching.same_position
    layers, heads = same.shape
    fig = _figure(max(5.2, 0.62 * heads + 2.6), max(3.4, 0.48 * layers + 2.0))
    ax = fig.add_axes((0.1, 0.22, 0.74, 0.66))
    top = float(np.nanmax(same)) if np.isfinite(same).any() else 1.0
    im = ax.imshow(np.ma.masked_invalid(same), cmap=_cmap(), vmin=0.0, vmax=max(top, 1e-9), aspect="auto")
    ax.set_xticks(range(heads), [f"H{h}" for h in range(heads)], fontsize=8)
    ax.set_yticks(range(layers), [layer_name(l) for l in range(layers)], fontsize=8)
    ax.set_xlabel(f"head of {model_b}")
    ax.set_ylabel("layer")
    if layers * heads <= _ANNOTATE_UP_TO:
        unchanged = matching.unchanged
        for l in range(layers):
            for h in range(heads):
                v = same[l, h]
                if np.isnan(v):
                    continue
                text = "=" if unchanged[l, h] else f"{v:.2f}"
                ax.text(h, l, text, ha="center", va="center", fontsize=7, color=_text_colour(v, top))
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, label="mean JS divergence (bits)")
    ax.set_title(f"How much each head changed: {model_b} against {model_a}", fontsize=10)
    n_same = int(matching.unchanged.sum())
    _caption(
        fig,
        f"Each cell: the head's attention in {model_b} against the head at the same position in {model_a}, "
        f"mean Jensen-Shannon divergence over {count(matching.rows_compared, 'query row')} of {where} "
        f"(0 = identical, 1 = disjoint). '=' marks {count(n_same, 'head')} with exactly the same weights. "
        f"Map: {CMAP_NAME}.",
    )
    return fig


def matching_figure(matching: HeadMatching, model_a: str, model_b: str, where: str) -> Figure:
    """Every head of B against every head of A (mean JS, bits); each B head's best match is framed."""
    js = matching.js
    kb, ka = js.shape
    side_w = min(12.0, max(5.5, 0.16 * ka + 3.2))
    side_h = min(11.0, max(4.5, 0.16 * kb + 2.6))
    fig = _figure(side_w, side_h)
    ax = fig.add_axes((0.14, 0.16, 0.7, 0.74))
    im = ax.imshow(js, cmap=CMAP_NAME, vmin=0.0, vmax=max(float(js.max()), 1e-9), aspect="auto")
    if kb <= _MATCH_LABELS_UP_TO and ka <= _MATCH_LABELS_UP_TO:
        names_a = [head_name(i // matching.heads_a, i % matching.heads_a) for i in range(ka)]
        names_b = [head_name(j // matching.heads_b, j % matching.heads_b) for j in range(kb)]
        ax.set_xticks(range(ka), names_a, rotation=90, fontsize=6.5)
        ax.set_yticks(range(kb), names_b, fontsize=6.5)
    else:
        centres_a = [l * matching.heads_a + (matching.heads_a - 1) / 2 for l in range(matching.layers_a)]
        centres_b = [l * matching.heads_b + (matching.heads_b - 1) / 2 for l in range(matching.layers_b)]
        ax.set_xticks(centres_a, [layer_name(l) for l in range(matching.layers_a)], fontsize=8)
        ax.set_yticks(centres_b, [layer_name(l) for l in range(matching.layers_b)], fontsize=8)
    for l in range(1, matching.layers_a):
        ax.axvline(l * matching.heads_a - 0.5, color="white", lw=0.6)
    for l in range(1, matching.layers_b):
        ax.axhline(l * matching.heads_b - 0.5, color="white", lw=0.6)
    best = np.argmin(js, axis=1)
    for j, i in enumerate(best):
        ax.add_patch(Rectangle((i - 0.5, j - 0.5), 1, 1, fill=False, ec="black", lw=1.0))
    ax.set_xlabel(f"head of {model_a} (A)")
    ax.set_ylabel(f"head of {model_b} (B)")
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, label="mean JS divergence (bits)")
    ax.set_title("Which head of A does each head of B resemble?", fontsize=10)
    moved = sum(
        1 for j, i in enumerate(best) if _position(j, matching.heads_b) != _position(i, matching.heads_a)
    )
    _caption(
        fig,
        f"Row = a head of B, column = a head of A; framed: the closest A head (lowest divergence) of each B head. "
        f"{count(moved, 'head')} of B resemble an A head at another position most. Over "
        f"{count(matching.rows_compared, 'query row')} of {where}; dark = similar.",
    )
    return fig


def _position(flat: int, heads: int) -> tuple[int, int]:
    return flat // heads, flat % heads
