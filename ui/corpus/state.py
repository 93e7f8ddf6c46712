"""What the corpus page asks for and shows, without Qt.

:class:`CorpusRequest` holds the page's controls (data file, field names,
bad-row policy, run settings); :func:`compute_corpus` reads the file and runs
:func:`inspector.corpus.run.run_corpus` on the calling (worker) thread with the
same calls as ``headcount corpus``; the ``*_rows`` / ``*_text`` helpers turn a
:class:`inspector.corpus.run.CorpusReport` into the strings the page paints.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from inspector.checkpoint.loader import LoadedModel
from inspector.corpus.dataset import LabelledSet, read_labelled
from inspector.corpus.run import CorpusReport, StopCheck, run_corpus
from inspector.corpus.settings import CorpusSettings
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL

CORPUS_TORCH_THREADS = 1
"""Intra-op threads inside the corpus job: the GUI thread keeps the second core of a 2-core laptop."""
SHOWN_BAD_ROWS = 12
"""Bad rows listed on the page (the rest are counted; summary.json has them all)."""


@dataclass(frozen=True)
class CorpusRequest:
    """A corpus run as the page's controls describe it."""

    path: str
    text_field: str = "text"
    label_field: str = "label"
    on_bad_row: str = "skip"
    settings: CorpusSettings = field(default_factory=CorpusSettings)


def default_data_file(lm: LoadedModel | None) -> str:
    """The bundled evaluation set when the bundled sample model is open and the set exists, else ''."""
    if lm is None or not SAMPLE_EVAL.is_file():
        return ""
    try:
        same = Path(lm.path).resolve() == SAMPLE_MODEL.resolve()
    except OSError:
        same = False
    return str(SAMPLE_EVAL) if same else ""


def read_request(lm: LoadedModel, request: CorpusRequest) -> LabelledSet:
    """Read the request's data file with the model's labels (bad rows skipped or fatal)."""
    return read_labelled(
        request.path,
        text_field=request.text_field or "text",
        label_field=request.label_field or "label",
        known_labels=lm.labels if lm.has_prediction else None,
        on_bad_row=request.on_bad_row,
    )


def compute_corpus(
    lm: LoadedModel,
    request: CorpusRequest,
    *,
    on_progress=None,
    should_stop: StopCheck | None = None,
    on_phase=None,
) -> CorpusReport:
    """Read the data and run the whole corpus analysis on the calling (worker) thread.

    Raises :class:`inspector.corpus.run.CorpusCancelled` when ``should_stop()``
    turns True, :class:`inspector.errors.HeadcountError` for problems the user
    can fix. ``torch.set_num_threads`` acts on the calling thread only.
    """
    import torch

    if torch.get_num_threads() != CORPUS_TORCH_THREADS:
        torch.set_num_threads(CORPUS_TORCH_THREADS)
    request.settings.check(lm)
    data = read_request(lm, request)
    return run_corpus(
        lm, data, request.settings, on_progress=on_progress, should_stop=should_stop, on_phase=on_phase
    )


# ----------------------------------------------------------------------------- text for the page


def percent(value: float | None) -> str:
    return "n/a" if value is None else f"{100 * value:.1f}%"


def summary_html(report: CorpusReport) -> str:
    """The headline: accuracy, macro-F1, counts."""
    ev = report.evaluation
    return (
        f"<span style='font-size:15pt'><b>{percent(ev.accuracy)}</b></span> accuracy &nbsp; "
        f"<span style='font-size:15pt'><b>{ev.macro_f1:.3f}</b></span> macro-F1 &nbsp; "
        f"on {ev.total} utterances \u00b7 {len(ev.misfires)} misfire(s)"
    )


def data_report_html(data: LabelledSet) -> str:
    """Which file was read, and what was left out of it (bad rows by line number, unknown labels)."""
    lines = [f"<b>{html.escape(Path(data.path).name)}</b>: {len(data)} utterances used"]
    if data.bad_rows:
        shown = "".join(
            f"<li>line {b.row}: {html.escape(b.reason)}</li>" for b in data.bad_rows[:SHOWN_BAD_ROWS]
        )
        more = len(data.bad_rows) - SHOWN_BAD_ROWS
        tail = f"<li>\u2026 and {more} more (all are in summary.json)</li>" if more > 0 else ""
        lines.append(f"{len(data.bad_rows)} bad row(s) skipped:<ul style='margin:0'>{shown}{tail}</ul>")
    else:
        lines.append("no bad rows")
    if data.unknown_labels:
        listed = ", ".join(f"\u2018{html.escape(k)}\u2019 ({v} rows)" for k, v in data.unknown_labels.items())
        lines.append(f"labels the model does not know: {listed}")
    return "<br>".join(lines)


def intent_rows(report: CorpusReport) -> list[tuple[str, str, str, str, str]]:
    """(label, precision, recall, F1, support) per intent, as shown."""
    return [
        (s.label, f"{s.precision:.3f}", f"{s.recall:.3f}", f"{s.f1:.3f}", str(s.support))
        for s in report.evaluation.per_intent
    ]


def confusion_shares(confusion: np.ndarray) -> np.ndarray:
    """Each count as a share of its gold label's row (0 for labels with no utterance)."""
    c = np.asarray(confusion, dtype=np.float64)
    rows = c.sum(1, keepdims=True)
    return np.divide(c, rows, out=np.zeros_like(c), where=rows > 0)


def head_names(num_layers: int, num_heads: int) -> list[str]:
    """``L0H0, L0H1, ...`` in the flat order of the redundancy matrix (layer * heads + head)."""
    return [f"L{l}H{h}" for l in range(num_layers) for h in range(num_heads)]


def groups_html(report: CorpusReport) -> str:
    """The near-duplicate groups and the closest pairs."""
    red = report.redundancy
    if red.groups:
        items = "".join("<li>" + ", ".join(f"L{l} H{h}" for l, h in g) + "</li>" for g in red.groups)
        groups = f"<b>{len(red.groups)} near-duplicate group(s)</b><ul style='margin:0'>{items}</ul>"
    else:
        groups = "<b>No near-duplicate group</b>"
    pairs = "".join(
        f"<tr><td>L{p.layer_a} H{p.head_a} \u2013 L{p.layer_b} H{p.head_b}</td>"
        f"<td align=right>&nbsp;{p.js_divergence:.3f}</td></tr>"
        for p in red.pairs()[:5]
    )
    return (
        f"{groups}<span>every pair in a group within {red.threshold:g} bits of mean JS divergence</span>"
        f"<br><br><b>Closest pairs</b> (bits)<table cellspacing=1>{pairs}</table>"
    )


def mask_text(report: CorpusReport) -> str:
    """The chosen set of heads to remove, in one line."""
    pr = report.pruning
    if pr is None:
        return "No pruning simulated (choose at least one order)."
    total = report.num_layers * report.num_heads
    rule = f"tolerance {100 * pr.max_drop:.1f} pts" if pr.max_drop is not None else "fixed count"
    heads = ", ".join(f"L{l}H{h}" for l, h in sorted(pr.removed)) or "none"
    return (
        f"Chosen from the \u2018{pr.mask_order}\u2019 order ({rule}): remove {len(pr.removed)} of {total} heads "
        f"({len(pr.removed) / total:.0%}); accuracy {percent(pr.accuracy_before)} \u2192 "
        f"{percent(pr.accuracy_after)}. Heads: {heads}"
    )
