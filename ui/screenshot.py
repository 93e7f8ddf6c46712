"""Render the window to a picture, without a display and without clicking.

``headcount open MODEL_DIR --text "..." --screenshot FILE.png [--size WxH] [--page ...]``
opens the window offscreen at that size, waits until the chosen page has shown
its result (the sentence's views, the explanation of the sentence, or a whole
corpus run), saves the window as a PNG and reports whether the page got there.
Used for the pictures in ``docs/`` and by the tests.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QObject, Qt, QTimer

from ui.corpus.state import default_data_file

SETTLE_MS = 80
"""Pause after the page reports its result, so that every view has painted once."""
IDLE_POLL_MS = 50


class Shooter(QObject):
    """Waits for ``window``'s ``page`` to be ready, saves the picture, then calls ``done(ok)``."""

    def __init__(
        self,
        window,
        path: Path,
        done: Callable[[bool], None],
        *,
        page: str = "sentence",
        data: str | None = None,
    ) -> None:
        super().__init__(window)
        self.window, self.path, self.done, self.page, self.data = window, Path(path), done, page, data
        self._shot = False
        once = Qt.ConnectionType.SingleShotConnection
        window.load_failed.connect(lambda _t: self.shoot(False), once)
        if page == "sentence":
            window.sentence_page.views_updated.connect(lambda: self.shoot(True), once)
        else:
            window.model_loaded.connect(self._open_page, once)

    def _open_page(self, lm: object) -> None:
        once = Qt.ConnectionType.SingleShotConnection
        w = self.window
        if self.page == "explain":
            w.explain_page.explained.connect(lambda: self.shoot(True), once)
            w.explain_page.error.connect(lambda _t: self.shoot(False), once)
            w.explain_current_sentence()
            return
        page = w.corpus_page
        w.show_page(page)
        data = self.data or default_data_file(lm)
        if not data:
            w.show_error("--page corpus needs --data FILE (a labelled evaluation set) for this model")
            self.shoot(False)
            return
        page.path_edit.setText(str(data))
        page.finished.connect(lambda status: self.shoot(status == "done"), once)
        page.run()

    def shoot(self, ok: bool) -> None:
        """Save the window once every background job has ended, then report ``ok``."""
        if self._shot:
            return
        self._shot = True

        def when_idle() -> None:
            if self.window.is_busy():
                QTimer.singleShot(IDLE_POLL_MS, when_idle)
                return
            saved = self.window.grab().save(str(self.path))
            self.done(ok and saved)

        QTimer.singleShot(SETTLE_MS, when_idle)
