"""Corpus-level analysis: one streaming pass over a labelled evaluation set, then
head importance and a pruning simulation.

Qt-free entry point for the CLI and the window: :func:`run_corpus` takes a
progress callback ``on_progress(done, total)`` (units are batches over all
phases), a per-phase one ``on_step(PhaseProgress)`` (utterances for the scan and
the importance pass, pruning steps for the simulation, with the time elapsed in
the phase), ``on_result(phase, report)`` called with the results so far as each
phase ends, and a cancel check ``should_stop() -> bool`` polled before every
batch; a cancelled run raises :class:`CorpusCancelled` (what ``on_result`` already
delivered stays valid).

The scan keeps no attention: every batch's per-head metrics are folded into a
running mean and spread (:class:`inspector.corpus.streaming.RunningMoments`), the
pairwise Jensen-Shannon sums into one heads x heads matrix and the predictions
into a confusion matrix, so memory does not grow with the number of utterances
beyond one predicted label and two probabilities per utterance (12 bytes) and
the misfire list.

Rows compared for redundancy: comparing every pair of heads on every real query
row costs ``pairs x rows x keys``. With ``js_rows="auto"`` (the default) every
row is compared when that fits the scan budget (comparison_budget); otherwise a pilot of a few
utterances measures how much each pair's divergence varies from row to row, and
each real row is kept with one common probability (seeded) so that the expected
sample gives every pair a standard error of about a fifth of the near-duplicate
cut. The kept rows are a simple random sample of the set's rows, so each pair's
mean is unbiased and carries its standard error; near-duplicate groups and the
``duplicates`` pruning order use a pair only when its mean plus twice its
standard error is within the cut (see :mod:`inspector.corpus.redundancy`).
``js_rows=None`` compares every row; a number draws about that many rows.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Sequence
from contextlib import nullcontext
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import torch

from inspector import formatting as fmt
from inspector.checkpoint.capture import AttentionRecorder, HeadGates, require_finite
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask, masked
from inspector.corpus.batching import EncodedSet, PaddedBatch, encode_set, length_limit
from inspector.corpus.dataset import LabelledSet
from inspector.corpus.importance import HeadImportance, ImportanceAccumulator, gate_gradients
from inspector.corpus.pruning import (
    DEFAULT_PASSES,
    PruningCurve,
    PruningResult,
    gates_for,
    largest_safe_step,
    make_order,
    masked_first,
    measure_adaptively,
    step_counts,
)
from inspector.corpus.redundancy import (
    DEFAULT_GROUP_THRESHOLD,
    DEFAULT_JS_ROWS,
    PILOT_UTTERANCES,
    TARGET_SE_FRACTION,
    DivergenceSums,
    Redundancy,
    comparison_budget,
    comparison_cost,
    sample_size,
)
from inspector.corpus.settings import CorpusSettings
from inspector.corpus.streaming import RunningMoments
from inspector.errors import HeadcountError
from inspector.measures.metrics import METRIC_NAMES, head_metrics, window_reach

ProgressCallback = Callable[[int, int], None]
StopCheck = Callable[[], bool]
PhaseCallback = Callable[[str], None]

PHASES = {
    "scan": "Scanning the set (predictions, head metrics, redundancy)",
    "importance": "Head importance (gate gradients)",
    "pruning": "Pruning simulation (no retraining)",
}
PHASE_UNITS = {"scan": "utterance", "importance": "utterance", "pruning": "step"}
"""What each phase counts: utterances passed through the model, or pruning steps (one
accuracy measurement over the pruning set, a fraction of a step per batch)."""


@dataclass(frozen=True)
class PhaseProgress:
    """Where one phase of a corpus run stands."""

    phase: str
    done: float
    """Units finished (pruning steps advance by a fraction per batch)."""
    total: float
    """Units planned for the phase."""
    elapsed: float
    """Seconds since the phase started."""

    @property
    def unit(self) -> str:
        """What the phase counts (utterances for a phase of another stage, such as the comparison's pass)."""
        return PHASE_UNITS.get(self.phase, "utterance")

    @property
    def finished(self) -> bool:
        return self.done >= self.total

    def seconds_left(self) -> float | None:
        """Time left at the phase's own pace so far: ``elapsed * (total - done) / done`` (None before any work)."""
        if self.done <= 0 or self.elapsed <= 0:
            return None
        return max(self.elapsed * (self.total - self.done) / self.done, 0.0)


StepCallback = Callable[[PhaseProgress], None]
ResultCallback = Callable[[str, "CorpusReport"], None]


class CorpusCancelled(Exception):
    """Raised inside :func:`run_corpus` when ``should_stop()`` returned True."""


def _utterances(item: object) -> int:
    """Utterances in one batch item (an index array or a padded batch)."""
    index = getattr(item, "index", item)
    return len(index)


class Progress:
    """Counts finished batches across phases and units within the current phase; polls the cancel check."""

    def __init__(
        self,
        total: int,
        on_progress: ProgressCallback | None = None,
        should_stop: StopCheck | None = None,
        on_phase: PhaseCallback | None = None,
        on_step: StepCallback | None = None,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.total = total
        self.done = 0
        self.on_progress = on_progress
        self.should_stop = should_stop
        self.on_phase = on_phase
        self.on_step = on_step
        self.clock = clock
        self.current: str | None = None
        self.phase_total = 0.0
        self.phase_done = 0.0
        self.per_unit = 1
        """Utterances that make one unit of the current phase (1, or the pruning set's size)."""
        self._start = 0.0

    def phase(self, name: str, total: float = 0.0, per_unit: int = 1) -> None:
        """Start phase ``name`` with ``total`` units of ``per_unit`` utterances each."""
        self.current, self.phase_total, self.phase_done = name, float(total), 0.0
        self.per_unit, self._start = max(int(per_unit), 1), self.clock()
        if self.on_phase is not None:
            self.on_phase(name)
        self._report()

    def end_phase(self) -> None:
        """Mark the current phase complete (its plan may have been an estimate)."""
        if self.current is not None:
            self.phase_total = self.phase_done = max(self.phase_done, self.phase_total)
            self._report()

    def state(self) -> PhaseProgress | None:
        if self.current is None:
            return None
        return PhaseProgress(self.current, self.phase_done, self.phase_total, self.clock() - self._start)

    def _report(self) -> None:
        state = self.state()
        if self.on_step is not None and state is not None:
            self.on_step(state)

    def check(self) -> None:
        if self.should_stop is not None and self.should_stop():
            raise CorpusCancelled("the corpus run was cancelled")

    def advance(self, utterances: int = 0) -> None:
        """One more batch done, holding ``utterances`` utterances."""
        self.done += 1
        if self.on_progress is not None:
            self.on_progress(self.done, self.total)
        if self.current is not None:
            self.phase_done += utterances / self.per_unit
            self.phase_total = max(self.phase_total, self.phase_done)
            self._report()

    def batches(self, items: Sequence[np.ndarray]):
        """Yield ``items`` one by one, checking for cancel before and counting after each."""
        for item in items:
            self.check()
            yield item
            self.advance(_utterances(item))


# ----------------------------------------------------------------------------- evaluation


@dataclass(frozen=True)
class Misfire:
    """A wrongly predicted utterance."""

    row: int
    """Line number in the data file."""
    text: str
    expected: str
    predicted: str
    confidence: float
    """Probability the model gave its (wrong) prediction."""
    expected_probability: float


@dataclass(frozen=True)
class IntentScore:
    label: str
    precision: float
    recall: float
    f1: float
    support: int


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num = np.asarray(num, dtype=np.float64)
    return np.divide(num, den, out=np.zeros_like(num), where=den > 0)


@dataclass
class Evaluation:
    """Classification results over the set, all derived from the confusion matrix.

    Formulas: accuracy = trace(C) / sum(C); per label c, precision = C[c,c] /
    sum_i C[i,c], recall = C[c,c] / sum_j C[c,j], F1 = 2 C[c,c] / (row + column
    sums), 0 where undefined; macro-F1 = unweighted mean of F1 over the labels
    that occur as gold or predicted label (scikit-learn's default label set).
    """

    labels: list[str]
    confusion: np.ndarray
    """[labels, labels] counts; rows = gold label, columns = predicted, in ``labels`` order."""
    predicted: np.ndarray
    """[utterances] predicted label index, in data order."""
    confidence: np.ndarray
    """[utterances] probability of the predicted label."""
    misfires: list[Misfire]
    """Wrong predictions, most confident first."""

    @property
    def total(self) -> int:
        return int(self.confusion.sum())

    @property
    def accuracy(self) -> float:
        return float(np.trace(self.confusion) / max(self.total, 1))

    def _parts(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        tp = np.diag(self.confusion).astype(np.float64)
        gold = self.confusion.sum(1)
        pred = self.confusion.sum(0)
        return tp, gold, pred, _ratio(2 * tp, gold + pred)

    @property
    def macro_f1(self) -> float:
        _, gold, pred, f1 = self._parts()
        present = (gold + pred) > 0
        return float(f1[present].mean()) if present.any() else 0.0

    @property
    def per_intent(self) -> list[IntentScore]:
        tp, gold, pred, f1 = self._parts()
        precision, recall = _ratio(tp, pred), _ratio(tp, gold)
        return [
            IntentScore(lab, float(precision[i]), float(recall[i]), float(f1[i]), int(gold[i]))
            for i, lab in enumerate(self.labels)
        ]


# ----------------------------------------------------------------------------- scan


@dataclass
class HeadStatistics:
    """Per-head metric mean and spread over utterances."""

    mean: dict[str, np.ndarray]
    """Metric name -> [layers, heads] mean over utterances."""
    std: dict[str, np.ndarray]
    """Metric name -> [layers, heads] population standard deviation over utterances."""
    count: int


@dataclass
class ScanResult:
    evaluation: Evaluation
    heads: HeadStatistics
    redundancy: Redundancy


def label_indices(lm: LoadedModel, data: LabelledSet) -> np.ndarray:
    """Gold label index of every utterance in the model's label order."""
    index = {lab: i for i, lab in enumerate(lm.labels)}
    try:
        return np.array([index[lab] for lab in data.labels], dtype=np.int64)
    except KeyError as exc:
        raise HeadcountError(f"label {exc} is not one of the model's labels") from None


def _check_classifier(lm: LoadedModel) -> None:
    if not lm.has_prediction or not lm.labels:
        raise HeadcountError(
            f"{lm.name}: the corpus analysis needs a sequence classifier with labels (this is a {lm.task})"
        )


_PILOT_ROWS = 256
"""At most this many pilot rows are compared to estimate the pairs' spread."""
SAMPLE_WORTH = 0.75
"""Rows are sampled only when the pilot and the sample together compare fewer than this share of all rows."""


def _real_rows(att: torch.Tensor, mask: torch.Tensor) -> torch.Tensor:
    """Every real query row: [rows, layers*heads, tokens] with padded keys zeroed."""
    b_idx, t_idx = mask.nonzero(as_tuple=True)
    flat = att.flatten(1, 2)  # [B, L*H, T, T]
    return flat[b_idx, :, t_idx, :] * mask[b_idx][:, None, :].to(att.dtype)


@dataclass(frozen=True)
class RowPlan:
    """Which real query rows the redundancy measure compares."""

    keep: float | None
    """Probability with which each real row is kept (None: every row)."""
    pilot_rows: int = 0
    """Rows of the pilot that sized the sample (0: no pilot)."""


def plan_rows(
    lm: LoadedModel,
    encoded: EncodedSet,
    rec: AttentionRecorder,
    js_rows: int | str | None,
    *,
    threshold: float,
    budget: float | None,
    seed: int,
) -> RowPlan:
    """Every row when affordable (or asked for), else a sample sized from a pilot.

    Parameters
    ----------
    js_rows : 'auto', None or int
        ``auto``: every row if :func:`inspector.corpus.redundancy.comparison_cost` is within
        ``budget`` (None: :func:`inspector.corpus.redundancy.comparison_budget`), else about
        :func:`inspector.corpus.redundancy.sample_size` rows (a standard error of
        ``TARGET_SE_FRACTION * threshold`` for the pair that varies most in the pilot);
        None: every row; an int: about that many rows.

    References
    ----------
    Cochran (1977), "Sampling Techniques", sec. 4.4 (sizing a simple random sample from a
    pilot estimate of the variance).
    """
    total = int(encoded.lengths.sum())
    if js_rows is None or total == 0:
        return RowPlan(None)
    if js_rows != "auto":
        wanted = int(js_rows)
        return RowPlan(None if wanted >= total else wanted / total)
    if budget is None:
        embeddings = lm.model.get_input_embeddings().weight.numel()
        encoder = sum(p.numel() for p in lm.model.parameters()) - embeddings
        budget = comparison_budget(encoder, total)
    if comparison_cost(encoded.lengths, lm.num_layers * lm.num_heads) <= budget:
        return RowPlan(None)
    rng = np.random.default_rng(seed)
    pilot = np.sort(rng.choice(len(encoded), size=min(PILOT_UTTERANCES, len(encoded)), replace=False))
    batch = encoded.batch(pilot)
    with torch.inference_mode():
        lm.model(**batch.inputs)
        rows = _real_rows(rec.attention(), batch.mask)
    if rows.shape[0] > _PILOT_ROWS:
        rows = rows[torch.from_numpy(np.sort(rng.choice(rows.shape[0], size=_PILOT_ROWS, replace=False)))]
    sums = DivergenceSums(rows.shape[1])
    sums.add(rows)
    var = sums.variance()
    largest = float(var[np.triu_indices(len(var), 1)].max()) if len(var) > 1 else 0.0
    n = sample_size(largest, TARGET_SE_FRACTION * threshold, total)
    if n + rows.shape[0] > SAMPLE_WORTH * total:  # sampling would save little: compare every row
        return RowPlan(None, pilot_rows=int(rows.shape[0]))
    return RowPlan(n / total, pilot_rows=int(rows.shape[0]))


def scan(
    lm: LoadedModel,
    data: LabelledSet,
    *,
    encoded: EncodedSet | None = None,
    batch_size: int = 32,
    js_rows: int | str | None = DEFAULT_JS_ROWS,
    group_threshold: float = DEFAULT_GROUP_THRESHOLD,
    seed: int = 0,
    redundancy: bool = True,
    js_budget: float | None = None,
    progress: Progress | None = None,
) -> ScanResult:
    """One streaming pass: predictions, per-head metric moments, pairwise head divergence.

    Parameters
    ----------
    lm : LoadedModel
        A sequence classifier.
    data : LabelledSet
        Utterances with labels the model knows.
    encoded : EncodedSet, optional
        ``encode_set(lm, data.texts)`` if already computed.
    batch_size : int
        Utterances per batch (batches are cut after sorting by length).
    js_rows : 'auto', int or None
        Real query rows compared for redundancy: the rule of :func:`plan_rows`
        (``auto``), about this many rows (int), or every row (None).
    group_threshold : float
        Near-duplicate cut in bits of mean Jensen-Shannon divergence.
    seed : int
        Seed of the row draw.
    redundancy : bool
        Compute the pairwise divergences (False leaves them at 0; for benchmarks).
    js_budget : float, optional
        Comparisons (rows x head pairs x keys) that may be spent before rows are sampled
        (default: :func:`inspector.corpus.redundancy.comparison_budget` for this model and set).
    progress : Progress, optional

    Returns
    -------
    ScanResult

    Notes
    -----
    Per-head metrics are the functions of :mod:`inspector.measures.metrics` evaluated in
    torch on the whole padded batch ``[batch, layers, heads, T, T]`` with
    masks: one value per utterance and head, averaged over real queries; their
    mean and population standard deviation over utterances are streamed.

    References
    ----------
    Clark et al. (2019), "What Does BERT Look At?" (per-head statistics over a
    corpus); Lin (1991) for the Jensen-Shannon divergence.
    """
    _check_classifier(lm)
    encoded = encoded or encode_set(lm, data.texts)
    progress = progress or Progress(0)
    gold = label_indices(lm, data)
    n_labels, layers, heads = len(lm.labels), lm.num_layers, lm.num_heads
    confusion = np.zeros((n_labels, n_labels), dtype=np.int64)
    predicted = np.zeros(len(data), dtype=np.int32)
    conf = np.zeros(len(data), dtype=np.float32)
    gold_prob = np.zeros(len(data), dtype=np.float32)
    moments = RunningMoments((len(METRIC_NAMES), layers, heads))
    divergence = DivergenceSums(layers * heads)
    rows_total = 0
    gen = torch.Generator().manual_seed(seed)
    with AttentionRecorder(lm, copy_out=True) as rec:  # no stacking copy per batch
        plan = RowPlan(None)
        if redundancy:
            plan = plan_rows(
                lm, encoded, rec, js_rows, threshold=group_threshold, budget=js_budget, seed=seed
            )
        for index in progress.batches(encoded.sorted_batches(batch_size)):
            batch = encoded.batch(index)
            with torch.inference_mode():
                logits = lm.model(**batch.inputs).logits
                att = rec.attention()
                require_finite("attention weights or logits", logits, att)
                reach = window_reach(lm.windows, att.shape[-1])
                found = head_metrics(
                    att, batch.special[:, None, None, :], batch.mask[:, None, None, :], reach=reach
                )
                moments.update(torch.stack([found.get(n) for n in METRIC_NAMES], 1).numpy())
                if redundancy:
                    rows = _real_rows(att, batch.mask)
                    rows_total += rows.shape[0]
                    if plan.keep is not None:
                        rows = rows[torch.rand(rows.shape[0], generator=gen) < plan.keep]
                    divergence.add(rows)
                probs = torch.softmax(logits.double(), -1)
            top = probs.argmax(-1).numpy()
            predicted[index] = top
            conf[index] = probs.max(-1).values.numpy()
            gold_prob[index] = probs[torch.arange(len(index)), torch.from_numpy(gold[index])].numpy()
            np.add.at(confusion, (gold[index], top), 1)
    wrong = np.flatnonzero(predicted != gold)
    wrong = wrong[np.argsort(-conf[wrong], kind="stable")]
    misfires = [
        Misfire(
            row=data.rows[i],
            text=data.texts[i],
            expected=data.labels[i],
            predicted=lm.labels[predicted[i]],
            confidence=float(conf[i]),
            expected_probability=float(gold_prob[i]),
        )
        for i in wrong
    ]
    stats = HeadStatistics(
        mean={n: moments.mean[k] for k, n in enumerate(METRIC_NAMES)},
        std={n: moments.std[k] for k, n in enumerate(METRIC_NAMES)},
        count=moments.count,
    )
    js_mean = divergence.mean()
    sampled = divergence.rows_compared < rows_total
    return ScanResult(
        evaluation=Evaluation(list(lm.labels), confusion, predicted, conf, misfires),
        heads=stats,
        redundancy=Redundancy(
            js_mean,
            layers,
            heads,
            rows_total,
            divergence.rows_compared,
            group_threshold,
            standard_error=divergence.standard_error(rows_total) if sampled else None,
        ),
    )


# ----------------------------------------------------------------------------- importance


def importance_pass(
    lm: LoadedModel,
    encoded: EncodedSet,
    gold: np.ndarray,
    *,
    batch_size: int = 32,
    progress: Progress | None = None,
) -> HeadImportance:
    """Expected absolute gate gradient of every head over the set (one forward+backward per batch).

    Parameters
    ----------
    lm : LoadedModel
    encoded : EncodedSet
    gold : ndarray of shape (utterances,)
        Gold label indices.
    batch_size : int
    progress : Progress, optional

    Returns
    -------
    HeadImportance

    References
    ----------
    Michel, Levy & Neubig (2019), "Are Sixteen Heads Really Better than One?".
    """
    _check_classifier(lm)
    progress = progress or Progress(0)
    acc = ImportanceAccumulator(lm.num_layers, lm.num_heads)
    for index in progress.batches(encoded.sorted_batches(batch_size)):
        grads, losses = gate_gradients(lm, encoded.batch(index), torch.from_numpy(gold[index]))
        require_finite("gate gradients or losses", grads, losses)
        acc.add(grads, losses)
    return acc.result()


# ----------------------------------------------------------------------------- pruning


def predict(
    lm: LoadedModel,
    batches: Sequence[PaddedBatch] | Sequence[np.ndarray],
    encoded: EncodedSet,
    *,
    gates: np.ndarray | None = None,
    progress: Progress | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Predicted label of every utterance in ``batches``, optionally with heads gated.

    Returns ``(index, predicted)``: the utterance positions and their predictions.
    """
    progress = progress or Progress(0)
    g = None if gates is None else torch.as_tensor(gates, dtype=torch.float32)
    index, out = [], []
    with torch.inference_mode():
        with HeadGates(lm, g) if g is not None else nullcontext():
            for item in progress.batches(batches):
                batch = item if isinstance(item, PaddedBatch) else encoded.batch(item)
                out.append(lm.model(**batch.inputs).logits.argmax(-1).numpy())
                index.append(batch.index)
    return np.concatenate(index), np.concatenate(out)


def pruning_subset(n: int, cap: int | None, seed: int) -> np.ndarray | None:
    """Positions of the utterances evaluated per pruning step (None = all)."""
    if cap is None or cap >= n:
        return None
    return np.sort(np.random.default_rng(seed).choice(n, size=cap, replace=False))


def simulate_pruning(
    lm: LoadedModel,
    encoded: EncodedSet,
    gold: np.ndarray,
    orders: dict[str, list[tuple[int, int]]],
    *,
    batch_size: int = 32,
    every: int | None = 1,
    subset: np.ndarray | None = None,
    baseline: float | None = None,
    progress: Progress | None = None,
    start: int = 0,
    mask_order: str | None = None,
    max_drop: float = 0.01,
    remove: int | None = None,
    budget: int = DEFAULT_PASSES,
) -> list[PruningCurve]:
    """Accuracy after switching off growing prefixes of each removal order.

    Parameters
    ----------
    lm : LoadedModel
    encoded : EncodedSet
    gold : ndarray of shape (utterances,)
    orders : dict name -> list of (layer, head)
        Each a permutation of all heads.
    batch_size : int
    every : int or None
        Measure after every ``every`` removed heads (and at the end). None: choose the
        steps adaptively (:func:`inspector.corpus.pruning.measure_adaptively`), at most
        ``budget`` passes over the set: coarse steps for every order, fine ones along
        ``mask_order`` where its accuracy crosses ``max_drop``.
    subset : ndarray, optional
        Utterance positions to evaluate on (default all).
    baseline : float, optional
        Accuracy with no head removed on the same utterances, if known.
    progress : Progress, optional
    start : int
        Heads already off when the simulation starts (the first ``start`` of
        every order, see :func:`inspector.corpus.pruning.masked_first`); the
        curves begin there.
    mask_order, max_drop, remove, budget
        For the adaptive choice: the order the exported heads come from (default the
        first), the accuracy tolerance, a fixed count to measure as well, the passes.

    Returns
    -------
    list of PruningCurve

    Notes
    -----
    Heads are switched off through gates only: nothing is retrained, so every
    curve must be re-validated on a pruned and fine-tuned model.

    References
    ----------
    Michel, Levy & Neubig (2019), section 4 (pruning heads by importance, accuracy
    against the fraction of heads removed, without retraining).
    """
    progress = progress or Progress(0)
    layers, heads = lm.num_layers, lm.num_heads
    # Pad once: every step reuses the same tensors.
    batches = [encoded.batch(i) for i in encoded.sorted_batches(batch_size, subset)]
    used = np.concatenate([b.index for b in batches])

    def accuracy(removed: list[tuple[int, int]]) -> float:
        idx, pred = predict(lm, batches, encoded, gates=gates_for(removed, layers, heads), progress=progress)
        return float(np.mean(pred == gold[idx]))

    first = baseline if baseline is not None else accuracy(next(iter(orders.values()))[:start])
    curves = []
    if every is None:
        planned = progress.done + len(batches) * (budget + (remove is not None))
        measured, _ = measure_adaptively(
            orders,
            mask_order or next(iter(orders)),
            first,
            accuracy,
            max_drop=max_drop,
            budget=budget,
            remove=remove,
            first=start,
        )
        while progress.done < planned:  # the search may stop before its budget: the bar still ends full
            progress.advance()
        for name, order in orders.items():
            points = measured[name]
            curves.append(PruningCurve(name, list(order), list(points), list(points.values()), len(used)))
        return curves
    for name, order in orders.items():
        steps = step_counts(len(order), every, start)
        accs = [first] + [accuracy(order[:k]) for k in steps[1:]]
        curves.append(PruningCurve(name, list(order), steps, accs, len(used)))
    return curves


def choose_mask(
    curves: list[PruningCurve], order_name: str, *, max_drop: float, remove: int | None = None
) -> tuple[list[tuple[int, int]], float | None]:
    """The heads to remove from ``order_name``'s curve, and their accuracy if it was measured.

    With ``remove`` given, the first ``remove`` heads of that order; otherwise the
    largest measured prefix whose accuracy never fell more than ``max_drop``
    below the start (see :func:`inspector.corpus.pruning.largest_safe_step`). The
    accuracy is None when that many heads is not a measured step.
    """
    curve = next(c for c in curves if c.order_name == order_name)
    count = remove if remove is not None else largest_safe_step(curve, max_drop)
    measured = dict(zip(curve.steps, curve.accuracy))
    return curve.order[:count], measured.get(count)


# ----------------------------------------------------------------------------- run


@dataclass
class CorpusReport:
    """Everything a corpus run found."""

    model_name: str
    data: LabelledSet
    settings: CorpusSettings
    num_layers: int
    num_heads: int
    evaluation: Evaluation
    heads: HeadStatistics
    redundancy: Redundancy
    importance: HeadImportance | None = None
    pruning: PruningResult | None = None
    notes: list[str] = field(default_factory=list)
    model_path: str | None = None
    """The checkpoint folder the run used (the review report reloads it to explain misfires)."""


def pruning_steps(settings: CorpusSettings, n_heads_total: int, baseline_known: bool) -> int:
    """Accuracy measurements the pruning simulation plans (each one pass over the pruning set)."""
    if not settings.orders:
        return 0
    if settings.prune_every is None:  # at most the budget (the search may stop earlier)
        return settings.prune_passes + (settings.remove is not None) + (0 if baseline_known else 1)
    steps = step_counts(n_heads_total, settings.prune_every, len(set(settings.mask)))
    passes = (len(steps) - 1) * len(settings.orders) + (0 if baseline_known else 1)
    if settings.remove is not None and settings.remove not in steps:
        passes += 1
    return passes


def plan_total(
    n_batches: int, n_prune_batches: int, settings: CorpusSettings, n_heads_total: int, baseline_known: bool
) -> int:
    """Number of batch units :func:`run_corpus` will report, for the progress bar."""
    total = n_batches * (2 if settings.importance else 1)
    return total + n_prune_batches * pruning_steps(settings, n_heads_total, baseline_known)


def run_corpus(
    lm: LoadedModel,
    data: LabelledSet,
    settings: CorpusSettings | None = None,
    *,
    on_progress: ProgressCallback | None = None,
    should_stop: StopCheck | None = None,
    on_phase: PhaseCallback | None = None,
    on_step: StepCallback | None = None,
    on_result: ResultCallback | None = None,
) -> CorpusReport:
    """Analyse a whole labelled set: evaluation, head statistics, redundancy, importance, pruning.

    Parameters
    ----------
    lm : LoadedModel
        A sequence classifier.
    data : LabelledSet
        From :func:`inspector.corpus.dataset.read_labelled` with ``known_labels=lm.labels``.
    settings : CorpusSettings, optional
    on_progress : callable(done, total), optional
        Called after every batch of every phase.
    should_stop : callable() -> bool, optional
        Polled before every batch; True raises :class:`CorpusCancelled`.
    on_phase : callable(name), optional
        Called with ``'scan'``, ``'importance'``, ``'pruning'`` as each phase starts.
    on_step : callable(PhaseProgress), optional
        Called as each phase starts and after every batch, with that phase's
        progress in its own unit (see :data:`PHASE_UNITS`).
    on_result : callable(phase, CorpusReport), optional
        Called as each phase ends with a copy of the report so far (the scan's
        evaluation and head statistics first, then importance, then pruning).

    Returns
    -------
    CorpusReport

    Notes
    -----
    With ``settings.mask``, the whole run is on the masked model: the scan,
    importance (a switched-off head's importance is 0) and the pruning curves,
    which start with the mask's heads off and continue from there.

    While it runs, forward hooks (attention recorder, head gates) sit on
    ``lm.model``: run nothing else on the same model object at the same time
    (from another thread), or it would see gated heads. Call it off the GUI
    thread; it returns only when done, cancelled (CorpusCancelled) or failed
    (HeadcountError).

    References
    ----------
    Michel, Levy & Neubig (2019) for importance and pruning; Lin (1991) for the
    Jensen-Shannon divergence; Clark et al. (2019) for per-head statistics.
    """
    settings = settings or CorpusSettings()
    _check_classifier(lm)
    settings.check(lm)
    mask = HeadMask.of(settings.mask)
    with masked(lm, mask):
        return _run_corpus(lm, data, settings, mask, on_progress, should_stop, on_phase, on_step, on_result)


def _run_corpus(
    lm: LoadedModel,
    data: LabelledSet,
    settings: CorpusSettings,
    mask: HeadMask,
    on_progress: ProgressCallback | None,
    should_stop: StopCheck | None,
    on_phase: PhaseCallback | None,
    on_step: StepCallback | None = None,
    on_result: ResultCallback | None = None,
) -> CorpusReport:
    encoded = encode_set(lm, data.texts)
    gold = label_indices(lm, data)
    n_total = lm.num_layers * lm.num_heads
    n_batches = len(encoded.sorted_batches(settings.batch_size))
    subset = pruning_subset(len(data), settings.prune_subset, settings.seed)
    n_prune = len(encoded.sorted_batches(settings.batch_size, subset))
    progress = Progress(
        plan_total(n_batches, n_prune, settings, n_total, subset is None),
        on_progress,
        should_stop,
        on_phase,
        on_step,
    )
    pruned_set = len(data) if subset is None else len(subset)

    def phase_done(name: str) -> None:
        progress.end_phase()
        if on_result is not None:
            on_result(name, dataclasses.replace(report, notes=list(report.notes)))

    progress.phase("scan", len(data))
    found = scan(
        lm,
        data,
        encoded=encoded,
        batch_size=settings.batch_size,
        js_rows=settings.js_rows,
        group_threshold=settings.group_threshold,
        js_budget=settings.js_budget,
        seed=settings.seed,
        progress=progress,
    )
    report = CorpusReport(
        model_name=lm.name,
        model_path=str(Path(lm.path).resolve()),
        data=data,
        settings=settings,
        num_layers=lm.num_layers,
        num_heads=lm.num_heads,
        evaluation=found.evaluation,
        heads=found.heads,
        redundancy=found.redundancy,
    )
    limit = length_limit(lm)
    at_limit = int((encoded.lengths >= limit).sum())
    if at_limit:
        report.notes.append(
            f"{fmt.count(at_limit, 'utterance')} reached the model's {limit}-token limit and "
            + ("was" if at_limit == 1 else "were")
            + " cut there."
        )
    red = found.redundancy
    if red.sampled:
        report.notes.append(
            f"Head redundancy compares {red.rows_compared} of {red.rows_total} real query rows drawn at random "
            f"(seed {settings.seed}); the largest standard error of a pair is "
            f"{fmt.bits(red.largest_standard_error)}, and a pair counts as a near-duplicate only if its "
            f"divergence plus twice its standard error is within {fmt.bits(red.threshold)}."
        )
    phase_done("scan")
    if settings.importance:
        progress.phase("importance", len(data))
        report.importance = importance_pass(
            lm, encoded, gold, batch_size=settings.batch_size, progress=progress
        )
        phase_done("importance")
    if settings.orders:
        progress.phase("pruning", pruning_steps(settings, n_total, subset is None), per_unit=pruned_set)
        imp = report.importance.normalized if report.importance is not None else None
        orders = {
            name: masked_first(
                make_order(
                    name,
                    lm.num_layers,
                    lm.num_heads,
                    importance=imp,
                    js=red.js,
                    js_bound=red.upper_bound,
                    threshold=red.threshold,
                    seed=settings.seed,
                ),
                mask.heads,
            )
            for name in settings.orders
        }
        baseline = found.evaluation.accuracy if subset is None else None
        mask_order = settings.chosen_mask_order
        curves = simulate_pruning(
            lm,
            encoded,
            gold,
            orders,
            batch_size=settings.batch_size,
            every=settings.prune_every,
            subset=subset,
            baseline=baseline,
            progress=progress,
            start=len(mask),
            mask_order=mask_order,
            max_drop=settings.max_drop,
            remove=settings.remove,
            budget=settings.prune_passes,
        )
        removed, after = choose_mask(curves, mask_order, max_drop=settings.max_drop, remove=settings.remove)
        if after is None:  # a fixed count between measured steps: measure it
            after = simulate_pruning(
                lm,
                encoded,
                gold,
                {mask_order: removed},
                batch_size=settings.batch_size,
                every=max(1, len(removed)),
                subset=subset,
                baseline=curves[0].accuracy[0],
                progress=progress,
                start=len(mask),
            )[0].accuracy[-1]
        measured_sets = {frozenset(c.order[:k]) for c in curves for k in c.steps if k > 0}
        measured_sets.add(frozenset(removed))
        report.pruning = PruningResult(
            curves=curves,
            mask_order=mask_order,
            removed=removed,
            accuracy_before=curves[0].accuracy[0],
            accuracy_after=after,
            max_drop=None if settings.remove is not None else settings.max_drop,
            every=settings.prune_every,
            subset=None if subset is None else len(subset),
            passes=len(measured_sets - {frozenset()}) + (baseline is None),
        )
        if subset is not None:
            report.notes.append(
                f"Pruning steps were evaluated on {len(subset)} of {fmt.count(len(data), 'utterance')} (seeded draw)."
            )
        if settings.prune_every is None:
            report.notes.append(pruning_note(report.pruning))
        elif settings.prune_every > 1:
            report.notes.append(
                f"Pruning accuracy was measured after every {fmt.count(settings.prune_every, 'head')}."
            )
        phase_done("pruning")
    return report


def pruning_note(pruning: PruningResult) -> str:
    """What an adaptive simulation measured, and how closely the exported set was located."""
    curve = pruning.curve(pruning.mask_order)
    kept = len(pruning.removed)
    later = [k for k in curve.steps if k > kept]
    where = (
        f"the next measured step, {later[0]} heads, is the first that loses more"
        if later and pruning.max_drop is not None
        else "no later step was measured"
    )
    return (
        f"Pruning accuracy was measured at chosen steps ({pruning.passes} passes over the set): every order "
        f"at the same coarse steps, the {pruning.mask_order} order more finely where it crosses the tolerance; "
        f"{kept} heads kept the accuracy and {where}."
    )
