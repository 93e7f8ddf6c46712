"""Head masks as files, and pruned checkpoints, for any page: dialogs in front, the work off the GUI thread.

Loading reads ``prune_mask.json`` (``{"layer": [head, ...]}``) and checks it
against the open model, naming heads the model lacks. Saving writes it
atomically. Writing a pruned checkpoint runs
:func:`inspector.checkpoint.pruned.write_pruned_checkpoint` on the window's
"export" channel while holding ``MODEL_LOCK`` (it may run the model once to map
shared blocks), and asks before replacing a folder that is not empty.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QObject, QSettings, Signal
from PySide6.QtWidgets import QFileDialog, QMessageBox, QWidget

from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask, read_mask
from inspector.checkpoint.pruned import PruneProvenance, write_pruned_checkpoint
from inspector.errors import HeadcountError
from inspector.figures.files import save_json
from inspector.formatting import count
from ui.widgets.worker import MODEL_LOCK, JobRunner

MASK_FILTER = "Head masks (*.json);;All files (*)"
CHANNEL = "export"


class MaskFiles(QObject):
    """Load / save masks and write pruned checkpoints; reports through ``status`` and ``error``."""

    status = Signal(str)
    error = Signal(str)
    written = Signal(object)
    """The folder a pruned checkpoint was written to (Path)."""

    def __init__(
        self, runner: JobRunner, settings: QSettings | None = None, parent: QObject | None = None
    ) -> None:
        super().__init__(parent)
        self.runner, self.settings = runner, settings

    def _folder(self) -> str:
        if self.settings is None:
            return str(Path.home())
        return str(self.settings.value("masks/folder", str(Path.home())))

    def _remember(self, path: Path) -> None:
        if self.settings is not None:
            self.settings.setValue("masks/folder", str(path.parent))

    # -- load / save -------------------------------------------------------------------------------
    def load(self, path: Path, lm: LoadedModel | None) -> HeadMask | None:
        """Read ``path`` and check it against ``lm``; None (and an error message) if it does not fit."""
        try:
            mask = read_mask(path, lm)
        except HeadcountError as exc:
            self.error.emit(f"Could not use the mask: {exc}")
            return None
        self.status.emit(f"Loaded {count(len(mask), 'head')} switched off from {Path(path).name}")
        return mask

    def ask_load(self, parent: QWidget, lm: LoadedModel | None) -> HeadMask | None:
        path, _ = QFileDialog.getOpenFileName(parent, "Load a head mask", self._folder(), MASK_FILTER)
        if not path:
            return None
        self._remember(Path(path))
        return self.load(Path(path), lm)

    def save(self, mask: HeadMask, path: Path) -> Path:
        """Write ``mask`` to ``path`` atomically as ``{"layer": [head, ...]}``."""
        written = save_json(Path(path), mask.to_json())
        self.status.emit(f"Saved the mask ({count(len(mask), 'head')} off) to {path}")
        return written

    def ask_save(self, parent: QWidget, mask: HeadMask) -> Path | None:
        start = str(Path(self._folder()) / "prune_mask.json")
        path, _ = QFileDialog.getSaveFileName(parent, "Save the heads switched off", start, MASK_FILTER)
        if not path:
            return None
        self._remember(Path(path))
        try:
            return self.save(mask, Path(path))
        except HeadcountError as exc:
            self.error.emit(f"Could not save the mask: {exc}")
            return None

    # -- pruned checkpoint -------------------------------------------------------------------------
    def write_pruned(
        self,
        lm: LoadedModel,
        mask: HeadMask,
        folder: Path,
        *,
        force: bool = False,
        provenance: PruneProvenance | None = None,
    ) -> int:
        """Write the pruned checkpoint in the background; returns the job number."""

        def job() -> Path:
            with MODEL_LOCK:
                return write_pruned_checkpoint(lm, mask, folder, force=force, provenance=provenance)

        def done(path: object) -> None:
            self.status.emit(f"Wrote the pruned checkpoint ({count(len(mask), 'head')} zeroed) to {path}")
            self.written.emit(path)

        return self.runner.submit(
            CHANNEL,
            job,
            done,
            lambda text: self.error.emit(f"Could not write the pruned checkpoint: {text}"),
            latest_only=False,
        )

    def ask_write_pruned(
        self,
        parent: QWidget,
        lm: LoadedModel | None,
        mask: HeadMask,
        provenance: PruneProvenance | None = None,
    ) -> int | None:
        """Ask for a folder (new, or confirm replacing a non-empty one), then write in the background."""
        if lm is None:
            self.error.emit("Open a model first (File \u203a Open model folder, Ctrl+O)")
            return None
        if not mask:
            self.error.emit("No head is switched off: nothing to prune")
            return None
        start = str(Path(self._folder()) / f"{lm.name}-pruned")
        path, _ = QFileDialog.getSaveFileName(
            parent,
            "Write the pruned checkpoint into a folder",
            start,
            "Checkpoint folder (*)",
            options=QFileDialog.Option.DontConfirmOverwrite,
        )
        if not path:
            return None
        folder = Path(path)
        self._remember(folder)
        force = False
        if folder.exists() and (not folder.is_dir() or any(folder.iterdir())):
            answer = QMessageBox.question(
                parent,
                "Replace the folder?",
                f"{folder} is not empty. Replace its contents with the pruned checkpoint?",
            )
            if answer != QMessageBox.StandardButton.Yes:
                return None
            force = True
        return self.write_pruned(lm, mask, folder, force=force, provenance=provenance)
