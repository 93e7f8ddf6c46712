"""Read a corpus run folder (the files of :mod:`inspector.corpus.report`) back into the core's data types."""

from __future__ import annotations

import csv
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from inspector.corpus import report as files
from inspector.corpus.importance import HeadImportance
from inspector.corpus.pruning import CAUTION, PruningCurve, PruningResult
from inspector.corpus.redundancy import Redundancy
from inspector.corpus.run import Evaluation, Misfire
from inspector.errors import HeadcountError


@dataclass
class RunFolder:
    """What a corpus run found, as read from its folder."""

    folder: Path
    summary: dict
    evaluation: Evaluation
    importance: HeadImportance | None
    redundancy: Redundancy
    pruning: PruningResult | None
    mask: dict[str, list[int]] = field(default_factory=dict)

    @property
    def model(self) -> str:
        return str(self.summary["model"])

    @property
    def model_path(self) -> str | None:
        return self.summary.get("model_path")

    @property
    def layers(self) -> int:
        return int(self.summary["layers"])

    @property
    def heads(self) -> int:
        return int(self.summary["heads_per_layer"])


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def read_run(folder: str | Path) -> RunFolder:
    """Read ``summary.json``, ``heads.csv``, ``similar_pairs.csv`` and, when present, ``pruning.csv`` and
    ``prune_mask.json`` of a corpus run; a one-line error when the folder is not one."""
    folder = Path(folder)
    summary_path = folder / files.SUMMARY
    if not summary_path.is_file():
        raise HeadcountError(
            f"{folder}: not a corpus run folder (no {files.SUMMARY}; run 'headcount corpus' first)"
        )
    try:
        summary = json.loads(summary_path.read_text(encoding="utf-8"))
        layers, heads = int(summary["layers"]), int(summary["heads_per_layer"])
        cm = summary["confusion_matrix"]
        misfires = [
            Misfire(
                int(m["row"]),
                m["text"],
                m["expected"],
                m["predicted"],
                float(m["confidence"]),
                float(m["expected_probability"]),
            )
            for m in summary["misfires"]
        ]
        evaluation = Evaluation(
            list(cm["labels"]),
            np.asarray(cm["matrix"], dtype=np.int64),
            np.zeros(0, int),
            np.zeros(0),
            misfires,
        )
        head_rows = _rows(folder / files.HEADS)
        importance = None
        if summary.get("importance") and head_rows and head_rows[0].get("importance"):
            norm = np.zeros((layers, heads))
            raw = np.zeros((layers, heads))
            for r in head_rows:
                norm[int(r["layer"]), int(r["head"])] = float(r["importance"])
                raw[int(r["layer"]), int(r["head"])] = float(r["importance_raw"])
            imp = summary["importance"]
            importance = HeadImportance(
                raw, norm, float(imp["mean_loss"]), int(summary["data"]["utterances"])
            )
        js = np.zeros((layers * heads, layers * heads))
        for r in _rows(folder / files.SIMILAR_PAIRS):
            i = int(r["layer_a"]) * heads + int(r["head_a"])
            j = int(r["layer_b"]) * heads + int(r["head_b"])
            js[i, j] = js[j, i] = float(r["js_divergence"])
        red = summary["redundancy"]
        redundancy = Redundancy(
            js,
            layers,
            heads,
            int(red["rows_total"]),
            int(red["rows_compared"]),
            float(red["group_threshold"]),
        )
        pruning, mask = None, {}
        if summary.get("pruning") and (folder / files.PRUNING).is_file():
            pruning, mask = _pruning(folder, summary["pruning"], layers, heads)
    except (KeyError, ValueError, TypeError, json.JSONDecodeError, OSError) as exc:
        raise HeadcountError(f"{folder}: the corpus run's files cannot be read ({exc})") from None
    return RunFolder(folder, summary, evaluation, importance, redundancy, pruning, mask)


def _pruning(folder: Path, info: dict, layers: int, heads: int) -> tuple[PruningResult, dict]:
    """The pruning curves from ``pruning.csv`` and the chosen heads from the summary's mask."""
    by_order: dict[str, list[dict[str, str]]] = {}
    for r in _rows(folder / files.PRUNING):
        by_order.setdefault(r["order"], []).append(r)
    total = layers * heads
    placeholder = [(-1, -1)] * total  # the figure needs the count of heads, not the order itself
    curves = [
        PruningCurve(
            name,
            placeholder,
            [int(r["heads_removed"]) for r in rows],
            [float(r["accuracy"]) for r in rows],
            int(info["utterances_per_step"]),
        )
        for name, rows in by_order.items()
    ]
    mask = {str(k): [int(h) for h in v] for k, v in (info.get("mask") or {}).items()}
    removed = sorted((int(l), h) for l, hs in mask.items() for h in hs)
    result = PruningResult(
        curves=curves,
        mask_order=info["mask_order"],
        removed=removed,
        accuracy_before=float(info["accuracy_before"]),
        accuracy_after=info["accuracy_after"],
        max_drop=info["max_drop"],
        every=None if info["measured_every"] is None else int(info["measured_every"]),
        subset=None,
        passes=int(info.get("passes") or 0),
        caution=info.get("caution", CAUTION),
    )
    return result, mask
