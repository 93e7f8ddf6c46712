"""Headless command line: the same core as the window, for scripts and CI.

Every user-facing failure is one line on stderr and a non-zero exit status.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from inspector.corpus_cli import register as register_corpus
from inspector.errors import HeadcountError
from inspector.explain_cli import register_explain
from inspector.metrics import METRIC_NAMES

EXIT_USER_ERROR = 2

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


def load_model(args: argparse.Namespace):
    from inspector.loader import load_checkpoint

    return load_checkpoint(args.model, allow_pickle=args.allow_pickle)


def analysis_json(result) -> dict:
    """The stable JSON document of ``headcount analyze --json``."""
    pred = result.prediction
    return {
        "model": result.model_name,
        "text": result.text,
        "tokens": list(result.tokens),
        "special": [bool(s) for s in result.special],
        "prediction": None if pred is None else {"label": pred.label, "probabilities": pred.probabilities},
        "heads": result.heads_table(),
    }


def _print_table(result, out) -> None:
    pred = result.prediction
    print(f"model: {result.model_name}", file=out)
    print(f"tokens ({len(result.tokens)}): {' '.join(result.tokens)}", file=out)
    if pred is not None:
        top = ", ".join(f"{lab} {p:.3f}" for lab, p in pred.top(3))
        print(f"prediction: {pred.label}   (top: {top})", file=out)
    header = "layer head " + " ".join(f"{short:>8}" for _, short in _TABLE_COLUMNS)
    print(header, file=out)
    for row in result.heads_table():
        cells = " ".join(f"{row[name]:8.3f}" for name, _ in _TABLE_COLUMNS)
        print(f"{row['layer']:5d} {row['head']:4d} {cells}", file=out)


def cmd_analyze(args: argparse.Namespace) -> int:
    from inspector.analysis import analyze_sentence

    if not args.text or not args.text.strip():
        raise HeadcountError("--text is empty")
    lm = load_model(args)
    result = analyze_sentence(lm, args.text)
    if args.save_attention:
        from inspector.export import save_npz

        save_npz(Path(args.save_attention), attention=result.attention.astype(np.float32))
    if args.json:
        json.dump(analysis_json(result), sys.stdout)
        sys.stdout.write("\n")
    else:
        _print_table(result, sys.stdout)
    return 0


def add_model_command(sub: argparse._SubParsersAction, name: str, help_text: str) -> argparse.ArgumentParser:
    """Add a sub-command whose first argument is a checkpoint folder."""
    p = sub.add_parser(name, help=help_text, description=help_text)
    p.add_argument("model", metavar="MODEL_DIR", help="checkpoint folder (config.json + safetensors)")
    p.add_argument(
        "--allow-pickle",
        action="store_true",
        help="read *.bin weights with torch's weights-only loader when no safetensors exist",
    )
    return p


def _register_analyze(sub: argparse._SubParsersAction) -> None:
    p = add_model_command(sub, "analyze", "analyse one sentence: prediction and per-head metrics")
    p.add_argument("--text", required=True, help="the sentence to analyse")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.add_argument(
        "--save-attention", metavar="FILE.npz", help="write array 'attention' [layers, heads, n, n]"
    )
    p.set_defaults(func=cmd_analyze)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="headcount",
        description="Look inside transformer-encoder classifiers, head by head (CPU, offline). "
        "With no command (or 'open MODEL_DIR'), opens the window.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    _register_analyze(sub)
    # Each further command lives in its own module and registers itself here (one line each).
    register_explain(sub)
    register_corpus(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the CLI; returns the process exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_USER_ERROR
    try:
        return int(args.func(args))
    except HeadcountError as exc:
        print(f"headcount: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    except KeyboardInterrupt:
        print("headcount: interrupted", file=sys.stderr)
        return 130


__all__ = ["METRIC_NAMES", "analysis_json", "build_parser", "main"]
