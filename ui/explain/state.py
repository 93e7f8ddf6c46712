"""What the explain page shows, as plain Python: no Qt in here.

:class:`ExplainState` holds the latest explanation (and what-if comparison),
the chosen label role and per-head metric, and derives everything the page
draws: one column of word relevances per method, the captions, the agreement
table, the hints, the per-head difference and the CSV rows. The widgets only
paint these, so every number on the page can be checked against
:func:`inspector.explanation.explain.explain_sentence` and
:func:`inspector.explanation.whatif.compare_sentences` without a window.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, replace

import numpy as np

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.explanation.choices import DEFAULT_RULE
from inspector.explanation.explain import RULE_NAMES, LabelEvidence, SentenceExplanation, explain_sentence
from inspector.explanation.faithfulness import AGREEMENT_THRESHOLD, METHOD_LABELS
from inspector.explanation.whatif import HeadChange, WhatIfComparison, compare_sentences, heads_that_changed
from inspector.threads import INTERACTIVE_THREADS, set_torch_threads

METHODS: tuple[str, ...] = ("rollout", "value_weighted", "grad_rollout", "integrated_gradients", "occlusion")
"""The relevance columns, in the order they are drawn (occlusion, the yardstick, last)."""

METHOD_TITLES: dict[str, str] = {
    "rollout": "Rollout",
    "value_weighted": "Value-weighted",
    "grad_rollout": "Grad-weighted",
    "integrated_gradients": "Int. Gradients",
    "occlusion": "Occlusion",
}
"""Short column titles (the readable names are in :data:`inspector.explanation.faithfulness.METHOD_LABELS`)."""

SIGNED_METHODS = frozenset({"integrated_gradients", "occlusion"})
"""Methods whose values can be negative (evidence against the label); drawn as two-sided bars."""

LABEL_INDEPENDENT = frozenset({"rollout", "value_weighted"})
"""Methods that give the same numbers for every label."""

ROLES: dict[str, str] = {
    "predicted": "Predicted",
    "expected": "Expected",
    "edited": "After the edit",
}
"""Which label the relevance columns are for (key -> button text)."""

SIDES: tuple[str, ...] = ("original", "edited")

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
    """An edited copy to compare with; empty for no what-if."""
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
        """Keyword arguments shared by ``explain_sentence`` and ``compare_sentences``."""
        return dict(
            steps=self.steps, occlusion=self.occlusion, baseline=self.baseline, rule=self.rule, mask=self.mask
        )


@dataclass
class ExplainResult:
    """The answer to one request."""

    request: ExplainRequest
    explanation: SentenceExplanation
    """The original sentence (``comparison.original`` when there is a what-if)."""
    comparison: WhatIfComparison | None = None


def compute_explanation(lm: LoadedModel, request: ExplainRequest) -> ExplainResult:
    """Run a request on the calling (worker) thread: the same calls, with the same options, as the CLI.

    One torch intra-op thread, as for the sentence page's per-keystroke analysis:
    on a loaded 2-core machine a second spinning thread slows the job and the
    GUI thread down (``torch.set_num_threads`` acts on the calling thread).
    """
    set_torch_threads(INTERACTIVE_THREADS)
    if request.has_edit:
        cmp = compare_sentences(
            lm,
            request.text,
            request.edited,
            expected=request.expected,
            metric=request.metric,
            top=request.top,
            **request.options(),
        )
        return ExplainResult(request, cmp.original, cmp)
    ex = explain_sentence(lm, request.text, expected=request.expected, **request.options())
    return ExplainResult(request, ex)


def with_metric(cmp: WhatIfComparison, metric: str, top: int = TOP_HEADS) -> WhatIfComparison:
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
    comparison: WhatIfComparison | None = None
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
        if self.comparison is not None:
            after = self.comparison.edited.prediction.label
            if after not in out.values():
                out["edited"] = after
        return out

    def label(self) -> str:
        """The label whose evidence the columns show."""
        return self.roles()[self.role]

    def role_text(self, label: str) -> str:
        """Which roles a label plays: 'predicted', 'expected' (in a what-if: 'original prediction', 'edited prediction')."""
        ex = self.explanation
        what_if = self.comparison is not None
        parts = []
        if label == ex.prediction.label:
            parts.append("original prediction" if what_if else "predicted")
        if what_if and label == self.comparison.edited.prediction.label:
            parts.append("edited prediction")
        if label == ex.expected:
            parts.append("expected")
        return " + ".join(parts) or "compared"

    def evidence(self, side: str) -> LabelEvidence | None:
        s = self.sentence(side)
        return None if s is None else s.evidence(self.label())

    def columns(self, side: str) -> list[MethodColumn]:
        """The five relevance columns of ``side`` for the chosen label (empty when the side is missing)."""
        s, ev = self.sentence(side), self.evidence(side)
        if s is None or ev is None:
            return []
        table = ev.relevances(s)
        out = []
        for method in METHODS:
            rho = ev.faithfulness.get(method) if method != "occlusion" else None
            if method == "occlusion":
                note, tip = self.occlusion_short(s), self.occlusion_caption(s)
            else:
                note = f"\u03c1 {fmt.correlation(rho)}"
                tip = f"{METHOD_LABELS[method]}; Spearman \u03c1 against occlusion {fmt.correlation(rho)}"
                if method in LABEL_INDEPENDENT:
                    tip += " (the same for every label)"
            out.append(
                MethodColumn(
                    method, METHOD_TITLES[method], table[method], method in SIGNED_METHODS, rho, note, tip
                )
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
        return (
            f"Integrated Gradients (logit of {ev.label}): baseline \u2018{ig.baseline}\u2019 ({baseline}), "
            f"{ig.steps_text()}, {RULE_NAMES[ig.rule]}; completeness error "
            f"{fmt.number(ig.completeness_error, 2, sign=True)} on a logit gap of {fmt.signed(ig.logit_difference)}"
        )

    @staticmethod
    def occlusion_short(s: SentenceExplanation) -> str:
        return "word removed" if s.occlusion_mode == "remove" else f"as {s.occlusion_replacement}"

    @staticmethod
    def occlusion_caption(s: SentenceExplanation) -> str:
        how = (
            "removed (the rest shifts up)"
            if s.occlusion_mode == "remove"
            else f"masked (its pieces replaced by {s.occlusion_replacement})"
        )
        return f"Occlusion: drop of the label's probability when each word is {how}"

    def prediction_text(self, side: str, mark: str = "") -> str:
        """Two lines of rich text: the prediction, its probability and the misfire mark; then the runners-up
        (original) or the probability shifts (edited).

        ``mark`` is a colour name for the misfire mark ('' for none).
        """
        s = self.sentence(side)
        if s is None:
            return ""
        p = s.prediction
        line = f"<b>{html.escape(p.label)}</b> {fmt.percent(p.probabilities[p.label])}"
        if s.expected is not None and s.expected != p.label:
            share = fmt.percent(p.probabilities[s.expected])
            misfire = f"<span style='color:{mark}'>\u2715 misfire</span>" if mark else "\u2715 misfire"
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
        rows, headers = [], []
        for side in SIDES:
            s = self.sentence(side)
            if s is None:
                continue
            for ev in map(s.evidence, [e.label for e in self.explanation.labels]):
                rows.append((side, ev.label))
                headers.append(
                    f"{ev.label} ({self.role_text(ev.label)})"
                    if self.comparison is None
                    else f"{side}: {ev.label}"
                )
        values = [
            [self.sentence(side).evidence(label).faithfulness.get(method) for method in METHOD_LABELS]
            for side, label in rows
        ]
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

    # -- what-if ---------------------------------------------------------------------------------
    def head_difference(self) -> np.ndarray | None:
        """[layers, heads] edited minus original in the chosen metric (None without a what-if)."""
        return None if self.comparison is None else self.comparison.difference

    def top_heads(self) -> list[HeadChange]:
        return [] if self.comparison is None else list(self.comparison.top_heads)

    # -- export ----------------------------------------------------------------------------------
    def csv_table(self) -> tuple[list[str], list[list[object]]]:
        """Rows ``sentence, index, word`` then one column per method per label (``label:method``).

        Labels are every label explained (the predicted and expected ones, and the
        edited sentence's prediction in a what-if), so the file holds every number
        the page can show whichever label is switched on.
        """
        sides = [side for side in SIDES if self.sentence(side) is not None]
        labels = [ev.label for ev in self.explanation.labels]
        header = ["sentence", "index", "word"] + [f"{label}:{m}" for label in labels for m in METHODS]
        rows: list[list[object]] = []
        for side in sides:
            s = self.sentence(side)
            tables = [s.evidence(label).relevances(s) for label in labels]
            for i, word in enumerate(s.words):
                rows.append([side, i, word] + [float(t[m][i]) for t in tables for m in METHODS])
        return header, rows
