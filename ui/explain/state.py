"""What the explain page shows, as plain Python: no Qt in here.

:class:`ExplainState` holds the latest explanation (and rewording comparison),
the chosen label role and per-head metric, and derives everything the page
draws: one column of word relevances per method, the captions, the agreement
table, the hints, the per-head difference and the CSV rows. The widgets only
paint these, so every number on the page can be checked against
:func:`inspector.explanation.explain.explain_sentence` and
:func:`inspector.explanation.rewording.compare_rewording` without a window.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, replace

import numpy as np

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.explanation.choices import DEFAULT_RULE
from inspector.explanation.explain import (
    RULE_NAMES,
    ContrastEvidence,
    LabelEvidence,
    SentenceExplanation,
    StepReport,
)
from inspector.explanation.faithfulness import AGREEMENT_THRESHOLD, METHOD_LABELS
from inspector.explanation.rewording import (
    HeadChange,
    RewordingComparison,
    explain_with_rewording,
    heads_that_changed,
)
from inspector.threads import INTERACTIVE_THREADS, set_torch_threads

METHODS: tuple[str, ...] = (
    "rollout",
    "value_weighted",
    "grad_rollout",
    "integrated_gradients",
    "occlusion",
    "occlusion_log_odds",
)
"""The relevance columns of a label, in the order they are drawn (occlusion, the yardstick, last)."""
CONTRAST_METHODS: tuple[str, ...] = METHODS[:5]
"""The columns of the contrast (its occlusion is already a log-ratio: the drop of the logit gap)."""

METHOD_TITLES: dict[str, str] = {
    "rollout": "Rollout",
    "value_weighted": "Value-wtd",
    "grad_rollout": "Grad-wtd",
    "integrated_gradients": "IG",
    "occlusion": "\u0394p",
    "occlusion_log_odds": "\u0394log-odds",
}
"""Short column titles (the readable names are in :data:`inspector.explanation.faithfulness.METHOD_LABELS`)."""
CONTRAST_TITLES: dict[str, str] = {**METHOD_TITLES, "occlusion": "\u0394gap"}
"""Column titles of the contrast."""

SIGNED_METHODS = frozenset({"integrated_gradients", "occlusion", "occlusion_log_odds"})
"""Methods whose values can be negative (evidence against the label); drawn as two-sided bars."""

LABEL_INDEPENDENT = frozenset({"rollout", "value_weighted"})
"""Methods that give the same numbers for every label."""

ROLES: dict[str, str] = {
    "predicted": "Predicted",
    "expected": "Expected",
    "contrast": "Predicted vs expected",
    "edited": "After the rewording",
}
"""Which label the relevance columns are for (key -> button text)."""

SIDES: tuple[str, ...] = ("original", "edited")
SIDE_NAMES: dict[str, str] = {"original": "original", "edited": "reworded"}
"""How each side is named on screen (the rewording is the 'edited' side in the core and in JSON)."""

BASELINE_TEXT = {
    "pad": "pad-token embeddings, special tokens kept",
    "zero": "all-zero embeddings",
}

DEFAULT_METRIC = "entropy"
"""The per-head metric compared by default (the CLI's default too)."""
RIVALS = 2
"""Runner-up labels named under the original sentence's prediction."""
TOP_HEADS = 5
"""How many most-changed heads are listed (the CLI's default)."""


@dataclass(frozen=True)
class ExplainRequest:
    """What the user asked to have explained (with the CLI's defaults)."""

    text: str
    expected: str | None = None
    edited: str = ""
    """A rewording to compare with; empty for none."""
    metric: str = DEFAULT_METRIC
    steps: int | None = None
    """Integrated Gradients steps; None chooses them adaptively (the CLI's 'auto')."""
    occlusion: str = "remove"
    baseline: str = "pad"
    rule: str = DEFAULT_RULE
    top: int = TOP_HEADS
    mask: HeadMask = HeadMask()
    """Heads switched off (on the sentence page) while explaining."""

    @property
    def has_edit(self) -> bool:
        return bool(self.edited.strip())

    def options(self) -> dict:
        """Keyword arguments passed on to ``explain_sentence`` (and ``compare_rewording``)."""
        return dict(
            steps=self.steps, occlusion=self.occlusion, baseline=self.baseline, rule=self.rule, mask=self.mask
        )


@dataclass
class ExplainResult:
    """The answer to one request."""

    request: ExplainRequest
    explanation: SentenceExplanation
    """The original sentence (``comparison.original`` when there is a rewording)."""
    comparison: RewordingComparison | None = None


def compute_explanation(
    lm: LoadedModel, request: ExplainRequest, on_step: StepReport | None = None
) -> ExplainResult:
    """Run a request on the calling (worker) thread: the same calls, with the same options, as the CLI.

    One torch intra-op thread, as for the sentence page's per-keystroke analysis:
    on a loaded 2-core machine a second spinning thread slows the job and the
    GUI thread down (``torch.set_num_threads`` acts on the calling thread).
    """
    set_torch_threads(INTERACTIVE_THREADS)
    explanation, comparison = explain_with_rewording(
        lm,
        request.text,
        request.edited if request.has_edit else None,
        expected=request.expected,
        metric=request.metric,
        top=request.top,
        on_step=on_step,
        **request.options(),
    )
    return ExplainResult(request, explanation, comparison)


def with_metric(cmp: RewordingComparison, metric: str, top: int = TOP_HEADS) -> RewordingComparison:
    """The same comparison read through another per-head metric (no model call: both sentences keep theirs)."""
    before = cmp.original.head_metrics.get(metric)
    after = cmp.edited.head_metrics.get(metric)
    return replace(
        cmp,
        metric=metric,
        metric_before=before,
        metric_after=after,
        top_heads=heads_that_changed(before, after, top),
    )


@dataclass
class MethodColumn:
    """One method's relevance of every word of a sentence, for one label."""

    method: str
    title: str
    values: np.ndarray
    """[words] as computed by the core."""
    signed: bool
    rho: float | None
    """Spearman rho against occlusion (None for occlusion itself, or when undefined)."""
    note: str
    """A second header line (the rho, or how occlusion was done)."""
    tip: str

    def texts(self) -> list[str]:
        """Each word's value as printed: one number of decimals for the lane, signed lanes with their sign."""
        return fmt.column(self.values, sign=self.signed)


@dataclass
class AgreementTable:
    """Spearman rho of each method against occlusion: one row per (sentence, label), one column per method."""

    methods: list[str]
    """Method names (columns), as in :data:`inspector.explanation.faithfulness.METHOD_LABELS`."""
    titles: list[str]
    """Short column titles."""
    rows: list[tuple[str, str]]
    """(side, label) of each row."""
    headers: list[str]
    """Row headers."""
    values: list[list[float | None]]
    """[row][method] rho or None."""


def disagrees(rho: float | None) -> bool:
    """True when a rho is below the agreement threshold of :mod:`inspector.explanation.faithfulness`."""
    return rho is not None and rho < AGREEMENT_THRESHOLD


@dataclass
class ExplainState:
    """State of the explain page: the latest result, the label role and the compared metric."""

    result: ExplainResult | None = None
    role: str = "predicted"
    metric: str = DEFAULT_METRIC
    comparison: RewordingComparison | None = None
    """The result's comparison, read through :attr:`metric`."""

    # -- changes ---------------------------------------------------------------------------------
    def set_result(self, result: ExplainResult | None) -> None:
        self.result = result
        self.comparison = None
        if result is not None and result.comparison is not None:
            self.comparison = with_metric(result.comparison, self.metric, result.request.top)
        if self.role not in self.roles():
            self.role = "predicted"

    def set_metric(self, metric: str) -> None:
        self.metric = metric
        if self.result is not None and self.result.comparison is not None:
            self.comparison = with_metric(self.result.comparison, metric, self.result.request.top)

    def set_role(self, role: str) -> None:
        if role in self.roles():
            self.role = role

    # -- derived ---------------------------------------------------------------------------------
    @property
    def ready(self) -> bool:
        return self.result is not None

    @property
    def explanation(self) -> SentenceExplanation:
        if self.result is None:
            raise RuntimeError("nothing explained yet")
        return self.result.explanation

    def sentence(self, side: str) -> SentenceExplanation | None:
        """The explanation of ``side`` ('original' or 'edited'); None when there is no edited sentence."""
        if side == "original":
            return self.explanation
        return None if self.comparison is None else self.comparison.edited

    def roles(self) -> dict[str, str]:
        """The label roles on offer now: role -> label name (predicted always; expected, edited when they differ)."""
        if self.result is None:
            return {}
        ex = self.explanation
        out = {"predicted": ex.prediction.label}
        if ex.expected is not None and ex.expected != ex.prediction.label:
            out["expected"] = ex.expected
        if ex.contrast is not None:
            out["contrast"] = ex.contrast.label
        if self.comparison is not None:
            after = self.comparison.edited.prediction.label
            if after not in out.values():
                out["edited"] = after
        return out

    def label(self) -> str:
        """The label whose evidence the columns show."""
        return self.roles()[self.role]

    def role_text(self, label: str) -> str:
        """Which roles a label plays: 'predicted', 'expected' (in a rewording: 'original prediction', 'reworded prediction')."""
        ex = self.explanation
        reworded = self.comparison is not None
        parts = []
        if label == ex.prediction.label:
            parts.append("original prediction" if reworded else "predicted")
        if reworded and label == self.comparison.edited.prediction.label:
            parts.append("reworded prediction")
        if label == ex.expected:
            parts.append("expected")
        return " + ".join(parts) or "compared"

    @property
    def contrastive(self) -> bool:
        """True when the columns show the contrast (predicted against expected label)."""
        return self.role == "contrast" and "contrast" in self.roles()

    def evidence(self, side: str) -> LabelEvidence | ContrastEvidence | None:
        """The chosen label's evidence in ``side`` (the contrast, when that sentence is a misfire too)."""
        s = self.sentence(side)
        if s is None:
            return None
        if self.contrastive:
            return s.contrast
        return s.evidence(self.label())

    def columns(self, side: str) -> list[MethodColumn]:
        """The relevance columns of ``side`` for the chosen label (empty when the side is missing)."""
        s, ev = self.sentence(side), self.evidence(side)
        if s is None or ev is None:
            return []
        table = ev.relevances(s)
        contrast = isinstance(ev, ContrastEvidence)
        titles = CONTRAST_TITLES if contrast else METHOD_TITLES
        out = []
        for method in CONTRAST_METHODS if contrast else METHODS:
            rho = ev.faithfulness.get(method)
            if method.startswith("occlusion"):
                note = "occlusion"
                tip = self.occlusion_caption(s, method if not contrast else "occlusion_gap")
            else:
                note = f"\u03c1 {fmt.correlation(rho)}"
                tip = f"{METHOD_LABELS[method]}; Spearman \u03c1 against occlusion {fmt.correlation(rho)}"
                if method in LABEL_INDEPENDENT:
                    tip += " (the same for every label)"
            out.append(
                MethodColumn(method, titles[method], table[method], method in SIGNED_METHODS, rho, note, tip)
            )
        return out

    def words(self, side: str) -> list[str]:
        s = self.sentence(side)
        return [] if s is None else list(s.words)

    def changed_words(self, side: str) -> set[int]:
        """Word positions of ``side`` that the edit replaced, deleted or inserted."""
        if self.comparison is None:
            return set()
        out: set[int] = set()
        for change in self.comparison.word_changes:
            if change.op != "equal":
                start, end = change.original if side == "original" else change.edited
                out.update(range(start, end))
        return out

    # -- captions --------------------------------------------------------------------------------
    def ig_caption(self, side: str) -> str:
        """Baseline, steps, rule and completeness error of the chosen label's Integrated Gradients."""
        ev = self.evidence(side)
        if ev is None:
            return ""
        ig = ev.integrated_gradients
        baseline = BASELINE_TEXT.get(ig.baseline, ig.baseline)
        what = (
            f"logit of {ev.predicted} minus logit of {ev.expected}"
            if isinstance(ev, ContrastEvidence)
            else f"logit of {ev.label}"
        )
        return (
            f"Integrated Gradients ({what}): baseline \u2018{ig.baseline}\u2019 ({baseline}), "
            f"{ig.steps_text()}, {RULE_NAMES[ig.rule]}; completeness error "
            f"{fmt.number(ig.completeness_error, 2, sign=True)} on a logit gap of {fmt.signed(ig.logit_difference)}"
        )

    @staticmethod
    def occlusion_caption(s: SentenceExplanation, reading: str = "occlusion") -> str:
        """What an occlusion lane measures: ``occlusion`` (probability), ``occlusion_log_odds``, ``occlusion_gap``."""
        how = (
            "removed (the rest shifts up)"
            if s.occlusion_mode == "remove"
            else f"masked (its pieces replaced by {s.occlusion_replacement})"
        )
        what = {
            "occlusion": "drop of the label's probability (\u0394p)",
            "occlusion_log_odds": "drop of the label's log-odds log(p/(1\u2212p)), which does not flatten near "
            + fmt.percent(1.0),
            "occlusion_gap": "drop of the gap logit(predicted) \u2212 logit(expected) = log(p_predicted/p_expected)",
        }[reading]
        return f"Occlusion: {what} when each word is {how}"

    def prediction_text(self, side: str) -> str:
        """Two lines of rich text: the prediction, its probability and the misfire mark; then the runners-up
        (original) or the probability shifts (edited).
        """
        s = self.sentence(side)
        if s is None:
            return ""
        p = s.prediction
        line = f"<b>{html.escape(p.label)}</b> {fmt.percent(p.probabilities[p.label])}"
        if s.expected is not None and s.expected != p.label:
            share = fmt.percent(p.probabilities[s.expected])
            misfire = "<b>\u2715 misfire</b>"
            line += f" \u00b7 expected {html.escape(s.expected)} {share} \u00b7 {misfire}"
        elif s.expected is not None:
            line += " \u00b7 \u2713 as expected"
        if side == "edited" and self.comparison is not None:
            cmp = self.comparison
            line += " \u00b7 prediction " + ("changed" if cmp.prediction_changed else "unchanged")
            shifts = ", ".join(
                f"{html.escape(label)} {fmt.points(cmp.probability_shift(label), signed=True)}"
                for label in cmp.labels
            )
            return f"{line}<br>p shift: {shifts}"
        rivals = ", ".join(f"{html.escape(name)} {fmt.percent(q)}" for name, q in p.top(RIVALS + 1)[1:])
        return f"{line}<br>next: {rivals}"

    # -- agreement -------------------------------------------------------------------------------
    def agreement(self) -> AgreementTable:
        """Spearman rho per method for every explained label of each sentence shown."""
        rows, headers, found = [], [], []
        for side in SIDES:
            s = self.sentence(side)
            if s is None:
                continue
            shown = [s.evidence(e.label) for e in self.explanation.labels]
            shown += [s.contrast] if s.contrast is not None else []
            for ev in shown:
                rows.append((side, ev.label))
                found.append(ev)
                role = "contrast" if isinstance(ev, ContrastEvidence) else self.role_text(ev.label)
                headers.append(
                    f"{ev.label} ({role})" if self.comparison is None else f"{SIDE_NAMES[side]}: {ev.label}"
                )
        values = [[ev.faithfulness.get(method) for method in METHOD_LABELS] for ev in found]
        titles = [METHOD_TITLES[m] for m in METHOD_LABELS]
        return AgreementTable(list(METHOD_LABELS), titles, rows, headers, values)

    def hints(self, side: str) -> list[str]:
        """Plain-language readings of the agreement for the chosen label in ``side``."""
        ev = self.evidence(side)
        if ev is None:
            return []
        if ev.hints:
            return [f"{hint[0].upper()}{hint[1:]}." for hint in ev.hints]
        return [
            f"No disagreement flagged for {ev.label}: every defined \u03c1 is at least "
            f"{AGREEMENT_THRESHOLD}, so these relevances rank the words much as occlusion does."
        ]

    # -- rewording ---------------------------------------------------------------------------------
    def head_difference(self) -> np.ndarray | None:
        """[layers, heads] edited minus original in the chosen metric (None without a rewording)."""
        return None if self.comparison is None else self.comparison.difference

    def top_heads(self) -> list[HeadChange]:
        return [] if self.comparison is None else list(self.comparison.top_heads)

    def occlusion_note(self, side: str) -> str:
        """The caption line of the occlusion lanes shown for ``side``."""
        s = self.sentence(side)
        if s is None:
            return ""
        if self.contrastive:
            return self.occlusion_caption(s, "occlusion_gap")
        both = self.occlusion_caption(s).replace(
            "(\u0394p)",
            "(\u0394p) and of its log-odds log(p/(1\u2212p)), which does not flatten near "
            + fmt.percent(1.0)
            + ",",
        )
        return both

    # -- export ----------------------------------------------------------------------------------
    def csv_table(self) -> tuple[list[str], list[list[object]]]:
        """Rows ``side, text, predicted, expected, index, word``, then one column per method per label.

        Columns are named ``label:method`` for every label explained (the predicted
        and expected ones, and the reworded sentence's prediction in a rewording),
        then ``contrast:method`` (the predicted minus the expected label's logit,
        empty where that sentence is no misfire), so the file holds every number
        the page can show whichever label is switched on, with the sentence and its
        labels on every row.
        """
        sides = [side for side in SIDES if self.sentence(side) is not None]
        labels = [ev.label for ev in self.explanation.labels]
        header = ["side", "text", "predicted", "expected", "index", "word"]
        header += [f"{label}:{m}" for label in labels for m in METHODS]
        header += [f"contrast:{m}" for m in CONTRAST_METHODS]
        rows: list[list[object]] = []
        for side in sides:
            s = self.sentence(side)
            tables = [s.evidence(label).relevances(s) for label in labels]
            gap = s.contrast.relevances(s) if s.contrast is not None else None
            for i, word in enumerate(s.words):
                row = [side, s.text, s.prediction.label, s.expected or "", i, word]
                row += [float(t[m][i]) for t in tables for m in METHODS]
                row += [float(gap[m][i]) if gap is not None else "" for m in CONTRAST_METHODS]
                rows.append(row)
        return header, rows
