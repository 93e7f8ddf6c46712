"""``headcount analyze``: one sentence, its prediction and every head's metrics."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

from inspector import formatting as fmt
from inspector.cli.common import (
    add_mask_option,
    add_model_command,
    load_mask,
    load_model,
    mask_record,
    print_json,
)
from inspector.errors import HeadcountError

_TABLE_COLUMNS = (
    ("entropy", "ent"),
    ("entropy_normalized", "ent/ln"),
    ("distance", "dist"),
    ("special_share", "special"),
    ("self_share", "self"),
    ("prev_share", "prev"),
    ("next_share", "next"),
    ("confidence", "conf"),
)


def analysis_json(result) -> dict:
    """The stable JSON document of ``headcount analyze --json``."""
    pred = result.prediction
    return {
        "model": result.model_name,
        "mask": mask_record(result.mask or None),
        "text": result.text,
        "tokens": list(result.tokens),
        "special": [bool(s) for s in result.special],
        "prediction": None if pred is None else {"label": pred.label, "probabilities": pred.probabilities},
        "layers": [{"layer": l, "window": w} for l, w in enumerate(result.layer_windows())],
        "heads": result.heads_table(),
    }


def _print_table(result, out) -> None:
    pred = result.prediction
    print(f"model: {result.model_name}", file=out)
    if result.mask:
        print(f"heads switched off: {result.mask.describe(most=len(result.mask))}", file=out)
    print(f"{fmt.count(len(result.tokens), 'token')}: {' '.join(result.tokens)}", file=out)
    if pred is not None:
        top = ", ".join(f"{lab} {fmt.percent(p)}" for lab, p in pred.top(3))
        print(f"prediction: {pred.label}   (top: {top})", file=out)
    rows = result.heads_table()
    names = [fmt.head_name(row["layer"], row["head"]) for row in rows]
    width = max(len("head"), *(len(n) for n in names))
    print(f"{'head':<{width}} " + " ".join(f"{short:>8}" for _, short in _TABLE_COLUMNS), file=out)
    for name, row in zip(names, rows):
        cells = " ".join(f"{fmt.weight(row[key]):>8}" for key, _ in _TABLE_COLUMNS)
        print(f"{name:<{width}} {cells}", file=out)


def cmd_analyze(args: argparse.Namespace) -> int:
    from inspector.checkpoint.tokens import text_problem
    from inspector.figures.files import check_output_file, save_npz
    from inspector.measures.analysis import analyze_sentence

    problem = text_problem(args.text)
    if problem:
        raise HeadcountError(f"--text: {problem}")
    if args.save_attention:
        check_output_file(args.save_attention)
    lm = load_model(args)
    result = analyze_sentence(lm, args.text, mask=load_mask(args, lm))
    if args.save_attention:
        save_npz(Path(args.save_attention), attention=result.attention.astype(np.float32))
    if args.json:
        print_json(analysis_json(result))
    else:
        _print_table(result, sys.stdout)
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    p = add_model_command(sub, "analyze", "analyse one sentence: prediction and per-head metrics")
    p.add_argument("--text", required=True, help="the sentence to analyse")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.add_argument(
        "--save-attention", metavar="FILE.npz", help="write array 'attention' [layers, heads, n, n]"
    )
    add_mask_option(p)
    p.set_defaults(func=cmd_analyze)
