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

from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import PathPatch, Rectangle
from matplotlib.path import Path as MplPath

from inspector import formatting as fmt
from inspector import palette
from inspector.figures.caption import Caption, prediction_line
from inspector.figures.files import save_csv
from inspector.figures.pages import FORMATS, figure_format, save_pages
from inspector.figures.paper import (
    DEFAULT_PAPER,
    MARGIN,
    MIN_FONT,
    TITLE_FONT,
    Page,
    line_height,
    text_width,
    tick_step,
    wrap,
)

__all__ = ["FORMATS", "Caption", "figure_format"]

CMAP_NAME = palette.SEQUENTIAL
ACCENT = palette.ACCENT
CAPTION_FONT = 7.5
CAUTION = (
    "Attention shows where a head looked, not why the model decided "
    "(Jain & Wallace 2019; Wiegreffe & Pinter 2019)."
)

Table = tuple[list[str], list[list[object]]]


# -- layout helpers --------------------------------------------------------------------------------
def _fits(width: float, height: float) -> bool:
    short, long = sorted((width, height))
    return short <= 8.27 + 1e-6 and long <= 10.9 + 1e-6


def _figure(
    width: float, body_height: float, caption: Caption, extra_lines: Sequence[str] = ()
) -> tuple[Figure, float]:
    """A figure with the caption below the body, fitted to A4 and Letter; returns it and the caption's
    height as a figure fraction.

    The body shrinks (never the fonts) when the whole would not fit on paper.
    """
    width = min(width, 10.9)
    lines = caption.lines(width - 0.3, CAPTION_FONT)
    for extra in extra_lines:
        lines += wrap(extra, width - 0.3, CAPTION_FONT)
    cap_h = 0.18 + line_height(CAPTION_FONT) * len(lines)
    room = (10.9 if width <= 8.27 else 8.27) - cap_h
    body_height = max(1.0, min(body_height, room))
    total = body_height + cap_h
    page = Page(width, total)
    page.lines(0.15, body_height + 0.1, lines, CAPTION_FONT, color=palette.DIM_INK)
    return page.fig, cap_h / total


def _cmap():
    return palette.sequential_map()


def _colour_bar(fig: Figure, image, ax, label: str, *, fraction: float, pad: float) -> None:
    """A colour bar beside ``ax`` with as many ticks as fit its height at the smallest font."""
    from matplotlib.ticker import MaxNLocator

    bar = fig.colorbar(image, ax=ax, fraction=fraction, pad=pad)
    if label:
        bar.set_label(label, fontsize=MIN_FONT + 1)
    bar.ax.tick_params(labelsize=MIN_FONT)
    _, height = _axes_inches(bar.ax)
    bar.ax.yaxis.set_major_locator(MaxNLocator(nbins=max(1, int(height * 72 / (MIN_FONT * 2.6)))))


def _axes_inches(ax) -> tuple[float, float]:
    """(width, height) of an axes in inches."""
    fig_w, fig_h = ax.figure.get_size_inches()
    pos = ax.get_position()
    return pos.width * fig_w, pos.height * fig_h


# -- drawing into axes -----------------------------------------------------------------------------
def draw_matrix(
    ax,
    matrix: np.ndarray,
    labels: Sequence[str],
    *,
    query: int | None = None,
    fontsize: float = 8,
    ticks_on_top: bool = True,
):
    """Heatmap of one [m, m] matrix with token labels; returns the image for a colour bar.

    Labels are thinned (every n-th token) so they never touch at ``fontsize``.
    """
    m = matrix.shape[0]
    fontsize = max(fontsize, MIN_FONT)
    image = ax.imshow(
        matrix, cmap=_cmap(), vmin=0.0, vmax=max(float(matrix.max()), 1e-12), interpolation="nearest"
    )
    w, h = _axes_inches(ax)
    side = min(w, h)
    step = tick_step(m, side, fontsize)
    ticks = np.arange(0, m, step)
    ax.set_yticks(ticks, [labels[i] for i in ticks], fontsize=fontsize)
    ax.set_xticks(ticks, [labels[i] for i in ticks], fontsize=fontsize, rotation=90)
    if ticks_on_top:
        ax.xaxis.tick_top()
        ax.xaxis.set_label_position("top")
    ax.set_ylabel("query token", fontsize=fontsize + 1)
    ax.set_xlabel("key token", fontsize=fontsize + 1)
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
    fontsize: float = MIN_FONT,
):
    """Every head as a small heatmap with its metric value printed under it (when the number fits)."""
    L, H, m, _ = attention.shape
    fontsize = max(fontsize, MIN_FONT)
    array, px, py = mosaic_array(attention, per_head)
    image = ax.imshow(array, cmap=_cmap(), vmin=0.0, vmax=1.0, interpolation="nearest", aspect="equal")
    w, h = _axes_inches(ax)
    scale = min(w / array.shape[1], h / array.shape[0])  # inches per array cell (aspect equal)
    texts = fmt.column(metric.ravel())
    fits = (
        max(text_width(t, MIN_FONT) for t in texts) <= 0.95 * m * scale and (py - m) * scale >= MIN_FONT / 72
    )
    if fits:
        for layer in range(L):
            for head in range(H):
                ax.text(
                    head * px + m - 0.5,
                    layer * py + m + (py - m) * 0.45 - 0.5,
                    texts[layer * H + head],
                    ha="right",
                    va="center",
                    fontsize=MIN_FONT,
                    color="#333333",
                )
    xs = tick_step(H, H * px * scale, fontsize, pitch=2.2)
    ys = tick_step(L, L * py * scale, fontsize)
    ax.set_xticks(
        np.arange(0, H, xs) * px + m / 2 - 0.5, [fmt.head_tick(h) for h in range(0, H, xs)], fontsize=fontsize
    )
    ax.set_yticks(
        np.arange(0, L, ys) * py + m / 2 - 0.5,
        [fmt.layer_name(l) for l in range(0, L, ys)],
        fontsize=fontsize,
    )
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
    return image, fits


CHIP_H, CHIP_GAP, LINE_PITCH = 0.24, 0.06, 0.46
"""Relevance chips: height, horizontal gap and line pitch in inches (the number sits under each chip)."""
NUMBER_FONT = MIN_FONT


def chip_layout(
    labels: Sequence[str], width: float, fontsize: float, numbers: Sequence[str] = ()
) -> list[tuple[float, int, float]]:
    """(x, line, width) of each word chip in inches, wrapped at ``width``; a chip is as wide as its word or
    the number printed under it, whichever is wider, so numbers never run together."""
    out, x, line = [], 0.0, 0
    numbers = list(numbers) or [""] * len(labels)
    for label, number in zip(labels, numbers):
        w = max(text_width(label, fontsize), text_width(number, NUMBER_FONT)) + 0.14
        if x + w > width and x > 0:
            x, line = 0.0, line + 1
        out.append((x, line, w))
        x += w + CHIP_GAP
    return out


SHORT_PITCH = CHIP_H + 0.07
"""Line pitch of chips without numbers under them."""


def relevance_lines(
    labels: Sequence[str], values: np.ndarray, width: float, fontsize: float, numbers: bool = True
) -> int:
    """How many lines of chips :func:`draw_relevance` needs at ``width`` inches."""
    texts = fmt.column(values) if numbers and len(values) else ()
    layout = chip_layout(labels, width, fontsize, texts)
    return (layout[-1][1] + 1) if layout else 1


def draw_relevance(
    ax, values: np.ndarray, labels: Sequence[str], *, fontsize: float = 9, numbers: bool = True
):
    """The sentence as wrapped chips coloured by relevance, each value printed under its chip.

    The axes' data units are inches (the axes is measured), so chips, words and
    numbers are laid out at their printed size. ``numbers=False`` leaves the
    numbers out (a long sentence on a crowded page; the view's CSV holds them).
    """
    cmap = _cmap()
    width, height = _axes_inches(ax)
    vmax = max(float(values.max()), 1e-12) if values.size else 1.0
    texts = fmt.column(values) if len(values) else []
    layout = chip_layout(labels, width, fontsize, texts if numbers else ())
    pitch = LINE_PITCH if numbers else SHORT_PITCH
    for (x, line, w), label, value, number in zip(layout, labels, values, texts):
        colour = cmap(float(value) / vmax)
        y = line * pitch
        ax.add_patch(Rectangle((x, y), w, CHIP_H, facecolor=colour, edgecolor="#999999", linewidth=0.4))
        ax.text(
            x + w / 2,
            y + CHIP_H / 2,
            label,
            ha="center",
            va="center",
            fontsize=fontsize,
            color=palette.text_on(colour),
        )
        if numbers:
            ax.text(
                x + w / 2,
                y + CHIP_H + 0.03,
                number,
                ha="center",
                va="top",
                fontsize=NUMBER_FONT,
                color="#444444",
            )
    ax.set_xlim(0, width)
    ax.set_ylim(height, 0)
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
) -> str:
    """Tokens on one line in reading order; arcs above look back, arcs below look ahead.

    Returns a note for the caption ('' when every token is labelled). The axes'
    data units are inches: when the words do not fit side by side, tokens become
    evenly spaced marks with upright labels, thinned to every n-th token.
    """
    width, height = _axes_inches(ax)
    fontsize = max(fontsize, MIN_FONT)
    n = len(labels)
    widths = [text_width(t, fontsize) + 0.1 for t in labels]
    upright = sum(widths) + 0.05 * max(n - 1, 0) > width
    note = ""
    if upright:
        pitch = width / max(n, 1)
        centres = (np.arange(n) + 0.5) * pitch
        widths = [pitch * 0.8] * n
        step = tick_step(n, width, fontsize)
        shown = set(range(0, n, step)) | ({query} if query is not None else set())
        if step > 1:
            note = f"Every {step}th token is labelled; the CSV lists all {fmt.count(n, 'token')}."
    else:
        spare = (width - sum(widths)) / max(n - 1, 1) if n > 1 else 0.0
        gap = min(max(spare, 0.05), 0.3)
        centres = np.cumsum([0.0] + [w + gap for w in widths[:-1]]) + np.array(widths) / 2
        shown = set(range(n))
    mid = height * 0.5
    box_h = 0.22
    for i, (c, w) in enumerate(zip(centres, widths)):
        is_q = query is not None and i == query
        ax.add_patch(
            Rectangle(
                (c - w / 2, mid - box_h / 2 if not upright else mid - 0.04),
                w,
                box_h if not upright else 0.08,
                facecolor="white" if not upright else ("#333333" if not is_q else ACCENT),
                edgecolor=ACCENT if is_q else "#888888",
                linewidth=1.4 if is_q else 0.5,
            )
        )
        if i in shown and not upright:
            ax.text(
                c,
                mid,
                labels[i],
                ha="center",
                va="center",
                fontsize=fontsize,
                fontweight="bold" if is_q else "normal",
            )
        elif i in shown:
            ax.text(
                c,
                mid + 0.08,
                labels[i],
                ha="center",
                va="top",
                fontsize=fontsize,
                rotation=90,
                fontweight="bold" if is_q else "normal",
            )
    reach = height * 0.5 - 0.3
    wmax = max((w for _, _, w in links), default=1.0)
    widest = max((abs(centres[q] - centres[k]) for q, k, _ in links), default=1.0) or 1.0
    base_off = box_h / 2 if not upright else 0.04
    for q, k, w in sorted(links, key=lambda t: t[2]):
        sign = -1.0 if k < q else 1.0  # inches grow downwards: looking back draws upwards
        if upright and sign > 0:
            continue  # labels hang below the line: only the arcs above are drawn (see the caption)
        base = mid + base_off * sign
        rise = sign * (0.15 + (reach - 0.2) * abs(centres[q] - centres[k]) / widest)
        verts = [(centres[q], base), (centres[q], base + rise), (centres[k], base + rise), (centres[k], base)]
        codes = [MplPath.MOVETO, MplPath.CURVE4, MplPath.CURVE4, MplPath.CURVE4]
        alpha = 0.25 + 0.75 * w / wmax
        ax.add_patch(
            PathPatch(
                MplPath(verts, codes), fill=False, edgecolor=(0.15, 0.15, 0.2, alpha), linewidth=0.5 + 5 * w
            )
        )
        ax.plot([centres[k]], [base], "o", color=(0.15, 0.15, 0.2, alpha), markersize=2 + 3 * w)
    ax.set_xlim(0, width)
    ax.set_ylim(height, 0)
    ax.axis("off")
    ax.text(0, 0.02, "above the line: looks back", fontsize=MIN_FONT, color="#555555", va="top")
    if not upright:
        ax.text(
            0, height - 0.02, "below the line: looks ahead", fontsize=MIN_FONT, color="#555555", va="bottom"
        )
    elif any(k > q for q, k, _ in links):
        note = (
            note + " " if note else ""
        ) + "Links that look ahead are listed in the CSV (labels hang below the line)."
    return note


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
    side = float(np.clip(0.16 * m + 2.2, 4.0, 7.0))
    fig, cap = _figure(side + 1.6, side + 1.2, caption)
    w, h = fig.get_size_inches()
    body = h * (1 - cap)
    label_room = min(1.3, 0.1 + max(text_width(t, 8) for t in labels) if labels else 0.5) + 0.3
    size = min(w - label_room - 1.2, body - label_room - 0.2)
    ax = fig.add_axes(((label_room + 0.05) / w, (h * cap + 0.15) / h, size / w, size / h))
    image = draw_matrix(ax, matrix, labels, query=query, fontsize=float(np.clip(11 - m / 8, MIN_FONT, 9)))
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
    width = float(np.clip(0.62 * H + 1.8, 5.0, 10.9))
    body = width * (L * 1.33) / (H + 1.8) + 0.4
    fig, cap = _figure(width, body, caption)
    w, h = fig.get_size_inches()
    ax = fig.add_axes((0.5 / w, cap + 0.1 / h, (w - 1.6) / w, (h * (1 - cap) - 0.45) / h))
    image, _ = draw_mosaic(ax, attention, metric, per_head=per_head, selected=selected)
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
    fontsize = float(np.clip(120 / max(len(labels), 1), MIN_FONT, 9))
    natural = sum(text_width(t, fontsize) + 0.2 for t in labels) + 0.4
    width = float(np.clip(natural, 5.0, 10.9))
    body = 3.2
    probe = Page(width - 0.3, body)
    note = draw_arcs(probe.ax, matrix, labels, links, query=query, fontsize=fontsize)
    upright = (
        sum(text_width(t, fontsize) + 0.1 for t in labels) + 0.05 * max(len(labels) - 1, 0) > width - 0.3
    )
    extra = ["Line width and darkness grow with the weight."] + ([note] if note else [])
    fig, cap = _figure(width, body + (1.2 if upright else 0.0), caption, extra)
    w, h = fig.get_size_inches()
    ax = fig.add_axes((0.15 / w, cap + 0.05 / h, (w - 0.3) / w, (h * (1 - cap) - 0.1) / h))
    draw_arcs(ax, matrix, labels, links, query=query, fontsize=fontsize)
    return fig


def relevance_figure(values: np.ndarray, labels: Sequence[str], caption: Caption) -> Figure:
    width, fontsize = 8.0, 9.0
    ax_w = width - 0.4
    lines = relevance_lines(labels, values, ax_w, fontsize)
    chips_h = LINE_PITCH * lines + 0.05
    bar_band = 0.75
    fig, cap = _figure(width, chips_h + bar_band, caption)
    total = fig.get_figheight()
    body = total * (1 - cap)
    chips_h = min(chips_h, body - bar_band)
    ax = fig.add_axes((0.2 / width, (total - chips_h - 0.1) / total, ax_w / width, chips_h / total))
    mappable = draw_relevance(ax, values, labels, fontsize=fontsize)
    cax = fig.add_axes((0.3, (total * cap + 0.2) / total, 0.4, 0.1 / total))
    fig.colorbar(mappable, cax=cax, orientation="horizontal")
    cax.tick_params(labelsize=MIN_FONT)
    cax.set_title("relevance", fontsize=MIN_FONT, pad=2)
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
    paper: str = DEFAULT_PAPER,
) -> Figure:
    """One landscape page: head mosaic, close-up and relevance band, with the prediction, caption and caution."""
    page = Page.paper(paper, True)
    H = page.height
    inner = page.inner_width
    # header: title, sentence, prediction
    y = page.lines(MARGIN, MARGIN, ["Figure sheet"], TITLE_FONT, weight="bold")
    y = page.paragraph(MARGIN, y, f"\u201c{caption.sentence}\u201d", inner, 9.0)
    line = prediction_line(
        caption.predicted, caption.probability, caption.expected, caption.expected_probability
    )
    y = page.lines(MARGIN, y + 0.02, [line], 8.5) + 0.12
    # footer: caption and caution
    lines = caption.lines(inner, CAPTION_FONT) + wrap(f"Caution: {CAUTION}", inner, CAPTION_FONT)
    foot = H - MARGIN - len(lines) * line_height(CAPTION_FONT)
    page.rule(MARGIN, foot - 0.06, inner)
    page.lines(MARGIN, foot, lines, CAPTION_FONT, color=palette.DIM_INK)
    # relevance band: as tall as its chips need, at most half the room between header and caption
    # (numbers under the chips while they fit in a third of the room, else shading only)
    room = foot - 0.2 - y
    band_h, band_font, numbers = 0.3, 8.0, True
    if relevance is not None:
        for band_font, numbers in ((8.0, True), (MIN_FONT, True), (8.0, False), (MIN_FONT, False)):
            n_lines = relevance_lines(relevance_labels, relevance, inner, band_font, numbers)
            band_h = (LINE_PITCH if numbers else SHORT_PITCH) * n_lines + 0.05
            if band_h <= room / 3:
                break
    if not numbers:
        relevance_title += " (shading only: the relevance band's own export lists the numbers)"
    band_top = foot - 0.2 - band_h - 0.28
    page.text(MARGIN, band_top, relevance_title, 9.5, weight="bold")
    if relevance is not None:
        draw_relevance(
            page.axes(MARGIN, band_top + 0.28, inner, band_h),
            relevance,
            relevance_labels,
            fontsize=band_font,
            numbers=numbers,
        )
    else:
        page.text(MARGIN, band_top + 0.3, "relevance not available", 8.0)
    # middle: mosaic (left) and close-up (right), titles above, nothing on top of the close-up's axis
    mid_top, mid_bottom = y, band_top - 0.25
    left_w = inner * 0.54
    page.text(MARGIN, mid_top, "Head mosaic", 9.5, weight="bold")
    mosaic_ax = page.axes(MARGIN + 0.35, mid_top + 0.45, left_w - 0.95, mid_bottom - mid_top - 0.5)
    image, _ = draw_mosaic(mosaic_ax, attention, metric, per_head=per_head, selected=selected)
    _colour_bar(page.fig, image, mosaic_ax, "", fraction=0.035, pad=0.02)
    right_x = MARGIN + left_w + 0.15
    right_w = inner - left_w - 0.15
    page.text(right_x, mid_top, focus_title, 9.5, weight="bold")
    m = matrix.shape[0]
    fs = float(np.clip(10 - m / 8, MIN_FONT, 8))
    label_room = min(1.1, 0.1 + max((text_width(t, fs) for t in matrix_labels), default=0.4))
    side = min(right_w - label_room - 0.9, mid_bottom - mid_top - 0.45 - label_room - 0.25)
    focus_ax = page.axes(right_x + label_room + 0.2, mid_top + 0.35, side, side)
    image = draw_matrix(focus_ax, matrix, matrix_labels, query=query, fontsize=fs, ticks_on_top=False)
    _colour_bar(page.fig, image, focus_ax, "", fraction=0.04, pad=0.03)
    return page.fig


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
def with_sentence(table: Table, text: str, predicted: str | None, expected: str | None) -> Table:
    """``table`` with the sentence and its labels on every row (columns ``text``, ``predicted``, ``expected``)."""
    header, rows = table
    tail = [text, predicted or "", expected or ""]
    return [*header, "text", "predicted", "expected"], [[*row, *tail] for row in rows]


def save_figure(fig: Figure, path: Path) -> Path:
    """Write ``fig`` as PNG, SVG or PDF (by suffix), atomically; text stays text in SVG and PDF."""
    return save_pages(fig, Path(path))[0]


def csv_path(path: Path) -> Path:
    return Path(path).with_suffix(".csv")


def export_figure(fig: Figure | Sequence[Figure], table: Table | None, path: Path) -> list[Path]:
    """Write the figure (or every page) and, beside it, its numbers as CSV; returns the written paths."""
    figure_format(path)
    written = save_pages(fig, Path(path))
    if table is not None:
        header, rows = table
        written.append(save_csv(csv_path(path), header, rows))
    return written
