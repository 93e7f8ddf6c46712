"""Exported figures of a corpus run (matplotlib, Agg, no pyplot state).

Each ``*_figure`` function returns a ``matplotlib.figure.Figure``; the
:func:`save_figure` helper writes it as PNG and SVG through atomic writes. Using
``Figure`` objects directly (not pyplot) keeps these safe to call from a
worker thread.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from inspector import formatting as fmt
from inspector.corpus.importance import HeadImportance
from inspector.corpus.pruning import PruningResult
from inspector.corpus.redundancy import Redundancy
from inspector.corpus.run import Evaluation
from inspector.figures.files import atomic_write

FIGURE_FORMATS: tuple[str, ...] = ("png", "svg")
_CMAP_COUNTS = "Blues"
_CMAP_HEADS = "viridis"
_CMAP_SIMILARITY = "magma"
_ANNOTATE_UP_TO = 20


def _figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), dpi=110)
    FigureCanvasAgg(fig)
    return fig


def _caption(fig: Figure, text: str) -> None:
    fig.text(0.01, 0.01, text, fontsize=7.5, ha="left", va="bottom", wrap=True, color="0.25")


PERCENT_TICKS = FuncFormatter(lambda value, _pos: fmt.percent(value, 0))
"""Axis ticks of a fraction, written as whole percentages (``80%``)."""


def confusion_figure(evaluation: Evaluation) -> Figure:
    """Confusion matrix: rows gold labels, columns predictions; colour = share of the gold row."""
    cm = evaluation.confusion
    n = len(evaluation.labels)
    side = max(4.5, 0.45 * n + 2.5)
    fig = _figure(side + 1.0, side)
    ax = fig.add_axes((0.28, 0.26, 0.62, 0.66))
    share = cm / np.maximum(cm.sum(1, keepdims=True), 1)
    im = ax.imshow(share, cmap=_CMAP_COUNTS, vmin=0, vmax=1)
    ax.set_xticks(range(n), evaluation.labels, rotation=60, ha="right", fontsize=8)
    ax.set_yticks(range(n), evaluation.labels, fontsize=8)
    ax.set_xlabel("predicted intent")
    ax.set_ylabel("gold intent")
    if n <= _ANNOTATE_UP_TO:
        for i in range(n):
            for j in range(n):
                if cm[i, j]:
                    ax.text(
                        j,
                        i,
                        str(cm[i, j]),
                        ha="center",
                        va="center",
                        fontsize=7,
                        color="white" if share[i, j] > 0.5 else "black",
                    )
    bar = fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, label="share of the gold row")
    bar.ax.yaxis.set_major_formatter(PERCENT_TICKS)
    ax.set_title(
        f"Accuracy {fmt.percent(evaluation.accuracy)}   macro-F1 {fmt.percent(evaluation.macro_f1)}",
        fontsize=10,
    )
    _caption(fig, f"{fmt.count(evaluation.total, 'utterance')}; numbers are counts.")
    return fig


def _head_grid(ax, values: np.ndarray, decimals: int, cmap: str) -> object:
    layers, heads = values.shape
    im = ax.imshow(values, cmap=cmap, aspect="auto")
    ax.set_xticks(range(heads), [fmt.head_tick(h) for h in range(heads)])
    ax.set_yticks(range(layers), [fmt.layer_name(l) for l in range(layers)])
    ax.set_xlabel("head")
    ax.set_ylabel("layer")
    if layers * heads <= 16 * 16:
        top = np.nanmax(values) if values.size else 0
        for l in range(layers):
            for h in range(heads):
                ax.text(
                    h,
                    l,
                    fmt.weight(values[l, h], decimals),
                    ha="center",
                    va="center",
                    fontsize=7,
                    color="black" if values[l, h] > 0.6 * top else "white",
                )
    return im


def importance_figure(importance: HeadImportance) -> Figure:
    """Heat map of layer-normalised head importance [layers x heads]."""
    layers, heads = importance.normalized.shape
    fig = _figure(max(5.0, 0.55 * heads + 2.5), max(3.2, 0.45 * layers + 1.8))
    ax = fig.add_axes((0.1, 0.2, 0.75, 0.7))
    im = _head_grid(ax, importance.normalized, 2, _CMAP_HEADS)
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, label="importance (l2-normalised per layer)")
    ax.set_title("Head importance: mean |dL/d gate| over the set", fontsize=10)
    _caption(
        fig,
        f"Michel et al. (2019) gate-gradient importance, {fmt.count(importance.count, 'utterance')}; "
        "layers and heads count from 0.",
    )
    return fig


def similarity_figure(redundancy: Redundancy) -> Figure:
    """Head-by-head similarity ``1 - mean JS (bits)``, heads ordered layer by layer."""
    sim = redundancy.similarity
    k, heads = len(sim), redundancy.num_heads
    side = min(11.0, max(5.0, 0.09 * k + 3.0))
    fig = _figure(side + 1.2, side)
    ax = fig.add_axes((0.1, 0.12, 0.75, 0.8))
    off = sim[~np.eye(k, dtype=bool)] if k > 1 else np.ones(1)
    im = ax.imshow(sim, cmap=_CMAP_SIMILARITY, vmin=float(off.min()), vmax=1.0)
    centres = [l * heads + (heads - 1) / 2 for l in range(redundancy.num_layers)]
    names = [fmt.layer_name(l) for l in range(redundancy.num_layers)]
    ax.set_xticks(centres, names)
    ax.set_yticks(centres, names)
    for l in range(1, redundancy.num_layers):
        ax.axhline(l * heads - 0.5, color="white", lw=0.6)
        ax.axvline(l * heads - 0.5, color="white", lw=0.6)
    fig.colorbar(im, ax=ax, fraction=0.046, pad=0.03, label="1 - mean Jensen-Shannon divergence (bits)")
    ax.set_title(
        f"Head similarity ({fmt.count(len(redundancy.groups), 'near-duplicate group')})", fontsize=10
    )
    _caption(
        fig,
        f"Within each layer block heads run {fmt.head_tick(0)}..{fmt.head_tick(heads - 1)}. Groups: complete "
        f"linkage at {fmt.bits(redundancy.threshold)} (divergence + 2 standard errors); "
        f"{redundancy.rows_compared} of {fmt.count(redundancy.rows_total, 'query row')} compared.",
    )
    return fig


def pruning_figure(pruning: PruningResult) -> Figure:
    """Accuracy against the fraction of heads switched off, one line per order."""
    fig = _figure(6.8, 4.6)
    ax = fig.add_axes((0.11, 0.24, 0.85, 0.66))
    for curve in pruning.curves:
        ax.plot(curve.fractions, curve.accuracy, marker="o", ms=2.5, lw=1.4, label=curve.order_name)
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
            color="crimson",
            ls="none",
            label=f"exported: {fmt.count(len(pruning.removed), 'head')} ({pruning.mask_order})",
        )
    ax.set_xlabel("share of heads switched off")
    ax.set_ylabel("accuracy")
    ax.xaxis.set_major_formatter(PERCENT_TICKS)
    ax.yaxis.set_major_formatter(PERCENT_TICKS)
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1.02)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="lower left")
    ax.set_title("Pruning simulation (no retraining)", fontsize=10)
    n = pruning.curves[0].utterances
    _caption(
        fig,
        f"{pruning.caution} Heads switched off by gates on {fmt.count(n, 'utterance')}"
        + (
            f", measured every {fmt.count(pruning.every, 'head')}."
            if pruning.every > 1
            else ", one head per step."
        ),
    )
    return fig


def save_figure(fig: Figure, stem: Path) -> list[Path]:
    """Write ``stem.png`` and ``stem.svg`` atomically; returns the paths."""
    paths = []
    for kind in FIGURE_FORMATS:
        buf = io.BytesIO()
        fig.savefig(buf, format=kind, bbox_inches="tight", pad_inches=0.15)
        data = buf.getvalue()
        paths.append(atomic_write(stem.with_suffix(f".{kind}"), lambda fh, d=data: fh.write(d)))
    return paths
