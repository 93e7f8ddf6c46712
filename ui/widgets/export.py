"""Export dialogs and background writing, shared by every page.

A page snapshots what a view shows into an :class:`ExportJob` (plain Python, no
Qt); :func:`run_export` renders and writes it (matplotlib, atomic writes).
:class:`ExportController` adds the file dialog, remembers the last folder used
by *any* file dialog of the window (exports, masks, reports: :func:`last_folder`)
and the paper size, and runs jobs on the background "export" channel so the
window never waits for matplotlib. When a job is written it says what it wrote
(:attr:`ExportController.described`), for the status bar.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from matplotlib.figure import Figure
from PySide6.QtCore import QObject, QSettings, Signal
from PySide6.QtWidgets import QFileDialog, QWidget

from inspector.figures import sentence as figures
from inspector.figures.paper import DEFAULT_PAPER, PAPERS
from inspector.figures.sentence import Table
from ui.widgets.worker import JobRunner

_FILTERS = {"png": "PNG image (*.png)", "svg": "SVG drawing (*.svg)", "pdf": "PDF document (*.pdf)"}
FOLDER_KEY = "files/last_folder"
"""One setting for the folder of the last file chosen in any dialog (export, mask, report, data)."""
PAPER_KEY = "export/paper"


@dataclass
class ExportJob:
    """Everything needed to write one view, detached from the live state."""

    kind: str
    make_figure: Callable[[], Figure | Sequence[Figure]]
    make_table: Callable[[], Table] | None
    default_stem: str
    title: str = ""
    """What the view is called in the status message ('' = the dialog's title)."""


def slug(text: str, limit: int = 32) -> str:
    """``text`` as a file-name part: letters and digits joined by '-', cut at a word end within ``limit``."""
    words = re.findall(r"[A-Za-z0-9]+", text.lower())
    out = ""
    for word in words:
        candidate = f"{out}-{word}" if out else word
        if len(candidate) > limit:
            break
        out = candidate
    if not out and words:
        out = words[0][:limit]  # a single word longer than the limit: the only cut left
    return out or "sentence"


def file_stem(model: str, text: str, kind: str) -> str:
    """The default file name of an export: ``model-first-words-of-the-sentence-kind``, whole words only."""
    return f"{slug(model, 24)}-{slug(text, 40)}-{kind}"


def last_folder(settings: QSettings) -> Path:
    """The folder of the last file chosen in any of the window's dialogs (the home folder at first)."""
    value = settings.value(FOLDER_KEY, "")
    folder = Path(str(value)) if value else Path.home()
    return folder if folder.is_dir() else Path.home()


def remember_folder(settings: QSettings, path: Path) -> None:
    """Remember ``path``'s folder (or ``path`` itself when it is a folder) for the next dialog."""
    path = Path(path)
    settings.setValue(FOLDER_KEY, str(path if path.is_dir() else path.parent))


def ask_folder(parent: QWidget, settings: QSettings, title: str) -> Path | None:
    """Ask for a folder, starting in the last folder used; remember the choice. None when cancelled."""
    folder = QFileDialog.getExistingDirectory(parent, title, str(last_folder(settings)))
    if not folder:
        return None
    remember_folder(settings, Path(folder))
    return Path(folder)


def write_folder(
    runner: JobRunner,
    write: Callable[[], dict[str, list[Path]]],
    said: Callable[[int], str],
    what: str,
    status: Callable[[str], None],
    error: Callable[[str], None],
) -> int:
    """Write a run's files (``write()``: name -> written paths) on the background "export" channel.

    When done, ``status`` gets ``said(number of files)``; on failure ``error`` gets
    ``Could not write <what>: <reason>``. Returns the job number.
    """

    def done(written: object) -> None:
        status(said(sum(len(paths) for paths in written.values())))

    return runner.submit(
        "export", write, done, lambda text: error(f"Could not write {what}: {text}"), latest_only=False
    )


def run_export(job: ExportJob, path: Path) -> list[Path]:
    """Render and write ``job`` to ``path`` (+ CSV beside it); nothing partial is left on failure."""
    fig = job.make_figure()
    table = job.make_table() if job.make_table is not None else None
    return figures.export_figure(fig, table, Path(path))


def describe_written(title: str, paths: Sequence[Path]) -> str:
    """``Exported the close-up: a.png and a.csv in /folder`` (the status bar's message)."""
    names = [Path(p).name for p in paths]
    listed = names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]
    where = Path(paths[0]).parent if paths else ""
    return f"Exported {title[:1].lower() + title[1:]}: {listed} in {where}"


class ExportController(QObject):
    """Asks where to save, then writes in the background and reports back.

    ``build(kind)`` snapshots one of the ``kinds`` (key -> menu text) of the page
    that owns the export menu; ``ask_for`` exports any page's prepared job.
    """

    finished = Signal(list)
    """The written paths."""
    described = Signal(str)
    """What was exported, in words: the view and the files (for the status bar)."""
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

    @property
    def settings(self) -> QSettings:
        return self._settings

    def paper(self) -> str:
        """The paper chosen for page-sized exports (``a4`` by default, or ``letter``)."""
        value = str(self._settings.value(PAPER_KEY, DEFAULT_PAPER))
        return value if value in PAPERS else DEFAULT_PAPER

    def set_paper(self, paper: str) -> None:
        if paper in PAPERS:
            self._settings.setValue(PAPER_KEY, paper)

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
        filters = ";;".join(_FILTERS[f] for f in formats)
        path, chosen = QFileDialog.getSaveFileName(
            self._parent,
            f"Export {title.lower()}",
            str(last_folder(self._settings) / f"{job.default_stem}.{formats[0]}"),
            filters,
        )
        if not path:
            return
        target = Path(path)
        if target.suffix.lower() not in figures.FORMATS:
            fmt = next((f for f in formats if _FILTERS[f] == chosen), formats[0])
            target = target.with_name(f"{target.name}.{fmt}")
        remember_folder(self._settings, target)
        if not job.title:
            job.title = title
        self.start(job, target)

    def export(self, kind: str, path: Path) -> int:
        """Export ``kind`` to ``path`` without a dialog (background); returns the job number."""
        job = self._build(kind)
        job.title = job.title or self._kinds.get(kind, kind)
        return self.start(job, Path(path))

    def start(self, job: ExportJob, path: Path) -> int:
        title = job.title or job.kind

        def done(paths: list) -> None:
            self.finished.emit(paths)
            self.described.emit(describe_written(title, paths))

        return self._runner.submit(
            "export", lambda: run_export(job, path), done, self.failed.emit, latest_only=False
        )
