"""The explanation on paper, drawn the way the Explain page draws it.

Words run down the page in reading order, the methods run across: shaded cells
(the sequential map, each column from 0 to its own largest value, the number
printed in the cell) for the non-negative attention-based relevances, and a
signed number beside a bar from a zero line (purple to the left = against the
label, green to the right = for it; each column scaled to its own largest
magnitude) for Integrated Gradients, occlusion and the contrast. Columns are
grouped: attention (the same for every label), one group per label (predicted,
expected), and on a misfire the contrast predicted − expected. Under the table:
how each method agrees with occlusion (Spearman rho) and the plain-language
hints. A rewording adds the reworded sentence's table and a page of what the
rewording did to every head. Pages are landscape A4 or US Letter; long
sentences continue on further pages.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from inspector import formatting as fmt
from inspector import palette
from inspector.errors import HeadcountError
from inspector.explanation.explain import (
    CAUTION,
    RULE_NAMES,
    ContrastEvidence,
    LabelEvidence,
    SentenceExplanation,
)
from inspector.explanation.faithfulness import AGREEMENT_THRESHOLD, METHOD_LABELS
from inspector.explanation.rewording import RewordingComparison
from inspector.figures.caption import Caption, prediction_line
from inspector.figures.paper import (
    DEFAULT_PAPER,
    MARGIN,
    MIN_FONT,
    TITLE_FONT,
    Page,
    line_height,
    shorten,
    text_width,
    tick_step,
    wrap,
)

FIGURE_FORMATS: tuple[str, ...] = ("png", "svg", "pdf")

METHOD_HEADS: dict[str, tuple[str, str]] = {
    "rollout": ("Rollout", ""),
    "value_weighted": ("Value-wtd", ""),
    "grad_rollout": ("Grad-wtd", ""),
    "integrated_gradients": ("IG", ""),
    "occlusion": ("Occlusion", "\u0394p"),
    "occlusion_log_odds": ("Occlusion", "\u0394log-odds"),
}
"""Two header lines per method column (the second line of the others is their rho)."""
GAP_HEAD = ("Occlusion", "\u0394gap")
SIGNED = frozenset({"integrated_gradients", "occlusion", "occlusion_log_odds"})
LABEL_METHODS = ("grad_rollout", "integrated_gradients", "occlusion", "occlusion_log_odds")
CONTRAST_METHODS = ("grad_rollout", "integrated_gradients", "occlusion")

ROW = 0.17
"""Height of one word row in inches."""
CELL_FONT = 7.0
WORD_FONT = 8.0
HEAD_FONT = 7.0
CAPTION_FONT = 7.0


def check_figure_path(path: Path) -> str:
    """Return the figure format from the file suffix, or raise a one-line error."""
    kind = Path(path).suffix.lower().lstrip(".")
    if kind not in FIGURE_FORMATS:
        raise HeadcountError(f"{path}: figure must end in .png, .svg or .pdf")
    return kind


# ----------------------------------------------------------------------------- what the columns hold


@dataclass
class EvidenceColumn:
    """One method's value for every word, as drawn."""

    method: str
    head: tuple[str, str]
    values: np.ndarray
    signed: bool
    rho: float | None

    def texts(self) -> list[str]:
        return fmt.column(self.values, sign=self.signed)


@dataclass
class ColumnGroup:
    """Columns drawn under one title (attention, a label, the contrast)."""

    title: str
    columns: list[EvidenceColumn]


def _column(method: str, values: np.ndarray, rho: float | None, head: tuple[str, str] | None = None):
    first, second = head or METHOD_HEADS[method]
    if not second:
        second = f"\u03c1 {fmt.correlation(rho)}" + (
            " \u2715" if rho is not None and rho < AGREEMENT_THRESHOLD else ""
        )
    return EvidenceColumn(
        method, (first, second), np.asarray(values, dtype=np.float64), method in SIGNED, rho
    )


def shown_labels(ex: SentenceExplanation) -> list[LabelEvidence]:
    """The labels a page shows for ``ex``: its prediction, and the expected label when it differs."""
    names = [ex.prediction.label] + (
        [ex.expected] if ex.expected and ex.expected != ex.prediction.label else []
    )
    return [ex.evidence(name) for name in names]


def evidence_groups(ex: SentenceExplanation) -> list[ColumnGroup]:
    """Attention columns, one group per shown label, then the contrast (on a misfire)."""
    first = ex.labels[0]
    groups = [
        ColumnGroup(
            "Attention (the same for every label)",
            [
                _column("rollout", ex.rollout, first.faithfulness.get("rollout")),
                _column("value_weighted", ex.value_weighted, first.faithfulness.get("value_weighted")),
            ],
        )
    ]
    for ev in shown_labels(ex):
        table = ev.relevances(ex)
        role = "predicted" if ev.label == ex.prediction.label else "expected"
        groups.append(
            ColumnGroup(
                f"{ev.label} ({role}, {fmt.percent(ev.probability)})",
                [_column(m, table[m], ev.faithfulness.get(m)) for m in LABEL_METHODS],
            )
        )
    c = ex.contrast
    if c is not None:
        table = c.relevances(ex)
        groups.append(
            ColumnGroup(
                f"Contrast: {c.predicted} \u2212 {c.expected}",
                [
                    _column(m, table[m], c.faithfulness.get(m), GAP_HEAD if m == "occlusion" else None)
                    for m in CONTRAST_METHODS
                ],
            )
        )
    return groups


# ----------------------------------------------------------------------------- drawing the table


def _cell_shaded(page: Page, x: float, y: float, w: float, value: float, peak: float, text: str) -> None:
    cmap = palette.sequential_map()
    rgb = cmap(value / peak if peak > 0 else 0.0)
    page.box(x + 0.02, y + 0.015, w - 0.04, ROW - 0.03, facecolor=rgb)
    page.text(x + w / 2, y + ROW / 2, text, CELL_FONT, ha="center", va="center", color=palette.text_on(rgb))


def _cell_signed(
    page: Page, x: float, y: float, w: float, value: float, peak: float, text: str, number_w: float
) -> None:
    """A signed number right-aligned in the first ``number_w`` inches, then a bar from a zero line."""
    page.text(x + number_w - 0.03, y + ROW / 2, text, CELL_FONT, ha="right", va="center")
    left, width = x + number_w + 0.02, w - number_w - 0.06
    mid = left + width / 2
    page.box(mid - 0.004, y + 0.02, 0.008, ROW - 0.04, facecolor="#9a9a9a")
    share = 0.0 if peak <= 0 else min(abs(value) / peak, 1.0)
    length = share * (width / 2)
    if length > 0:
        start = mid if value >= 0 else mid - length
        page.box(start, y + 0.045, length, ROW - 0.09, facecolor=palette.signed_rgb(value))


SHADED_SHARE = 0.75
"""A shaded column is this much narrower than a signed one (which holds a number and a bar)."""


def column_widths(
    groups: Sequence[ColumnGroup], width: float, words: Sequence[str]
) -> tuple[float, list[float]]:
    """(word column width, width of each value column) in inches for a table ``width`` inches wide."""
    longest = max((text_width(w, WORD_FONT) for w in words), default=0.5)
    word_w = float(np.clip(longest + 0.12, 0.8, 1.6))
    weights = [1.0 if c.signed else SHADED_SHARE for g in groups for c in g.columns]
    unit = min((width - word_w) / max(sum(weights), 1e-9), 1.05)
    return word_w, [w * unit for w in weights]


GROUP_LINES = 2
HEADER_H = GROUP_LINES * line_height(HEAD_FONT) + 0.08 + 2 * line_height(HEAD_FONT) + 0.06
"""Height of the group titles (up to two lines) and the two column-header lines."""


def draw_table(
    page: Page,
    x: float,
    y: float,
    width: float,
    words: Sequence[str],
    groups: Sequence[ColumnGroup],
    rows: range,
    changed: set[int] = frozenset(),
) -> float:
    """Draw the word rows ``rows`` of the evidence table at (x, y); returns the y below it."""
    word_w, widths = column_widths(groups, width, words)
    lefts = list(x + word_w + np.concatenate([[0.0], np.cumsum(widths)[:-1]]))
    k = 0
    group_h = GROUP_LINES * line_height(HEAD_FONT)
    for group in groups:
        n = len(group.columns)
        start, span = lefts[k], float(sum(widths[k : k + n]))
        title = wrap(group.title, span - 0.1, HEAD_FONT)
        if len(title) > GROUP_LINES:
            rest = " ".join(title[GROUP_LINES - 1 :])
            title = title[: GROUP_LINES - 1] + [shorten(rest, span - 0.1, HEAD_FONT)]
        ty = y + (GROUP_LINES - len(title)) * line_height(HEAD_FONT)
        page.lines(start + span / 2, ty, title, HEAD_FONT, ha="center", weight="bold")
        page.rule(start + 0.04, y + group_h + 0.04, span - 0.08, color="#888888")
        for j, col in enumerate(group.columns):
            mid = lefts[k + j] + widths[k + j] / 2
            for line, text in enumerate(col.head):
                page.text(
                    mid,
                    y + group_h + 0.08 + line * line_height(HEAD_FONT),
                    shorten(text, widths[k + j] - 0.04, HEAD_FONT),
                    HEAD_FONT,
                    ha="center",
                )
        k += n
    top = y + HEADER_H
    columns = [c for g in groups for c in g.columns]
    peaks = [float(np.abs(c.values).max()) if c.values.size else 0.0 for c in columns]
    texts = [c.texts() for c in columns]
    # the numbers get the room their widest entry needs (never run into the bar), the bar the rest
    number_ws = [
        min(max(text_width(t, CELL_FONT) for t in col_texts) + 0.08, 0.62 * w) if col_texts else 0.3
        for col_texts, w in zip(texts, widths)
    ]
    for n, row in enumerate(rows):
        ry = top + n * ROW
        if n % 2:
            page.box(x, ry, width, ROW, facecolor="#f3f3f3")
        word = shorten(words[row], word_w - 0.1, WORD_FONT)
        bold = row in changed
        page.text(
            x + word_w - 0.08,
            ry + ROW / 2,
            word,
            WORD_FONT,
            ha="right",
            va="center",
            weight="bold" if bold else "normal",
        )
        if bold:
            page.box(x, ry + 0.03, 0.03, ROW - 0.06, facecolor=palette.INK)
        for k, col in enumerate(columns):
            value = float(col.values[row])
            if col.signed:
                _cell_signed(page, lefts[k], ry, widths[k], value, peaks[k], texts[k][row], number_ws[k])
            else:
                _cell_shaded(page, lefts[k], ry, widths[k], value, peaks[k], texts[k][row])
    return top + len(rows) * ROW


def agreement_rows(ex: SentenceExplanation) -> tuple[list[str], list[list[str]]]:
    """(column titles, rows of [method, rho per label ...]) of the agreement table."""
    shown: list[LabelEvidence | ContrastEvidence] = list(shown_labels(ex))
    shown += [ex.contrast] if ex.contrast is not None else []
    titles = ["Spearman \u03c1 with occlusion"] + [
        "contrast" if isinstance(ev, ContrastEvidence) else ev.label for ev in shown
    ]
    rows = []
    for method, name in METHOD_LABELS.items():
        cells = []
        for ev in shown:
            rho = ev.faithfulness.get(method)
            low = rho is not None and rho < AGREEMENT_THRESHOLD
            cells.append(fmt.correlation(rho) + (" \u2715" if low else ""))
        rows.append([name, *cells])
    return titles, rows


def hint_lines(ex: SentenceExplanation) -> list[str]:
    shown: list[LabelEvidence | ContrastEvidence] = list(shown_labels(ex))
    shown += [ex.contrast] if ex.contrast is not None else []
    who: dict[str, list[str]] = {}  # one line per hint, naming every label it was found for
    for ev in shown:
        name = "contrast" if isinstance(ev, ContrastEvidence) else ev.label
        for hint in ev.hints:
            who.setdefault(hint, []).append(name)
    out = [f"{', '.join(names)}: {hint}." for hint, names in who.items()]
    return out or [f"No disagreement flagged: every defined \u03c1 is at least {AGREEMENT_THRESHOLD}."]


def draw_agreement(page: Page, x: float, y: float, width: float, ex: SentenceExplanation) -> float:
    """The agreement table (left) and the hints (right); returns the y below them."""
    titles, rows = agreement_rows(ex)
    first_w = 1.75
    table_w = min(width * 0.5, first_w + 1.25 * (len(titles) - 1))
    col_w = (table_w - first_w) / max(len(titles) - 1, 1)
    page.text(x, y, titles[0], HEAD_FONT, weight="bold")
    for k, title in enumerate(titles[1:]):
        page.text(
            x + first_w + (k + 0.5) * col_w,
            y,
            shorten(title, col_w - 0.05, HEAD_FONT),
            HEAD_FONT,
            ha="center",
            weight="bold",
        )
    ty = y + line_height(HEAD_FONT) + 0.03
    for row in rows:
        page.text(x, ty, row[0], CELL_FONT)
        for k, cell in enumerate(row[1:]):
            page.text(x + first_w + (k + 0.5) * col_w, ty, cell, CELL_FONT, ha="center")
        ty += line_height(CELL_FONT)
    page.text(
        x,
        ty + 0.02,
        f"\u2715: below {AGREEMENT_THRESHOLD}, ranks the words unlike occlusion",
        CELL_FONT,
        color=palette.DIM_INK,
    )
    ty += line_height(CELL_FONT) + 0.02
    hx = x + table_w + 0.25
    hy = page.lines(hx, y, ["Reading"], HEAD_FONT, weight="bold")
    for hint in hint_lines(ex):
        hy = page.paragraph(hx, hy, "\u2022 " + hint, width - (hx - x), CELL_FONT)
    return max(ty, hy)


def agreement_height(ex: SentenceExplanation, width: float) -> float:
    """The height :func:`draw_agreement` will take (measured without drawing)."""
    table = line_height(HEAD_FONT) + 0.05 + (len(METHOD_LABELS) + 1) * line_height(CELL_FONT)
    hint_w = width - min(width * 0.5, 1.75 + 1.25 * 3) - 0.25
    hints = line_height(HEAD_FONT) + sum(
        len(wrap("\u2022 " + h, hint_w, CELL_FONT)) for h in hint_lines(ex)
    ) * (line_height(CELL_FONT))
    return max(table, hints)


# ----------------------------------------------------------------------------- pages


def _settings(ex: SentenceExplanation) -> str:
    ig = ex.labels[0].integrated_gradients
    parts = [ev.integrated_gradients for ev in ex.labels]
    worst = max(abs(g.completeness_error) for g in parts)
    occ = (
        "the word removed"
        if ex.occlusion_mode == "remove"
        else f"the word replaced by {ex.occlusion_replacement}"
    )
    return (
        f"Integrated Gradients on word embeddings, baseline \u2018{ig.baseline}\u2019, {ig.steps_text()}, "
        f"{RULE_NAMES[ig.rule]}, largest completeness error {fmt.number(worst, 2)} (logits); occlusion with {occ}"
    )


def explanation_caption(ex: SentenceExplanation, view: str = "Explain page, word evidence") -> Caption:
    pred = ex.prediction
    return Caption(
        model=ex.model_name,
        sentence=ex.text,
        view=view,
        where="words down in reading order, methods across",
        metric=(
            "attention rollout and value-weighted rollout (the same for every label), gradient-weighted rollout, "
            "Integrated Gradients (logit units), occlusion as the drop of the probability (\u0394p) and of the "
            "log-odds log(p/(1\u2212p)); the contrast applies the methods to logit(predicted) \u2212 "
            "logit(expected) and its occlusion is the drop of that gap"
        ),
        scale=(
            f"shaded columns {palette.SEQUENTIAL_TEXT}, each from 0 to its largest value; signed columns are "
            f"bars from a zero line, {palette.DIVERGING} purple to the left = against, green to the right = for, "
            "each scaled to its largest magnitude, with the signed number beside"
        ),
        predicted=pred.label,
        probability=pred.probabilities[pred.label],
        expected=ex.expected,
        expected_probability=None if ex.expected is None else pred.probabilities[ex.expected],
        settings=_settings(ex),
    )


def _caption_block(page: Page, caption: Caption) -> float:
    """Draw the caption and the caution at the bottom of ``page``; returns the y where it starts."""
    lines = caption.lines(page.inner_width, CAPTION_FONT) + wrap(
        f"Caution: {CAUTION}", page.inner_width, CAPTION_FONT
    )
    top = page.height - MARGIN - len(lines) * line_height(CAPTION_FONT)
    page.rule(MARGIN, top - 0.06, page.inner_width)
    page.lines(MARGIN, top, lines, CAPTION_FONT, color=palette.DIM_INK)
    return top - 0.12


def _header(page: Page, ex: SentenceExplanation, title: str, note: str) -> float:
    y = MARGIN
    page.text(MARGIN, y, title, TITLE_FONT, weight="bold")
    if note:
        page.text(page.width - MARGIN, y + 0.03, note, CELL_FONT, ha="right", color=palette.DIM_INK)
    y += line_height(TITLE_FONT) + 0.02
    y = page.paragraph(MARGIN, y, f"\u201c{ex.text}\u201d", page.inner_width, 9.0)
    pred = ex.prediction
    line = prediction_line(
        pred.label,
        pred.probabilities[pred.label],
        ex.expected,
        None if ex.expected is None else pred.probabilities[ex.expected],
    )
    y = page.lines(MARGIN, y + 0.02, [line], 8.5)
    return y + 0.1


def sentence_pages(
    ex: SentenceExplanation,
    *,
    paper: str = DEFAULT_PAPER,
    title: str = "Why this label? Word evidence",
    changed: set[int] = frozenset(),
) -> list[Figure]:
    """The pages of one sentence's explanation: the table (continued as needed), then the agreement."""
    groups = evidence_groups(ex)
    caption = explanation_caption(ex)
    n = len(ex.words)
    plan: list[range] = []
    probe = Page.paper(paper, True)
    bottom = _caption_block(probe, caption)
    top = _header(probe, ex, title, "page 1 of 1")
    tail = agreement_height(ex, probe.inner_width) + 0.25
    start = 0
    while True:
        room = int((bottom - top - HEADER_H) // ROW)
        if n - start <= room - int(np.ceil(tail / ROW)):
            plan.append(range(start, n))
            break
        take = max(1, min(room, n - start))
        plan.append(range(start, start + take))
        start += take
        if start >= n:
            plan.append(range(n, n))  # the agreement alone on a last page
            break
    pages = []
    for k, rows in enumerate(plan):
        page = Page.paper(paper, True)
        note = f"page {k + 1} of {len(plan)}" if len(plan) > 1 else ""
        y = _header(page, ex, title + (" (continued)" if k else ""), note)
        _caption_block(page, caption)
        if len(rows):
            y = draw_table(page, MARGIN, y, page.inner_width, ex.words, groups, rows, changed) + 0.22
        if k == len(plan) - 1:
            draw_agreement(page, MARGIN, y, page.inner_width, ex)
        pages.append(page.fig)
    return pages


def _changed_words(cmp: RewordingComparison, side: str) -> set[int]:
    out: set[int] = set()
    for change in cmp.word_changes:
        if change.op != "equal":
            start, end = change.original if side == "original" else change.edited
            out.update(range(start, end))
    return out


def heads_page(cmp: RewordingComparison, *, paper: str = DEFAULT_PAPER) -> Figure:
    """What the rewording did: the per-head change of the metric (signed numbers on the diverging map)."""
    from inspector.measures.metrics import METRIC_LABELS

    page = Page.paper(paper, True)
    diff = cmp.difference
    layers, heads = diff.shape
    metric = METRIC_LABELS[cmp.metric]
    caption = Caption(
        model=cmp.original.model_name,
        sentence=f"{cmp.original.text}  \u2192  reworded: {cmp.edited.text}",
        view="Rewording, change per head",
        where=f"all {fmt.count(layers, 'layer')} \u00d7 {fmt.count(heads, 'head')}, reworded minus original",
        metric=metric,
        scale=(
            f"{palette.DIVERGING} (purple = fell, green = rose, the signed number in each cell), centred on 0, "
            f"to the largest change either way; framed: the {fmt.count(len(cmp.top_heads), 'head')} that "
            "changed most"
        ),
        predicted=cmp.original.prediction.label,
        probability=cmp.original.prediction.probabilities[cmp.original.prediction.label],
        expected=cmp.original.expected,
        expected_probability=None
        if cmp.original.expected is None
        else cmp.original.prediction.probabilities[cmp.original.expected],
        settings=f"per-head {metric.lower()} on each sentence, no model change",
    )
    bottom = _caption_block(page, caption)
    y = page.lines(MARGIN, MARGIN, ["What the rewording did"], TITLE_FONT, weight="bold") + 0.05
    a, b = cmp.original.prediction, cmp.edited.prediction
    lines = [
        f"Original: \u201c{cmp.original.text}\u201d \u2192 {a.label} {fmt.percent(a.probabilities[a.label])}",
        f"Reworded: \u201c{cmp.edited.text}\u201d \u2192 {b.label} {fmt.percent(b.probabilities[b.label])} "
        f"(prediction {'changed' if cmp.prediction_changed else 'unchanged'})",
    ]
    for label in cmp.labels:
        lines.append(
            f"p({label}): {fmt.percent(a.probabilities[label])} \u2192 {fmt.percent(b.probabilities[label])} "
            f"({fmt.points(cmp.probability_shift(label), signed=True)})"
        )
    for c in cmp.word_changes:
        if c.op != "equal":
            old = " ".join(cmp.original.words[c.original[0] : c.original[1]]) or "\u2014"
            new = " ".join(cmp.edited.words[c.edited[0] : c.edited[1]]) or "\u2014"
            lines.append(f"{c.op}: \u2018{old}\u2019 \u2192 \u2018{new}\u2019")
    text_w = 3.6
    wrapped = [part for line in lines for part in wrap(line, text_w, 8.0)]
    page.lines(MARGIN, y, wrapped, 8.0)
    top_lines = [f"Changed most in {metric.lower()}:"] + [
        f"{fmt.head_name(h.layer, h.head)}: {fmt.weight(h.before)} \u2192 {fmt.weight(h.after)} ({fmt.signed(h.change)})"
        for h in cmp.top_heads
    ]
    page.lines(MARGIN, y + len(wrapped) * line_height(8.0) + 0.2, top_lines, 8.0)
    gx = MARGIN + text_w + 0.5
    gw = page.width - MARGIN - gx - 0.2
    gh = bottom - y - 0.5
    cell = min(gw / heads, gh / layers, 0.6)
    ax = page.axes(gx + 0.35, y + 0.3, cell * heads, cell * layers)
    draw_signed_grid(ax, diff, framed={(h.layer, h.head) for h in cmp.top_heads}, cell=cell)
    return page.fig


def draw_signed_grid(
    ax, values: np.ndarray, *, framed: set[tuple[int, int]] = frozenset(), cell: float
) -> None:
    """A layers x heads grid of signed values on the diverging map, with the signed number in each cell."""
    from matplotlib.patches import Rectangle

    layers, heads = values.shape
    bound = float(np.abs(values).max()) or 1.0
    cmap = palette.diverging_map()
    ax.imshow(values, cmap=cmap, vmin=-bound, vmax=bound, aspect="auto", interpolation="nearest")
    size = max(MIN_FONT, min(8.0, cell * 72 / 4.2))
    show_numbers = text_width("+0.000", size) < cell * 0.95
    flat = fmt.column(values.ravel(), sign=True)
    for l in range(layers):
        for h in range(heads):
            if show_numbers:
                ax.text(
                    h,
                    l,
                    flat[l * heads + h],
                    ha="center",
                    va="center",
                    fontsize=size,
                    color=palette.text_on(cmap(0.5 + values[l, h] / (2 * bound))),
                )
            if (l, h) in framed:
                ax.add_patch(
                    Rectangle((h - 0.5, l - 0.5), 1, 1, fill=False, edgecolor=palette.INK, linewidth=1.6)
                )
    xs = tick_step(heads, cell * heads, MIN_FONT)
    ys = tick_step(layers, cell * layers, MIN_FONT)
    ax.set_xticks(range(0, heads, xs), [fmt.head_tick(h) for h in range(0, heads, xs)])
    ax.set_yticks(range(0, layers, ys), [fmt.layer_name(l) for l in range(0, layers, ys)])
    ax.xaxis.tick_top()
    ax.tick_params(labelsize=MIN_FONT, length=0)


def explanation_pages(
    ex: SentenceExplanation, comparison: RewordingComparison | None = None, *, paper: str = DEFAULT_PAPER
) -> list[Figure]:
    """Every page of the explanation (and of the rewording, when there is one)."""
    if comparison is None:
        return sentence_pages(ex, paper=paper)
    return [
        *sentence_pages(
            comparison.original,
            paper=paper,
            title="Original sentence: word evidence",
            changed=_changed_words(comparison, "original"),
        ),
        *sentence_pages(
            comparison.edited,
            paper=paper,
            title="Reworded sentence: word evidence",
            changed=_changed_words(comparison, "edited"),
        ),
        heads_page(comparison, paper=paper),
    ]


def explanation_figure(
    ex: SentenceExplanation, comparison: RewordingComparison | None = None, *, paper: str = DEFAULT_PAPER
) -> Figure:
    """The first page of :func:`explanation_pages` (a ``Figure``, not attached to any GUI)."""
    return explanation_pages(ex, comparison, paper=paper)[0]


def save_explanation_figure(
    path: Path,
    ex: SentenceExplanation,
    comparison: RewordingComparison | None = None,
    *,
    paper: str = DEFAULT_PAPER,
) -> list[Path]:
    """Write every page to ``path`` (.pdf: one file; .png/.svg: ``name.png``, ``name-2.png`` ...), atomically."""
    from inspector.figures.pages import save_pages

    check_figure_path(path)
    return save_pages(explanation_pages(ex, comparison, paper=paper), Path(path))
