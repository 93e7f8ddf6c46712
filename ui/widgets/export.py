"""Export dialogs and background writing, shared by every page.

A page snapshots what a view shows into an :class:`ExportJob` (plain Python, no
Qt); :func:`run_export` renders and writes it (matplotlib, atomic writes).
:class:`ExportController` adds the file dialog, remembers the last folder and runs
jobs on the background "export" channel so the window never waits for matplotlib.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from matplotlib.figure import Figure
from PySide6.QtCore import QObject, QSettings, Signal
from PySide6.QtWidgets import QFileDialog, QWidget

from inspector.figures import sentence as figures
from inspector.figures.sentence import Table
from ui.widgets.worker import JobRunner

_FILTERS = {"png": "PNG image (*.png)", "svg": "SVG drawing (*.svg)", "pdf": "PDF document (*.pdf)"}


@dataclass
class ExportJob:
    """Everything needed to write one view, detached from the live state."""

    kind: str
    make_figure: Callable[[], Figure]
    make_table: Callable[[], Table] | None
    default_stem: str


def slug(text: str, limit: int = 32) -> str:
    slug = re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-").lower()
    return slug[:limit].strip("-") or "sentence"


def run_export(job: ExportJob, path: Path) -> list[Path]:
    """Render and write ``job`` to ``path`` (+ CSV beside it); nothing partial is left on failure."""
    fig = job.make_figure()
    table = job.make_table() if job.make_table is not None else None
    return figures.export_figure(fig, table, Path(path))


class ExportController(QObject):
    """Asks where to save, then writes in the background and reports back.

    ``build(kind)`` snapshots one of the ``kinds`` (key -> menu text) of the page
    that owns the export menu; ``ask_for`` exports any page's prepared job.
    """

    finished = Signal(list)
    """The written paths."""
    failed = Signal(str)

    def __init__(
        self,
        parent: QWidget,
        runner: JobRunner,
        settings: QSettings,
        build: Callable[[str], ExportJob],
        kinds: dict[str, str],
    ) -> None:
        super().__init__(parent)
        self._parent, self._runner, self._settings = parent, runner, settings
        self._build, self._kinds = build, kinds

    def ask(self, kind: str) -> None:
        """Open a save dialog for ``kind``, then export."""
        try:
            job = self._build(kind)
        except ValueError as exc:
            self.failed.emit(str(exc))
            return
        self.ask_for(job, self._kinds[kind], ["pdf"] if kind == "sheet" else ["png", "svg", "pdf"])

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
        return self.start(self._build(kind), Path(path))

    def start(self, job: ExportJob, path: Path) -> int:
        return self._runner.submit(
            "export", lambda: run_export(job, path), self.finished.emit, self.failed.emit, latest_only=False
        )
