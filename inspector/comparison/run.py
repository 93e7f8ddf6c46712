"""A labelled set through two models: what the second one fixed, what it broke, which heads changed.

Qt-free entry point for the CLI and the window: :func:`compare_corpus` streams the set once
in length-sorted batches (:mod:`inspector.corpus.batching`); every batch runs through model A,
then model B, on the same padded tokens. Nothing per utterance is kept beyond the two
predictions and confidences: per-head metrics go into running means
(:class:`inspector.corpus.streaming.RunningMoments`), the head matching into one
``B heads x A heads`` sum (:class:`inspector.comparison.matching.MatchingSums`). Progress is
reported per batch (``on_progress(done, total)``) and ``should_stop()`` is polled before each
batch; a cancelled run raises :class:`inspector.corpus.run.CorpusCancelled`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import torch

from inspector.checkpoint.capture import AttentionRecorder
from inspector.checkpoint.loader import LoadedModel
from inspector.comparison.matching import HeadMatching, MatchingSums, pick_rows
from inspector.comparison.pairing import check_comparable, same_position, shared_labels
from inspector.comparison.settings import ComparisonSettings
from inspector.corpus.batching import encode_set, length_limit
from inspector.corpus.dataset import LabelledSet
from inspector.corpus.run import (
    CorpusCancelled,
    Evaluation,
    HeadStatistics,
    Misfire,
    PhaseCallback,
    Progress,
    ProgressCallback,
    StepCallback,
    StopCheck,
    label_indices,
)
from inspector.corpus.streaming import RunningMoments
from inspector.measures.metrics import METRIC_NAMES, head_metrics, window_reach

__all__ = ["ComparisonReport", "CorpusCancelled", "compare_corpus"]

PHASE = "compare"
PHASES = {PHASE: "Running both models over the set (predictions, head metrics, head matching)"}


@dataclass(frozen=True)
class ChangedUtterance:
    """An utterance one model got right and the other wrong."""

    row: int
    """Line number in the data file."""
    text: str
    label: str
    """The expected (gold) label."""
    predicted_a: str
    predicted_b: str
    confidence_a: float
    """Probability model A gave its own prediction."""
    confidence_b: float


@dataclass(frozen=True)
class IntentChange:
    """One intent's scores in both models (B minus A in the ``*_delta`` properties)."""

    label: str
    support: int
    precision_a: float
    precision_b: float
    recall_a: float
    recall_b: float
    f1_a: float
    f1_b: float

    @property
    def precision_delta(self) -> float:
        return self.precision_b - self.precision_a

    @property
    def recall_delta(self) -> float:
        return self.recall_b - self.recall_a

    @property
    def f1_delta(self) -> float:
        return self.f1_b - self.f1_a


@dataclass
class ComparisonReport:
    """Everything a comparison over a labelled set found."""

    model_a: str
    model_b: str
    data: LabelledSet
    settings: ComparisonSettings
    evaluation_a: Evaluation
    evaluation_b: Evaluation
    agreement: float
    """Share of utterances where both models predict the same label."""
    table: np.ndarray
    """[2, 2] counts: rows A right / A wrong, columns B right / B wrong."""
    fixed: list[ChangedUtterance]
    """Wrong in A, right in B; A's most confident mistakes first."""
    broken: list[ChangedUtterance]
    """Right in A, wrong in B; B's most confident mistakes first."""
    intents: list[IntentChange]
    heads_a: HeadStatistics
    heads_b: HeadStatistics
    matching: HeadMatching
    notes: list[str] = field(default_factory=list)

    def metric_delta(self, name: str) -> np.ndarray:
        """[layers_b, heads_b] B's mean of ``name`` minus A's at the same head (NaN where A has none)."""
        return same_position(self.heads_a.mean[name], self.heads_b.mean[name])

    @property
    def total(self) -> int:
        return int(self.table.sum())


class _Predictions:
    """Predicted label index, its probability and the gold label's probability, per utterance."""

    def __init__(self, n: int) -> None:
        self.index = np.zeros(n, dtype=np.int64)
        self.confidence = np.zeros(n, dtype=np.float64)
        self.gold_probability = np.zeros(n, dtype=np.float64)

    def add(self, where: np.ndarray, logits: torch.Tensor, gold: np.ndarray) -> None:
        probs = torch.softmax(logits.double(), -1)
        self.index[where] = probs.argmax(-1).numpy()
        self.confidence[where] = probs.max(-1).values.numpy()
        self.gold_probability[where] = probs[torch.arange(len(where)), torch.from_numpy(gold)].numpy()


def _evaluation(lm: LoadedModel, data: LabelledSet, gold: np.ndarray, pred: _Predictions) -> Evaluation:
    """Confusion matrix and misfires of one model, as the corpus run reports them."""
    n = len(lm.labels)
    confusion = np.zeros((n, n), dtype=np.int64)
    np.add.at(confusion, (gold, pred.index), 1)
    wrong = np.flatnonzero(pred.index != gold)
    wrong = wrong[np.argsort(-pred.confidence[wrong], kind="stable")]
    misfires = [
        Misfire(
            row=data.rows[i],
            text=data.texts[i],
            expected=data.labels[i],
            predicted=lm.labels[pred.index[i]],
            confidence=float(pred.confidence[i]),
            expected_probability=float(pred.gold_probability[i]),
        )
        for i in wrong
    ]
    return Evaluation(list(lm.labels), confusion, pred.index.astype(np.int32), pred.confidence, misfires)


def _changed(
    data: LabelledSet,
    where: np.ndarray,
    names_a: list[str],
    names_b: list[str],
    pa: _Predictions,
    pb: _Predictions,
) -> list[ChangedUtterance]:
    return [
        ChangedUtterance(
            row=data.rows[i],
            text=data.texts[i],
            label=data.labels[i],
            predicted_a=names_a[i],
            predicted_b=names_b[i],
            confidence_a=float(pa.confidence[i]),
            confidence_b=float(pb.confidence[i]),
        )
        for i in where
    ]


def _intent_changes(ev_a: Evaluation, ev_b: Evaluation, labels: list[str]) -> list[IntentChange]:
    scores_a = {s.label: s for s in ev_a.per_intent}
    scores_b = {s.label: s for s in ev_b.per_intent}
    return [
        IntentChange(
            label=lab,
            support=scores_a[lab].support,
            precision_a=scores_a[lab].precision,
            precision_b=scores_b[lab].precision,
            recall_a=scores_a[lab].recall,
            recall_b=scores_b[lab].recall,
            f1_a=scores_a[lab].f1,
            f1_b=scores_b[lab].f1,
        )
        for lab in labels
    ]


def compare_corpus(
    lm_a: LoadedModel,
    lm_b: LoadedModel,
    data: LabelledSet,
    settings: ComparisonSettings | None = None,
    *,
    on_progress: ProgressCallback | None = None,
    should_stop: StopCheck | None = None,
    on_phase: PhaseCallback | None = None,
    on_step: StepCallback | None = None,
) -> ComparisonReport:
    """Run a labelled set through two models and compare them.

    Parameters
    ----------
    lm_a, lm_b : LoadedModel
        Two sentence classifiers that share a tokenizer (layers, heads and label sets may
        differ; the set is scored on the labels both know).
    data : LabelledSet
        From :func:`inspector.corpus.dataset.read_labelled` with
        ``known_labels=shared_labels(lm_a, lm_b)``.
    settings : ComparisonSettings, optional
    on_progress : callable(done, total), optional
        Called after every batch.
    should_stop : callable() -> bool, optional
        Polled before every batch; True raises :class:`inspector.corpus.run.CorpusCancelled`.
    on_phase : callable(name), optional
        Called with ``'compare'`` when the pass starts.
    on_step : callable(PhaseProgress), optional
        Called when the pass starts and after every batch with the utterances done, the
        utterances in the set and the seconds since the start (the window's bar and time left).

    Returns
    -------
    ComparisonReport

    Notes
    -----
    Accuracy, per-intent scores and macro-F1 of each model come from its confusion matrix
    (as in :class:`inspector.corpus.run.Evaluation`). Agreement = share of utterances with
    the same predicted label. Per head: the mean of every metric over utterances in each
    model and B minus A at the same position; the head matching is the mean over real
    query rows of ``JS(alpha^B_{l'h'}, alpha^A_{lh})`` in bits for every pair of heads, on
    at most ``settings.match_rows`` rows per batch drawn without replacement (each standing
    for ``real rows / drawn rows``, an unbiased mean; Horvitz & Thompson 1952).

    References
    ----------
    Lin (1991) for the Jensen-Shannon divergence; Clark et al. (2019) for per-head
    statistics; Horvitz & Thompson (1952) for the reweighted row sample.
    """
    settings = settings or ComparisonSettings()
    settings.check()
    check_comparable(lm_a, lm_b)
    labels = shared_labels(lm_a, lm_b)
    shorter = min((lm_a, lm_b), key=length_limit)
    encoded = encode_set(shorter, data.texts)
    gold_a, gold_b = label_indices(lm_a, data), label_indices(lm_b, data)
    batches = encoded.sorted_batches(settings.batch_size)
    progress = Progress(len(batches), on_progress, should_stop, on_phase, on_step)
    progress.phase(PHASE, total=len(data))
    n = len(data)
    pred_a, pred_b = _Predictions(n), _Predictions(n)
    moments_a = RunningMoments((len(METRIC_NAMES), lm_a.num_layers, lm_a.num_heads))
    moments_b = RunningMoments((len(METRIC_NAMES), lm_b.num_layers, lm_b.num_heads))
    sums = MatchingSums(lm_a.num_layers, lm_a.num_heads, lm_b.num_layers, lm_b.num_heads)
    gen = torch.Generator().manual_seed(settings.seed)
    with AttentionRecorder(lm_a) as rec_a, AttentionRecorder(lm_b) as rec_b:
        for index in progress.batches(batches):
            batch = encoded.batch(index)
            special, mask = batch.special[:, None, None, :], batch.mask[:, None, None, :]
            with torch.inference_mode():
                logits_a = lm_a.model(**batch.inputs).logits
                att_a = rec_a.attention()
                logits_b = lm_b.model(**batch.inputs).logits
                att_b = rec_b.attention()
                for lm, att, moments in ((lm_a, att_a, moments_a), (lm_b, att_b, moments_b)):
                    reach = window_reach(lm.windows, att.shape[-1])  # local-window layers (ModernBERT)
                    found = head_metrics(att, special, mask, reach=reach)
                    moments.update(torch.stack([found.get(m) for m in METRIC_NAMES], 1).numpy())
                pick, n_real = pick_rows(batch.mask, settings.match_rows, gen)
                sums.add(att_a, att_b, batch.mask, pick, n_real)
            pred_a.add(index, logits_a, gold_a[index])
            pred_b.add(index, logits_b, gold_b[index])
    ev_a = _evaluation(lm_a, data, gold_a, pred_a)
    ev_b = _evaluation(lm_b, data, gold_b, pred_b)
    names_a = [lm_a.labels[i] for i in pred_a.index]
    names_b = [lm_b.labels[i] for i in pred_b.index]
    right_a = pred_a.index == gold_a
    right_b = pred_b.index == gold_b
    table = np.array(
        [
            [np.sum(right_a & right_b), np.sum(right_a & ~right_b)],
            [np.sum(~right_a & right_b), np.sum(~right_a & ~right_b)],
        ],
        dtype=np.int64,
    )
    fixed = np.flatnonzero(~right_a & right_b)
    fixed = fixed[np.argsort(-pred_a.confidence[fixed], kind="stable")]
    broken = np.flatnonzero(right_a & ~right_b)
    broken = broken[np.argsort(-pred_b.confidence[broken], kind="stable")]
    report = ComparisonReport(
        model_a=lm_a.name,
        model_b=lm_b.name,
        data=data,
        settings=settings,
        evaluation_a=ev_a,
        evaluation_b=ev_b,
        agreement=float(np.mean(np.array(names_a) == np.array(names_b))),
        table=table,
        fixed=_changed(data, fixed, names_a, names_b, pred_a, pred_b),
        broken=_changed(data, broken, names_a, names_b, pred_a, pred_b),
        intents=_intent_changes(ev_a, ev_b, labels),
        heads_a=_statistics(moments_a),
        heads_b=_statistics(moments_b),
        matching=sums.result(),
    )
    _add_notes(report, lm_a, lm_b, labels, encoded, shorter)
    return report


def _statistics(moments: RunningMoments) -> HeadStatistics:
    return HeadStatistics(
        mean={n: moments.mean[k] for k, n in enumerate(METRIC_NAMES)},
        std={n: moments.std[k] for k, n in enumerate(METRIC_NAMES)},
        count=moments.count,
    )


def _add_notes(report: ComparisonReport, lm_a, lm_b, labels, encoded, shorter) -> None:
    notes = report.notes
    only = sorted(set(lm_a.labels) ^ set(lm_b.labels))
    if only:
        notes.append(
            f"The models' label sets differ ({', '.join(only[:6])}{' ...' if len(only) > 6 else ''}); "
            f"the set is scored on the {len(labels)} labels both know."
        )
    if (lm_a.num_layers, lm_a.num_heads) != (lm_b.num_layers, lm_b.num_heads):
        notes.append(
            f"{lm_a.name} has {lm_a.num_layers} x {lm_a.num_heads} heads and {lm_b.name} "
            f"{lm_b.num_layers} x {lm_b.num_heads}: same-position values exist only where both have the head; "
            "the matching runs across all heads."
        )
    limit = length_limit(shorter)
    at_limit = int((encoded.lengths >= limit).sum())
    if at_limit:
        notes.append(f"{at_limit} utterance(s) reached the {limit}-token limit and were cut there.")
    m = report.matching
    if m.rows_compared < m.rows_total:
        notes.append(
            f"The head matching compares {m.rows_compared} of {m.rows_total} real query rows "
            f"(at most {report.settings.match_rows} drawn per batch, seed {report.settings.seed}, "
            "reweighted to an unbiased mean); unchanged heads are checked on every row."
        )
