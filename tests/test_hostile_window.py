"""Hostile inputs in the window: one readable line in the message bar, never raw exception text or a traceback."""

from __future__ import annotations

import json
import shutil
import struct
from pathlib import Path

import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import QSettings  # noqa: E402

from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.corpus.dataset import read_labelled  # noqa: E402
from inspector.corpus.run import run_corpus  # noqa: E402
from inspector.corpus.settings import CorpusSettings  # noqa: E402
from tests.corpus_models import UTTERANCES, write_csv  # noqa: E402
from tests.families import build_checkpoint  # noqa: E402
from tests.unwritable import read_only_folder  # noqa: E402
from ui.widgets.worker import MODEL_LOCK  # noqa: E402

WAIT_MS = 60_000
RAW = ("Traceback", "AttributeError", "TypeError", "IndexError", "KeyError", "ValueError", "RecursionError")


@pytest.fixture(scope="module")
def tiny(tmp_path_factory, minilm_dir) -> Path:
    return build_checkpoint("bert", tmp_path_factory.mktemp("hostile_window"), minilm_dir)


@pytest.fixture
def window(qtbot, tmp_path):
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    yield win
    win.corpus_page.stop()
    win.runner.wait(30_000)


def _header_list(c: Path) -> None:
    header = b"[1, 2]"
    (c / "model.safetensors").write_bytes(struct.pack("<Q", len(header)) + header)


def _index_list(c: Path) -> None:
    (c / "model.safetensors").rename(c / "model-00001-of-00001.safetensors")
    (c / "model.safetensors.index.json").write_text(json.dumps({"weight_map": ["x"]}))


BAD_FOLDERS = {
    "header is a list": _header_list,
    "shard index weight_map is a list": _index_list,
    "labels not a mapping": lambda c: (c / "config.json").write_text(
        json.dumps({**json.loads((c / "config.json").read_text()), "id2label": [1, 2]})
    ),
}


@pytest.mark.parametrize("case", sorted(BAD_FOLDERS))
def test_bad_folders_show_one_readable_line(case, qtbot, window, tiny, tmp_path):
    """Folders that used to show raw 'AttributeError...' / 'TypeError...' text now show the loader's own line.

    Reference: the safetensors header format and transformers' shard index (a JSON object each); the
    window's message bar shows HeadcountError text, one line.
    """
    folder = Path(shutil.copytree(tiny, tmp_path / "bad"))
    BAD_FOLDERS[case](folder)
    with qtbot.waitSignal(window.load_failed, timeout=WAIT_MS):
        window.open_model(folder)
    text = window.message_bar.text()
    assert text.startswith("Could not open bad:") and "\n" not in text
    assert not any(word in text for word in RAW), text


def test_header_only_csv_in_the_corpus_page_is_one_line(qtbot, window, tiny, tmp_path):
    """A CSV with only its header fails the run with the reader's one line, not an IndexError.

    Reference: RFC 4180 (a header row and no records).
    """
    window.open_model(tiny)
    qtbot.waitUntil(lambda: window.corpus_page.lm is not None, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: not window.is_busy(), timeout=WAIT_MS)
    path = tmp_path / "empty.csv"
    path.write_text("text,label\n")
    page = window.corpus_page
    page.path_edit.setText(str(path))
    with qtbot.waitSignal(page.finished, timeout=WAIT_MS) as blocker:
        page.run()
    assert blocker.args == ["failed"]
    text = window.message_bar.text()
    assert "no usable utterance" in text and not any(word in text for word in RAW), text


def test_prune_mask_into_a_read_only_folder_is_a_message(qtbot, window, tiny, tmp_path, capsys):
    """Saving the prune mask where nothing can be written shows a message; nothing escapes to the console.

    Reference: POSIX EACCES/EPERM for writing; the page's error signal feeds the window's message bar.
    """
    lm = load_checkpoint(tiny)
    data = read_labelled(write_csv(tmp_path / "set.csv", UTTERANCES[:6]), known_labels=lm.labels)
    report = run_corpus(lm, data, CorpusSettings(importance=False, orders=("random",)))
    page = window.corpus_page
    page.show_report(report)
    target = read_only_folder(tmp_path) / "prune_mask.json"
    with qtbot.waitSignal(page.error, timeout=WAIT_MS) as blocker:
        assert page.save_mask(target) is None
    message = blocker.args[0]
    assert message.startswith("Could not save the prune mask") and "\n" not in message
    assert "Traceback" not in capsys.readouterr().err
    assert not target.exists()


def test_switching_model_during_a_corpus_run_says_the_run_stopped(qtbot, window, tiny, tmp_path, minilm_dir):
    """Opening another model while a corpus run waits replaces 'Reading/Scanning...' with a stopped note.

    Reference: the page's own phase names (inspector.corpus.run.PHASES); the run is held on the model
    lock so the switch happens while it is still going, without any timing.
    """
    other = build_checkpoint("distilbert", tmp_path / "other", minilm_dir)
    window.open_model(tiny)
    qtbot.waitUntil(lambda: window.corpus_page.lm is not None, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: not window.is_busy(), timeout=WAIT_MS)
    page = window.corpus_page
    page.path_edit.setText(str(write_csv(tmp_path / "set.csv", UTTERANCES)))
    with MODEL_LOCK:
        page.run()
        assert page.is_running()
        window.open_model(other)
        qtbot.waitUntil(lambda: page.lm is not None and page.lm.model_type == "distilbert", timeout=WAIT_MS)
        assert page.phase_label.text() == "Stopped: another model was opened"
    qtbot.waitUntil(lambda: not page.is_running(), timeout=WAIT_MS)
    qtbot.wait(50)
    assert page.phase_label.text() == "Stopped: another model was opened"
    assert page.run_button.isEnabled()
