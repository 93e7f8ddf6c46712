"""What the comparison view runs and shows, without Qt.

:func:`compute_comparison` reads the corpus page's data file against the labels both models
know and runs :func:`inspector.comparison.run.compare_corpus` on the calling (worker) thread,
with the same calls as ``headcount compare``; the ``*_rows`` / ``*_html`` helpers turn a
:class:`inspector.comparison.run.ComparisonReport` into the strings the view paints (through
:mod:`inspector.formatting`).
"""

from __future__ import annotations

import html

import numpy as np

from inspector.checkpoint.loader import LoadedModel
from inspector.comparison.pairing import shared_labels
from inspector.comparison.run import PHASE, ChangedUtterance, ComparisonReport, compare_corpus
from inspector.comparison.settings import ComparisonSettings
from inspector.corpus.dataset import read_labelled
from inspector.corpus.run import PhaseProgress, StepCallback, StopCheck
from inspector.formatting import bits, count, head_name, percent, points, signed
from inspector.threads import background_job_threads, set_torch_threads
from ui.corpus.state import CorpusRequest, phase_text

CHANGED_HEADER = ("Line", "Utterance", "Expected", "A said", "B said")
INTENT_HEADER = ("Intent", "F1 of A", "F1 of B", "Change")
TABLE_ROWS = ("A right", "A wrong")
TABLE_COLUMNS = ("B right", "B wrong")
TABLE_MEANING = (("both right", "broken by B"), ("fixed by B", "both wrong"))
COMPARE_TITLES = {PHASE: "Comparison"}
"""The comparison's one phase and the title of its progress bar."""


def progress_text(p: PhaseProgress) -> str:
    """The progress bar's text: ``Comparison: 64 of 513 utterances, about 12 s left``."""
    return phase_text(p, COMPARE_TITLES)


def compute_comparison(
    lm_a: LoadedModel,
    lm_b: LoadedModel,
    request: CorpusRequest,
    settings: ComparisonSettings | None = None,
    *,
    on_step: StepCallback | None = None,
    should_stop: StopCheck | None = None,
) -> ComparisonReport:
    """Read the request's data file and compare the two models on it (worker thread).

    Raises :class:`inspector.corpus.run.CorpusCancelled` when ``should_stop()`` turns True and
    :class:`inspector.errors.HeadcountError` for problems the user can fix.
    """
    set_torch_threads(background_job_threads())
    data = read_labelled(
        request.path,
        text_field=request.text_field or "text",
        label_field=request.label_field or "label",
        known_labels=shared_labels(lm_a, lm_b),
        on_bad_row=request.on_bad_row,
    )
    return compare_corpus(lm_a, lm_b, data, settings, on_step=on_step, should_stop=should_stop)


def headline_html(report: ComparisonReport) -> str:
    """Both models' accuracy and macro-F1, the change, the agreement."""
    ev_a, ev_b = report.evaluation_a, report.evaluation_b
    change = ev_b.accuracy - ev_a.accuracy
    return (
        f"<b>A</b> {html.escape(report.model_a)} <span style='font-size:14pt'><b>{percent(ev_a.accuracy)}</b></span>"
        f" &nbsp;\u2192&nbsp; <b>B</b> {html.escape(report.model_b)} "
        f"<span style='font-size:14pt'><b>{percent(ev_b.accuracy)}</b></span> accuracy "
        f"&nbsp;\u00b7&nbsp; change {points(change, signed=True)} &nbsp;\u00b7&nbsp; macro-F1 {percent(ev_a.macro_f1)} \u2192 "
        f"{percent(ev_b.macro_f1)} &nbsp;\u00b7&nbsp; the two agree on {percent(report.agreement)} of "
        f"{count(report.total, 'utterance')}"
    )


def table_texts(report: ComparisonReport) -> list[list[str]]:
    """The 2 x 2 table's cells: count, share of all utterances and what the cell means."""
    total = max(report.total, 1)
    return [
        [
            f"{int(report.table[r, c])}  ({percent(report.table[r, c] / total)})  {TABLE_MEANING[r][c]}"
            for c in range(2)
        ]
        for r in range(2)
    ]


def intent_rows(report: ComparisonReport) -> list[tuple[str, str, str, float, str]]:
    """(intent, F1 of A, F1 of B, F1 change, hover text) per intent, largest change first."""
    rows = sorted(report.intents, key=lambda c: (-abs(c.f1_delta), c.label))
    return [
        (
            c.label,
            percent(c.f1_a),
            percent(c.f1_b),
            c.f1_delta,
            f"{c.label}: {count(c.support, 'utterance')}; F1 {percent(c.f1_a)} \u2192 {percent(c.f1_b)} "
            f"({points(c.f1_delta, signed=True)}), recall {percent(c.recall_a)} \u2192 {percent(c.recall_b)}, "
            f"precision {percent(c.precision_a)} \u2192 {percent(c.precision_b)}",
        )
        for c in rows
    ]


def changed_rows(items: list[ChangedUtterance]) -> list[tuple[str, str, str, str, str]]:
    """(line, text, expected, A's answer, B's answer) for fixed or broken utterances."""
    return [
        (
            str(c.row),
            c.text,
            c.label,
            f"{c.predicted_a} {percent(c.confidence_a)}",
            f"{c.predicted_b} {percent(c.confidence_b)}",
        )
        for c in items
    ]


def change_texts(report: ComparisonReport) -> list[list[str]]:
    """Cell texts of the head change map: the divergence, '=' for unchanged heads, '' where A has none."""
    return report.matching.change_texts()


def change_description(report: ComparisonReport, layer: int, head: int, metric: str = "entropy") -> str:
    """Hover text of one head on the change map."""
    m = report.matching
    same = m.same_position[layer, head]
    la, ha = (int(v) for v in m.best_match[layer, head])
    name = head_name(layer, head)
    if np.isnan(same):
        first = f"B's {name}: A has no head here"
    elif m.unchanged[layer, head]:
        first = f"B's {name}: unchanged (the same weights as A's)"
    else:
        first = f"B's {name} against A's {name}: {bits(same)}"
    delta = report.metric_delta(metric)[layer, head]
    change = "" if np.isnan(delta) else f"; mean {metric} {signed(delta)}"
    return f"{first}; closest A head {head_name(la, ha)} ({bits(m.best_js[layer, head])}){change}"


def matching_description(report: ComparisonReport, row: int, col: int) -> str:
    """Hover text of one cell of the matching map (row: a head of B, column: a head of A)."""
    m = report.matching
    b = head_name(row // m.heads_b, row % m.heads_b)
    a = head_name(col // m.heads_a, col % m.heads_a)
    best = int(np.argmin(m.js[row]))
    tail = " \u2014 its closest A head" if best == col else ""
    return f"B's {b} against A's {a}: {bits(m.js[row, col])}{tail}"


def moved_html(report: ComparisonReport, limit: int = 6) -> str:
    """Heads of B whose closest A head sits at another position (clearly), as a short list."""
    moved = report.matching.moved()
    if not moved:
        return "Every head of B is closest to A's head at the same position."
    items = "".join(
        f"<li>B\u2019s {head_name(lb, hb)} \u2248 A\u2019s {head_name(la, ha)} ({bits(best)}; same position "
        + ("none" if np.isnan(same) else bits(same))
        + ")</li>"
        for lb, hb, la, ha, best, same in moved[:limit]
    )
    more = f"<li>\u2026 and {len(moved) - limit} more</li>" if len(moved) > limit else ""
    return f"<b>Heads of B that now resemble another head of A</b><ul style='margin:0'>{items}{more}</ul>"
