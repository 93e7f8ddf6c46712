"""Exported figures of a corpus run (matplotlib, Agg, no pyplot state).

Each ``*_figure`` function returns a ``matplotlib.figure.Figure``; the
:func:`save_figure` helper writes it as PNG and SVG through atomic writes. Using
``Figure`` objects directly (not pyplot) keeps these safe to call from a
worker thread.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from inspector import formatting as fmt
from inspector import palette
from inspector.corpus.importance import HeadImportance
from inspector.corpus.pruning import PruningResult
from inspector.corpus.redundancy import Redundancy
from inspector.corpus.run import Evaluation
from inspector.figures.files import atomic_write
from inspector.figures.grids import colour_bar, head_grid, layer_lines
from inspector.figures.paper import (
    MIN_FONT,
    axes_at,
    caption_height,
    draw_caption,
    fitted_figure,
    text_width,
    tick_step,
)

FIGURE_FORMATS: tuple[str, ...] = ("png", "svg")
_ANNOTATE_UP_TO = 20
ORDER_STYLES: tuple[tuple[str, str, str], ...] = (
    ("-", "o", palette.INK),
    ("--", "s", "#5f5f5f"),
    (":", "^", "#8a8a8a"),
)
"""(line style, marker, grey) per pruning order, as the window's pruning plot draws them."""


def _model(model: str) -> str:
    return f"Model {model}. " if model else ""


PERCENT_TICKS = FuncFormatter(lambda value, _pos: fmt.percent(value, 0))
"""Axis ticks of a fraction, written as whole percentages (``80%``)."""


def label_room(names: list[str]) -> float:
    """Inches the longest label takes at the smallest font, plus the axis title's room."""
    return min(1.7, 0.15 + max((text_width(t, MIN_FONT) for t in names), default=0.5)) + 0.25


def draw_confusion(fig: Figure, x: float, y: float, side: float, evaluation: Evaluation) -> float:
    """The confusion matrix with its labels left and below, its colour bar right; returns the y below it.

    (x, y) is the top-left corner of the matrix itself, in inches from the figure's top-left.
    """
    cm = evaluation.confusion
    n = len(evaluation.labels)
    names = list(evaluation.labels)
    ax = axes_at(fig, x, y, side, side)
    share = cm / np.maximum(cm.sum(1, keepdims=True), 1)
    cmap = palette.sequential_map()
    im = ax.imshow(share, cmap=cmap, vmin=0, vmax=1)
    step = tick_step(n, side, MIN_FONT)
    ticks = list(range(0, n, step))
    ax.set_xticks(ticks, [names[i] for i in ticks], rotation=90, fontsize=MIN_FONT)
    ax.set_yticks(ticks, [names[i] for i in ticks], fontsize=MIN_FONT)
    ax.set_xlabel("predicted label", fontsize=MIN_FONT + 1)
    ax.set_ylabel("expected label", fontsize=MIN_FONT + 1)
    cell = side / max(n, 1)
    if n <= _ANNOTATE_UP_TO and text_width(str(int(cm.max())), MIN_FONT) < 0.9 * cell:
        for i in range(n):
            for j in range(n):
                if cm[i, j]:
                    ax.text(
                        j,
                        i,
                        str(cm[i, j]),
                        ha="center",
                        va="center",
                        fontsize=MIN_FONT,
                        color=palette.text_on(cmap(float(share[i, j]))),
                    )
    bar = colour_bar(fig, im, x + side + 0.2, y, side, "share of the expected label's row")
    bar.ax.yaxis.set_major_formatter(PERCENT_TICKS)
    return y + side + label_room(names)


def confusion_caption(evaluation: Evaluation, model: str = "") -> str:
    return (
        f"{_model(model)}{fmt.count(evaluation.total, 'utterance')}. Rows: the expected label; columns: the "
        f"prediction; the number in a cell is a count of utterances; its colour ({palette.SEQUENTIAL_TEXT}) is "
        "that count's share of the row."
    )


def confusion_figure(evaluation: Evaluation, model: str = "") -> Figure:
    """Confusion matrix: rows expected labels, columns predictions; colour = share of the expected label's
    row on the sequential map, the count printed in each non-empty cell."""
    n = len(evaluation.labels)
    room = label_room(list(evaluation.labels))
    side = float(np.clip(0.34 * n + 1.0, 3.0, 8.27 - room - 1.4))
    caption = confusion_caption(evaluation, model)
    width = room + side + 1.3
    cap_h = caption_height(caption, width)
    height = 0.5 + side + room + 0.1 + cap_h
    fig = fitted_figure(width, height)
    bottom = draw_confusion(fig, room + 0.05, 0.5, side, evaluation)
    fig.text(
        0.15 / width,
        1 - 0.12 / height,
        f"Accuracy {fmt.percent(evaluation.accuracy)}   macro-F1 {fmt.percent(evaluation.macro_f1)}",
        fontsize=10,
        va="top",
        ha="left",
    )
    draw_caption(fig, caption, bottom + 0.1)
    return fig


def importance_cell(importance: HeadImportance, width: float = 6.2) -> float:
    layers, heads = importance.normalized.shape
    return float(np.clip(width / max(heads, layers * 0.8), 0.22, 0.5))


def draw_importance(fig: Figure, x: float, y: float, cell: float, importance: HeadImportance) -> float:
    """The importance grid at (x, y) with its colour bar; returns the y below it."""
    layers, heads = importance.normalized.shape
    ax = axes_at(fig, x, y, cell * heads, cell * layers)
    im = head_grid(ax, importance.normalized, cell)
    colour_bar(fig, im, x + cell * heads + 0.15, y, cell * layers, "importance")
    return y + cell * layers + 0.45


def importance_caption(importance: HeadImportance, model: str = "") -> str:
    return (
        f"{_model(model)}Michel et al. (2019) gate-gradient importance over "
        f"{fmt.count(importance.count, 'utterance')}, l2-normalised within each layer; layers and heads count "
        f"from 0. Colour: {palette.SEQUENTIAL_TEXT}, 0 to the largest head."
    )


def importance_figure(importance: HeadImportance, model: str = "") -> Figure:
    """Heat map of layer-normalised head importance [layers x heads], the value printed in each cell."""
    layers, heads = importance.normalized.shape
    cell = importance_cell(importance)
    caption = importance_caption(importance, model)
    width = 0.8 + cell * heads + 1.3
    cap_h = caption_height(caption, width)
    height = 0.55 + cell * layers + 0.55 + cap_h
    fig = fitted_figure(width, height)
    bottom = draw_importance(fig, 0.7, 0.55, cell, importance)
    fig.text(
        0.15 / width,
        1 - 0.12 / height,
        "Head importance: mean |dL/d gate| over the set",
        fontsize=10,
        va="top",
    )
    draw_caption(fig, caption, bottom + 0.05)
    return fig


def draw_similarity(fig: Figure, x: float, y: float, side: float, redundancy: Redundancy) -> float:
    """The head-by-head similarity matrix at (x, y), near-duplicates framed; returns the y below it."""
    from matplotlib.patches import Rectangle

    sim = redundancy.similarity
    k, heads = len(sim), redundancy.num_heads
    ax = axes_at(fig, x, y, side, side)
    off = sim[~np.eye(k, dtype=bool)] if k > 1 else np.ones(1)
    im = ax.imshow(sim, cmap=palette.sequential_map(), vmin=float(off.min()), vmax=1.0)
    layers = redundancy.num_layers
    step = tick_step(layers, side, MIN_FONT)
    centres = [l * heads + (heads - 1) / 2 for l in range(0, layers, step)]
    names = [fmt.layer_name(l) for l in range(0, layers, step)]
    ax.set_xticks(centres, names, fontsize=MIN_FONT)
    ax.set_yticks(centres, names, fontsize=MIN_FONT)
    layer_lines(ax, layers, heads, layers, heads)
    for group in redundancy.groups:
        for a in group:
            for b in group:
                if a != b:
                    i, j = a[0] * heads + a[1], b[0] * heads + b[1]
                    ax.add_patch(
                        Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, edgecolor=palette.INK, lw=0.8)
                    )
    colour_bar(fig, im, x + side + 0.15, y, side, "1 \u2212 mean JS divergence (bits)")
    return y + side + 0.35


def similarity_caption(redundancy: Redundancy, model: str = "") -> str:
    heads = redundancy.num_heads
    return (
        f"{_model(model)}Similarity = 1 \u2212 mean Jensen-Shannon divergence between two heads' attention rows "
        f"(bits). Within each layer block heads run {fmt.head_tick(0)}..{fmt.head_tick(heads - 1)}; framed: "
        f"near-duplicate groups (complete linkage at {fmt.bits(redundancy.threshold)}, each pair's divergence "
        "plus 2 standard errors within it); "
        f"{redundancy.rows_compared} of {fmt.count(redundancy.rows_total, 'query row')} compared. Colour: "
        f"{palette.SEQUENTIAL_TEXT}, from the least similar pair to identical."
    )


def similarity_figure(redundancy: Redundancy, model: str = "") -> Figure:
    """Head-by-head similarity ``1 - mean JS (bits)``, heads ordered layer by layer, near-duplicates framed."""
    side = 5.6
    caption = similarity_caption(redundancy, model)
    width = 0.6 + side + 1.4
    cap_h = caption_height(caption, width)
    height = 0.55 + side + 0.45 + cap_h
    fig = fitted_figure(width, height)
    bottom = draw_similarity(fig, 0.55, 0.55, side, redundancy)
    fig.text(
        0.15 / width,
        1 - 0.12 / height,
        f"Head similarity ({fmt.count(len(redundancy.groups), 'near-duplicate group')})",
        fontsize=10,
        va="top",
    )
    draw_caption(fig, caption, bottom + 0.05)
    return fig


def draw_pruning(fig: Figure, x: float, y: float, w: float, h: float, pruning: PruningResult) -> float:
    """Accuracy against the share of heads switched off at (x, y, w, h); returns the y below it."""
    ax = axes_at(fig, x, y, w, h)
    for i, curve in enumerate(pruning.curves):
        dash, marker, grey = ORDER_STYLES[i % len(ORDER_STYLES)]
        ax.plot(
            curve.fractions,
            curve.accuracy,
            ls=dash,
            marker=marker,
            ms=2.5,
            lw=1.4,
            color=grey,
            label=curve.order_name,
        )
    start = pruning.accuracy_before
    if pruning.max_drop is not None:
        ax.axhline(
            start - pruning.max_drop,
            color="0.4",
            ls="--",
            lw=0.9,
            label=f"tolerance ({fmt.points(pruning.max_drop)} below the start)",
        )
    total = len(pruning.curves[0].order)
    if pruning.accuracy_after is not None:
        ax.plot(
            [len(pruning.removed) / total],
            [pruning.accuracy_after],
            marker="*",
            ms=12,
            color=palette.ACCENT,
            ls="none",
            label=f"exported: {fmt.count(len(pruning.removed), 'head')} ({pruning.mask_order})",
        )
    ax.set_xlabel("share of heads switched off", fontsize=MIN_FONT + 1)
    ax.set_ylabel("accuracy", fontsize=MIN_FONT + 1)
    ax.xaxis.set_major_formatter(PERCENT_TICKS)
    ax.yaxis.set_major_formatter(PERCENT_TICKS)
    ax.tick_params(labelsize=MIN_FONT)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1.02)
    ax.set_xticks(np.linspace(0, 1, 6))
    ax.set_yticks(np.linspace(0, 1, 6))
    ax.grid(alpha=0.3)
    ax.legend(fontsize=MIN_FONT, loc="lower left")
    return y + h + 0.5


def pruning_caption(pruning: PruningResult, model: str = "") -> str:
    n = pruning.curves[0].utterances
    return f"{_model(model)}{pruning.caution} Heads switched off by gates on {fmt.count(n, 'utterance')}" + (
        f", measured at chosen steps ({fmt.count(pruning.passes, 'pass', 'passes')} over the set)."
        if pruning.every is None
        else f", measured every {fmt.count(pruning.every, 'head')}."
        if pruning.every > 1
        else ", one head per step."
    )


def pruning_figure(pruning: PruningResult, model: str = "") -> Figure:
    """Accuracy against the share of heads switched off, one grey line per order; the exported mask in the accent."""
    caption = pruning_caption(pruning, model)
    width = 6.8
    cap_h = caption_height(caption, width)
    height = 0.45 + 3.6 + 0.55 + cap_h
    fig = fitted_figure(width, height)
    bottom = draw_pruning(fig, 0.75, 0.45, width - 1.0, 3.6, pruning)
    fig.text(0.15 / width, 1 - 0.1 / height, "Pruning simulation (no retraining)", fontsize=10, va="top")
    draw_caption(fig, caption, bottom)
    return fig


def save_figure(fig: Figure, stem: Path) -> list[Path]:
    """Write ``stem.png`` and ``stem.svg`` atomically (the figure's own paper-fitting size); returns the paths."""
    from inspector.figures.pages import figure_bytes

    paths = []
    for kind in FIGURE_FORMATS:
        data = figure_bytes(fig, kind)
        paths.append(atomic_write(stem.with_suffix(f".{kind}"), lambda fh, d=data: fh.write(d)))
    return paths
