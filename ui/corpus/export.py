"""Export of the corpus page's views: each figure (PNG/SVG/PDF) with its numbers as CSV.

:func:`build_export` snapshots one view of a :class:`inspector.corpus.run.CorpusReport`
into an :class:`~ui.widgets.export.ExportJob`; the window's shared export
controller asks where to save and writes it in the background. The figures
are the same as the review report's and ``headcount corpus``'s.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

from inspector.corpus.report import PRUNING_HEADER, SIMILAR_PAIRS_HEADER, pruning_rows
from inspector.corpus.run import CorpusReport, Misfire
from inspector.figures import corpus as plots
from inspector.figures.paper import DEFAULT_PAPER
from ui.widgets.export import ExportJob, slug

EXPORT_KINDS: dict[str, str] = {
    "confusion": "Confusion matrix",
    "misfires": "Misfires by confusable pair",
    "importance": "Head importance",
    "similarity": "Head similarity",
    "pruning": "Pruning curve",
}
"""Exportable views of the corpus page (key -> what the status bar calls them)."""

MISFIRE_HEADER = ["row", "text", "expected", "predicted", "confidence", "expected_probability"]


def build_export(
    report: CorpusReport, kind: str, shown: Sequence[Misfire] | None = None, paper: str = DEFAULT_PAPER
) -> ExportJob:
    """Snapshot the view ``kind``; ``shown`` are the misfires the table shows now (after its filter)."""
    model = report.model_name
    stem = f"{slug(model, 24)}-{kind}"
    ev = report.evaluation
    if kind == "confusion":
        labels = ev.labels
        rows = [
            [e, p, int(ev.confusion[i, j]), float(ev.confusion[i, j] / max(ev.confusion[i].sum(), 1))]
            for i, e in enumerate(labels)
            for j, p in enumerate(labels)
        ]
        return ExportJob(
            kind,
            lambda: plots.confusion_figure(ev, model),
            lambda: (["expected", "predicted", "count", "share_of_expected"], rows),
            stem,
            EXPORT_KINDS[kind],
        )
    if kind == "misfires":
        from inspector.figures.report.pages import misfires

        chosen = list(ev.misfires if shown is None else shown)
        filtered = replace(ev, misfires=chosen)
        title = "Misfires by confusable pair" + (
            "" if shown is None or len(chosen) == len(ev.misfires) else " (filtered)"
        )
        rows = [
            [m.row, m.text, m.expected, m.predicted, m.confidence, m.expected_probability] for m in chosen
        ]
        return ExportJob(
            kind,
            lambda: misfires(filtered, paper, title).pages,
            lambda: (MISFIRE_HEADER, rows),
            stem,
            EXPORT_KINDS[kind],
        )
    if kind == "importance":
        imp = report.importance
        if imp is None:
            raise ValueError("head importance was not computed in this run")
        L, H = imp.normalized.shape
        rows = [[l, h, float(imp.normalized[l, h]), float(imp.raw[l, h])] for l in range(L) for h in range(H)]
        return ExportJob(
            kind,
            lambda: plots.importance_figure(imp, model),
            lambda: (["layer", "head", "importance", "importance_raw"], rows),
            stem,
            EXPORT_KINDS[kind],
        )
    if kind == "similarity":
        red = report.redundancy
        rows = [[p.layer_a, p.head_a, p.layer_b, p.head_b, p.js_divergence] for p in red.pairs()]
        return ExportJob(
            kind,
            lambda: plots.similarity_figure(red, model),
            lambda: (list(SIMILAR_PAIRS_HEADER), rows),
            stem,
            EXPORT_KINDS[kind],
        )
    if kind == "pruning":
        if report.pruning is None:
            raise ValueError("no pruning was simulated in this run")
        pr = report.pruning
        rows = pruning_rows(report)
        return ExportJob(
            kind,
            lambda: plots.pruning_figure(pr, model),
            lambda: (list(PRUNING_HEADER), rows),
            stem,
            EXPORT_KINDS[kind],
        )
    raise KeyError(kind)
