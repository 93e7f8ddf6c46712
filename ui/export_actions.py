"""Export of the sentence views: figure (PNG/SVG/PDF) plus CSV, and the one-page figure sheet.

:func:`build_export` snapshots what a view shows into an :class:`ExportJob`
(plain Python, no Qt); :func:`run_export` renders and writes it with
:mod:`inspector.figures` (atomic writes). :class:`ExportController` adds the
file dialog and runs jobs on the background "export" channel so the window
never waits for matplotlib.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from matplotlib.figure import Figure
from PySide6.QtCore import QObject, QSettings, Signal
from PySide6.QtWidgets import QFileDialog, QWidget

from inspector import figures
from inspector.figures import Caption, Table
from ui.state import SCALES, SentencePage, arc_links
from ui.worker import JobRunner

EXPORT_KINDS: dict[str, str] = {
    "mosaic": "Head mosaic",
    "closeup": "Close-up",
    "arcs": "Token arcs",
    "relevance": "Relevance band",
    "sheet": "Figure sheet",
}
"""Exportable views (key -> menu text)."""

_FILTERS = {"png": "PNG image (*.png)", "svg": "SVG drawing (*.svg)", "pdf": "PDF document (*.pdf)"}


@dataclass
class ExportJob:
    """Everything needed to write one view, detached from the live state."""

    kind: str
    make_figure: Callable[[], Figure]
    make_table: Callable[[], Table] | None
    default_stem: str


def _slug(text: str, limit: int = 32) -> str:
    slug = re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-").lower()
    return slug[:limit].strip("-") or "sentence"


def build_export(page: SentencePage, kind: str) -> ExportJob:
    """Snapshot the view ``kind`` of ``page`` for export."""
    if page.analysis is None:
        raise ValueError("nothing to export: no sentence analysed yet")
    a = page.analysis
    opts = page.options
    view = page.view()
    labels = list(view.labels)
    token_axis = "words" if opts.words else "pieces"
    token_axis += ", special tokens hidden" if opts.hide_special else ""
    stem = f"{_slug(a.model_name, 20)}-{_slug(a.text)}-{kind}"

    def caption(view_name: str, where: str, metric: str = "", scale: str = "") -> Caption:
        return Caption(a.model_name, a.text, view_name, f"{where}; {token_axis}", metric, scale)

    if kind == "mosaic":
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            "Head mosaic",
            f"all {a.num_layers} layers x {a.num_heads} heads, selected layer {page.layer}, head {page.head}",
            f"{page.metric_label()} (printed under each head)",
            SCALES[opts.scale],
        )
        sel = (page.layer, page.head)
        return ExportJob(
            kind,
            lambda: figures.mosaic_figure(heads, metric, cap, per_head=per_head, selected=sel),
            lambda: figures.mosaic_table(heads, metric, opts.metric, labels),
            stem,
        )
    focus = page.focus()
    if kind in ("closeup", "arcs"):
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        matrix, query = focus.matrix, page.query_index()
        if kind == "closeup":
            cap = caption(f"Close-up, {focus.view}", focus.where, focus.note, "0 to the largest value shown")
            return ExportJob(
                kind,
                lambda: figures.matrix_figure(matrix, labels, cap, query=query),
                lambda: figures.matrix_table(matrix, labels),
                stem,
            )
        links = arc_links(matrix, query, opts.links, opts.threshold)
        mode = (
            f"from query \u2018{labels[query]}\u2019"
            if opts.links == "query"
            else f"every link >= {opts.threshold:g}"
        )
        cap = caption(f"Token arcs, {focus.view}", f"{focus.where}; {mode}")
        q = query if opts.links == "query" else None
        return ExportJob(
            kind,
            lambda: figures.arcs_figure(matrix, labels, links, cap, query=q),
            lambda: figures.links_table(links, labels),
            stem,
        )
    rel = page.relevance()
    if kind == "relevance":
        if rel.values is None:
            raise ValueError(f"{rel.source}: {rel.note}")
        values = rel.values
        cap = caption(f"Relevance band, {rel.source}", rel.note, "", "0 to the largest relevance")
        return ExportJob(
            kind,
            lambda: figures.relevance_figure(values, labels, cap),
            lambda: figures.relevance_table(values, labels),
            stem,
        )
    if kind == "sheet":
        if focus.matrix is None:
            raise ValueError(f"{focus.view}: {focus.note or 'not available'}")
        heads, metric = page.head_matrices(), page.metric_values()
        per_head = opts.scale == "own"
        cap = caption(
            f"Figure sheet (mosaic, close-up: {focus.view}, relevance: {rel.source})",
            f"{focus.where}",
            f"{page.metric_label()} (under each head)",
            f"mosaic {SCALES[opts.scale]}; close-up and relevance 0 to their largest value",
        )
        matrix, query, values = focus.matrix, page.query_index(), rel.values
        sel = (page.layer, page.head)
        return ExportJob(
            kind,
            lambda: figures.sheet_figure(
                heads,
                metric,
                matrix,
                labels,
                values,
                labels,
                cap,
                per_head=per_head,
                selected=sel,
                query=query,
                focus_title=f"Close-up: {focus.view}, {focus.where}",
                relevance_title=f"Relevance band: {rel.source} ({rel.note})",
            ),
            None,
            stem,
        )
    raise KeyError(kind)


def run_export(job: ExportJob, path: Path) -> list[Path]:
    """Render and write ``job`` to ``path`` (+ CSV beside it); nothing partial is left on failure."""
    fig = job.make_figure()
    table = job.make_table() if job.make_table is not None else None
    return figures.export_figure(fig, table, Path(path))


class ExportController(QObject):
    """Asks where to save, then writes in the background and reports back."""

    finished = Signal(list)
    """The written paths."""
    failed = Signal(str)

    def __init__(self, parent: QWidget, page: SentencePage, runner: JobRunner, settings: QSettings) -> None:
        super().__init__(parent)
        self._parent, self._page, self._runner, self._settings = parent, page, runner, settings

    def ask(self, kind: str) -> None:
        """Open a save dialog for ``kind``, then export."""
        try:
            job = build_export(self._page, kind)
        except ValueError as exc:
            self.failed.emit(str(exc))
            return
        self.ask_for(job, EXPORT_KINDS[kind], ["pdf"] if kind == "sheet" else ["png", "svg", "pdf"])

    def ask_for(self, job: ExportJob, title: str, formats: list[str] | None = None) -> None:
        """Open a save dialog for a prepared ``job`` (any page's), then export it in the background."""
        formats = formats or ["png", "svg", "pdf"]
        folder = Path(str(self._settings.value("export/folder", str(Path.home()))))
        filters = ";;".join(_FILTERS[f] for f in formats)
        path, chosen = QFileDialog.getSaveFileName(
            self._parent,
            f"Export {title.lower()}",
            str(folder / f"{job.default_stem}.{formats[0]}"),
            filters,
        )
        if not path:
            return
        target = Path(path)
        if target.suffix.lower() not in figures.FORMATS:
            fmt = next((f for f in formats if _FILTERS[f] == chosen), formats[0])
            target = target.with_name(f"{target.name}.{fmt}")
        self._settings.setValue("export/folder", str(target.parent))
        self.start(job, target)

    def export(self, kind: str, path: Path) -> int:
        """Export ``kind`` to ``path`` without a dialog (background); returns the job number."""
        return self.start(build_export(self._page, kind), Path(path))

    def start(self, job: ExportJob, path: Path) -> int:
        return self._runner.submit(
            "export", lambda: run_export(job, path), self.finished.emit, self.failed.emit, latest_only=False
        )
