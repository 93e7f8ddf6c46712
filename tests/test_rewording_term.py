"""One name for the edit-and-compare capability: "rewording", in the window, the CLI help and the README.

The capability (explain a sentence beside a copy with words changed, added or
dropped) used to carry a name that echoed another program; it is now called a
*rewording* everywhere a person reads it, and its module and functions say so
(``inspector.explanation.rewording.compare_rewording``). The old name is built
from pieces below so this file does not spell it.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import QSettings  # noqa: E402

from tests.families import LABELS, build_checkpoint  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
OLD = re.compile("what" + r"[\s_\-]*" + "if", re.IGNORECASE)
NEW = re.compile(r"\brewording", re.IGNORECASE)
TEXT = "I need to cancel my crossing to Gullholm tomorrow"
REWORDED = "I need to move my crossing to Gullholm tomorrow"


def _explain_help() -> str:
    from inspector.cli.main import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    return sub.choices["explain"].format_help()


def test_cli_help_and_readme_use_the_new_term_only():
    """``headcount explain --help`` and README name the capability 'rewording', never the old term.

    Reference: the issue that asked for a name of our own (window, CLI help, README, module and function names).
    """
    help_text = " ".join(_explain_help().split())
    assert NEW.search(help_text) and not OLD.search(help_text)
    assert "--compare REWORDING" in help_text  # the flag itself is stable, its help uses the new term
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert NEW.search(readme) and not OLD.search(readme)


def test_no_source_file_keeps_the_old_term():
    """No module, test, script or document of the project spells the old name (file names included).

    Reference: the same issue ("the old one appears nowhere").
    """
    me = Path(__file__).resolve()
    found = []
    for folder in ("inspector", "ui", "tests", "docs", "bench", "sample_models"):
        for path in (ROOT / folder).rglob("*"):
            if path.suffix not in (".py", ".md", ".txt", ".json", ".csv") or path.resolve() == me:
                continue
            if OLD.search(path.name) or OLD.search(path.read_text(encoding="utf-8", errors="replace")):
                found.append(str(path.relative_to(ROOT)))
    for doc in ("README.md", "DEVELOPERS.md"):
        if OLD.search((ROOT / doc).read_text(encoding="utf-8")):
            found.append(doc)
    assert found == []
    from inspector.explanation import rewording

    assert callable(rewording.compare_rewording) and rewording.RewordingComparison


def test_window_uses_the_new_term_only(qtbot, tmp_path, minilm_dir):
    """Every string of the window after a rewording was explained says 'rewording', never the old term.

    Reference: the issue's rule for the window; strings gathered as tests/test_displayed_text.py gathers them
    (labels, buttons, placeholders, tooltips, menus, painted text).
    """
    from tests.test_displayed_text import visible_text
    from tests.test_ui_explain import explain_and_wait, open_model
    from ui.main_window import SHORTCUTS_HELP, MainWindow

    folder = build_checkpoint("bert", tmp_path / "tiny", minilm_dir)
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.resize(1366, 768)
    win.show()
    open_model(qtbot, win, folder)
    page = explain_and_wait(qtbot, win, TEXT, LABELS[0], REWORDED)
    items, _ = visible_text(win)
    texts = [t for _, t in items] + [SHORTCUTS_HELP, page.edited.placeholderText()]
    texts += [page.edited_side.title.text(), page.heads_panel.title.text()]
    assert not [t for t in texts if OLD.search(t)]
    assert sum(bool(NEW.search(t)) for t in texts) >= 4
    win.runner.wait(30_000)
