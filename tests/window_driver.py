"""Run ``headcount open MODEL_DIR`` and type sentences into it, as a user would (test helper).

Started as a separate process by tests/test_qt_binding.py, so the test sees the
real exit status of the whole window session, including anything that goes wrong
at shutdown. Usage: ``python -m tests.window_driver MODEL_DIR SENTENCE...``. Exits
with the window's own status, or 3 if the sentences were not all shown in time.
"""

from __future__ import annotations

import sys

from PySide6.QtCore import QTimer
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from ui.app import application
from ui.launcher import main

TIMEOUT_MS = 180_000


def drive(sentences: list[str]) -> None:
    """Type each sentence once the previous one is shown in every view; close the window after the last."""
    app = QApplication.instance()
    window = next((w for w in app.topLevelWidgets() if type(w).__name__ == "MainWindow"), None)
    if window is None:  # the start-up window is still up while torch and transformers load
        QTimer.singleShot(50, lambda: drive(sentences))
        return
    page = window.sentence_page
    queue = list(sentences)
    typed: list[str] = []

    def type_next() -> None:
        if not queue:
            window.close()
            return
        typed.append(queue.pop(0))
        page.bar.entry.clear()
        QTest.keyClicks(page.bar.entry, typed[-1])

    def shown() -> None:
        analysis = page.state.analysis if page.state.ready else None
        if analysis is not None and (not typed or analysis.text == typed[-1]):
            QTimer.singleShot(0, type_next)

    def give_up() -> None:
        print(f"window_driver: {len(queue)} sentence(s) never shown", file=sys.stderr)
        app.exit(3)

    page.views_updated.connect(shown)
    QTimer.singleShot(TIMEOUT_MS, give_up)
    if page.state.ready:
        shown()


if __name__ == "__main__":
    model, *texts = sys.argv[1:]
    application()  # the window's own QApplication, created first so the timer has an event loop to join
    QTimer.singleShot(0, lambda: drive(texts))
    raise SystemExit(main(["open", model]))
