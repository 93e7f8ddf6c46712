"""Render screenshots of the comparison views offscreen into docs/.

Run:  .venv/bin/python docs/make_compare_screenshots.py

Opens the bundled sample model (A) and its retrained copy with 13 heads switched off (B),
runs the Comparison tab of the corpus page on the sample evaluation set, then opens the
first short utterance B fixed in the sentence page (both models side by side). Writes
``docs/compare_corpus.png`` and ``docs/compare_sentence.png``. The window is asked for
1366 x 768; it cannot shrink below its minimum size, which the PNGs then show.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from docs.make_screenshots import wait_until  # noqa: E402

DOCS = ROOT / "docs"


def main() -> int:
    import numpy as np
    from PySide6.QtCore import QSettings

    from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL, SAMPLE_RETRAINED
    from ui.app import application
    from ui.main_window import MainWindow

    app = application()
    tmp = tempfile.TemporaryDirectory()
    window = MainWindow(QSettings(str(Path(tmp.name) / "settings.ini"), QSettings.Format.IniFormat))
    window.resize(1366, 768)
    window.show()
    window.open_model(SAMPLE_MODEL)
    wait_until(app, lambda: window.lm is not None and not window.is_busy())
    window.open_second_model(SAMPLE_RETRAINED)
    wait_until(app, lambda: window.lm_b is not None and not window.is_busy())

    view = window.compare_view
    window.show_page(window.corpus_page)
    window.corpus_page.tabs.setCurrentWidget(view)
    # the data-file field shows a path relative to the repository, not where this checkout lives
    os.chdir(ROOT)
    window.corpus_page.path_edit.setText(str(SAMPLE_EVAL.relative_to(ROOT)))
    view.run()
    wait_until(app, lambda: view.report is not None and not window.is_busy(), timeout=600.0)
    window.grab().save(str(DOCS / "compare_corpus.png"))
    print(f"wrote docs/compare_corpus.png ({window.width()} x {window.height()})")

    fixed = view.report.fixed
    row = next((i for i, c in enumerate(fixed) if 7 <= len(c.text.split()) <= 14), 0)
    view.open_row(view.fixed, row)
    page = window.sentence_page
    wait_until(
        app, lambda: page.pair.ready and page.state.analysis.text == fixed[row].text and not window.is_busy()
    )
    same = page.pair.change_b()
    layer, head = np.unravel_index(np.nanargmax(same), same.shape)
    page.select_head(int(layer), int(head))
    wait_until(app, lambda: not window.is_busy())
    window.grab().save(str(DOCS / "compare_sentence.png"))
    print(f"wrote docs/compare_sentence.png ({window.width()} x {window.height()})")
    window.close()
    tmp.cleanup()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
