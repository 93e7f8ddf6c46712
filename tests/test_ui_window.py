"""The desktop window, offscreen: opening models, typing, selection, views, errors.

Every number a view paints is compared with the core's own computation on the
same checkpoint (``inspector.measures.analysis.analyze_sentence``), which the core's tests
check against the transformers library's outputs.
"""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import QMimeData, QPointF, QSettings, Qt, QUrl  # noqa: E402
from PySide6.QtGui import QAction, QDropEvent  # noqa: E402

from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.checkpoint.tokens import apply_view, make_view  # noqa: E402
from inspector.measures.analysis import analyze_sentence  # noqa: E402
from inspector.measures.rollout import attention_flow  # noqa: E402
from inspector.paths import SAMPLE_MODEL  # noqa: E402
from tests.families import LABELS, build_checkpoint  # noqa: E402

WAIT_MS = 60_000
SENTENCE = "can I take my van on the early ferry"


@pytest.fixture(scope="module")
def tiny_dir(tmp_path_factory, minilm_dir) -> Path:
    """A seeded random 2-layer x 4-head BERT classifier with three ferry intents."""
    return build_checkpoint("bert", tmp_path_factory.mktemp("tiny_ui"), minilm_dir)


@pytest.fixture(scope="module")
def tiny(tiny_dir):
    return load_checkpoint(tiny_dir)


@pytest.fixture
def settings(tmp_path) -> QSettings:
    return QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)


@pytest.fixture
def window(qtbot, settings):
    from ui.main_window import MainWindow

    win = MainWindow(settings)
    qtbot.addWidget(win)
    win.show()
    yield win
    win.runner.wait(30_000)


def open_and_wait(qtbot, win, folder: Path) -> None:
    win.open_model(folder)
    qtbot.waitUntil(
        lambda: win.lm is not None and win.lm.path == Path(folder) and win.sentence_page.state.ready,
        timeout=WAIT_MS,
    )


def analyse_and_wait(qtbot, win, text: str) -> None:
    win.analyse(text)
    qtbot.waitUntil(
        lambda: win.sentence_page.state.ready and win.sentence_page.state.analysis.text == text,
        timeout=WAIT_MS,
    )


def test_opens_sample_model_by_default(qtbot, settings):
    """The window opens the bundled sample model and shows a grid of layers x heads cells.

    Reference: the grid size is the checkpoint's own num_hidden_layers x num_attention_heads (config.json).
    """
    if not (SAMPLE_MODEL / "config.json").is_file():
        pytest.skip("the bundled sample model has not been trained yet")
    from ui.app import build_parser, build_window

    win = build_window(build_parser().parse_args([]), settings)
    qtbot.addWidget(win)
    qtbot.waitUntil(lambda: win.sentence_page.state.ready, timeout=WAIT_MS)
    assert win.lm.path == SAMPLE_MODEL
    assert win.sentence_page.grid.cell_count() == win.lm.num_layers * win.lm.num_heads
    assert win.sentence_page.bar.predicted.text() == win.sentence_page.state.analysis.prediction.label
    win.runner.wait(30_000)


def test_typing_updates_prediction_and_grid(qtbot, window, tiny_dir, tiny):
    """Typing re-analyses after the debounce; prediction and grid match the core.

    Reference: analyze_sentence on the same checkpoint (core, checked against transformers' logits).
    """
    open_and_wait(qtbot, window, tiny_dir)
    page = window.sentence_page
    page.bar.entry.clear()
    qtbot.keyClicks(page.bar.entry, SENTENCE)
    qtbot.waitUntil(lambda: page.state.ready and page.state.analysis.text == SENTENCE, timeout=WAIT_MS)
    core = analyze_sentence(tiny, SENTENCE)
    assert page.bar.predicted.text() == core.prediction.label
    shown = dict(page.bar.bars.items)
    for label, p in core.prediction.top(len(shown)):
        assert shown[label] == pytest.approx(p, abs=1e-6)
    grid = page.grid
    assert grid.cell_count() == tiny.num_layers * tiny.num_heads == 8
    np.testing.assert_allclose(grid.attention, core.attention, atol=1e-6)
    geo = grid.grid_geometry()
    rects = [geo.cell_rect(l, h) for l in range(tiny.num_layers) for h in range(tiny.num_heads)]
    assert len({(r.x(), r.y()) for r in rects}) == 8
    assert all(grid.rect().contains(r) for r in rects)


def test_keyboard_and_click_move_selection_and_closeup_shows_that_head(qtbot, window, tiny_dir, tiny):
    """Arrow keys and clicks select a head; the close-up holds exactly that head's matrix.

    Reference: analyze_sentence(...).attention[layer, head] from the core.
    """
    open_and_wait(qtbot, window, tiny_dir)
    page = window.sentence_page
    analyse_and_wait(qtbot, window, SENTENCE)
    core = analyze_sentence(tiny, SENTENCE)
    page.grid.setFocus()
    qtbot.keyClick(page.grid, Qt.Key.Key_Right)
    qtbot.keyClick(page.grid, Qt.Key.Key_Right)
    qtbot.keyClick(page.grid, Qt.Key.Key_Down)
    assert (page.state.layer, page.state.head) == (1, 2)
    assert page.grid.selection() == (1, 2)
    np.testing.assert_allclose(page.closeup.matrix, core.attention[1, 2], atol=1e-6)
    qtbot.keyClick(page.grid, Qt.Key.Key_Down)  # stops at the last layer
    assert page.state.layer == 1
    centre = page.grid.grid_geometry().cell_rect(0, 3).center()
    qtbot.mouseClick(page.grid, Qt.MouseButton.LeftButton, pos=centre)
    assert (page.state.layer, page.state.head) == (0, 3)
    np.testing.assert_allclose(page.closeup.matrix, core.attention[0, 3], atol=1e-6)
    np.testing.assert_allclose(page.arcs.matrix, core.attention[0, 3], atol=1e-6)


def test_word_view_hidden_specials_and_aggregates(qtbot, window, tiny_dir, tiny):
    """Word view, hidden specials, layer mean, rollout, value-weighted and flow views equal the core's arrays.

    Reference: inspector.checkpoint.tokens.apply_view / make_view (Clark et al. 2019 word maps); attention rollout and
    attention flow (Abnar & Zuidema 2020) as computed by the core (flow solved with SciPy's maximum_flow);
    value-weighted attention (Kobayashi et al. 2020) from inspector.measures.norms.
    """
    open_and_wait(qtbot, window, tiny_dir)
    page = window.sentence_page
    text = "rebooking my crossing"
    analyse_and_wait(qtbot, window, text)
    core = analyze_sentence(tiny, text)
    page.select_head(1, 1)
    page.words_action.setChecked(True)
    page.special_action.setChecked(True)
    view = make_view(core.tokens, core.special, core.word_ids, words=True, drop_special=True)
    assert page.closeup.labels == view.labels
    np.testing.assert_allclose(page.closeup.matrix, apply_view(core.attention[1, 1], view), atol=1e-6)
    page.words_action.setChecked(False)
    page.special_action.setChecked(False)
    page.source_box.setCurrentIndex(list(page.source_box.itemData(i) for i in range(5)).index("layer_mean"))
    np.testing.assert_allclose(page.closeup.matrix, core.attention[1].mean(0), atol=1e-6)
    page.source_box.setCurrentIndex(2)  # rollout
    np.testing.assert_allclose(page.closeup.matrix, core.rollout, atol=1e-9)
    np.testing.assert_allclose(page.band.values, core.rollout[0], atol=1e-9)
    page.source_box.setCurrentIndex(4)  # value-weighted head
    np.testing.assert_allclose(page.closeup.matrix, core.value_weighted[1, 1], rtol=1e-6)
    page.relevance_box.setCurrentIndex(2)  # value-weighted, last layer
    last = core.layer_value_weighted[-1][0]
    np.testing.assert_allclose(page.band.values, last / last.sum(), rtol=1e-6)
    page.source_box.setCurrentIndex(3)  # flow, computed in the background
    qtbot.waitUntil(lambda: page.closeup.matrix is not None, timeout=WAIT_MS)
    np.testing.assert_allclose(page.closeup.matrix, attention_flow(core.attention), atol=1e-5)


def test_bad_folder_shows_message_and_window_stays_usable(qtbot, window, tiny_dir, tmp_path):
    """A folder without a checkpoint gives a readable message; the open model keeps working.

    Reference: inspector.checkpoint.loader refuses folders without config.json with a HeadcountError (common practice, no source).
    """
    open_and_wait(qtbot, window, tiny_dir)
    empty = tmp_path / "not_a_model"
    empty.mkdir()
    (empty / "notes.txt").write_text("nothing here")
    with qtbot.waitSignal(window.load_failed, timeout=WAIT_MS):
        window.open_model(empty)
    text = window.message_bar.text()
    assert "not_a_model" in text and "config.json" in text
    assert window.lm.path == tiny_dir
    analyse_and_wait(qtbot, window, "is the ferry running today")
    assert window.sentence_page.grid.cell_count() == 8


def test_open_sentence_marks_misfire(qtbot, window, tiny_dir, tiny):
    """open_sentence sets the expected label; a differing prediction is marked as a misfire.

    Reference: the prediction is the argmax of the core's logits (analyze_sentence).
    """
    open_and_wait(qtbot, window, tiny_dir)
    text = "what time is the last boat back"
    predicted = analyze_sentence(tiny, text).prediction.label
    other = next(label for label in LABELS if label != predicted)
    window.open_sentence(text, other)
    page = window.sentence_page
    qtbot.waitUntil(lambda: page.state.ready and page.state.analysis.text == text, timeout=WAIT_MS)
    assert page.bar.expected_label() == other
    assert page.state.is_misfire() and page.bar.is_misfire_shown()
    window.open_sentence(text, predicted)
    qtbot.waitUntil(lambda: not page.bar.is_misfire_shown(), timeout=WAIT_MS)
    assert not page.state.is_misfire()


def test_bare_encoder_hides_prediction(qtbot, window, minilm_dir):
    """A bare encoder (all-MiniLM-L6-v2) has no prediction: that part of the bar is hidden.

    Reference: all-MiniLM-L6-v2's config.json lists BertModel (no classification head).
    """
    open_and_wait(qtbot, window, minilm_dir)
    bar = window.sentence_page.bar
    assert not bar.predicted.isVisibleTo(window) and not bar.expected.isVisibleTo(window)
    assert bar.encoder_note.isVisibleTo(window)
    assert window.sentence_page.grid.cell_count() == 6 * 12


def test_recent_models_persist(qtbot, window, tiny_dir, settings):
    """Opened folders are remembered in QSettings and listed by a new window.

    Reference: QSettings persistence (Qt documentation; common practice, no source).
    """
    from ui.main_window import MainWindow

    open_and_wait(qtbot, window, tiny_dir)
    settings.sync()
    again = MainWindow(QSettings(settings.fileName(), QSettings.Format.IniFormat))
    qtbot.addWidget(again)
    assert str(tiny_dir.resolve()) in again.recent_models()
    assert any(tiny_dir.name in a.text() for a in again.recent_menu.actions())


def test_stale_results_are_dropped(qtbot):
    """Of two jobs on one channel, only the newest result reaches the view.

    Reference: sequence-numbered requests, latest wins (common practice, no source).
    """
    from ui.widgets.worker import JobRunner

    runner = JobRunner()
    got: list[int] = []
    runner.submit("analysis", lambda: (time.sleep(0.3), 1)[1], got.append, got.append)
    runner.submit("analysis", lambda: 2, got.append, got.append)
    qtbot.waitUntil(lambda: not runner.is_busy(), timeout=WAIT_MS)
    assert got == [2]


def test_head_grid_layout_from_4x4_to_24x16(qtbot):
    """Cells stay inside the widget and apart; small cells keep thin patterns (block maximum).

    Reference: block maximum checked against an explicit loop over blocks (closed form).
    """
    from ui.sentence.head_grid import NUMBER_LANE, HeadGrid, resample_cells

    rng = np.random.default_rng(0)
    for L, H, n, size in [(4, 4, 16, (700, 600)), (24, 16, 128, (900, 700))]:
        att = rng.random((L, H, n, n))
        att /= att.sum(-1, keepdims=True)
        grid = HeadGrid()
        qtbot.addWidget(grid)
        grid.resize(*size)
        grid.set_data(att, att.max(axis=(-1, -2)), (0.0, 1.0), per_head=True)
        geo = grid.grid_geometry()
        last = geo.slot_rect(L - 1, H - 1)
        assert last.right() < size[0] and last.bottom() < size[1]
        assert geo.cell >= 8 and geo.gap >= 2
        assert geo.cell_at(last.center().x(), last.center().y()) == (L - 1, H - 1)
        image = grid.grab().toImage()
        assert image.width() == size[0]
        if L == 4:
            assert geo.lane == NUMBER_LANE
    prev = np.eye(64, k=-1)
    small = resample_cells(prev[None, None], 16)[0, 0]
    starts = np.arange(16) * 64 // 16
    ends = list(starts[1:]) + [64]
    expected = np.array([[prev[a:b, c:d].max() for c, d in zip(starts, ends)] for a, b in zip(starts, ends)])
    np.testing.assert_array_equal(small, expected)
    assert small.sum() >= 16 - 1


def test_menu_shortcuts_move_selection_and_focus_entry(qtbot, window, tiny_dir):
    """Alt+arrows move the selected head from anywhere; Ctrl+L focuses the sentence entry.

    Reference: the shortcut table in ui/main_window.py (common practice, no source).
    """
    open_and_wait(qtbot, window, tiny_dir)
    page = window.sentence_page
    window.activateWindow()
    page.select_head(0, 0)
    actions = {a.text().replace("&", ""): a for a in window.findChildren(QAction)}
    assert actions["Next head"].shortcut().toString() == "Alt+Right"
    assert actions["Layer down"].shortcut().toString() == "Alt+Down"
    actions["Next head"].trigger()
    actions["Layer down"].trigger()
    assert (page.state.layer, page.state.head) == (1, 1)
    actions["Sentence entry"].trigger()
    qtbot.waitUntil(lambda: page.bar.entry.hasFocus() or window.focusWidget() is page.bar.entry, timeout=5000)


def test_dropping_a_folder_opens_it(qtbot, window, tiny_dir):
    """Dropping a checkpoint folder on the window opens it.

    Reference: Qt drag-and-drop with file URLs (QMimeData.setUrls); common practice, no source.
    """
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(tiny_dir))])
    event = QDropEvent(
        QPointF(50, 50),
        Qt.DropAction.CopyAction,
        mime,
        Qt.MouseButton.LeftButton,
        Qt.KeyboardModifier.NoModifier,
    )
    window.dropEvent(event)
    qtbot.waitUntil(lambda: window.lm is not None and window.lm.path == tiny_dir, timeout=WAIT_MS)


def test_finished_jobs_release_what_their_callable_held(qtbot):
    """A finished job keeps no reference to its callable's closure (identity, no source needed).

    Before the fix every background job's closure (each holding a whole sentence analysis)
    stayed alive for the life of the pool.
    """
    import gc
    import weakref

    from ui.widgets.worker import JobRunner

    class Payload:
        pass

    runner = JobRunner()
    payload = Payload()
    gone = weakref.ref(payload)
    got: list[object] = []
    runner.submit("analysis", lambda p=payload: type(p).__name__, got.append, got.append)
    del payload
    qtbot.waitUntil(lambda: not runner.is_busy(), timeout=WAIT_MS)
    runner.wait()
    gc.collect()
    assert got == ["Payload"]
    assert gone() is None
