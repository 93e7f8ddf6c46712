"""The ``corpus`` sub-command: analyse a whole labelled evaluation set.

    headcount corpus MODEL_DIR DATA_FILE --out DIR [options]

Writes the files listed in :mod:`inspector.corpus.report` into DIR, prints a short
report (or, with ``--json``, the summary document) on stdout and a progress bar
on stderr.
"""

from __future__ import annotations

import argparse
import sys
from dataclasses import replace

from inspector import formatting as fmt
from inspector.cli.common import (
    ProgressBar,
    add_data_options,
    add_mask_option,
    add_model_command,
    add_report_options,
    load_mask,
    load_model,
    non_negative_int,
    positive_int,
    print_json,
)
from inspector.corpus.dataset import read_labelled
from inspector.corpus.pruning import CAUTION, PRUNING_ORDERS
from inspector.corpus.settings import CorpusSettings
from inspector.errors import HeadcountError

_SHOWN_BAD_ROWS = 10


def _orders(text: str) -> tuple[str, ...]:
    names = tuple(n.strip() for n in text.split(",") if n.strip())
    bad = [n for n in names if n not in PRUNING_ORDERS]
    if bad:
        raise HeadcountError(
            f"unknown pruning order '{bad[0]}' (use: {', '.join(PRUNING_ORDERS)}, or 'none')"
        )
    return names


def _js_rows(text: str) -> int | str | None:
    """argparse type of --js-rows: 'auto', 'all' / 0 (every row) or a positive count."""
    if text.strip().lower() == "auto":
        return "auto"
    if text.strip().lower() == "all":
        return None
    try:
        value = non_negative_int(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(f"expected auto, all or a number of rows, got {text!r}") from None
    return None if value == 0 else value


def settings_from_args(args: argparse.Namespace) -> CorpusSettings:
    """The :class:`CorpusSettings` the options ask for."""
    orders = () if args.orders.strip().lower() == "none" else _orders(args.orders)
    return CorpusSettings(
        batch_size=args.batch_size,
        js_rows=args.js_rows,
        group_threshold=args.group_threshold,
        importance=not args.no_importance,
        orders=orders,
        prune_every=args.prune_every,
        prune_passes=args.prune_passes,
        prune_subset=args.prune_subset,
        max_drop=args.max_drop,
        remove=args.remove,
        mask_order=args.mask_order,
        seed=args.seed,
    )


def _head(h: dict) -> str:
    return fmt.head_name(h["layer"], h["head"])


def _print_report(summary: dict, out_dir: str, out) -> None:
    data = summary["data"]
    print(
        f"model: {summary['model']}   data: {data['file']} ({fmt.count(data['utterances'], 'utterance')})",
        file=out,
    )
    if summary.get("mask"):
        heads = ", ".join(fmt.head_name(int(layer), h) for layer, hs in summary["mask"].items() for h in hs)
        print(f"heads switched off for the whole run: {heads}", file=out)
    bad = data["bad_rows"]
    if bad:
        print(f"skipped {fmt.count(len(bad), 'bad row')}:", file=out)
        for b in bad[:_SHOWN_BAD_ROWS]:
            print(f"  line {b['row']}: {b['reason']}", file=out)
        if len(bad) > _SHOWN_BAD_ROWS:
            print(f"  ... and {len(bad) - _SHOWN_BAD_ROWS} more (see summary.json)", file=out)
    if data["unknown_labels"]:
        listed = ", ".join(f"{k} ({fmt.count(v, 'row')})" for k, v in data["unknown_labels"].items())
        print(f"labels the model does not know: {listed}", file=out)
    print(
        f"accuracy {fmt.percent(summary['accuracy'])}   macro-F1 {fmt.percent(summary['macro_f1'])}", file=out
    )
    misfires = summary["misfires"]
    print(fmt.count(len(misfires), "misfire") + (" (most confident first)" if misfires else ""), file=out)
    for m in misfires[:5]:
        print(
            f"  line {m['row']}: {m['expected']} -> {m['predicted']} ({fmt.percent(m['confidence'])})  {m['text']}",
            file=out,
        )
    imp = summary["importance"]
    if imp:
        top = ", ".join(f"{_head(h)} {fmt.weight(h['importance'])}" for h in imp["most_important"][:3])
        low = ", ".join(f"{_head(h)} {fmt.weight(h['importance'])}" for h in imp["least_important"][:3])
        print(f"most important heads: {top}   least: {low}", file=out)
    red = summary["redundancy"]
    groups = "; ".join(" ".join(_head(h) for h in g) for g in red["groups"][:5]) or "none"
    print(f"near-duplicate groups (JS <= {fmt.bits(red['group_threshold'])}): {groups}", file=out)
    pr = summary["pruning"]
    if pr:
        after = "not measured" if pr["accuracy_after"] is None else fmt.percent(pr["accuracy_after"])
        print(
            f"pruning ({pr['mask_order']}): remove {fmt.count(pr['heads_removed'], 'head')} "
            f"({fmt.percent(pr['fraction_removed'])}), accuracy {fmt.percent(pr['accuracy_before'])} -> {after}",
            file=out,
        )
        print(f"caution: {CAUTION}", file=out)
    for note in summary["notes"]:
        print(f"note: {note}", file=out)
    print(f"written to {out_dir}", file=out)


def cmd_corpus(args: argparse.Namespace) -> int:
    from inspector.corpus.report import check_report_folder, summary_dict, write_report
    from inspector.corpus.run import run_corpus

    settings = settings_from_args(args)
    check_report_folder(args.out)
    lm = load_model(args)
    mask = load_mask(args, lm)
    if mask is not None:
        settings = replace(settings, mask=mask.heads)
    settings.check(lm)
    data = read_labelled(
        args.data,
        text_field=args.text_field,
        label_field=args.label_field,
        fmt=args.format,
        known_labels=lm.labels if lm.has_prediction else None,
        on_bad_row=args.on_bad_row,
    )
    with ProgressBar(enabled=not args.quiet) as bar:
        report = run_corpus(lm, data, settings, on_step=bar.step)
    write_report(report, args.out, figures=not args.no_figures)
    summary = summary_dict(report)
    if args.json:
        print_json(summary, ensure_ascii=False)
    else:
        _print_report(summary, args.out, sys.stdout)
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    """Add ``corpus`` to the CLI's sub-commands."""
    p = add_model_command(
        sub,
        "corpus",
        "analyse a labelled evaluation set: accuracy, misfires, "
        "head importance, redundancy and a pruning simulation",
    )
    d = CorpusSettings()
    p.epilog = (
        f"Pruning: {CAUTION} Files: summary.json, heads.csv, similar_pairs.csv, pruning.csv, "
        "prune_mask.json, and confusion_matrix / head_importance / head_similarity / pruning_curve (.png, .svg). "
        + p.epilog  # the thread rule, set by add_model_command
    )
    p.add_argument("data", metavar="DATA_FILE", help="labelled set: .csv with a header row, or .jsonl")
    p.add_argument(
        "--out", required=True, metavar="DIR", help="folder for the output files (created if needed)"
    )
    add_data_options(p, d.batch_size)
    p.add_argument(
        "--orders",
        default=",".join(d.orders),
        metavar="LIST",
        help=f"pruning orders, comma-separated from {', '.join(PRUNING_ORDERS)}, or 'none' "
        f"(default: {','.join(d.orders)})",
    )
    p.add_argument(
        "--mask-order",
        choices=PRUNING_ORDERS,
        default=None,
        help="order prune_mask.json is taken from (default: the first of --orders)",
    )
    p.add_argument(
        "--max-drop",
        type=float,
        default=d.max_drop,
        help="export the most heads whose removal never cost more than this accuracy "
        f"(a fraction: 0.01 = {fmt.points(0.01)}; default {d.max_drop:g} = {fmt.points(d.max_drop)})",
    )
    p.add_argument(
        "--remove",
        type=non_negative_int,
        default=None,
        metavar="N",
        help="export exactly the first N heads of the mask order instead",
    )
    p.add_argument(
        "--prune-every",
        type=positive_int,
        default=d.prune_every,
        metavar="K",
        help="measure accuracy after every K removed heads (default: at steps chosen around the tolerance, "
        "see --prune-passes)",
    )
    p.add_argument(
        "--prune-passes",
        type=int,
        default=d.prune_passes,
        metavar="N",
        help=f"passes over the set the chosen steps may cost at most (default: {d.prune_passes}): a quarter, "
        "half and three quarters of the heads for every order, then halving where the mask order's "
        "accuracy crosses the tolerance",
    )
    p.add_argument(
        "--prune-subset",
        type=positive_int,
        default=None,
        metavar="N",
        help="evaluate pruning steps on N utterances drawn with the seed (default: all)",
    )
    p.add_argument(
        "--js-rows",
        type=_js_rows,
        default=d.js_rows,
        metavar="auto|all|N",
        help="query rows compared for head redundancy: auto (every row when affordable, else a sample "
        "sized so each pair's standard error is about a fifth of the cut), all (or 0), or about N rows "
        f"(default: {d.js_rows})",
    )
    p.add_argument(
        "--group-threshold",
        type=float,
        default=d.group_threshold,
        metavar="BITS",
        help=f"near-duplicate cut in bits of mean JS divergence (default: {fmt.bits(d.group_threshold)})",
    )
    p.add_argument(
        "--seed",
        type=non_negative_int,
        default=d.seed,
        help=f"seed for the random order and row draws (default: {d.seed})",
    )
    p.add_argument("--no-importance", action="store_true", help="skip the gradient pass")
    add_report_options(p, "print the summary JSON on stdout")
    add_mask_option(p)
    p.set_defaults(func=cmd_corpus)


__all__ = ["cmd_corpus", "register", "settings_from_args"]
