"""The ``compare`` sub-command: two checkpoints that share a tokenizer, side by side.

    headcount compare MODEL_A MODEL_B --text "..." [--json]
    headcount compare MODEL_A MODEL_B DATA_FILE --out DIR [--json]

With ``--text``: both predictions, every head's change and the change of rollout for one
sentence (stdout). With a data file: the files listed in :mod:`inspector.comparison.report`
written into DIR, a short report (or, with ``--json``, the comparison document) on stdout and
a progress bar on stderr.
"""

from __future__ import annotations

import argparse
import sys

from inspector.cli.common import ProgressBar, add_data_options, add_report_options, print_json
from inspector.comparison.settings import ComparisonSettings
from inspector.errors import HeadcountError
from inspector.formatting import bits, count, head_name, percent, points

_SHOWN = 5


def _load_pair(args: argparse.Namespace):
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.comparison.pairing import check_comparable

    lm_a = load_checkpoint(args.model_a, allow_pickle=args.allow_pickle)
    lm_b = load_checkpoint(args.model_b, allow_pickle=args.allow_pickle)
    check_comparable(lm_a, lm_b)
    return lm_a, lm_b


def _changed_heads(heads: list[dict], out) -> None:
    """The heads that changed most, and the B heads that now resemble another A head most."""
    moved = [h for h in heads if h["js_same_position"] is not None]
    moved.sort(key=lambda h: -h["js_same_position"])
    unchanged = sum(1 for h in heads if h["unchanged"])
    print(f"unchanged heads (exactly the same weights): {unchanged} of {len(heads)}", file=out)
    top = ", ".join(
        f"{head_name(h['layer'], h['head'])} {bits(h['js_same_position'])}"
        for h in moved[:_SHOWN]
        if not h["unchanged"]
    )
    print(f"changed most (B against A at the same position): {top or 'none'}", file=out)
    elsewhere = [
        h
        for h in heads
        if (h["best_match_layer"], h["best_match_head"]) != (h["layer"], h["head"])
        and (h["js_same_position"] is None or h["js_same_position"] - h["js_best_match"] > 0.05)
    ]
    for h in elsewhere[:_SHOWN]:
        same = "no such head in A" if h["js_same_position"] is None else bits(h["js_same_position"])
        print(
            f"  B's {head_name(h['layer'], h['head'])} now resembles A's "
            f"{head_name(h['best_match_layer'], h['best_match_head'])} most ({bits(h['js_best_match'])}; "
            f"same position: {same})",
            file=out,
        )


def _print_sentence(doc: dict, out) -> None:
    print(f"text: {doc['text']}   ({count(len(doc['tokens']), 'token')})", file=out)
    for side in ("a", "b"):
        pred = doc[f"prediction_{side}"]
        said = (
            "no prediction (bare encoder)"
            if pred is None
            else (f"{pred['label']} {percent(pred['probabilities'][pred['label']])}")
        )
        print(f"{side.upper()}: {doc[f'model_{side}']}: {said}", file=out)
    if doc["agree"] is not None:
        print("the two models agree" if doc["agree"] else "the two models disagree", file=out)
    roll = doc["rollout"]
    layers = ", ".join(f"L{i} {v:.3f}" for i, v in enumerate(roll["js_by_layer"]))
    print(
        f"rollout change (mean JS per token, bits): {roll['js_final']:.3f}; after each layer: {layers}",
        file=out,
    )
    _changed_heads(doc["heads"], out)


def _print_report(doc: dict, out_dir: str, out) -> None:
    data = doc["data"]
    print(f"data: {data['file']} ({count(data['utterances'], 'utterance')})", file=out)
    if data["bad_rows"]:
        print(f"skipped {count(len(data['bad_rows']), 'bad row')} (listed in comparison.json)", file=out)
    if data["unknown_labels"]:
        listed = ", ".join(f"{k} ({v})" for k, v in data["unknown_labels"].items())
        print(f"labels not known to both models: {listed}", file=out)
    for side in ("a", "b"):
        print(
            f"{side.upper()}: {doc[f'model_{side}']}: accuracy {percent(doc[f'accuracy_{side}'])}, "
            f"macro-F1 {percent(doc[f'macro_f1_{side}'])}",
            file=out,
        )
    change = doc["accuracy_b"] - doc["accuracy_a"]
    print(f"accuracy change: {points(change, signed=True)}; agreement {percent(doc['agreement'])}", file=out)
    (rr, rw), (wr, ww) = doc["right_wrong"]["counts"]
    width = max(len(str(v)) for v in (rr, rw, wr, ww)) + 2
    print(f"{'':10}{'B right':>{width + 6}}{'B wrong':>{width + 6}}", file=out)
    print(f"{'A right':10}{rr:>{width + 6}}{rw:>{width + 6}}", file=out)
    print(f"{'A wrong':10}{wr:>{width + 6}}{ww:>{width + 6}}", file=out)
    for name, title in (
        ("fixed", "fixed (wrong in A, right in B)"),
        ("broken", "broken (right in A, wrong in B)"),
    ):
        items = doc[name]
        print(f"{title}: {len(items)}", file=out)
        for c in items[:_SHOWN]:
            print(
                f"  line {c['line']}: {c['label']}: A {c['predicted_a']} {percent(c['confidence_a'])}, "
                f"B {c['predicted_b']} {percent(c['confidence_b'])}  {c['text']}",
                file=out,
            )
    intents = sorted(doc["per_intent"], key=lambda c: -abs(c["f1_delta"]))
    shown = ", ".join(
        f"{c['label']} {points(c['f1_delta'], signed=True)}" for c in intents[:_SHOWN] if c["f1_delta"]
    )
    print(f"F1 changed most: {shown or 'no change'}", file=out)
    _changed_heads(doc["heads"], out)
    for note in doc["notes"]:
        print(f"note: {note}", file=out)
    print(f"written to {out_dir}", file=out)


def cmd_compare(args: argparse.Namespace) -> int:
    if (args.text is None) == (args.data is None):
        raise HeadcountError('give either --text "..." or a DATA_FILE with --out DIR')
    if args.data is not None and not args.out:
        raise HeadcountError("comparing over a data file needs --out DIR for the report files")
    if args.text is not None and not args.text.strip():
        raise HeadcountError("--text is empty")
    settings = ComparisonSettings(
        batch_size=args.batch_size,
        match_rows=None if args.match_rows == 0 else args.match_rows,
        seed=args.seed,
    )
    settings.check()
    lm_a, lm_b = _load_pair(args)
    if args.text is not None:
        from inspector.comparison.report import sentence_dict
        from inspector.comparison.sentence import compare_sentence

        doc = sentence_dict(compare_sentence(lm_a, lm_b, args.text))
        if args.json:
            print_json(doc, ensure_ascii=False)
        else:
            _print_sentence(doc, sys.stdout)
        return 0
    from inspector.comparison.pairing import shared_labels
    from inspector.comparison.report import comparison_dict, write_comparison
    from inspector.comparison.run import compare_corpus
    from inspector.corpus.dataset import read_labelled

    data = read_labelled(
        args.data,
        text_field=args.text_field,
        label_field=args.label_field,
        fmt=args.format,
        known_labels=shared_labels(lm_a, lm_b),
        on_bad_row=args.on_bad_row,
    )
    with ProgressBar(enabled=not args.quiet) as bar:
        report = compare_corpus(lm_a, lm_b, data, settings, on_step=bar.step)
    write_comparison(report, args.out, figures=not args.no_figures)
    doc = comparison_dict(report)
    if args.json:
        print_json(doc, ensure_ascii=False)
    else:
        _print_report(doc, args.out, sys.stdout)
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    """Add ``compare`` to the CLI's sub-commands."""
    text = (
        "compare two checkpoints that share a tokenizer: one sentence (--text), or a labelled set "
        "(what B fixed and broke, per-intent changes, which heads changed and which A head each B head resembles)"
    )
    p = sub.add_parser("compare", help=text, description=text)
    d = ComparisonSettings()
    p.epilog = (
        "Files: comparison.json, fixed.csv, broken.csv, head_changes.csv, intent_changes.csv, and "
        "head_change_map / head_matching (.png, .svg). Deltas are B minus A; divergences in bits."
    )
    p.add_argument("model_a", metavar="MODEL_A", help="the first checkpoint folder (A, 'before')")
    p.add_argument("model_b", metavar="MODEL_B", help="the second checkpoint folder (B, 'after')")
    p.add_argument(
        "data", metavar="DATA_FILE", nargs="?", help="labelled set: .csv with a header row, or .jsonl"
    )
    p.add_argument("--text", help="compare the two models on this one sentence")
    p.add_argument("--out", metavar="DIR", help="folder for the report files (needed with DATA_FILE)")
    p.add_argument(
        "--allow-pickle",
        action="store_true",
        help="read *.bin weights with torch's weights-only loader when no safetensors exist",
    )
    add_data_options(p, d.batch_size)
    p.add_argument(
        "--match-rows",
        type=int,
        default=d.match_rows,
        metavar="N",
        help=f"query rows per batch compared for the head matching; 0 = all rows (default: {d.match_rows})",
    )
    p.add_argument("--seed", type=int, default=d.seed, help=f"seed of the row draw (default: {d.seed})")
    add_report_options(p, "print the JSON document on stdout")
    p.set_defaults(func=cmd_compare)


__all__ = ["cmd_compare", "register"]
