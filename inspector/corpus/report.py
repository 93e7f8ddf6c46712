"""Write a corpus report to a folder under stable file names scripts can rely on.

Files (all written atomically):

``summary.json``      accuracy, macro_f1, per-intent scores, confusion matrix with its
                      label order, misfires, bad rows, unknown labels, importance,
                      redundancy groups, pruning choice and cautions
``heads.csv``         one row per head: layer, head, ``<metric>_mean``, ``<metric>_std``
                      for every name in METRIC_NAMES, importance, importance_raw
``similar_pairs.csv`` layer_a, head_a, layer_b, head_b, js_divergence (bits), js_standard_error (bits;
                      0 when every row was compared), most similar first
``pruning.csv``       order, step, heads_removed, fraction_removed, accuracy, removed_layer, removed_head
``prune_mask.json``   ``{"layer": [head, ...]}`` (layer keys as strings, counting from 0)
figures               confusion_matrix, head_importance, head_similarity, pruning_curve (.png and .svg)
"""

from __future__ import annotations

from pathlib import Path

from inspector.checkpoint.masks import mask_json
from inspector.corpus.dataset import LabelledSet
from inspector.corpus.pruning import CAUTION
from inspector.corpus.run import CorpusReport
from inspector.figures.files import check_output_folder, replace_folder, save_csv, save_json
from inspector.measures.metrics import METRIC_NAMES

SUMMARY = "summary.json"
HEADS = "heads.csv"
SIMILAR_PAIRS = "similar_pairs.csv"
PRUNING = "pruning.csv"
PRUNE_MASK = "prune_mask.json"
FIGURES = {
    "confusion": "confusion_matrix",
    "importance": "head_importance",
    "similarity": "head_similarity",
    "pruning": "pruning_curve",
}
ATTENTION_CAUTION = (
    "Attention weights alone are not a faithful explanation of a prediction "
    "(Jain & Wallace 2019; Wiegreffe & Pinter 2019); read head statistics as descriptions, not causes."
)
_TOP = 5

HEADS_HEADER: tuple[str, ...] = (
    "layer",
    "head",
    *(f"{name}_{stat}" for name in METRIC_NAMES for stat in ("mean", "std")),
    "importance",
    "importance_raw",
)
SIMILAR_PAIRS_HEADER = ("layer_a", "head_a", "layer_b", "head_b", "js_divergence", "js_standard_error")
PRUNING_HEADER = (
    "order",
    "step",
    "heads_removed",
    "fraction_removed",
    "accuracy",
    "removed_layer",
    "removed_head",
)


def _head(layer: int, head: int, **extra: float) -> dict:
    return {"layer": int(layer), "head": int(head), **extra}


def data_dict(data: LabelledSet) -> dict:
    """What was read: file, format, utterances used, bad rows and labels the model does not know."""
    return {
        "file": str(data.path),
        "format": data.format,
        "utterances": len(data),
        "bad_rows": [{"row": b.row, "reason": b.reason} for b in data.bad_rows],
        "unknown_labels": data.unknown_labels,
    }


def summary_dict(report: CorpusReport) -> dict:
    """The stable JSON document of ``summary.json`` and ``headcount corpus --json``."""
    ev, data = report.evaluation, report.data
    out: dict = {
        "model": report.model_name,
        "model_path": report.model_path,
        "data": data_dict(data),
        "layers": report.num_layers,
        "heads_per_layer": report.num_heads,
        "mask": mask_json(report.settings.mask) if report.settings.mask else None,
        "accuracy": ev.accuracy,
        "macro_f1": ev.macro_f1,
        "per_intent": {
            s.label: {"precision": s.precision, "recall": s.recall, "f1": s.f1, "support": s.support}
            for s in ev.per_intent
        },
        "confusion_matrix": {
            "labels": list(ev.labels),
            "rows": "gold label",
            "columns": "predicted label",
            "matrix": ev.confusion.tolist(),
        },
        "misfires": [
            {
                "row": m.row,
                "text": m.text,
                "expected": m.expected,
                "predicted": m.predicted,
                "confidence": m.confidence,
                "expected_probability": m.expected_probability,
            }
            for m in ev.misfires
        ],
    }
    imp = report.importance
    if imp is not None:
        flat = [
            (l, h, float(imp.normalized[l, h]))
            for l in range(report.num_layers)
            for h in range(report.num_heads)
        ]
        flat.sort(key=lambda t: t[2])
        out["importance"] = {
            "method": "mean over utterances of |d loss / d head gate| (Michel et al. 2019)",
            "normalization": "l2 norm within each layer",
            "mean_loss": imp.mean_loss,
            "most_important": [_head(l, h, importance=v) for l, h, v in reversed(flat[-_TOP:])],
            "least_important": [_head(l, h, importance=v) for l, h, v in flat[:_TOP]],
        }
    else:
        out["importance"] = None
    red = report.redundancy
    out["redundancy"] = {
        "measure": "mean Jensen-Shannon divergence between attention rows (real queries, real keys)",
        "log_base": 2,
        "unit": "bits",
        "group_threshold": red.threshold,
        "grouping": "complete linkage: every pair inside a group is within the threshold, counting a pair's "
        "divergence plus twice its standard error",
        "rows_total": red.rows_total,
        "rows_compared": red.rows_compared,
        "rows": "every real query row" if not red.sampled else "a simple random sample of real query rows",
        "largest_standard_error": red.largest_standard_error,
        "groups": [[_head(l, h) for l, h in g] for g in red.groups],
        "most_similar": [
            {
                **_head(p.layer_a, p.head_a),
                "layer_b": p.layer_b,
                "head_b": p.head_b,
                "js_divergence": p.js_divergence,
                "standard_error": p.standard_error,
            }
            for p in red.pairs()[:_TOP]
        ],
    }
    pr = report.pruning
    if pr is not None:
        total = report.num_layers * report.num_heads
        out["pruning"] = {
            "orders": [c.order_name for c in pr.curves],
            "mask_order": pr.mask_order,
            "max_drop": pr.max_drop,
            "heads_removed": len(pr.removed),
            "fraction_removed": len(pr.removed) / total,
            "accuracy_before": pr.accuracy_before,
            "accuracy_after": pr.accuracy_after,
            "mask": pr.mask,
            "measured_every": pr.every,
            "measured_steps": {c.order_name: list(c.steps) for c in pr.curves},
            "passes": pr.passes,
            "utterances_per_step": pr.curves[0].utterances,
            "retrained": False,
            "caution": pr.caution,
        }
    else:
        out["pruning"] = None
    out["cautions"] = [ATTENTION_CAUTION, CAUTION]
    out["notes"] = list(report.notes)
    return out


def heads_rows(report: CorpusReport) -> list[list[object]]:
    """Rows of ``heads.csv`` (see :data:`HEADS_HEADER`)."""
    stats, imp = report.heads, report.importance
    rows = []
    for l in range(report.num_layers):
        for h in range(report.num_heads):
            cells: list[object] = [l, h]
            for name in METRIC_NAMES:
                cells += [float(stats.mean[name][l, h]), float(stats.std[name][l, h])]
            cells += ["", ""] if imp is None else [float(imp.normalized[l, h]), float(imp.raw[l, h])]
            rows.append(cells)
    return rows


def pruning_rows(report: CorpusReport) -> list[list[object]]:
    """Rows of ``pruning.csv`` (see :data:`PRUNING_HEADER`)."""
    rows: list[list[object]] = []
    if report.pruning is None:
        return rows
    for curve in report.pruning.curves:
        for step, (removed, frac, acc) in enumerate(zip(curve.steps, curve.fractions, curve.accuracy)):
            last = curve.order[removed - 1] if removed else ("", "")
            rows.append([curve.order_name, step, removed, frac, acc, last[0], last[1]])
    return rows


def report_file(name: str) -> bool:
    """True for a file name a corpus report writes (so an earlier report's folder may be replaced)."""
    stems = set(FIGURES.values())
    figure = "." in name and name.rsplit(".", 1)[0] in stems and name.rsplit(".", 1)[1] in ("png", "svg")
    return name in (SUMMARY, HEADS, SIMILAR_PAIRS, PRUNING, PRUNE_MASK) or figure


def check_report_folder(folder: str | Path) -> Path:
    """Refuse, before a run, a report folder that cannot be written or holds files of something else."""
    return check_output_folder(folder, report_file)


def write_report(report: CorpusReport, folder: str | Path, *, figures: bool = True) -> dict[str, list[Path]]:
    """Write every output file of a corpus run into ``folder``; returns name -> written paths.

    The files are written into a fresh folder beside ``folder`` and swapped in
    whole, so ``folder`` never mixes files of two runs (an earlier report there
    is replaced; a folder holding anything else is refused).
    """
    folder = check_report_folder(folder)
    written: dict[str, list[Path]] = {}

    def fill(tmp: Path) -> None:
        written.update(_write_files(report, tmp, figures))

    replace_folder(folder, fill)
    return {key: [folder / p.name for p in paths] for key, paths in written.items()}


def _write_files(report: CorpusReport, folder: Path, figures: bool) -> dict[str, list[Path]]:
    from inspector.figures import corpus as plots

    written: dict[str, list[Path]] = {
        "summary": [save_json(folder / SUMMARY, summary_dict(report))],
        "heads": [save_csv(folder / HEADS, HEADS_HEADER, heads_rows(report))],
        "similar_pairs": [
            save_csv(
                folder / SIMILAR_PAIRS,
                SIMILAR_PAIRS_HEADER,
                (
                    [p.layer_a, p.head_a, p.layer_b, p.head_b, p.js_divergence, p.standard_error]
                    for p in report.redundancy.pairs()
                ),
            )
        ],
    }
    if report.pruning is not None:
        written["pruning"] = [save_csv(folder / PRUNING, PRUNING_HEADER, pruning_rows(report))]
        written["prune_mask"] = [save_json(folder / PRUNE_MASK, report.pruning.mask)]
    if figures:
        made = {
            "confusion": plots.confusion_figure(report.evaluation, report.model_name),
            "similarity": plots.similarity_figure(report.redundancy, report.model_name),
        }
        if report.importance is not None:
            made["importance"] = plots.importance_figure(report.importance, report.model_name)
        if report.pruning is not None:
            made["pruning"] = plots.pruning_figure(report.pruning, report.model_name)
        for key, fig in made.items():
            written[f"figure_{key}"] = plots.save_figure(fig, folder / FIGURES[key])
    return written
