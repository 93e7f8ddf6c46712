"""Publication figures of the sentence views, drawn with matplotlib (no Qt).

Every figure carries a caption (model, sentence, view, layer/head, metric,
colour scale) and is written atomically as PNG, SVG or PDF, with the numbers
behind it as a CSV file beside it (same name, ``.csv``). Weights use the same
perceptually uniform, colour-blind-safe sequential map as the window and the
selection is marked with the same vermilion accent, both from
:mod:`inspector.palette`.

The figures are built on ``matplotlib.figure.Figure`` objects directly (never
pyplot), so they can be rendered off the GUI thread without touching global
figure state.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib import rc_context
from matplotlib.figure import Figure
from matplotlib.patches import PathPatch, Rectangle
from matplotlib.path import Path as MplPath

from inspector import formatting as fmt
from inspector import palette
from inspector.errors import HeadcountError
from inspector.figures.files import atomic_write, save_csv

CMAP_NAME = palette.SEQUENTIAL
ACCENT = palette.ACCENT
FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
PNG_DPI = 220
CAUTION = (
    "Attention shows where a head looked, not why the model decided "
    "(Jain & Wallace 2019; Wiegreffe & Pinter 2019)."
)

Table = tuple[list[str], list[list[object]]]


@dataclass(frozen=True)
class Caption:
    """What a figure shows, printed under it."""

    model: str
    sentence: str
    view: str
    where: str
    metric: str = ""
    scale: str = ""

    def lines(self, width: int = 110) -> list[str]:
        parts = [
            f"Model: {self.model}.  View: {self.view} ({self.where}).",
            f"Sentence: \u201c{self.sentence}\u201d",
        ]
        if self.metric:
            parts.append(f"Metric: {self.metric}.")
        if self.scale:
            parts.append(f"Colour: {CMAP_NAME}, {self.scale}.")
        out: list[str] = []
        for part in parts:
            out += textwrap.wrap(part, width) or [""]
        return out

    def text(self, width: int = 110) -> str:
        return "\n".join(self.lines(width))


# -- layout helpers --------------------------------------------------------------------------------
_CAPTION_LINE_IN = 0.17


def _figure(
    width: float, body_height: float, caption: Caption, extra_lines: Sequence[str] = ()
) -> tuple[Figure, float]:
    """A figure with room for the caption below; returns it and the caption's height as a figure fraction."""
    chars = max(int(width * 16), 40)
    lines = caption.lines(chars) + list(extra_lines)
    cap_h = 0.12 + _CAPTION_LINE_IN * len(lines)
    fig = Figure(figsize=(width, body_height + cap_h))
    frac = cap_h / (body_height + cap_h)
    fig.text(
        0.015,
        frac - 0.04 / (body_height + cap_h),
        "\n".join(lines),
        ha="left",
        va="top",
        fontsize=7.5,
        linespacing=1.35,
    )
    return fig, frac


def _tick_step(count: int, limit: int) -> int:
    return max(1, int(np.ceil(count / limit)))


def _cmap():
    return palette.sequential_map()


# -- drawing into axes -----------------------------------------------------------------------------
def draw_matrix(
    ax, matrix: np.ndarray, labels: Sequence[str], *, query: int | None = None, fontsize: float = 8
):
    """Heatmap of one [m, m] matrix with token labels; returns the image for a colour bar."""
    m = matrix.shape[0]
    image = ax.imshow(
        matrix, cmap=_cmap(), vmin=0.0, vmax=max(float(matrix.max()), 1e-12), interpolation="nearest"
    )
    step = _tick_step(m, 64)
    ticks = np.arange(0, m, step)
    ax.set_yticks(ticks, [labels[i] for i in ticks], fontsize=fontsize)
    ax.set_xticks(ticks, [labels[i] for i in ticks], fontsize=fontsize, rotation=90)
    ax.xaxis.tick_top()
    ax.set_ylabel("query token", fontsize=fontsize + 1)
    ax.set_xlabel("key token", fontsize=fontsize + 1)
    ax.xaxis.set_label_position("top")
    ax.tick_params(length=2, pad=2)
    if query is not None:
        ax.add_patch(Rectangle((-0.5, query - 0.5), m, 1, fill=False, edgecolor=ACCENT, linewidth=1.4))
    return image


def mosaic_array(attention: np.ndarray, per_head: bool) -> tuple[np.ndarray, int, int]:
    """All heads in one array with NaN gaps; returns (array, cell pitch x, cell pitch y)."""
    L, H, m, _ = attention.shape
    gap = max(1, int(round(m * 0.12)))
    lane = max(2, int(round(m * 0.45)))
    vmax = attention.max(axis=(-2, -1))[..., None, None] if per_head else 1.0
    scaled = attention / np.maximum(vmax, 1e-12)
    out = np.full((L, m + lane + gap, H, m + gap), np.nan)
    out[:, :m, :, :m] = scaled.transpose(0, 2, 1, 3)
    return out.reshape(L * (m + lane + gap), H * (m + gap)), m + gap, m + lane + gap


def draw_mosaic(
    ax,
    attention: np.ndarray,
    metric: np.ndarray,
    *,
    per_head: bool,
    selected: tuple[int, int] | None = None,
    fontsize: float = 7,
):
    """Every head as a small heatmap with its metric value printed under it."""
    L, H, m, _ = attention.shape
    array, px, py = mosaic_array(attention, per_head)
    image = ax.imshow(array, cmap=_cmap(), vmin=0.0, vmax=1.0, interpolation="nearest", aspect="equal")
    number_size = float(np.clip(fontsize * 10 / max(H, 10), 3.2, fontsize))
    for layer in range(L):
        for head in range(H):
            ax.text(
                head * px + m - 0.5,
                layer * py + m + (py - m) * 0.42 - 0.5,
                fmt.weight(metric[layer, head], 2),
                ha="right",
                va="center",
                fontsize=number_size,
                color="#333333",
            )
    ax.set_xticks(np.arange(H) * px + m / 2 - 0.5, [fmt.head_tick(h) for h in range(H)], fontsize=fontsize)
    ax.set_yticks(np.arange(L) * py + m / 2 - 0.5, [fmt.layer_name(l) for l in range(L)], fontsize=fontsize)
    ax.xaxis.tick_top()
    ax.tick_params(length=0, pad=2)
    for spine in ax.spines.values():
        spine.set_visible(False)
    if selected is not None:
        layer, head = selected
        ax.add_patch(
            Rectangle(
                (head * px - 1.0, layer * py - 1.0),
                m + 1.0,
                py - 1.0,
                fill=False,
                edgecolor=ACCENT,
                linewidth=1.5,
            )
        )
    return image


def chip_layout(labels: Sequence[str], width_chars: float) -> list[tuple[float, int, float]]:
    """(x, line, width) of each word chip, in character units, wrapped at ``width_chars``."""
    out, x, line = [], 0.0, 0
    for label in labels:
        w = len(label) + 1.6
        if x + w > width_chars and x > 0:
            x, line = 0.0, line + 1
        out.append((x, line, w))
        x += w + 0.6
    return out


def draw_relevance(
    ax,
    values: np.ndarray,
    labels: Sequence[str],
    *,
    width_chars: float,
    fontsize: float = 9,
    min_lines: int = 1,
):
    """The sentence as wrapped chips coloured by relevance, value printed under each chip."""
    cmap = _cmap()
    vmax = max(float(values.max()), 1e-12) if values.size else 1.0
    layout = chip_layout(labels, width_chars)
    lines = (layout[-1][1] + 1) if layout else 1
    for (x, line, w), label, value in zip(layout, labels, values):
        colour = cmap(float(value) / vmax)
        lum = 0.2126 * colour[0] ** 2.2 + 0.7152 * colour[1] ** 2.2 + 0.0722 * colour[2] ** 2.2
        y = -line * 1.9
        ax.add_patch(Rectangle((x, y - 0.6), w, 1.2, facecolor=colour, edgecolor="#999999", linewidth=0.4))
        ax.text(
            x + w / 2,
            y,
            label,
            ha="center",
            va="center",
            fontsize=fontsize,
            color="#111111" if lum > 0.22 else "white",
        )
        ax.text(
            x + w / 2,
            y - 0.85,
            fmt.weight(value),
            ha="center",
            va="center",
            fontsize=fontsize * 0.62,
            color="#444444",
        )
    ax.set_xlim(-0.3, width_chars + 0.3)
    ax.set_ylim(-(max(lines, min_lines) - 1) * 1.9 - 1.2, 0.8)
    ax.set_aspect("auto")
    ax.axis("off")
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    return ScalarMappable(norm=Normalize(0.0, vmax), cmap=cmap)


def draw_arcs(
    ax,
    matrix: np.ndarray,
    labels: Sequence[str],
    links: Sequence[tuple[int, int, float]],
    *,
    query: int | None,
    fontsize: float = 9,
) -> None:
    """Tokens on one line in reading order; arcs above look back, arcs below look ahead."""
    widths = [len(t) + 2.0 for t in labels]
    centres = np.cumsum([0.0] + [w + 0.6 for w in widths[:-1]]) + np.array(widths) / 2
    total = float(centres[-1] + widths[-1] / 2) if labels else 1.0
    for i, (c, w, label) in enumerate(zip(centres, widths, labels)):
        is_q = query is not None and i == query
        ax.add_patch(
            Rectangle(
                (c - w / 2, -0.45),
                w,
                0.9,
                facecolor="white",
                edgecolor=ACCENT if is_q else "#888888",
                linewidth=1.4 if is_q else 0.5,
            )
        )
        ax.text(
            c, 0, label, ha="center", va="center", fontsize=fontsize, fontweight="bold" if is_q else "normal"
        )
    wmax = max((w for _, _, w in links), default=1.0)
    widest = max((abs(centres[q] - centres[k]) for q, k, _ in links), default=1.0) or 1.0
    for q, k, w in sorted(links, key=lambda t: t[2]):
        sign = 1.0 if k < q else -1.0
        base = 0.45 * sign
        rise = sign * (0.8 + 3.2 * abs(centres[q] - centres[k]) / widest)
        verts = [(centres[q], base), (centres[q], base + rise), (centres[k], base + rise), (centres[k], base)]
        codes = [MplPath.MOVETO, MplPath.CURVE4, MplPath.CURVE4, MplPath.CURVE4]
        alpha = 0.25 + 0.75 * w / wmax
        ax.add_patch(
            PathPatch(
                MplPath(verts, codes), fill=False, edgecolor=(0.15, 0.15, 0.2, alpha), linewidth=0.5 + 5 * w
            )
        )
        ax.plot([centres[k]], [base], "o", color=(0.15, 0.15, 0.2, alpha), markersize=2 + 3 * w)
    ax.set_xlim(-0.5, total + 0.5)
    ax.set_ylim(-4.8, 4.8)
    ax.axis("off")
    ax.text(0, 4.6, "above the line: looks back", fontsize=fontsize * 0.75, color="#555555", va="top")
    ax.text(0, -4.6, "below the line: looks ahead", fontsize=fontsize * 0.75, color="#555555", va="bottom")


def _colour_bar(fig: Figure, image, ax, label: str, *, fraction: float, pad: float) -> None:
    bar = fig.colorbar(image, ax=ax, fraction=fraction, pad=pad)
    bar.set_label(label, fontsize=8)
    bar.ax.tick_params(labelsize=7)


# -- whole figures ---------------------------------------------------------------------------------
def matrix_figure(
    matrix: np.ndarray,
    labels: Sequence[str],
    caption: Caption,
    *,
    query: int | None = None,
    value_label: str = "weight",
) -> Figure:
    m = matrix.shape[0]
    side = float(np.clip(0.16 * m + 2.2, 4.0, 9.0))
    fig, cap = _figure(side + 1.0, side, caption)
    ax = fig.add_axes((0.2, cap + 0.03, 0.62, 0.75 * (1 - cap)))
    image = draw_matrix(ax, matrix, labels, query=query, fontsize=float(np.clip(11 - m / 8, 5, 9)))
    _colour_bar(fig, image, ax, value_label, fraction=0.04, pad=0.03)
    return fig


def mosaic_figure(
    attention: np.ndarray,
    metric: np.ndarray,
    caption: Caption,
    *,
    per_head: bool,
    selected: tuple[int, int] | None = None,
) -> Figure:
    L, H = attention.shape[:2]
    width = float(np.clip(0.62 * H + 1.8, 5.0, 11.5))
    body = width * (L * 1.33) / (H + 1.8) + 0.4
    fig, cap = _figure(width, body, caption)
    ax = fig.add_axes((0.07, cap + 0.02, 0.8, (1 - cap) * 0.92))
    image = draw_mosaic(ax, attention, metric, per_head=per_head, selected=selected)
    label = "weight / head's largest weight" if per_head else "attention weight"
    _colour_bar(fig, image, ax, label, fraction=0.03, pad=0.02)
    return fig


def arcs_figure(
    matrix: np.ndarray,
    labels: Sequence[str],
    links: Sequence[tuple[int, int, float]],
    caption: Caption,
    *,
    query: int | None,
) -> Figure:
    width = float(np.clip(sum(len(t) + 2.6 for t in labels) * 0.075 + 0.6, 5.0, 16.0))
    fig, cap = _figure(width, 3.2, caption, ["Line width and darkness grow with the weight."])
    ax = fig.add_axes((0.02, cap + 0.02, 0.96, (1 - cap) * 0.96))
    draw_arcs(
        ax, matrix, labels, links, query=query, fontsize=float(np.clip(120 / max(len(labels), 1), 5, 9))
    )
    return fig


def chars_across(width_in: float, fontsize: float) -> float:
    """How many average characters of ``fontsize`` points fit in ``width_in`` inches (approximate)."""
    return width_in * 72.0 / (0.6 * fontsize)


def relevance_figure(values: np.ndarray, labels: Sequence[str], caption: Caption) -> Figure:
    width, fontsize = 8.0, 9.0
    ax_w = width - 0.4
    chars = chars_across(ax_w, fontsize)
    lines = chip_layout(labels, chars)[-1][1] + 1 if labels else 1
    chips_h, bar_band = 0.42 * lines + 0.1, 0.6
    body = chips_h + bar_band
    fig, cap = _figure(width, body, caption)
    total = fig.get_figheight()
    ax = fig.add_axes((0.2 / width, (total - chips_h - 0.05) / total, ax_w / width, chips_h / total))
    mappable = draw_relevance(ax, values, labels, width_chars=chars, fontsize=fontsize)
    cax = fig.add_axes((0.3, (total - body + 0.3) / total, 0.4, 0.09 / total))
    fig.colorbar(mappable, cax=cax, orientation="horizontal")
    cax.tick_params(labelsize=6)
    cax.set_title("relevance", fontsize=7, pad=2)
    return fig


def sheet_figure(
    attention: np.ndarray,
    metric: np.ndarray,
    matrix: np.ndarray,
    matrix_labels: Sequence[str],
    relevance: np.ndarray | None,
    relevance_labels: Sequence[str],
    caption: Caption,
    *,
    per_head: bool,
    selected: tuple[int, int],
    focus_title: str,
    relevance_title: str,
    query: int | None = None,
) -> Figure:
    """One A4 landscape page: head mosaic, close-up and relevance band, with the caption and caution."""
    fig, cap = _figure(11.69, 8.27 - 1.0, caption, [CAUTION])
    fig.set_size_inches(11.69, 8.27)
    top = 0.88
    fig.text(0.05, 0.965, "Head mosaic", fontsize=11, va="top")
    fig.text(0.545, 0.965, focus_title, fontsize=11, va="top")
    gs = fig.add_gridspec(
        2,
        2,
        left=0.05,
        right=0.96,
        bottom=cap + 0.04,
        top=top,
        height_ratios=[4.2, 1.0],
        width_ratios=[1.15, 1.0],
        hspace=0.25,
        wspace=0.28,
    )
    ax_grid = fig.add_subplot(gs[0, 0])
    image = draw_mosaic(ax_grid, attention, metric, per_head=per_head, selected=selected, fontsize=6)
    fig.colorbar(image, ax=ax_grid, fraction=0.035, pad=0.02).ax.tick_params(labelsize=6)
    ax_focus = fig.add_subplot(gs[0, 1])
    m = matrix.shape[0]
    image = draw_matrix(
        ax_focus, matrix, matrix_labels, query=query, fontsize=float(np.clip(10 - m / 8, 4, 8))
    )
    fig.colorbar(image, ax=ax_focus, fraction=0.04, pad=0.03).ax.tick_params(labelsize=6)
    ax_rel = fig.add_subplot(gs[1, :])
    if relevance is not None:
        draw_relevance(
            ax_rel, relevance, relevance_labels, width_chars=chars_across(10.6, 8), fontsize=8, min_lines=3
        )
    else:
        ax_rel.axis("off")
        ax_rel.text(0.5, 0.5, "relevance not available", ha="center", va="center", transform=ax_rel.transAxes)
    ax_rel.set_title(relevance_title, fontsize=10, loc="left")
    return fig


# -- tables ----------------------------------------------------------------------------------------
MATRIX_HEADER = ["query_index", "query", "key_index", "key", "weight"]


def matrix_table(matrix: np.ndarray, labels: Sequence[str]) -> Table:
    """Long table of one matrix: one row per (query, key)."""
    m = matrix.shape[0]
    rows = [[q, labels[q], k, labels[k], float(matrix[q, k])] for q in range(m) for k in range(m)]
    return list(MATRIX_HEADER), rows


def links_table(links: Sequence[tuple[int, int, float]], labels: Sequence[str]) -> Table:
    return list(MATRIX_HEADER), [[q, labels[q], k, labels[k], float(w)] for q, k, w in links]


def mosaic_table(attention: np.ndarray, metric: np.ndarray, metric_name: str, labels: Sequence[str]) -> Table:
    """Long table of every head: layer, head, the head's metric, then one row per (query, key)."""
    L, H, m, _ = attention.shape
    header = ["layer", "head", metric_name, *MATRIX_HEADER]
    rows = [
        [l, h, float(metric[l, h]), q, labels[q], k, labels[k], float(attention[l, h, q, k])]
        for l in range(L)
        for h in range(H)
        for q in range(m)
        for k in range(m)
    ]
    return header, rows


def relevance_table(values: np.ndarray, labels: Sequence[str]) -> Table:
    return ["index", "token", "relevance"], [[i, t, float(v)] for i, (t, v) in enumerate(zip(labels, values))]


# -- writing ---------------------------------------------------------------------------------------
def figure_format(path: Path) -> str:
    kind = FORMATS.get(Path(path).suffix.lower())
    if kind is None:
        raise HeadcountError(f"{path}: unknown figure format (use {', '.join(FORMATS)})")
    return kind


def save_figure(fig: Figure, path: Path) -> Path:
    """Write ``fig`` as PNG, SVG or PDF (by suffix), atomically; text stays text in SVG and PDF."""
    kind = figure_format(path)
    with rc_context({"svg.fonttype": "none", "pdf.fonttype": 42}):
        return atomic_write(
            Path(path), lambda fh: fig.savefig(fh, format=kind, dpi=PNG_DPI, facecolor="white")
        )


def csv_path(path: Path) -> Path:
    return Path(path).with_suffix(".csv")


def export_figure(fig: Figure, table: Table | None, path: Path) -> list[Path]:
    """Write the figure and, beside it, its numbers as CSV; returns the written paths."""
    written = [save_figure(fig, path)]
    if table is not None:
        header, rows = table
        written.append(save_csv(csv_path(path), header, rows))
    return written
