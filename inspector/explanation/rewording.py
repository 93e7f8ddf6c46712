"""Rewording: explain a sentence and a reworded (edited) copy side by side."""

from __future__ import annotations

import difflib
from dataclasses import dataclass

import numpy as np

from inspector.checkpoint import capture
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask, masked
from inspector.errors import HeadcountError
from inspector.explanation.choices import DEFAULT_RULE
from inspector.explanation.explain import (
    SentenceExplanation,
    StepReport,
    explain_sentence,
    label_index,
    require_classifier,
)
from inspector.explanation.gradients import Baseline, Rule
from inspector.explanation.occlusion import OcclusionMode
from inspector.measures.analysis import make_prediction
from inspector.measures.metrics import METRIC_NAMES


@dataclass(frozen=True)
class HeadChange:
    """One head's metric in both sentences."""

    layer: int
    head: int
    before: float
    after: float

    @property
    def change(self) -> float:
        return self.after - self.before


@dataclass(frozen=True)
class WordChange:
    """One edit step between the two word sequences (difflib opcodes)."""

    op: str
    """``equal``, ``replace``, ``delete`` or ``insert``."""
    original: tuple[int, int]
    """Word range [start, end) in the original sentence."""
    edited: tuple[int, int]
    """Word range [start, end) in the edited sentence."""


@dataclass
class RewordingComparison:
    """Two explanations of the same model, and how the heads reacted to the edit."""

    original: SentenceExplanation
    edited: SentenceExplanation
    labels: list[str]
    """Labels explained in both sentences: original prediction, edited prediction, expected."""
    metric: str
    """The per-head metric compared (a name from :data:`inspector.measures.metrics.METRIC_NAMES`)."""
    metric_before: np.ndarray
    """[layers, heads] the metric on the original sentence."""
    metric_after: np.ndarray
    """[layers, heads] the metric on the edited sentence."""
    top_heads: list[HeadChange]
    """Heads whose metric changed most (largest absolute change first)."""
    word_changes: list[WordChange]

    @property
    def difference(self) -> np.ndarray:
        """[layers, heads] ``after - before``."""
        return self.metric_after - self.metric_before

    @property
    def prediction_changed(self) -> bool:
        return self.original.prediction.label != self.edited.prediction.label

    def probability_shift(self, label: str) -> float:
        """How much the edit moved ``label``'s probability (edited minus original)."""
        return self.edited.prediction.probabilities[label] - self.original.prediction.probabilities[label]


def heads_that_changed(before: np.ndarray, after: np.ndarray, top: int) -> list[HeadChange]:
    """The ``top`` heads with the largest ``|after - before|`` (ties: lower layer, then head, first)."""
    diff = np.abs(np.asarray(after, dtype=np.float64) - np.asarray(before, dtype=np.float64))
    order = np.argsort(-diff, axis=None, kind="stable")[: max(0, top)]
    heads = diff.shape[1]
    return [
        HeadChange(int(i // heads), int(i % heads), float(before.flat[i]), float(after.flat[i]))
        for i in order
    ]


def word_changes(original: list[str], edited: list[str]) -> list[WordChange]:
    """Align the two word sequences (case-insensitive) with difflib's longest-matching-block rule."""
    matcher = difflib.SequenceMatcher(
        a=[w.lower() for w in original], b=[w.lower() for w in edited], autojunk=False
    )
    return [WordChange(op, (i1, i2), (j1, j2)) for op, i1, i2, j1, j2 in matcher.get_opcodes()]


def compare_rewording(
    lm: LoadedModel,
    original: str,
    edited: str,
    *,
    expected: str | None = None,
    metric: str = "entropy",
    top: int = 5,
    steps: int | None = None,
    occlusion: OcclusionMode = "remove",
    baseline: Baseline = "pad",
    rule: Rule = DEFAULT_RULE,
    mask: HeadMask | None = None,
    on_step: StepReport | None = None,
) -> RewordingComparison:
    """Explain ``original`` and ``edited`` for the same labels and compare them.

    Parameters
    ----------
    lm : LoadedModel
        A sentence classifier.
    original, edited : str
    expected : str, optional
        The label the original sentence should have had.
    metric : str, default 'entropy'
        Per-head metric to compare (see :data:`inspector.measures.metrics.METRIC_NAMES`).
    top : int, default 5
        How many most-changed heads to list.
    steps, occlusion, baseline, rule, mask, on_step
        Passed to :func:`inspector.explanation.explain.explain_sentence` (``on_step`` sees
        the stages of the original sentence, then those of the edited one, each stage
        name prefixed with ``original:`` or ``reworded:``).

    Returns
    -------
    RewordingComparison
        Both explanations, each covering the original's prediction, the edited
        sentence's prediction and the expected label; the metric per head in
        both and ``after - before``; the most-changed heads; a word alignment.

    References
    ----------
    Metrics: see :mod:`inspector.measures.metrics`. Word alignment: Ratcliff & Obershelp
    (1988) pattern matching, as implemented by Python's ``difflib``.
    """
    require_classifier(lm)
    if metric not in METRIC_NAMES:
        raise HeadcountError(f"unknown metric '{metric}' (known: {', '.join(METRIC_NAMES)})")
    if not edited or not edited.strip():
        raise HeadcountError("the edited sentence is empty")
    if expected is not None:
        label_index(lm, expected)
    with masked(lm, mask):
        first = capture.run(lm, [original, edited])
    preds = [make_prediction(lm.labels, first.logits[b]).label for b in range(2)]
    labels = list(dict.fromkeys([*preds, *([expected] if expected else [])]))
    options = dict(steps=steps, occlusion=occlusion, baseline=baseline, rule=rule, mask=mask)

    def tagged(side: str) -> StepReport | None:
        if on_step is None:
            return None
        return lambda stage, done, total: on_step(f"{side}: {stage}", done, total)

    a = explain_sentence(
        lm, original, expected=expected, extra_labels=labels, on_step=tagged("original"), **options
    )
    b = explain_sentence(
        lm, edited, expected=expected, extra_labels=labels, on_step=tagged("reworded"), **options
    )
    before = a.head_metrics.get(metric)
    after = b.head_metrics.get(metric)
    return RewordingComparison(
        original=a,
        edited=b,
        labels=labels,
        metric=metric,
        metric_before=before,
        metric_after=after,
        top_heads=heads_that_changed(before, after, top),
        word_changes=word_changes(a.words, b.words),
    )


def explain_with_rewording(
    lm: LoadedModel,
    text: str,
    edited: str | None = None,
    *,
    expected: str | None = None,
    metric: str = "entropy",
    top: int = 5,
    **options,
) -> tuple[SentenceExplanation, RewordingComparison | None]:
    """Explain ``text``, beside a rewording of it when ``edited`` is given (the CLI's and the window's call).

    Parameters
    ----------
    lm : LoadedModel
    text : str
    edited : str, optional
        A rewording to compare with: :func:`compare_rewording` runs; None explains ``text`` alone.
    expected, metric, top
        As in :func:`compare_rewording` (``metric`` and ``top`` matter only with a rewording).
    **options
        ``steps``, ``occlusion``, ``baseline``, ``rule``, ``mask``, ``on_step``, passed to
        :func:`inspector.explanation.explain.explain_sentence`.

    Returns
    -------
    (SentenceExplanation, RewordingComparison or None)
        The explanation of ``text`` (the comparison's ``original`` when there is one) and the comparison.
    """
    if edited is None:
        return explain_sentence(lm, text, expected=expected, **options), None
    comparison = compare_rewording(lm, text, edited, expected=expected, metric=metric, top=top, **options)
    return comparison.original, comparison
