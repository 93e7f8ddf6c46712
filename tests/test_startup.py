"""Start-up: a window at once while the model libraries load, and a clean exit after a long sentence."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

pytest.importorskip("PySide6")

ROOT = Path(__file__).resolve().parent.parent

_PROBE = r"""
import json, sys
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication
from ui import startup
from ui.app import application
from ui.launcher import main

seen = {}

def probe():
    app = QApplication.instance()
    visible = sorted(w.objectName() or type(w).__name__ for w in app.topLevelWidgets() if w.isVisible())
    seen.setdefault("first", {"visible": visible, "ready": startup.LIBRARIES_READY.is_set()})
    window = next((w for w in app.topLevelWidgets() if type(w).__name__ == "MainWindow"), None)
    if window is not None and window.sentence_page.state.ready:
        seen["last"] = {"visible": visible, "ready": startup.LIBRARIES_READY.is_set()}
        print(json.dumps(seen), flush=True)
        window.close()
        return
    QTimer.singleShot(20, probe)

application()
QTimer.singleShot(0, probe)
raise SystemExit(main(["open", sys.argv[1], "--text", "when is the next sailing to the island"]))
"""


def _run(args: list[str], tmp_path: Path, timeout: int = 300) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", XDG_CONFIG_HOME=str(tmp_path / "config"))
    return subprocess.run(
        [sys.executable, *args], cwd=ROOT, env=env, capture_output=True, text=True, timeout=timeout
    )


def test_a_window_shows_before_torch_and_transformers_are_loaded(tmp_path, minilm_dir):
    """`headcount open` puts the start-up window on screen while the model libraries are still loading, then the
    main window in its place, which shows the sentence; exit status 0.

    Reference: Qt's QWidget.isVisible on the application's top-level widgets, sampled from the event loop;
    the libraries count as loaded when ui.startup's import thread has finished; POSIX exit status.
    """
    from tests.families import build_checkpoint

    model = build_checkpoint("bert", tmp_path / "tiny", minilm_dir)
    done = _run(["-c", _PROBE, str(model)], tmp_path)
    assert done.returncode == 0, done.stderr[-2000:]
    seen = json.loads(done.stdout.strip().splitlines()[-1])
    assert seen["first"] == {"visible": ["startup"], "ready": False}
    assert seen["last"] == {"visible": ["MainWindow"], "ready": True}


def test_a_512_token_message_on_a_12_by_12_model_exits_with_status_0(tmp_path, minilm_dir):
    """The window on a 12-layer x 12-head model: a typed 512-token message shown in every view, then close;
    exit status 0 and no fatal error.

    Reference: POSIX exit status (an abort at exit shows as -6/134, not 0); common practice, no source.
    """
    import transformers

    from tests.families import build_bert

    shape = dict(hidden_size=96, num_hidden_layers=12, num_attention_heads=12, intermediate_size=192)
    folder = build_bert(tmp_path / "twelve", minilm_dir, ["book_crossing", "timetable"], **shape)
    tok = transformers.AutoTokenizer.from_pretrained(str(folder), local_files_only=True)
    message = "hello I booked a return crossing for two adults and a car last month " * 40
    assert len(tok(message)["input_ids"]) > 512  # cut to the model's 512 positions
    done = _run(["-m", "tests.window_driver", str(folder), message], tmp_path)
    assert done.returncode == 0, done.stderr[-2000:]
    assert "Fatal Python error" not in done.stderr and "Traceback" not in done.stderr
