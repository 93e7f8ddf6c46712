"""Explain one prediction: what pushed a sentence toward the predicted and the expected label.

:func:`explain_sentence` gathers, for each label of interest, the
gradient-weighted attention rollout, Integrated Gradients and leave-one-word-out
occlusion (as a drop of the probability and of the log-odds), next to the
label-independent attention rollout and value-weighted rollout, all merged to
words, plus a faithfulness read-out (Spearman rho of each relevance against
occlusion). On a misfire it adds the contrastive evidence: the same methods on
the gap between the predicted and the expected label's logits, which says why
the model chose the predicted label *rather than* the expected one. It returns
one :class:`SentenceExplanation`.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

from inspector import formatting as fmt
from inspector.checkpoint import capture
from inspector.checkpoint.capture import require_finite
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask, masked
from inspector.checkpoint.tokens import make_view
from inspector.errors import HeadcountError
from inspector.explanation.choices import CAUTION as CAUTION  # re-exported
from inspector.explanation.choices import DEFAULT_RULE
from inspector.explanation.choices import RULE_NAMES as RULE_NAMES  # re-exported
from inspector.explanation.faithfulness import faithfulness, faithfulness_hints, merge_to_words
from inspector.explanation.gradients import (
    CLASSIFICATION_POSITION,
    Baseline,
    Rule,
    attention_gradients,
    grad_weighted_rollout,
    integrated_gradients,
)
from inspector.explanation.occlusion import OcclusionMode, occlude_words
from inspector.measures.analysis import Prediction, analyze_sentence
from inspector.measures.metrics import HeadMetrics
from inspector.measures.rollout import attention_rollout

StepReport = Callable[[str, int, int], None]
"""``on_step(stage, done, total)``: where an explanation stands; it may raise to stop the work."""


class ExplanationStopped(HeadcountError):
    """Raised by an ``on_step`` callback to stop an explanation that is no longer wanted."""


@dataclass
class IntegratedGradientsResult:
    """Integrated Gradients of one label's logit on the word embeddings."""

    attributions: np.ndarray
    """[words] attribution per word (sum over its pieces)."""
    token_attributions: np.ndarray
    """[n] attribution per piece (specials included)."""
    baseline: str
    """``pad`` (pad-token embeddings, special tokens kept) or ``zero``."""
    steps: int
    rule: str
    """``clenshaw-curtis``, ``gauss-legendre`` or ``trapezoid``."""
    logit_input: float
    logit_baseline: float
    tolerance: float | None = None
    """The completeness tolerance the steps were chosen for; None when they were fixed."""

    @property
    def logit_difference(self) -> float:
        return self.logit_input - self.logit_baseline

    def steps_text(self) -> str:
        """``17 steps (chosen for completeness within 1.0%)`` or ``64 steps`` (for captions)."""
        if self.tolerance is None:
            return fmt.count(self.steps, "step")
        return (
            f"{fmt.count(self.steps, 'step')} (chosen for completeness within {fmt.percent(self.tolerance)})"
        )

    @property
    def completeness_error(self) -> float:
        """``sum_i IG_i - (F(x) - F(x'))`` over all pieces (completeness axiom: 0)."""
        return float(self.token_attributions.sum() - self.logit_difference)

    @property
    def completeness_relative(self) -> float:
        """``|completeness_error| / |F(x) - F(x')|`` (inf when the difference is 0)."""
        diff = abs(self.logit_difference)
        return abs(self.completeness_error) / diff if diff > 0 else float("inf")


@dataclass
class LabelEvidence:
    """Everything that says what pushed the sentence toward one label."""

    label: str
    index: int
    roles: tuple[str, ...]
    """Why this label is shown: ``predicted``, ``expected``, ``compared`` (any of them)."""
    probability: float
    logit: float
    grad_rollout: np.ndarray
    """[words] gradient-weighted rollout, classification-token row, merged to words."""
    grad_rollout_tokens: np.ndarray
    """[n] the full classification-token row over pieces (specials included)."""
    integrated_gradients: IntegratedGradientsResult
    occlusion: np.ndarray
    """[words] drop of this label's probability when each word is left out."""
    occlusion_log_odds: np.ndarray
    """[words] drop of this label's log-odds ``log(p / (1 - p))`` when each word is left out."""
    faithfulness: dict[str, float | None]
    """Spearman rho against occlusion per method (None when undefined)."""
    hints: list[str]

    def relevances(self, explanation: SentenceExplanation) -> dict[str, np.ndarray]:
        """Word-level relevance per method (stable names), the two occlusion readings last."""
        table = relevance_table(
            explanation.rollout,
            explanation.value_weighted,
            self.grad_rollout,
            self.integrated_gradients.attributions,
        )
        return {**table, "occlusion": self.occlusion, "occlusion_log_odds": self.occlusion_log_odds}


@dataclass
class ContrastEvidence:
    """Why the predicted label rather than the expected one: every method on ``z_pred - z_exp``.

    By the linearity of Integrated Gradients and of gradients, attributing the
    difference of two logits along one path is the difference of their
    attributions (Sundararajan, Taly & Yan 2017, sec. 2, "linearity"), so the
    completeness axiom holds for the gap: the attributions sum to
    ``gap(x) - gap(x')``.
    """

    predicted: str
    expected: str
    gap: float
    """``z_pred - z_exp`` at the input: ``log(p_pred / p_exp)``."""
    grad_rollout: np.ndarray
    """[words] gradient-weighted rollout with the gradient of the gap (``grad_pred - grad_exp``)."""
    integrated_gradients: IntegratedGradientsResult
    """Integrated Gradients of the gap (its ``logit_*`` fields hold the gap at both ends)."""
    occlusion: np.ndarray
    """[words] drop of the gap (in logits, = of ``log(p_pred / p_exp)``) when each word is left out."""
    faithfulness: dict[str, float | None]
    """Spearman rho of each relevance against the gap's occlusion."""
    hints: list[str]

    @property
    def label(self) -> str:
        """How the contrast is named on screen and in files: ``predicted vs expected``."""
        return f"{self.predicted} vs {self.expected}"

    def relevances(self, explanation: SentenceExplanation) -> dict[str, np.ndarray]:
        """Word-level relevance per method, under the same stable names as :meth:`LabelEvidence.relevances`."""
        table = relevance_table(
            explanation.rollout,
            explanation.value_weighted,
            self.grad_rollout,
            self.integrated_gradients.attributions,
        )
        return {**table, "occlusion": self.occlusion}


@dataclass
class SentenceExplanation:
    """One sentence explained for a few labels (the predicted one first)."""

    model_name: str
    text: str
    tokens: list[str]
    special: np.ndarray
    word_ids: list[int | None]
    words: list[str]
    """The sentence's words (pieces merged, special tokens left out)."""
    word_groups: list[list[int]]
    """Piece positions of each word."""
    prediction: Prediction
    expected: str | None
    attention: np.ndarray
    """[layers, heads, n, n]."""
    head_metrics: HeadMetrics
    rollout: np.ndarray
    """[words] attention rollout (Abnar & Zuidema 2020), classification-token row."""
    value_weighted: np.ndarray
    """[words] rollout over the row-normalised layer-level value-weighted attention."""
    labels: list[LabelEvidence]
    occlusion_mode: str
    occlusion_replacement: str | None
    contrast: ContrastEvidence | None = None
    """Predicted against expected label (on a misfire only)."""
    timings: dict[str, float] = field(default_factory=dict)
    """Seconds spent per part (``analysis``, ``attention_gradients``, ...) and ``total``."""
    mask: HeadMask = field(default_factory=HeadMask)
    """Heads switched off while explaining (empty: the full model)."""

    def evidence(self, label: str) -> LabelEvidence:
        for ev in self.labels:
            if ev.label == label:
                return ev
        raise KeyError(label)

    @property
    def predicted(self) -> LabelEvidence:
        return self.evidence(self.prediction.label)

    @property
    def expected_evidence(self) -> LabelEvidence | None:
        return None if self.expected is None else self.evidence(self.expected)

    @property
    def misfire(self) -> bool:
        """True when an expected label was given and the model predicted another one."""
        return self.expected is not None and self.expected != self.prediction.label


def require_classifier(lm: LoadedModel) -> None:
    """Raise a one-line error unless ``lm`` predicts one label per sentence."""
    if lm.task == "encoder" or not lm.labels:
        raise HeadcountError(f"{lm.name} is a bare encoder with no labels: there is no prediction to explain")
    if not lm.has_prediction:
        raise HeadcountError(f"{lm.name} labels tokens, not sentences: explain needs a sentence classifier")


def label_index(lm: LoadedModel, label: str) -> int:
    """Index of a label name, or a one-line error listing the known labels."""
    try:
        return lm.labels.index(label)
    except ValueError:
        shown = ", ".join(lm.labels[:20]) + (" ..." if len(lm.labels) > 20 else "")
        raise HeadcountError(f"unknown label '{label}' (this model knows: {shown})") from None


def value_weighted_rollout(layer_value_weighted: np.ndarray) -> np.ndarray:
    """Attention rollout over value-weighted attention.

    Parameters
    ----------
    layer_value_weighted : ndarray of shape (layers, n, n)
        ``||sum_h a_ij^h f_h(x_j)||`` per layer.

    Returns
    -------
    ndarray of shape (n, n)
        Each layer's matrix divided by its row sums, then rolled up like
        attention (``A = 0.5 W + 0.5 I``, ``R = A_L ... A_1``).

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight", eq. (6);
    Abnar & Zuidema (2020), attention rollout.
    """
    w = np.asarray(layer_value_weighted, dtype=np.float64)
    total = w.sum(-1, keepdims=True)
    w = np.divide(w, total, out=np.full_like(w, 1.0 / w.shape[-1]), where=total > 0)
    return attention_rollout(w[:, None])


def _unique(items: Iterable[str]) -> list[str]:
    return list(dict.fromkeys(items))


def _roles(name: str, predicted: str, expected: str | None, extra: Sequence[str]) -> tuple[str, ...]:
    marks = (
        ("predicted", name == predicted),
        ("expected", name == expected),
        ("compared", name in extra and name not in (predicted, expected)),
    )
    return tuple(role for role, hit in marks if hit)


class _Stopwatch:
    """Seconds per named part, and the total."""

    def __init__(self) -> None:
        self.start = self.clock = time.perf_counter()
        self.parts: dict[str, float] = {}

    def lap(self, name: str) -> None:
        now = time.perf_counter()
        self.parts[name] = now - self.clock
        self.clock = now

    def finish(self) -> dict[str, float]:
        return {**self.parts, "total": time.perf_counter() - self.start}


def relevance_table(
    rollout: np.ndarray, value_weighted: np.ndarray, grad_rollout: np.ndarray, integrated: np.ndarray
) -> dict[str, np.ndarray]:
    """The word-level relevances checked against occlusion, under their stable names."""
    return {
        "rollout": rollout,
        "value_weighted": value_weighted,
        "grad_rollout": grad_rollout,
        "integrated_gradients": integrated,
    }


def explain_sentence(
    lm: LoadedModel,
    text: str,
    *,
    expected: str | None = None,
    extra_labels: Sequence[str] = (),
    steps: int | None = None,
    occlusion: OcclusionMode = "remove",
    baseline: Baseline = "pad",
    rule: Rule = DEFAULT_RULE,
    mask: HeadMask | None = None,
    on_step: StepReport | None = None,
) -> SentenceExplanation:
    """Explain one sentence's prediction for the predicted and the expected label.

    Parameters
    ----------
    lm : LoadedModel
        A sentence classifier.
    text : str
    expected : str, optional
        The label the sentence should have had.
    extra_labels : sequence of str
        More labels to explain (the rewording comparison adds the other sentence's prediction).
    steps : int, optional
        Integrated Gradients quadrature nodes. None (default): chosen adaptively, 8
        doubled until the completeness error is within 1% of the logit difference
        (:func:`inspector.explanation.gradients.integrate_adaptively`).
    occlusion : {'remove', 'mask'}, default 'remove'
        Leave each word out, or replace its pieces by the mask token.
    baseline : {'pad', 'zero'}, default 'pad'
        Integrated Gradients baseline (see :func:`inspector.explanation.gradients.baseline_embeddings`).
    rule : {'clenshaw-curtis', 'gauss-legendre', 'trapezoid'}, default 'clenshaw-curtis'
    mask : HeadMask, optional
        Heads to switch off: every piece of evidence is then the masked model's.
    on_step : callable(stage, done, total), optional
        Told where the work stands: ``("attention gradients", 0, 1)``, ``("Integrated
        Gradients", 0, 1)``, then ``("occlusion", words done, words)`` after each pass of
        occluded copies. An exception it raises stops the explanation (a newer request).

    Returns
    -------
    SentenceExplanation
        Word-level relevances per label: gradient-weighted rollout (Chefer et al.
        2021), Integrated Gradients (Sundararajan et al. 2017), occlusion, and
        Spearman rho of each relevance against occlusion.

    References
    ----------
    Chefer, Gur & Wolf (2021); Sundararajan, Taly & Yan (2017); Abnar & Zuidema
    (2020); Kobayashi et al. (2020); Jain & Wallace (2019); Wiegreffe & Pinter (2019).
    """
    require_classifier(lm)
    if not text or not text.strip():
        raise HeadcountError("the sentence is empty")
    wanted = _unique([*([expected] if expected else []), *extra_labels])
    for name in wanted:
        label_index(lm, name)
    watch = _Stopwatch()
    analysis = analyze_sentence(lm, text, mask=mask)
    batch = capture.encode(lm, [text])
    pred = analysis.prediction
    names = _unique([pred.label, *wanted])
    indices = [label_index(lm, name) for name in names]
    view = make_view(analysis.tokens, analysis.special, analysis.word_ids, words=True, drop_special=True)
    groups = view.groups
    rollout_words = merge_to_words(analysis.rollout[CLASSIFICATION_POSITION], groups)
    vw_rollout = value_weighted_rollout(analysis.layer_value_weighted)
    vw_words = merge_to_words(vw_rollout[CLASSIFICATION_POSITION], groups)
    watch.lap("analysis")
    report = on_step or (lambda _stage, _done, _total: None)
    with masked(lm, mask):
        report("attention gradients", 0, 1)
        grads = attention_gradients(lm, batch, indices)
        watch.lap("attention_gradients")
        contrasts = [(0, names.index(expected))] if expected and expected != pred.label else []
        report("Integrated Gradients", 0, 1)
        integral, used = integrated_gradients(
            lm, batch, indices, steps=steps, baseline=baseline, rule=rule, contrasts=contrasts
        )
        watch.lap("integrated_gradients")
        words = len(groups)
        report("occlusion", 0, words)
        occ = occlude_words(
            lm,
            batch,
            groups,
            occlusion,
            on_rows=lambda done, _total: report("occlusion", max(done - 1, 0), words),
        )
        watch.lap("occlusion")
    require_finite(
        "gradients, attributions or occluded probabilities",
        grads.gradients,
        integral.attributions,
        occ.occluded,
    )

    evidence = []
    for k, (name, idx) in enumerate(zip(names, indices)):
        gr_tokens = grad_weighted_rollout(grads.attention, grads.gradients[k])[CLASSIFICATION_POSITION]
        ig = IntegratedGradientsResult(
            attributions=merge_to_words(integral.attributions[k], groups),
            token_attributions=integral.attributions[k],
            baseline=used,
            steps=integral.steps,
            rule=rule,
            logit_input=float(integral.output_input[k]),
            logit_baseline=float(integral.output_baseline[k]),
            tolerance=integral.tolerance,
        )
        gr_words = merge_to_words(gr_tokens, groups)
        drop = occ.drop(idx)
        table = faithfulness(relevance_table(rollout_words, vw_words, gr_words, ig.attributions), drop)
        evidence.append(
            LabelEvidence(
                label=name,
                index=idx,
                roles=_roles(name, pred.label, expected, extra_labels),
                probability=float(pred.probabilities[name]),
                logit=float(grads.logits[idx]),
                grad_rollout=gr_words,
                grad_rollout_tokens=gr_tokens,
                integrated_gradients=ig,
                occlusion=drop,
                occlusion_log_odds=occ.log_odds_drop(idx),
                faithfulness=table,
                hints=faithfulness_hints(table, drop),
            )
        )
    contrast = None
    if expected is not None and expected != pred.label:
        p, e = names.index(pred.label), names.index(expected)
        grads_gap = grads.gradients[p] - grads.gradients[e]
        gr_gap = merge_to_words(
            grad_weighted_rollout(grads.attention, grads_gap)[CLASSIFICATION_POSITION], groups
        )
        token_gap = integral.attributions[p] - integral.attributions[e]
        ig_gap = IntegratedGradientsResult(
            attributions=merge_to_words(token_gap, groups),
            token_attributions=token_gap,
            baseline=used,
            steps=integral.steps,
            rule=rule,
            logit_input=float(integral.output_input[p] - integral.output_input[e]),
            logit_baseline=float(integral.output_baseline[p] - integral.output_baseline[e]),
            tolerance=integral.tolerance,
        )
        occ_gap = occ.gap_drop(indices[p], indices[e])
        table = faithfulness(relevance_table(rollout_words, vw_words, gr_gap, ig_gap.attributions), occ_gap)
        contrast = ContrastEvidence(
            predicted=pred.label,
            expected=expected,
            gap=float(grads.logits[indices[p]] - grads.logits[indices[e]]),
            grad_rollout=gr_gap,
            integrated_gradients=ig_gap,
            occlusion=occ_gap,
            faithfulness=table,
            hints=faithfulness_hints(table, occ_gap, unit="logit"),
        )
    watch.lap("assembly")
    return SentenceExplanation(
        model_name=lm.name,
        text=text,
        tokens=analysis.tokens,
        special=analysis.special,
        word_ids=analysis.word_ids,
        words=view.labels,
        word_groups=groups,
        prediction=pred,
        expected=expected,
        attention=analysis.attention,
        head_metrics=analysis.head_metrics,
        rollout=rollout_words,
        value_weighted=vw_words,
        labels=evidence,
        occlusion_mode=occ.mode,
        occlusion_replacement=occ.replacement,
        contrast=contrast,
        timings=watch.finish(),
        mask=analysis.mask,
    )
