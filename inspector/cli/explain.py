"""The ``explain`` sub-command: why did the model give this sentence that label?"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, NamedTuple, TextIO

import numpy as np

from inspector import formatting as fmt
from inspector.cli.common import (
    ProgressBar,
    add_mask_option,
    add_model_command,
    load_mask,
    load_model,
    mask_record,
    positive_int,
    print_json,
)
from inspector.errors import HeadcountError
from inspector.explanation.choices import (
    BASELINES,
    CAUTION,
    DEFAULT_RULE,
    IG_START_STEPS,
    IG_TOLERANCE,
    OCCLUSION_MODES,
    RULE_NAMES,
    RULES,
)
from inspector.explanation.faithfulness import METHOD_LABELS
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES

if TYPE_CHECKING:  # torch-free at import: `headcount --help` loads no model library
    from inspector.explanation.explain import (
        ContrastEvidence,
        IntegratedGradientsResult,
        LabelEvidence,
        SentenceExplanation,
    )
    from inspector.explanation.rewording import RewordingComparison

COLUMNS = (
    ("rollout", "rollout"),
    ("value_weighted", "value-wtd"),
    ("grad_rollout", "grad-roll"),
    ("integrated_gradients", "int-grad"),
    ("occlusion", "occl-p"),
    ("occlusion_log_odds", "occl-lodds"),
)
"""Relevance columns of the text table: (JSON name, header)."""
SIGNED_COLUMNS = frozenset({"integrated_gradients", "occlusion", "occlusion_log_odds"})
"""Columns that can be negative: printed with their sign."""


def _floats(values: np.ndarray) -> list[float]:
    return [float(v) for v in np.asarray(values).ravel()]


# ---------------------------------------------------------------------------
# JSON
# ---------------------------------------------------------------------------


def ig_json(ig: IntegratedGradientsResult) -> dict:
    return {
        "attributions": _floats(ig.attributions),
        "baseline": ig.baseline,
        "steps": ig.steps,
        "steps_tolerance": ig.tolerance,
        "rule": ig.rule,
        "logit_input": ig.logit_input,
        "logit_baseline": ig.logit_baseline,
        "completeness_error": ig.completeness_error,
        "completeness_relative": ig.completeness_relative if np.isfinite(ig.completeness_relative) else None,
    }


def label_json(ev: LabelEvidence) -> dict:
    return {
        "roles": list(ev.roles),
        "probability": ev.probability,
        "logit": ev.logit,
        "grad_rollout": _floats(ev.grad_rollout),
        "integrated_gradients": ig_json(ev.integrated_gradients),
        "occlusion": _floats(ev.occlusion),
        "occlusion_log_odds": _floats(ev.occlusion_log_odds),
        "faithfulness": dict(ev.faithfulness),
        "hints": list(ev.hints),
    }


def contrast_json(c: ContrastEvidence | None) -> dict | None:
    """The ``contrast`` member: every method on ``logit(predicted) - logit(expected)`` (null unless a misfire)."""
    if c is None:
        return None
    return {
        "predicted": c.predicted,
        "expected": c.expected,
        "logit_gap": c.gap,
        "grad_rollout": _floats(c.grad_rollout),
        "integrated_gradients": ig_json(c.integrated_gradients),
        "occlusion": _floats(c.occlusion),
        "faithfulness": dict(c.faithfulness),
        "hints": list(c.hints),
    }


def explanation_json(ex: SentenceExplanation) -> dict:
    """The stable JSON document of ``headcount explain --json`` for one sentence."""
    return {
        "model": ex.model_name,
        "mask": mask_record(ex.mask or None),
        "text": ex.text,
        "words": list(ex.words),
        "tokens": list(ex.tokens),
        "prediction": {"label": ex.prediction.label, "probabilities": ex.prediction.probabilities},
        "expected": ex.expected,
        "occlusion_mode": ex.occlusion_mode,
        "occlusion_replacement": ex.occlusion_replacement,
        "rollout": _floats(ex.rollout),
        "value_weighted": _floats(ex.value_weighted),
        "labels": {ev.label: label_json(ev) for ev in ex.labels},
        "contrast": contrast_json(ex.contrast),
        "caution": CAUTION,
    }


def comparison_json(cmp: RewordingComparison) -> dict:
    """The ``compare`` member of the JSON document: the edited sentence and the head changes."""
    return {
        "edited": explanation_json(cmp.edited),
        "labels": list(cmp.labels),
        "prediction_changed": cmp.prediction_changed,
        "metric": cmp.metric,
        "metric_difference": cmp.difference.tolist(),
        "top_heads": [
            {"layer": h.layer, "head": h.head, "before": h.before, "after": h.after, "change": h.change}
            for h in cmp.top_heads
        ],
        "word_changes": [
            {"op": c.op, "original": list(c.original), "edited": list(c.edited)} for c in cmp.word_changes
        ],
    }


# ---------------------------------------------------------------------------
# Text
# ---------------------------------------------------------------------------


def _print_label(ex: SentenceExplanation, ev: LabelEvidence, out: TextIO) -> None:
    roles = " + ".join(ev.roles)
    print(
        f"\n== {ev.label} ({roles}, p={fmt.percent(ev.probability)}, logit {fmt.signed(ev.logit)}) ==",
        file=out,
    )
    _print_table(ex, ev.relevances(ex), COLUMNS, out)
    _print_ig(ev.integrated_gradients, "logit", out)


def _print_table(
    ex: SentenceExplanation, table: dict[str, np.ndarray], columns: tuple[tuple[str, str], ...], out: TextIO
) -> None:
    width = max([4, *(len(w) for w in ex.words)])
    print(f"{'word':<{width}} " + " ".join(f"{head:>10}" for _, head in columns), file=out)
    cells = {name: fmt.column(table[name], sign=name in SIGNED_COLUMNS) for name, _ in columns}
    for i, word in enumerate(ex.words):
        print(f"{word:<{width}} " + " ".join(f"{cells[name][i]:>10}" for name, _ in columns), file=out)


def _print_ig(ig: IntegratedGradientsResult, what: str, out: TextIO) -> None:
    rel = ig.completeness_relative
    rel_text = f" (relative {fmt.number(rel, 2)})" if np.isfinite(rel) else ""
    print(
        f"Integrated Gradients: baseline '{ig.baseline}', {ig.steps_text()}, {RULE_NAMES[ig.rule]}; "
        f"{what} {fmt.signed(ig.logit_input)} at the input, {fmt.signed(ig.logit_baseline)} at the baseline; "
        f"completeness error {fmt.number(ig.completeness_error, sign=True)}{rel_text}",
        file=out,
    )


def _print_contrast(ex: SentenceExplanation, out: TextIO) -> None:
    """Why the predicted label rather than the expected one: every method on the logit gap."""
    c = ex.contrast
    if c is None:
        return
    print(
        f"\n== {c.label} (contrast: logit of {c.predicted} minus logit of {c.expected}, "
        f"gap {fmt.signed(c.gap)}) ==",
        file=out,
    )
    columns = (*COLUMNS[:4], ("occlusion", "occl-gap"))
    _print_table(ex, c.relevances(ex), columns, out)
    _print_ig(c.integrated_gradients, "gap", out)


def _print_faithfulness(ex: SentenceExplanation, out: TextIO) -> None:
    """The faithfulness table: methods down, labels across, then the hints."""
    print(f"\nagreement with occlusion (Spearman rho over {fmt.count(len(ex.words), 'word')}):", file=out)
    rows = [*ex.labels, *([ex.contrast] if ex.contrast is not None else [])]
    width = max(len(ev.label) for ev in rows) + 2
    print(f"{'method':<26}" + "".join(f"{ev.label:>{width}}" for ev in rows), file=out)
    for method, name in METHOD_LABELS.items():
        cells = "".join(f"{fmt.correlation(ev.faithfulness.get(method)):>{width}}" for ev in rows)
        print(f"{name:<26}{cells}", file=out)
    for ev in rows:
        for hint in ev.hints:
            print(f"hint ({ev.label}): {hint}", file=out)


def print_explanation(ex: SentenceExplanation, out: TextIO) -> None:
    """Human-readable explanation of one sentence."""
    pred = ex.prediction
    print(f"model: {ex.model_name}", file=out)
    if ex.mask:
        print(f"heads switched off: {ex.mask.describe(most=len(ex.mask))}", file=out)
    print(f"text: {ex.text}", file=out)
    top = ", ".join(f"{lab} {fmt.percent(p)}" for lab, p in pred.top(3))
    line = f"prediction: {pred.label}   (top: {top})"
    if ex.expected is not None:
        verdict = "misfire" if ex.misfire else "as expected"
        line += f"\nexpected: {ex.expected} (p={fmt.percent(pred.probabilities[ex.expected])}): {verdict}"
    print(line, file=out)
    occ = "word removed" if ex.occlusion_mode == "remove" else f"word replaced by {ex.occlusion_replacement}"
    print(
        "columns: attention rollout and value-weighted rollout (same for every label), gradient-weighted "
        f"rollout, Integrated Gradients (logit), occlusion ({occ}) as the drop of the probability (occl-p) "
        "and of the log-odds log(p/(1-p)) (occl-lodds)",
        file=out,
    )
    for ev in ex.labels:
        _print_label(ex, ev, out)
    _print_contrast(ex, out)
    _print_faithfulness(ex, out)


def print_comparison(cmp: RewordingComparison, out: TextIO) -> None:
    """Human-readable rewording comparison (the edited sentence's explanation is printed separately)."""
    a, b = cmp.original.prediction, cmp.edited.prediction
    print("\n== rewording ==", file=out)
    print(
        f"original: {cmp.original.text}\n  -> {a.label} ({fmt.percent(a.probabilities[a.label])})", file=out
    )
    print(f"reworded: {cmp.edited.text}\n  -> {b.label} ({fmt.percent(b.probabilities[b.label])})", file=out)
    print("prediction " + ("changed" if cmp.prediction_changed else "unchanged"), file=out)
    for label in cmp.labels:
        shift = cmp.probability_shift(label)
        print(
            f"  p({label}): {fmt.percent(a.probabilities[label])} -> {fmt.percent(b.probabilities[label])} "
            f"({fmt.points(shift, signed=True)})",
            file=out,
        )
    edits = [c for c in cmp.word_changes if c.op != "equal"]
    for c in edits:
        old = " ".join(cmp.original.words[c.original[0] : c.original[1]]) or "-"
        new = " ".join(cmp.edited.words[c.edited[0] : c.edited[1]]) or "-"
        print(f"  {c.op}: '{old}' -> '{new}'", file=out)
    print(f"heads that changed most in {METRIC_LABELS[cmp.metric].lower()}:", file=out)
    for h in cmp.top_heads:
        print(
            f"  {fmt.head_name(h.layer, h.head)}: {fmt.weight(h.before)} -> {fmt.weight(h.after)} "
            f"({fmt.signed(h.change)})",
            file=out,
        )


# ---------------------------------------------------------------------------
# Command
# ---------------------------------------------------------------------------


def _whole(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise HeadcountError(f"--steps takes a whole number or 'auto', not '{text}'") from None


LONG_SENTENCE_WORDS = 32
"""From this many words on, the occlusion pass (one forward pass per word) shows a bar on stderr."""


class _WordsDone(NamedTuple):
    """The occlusion stage's progress in the shape :meth:`ProgressBar.step` reads."""

    phase: str
    done: int
    total: int
    unit: str = "word"


def _occlusion_bar(bar: ProgressBar) -> Callable[[str, int, int], None]:
    """An ``on_step`` that shows the occlusion of a long sentence (or of each side of a rewording) on ``bar``."""

    def on_step(stage: str, done: int, total: int) -> None:
        if stage.endswith("occlusion") and total >= LONG_SENTENCE_WORDS:
            bar.step(_WordsDone(stage, done, total))

    return on_step


def cmd_explain(args: argparse.Namespace) -> int:
    from inspector.checkpoint.tokens import text_problem
    from inspector.explanation.explain import require_classifier
    from inspector.explanation.rewording import explain_with_rewording
    from inspector.figures.files import check_output_file

    for option, text in (("--text", args.text), ("--compare", args.compare)):
        problem = None if text is None else text_problem(text)
        if problem:
            raise HeadcountError(f"{option}: {problem}")
    steps = None if args.steps.strip().lower() == "auto" else _whole(args.steps)
    if steps is not None and steps < 2:
        raise HeadcountError("--steps must be at least 2 (or 'auto')")
    if args.figure:
        from inspector.figures.explanation import check_figure_path

        check_figure_path(Path(args.figure))
        check_output_file(args.figure)
    lm = load_model(args)
    require_classifier(lm)
    options = dict(
        steps=steps,
        occlusion=args.occlusion,
        baseline=args.baseline,
        rule=args.rule,
        mask=load_mask(args, lm),
    )
    with ProgressBar(enabled=True) as bar:
        explanation, comparison = explain_with_rewording(
            lm,
            args.text,
            args.compare,
            expected=args.expected,
            metric=args.metric,
            top=args.top,
            on_step=_occlusion_bar(bar),
            **options,
        )
    written = []
    if args.figure:
        from inspector.figures.explanation import save_explanation_figure

        written = save_explanation_figure(Path(args.figure), explanation, comparison, paper=args.paper)
    if args.json:
        doc = explanation_json(explanation)
        if comparison is not None:
            doc["compare"] = comparison_json(comparison)
        print_json(doc)
        return 0
    print_explanation(explanation, sys.stdout)
    if comparison is not None:
        print("\n-- reworded sentence --", file=sys.stdout)
        print_explanation(comparison.edited, sys.stdout)
        print_comparison(comparison, sys.stdout)
    print(f"\ncaution: {CAUTION}", file=sys.stdout)
    if written:
        print("figure written to " + ", ".join(str(p) for p in written), file=sys.stdout)
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    """Add ``explain MODEL_DIR --text ...`` to the command line."""
    p = add_model_command(
        sub, "explain", "explain one prediction: gradient-weighted rollout, Integrated Gradients, occlusion"
    )
    p.add_argument("--text", required=True, help="the sentence to explain")
    p.add_argument("--expected", metavar="LABEL", help="the label the sentence should have had")
    p.add_argument(
        "--steps",
        default="auto",
        metavar="N|auto",
        help=f"Integrated Gradients steps; 'auto' (default) starts at {IG_START_STEPS} and doubles until "
        f"the completeness error is within {fmt.percent(IG_TOLERANCE).replace('%', '%%')} of the logit difference",
    )
    p.add_argument(
        "--occlusion",
        choices=OCCLUSION_MODES,
        default="remove",
        help="leave each word out, or replace it by the mask token (default remove)",
    )
    p.add_argument(
        "--baseline",
        choices=BASELINES,
        default="pad",
        help="Integrated Gradients baseline: pad-token embeddings with special tokens kept, "
        "or all-zero embeddings (default pad)",
    )
    p.add_argument(
        "--rule", choices=RULES, default=DEFAULT_RULE, help=f"integration rule (default {DEFAULT_RULE})"
    )
    p.add_argument(
        "--compare",
        metavar="REWORDING",
        help="a rewording of the sentence (words changed, added or dropped) to explain beside it",
    )
    p.add_argument(
        "--metric",
        choices=METRIC_NAMES,
        default="entropy",
        help="per-head metric for --compare (default entropy)",
    )
    p.add_argument(
        "--top", type=positive_int, default=5, help="how many most-changed heads --compare lists (default 5)"
    )
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    p.add_argument(
        "--figure",
        metavar="FILE",
        help="write the explanation as the Explain page draws it (.pdf: one file; .png/.svg: one file per page)",
    )
    p.add_argument(
        "--paper", choices=("a4", "letter"), default="a4", help="paper size of --figure (default a4)"
    )
    add_mask_option(p)
    p.set_defaults(func=cmd_explain)
