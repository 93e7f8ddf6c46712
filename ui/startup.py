"""The first second of the window: show something at once, load the model libraries behind it.

Importing torch and transformers (which the main window's modules need) takes
seconds on a busy laptop. :func:`show_while_loading` puts a small window on screen
straight away, saying what is being loaded, imports the main window's modules on a
background thread while the event loop keeps that window painted, then builds the
main window in its place; the main window then opens the model in the background as
usual, with its busy bar. Nothing here imports torch, transformers or matplotlib.
"""

from __future__ import annotations

import importlib
import threading
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QEventLoop, Qt
from PySide6.QtWidgets import QApplication, QLabel, QProgressBar, QVBoxLayout, QWidget

HEAVY_MODULES = ("ui.main_window",)
"""Imported off the GUI thread before the main window is built (they pull in torch, transformers, matplotlib)."""

LIBRARIES_READY = threading.Event()
"""Set once :data:`HEAVY_MODULES` are imported (tests check the start-up window came first)."""


class StartupWindow(QWidget):
    """A plain window with the program's name, what is loading, and a busy bar."""

    def __init__(self, model: Path | None, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Headcount")
        self.setObjectName("startup")
        layout = QVBoxLayout(self)
        layout.setAlignment(Qt.AlignmentFlag.AlignCenter)
        title = QLabel("<b>Headcount</b>", self)
        title.setAlignment(Qt.AlignmentFlag.AlignCenter)
        what = f"then opening {model.name}" if model is not None else "then the window opens"
        self.message = QLabel(f"Loading the model libraries (torch, transformers)\u2026 {what}", self)
        self.message.setAlignment(Qt.AlignmentFlag.AlignCenter)
        bar = QProgressBar(self)
        bar.setRange(0, 0)
        bar.setMaximumWidth(240)
        layout.addWidget(title)
        layout.addWidget(self.message)
        layout.addWidget(bar, 0, Qt.AlignmentFlag.AlignCenter)
        self.resize(1360, 880)


def _import_heavy(failure: list[BaseException]) -> None:
    try:
        for name in HEAVY_MODULES:
            importlib.import_module(name)
    except BaseException as exc:  # handed to the GUI thread, which raises it
        failure.append(exc)
    finally:
        LIBRARIES_READY.set()


def show_while_loading(app: QApplication, model: Path | None, build: Callable[[], QWidget]) -> QWidget:
    """Show a start-up window, import the heavy modules in the background, then show ``build()`` in its place.

    Returns the built (main) window, shown where the start-up window was. The event loop
    runs while the modules load, so the start-up window paints and answers (and timers fire).
    """
    starting = StartupWindow(model)
    starting.show()
    failure: list[BaseException] = []
    if not LIBRARIES_READY.is_set():
        worker = threading.Thread(
            target=_import_heavy, args=(failure,), name="headcount-imports", daemon=True
        )
        worker.start()
        while not LIBRARIES_READY.wait(0.02):
            app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 30)
        worker.join()
    if failure:
        starting.close()
        raise failure[0]
    window = build()
    window.move(starting.pos())  # same place; the size is the window's own (or --size)
    window.show()
    starting.close()
    starting.deleteLater()
    return window
