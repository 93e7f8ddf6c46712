"""Figures for ``headcount explain`` (matplotlib, no GUI backend, atomic writes).

One heat strip per label: rows are the relevance methods, columns the words.
Each row is scaled by its own largest magnitude (the methods have different
units), coloured on a diverging map so negative evidence stays visible, and
labelled with its Spearman rho against occlusion. With a what-if comparison the
edited sentence sits in a second column and the per-head metric change below.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np

from inspector import formatting as fmt
from inspector.errors import HeadcountError
from inspector.explanation.explain import CAUTION, RULE_NAMES, SentenceExplanation
from inspector.explanation.faithfulness import METHOD_LABELS
from inspector.explanation.whatif import WhatIfComparison
from inspector.figures.files import atomic_write
from inspector.measures.metrics import METRIC_LABELS

FIGURE_FORMATS: tuple[str, ...] = ("png", "svg", "pdf")

ROW_NAMES: dict[str, str] = {**METHOD_LABELS, "occlusion": "occlusion (p drop)"}

STRIP_CMAP = "PuOr_r"
HEADS_CMAP = "coolwarm"


def check_figure_path(path: Path) -> str:
    """Return the figure format from the file suffix, or raise a one-line error."""
    kind = Path(path).suffix.lower().lstrip(".")
    if kind not in FIGURE_FORMATS:
        raise HeadcountError(f"{path}: figure must end in .png, .svg or .pdf")
    return kind


def scale_rows(rows: np.ndarray) -> np.ndarray:
    """Divide each row by its largest absolute value (rows of zeros stay zero)."""
    rows = np.asarray(rows, dtype=np.float64)
    peak = np.abs(rows).max(-1, keepdims=True) if rows.size else np.ones((rows.shape[0], 1))
    return np.divide(rows, peak, out=np.zeros_like(rows), where=peak > 0)


def _strip(ax, ex: SentenceExplanation, label: str, *, title: str) -> object:
    ev = ex.evidence(label)
    table = ev.relevances(ex)
    names = list(table)
    grid = scale_rows(np.stack([table[n] for n in names])) if ex.words else np.zeros((len(names), 0))
    image = ax.imshow(grid, cmap=STRIP_CMAP, vmin=-1, vmax=1, aspect="auto", interpolation="nearest")
    ax.set_xticks(range(len(ex.words)), ex.words, rotation=45, ha="right", fontsize=8)
    rows = []
    for n in names:
        rho = ev.faithfulness.get(n)
        suffix = "" if n == "occlusion" else f"  rho {fmt.correlation(rho)}"
        rows.append(ROW_NAMES[n] + suffix)
    ax.set_yticks(range(len(names)), rows, fontsize=8)
    ax.set_title(title, fontsize=9, loc="left")
    return image


def _label_title(ex: SentenceExplanation, label: str, which: str) -> str:
    ev = ex.evidence(label)
    return f"{which}{label} ({'/'.join(ev.roles)}, p={fmt.percent(ev.probability)})"


def _caption(sentences: list[SentenceExplanation], width: float) -> str:
    ex = sentences[0]
    ig = ex.labels[0].integrated_gradients
    worst = max(abs(ev.integrated_gradients.completeness_error) for s in sentences for ev in s.labels)
    occ = (
        "the word removed"
        if ex.occlusion_mode == "remove"
        else f"the word replaced by {ex.occlusion_replacement}"
    )
    text = (
        f"Model {ex.model_name}. Each row is scaled to its largest magnitude; orange pushes toward the label, "
        f"purple away; the two rollout rows do not depend on the label. Integrated Gradients on word embeddings: baseline '{ig.baseline}', {ig.steps_text()}, "
        f"{RULE_NAMES[ig.rule]}, largest completeness error {fmt.number(worst, 2)} (logit units). Occlusion: drop of the label's probability with {occ}. rho: Spearman rank "
        f"correlation with occlusion over words. {CAUTION}"
    )
    return "\n".join(textwrap.wrap(text, int(width * 15)))


def explanation_figure(ex: SentenceExplanation, comparison: WhatIfComparison | None = None):
    """Build the figure (a matplotlib ``Figure``, not attached to any GUI)."""
    from matplotlib.figure import Figure

    sentences = [ex] if comparison is None else [comparison.original, comparison.edited]
    labels = [ev.label for ev in ex.labels] if comparison is None else comparison.labels
    ncols = len(sentences)
    nrows = len(labels) + (1 if comparison is not None else 0)
    widest = max(len(s.words) for s in sentences)
    width = max(7.0, (2.5 + 0.55 * widest) * ncols)
    fig = Figure(figsize=(width, 1.9 * nrows + 1.6), layout="constrained")
    grid = fig.add_gridspec(nrows, ncols)
    image = None
    for c, s in enumerate(sentences):
        which = "" if comparison is None else ("original: " if c == 0 else "edited: ")
        for r, label in enumerate(labels):
            ax = fig.add_subplot(grid[r, c])
            image = _strip(ax, s, label, title=_label_title(s, label, which))
    if image is not None:
        fig.colorbar(image, ax=fig.axes, shrink=0.6, label="relevance / row maximum")
    if comparison is not None:
        _heads_panel(fig.add_subplot(grid[nrows - 1, :]), comparison)
    headline = f'"{ex.text}" -> {ex.prediction.label}'
    if ex.expected is not None:
        headline += f" (expected {ex.expected})"
    if comparison is not None:
        headline += f'   |   edited: "{comparison.edited.text}" -> {comparison.edited.prediction.label}'
    fig.suptitle("\n".join(textwrap.wrap(headline, int(width * 11))), fontsize=10)
    fig.supxlabel(_caption(sentences, width), fontsize=7, ha="center")
    return fig


def _heads_panel(ax, cmp: WhatIfComparison) -> None:
    diff = cmp.difference
    bound = float(np.abs(diff).max()) or 1.0
    image = ax.imshow(diff, cmap=HEADS_CMAP, vmin=-bound, vmax=bound, aspect="auto", interpolation="nearest")
    ax.set_xlabel("head", fontsize=8)
    ax.set_ylabel("layer", fontsize=8)
    ax.set_xticks(range(diff.shape[1]), [fmt.head_tick(h) for h in range(diff.shape[1])])
    ax.set_yticks(range(diff.shape[0]), [fmt.layer_name(l) for l in range(diff.shape[0])])
    ax.tick_params(labelsize=7)
    for h in cmp.top_heads:
        ax.add_patch(_outline(h.head, h.layer))
    ax.set_title(
        f"change in {METRIC_LABELS[cmp.metric].lower()} per head (edited - original); "
        f"outlined: the largest {fmt.count(len(cmp.top_heads), 'change')}",
        fontsize=9,
        loc="left",
    )
    ax.figure.colorbar(image, ax=ax, shrink=0.8)


def _outline(x: int, y: int):
    from matplotlib.patches import Rectangle

    return Rectangle((x - 0.5, y - 0.5), 1, 1, fill=False, edgecolor="black", linewidth=1.5)


def save_explanation_figure(
    path: Path, ex: SentenceExplanation, comparison: WhatIfComparison | None = None
) -> Path:
    """Render :func:`explanation_figure` to ``path`` (.png, .svg or .pdf), atomically."""
    kind = check_figure_path(path)
    fig = explanation_figure(ex, comparison)
    return atomic_write(Path(path), lambda fh: fig.savefig(fh, format=kind, dpi=130))
