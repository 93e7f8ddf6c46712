"""The pages of the review report, each drawn on a :class:`inspector.figures.paper.Page`.

Every section yields its PDF pages and an HTML fragment (text and tables as
text, graphics as figures to embed), so the PDF and the HTML say the same.
"""

from __future__ import annotations

import html
from collections.abc import Sequence
from dataclasses import dataclass, field

from matplotlib.figure import Figure

from inspector import formatting as fmt
from inspector import palette
from inspector.corpus.pruning import CAUTION as PRUNING_CAUTION
from inspector.corpus.run import Evaluation, Misfire
from inspector.explanation.explain import CAUTION as EXPLAIN_CAUTION
from inspector.explanation.explain import SentenceExplanation
from inspector.figures import corpus as plots
from inspector.figures.explanation import agreement_rows, hint_lines, sentence_pages
from inspector.figures.paper import MARGIN, TITLE_FONT, Page, line_height, shorten, text_width, wrap
from inspector.figures.report.run_folder import RunFolder

BODY = 8.5
SMALL = 7.5


@dataclass
class Section:
    """One part of the report: its pages, and the same content for the HTML file."""

    title: str
    pages: list[Figure] = field(default_factory=list)
    html: str = ""
    """Text and tables (escaped HTML)."""
    images: list[Figure] = field(default_factory=list)
    """Graphics to embed in the HTML (PNG), after :attr:`html`."""


# ----------------------------------------------------------------------------- small drawing helpers


def _page(paper: str, landscape: bool = False) -> Page:
    return Page.paper(paper, landscape)


def _title(page: Page, text: str, y: float = MARGIN) -> float:
    page.text(MARGIN, y, text, TITLE_FONT + 2, weight="bold")
    return y + line_height(TITLE_FONT + 2) + 0.08


def _table(
    page: Page,
    x: float,
    y: float,
    widths: Sequence[float],
    header: Sequence[str],
    rows: Sequence[Sequence[str]],
    *,
    size: float = SMALL,
    right: Sequence[bool] = (),
    wrap_last: bool = False,
) -> float:
    """A text table (header in bold, a rule under it); returns the y below it. The last column may wrap."""
    right = list(right) + [False] * (len(widths) - len(right))
    lefts = [x + sum(widths[:k]) for k in range(len(widths))]
    for k, head in enumerate(header):
        tx = lefts[k] + widths[k] - 0.05 if right[k] else lefts[k]
        page.text(
            tx,
            y,
            shorten(head, widths[k] - 0.08, size),
            size,
            weight="bold",
            ha="right" if right[k] else "left",
        )
    y += line_height(size) + 0.02
    page.rule(x, y - 0.01, sum(widths))
    for row in rows:
        height = 1
        for k, cell in enumerate(row):
            tx = lefts[k] + widths[k] - 0.05 if right[k] else lefts[k]
            if wrap_last and k == len(row) - 1:
                lines = wrap(cell, widths[k] - 0.05, size)
                page.lines(tx, y, lines, size)
                height = max(height, len(lines))
            else:
                page.text(
                    tx, y, shorten(cell, widths[k] - 0.08, size), size, ha="right" if right[k] else "left"
                )
        y += height * line_height(size) + 0.02
    return y


def _html_table(header: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[bool] = ()) -> str:
    numeric = list(numeric) + [False] * (len(header) - len(numeric))
    head = "".join(f"<th>{html.escape(h)}</th>" for h in header)
    body = "".join(
        "<tr>"
        + "".join(
            f"<td class='num'>{html.escape(c)}</td>" if numeric[k] else f"<td>{html.escape(c)}</td>"
            for k, c in enumerate(row)
        )
        + "</tr>"
        for row in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _p(text: str) -> str:
    return f"<p>{html.escape(text)}</p>"


# ----------------------------------------------------------------------------- misfire groups


def misfire_groups(misfires: Sequence[Misfire]) -> list[tuple[tuple[str, str], list[Misfire]]]:
    """Misfires grouped by (expected, predicted): the largest group first (ties: the most confident misfire
    first), each group's misfires most confident first."""
    groups: dict[tuple[str, str], list[Misfire]] = {}
    for m in misfires:
        groups.setdefault((m.expected, m.predicted), []).append(m)
    for items in groups.values():
        items.sort(key=lambda m: -m.confidence)
    return sorted(groups.items(), key=lambda kv: (-len(kv[1]), -kv[1][0].confidence, kv[0]))


def pair_name(expected: str, predicted: str) -> str:
    """How a confusable pair is written: ``expected cancel_booking → predicted change_booking``."""
    return f"expected {expected} \u2192 predicted {predicted}"


def top_misfires(misfires: Sequence[Misfire], count: int) -> list[Misfire]:
    """The most confident misfire of each group, largest groups first, then further misfires, up to ``count``."""
    groups = misfire_groups(misfires)
    firsts = [items[0] for _, items in groups]
    rest = sorted((m for _, items in groups for m in items[1:]), key=lambda m: -m.confidence)
    return (firsts + rest)[: max(0, count)]


# ----------------------------------------------------------------------------- sections


def cover(run: RunFolder, date: str, contents: Sequence[tuple[str, int]], paper: str) -> Section:
    s = run.summary
    ev = run.evaluation
    data = s["data"]
    facts = [
        ("Model", run.model),
        ("Checkpoint", run.model_path or "not recorded in the run folder"),
        (
            "Data",
            f"{data['file']} ({fmt.count(data['utterances'], 'utterance')}, "
            f"{fmt.count(len(data['bad_rows']), 'bad row')} skipped)",
        ),
        ("Run folder", str(run.folder)),
        ("Report made", date),
        ("Accuracy", fmt.percent(ev.accuracy)),
        ("Macro-F1", fmt.percent(ev.macro_f1)),
        (
            "Misfires",
            f"{fmt.count(len(ev.misfires), 'misfire')} in "
            f"{fmt.count(len(misfire_groups(ev.misfires)), 'confusable pair')}",
        ),
        ("Model size", f"{fmt.count(run.layers, 'layer')} \u00d7 {fmt.count(run.heads, 'head')}"),
    ]
    if run.pruning is not None:
        pr = run.pruning
        after = "n/a" if pr.accuracy_after is None else fmt.percent(pr.accuracy_after)
        facts.append(
            ("Prune mask", f"{fmt.count(len(pr.removed), 'head')} from the \u2018{pr.mask_order}\u2019 order, "
                           f"accuracy {fmt.percent(pr.accuracy_before)} \u2192 {after} (not retrained)")
        )  # fmt: skip
    cautions = [f"{EXPLAIN_CAUTION} Read head statistics as descriptions, not causes.", PRUNING_CAUTION]
    page = _page(paper)
    y = page.lines(MARGIN, 1.0, ["Review report"], 20, weight="bold")
    y = page.lines(
        MARGIN, y + 0.05, [f"{run.model}: how it routes the evaluation set, and why it misfires"], 11
    )
    y += 0.3
    value_x = MARGIN + 1.3
    for name, value in facts:
        page.text(MARGIN, y, name, BODY, weight="bold")
        y = page.paragraph(value_x, y, value, page.width - MARGIN - value_x, BODY) + 0.04
    y += 0.25
    y = page.lines(MARGIN, y, ["Read with care"], 10, weight="bold") + 0.03
    for text in cautions:
        y = page.paragraph(MARGIN, y, "\u2022 " + text, page.inner_width, BODY) + 0.04
    y += 0.25
    y = page.lines(MARGIN, y, ["Contents"], 10, weight="bold") + 0.03
    for title, number in contents:
        page.text(MARGIN, y, title, BODY)
        page.text(page.width - MARGIN, y, f"page {number}", BODY, ha="right")
        y += line_height(BODY) + 0.03
    rows = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in facts)
    body = (
        f"<table class='facts'>{rows}</table><h3>Read with care</h3><ul>"
        + "".join(f"<li>{html.escape(t)}</li>" for t in cautions)
        + "</ul>"
    )
    return Section("Cover", [page.fig], body)


def scores(run: RunFolder, paper: str) -> Section:
    ev = run.evaluation
    header = ["Intent", "Precision", "Recall", "F1", "Support"]
    rows = [
        [s.label, fmt.percent(s.precision), fmt.percent(s.recall), fmt.percent(s.f1), str(s.support)]
        for s in ev.per_intent
    ]
    page = _page(paper)
    y = _title(page, "Scores per intent and the confusion matrix")
    y = page.lines(
        MARGIN, y, [f"Accuracy {fmt.percent(ev.accuracy)} \u00b7 macro-F1 {fmt.percent(ev.macro_f1)} "
                    f"\u00b7 {fmt.count(ev.total, 'utterance')}"], BODY + 1
    ) + 0.1  # fmt: skip
    y = _table(
        page, MARGIN, y, [2.6, 1.0, 1.0, 1.0, 0.9], header, rows, right=[False, True, True, True, True]
    )
    room = plots.label_room(list(ev.labels))
    caption = plots.confusion_caption(ev, run.model)
    cap_lines = wrap(caption, page.inner_width, SMALL)
    bottom_limit = page.height - MARGIN - len(cap_lines) * line_height(SMALL) - 0.15
    side = min(page.inner_width - room - 1.2, bottom_limit - (y + 0.35) - room)
    if side >= 1.5:
        end = plots.draw_confusion(page.fig, MARGIN + room, y + 0.35, side, ev)
        page.lines(MARGIN, max(end, y), cap_lines, SMALL, color=palette.DIM_INK)
        pages = [page.fig]
    else:  # many intents: the matrix on a page of its own
        second = _page(paper)
        top = _title(second, "Confusion matrix")
        side = min(second.inner_width - room - 1.2, second.height - top - 2 * MARGIN - room - 0.8)
        end = plots.draw_confusion(second.fig, MARGIN + room, top + 0.2, side, ev)
        second.lines(MARGIN, end, cap_lines, SMALL, color=palette.DIM_INK)
        pages = [page.fig, second.fig]
    matrix = plots.confusion_figure(ev, run.model)
    body = _p(f"Accuracy {fmt.percent(ev.accuracy)}, macro-F1 {fmt.percent(ev.macro_f1)} on "
              f"{fmt.count(ev.total, 'utterance')}.") + _html_table(header, rows, [False, True, True, True, True])  # fmt: skip
    return Section("Scores per intent and the confusion matrix", pages, body, [matrix])


def misfires(evaluation: Evaluation, paper: str, title: str = "Misfires by confusable pair") -> Section:
    groups = misfire_groups(evaluation.misfires)
    widths = [0.55, 0.85, 0.85]
    header = ["Line", "Confidence", "Expected p", "Utterance"]
    pages: list[Figure] = []
    page = _page(paper)
    y = _title(page, title)
    y = page.paragraph(
        MARGIN, y,
        "Each group is one confusable pair: what the utterance should have been, and what the model said. "
        "The largest groups come first; within a group, the most confident misfire first. Confidence is the "
        "probability of the (wrong) prediction; Expected p that of the expected label.",
        page.inner_width, BODY,
    ) + 0.1  # fmt: skip
    limit = page.height - MARGIN - 0.2
    parts = []
    if not groups:
        page.text(MARGIN, y, "No misfire: every utterance got its expected label.", BODY)
    text_w = page.inner_width - sum(widths)
    for (expected, predicted), items in groups:
        rows = [
            [str(m.row), fmt.percent(m.confidence), fmt.percent(m.expected_probability), m.text]
            for m in items
        ]
        heading = f"{pair_name(expected, predicted)} ({fmt.count(len(items), 'misfire')})"
        parts.append(
            f"<h3>{html.escape(heading)}</h3>" + _html_table(header, rows, [True, True, True, False])
        )
        start = 0
        while start < len(rows) or start == 0:
            need = line_height(BODY) + 0.3 + line_height(SMALL) * 2
            if y + need > limit:
                pages.append(page.fig)
                page = _page(paper)
                y = _title(page, f"{title} (continued)")
            page.text(MARGIN, y, heading + (" (continued)" if start else ""), BODY, weight="bold")
            y += line_height(BODY) + 0.05
            take = []
            room = limit - y - line_height(SMALL) - 0.05
            used = 0.0
            for row in rows[start:]:
                h = len(wrap(row[-1], text_w - 0.05, SMALL)) * line_height(SMALL) + 0.02
                if used + h > room and take:
                    break
                take.append(row)
                used += h
            y = _table(page, MARGIN, y, [*widths, text_w], header, take, right=[True, True, True, False],
                       wrap_last=True) + 0.15  # fmt: skip
            start += len(take)
            if start >= len(rows):
                break
    pages.append(page.fig)
    intro = _p(
        "Each group is one confusable pair; the largest groups first, within a group the most confident "
        "misfire first."
    )
    return Section(title, pages, intro + "".join(parts))


def explanations(items: Sequence[tuple[str, SentenceExplanation]], paper: str) -> Section:
    pages: list[Figure] = []
    parts = []
    for heading, ex in items:
        pages += sentence_pages(ex, paper=paper, title=heading)
        titles, rows = agreement_rows(ex)
        pred = ex.prediction
        line = f"\u201c{ex.text}\u201d \u2192 {pred.label} {fmt.percent(pred.probabilities[pred.label])}"
        if ex.expected:
            line += f"; expected {ex.expected} {fmt.percent(pred.probabilities[ex.expected])}"
        parts.append(
            f"<h3>{html.escape(heading)}</h3>{_p(line)}"
            + _html_table(titles, rows)
            + "<ul>"
            + "".join(f"<li>{html.escape(h)}</li>" for h in hint_lines(ex))
            + "</ul>"
        )
    intro = _p(
        "Word evidence for the predicted and the expected label, and the contrast (why the predicted label "
        "rather than the expected one), drawn as the Explain page draws it. " + EXPLAIN_CAUTION
    )
    return Section("Explanations of the top misfires", pages, intro + "".join(parts), list(pages))


def heads(run: RunFolder, paper: str) -> Section:
    page = _page(paper)
    y = _title(page, "Head importance")
    imp = run.importance
    if imp is None:
        page.text(MARGIN, y, "Head importance was not computed in this run (--no-importance).", BODY)
        return Section("Head importance", [page.fig], _p("Head importance was not computed in this run."))
    cell = plots.importance_cell(imp, page.inner_width - 2.0)
    end = plots.draw_importance(page.fig, MARGIN + 0.5, y + 0.35, cell, imp)
    y = page.paragraph(MARGIN, end, plots.importance_caption(imp, run.model), page.inner_width, SMALL,
                       color=palette.DIM_INK) + 0.2  # fmt: skip
    flat = sorted(
        ((float(imp.normalized[l, h]), l, h) for l in range(run.layers) for h in range(run.heads)),
        reverse=True,
    )
    most = [[fmt.head_name(l, h), fmt.weight(v)] for v, l, h in flat[:8]]
    least = [[fmt.head_name(l, h), fmt.weight(v)] for v, l, h in flat[::-1][:8]]
    _table(page, MARGIN, y, [1.0, 1.0], ["Most important", "importance"], most, right=[False, True])
    _table(page, MARGIN + 3.0, y, [1.0, 1.0], ["Least important", "importance"], least, right=[False, True])
    figure = plots.importance_figure(imp, run.model)
    body = _html_table(["Most important", "importance"], most, [False, True]) + _html_table(
        ["Least important", "importance"], least, [False, True]
    )
    return Section("Head importance", [page.fig], body, [figure])


def similarity(run: RunFolder, paper: str) -> Section:
    red = run.redundancy
    page = _page(paper)
    y = _title(page, "Head similarity and near-duplicate groups")
    side = min(page.inner_width - 1.8, 5.6)
    end = plots.draw_similarity(page.fig, MARGIN + 0.45, y + 0.3, side, red)
    y = page.paragraph(MARGIN, end, plots.similarity_caption(red, run.model), page.inner_width, SMALL,
                       color=palette.DIM_INK) + 0.15  # fmt: skip
    groups = [", ".join(fmt.head_name(l, h) for l, h in g) for g in red.groups]
    pairs = [
        [
            f"{fmt.head_name(p.layer_a, p.head_a)} \u2013 {fmt.head_name(p.layer_b, p.head_b)}",
            fmt.bits(p.js_divergence),
        ]
        for p in red.pairs()[:8]
    ]
    left = page.lines(
        MARGIN, y, [f"Near-duplicate groups ({fmt.count(len(groups), 'group')})"], BODY, weight="bold"
    )
    for g in groups[:12] or ["none: no two heads within the threshold"]:
        left = page.paragraph(MARGIN, left, "\u2022 " + g, 3.4, SMALL)
    if len(groups) > 12:
        page.text(MARGIN, left, f"\u2026 and {len(groups) - 12} more (summary.json lists them all)", SMALL)
    _table(page, MARGIN + 3.7, y, [1.6, 1.1], ["Closest pairs", "mean JS"], pairs, right=[False, True])
    figure = plots.similarity_figure(red, run.model)
    body = _p(f"Near-duplicate groups: {'; '.join(groups) or 'none'}.") + _html_table(
        ["Closest pairs", "mean JS"], pairs, [False, True]
    )
    return Section("Head similarity and near-duplicate groups", [page.fig], body, [figure])


def pruning(run: RunFolder, paper: str) -> Section:
    page = _page(paper)
    y = _title(page, "Pruning curve and the chosen mask")
    pr = run.pruning
    if pr is None:
        page.text(MARGIN, y, "No pruning was simulated in this run.", BODY)
        return Section("Pruning curve and the chosen mask", [page.fig], _p("No pruning was simulated."))
    end = plots.draw_pruning(page.fig, MARGIN + 0.55, y + 0.2, page.inner_width - 0.7, 3.8, pr)
    y = page.paragraph(MARGIN, end, plots.pruning_caption(pr, run.model), page.inner_width, SMALL,
                       color=palette.DIM_INK) + 0.2  # fmt: skip
    total = run.layers * run.heads
    rule = f"tolerance {fmt.points(pr.max_drop)}" if pr.max_drop is not None else "a fixed count"
    after = "n/a" if pr.accuracy_after is None else fmt.percent(pr.accuracy_after)
    text = (
        f"Chosen from the \u2018{pr.mask_order}\u2019 order ({rule}): remove {len(pr.removed)} of "
        f"{fmt.count(total, 'head')} ({fmt.percent(len(pr.removed) / total)}); accuracy "
        f"{fmt.percent(pr.accuracy_before)} \u2192 {after}."
    )
    heads_list = ", ".join(fmt.head_name(l, h) for l, h in sorted(pr.removed)) or "none"
    y = page.paragraph(MARGIN, y, text, page.inner_width, BODY) + 0.05
    y = page.paragraph(MARGIN, y, f"Heads: {heads_list}", page.inner_width, BODY) + 0.15
    page.paragraph(MARGIN, y, f"Caution: {pr.caution}", page.inner_width, BODY, weight="bold")
    figure = plots.pruning_figure(pr, run.model)
    body = _p(text) + _p(f"Heads: {heads_list}") + f"<p><b>Caution:</b> {html.escape(pr.caution)}</p>"
    return Section("Pruning curve and the chosen mask", [page.fig], body, [figure])


DEFINITIONS: tuple[tuple[str, str, str], ...] = (
    ("Accuracy", "share of utterances whose prediction is the expected label", "common practice, no source"),
    ("Precision, recall, F1", "per intent: TP/(TP+FP), TP/(TP+FN), their harmonic mean; macro-F1 is the "
     "unweighted mean over intents", "van Rijsbergen (1979)"),
    ("Confusion matrix", "counts of utterances by expected label (rows) and prediction (columns)",
     "common practice, no source"),
    ("Entropy", "mean over queries of \u2212\u03a3 \u03b1 ln \u03b1 (nats); normalised: each row divided by "
     "ln(real keys)", "Clark et al. (2019)"),
    ("Mean distance", "mean over queries of \u03a3 \u03b1_ij |i \u2212 j|, in tokens", "Dosovitskiy et al. (2020)"),
    ("Special-token, self, previous, next share", "weight a head puts on special tokens / the token itself / "
     "its neighbours", "Clark et al. (2019)"),
    ("Confidence of a head", "mean of each row's largest weight", "Voita et al. (2019)"),
    ("Attention rollout", "per layer the head mean, 0.5 A + 0.5 I, rows renormalised, multiplied up the "
     "stack; the classification token's row", "Abnar & Zuidema (2020)"),
    ("Value-weighted rollout", "rollout over ||\u03a3_h \u03b1 f_h(x_j)||, the norm of what each token "
     "passes on", "Kobayashi et al. (2020)"),
    ("Gradient-weighted rollout", "R \u2190 R + mean_h((\u2207A \u2299 A)\u207a) R, layer by layer",
     "Chefer, Gur & Wolf (2021)"),
    ("Integrated Gradients", "(x \u2212 x') \u00b7 \u222b \u2207F(x' + a(x \u2212 x')) da on the word "
     "embeddings, summed per word; F is a logit; completeness: the attributions sum to F(x) \u2212 F(x')",
     "Sundararajan, Taly & Yan (2017)"),
    ("Occlusion \u0394p, \u0394log-odds", "drop of the label's probability, and of its log-odds "
     "log(p/(1\u2212p)), when one word is left out", "Zeiler & Fergus (2014); Li, Monroe & Jurafsky (2016)"),
    ("Contrast", "the same methods on logit(predicted) \u2212 logit(expected) = log(p_pred/p_exp): why this "
     "label rather than the expected one", "linearity of IG, Sundararajan et al. (2017)"),
    ("Agreement \u03c1", "Spearman rank correlation of a relevance with occlusion over the words; flagged "
     "below 0.3", "Spearman (1904); Jain & Wallace (2019)"),
    ("Head importance", "mean |dL/d gate| of a gate on each head's output, l2-normalised per layer",
     "Michel, Levy & Neubig (2019)"),
    ("Head similarity", "1 \u2212 mean Jensen-Shannon divergence (bits) between two heads' attention rows; "
     "near-duplicate groups by complete linkage at 0.05 bits", "Lin (1991)"),
    ("Pruning curve", "accuracy as heads are switched off one by one (by importance, at random, "
     "duplicates first), without retraining", "Michel, Levy & Neubig (2019)"),
)  # fmt: skip
"""(measure, definition, source) for the appendix."""


def appendix(paper: str) -> Section:
    page = _page(paper)
    y = _title(page, "Appendix: what each measure means")
    widths = [1.9, page.inner_width - 1.9 - 2.2, 2.2]
    header = ["Measure", "Definition", "Source"]
    rows = [list(d) for d in DEFINITIONS]
    pages = []
    for row in rows:
        lines = max(len(wrap(row[1], widths[1] - 0.08, SMALL)), len(wrap(row[2], widths[2] - 0.05, SMALL)),
                    len(wrap(row[0], widths[0] - 0.08, SMALL)))  # fmt: skip
        if y + lines * line_height(SMALL) > page.height - MARGIN - 0.3:
            pages.append(page.fig)
            page = _page(paper)
            y = _title(page, "Appendix (continued)")
        for k, (x, w) in enumerate(zip([MARGIN, MARGIN + widths[0], MARGIN + widths[0] + widths[1]], widths)):
            page.lines(x, y, wrap(row[k], w - 0.08, SMALL), SMALL, weight="bold" if k == 0 else "normal")
        y += lines * line_height(SMALL) + 0.06
    pages.append(page.fig)
    body = _html_table(header, rows)
    return Section("Appendix: what each measure means", pages, body)


def footers(figs: Sequence[Figure], model: str) -> None:
    """``Review report · model · page k of n`` at the foot of every page."""
    n = len(figs)
    for k, fig in enumerate(figs, start=1):
        w, h = fig.get_size_inches()
        text = f"Review report \u00b7 {model} \u00b7 page {k} of {n}"
        fig.text(
            1 - MARGIN / w, 0.18 / h, text, fontsize=SMALL, ha="right", va="bottom", color=palette.DIM_INK
        )


def widest(texts: Sequence[str], size: float) -> float:
    return max((text_width(t, size) for t in texts), default=0.0)
