"""What the corpus page asks for and shows, without Qt.

:class:`CorpusRequest` holds the page's controls (data file, field names,
bad-row policy, run settings); :func:`compute_corpus` reads the file and runs
:func:`inspector.corpus.run.run_corpus` on the calling (worker) thread with the
same calls as ``headcount corpus``; the ``*_rows`` / ``*_text`` helpers turn a
:class:`inspector.corpus.run.CorpusReport` into the strings the page paints.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.checkpoint.pruned import PruneProvenance
from inspector.corpus.dataset import LabelledSet, read_labelled
from inspector.corpus.pruning import PruningCurve, PruningResult, largest_safe_step
from inspector.corpus.run import (
    CorpusReport,
    Misfire,
    PhaseProgress,
    ResultCallback,
    StepCallback,
    StopCheck,
    run_corpus,
)
from inspector.corpus.settings import CorpusSettings
from inspector.figures.report.pages import misfire_groups, pair_name
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL
from inspector.threads import background_job_threads, set_torch_threads

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
    on_step: StepCallback | None = None,
    on_result: ResultCallback | None = None,
) -> CorpusReport:
    """Read the data and run the whole corpus analysis on the calling (worker) thread.

    Raises :class:`inspector.corpus.run.CorpusCancelled` when ``should_stop()``
    turns True, :class:`inspector.errors.HeadcountError` for problems the user
    can fix. Torch uses :func:`inspector.threads.background_job_threads` threads (the GUI thread
    keeps a core; ``torch.set_num_threads`` acts on the calling thread only).
    """
    set_torch_threads(background_job_threads())
    request.settings.check(lm)
    data = read_request(lm, request)
    return run_corpus(
        lm,
        data,
        request.settings,
        on_progress=on_progress,
        should_stop=should_stop,
        on_phase=on_phase,
        on_step=on_step,
        on_result=on_result,
    )


def planned_phases(settings: CorpusSettings) -> list[str]:
    """The phases a run with ``settings`` goes through, in order."""
    return (
        ["scan"] + (["importance"] if settings.importance else []) + (["pruning"] if settings.orders else [])
    )


PHASE_TITLES = {"scan": "Scan", "importance": "Importance", "pruning": "Pruning"}
PHASE_WORDS = {"scan": "the scan", "importance": "head importance", "pruning": "the pruning simulation"}


def phase_text(p: PhaseProgress, titles: dict[str, str] = PHASE_TITLES) -> str:
    """A phase's progress in its own unit, with the time left at its pace so far.

    ``Scan: 256 of 513 utterances, about 12 s left``; ``Pruning: 3 of 36 steps``;
    ``Importance: 513 utterances in 4.2 s`` when done. ``titles`` names the phases.
    """
    title = titles.get(p.phase, p.phase)
    total = int(round(p.total))
    if p.finished and total:
        return f"{title}: {fmt.count(total, p.unit)} in {fmt.duration(p.elapsed)}"
    text = f"{title}: {int(p.done):,} of {fmt.count(total, p.unit)}"
    left = p.seconds_left()
    return text if left is None else f"{text}, about {fmt.duration(left)} left"


def cancel_text(finished: list[str], stopped: str | None, had_previous: bool) -> str:
    """What a cancelled run leaves on the page, in one line."""
    during = f" during {PHASE_WORDS[stopped]}" if stopped else ""
    if not finished:
        kept = "the results below are from the previous run" if had_previous else "nothing was shown"
        return f"Cancelled{during} \u2014 {kept}"
    done = " and ".join(PHASE_WORDS[p] for p in finished)
    return f"Cancelled{during} \u2014 kept what finished: {done}"


# ----------------------------------------------------------------------------- text for the page


def summary_html(report: CorpusReport) -> str:
    """The headline: accuracy, macro-F1, counts."""
    ev = report.evaluation
    return (
        f"<span style='font-size:15pt'><b>{fmt.percent(ev.accuracy)}</b></span> accuracy &nbsp; "
        f"<span style='font-size:15pt'><b>{fmt.percent(ev.macro_f1)}</b></span> macro-F1 &nbsp; "
        f"on {fmt.count(ev.total, 'utterance')} \u00b7 {fmt.count(len(ev.misfires), 'misfire')}"
    )


def data_report_html(data: LabelledSet) -> str:
    """Which file was read, and what was left out of it (bad rows by line number, unknown labels)."""
    lines = [f"<b>{html.escape(Path(data.path).name)}</b>: {fmt.count(len(data), 'utterance')} used"]
    if data.bad_rows:
        shown = "".join(
            f"<li>line {b.row}: {html.escape(b.reason)}</li>" for b in data.bad_rows[:SHOWN_BAD_ROWS]
        )
        more = len(data.bad_rows) - SHOWN_BAD_ROWS
        tail = f"<li>\u2026 and {more} more (all are in summary.json)</li>" if more > 0 else ""
        lines.append(
            f"{fmt.count(len(data.bad_rows), 'bad row')} skipped:<ul style='margin:0'>{shown}{tail}</ul>"
        )
    else:
        lines.append("no bad rows")
    if data.unknown_labels:
        listed = ", ".join(
            f"\u2018{html.escape(k)}\u2019 ({fmt.count(v, 'row')})" for k, v in data.unknown_labels.items()
        )
        lines.append(f"labels the model does not know: {listed}")
    return "<br>".join(lines)


def intent_rows(report: CorpusReport) -> list[tuple[str, str, str, str, str]]:
    """(label, precision, recall, F1, support) per intent, as shown."""
    return [
        (s.label, fmt.percent(s.precision), fmt.percent(s.recall), fmt.percent(s.f1), str(s.support))
        for s in report.evaluation.per_intent
    ]


def confusion_shares(confusion: np.ndarray) -> np.ndarray:
    """Each count as a share of its gold label's row (0 for labels with no utterance)."""
    c = np.asarray(confusion, dtype=np.float64)
    rows = c.sum(1, keepdims=True)
    return np.divide(c, rows, out=np.zeros_like(c), where=rows > 0)


def head_names(num_layers: int, num_heads: int) -> list[str]:
    """``L0H0, L0H1, ...`` in the flat order of the redundancy matrix (layer * heads + head)."""
    return [fmt.head_name(l, h) for l in range(num_layers) for h in range(num_heads)]


def groups_html(report: CorpusReport) -> str:
    """The near-duplicate groups and the closest pairs."""
    red = report.redundancy
    if red.groups:
        items = "".join("<li>" + ", ".join(fmt.head_name(l, h) for l, h in g) + "</li>" for g in red.groups)
        groups = (
            f"<b>{fmt.count(len(red.groups), 'near-duplicate group')}</b><ul style='margin:0'>{items}</ul>"
        )
    else:
        groups = "<b>No near-duplicate group</b><br>"
    pairs = "".join(
        f"<tr><td>{fmt.head_name(p.layer_a, p.head_a)} \u2013 {fmt.head_name(p.layer_b, p.head_b)}</td>"
        f"<td align=right>&nbsp;{fmt.bits(p.js_divergence)}</td></tr>"
        for p in red.pairs()[:5]
    )
    if red.sampled:
        groups += (
            f"<span>{red.rows_compared} of {red.rows_total} rows sampled: a pair counts only if its divergence "
            f"+ 2 standard errors (up to {fmt.bits(red.largest_standard_error)}) is within the cut</span><br>"
        )
    return (
        f"{groups}<span>every pair in a group within {fmt.bits(red.threshold)} of mean JS divergence</span>"
        f"<br><br><b>Closest pairs</b> (mean JS divergence)<table cellspacing=1>{pairs}</table>"
    )


def mask_text(report: CorpusReport) -> str:
    """The chosen set of heads to remove, in one line."""
    pr = report.pruning
    if pr is None:
        return "No pruning simulated (choose at least one order)."
    total = report.num_layers * report.num_heads
    rule = f"tolerance {fmt.points(pr.max_drop)}" if pr.max_drop is not None else "chosen by count"
    heads = ", ".join(fmt.head_name(l, h) for l, h in sorted(pr.removed)) or "none"
    return (
        f"Chosen from the \u2018{pr.mask_order}\u2019 order ({rule}): remove {len(pr.removed)} of "
        f"{fmt.count(total, 'head')} ({fmt.percent(len(pr.removed) / total)}); accuracy "
        f"{fmt.percent(pr.accuracy_before)} \u2192 {fmt.percent(pr.accuracy_after)}. Heads: {heads}"
    )


# ----------------------------------------------------------------------------- choosing along the curves


@dataclass(frozen=True)
class MaskChoice:
    """A set of heads to switch off, read from a curve already computed (no model call)."""

    order: str
    """The removal order (curve) it comes from."""
    removed: int
    """How many heads: a measured step of that curve."""
    accuracy: float
    """The accuracy measured with exactly these heads off."""
    max_drop: float | None
    """The tolerance it was chosen by (None when picked by count or on the plot)."""
    heads: tuple[tuple[int, int], ...]
    """The first ``removed`` heads of the order."""

    @property
    def mask(self) -> HeadMask:
        return HeadMask.of(self.heads)


def _curve(result: PruningResult, order: str) -> PruningCurve:
    try:
        return result.curve(order)
    except KeyError:
        raise ValueError(f"no '{order}' curve in this run") from None


def _choice(curve: PruningCurve, step_index: int, max_drop: float | None) -> MaskChoice:
    removed = curve.steps[step_index]
    return MaskChoice(
        curve.order_name, removed, curve.accuracy[step_index], max_drop, tuple(curve.order[:removed])
    )


def choose_by_tolerance(result: PruningResult, order: str, max_drop: float) -> MaskChoice:
    """The most heads of ``order`` whose removal never cost more than ``max_drop`` (a fraction) of accuracy.

    The same rule as the corpus run (:func:`inspector.corpus.pruning.largest_safe_step`),
    applied to the curve already measured.
    """
    curve = _curve(result, order)
    count_ = largest_safe_step(curve, max_drop)
    return _choice(curve, curve.steps.index(count_), max_drop)


def choose_by_count(result: PruningResult, order: str, heads: int) -> MaskChoice:
    """The first ``heads`` heads of ``order``, or the nearest measured step below (accuracy is known there)."""
    curve = _curve(result, order)
    below = [i for i, s in enumerate(curve.steps) if s <= heads]
    return _choice(curve, below[-1] if below else 0, None)


def choose_point(result: PruningResult, curve_index: int, step_index: int) -> MaskChoice:
    """The mask of one measured point of one curve (a click on the plot)."""
    return _choice(result.curves[curve_index], step_index, None)


def choice_of(result: PruningResult) -> MaskChoice:
    """The run's own choice, as a :class:`MaskChoice`."""
    return MaskChoice(
        result.mask_order,
        len(result.removed),
        result.accuracy_after,
        result.max_drop,
        tuple(result.removed),
    )


def find_on_curves(result: PruningResult, mask: HeadMask) -> MaskChoice | None:
    """The measured point whose heads are exactly ``mask``'s, if any curve has one."""
    want = set(mask.heads)
    for curve in result.curves:
        for i, removed in enumerate(curve.steps):
            if removed == len(want) and set(curve.order[:removed]) == want:
                return _choice(curve, i, None)
    return None


def with_choice(report: CorpusReport, choice: MaskChoice) -> CorpusReport:
    """The report with its pruning choice replaced (what export, mask files and ``PRUNED.md`` then use)."""
    pr = report.pruning
    if pr is None:
        raise ValueError("this run simulated no pruning")
    chosen = replace(
        pr,
        mask_order=choice.order,
        removed=list(choice.heads),
        accuracy_after=choice.accuracy,
        max_drop=choice.max_drop,
    )
    return replace(report, pruning=chosen)


def with_threshold(report: CorpusReport, threshold: float) -> CorpusReport:
    """The report with its near-duplicate groups cut again at ``threshold`` bits, from the stored divergences."""
    return replace(report, redundancy=replace(report.redundancy, threshold=float(threshold)))


def provenance(report: CorpusReport) -> PruneProvenance:
    """What ``PRUNED.md`` says about the chosen mask of ``report``."""
    pr = report.pruning
    return PruneProvenance(
        data_file=str(report.data.path),
        utterances=pr.curves[0].utterances if pr else None,
        order=pr.mask_order if pr else None,
        accuracy_before=pr.accuracy_before if pr else None,
        accuracy_after=pr.accuracy_after if pr else None,
    )


# ----------------------------------------------------------------------------- misfires: filter and pairs


@dataclass(frozen=True)
class MisfireFilter:
    """Which misfires the table shows: a search text and, optionally, one confusable pair."""

    text: str = ""
    pair: tuple[str, str] | None = None
    """(expected, predicted), or None for every pair."""

    def matches(self, m: Misfire) -> bool:
        if self.pair is not None and (m.expected, m.predicted) != self.pair:
            return False
        words = self.text.strip().lower().split()
        haystack = f"{m.row} {m.text} {m.expected} {m.predicted}".lower()
        return all(w in haystack for w in words)

    def describe(self, shown: int, total: int) -> str:
        """``Showing 3 of 75 misfires: expected X → predicted Y, matching “boat”`` (or all of them)."""
        parts = []
        if self.pair is not None:
            parts.append(pair_name(*self.pair))
        if self.text.strip():
            parts.append(f"matching \u201c{self.text.strip()}\u201d")
        if not parts:
            return f"All {fmt.count(total, 'misfire')}, most confident first"
        return f"Showing {shown} of {fmt.count(total, 'misfire')}: " + ", ".join(parts)


def pair_rows(report: CorpusReport) -> list[tuple[tuple[str, str], int, float]]:
    """(pair, how many misfires, the most confident one's confidence) per confusable pair, largest first."""
    return [
        (pair, len(items), items[0].confidence) for pair, items in misfire_groups(report.evaluation.misfires)
    ]
