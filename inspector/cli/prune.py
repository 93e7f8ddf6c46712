"""``headcount prune``: write a copy of a checkpoint with the heads of a mask zeroed.

    headcount prune MODEL_DIR --mask FILE --out DIR [--force]

The copy is a standard checkpoint folder (see :mod:`inspector.checkpoint.pruned`)
with a ``PRUNED.md`` beside the weights. When the mask file sits in a corpus
report folder whose ``summary.json`` chose exactly that mask, the accuracy
before and after on that set is written into ``PRUNED.md`` too.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from inspector.cli.common import (
    add_mask_option,
    add_model_command,
    load_mask,
    load_model,
    mask_record,
    print_json,
)
from inspector.errors import HeadcountError


def provenance_for(mask_file: str | Path, mask):
    """What the corpus report beside ``mask_file`` says about this mask (only the file name when nothing matches)."""
    from inspector.checkpoint.pruned import PruneProvenance
    from inspector.corpus.report import SUMMARY

    path = Path(mask_file)
    summary_path = path.parent / SUMMARY
    try:
        summary = json.loads(summary_path.read_text(encoding="utf-8"))
        pruning = summary.get("pruning") or {}
    except (OSError, ValueError, AttributeError):
        return PruneProvenance(mask_file=str(path))
    if not isinstance(pruning, dict) or pruning.get("mask") != mask.to_json():
        return PruneProvenance(mask_file=str(path))
    data = summary.get("data") or {}
    return PruneProvenance(
        mask_file=str(path),
        data_file=data.get("file"),
        utterances=pruning.get("utterances_per_step") or data.get("utterances"),
        order=pruning.get("mask_order"),
        accuracy_before=pruning.get("accuracy_before"),
        accuracy_after=pruning.get("accuracy_after"),
    )


def cmd_prune(args: argparse.Namespace) -> int:
    from inspector.checkpoint.pruned import NOTE_FILE, write_pruned_checkpoint

    if not args.mask:
        raise HeadcountError("prune needs --mask FILE (a prune_mask.json)")
    lm = load_model(args)
    mask = load_mask(args, lm)
    provenance = provenance_for(args.mask, mask)
    out = write_pruned_checkpoint(lm, mask, args.out, force=args.force, provenance=provenance)
    if args.json:
        doc = {
            "model": lm.name,
            "mask": mask_record(mask),
            "mask_file": str(args.mask),
            "out": str(out),
            "heads_removed": len(mask),
            "heads_total": lm.num_layers * lm.num_heads,
            "accuracy_before": provenance.accuracy_before,
            "accuracy_after": provenance.accuracy_after,
        }
        print_json(doc)
    else:
        print(f"wrote {out} with {mask.summary(lm.num_layers, lm.num_heads)}", file=sys.stdout)
        print(f"see {out / NOTE_FILE}: re-validate the model before it ships", file=sys.stdout)
    return 0


def register(sub: argparse._SubParsersAction) -> None:
    """Add ``prune MODEL_DIR --mask FILE --out DIR`` to the command line."""
    p = add_model_command(
        sub,
        "prune",
        "write a copy of the checkpoint in which the heads of a mask contribute nothing (zeroed weights)",
    )
    add_mask_option(p)
    p.add_argument("--out", required=True, metavar="DIR", help="folder for the pruned checkpoint")
    p.add_argument("--force", action="store_true", help="replace the contents of a non-empty --out folder")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    p.epilog = (
        "The heads' output-projection columns and query/key/value rows are set to zero; shapes are unchanged, "
        "so the folder loads in plain transformers. PRUNED.md says which heads, from which mask, and the "
        "accuracy on the set the mask came from when the mask file sits in a corpus report folder. "
        "Re-validate the model before it ships; a zeroed head does not make inference faster."
    )
    p.set_defaults(func=cmd_prune)
