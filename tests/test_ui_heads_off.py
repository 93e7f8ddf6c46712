"""Switching heads off on the sentence page: the window shows what ``headcount analyze --mask`` computes.

Every number is compared with the command line run on a mask file, and that with a
copy of the model whose weights were zeroed by hand (tests/test_masks.py) or reloaded
in plain transformers (tests/test_prune_checkpoint.py).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import QSettings, Qt  # noqa: E402

from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from inspector.checkpoint.masks import HeadMask  # noqa: E402
from inspector.cli.main import main  # noqa: E402
from inspector.formatting import percent, points  # noqa: E402
from inspector.measures.analysis import analyze_sentence  # noqa: E402
from inspector.paths import SAMPLE_MODEL  # noqa: E402

WAIT_MS = 60_000
SENTENCE = "amend my crossing to 3 June, I can't make the oruginal"
"""From the sample model's evaluation set (row text as written there, typo included)."""


@pytest.fixture
def window(qtbot, tmp_path):
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    yield win
    win.runner.wait(30_000)


def _open(qtbot, win, text: str, expected: str | None = None) -> None:
    win.open_sentence(text, expected)
    win.open_model(SAMPLE_MODEL)
    page = win.sentence_page
    qtbot.waitUntil(lambda: page.state.ready and page.state.analysis.text == text, timeout=WAIT_MS)


def _wait_for_mask(qtbot, win, heads) -> None:
    page = win.sentence_page
    want = tuple(sorted(heads))
    qtbot.waitUntil(
        lambda: page.state.ready and page.state.analysis.mask.heads == want and not win.is_busy(),
        timeout=WAIT_MS,
    )


def _cli_probabilities(capsys, tmp_path: Path, text: str, mask: HeadMask | None) -> dict[str, float]:
    argv = ["analyze", str(SAMPLE_MODEL), "--text", text, "--json"]
    if mask is not None:
        path = tmp_path / "mask.json"
        path.write_text(json.dumps(mask.to_json()), encoding="utf-8")
        argv += ["--mask", str(path)]
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)["prediction"]["probabilities"]


def test_switching_a_head_off_changes_the_prediction_exactly_as_the_cli_mask(qtbot, window, tmp_path, capsys):
    """Reference: ``headcount analyze --mask`` on the same sentence and head (itself checked against weight
    surgery in transformers): the window's prediction, bars and the full-model numbers beside them agree."""
    _open(qtbot, window, SENTENCE, expected="change_booking")
    page = window.sentence_page
    full = _cli_probabilities(capsys, tmp_path, SENTENCE, None)
    page.grid.setFocus()
    qtbot.keyClick(page.grid, Qt.Key.Key_Down)
    qtbot.keyClick(page.grid, Qt.Key.Key_Right)
    qtbot.keyClick(page.grid, Qt.Key.Key_Space)  # L1H1 off
    _wait_for_mask(qtbot, window, [(1, 1)])
    masked = _cli_probabilities(capsys, tmp_path, SENTENCE, HeadMask.of([(1, 1)]))
    before, after = max(full, key=full.get), max(masked, key=masked.get)
    assert (before, after) == ("change_booking", "book_crossing")  # one head turns a right answer wrong
    assert page.bar.predicted.text() == after
    for label, p in page.bar.bars.items:
        assert p == pytest.approx(masked[label], abs=1e-6)
        assert page.bar.bars.reference[label] == pytest.approx(full[label], abs=1e-6)
    note = page.bar.mask_note.text()
    change = masked["change_booking"] - full["change_booking"]
    assert (
        f"change_booking {percent(full['change_booking'])} \u2192 {percent(masked['change_booking'])}" in note
    )
    assert points(change, signed=True) in note
    assert f"now predicted book_crossing {percent(full['book_crossing'])}" in note
    assert page.bar.is_misfire_shown()  # the expected label is no longer predicted
    assert page.grid.off_heads() == {(1, 1)}

    qtbot.keyClick(page.grid, Qt.Key.Key_Space, Qt.KeyboardModifier.ShiftModifier)  # the whole layer 1
    layer = [(1, h) for h in range(6)]
    _wait_for_mask(qtbot, window, layer)
    whole = _cli_probabilities(capsys, tmp_path, SENTENCE, HeadMask.of(layer))
    assert dict(page.bar.bars.items)[page.bar.predicted.text()] == pytest.approx(
        max(whole.values()), abs=1e-6
    )

    page.reset_mask_action.trigger()
    _wait_for_mask(qtbot, window, [])
    assert page.bar.predicted.text() == before and page.bar.bars.reference is None
    assert not page.bar.is_misfire_shown() and page.grid.off_heads() == set()


def test_masked_views_and_explain_page_follow_the_masked_model(qtbot, window, tmp_path):
    """Reference: the core's analyze_sentence and explain_sentence with the same mask (checked against
    transformers in tests/test_masks.py): the mosaic's maps (downstream layers change), the relevance band
    and the Explain page all show the masked model; a double click switches a head, Shift+double click a layer."""
    from inspector.explanation.explain import explain_sentence

    _open(qtbot, window, SENTENCE)
    page = window.sentence_page
    lm = load_checkpoint(SAMPLE_MODEL)
    geo = page.grid.grid_geometry()
    qtbot.mouseDClick(page.grid, Qt.MouseButton.LeftButton, pos=geo.cell_rect(0, 2).center())
    qtbot.mouseDClick(
        page.grid, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.ShiftModifier, geo.cell_rect(2, 0).center()
    )
    mask = HeadMask.of([(0, 2)] + [(2, h) for h in range(6)])
    _wait_for_mask(qtbot, window, mask.heads)
    core = analyze_sentence(lm, SENTENCE, mask=mask)
    full = analyze_sentence(lm, SENTENCE)
    np.testing.assert_allclose(page.grid.attention, core.attention, atol=1e-6)
    assert np.abs(core.attention[1:] - full.attention[1:]).max() > 1e-3  # later layers really changed
    np.testing.assert_allclose(page.band.values, core.rollout[0], atol=1e-9)
    assert page.closeup_panel.subtitle.text()  # the close-up still has something to say
    page.select_head(0, 2)  # a switched-off head: its map is shown, and said to be unused
    assert "switched off" in page.closeup_panel.subtitle.text()
    page.select_head(0, 1)
    assert "switched off" not in page.closeup_panel.subtitle.text()

    window.explain_current_sentence()
    explain = window.explain_page
    qtbot.waitUntil(lambda: explain.state.ready and not window.is_busy(), timeout=WAIT_MS)
    ex = explain_sentence(lm, SENTENCE, mask=mask)
    assert explain.state.explanation.mask.heads == mask.heads
    for label, p in ex.prediction.probabilities.items():
        assert explain.state.explanation.prediction.probabilities[label] == pytest.approx(p, abs=1e-6)
    assert "7 heads off" in explain.mask_note.text()


def test_masks_load_save_and_the_pruned_checkpoint_from_the_sentence_page(qtbot, window, tmp_path):
    """Reference: the prune_mask.json format, and transformers' own classes loading the pruned folder written
    by the window action, which must predict what the window shows with those heads off."""
    import torch
    import transformers

    _open(qtbot, window, SENTENCE)
    page = window.sentence_page
    errors: list[str] = []
    page.error.connect(errors.append)

    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"0": [1], "5": [0]}), encoding="utf-8")
    assert page.masks.load(bad, window.lm) is None
    assert errors and "L5H0" in errors[-1] and "\n" not in errors[-1]

    good = tmp_path / "good.json"
    good.write_text(json.dumps({"1": [1], "3": [0, 4]}), encoding="utf-8")
    mask = page.masks.load(good, window.lm)
    assert page.set_mask(mask)
    _wait_for_mask(qtbot, window, mask.heads)
    saved = page.masks.save(page.state.mask, tmp_path / "saved.json")
    assert json.loads(saved.read_text()) == {"1": [1], "3": [0, 4]}

    out = tmp_path / "pruned"
    page.masks.write_pruned(window.lm, page.state.mask, out)
    qtbot.waitUntil(lambda: (out / "PRUNED.md").is_file() and not window.is_busy(), timeout=WAIT_MS)
    model = transformers.AutoModelForSequenceClassification.from_pretrained(str(out)).eval()
    tok = transformers.AutoTokenizer.from_pretrained(str(out))
    with torch.no_grad():
        probs = torch.softmax(model(**tok([SENTENCE], return_tensors="pt")).logits[0].double(), -1).numpy()
    shown = page.state.analysis.prediction.probabilities
    np.testing.assert_allclose(probs, [shown[lab] for lab in window.lm.labels], atol=1e-5)


def test_a_switched_off_tile_is_crossed_out_not_only_recoloured(qtbot):
    """Reference: the tile's own pixels (common practice, no source): on the diagonals of a switched-off cell
    the pen of the window text is drawn, so the mark survives greyscale and colour-blind viewing."""
    from PySide6.QtGui import QColor, QPalette

    from ui.sentence.head_grid import HeadGrid

    grid = HeadGrid()
    qtbot.addWidget(grid)
    grid.resize(520, 420)
    rng = np.random.default_rng(0)
    att = rng.random((3, 4, 9, 9)).astype(np.float32)
    att /= att.sum(-1, keepdims=True)
    grid.set_data(att, rng.random((3, 4)), (0.0, 1.0), per_head=True)
    grid.show()
    before = grid.grab().toImage()
    grid.set_off({(1, 2)})
    after = grid.grab().toImage()
    r = grid.grid_geometry().cell_rect(1, 2)
    ink = grid.palette().color(QPalette.ColorRole.WindowText)
    quarter = r.topLeft() + (r.bottomRight() - r.topLeft()) / 4  # on the diagonal, clear of the "off" label
    seen = QColor(after.pixel(quarter))
    assert abs(seen.lightness() - ink.lightness()) < 40
    assert before.pixel(quarter) != after.pixel(quarter)
    other = grid.grid_geometry().cell_rect(0, 0).center()
    assert before.pixel(other) == after.pixel(other)  # the other tiles are untouched


def test_heads_off_text_follows_the_display_rules(qtbot, window):
    """Reference: the project's display rules (tests/text_rules.py: one head form L2H3, percentages with one
    decimal, changes in points, counts agreeing with their noun), applied to every string of the window and the
    Explain page with a layer and a head switched off."""
    from tests.test_displayed_text import visible_text
    from tests.text_rules import violations

    _open(qtbot, window, SENTENCE, expected="change_booking")
    page = window.sentence_page
    page.toggle_layer(2)
    page.toggle_head(1, 1)
    _wait_for_mask(qtbot, window, [(1, 1)] + [(2, h) for h in range(6)])
    window.explain_current_sentence()
    qtbot.waitUntil(lambda: window.explain_page.state.ready and not window.is_busy(), timeout=WAIT_MS)
    items, columns = visible_text(window)
    assert any("7 of 24 off" in t for _, t in items)
    assert violations(items) + columns == []
