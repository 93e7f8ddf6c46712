"""The window with a second model: both predictions and mosaics on the sentence page, the Comparison tab.

What the window shows is compared with transformers' own predictions on the same checkpoints
and with ``inspector.comparison`` (which tests/test_compare.py checks against scikit-learn,
SciPy and transformers' attention weights).
"""

from __future__ import annotations

import functools
import json
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

import torch  # noqa: E402
from PySide6.QtCore import QMimeData, QPointF, QSettings, Qt, QUrl  # noqa: E402
from PySide6.QtGui import QDropEvent  # noqa: E402
from PySide6.QtWidgets import QFileDialog  # noqa: E402

from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.comparison.report import COMPARISON, FIGURES, FIXED  # noqa: E402
from inspector.comparison.sentence import compare_sentence  # noqa: E402
from inspector.paths import SAMPLE_MODEL  # noqa: E402
from tests.compare_models import exact_copy, other_shape_classifier  # noqa: E402
from tests.corpus_models import UTTERANCES, save_minilm_classifier, save_tiny_classifier, write_csv  # noqa: E402

WAIT_MS = 60_000
SENTENCE = "can I take my van on the early ferry to Orlestow"


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    root = tmp_path_factory.mktemp("compare_ui")
    tiny = save_tiny_classifier(root / "tiny")
    return {
        "tiny": tiny,
        "tiny_copy": exact_copy(tiny, root / "tiny_copy"),
        "other": other_shape_classifier(root / "other"),
        "minilm_a": save_minilm_classifier(root / "minilm_a", seed=0),
        "minilm_b": save_minilm_classifier(root / "minilm_b", seed=2),
        "csv": write_csv(root / "set.csv", UTTERANCES),
    }


@pytest.fixture
def window(qtbot, tmp_path):
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    yield win
    win.compare_view.stop()
    win.corpus_page.stop()
    win.runner.wait(30_000)


def open_pair(qtbot, win, a: Path, b: Path, text: str = SENTENCE) -> None:
    win.open_sentence(text, None)
    win.open_model(a)
    qtbot.waitUntil(lambda: win.lm is not None and win.sentence_page.state.ready, timeout=WAIT_MS)
    win.open_second_model(b)
    qtbot.waitUntil(
        lambda: win.lm_b is not None and win.sentence_page.pair.ready and not win.is_busy(), timeout=WAIT_MS
    )


@functools.cache
def _loaded(folder: Path):
    return load_checkpoint(folder)


def plain_prediction(folder: Path, text: str) -> str:
    """transformers' own forward pass on one sentence (no padding), arg-max label."""
    lm = _loaded(folder)
    with torch.no_grad():
        logits = lm.model(**lm.tokenizer(text, return_tensors="pt")).logits[0]
    return lm.labels[int(logits.argmax())]


def test_sentence_page_shows_both_models_and_the_change_of_each_head(qtbot, window, folders):
    """B's prediction, B's mosaic (its own shape) and the per-head change wedges on both mosaics.

    Reference: transformers' own prediction of each checkpoint (plain forward pass), and
    ``inspector.comparison.sentence.compare_sentence`` for the per-head divergences (checked
    against SciPy in tests/test_compare.py).
    """
    open_pair(qtbot, window, folders["tiny"], folders["other"])
    page = window.sentence_page
    assert page.second.isVisible() and page.grid_b.isVisible()
    assert page.grid_b.attention.shape[:2] == (3, 2)
    assert page.grid.attention.shape[:2] == (2, 4)
    assert plain_prediction(folders["other"], SENTENCE) in page.second.text()
    assert page.bar.predicted.text() == plain_prediction(folders["tiny"], SENTENCE)
    core = compare_sentence(load_checkpoint(folders["tiny"]), load_checkpoint(folders["other"]), SENTENCE)
    np.testing.assert_allclose(page.grid_b.overlay, core.matching.same_position, atol=1e-12)
    expected_a = np.full((2, 4), np.nan)
    expected_a[:, :2] = core.matching.same_position[:2]
    np.testing.assert_allclose(page.grid.overlay, expected_a, atol=1e-12)
    geo = page.grid_b.grid_geometry()
    assert {(l, h) for l, h, _ in page.grid_b.overlay_wedges(geo)} == {(0, 0), (0, 1), (1, 0), (1, 1)}
    hover = page._summary_b(2, 1)
    assert "has no head at this position" in hover and "closest head of A" in hover
    # the close-up and the arcs show model A's head, and say so
    assert page.closeup_panel.subtitle.text().startswith("A \u00b7 ")
    assert page.arcs_panel.subtitle.text().startswith("A \u00b7 ")
    window.grab()  # paints with the overlay


def test_an_exact_copy_shows_no_change(qtbot, window, folders):
    """A model beside a byte-for-byte copy: every head unchanged, no wedge drawn, same label.

    Reference: identity, no source needed.
    """
    open_pair(qtbot, window, folders["tiny"], folders["tiny_copy"])
    page = window.sentence_page
    assert page.grid_b.overlay_wedges(page.grid_b.grid_geometry()) == []
    assert "8 of 8 heads unchanged" in page.second.text()
    assert "same as A" in page.second.text()
    window.close_second_model()
    qtbot.waitUntil(lambda: not window.is_busy(), timeout=WAIT_MS)
    assert window.lm_b is None and not page.second.isVisible() and page.grid.overlay is None
    assert not page.closeup_panel.subtitle.text().startswith("A \u00b7 ")


def test_a_model_with_another_tokenizer_is_refused_in_one_line(qtbot, window, folders):
    """The sample model (its own vocabulary) cannot be compared with a MiniLM-vocabulary model.

    Reference: the tracker issue's rule (same vocabulary and special tokens, else a one-line error).
    """
    if not (SAMPLE_MODEL / "config.json").is_file():
        pytest.skip("sample model not built")
    window.open_model(SAMPLE_MODEL)
    qtbot.waitUntil(lambda: window.lm is not None and window.sentence_page.state.ready, timeout=WAIT_MS)
    window.open_second_model(folders["tiny"])
    qtbot.waitUntil(lambda: window.message_bar.text() != "", timeout=WAIT_MS)
    text = window.message_bar.text()
    assert "cannot compare" in text and "\n" not in text
    assert window.lm_b is None and not window.sentence_page.second.isVisible()


def test_shift_drop_opens_a_second_model(qtbot, window, folders):
    """A folder dropped with Shift held is compared with the open model (a plain drop replaces it).

    Reference: Qt drag-and-drop with file URLs and keyboard modifiers; common practice, no source.
    """
    window.open_model(folders["tiny"])
    qtbot.waitUntil(lambda: window.lm is not None and window.sentence_page.state.ready, timeout=WAIT_MS)
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(folders["tiny_copy"]))])
    event = QDropEvent(
        QPointF(50, 50),
        Qt.DropAction.CopyAction,
        mime,
        Qt.MouseButton.LeftButton,
        Qt.KeyboardModifier.ShiftModifier,
    )
    window.dropEvent(event)
    qtbot.waitUntil(lambda: window.lm_b is not None, timeout=WAIT_MS)
    assert window.lm.path == folders["tiny"] and window.lm_b.path == folders["tiny_copy"]


def test_comparison_tab_runs_and_opens_a_fixed_utterance_with_both_models(qtbot, window, folders, tmp_path):
    """The Comparison tab: 2 x 2 counts, fixed/broken lists, head maps, export, one click to the sentence page.

    Reference: transformers' own predictions of both checkpoints, one sentence at a time, for
    the right/wrong counts; the files and keys of ``headcount compare``.
    """
    open_pair(qtbot, window, folders["minilm_a"], folders["minilm_b"])
    view = window.compare_view
    window.show_page(window.corpus_page)
    window.corpus_page.tabs.setCurrentWidget(view)
    window.corpus_page.path_edit.setText(str(folders["csv"]))
    with qtbot.waitSignal(view.finished, timeout=WAIT_MS) as blocker:
        view.run()
    assert blocker.args == ["done"]
    texts, gold = [t for t, _ in UTTERANCES], np.array([lab for _, lab in UTTERANCES])
    right_a = np.array([plain_prediction(folders["minilm_a"], t) for t in texts]) == gold
    right_b = np.array([plain_prediction(folders["minilm_b"], t) for t in texts]) == gold
    counts = [
        [(right_a & right_b).sum(), (right_a & ~right_b).sum()],
        [(~right_a & right_b).sum(), (~right_a & ~right_b).sum()],
    ]
    for r in range(2):
        for c in range(2):
            assert view.table.item(r, c).text().startswith(f"{counts[r][c]} ")
    assert view.fixed.rowCount() == counts[1][0] > 0
    assert view.broken.rowCount() == counts[0][1] > 0
    assert view.change_map.values.shape == (6, 12) and view.matching_map.values.shape == (72, 72)
    assert view.intents.rowCount() == 3

    written = []
    view.status.connect(written.append)
    view.export_report(tmp_path / "export")
    qtbot.waitUntil(lambda: bool(written), timeout=WAIT_MS)
    doc = json.loads((tmp_path / "export" / COMPARISON).read_text(encoding="utf-8"))
    assert len(doc["fixed"]) == counts[1][0]
    assert (tmp_path / "export" / FIXED).is_file()
    assert (tmp_path / "export" / f"{FIGURES['matching']}.png").is_file()

    first = view.report.fixed[0]
    view.open_row(view.fixed, 0)
    page = window.sentence_page
    qtbot.waitUntil(
        lambda: page.pair.ready and page.state.analysis.text == first.text and not window.is_busy(),
        timeout=WAIT_MS,
    )
    assert window.pages.currentWidget() is page
    assert page.bar.expected_label() == first.label
    assert "\u2713 as expected" in page.second.text()  # B got this one right: that is what "fixed" means
    assert page.bar.is_misfire_shown()


def test_comparison_can_be_cancelled(qtbot, window, folders):
    """Cancel stops the run before its next batch and says so.

    Reference: the corpus page's cancel contract; common practice, no source.
    """
    open_pair(qtbot, window, folders["tiny"], folders["tiny_copy"])
    view = window.compare_view
    window.corpus_page.path_edit.setText(str(folders["csv"]))
    with qtbot.waitSignal(view.finished, timeout=WAIT_MS) as blocker:
        view.run()
        view.cancel()
    assert blocker.args == ["cancelled"]
    assert view.report is None and "Cancelled" in view.phase_label.text()


def test_comparison_bar_counts_utterances_and_export_remembers_the_folder(
    qtbot, window, folders, tmp_path, monkeypatch
):
    """The comparison's progress bar counts the set's utterances (as the corpus page's bars do), and the
    folder export writes through the shared background export, its folder remembered for the next dialog.

    Reference: the number of rows the test wrote (tests/corpus_models.UTTERANCES); the file names of
    ``headcount compare``; common practice, no source.
    """
    from ui.widgets.export import last_folder

    open_pair(qtbot, window, folders["tiny"], folders["tiny_copy"])
    view = window.compare_view
    assert view.progress.format() == "Comparison: not run" and not view.cancel_button.isEnabled()
    window.corpus_page.path_edit.setText(str(folders["csv"]))
    with qtbot.waitSignal(view.finished, timeout=WAIT_MS) as blocker:
        view.run()
    assert blocker.args == ["done"]
    assert view.progress.format().startswith(f"Comparison: {len(UTTERANCES)} utterances in ")
    assert view.progress.value() == view.progress.maximum()
    assert view.run_button.isEnabled() and not view.cancel_button.isEnabled()
    said = []
    view.status.connect(said.append)
    view.export_report(tmp_path / "out")
    qtbot.waitUntil(lambda: bool(said), timeout=WAIT_MS)
    assert said[0].startswith("Wrote ") and "comparison files in" in said[0]
    assert (tmp_path / "out" / COMPARISON).is_file() and (
        tmp_path / "out" / f"{FIGURES['change']}.svg"
    ).is_file()
    chosen = tmp_path / "chosen"
    chosen.mkdir()
    monkeypatch.setattr(QFileDialog, "getExistingDirectory", staticmethod(lambda *args: str(chosen)))
    view.export_current()
    qtbot.waitUntil(lambda: len(said) == 2, timeout=WAIT_MS)
    assert (chosen / COMPARISON).is_file() and last_folder(window.settings) == chosen


def test_the_sentence_comparison_exports_a_figure_and_every_head(qtbot, window, folders, tmp_path):
    """Export › Model comparison: a PNG of the change map and a CSV with one row per head of B.

    Reference: PNG signature bytes; the column names of ``head_changes.csv``; the values of
    ``inspector.comparison.sentence.compare_sentence``.
    """
    import csv

    from inspector.comparison.report import HEAD_HEADER
    from ui.sentence.second_model import comparison_export
    from ui.widgets.export import run_export

    open_pair(qtbot, window, folders["tiny"], folders["other"])
    written = run_export(comparison_export(window.sentence_page.pair), tmp_path / "pair.png")
    assert (tmp_path / "pair.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    csv_path = next(p for p in written if p.suffix == ".csv")
    with csv_path.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert tuple(rows[0]) == HEAD_HEADER and len(rows) == 1 + 3 * 2
    core = compare_sentence(load_checkpoint(folders["tiny"]), load_checkpoint(folders["other"]), SENTENCE)
    col = rows[0].index("js_same_position")
    assert float(rows[1][col]) == pytest.approx(core.matching.same_position[0, 0], abs=1e-12)
    assert rows[-1][col] == ""


def test_comparison_texts_follow_the_display_rules(qtbot, window, folders, capsys, tmp_path):
    """Every string the comparison shows (strip, hovers, tab cells and tooltips, CLI output) keeps the house forms.

    Reference: the display rules of inspector.formatting, as checked by tests/text_rules.py
    (one head form, percentages with one decimal, points, counts that agree with their noun).
    """
    from inspector.cli.main import main
    from tests.text_rules import violations

    open_pair(qtbot, window, folders["tiny"], folders["other"])
    page = window.sentence_page
    items = [("strip", page.second.text()), ("wedge key", page.wedge_key.text())]
    items += [(f"hover B {l},{h}", page._summary_b(l, h)) for l in range(3) for h in range(2)]
    items += [(f"hover A {l},{h}", page._summary_a(l, h)) for l in range(2) for h in range(4)]
    view = window.compare_view
    window.corpus_page.path_edit.setText(str(folders["csv"]))
    with qtbot.waitSignal(view.finished, timeout=WAIT_MS):
        view.run()
    items += [
        ("headline", view.headline.text()),
        ("phase", view.phase_label.text()),
        ("moved", view.moved.text()),
    ]
    for table in (view.table, view.intents, view.fixed, view.broken):
        for r in range(table.rowCount()):
            for c in range(table.columnCount()):
                item = table.item(r, c)
                if item is not None:
                    items += [(f"{table.accessibleName()} {r},{c}", item.text()), ("tooltip", item.toolTip())]
    m = view.report.matching
    items += [(f"change map {l},{h}", view.change_map.describe(l, h)) for l in range(3) for h in range(2)]
    items += [(f"matching {j},{i}", view.matching_map.describe(j, i)) for j in range(6) for i in range(8)]
    assert m.js.shape == (6, 8)
    main(["compare", str(folders["tiny"]), str(folders["other"]), "--text", SENTENCE])
    main(
        [
            "compare",
            str(folders["tiny"]),
            str(folders["other"]),
            str(folders["csv"]),
            "--out",
            str(tmp_path),
            "--quiet",
        ]
    )
    items += [("cli", line) for line in capsys.readouterr().out.splitlines()]
    assert len(items) > 150
    assert violations(items) == []


def test_heads_switched_off_in_a_are_compared_as_shown(qtbot, window, folders):
    """With a head of A switched off, B (an exact copy) is compared with A as the page shows it.

    Gating a head of layer 0 leaves every layer-0 attention map as it was and changes what
    layer 1 receives: layer 0 stays unchanged, layer 1 changes.
    Reference: construction (a head gate multiplies the head's output, after its attention;
    Michel et al. 2019), on transformers' BERT forward pass.
    """
    open_pair(qtbot, window, folders["tiny"], folders["tiny_copy"])
    page = window.sentence_page
    before = page.pair.comparison
    page.toggle_head(0, 1)
    qtbot.waitUntil(
        lambda: page.pair.ready and page.pair.comparison is not before and not window.is_busy(),
        timeout=WAIT_MS,
    )
    m = page.pair.comparison.matching
    assert page.state.mask.heads == ((0, 1),)
    assert m.unchanged[0].all() and (m.same_position[0] == 0).all()
    assert not m.unchanged[1].any() and (m.same_position[1] > 0).all()
