"""Laptop screens and long inputs, offscreen at 1366 x 768: window size, close-up labels and zoom,
token arcs, relevance band, out-of-date views, page names in a dark palette, the shortcut list.

The model is a seeded random BERT classifier with BERT-base's 12 layers x 12 heads
(hidden size 96, so it builds in a second); the layout depends on the number of
layers, heads and tokens, not on the hidden size.
"""

from __future__ import annotations

import struct
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import QPointF, QRectF, QSettings, Qt  # noqa: E402
from PySide6.QtGui import QColor, QFontInfo, QFontMetricsF  # noqa: E402

from inspector.checkpoint.capture import encode  # noqa: E402
from inspector.checkpoint.loader import load_checkpoint  # noqa: E402
from tests.corpus_models import UTTERANCES  # noqa: E402
from tests.families import build_checkpoint  # noqa: E402
from ui.widgets.worker import MODEL_LOCK  # noqa: E402

WAIT_MS = 60_000
LAPTOP = (1366, 768)
READABLE_PX = 10
"""Smallest label size accepted as readable on a laptop screen (common practice, no source)."""


@pytest.fixture(scope="module")
def base_shape_dir(tmp_path_factory, minilm_dir) -> Path:
    """A seeded random BERT classifier with 12 layers x 12 heads (hidden 96) and the MiniLM tokenizer."""
    return build_checkpoint(
        "bert",
        tmp_path_factory.mktemp("base_shape"),
        minilm_dir,
        hidden_size=96,
        num_hidden_layers=12,
        num_attention_heads=12,
        intermediate_size=96,
        initializer_range=0.2,
    )


@pytest.fixture(scope="module")
def base_shape(base_shape_dir):
    return load_checkpoint(base_shape_dir)


def text_with_tokens(lm, n: int) -> str:
    """The invented ferry utterances run together, cut to ``n`` tokens (specials included; at most 2 fewer
    when no word ends exactly there)."""
    words = " ".join(text for text, _ in UTTERANCES * 20).split()
    lo, hi = 1, len(words)
    while lo < hi:  # the longest prefix with at most n tokens
        mid = (lo + hi + 1) // 2
        if len(encode(lm, [" ".join(words[:mid])]).tokens[0]) <= n:
            lo = mid
        else:
            hi = mid - 1
    text = " ".join(words[:lo])
    assert n - 2 <= len(encode(lm, [text]).tokens[0]) <= n
    return text


@pytest.fixture
def laptop(qtbot, tmp_path, base_shape_dir):
    """The window at 1366 x 768 with the 12 x 12 model open."""
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.resize(*LAPTOP)
    win.show()
    win.open_model(base_shape_dir)
    qtbot.waitUntil(lambda: win.lm is not None and win.sentence_page.state.ready, timeout=WAIT_MS)
    yield win
    win.corpus_page.stop()
    win.runner.wait(30_000)


def show_text(qtbot, win, text: str) -> None:
    win.open_sentence(text, None)
    page = win.sentence_page
    qtbot.waitUntil(lambda: page.state.ready and page.state.analysis.text == text, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: not win.is_busy(), timeout=WAIT_MS)
    qtbot.wait(20)  # queued layout and scrolling


def png_size(path: Path) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG specification, section 11.2.2)."""
    head = path.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n" and head[12:16] == b"IHDR"
    return struct.unpack(">II", head[16:24])


def contrast(a: QColor, b: QColor) -> float:
    """WCAG 2.1 contrast ratio between two colours (relative luminance of sRGB)."""

    def luminance(c: QColor) -> float:
        def channel(v: float) -> float:
            return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4

        return 0.2126 * channel(c.redF()) + 0.7152 * channel(c.greenF()) + 0.0722 * channel(c.blueF())

    hi, lo = sorted((luminance(a), luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


# -- window size ---------------------------------------------------------------------------------


def test_window_takes_the_laptop_size_with_a_long_message_on_every_page(qtbot, laptop, base_shape):
    """At 1366 x 768 the window is exactly that size, with 128 tokens shown, on each of the three pages.

    Reference: the 1366 x 768 laptop screen named in the tracker issue; the window's minimum size hint must fit it.
    """
    show_text(qtbot, laptop, text_with_tokens(base_shape, 128))
    for page in (laptop.sentence_page, laptop.explain_page, laptop.corpus_page):
        laptop.show_page(page)
        qtbot.wait(10)
        hint = laptop.minimumSizeHint()
        assert (
            hint.width() <= LAPTOP[0] and hint.height() <= LAPTOP[1] - 60
        )  # room for a title bar and a panel
        assert (laptop.width(), laptop.height()) == LAPTOP


def test_screenshot_command_renders_at_the_requested_size(tmp_path, base_shape_dir):
    """`headcount open MODEL --text ... --screenshot F --size 1366x768` writes a 1366 x 768 PNG and exits 0.

    Reference: PNG specification, section 11.2.2 (IHDR width and height).
    """
    from tests.test_ui_launch import _launch

    shot = tmp_path / "laptop.png"
    done = _launch(
        "open",
        str(base_shape_dir),
        "--text",
        "is the late sailing to Orlestow still running tonight",
        "--screenshot",
        str(shot),
        "--size",
        "1366x768",
        tmp_path=tmp_path,
    )
    assert done.returncode == 0, done.stderr
    assert png_size(shot) == LAPTOP
    assert "cannot be" not in done.stderr


def test_open_is_listed_in_the_help_and_sizes_are_read(capsys):
    """`headcount --help` lists `open` with the other commands; --size reads WIDTHxHEIGHT.

    Reference: the tracker issue's CLI contract (common practice, no source).
    """
    import argparse

    from inspector.cli.main import main
    from inspector.cli.window import window_size

    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    listed = [line.split()[0] for line in out.splitlines() if line.startswith("    ") and line.split()]
    assert {"open", "analyze", "explain", "corpus"} <= set(listed)
    with pytest.raises(SystemExit):
        main(["open", "--help"])
    open_help = capsys.readouterr().out
    for option in ("--screenshot", "--size", "--page", "--text"):
        assert option in open_help
    assert window_size("1366x768") == (1366, 768) and window_size(" 800 X 600 ") == (800, 600)
    for bad in ("1366", "1366x", "0x768", "big"):
        with pytest.raises(argparse.ArgumentTypeError):
            window_size(bad)


# -- close-up --------------------------------------------------------------------------------------


def _check_labels(closeup, *, every_visible_row: bool) -> int:
    """Shared checks on the drawn labels; returns how many row labels are drawn."""
    geo = closeup.geometry_now()
    labels = closeup.label_layout()
    bounds = QRectF(closeup.rect())
    rects = [label.rect for label in labels]
    assert QFontInfo(closeup.label_font).pixelSize() >= READABLE_PX
    for label in labels:
        assert label.text == label.text.strip() and label.text  # the whole (or ellipsised) token
        assert bounds.contains(label.rect), f"label {label.text!r} is cut by the widget's edge"
        assert not label.rect.intersects(geo.view), f"label {label.text!r} covers the matrix"
        centre = label.rect.center().y() if label.axis == "row" else label.rect.center().x()
        lo, hi = (
            (label.cell.top(), label.cell.bottom())
            if label.axis == "row"
            else (label.cell.left(), label.cell.right())
        )
        assert lo <= centre <= hi, f"label {label.text!r} is not beside its own cell"
    for i, a in enumerate(rects):
        for b in rects[i + 1 :]:
            assert not a.intersects(b), "two labels overlap"
    rows = [label for label in labels if label.axis == "row"]
    if every_visible_row:
        assert {label.index for label in rows} == set(geo.visible("row"))
        for label in labels:  # every label inside its cell's band
            if label.axis == "row":
                assert label.cell.top() <= label.rect.top() and label.rect.bottom() <= label.cell.bottom()
            else:
                assert label.cell.left() <= label.rect.left() and label.rect.right() <= label.cell.right()
    return len(rows)


def test_close_up_at_128_tokens_draws_readable_labels_within_their_cells_and_zooms(qtbot, laptop, base_shape):
    """At fit, the labels drawn are readable, apart and beside their own cells; zoomed in, every row in view
    is labelled and each label lies within its cell; the wheel zooms around the pointer; 0 fits again.

    Reference: label and cell rectangles compared in widget coordinates (closed form); a point under the pointer
    stays under it when zooming about that point (closed form).
    """
    text = text_with_tokens(base_shape, 128)
    show_text(qtbot, laptop, text)
    closeup = laptop.sentence_page.closeup
    assert closeup.matrix.shape[0] >= 126
    shown = _check_labels(closeup, every_visible_row=False)
    assert shown >= 8  # a readable selection, not one label
    closeup.set_zoom(closeup.max_zoom())
    geo = closeup.geometry_now()
    assert geo.pitch >= QFontMetricsF(closeup.label_font).height()  # zoomed in far enough for every label
    _check_labels(closeup, every_visible_row=True)
    closeup.fit()
    at = QPointF(closeup.geometry_now().view.center())
    cell_before = closeup.cell_at(at.x(), at.y())
    closeup.set_zoom(4.0, at)
    assert closeup.zoom == pytest.approx(4.0)
    assert closeup.cell_at(at.x(), at.y()) == cell_before
    qtbot.keyClick(closeup, Qt.Key.Key_0)
    assert closeup.zoom == 1.0


def test_close_up_keeps_the_query_in_view_when_zoomed(qtbot, laptop, base_shape):
    """Moving the query to a row outside the zoomed view pans the view to it.

    Reference: common practice, no source (a selection is scrolled into view).
    """
    show_text(qtbot, laptop, text_with_tokens(base_shape, 128))
    page = laptop.sentence_page
    page.closeup.set_zoom(6.0)
    page.set_query(120)
    geo = page.closeup.geometry_now()
    assert 120 in geo.visible("row")
    assert any(label.index == 120 and label.strong for label in page.closeup.label_layout())


# -- token arcs and relevance band ---------------------------------------------------------------


def test_token_arcs_scroll_to_keep_the_query_token_in_view(qtbot, laptop, base_shape):
    """With 128 tokens the arcs scroll sideways; choosing the last token as query scrolls it into view.

    Reference: common practice, no source (a selection is scrolled into view).
    """
    show_text(qtbot, laptop, text_with_tokens(base_shape, 128))
    page = laptop.sentence_page
    scroll = page.arcs_scroll
    assert page.arcs.width() > scroll.viewport().width()  # it does not fit: it scrolls
    page.set_query(127)
    qtbot.wait(20)
    box = page.arcs.boxes()[127]
    left = scroll.horizontalScrollBar().value()
    assert left <= box.left() and box.right() <= left + scroll.viewport().width()


def test_relevance_band_at_71_tokens_shows_every_chip_in_view_or_by_scrolling(qtbot, laptop, base_shape):
    """Every chip of a 71-token message lies inside the band, is as wide as it needs, and scrolls into view.

    Reference: chip rectangles against the scroll area's viewport (closed form).
    """
    show_text(qtbot, laptop, text_with_tokens(base_shape, 71))
    page = laptop.sentence_page
    band, scroll = page.band, page.band_scroll
    chips = band.chips()
    assert 69 <= len(chips) == len(page.state.analysis.tokens) <= 71
    fm = band.fontMetrics()
    for chip, label in zip(chips, band.labels):
        assert QRectF(band.rect()).contains(chip)
        assert chip.width() >= fm.horizontalAdvance(label)
    assert chips[-1].bottom() > chips[0].bottom()  # it wraps
    caption_top = page.band_key.mapTo(laptop, page.band_key.rect().topLeft()).y()
    for chip in (chips[0], chips[len(chips) // 2], chips[-1]):
        scroll.ensureVisible(int(chip.center().x()), int(chip.center().y()), 0, int(chip.height() / 2))
        top = band.mapTo(scroll.viewport(), chip.topLeft().toPoint()).y()
        assert 0 <= top and top + chip.height() <= scroll.viewport().height()
        assert band.mapTo(laptop, chip.bottomLeft().toPoint()).y() <= caption_top  # never under the caption


def test_relevance_scale_leaves_out_the_classification_tokens_own_entry(qtbot, laptop, base_shape):
    """By default the band's colour scale tops out at the largest entry other than [CLS]'s own; with the
    option on, at the largest entry; the caption says rollout does not depend on the label.

    Reference: attention rollout (Abnar & Zuidema 2020) is computed from attention alone, with no label input.
    """
    show_text(qtbot, laptop, text_with_tokens(base_shape, 16))
    page = laptop.sentence_page
    values = page.band.values
    assert page.band.excluded == 0 and page.band.labels[0] == "[CLS]"
    assert page.band.vmax == pytest.approx(values[1:].max())
    page.own_check.setChecked(True)
    assert page.band.excluded is None and page.band.vmax == pytest.approx(values.max())
    assert "does not depend on the predicted label" in page.band_caption.text()
    assert "for the prediction" not in page.band_key.text()


# -- out-of-date views ---------------------------------------------------------------------------


def test_views_of_an_earlier_text_are_marked_out_of_date_until_the_new_one_is_analysed(qtbot, laptop):
    """While the model is busy the views keep the earlier text and a note says so; it goes when they catch up.

    Reference: common practice, no source; MODEL_LOCK is held by the test so the wait is deterministic.
    """
    page = laptop.sentence_page
    old = page.state.analysis.text
    with MODEL_LOCK:
        page.bar.entry.setText("a brand new question about bicycles")
        qtbot.waitUntil(lambda: page.stale_note.isVisible(), timeout=WAIT_MS)
        assert page.state.analysis.text == old
        assert "Out of date" in page.stale_note.text()
    qtbot.waitUntil(
        lambda: page.state.analysis.text == "a brand new question about bicycles", timeout=WAIT_MS
    )
    assert not page.stale_note.isVisible()


def test_sentence_page_analyses_while_a_corpus_run_is_paused_mid_scan(qtbot, laptop, tmp_path, monkeypatch):
    """With room for a private copy, a corpus run does not hold the window's model: a sentence is analysed
    while the run is held in the middle of its scan.

    Reference: common practice, no source; the run is paused from its own progress callback (deterministic).
    """
    from tests.corpus_models import pause_corpus_job, write_csv

    data = write_csv(tmp_path / "ferry.csv", UTTERANCES)
    paused, release = pause_corpus_job(monkeypatch, "on_step", lambda p: p.phase == "scan" and p.done > 0)
    page = laptop.corpus_page
    page.every.setValue(8)
    page.path_edit.setText(str(data))
    page.run()
    try:
        qtbot.waitUntil(paused.is_set, timeout=WAIT_MS)
        laptop.analyse("when does the last boat leave")
        qtbot.waitUntil(
            lambda: laptop.sentence_page.state.analysis.text == "when does the last boat leave",
            timeout=WAIT_MS,
        )
        assert page.is_running()
    finally:
        release.set()
    qtbot.waitUntil(lambda: not page.is_running(), timeout=WAIT_MS)


# -- smaller things -------------------------------------------------------------------------------


def test_mosaic_names_words_and_leaves_the_special_share_meter_empty_when_specials_are_hidden(qtbot, laptop):
    """Word view counts words; with special tokens hidden the special-token share meter shows no value.

    Reference: the tracker issue (special-token share of hidden tokens has no meaning); common practice, no source.
    """
    show_text(qtbot, laptop, "rebooking my crossing to orlestow")
    page = laptop.sentence_page
    page.words_action.setChecked(True)
    words = len(page.state.view().labels)
    assert page.mosaic_panel.subtitle.text().endswith(f"{words} words")
    page.metric_box.setCurrentIndex(page.metric_box.findData("special_share"))
    assert np.isfinite(page.grid.metric_values).all()
    page.special_action.setChecked(True)
    assert np.isnan(page.grid.metric_values).all()
    assert "empty" in page.meter_key.text()


def test_page_names_and_hints_stay_readable_in_a_dark_palette_switched_at_run_time(qtbot, laptop):
    """After switching to a dark palette, the page names and the arcs' hint contrast with their background.

    Reference: WCAG 2.1 contrast ratio (at least 4.5:1 for text).
    """
    from PySide6.QtGui import QPalette
    from PySide6.QtWidgets import QApplication

    from ui.app import application

    app = application()
    old = app.palette()
    dark = QPalette(old)
    for role, colour in {
        QPalette.ColorRole.Window: "#202124",
        QPalette.ColorRole.WindowText: "#e8e8e8",
        QPalette.ColorRole.Base: "#17181a",
        QPalette.ColorRole.Text: "#e8e8e8",
    }.items():
        dark.setColor(role, QColor(colour))
    try:
        app.setPalette(dark)
        QApplication.processEvents()
        laptop.nav.setCurrentRow(0)
        image = laptop.nav.grab().toImage()
        row = laptop.nav.visualItemRect(laptop.nav.item(1))  # "Explain", not selected
        background = QColor("#202124")
        brightest = max(
            (
                QColor(image.pixel(x, y))
                for x in range(row.left(), row.right())
                for y in range(row.top(), row.bottom())
            ),
            key=lambda c: contrast(c, background),
        )
        assert contrast(brightest, background) >= 4.5
        hint = laptop.sentence_page.arcs_hint
        assert hint.isEnabled()
        assert contrast(hint.palette().color(QPalette.ColorRole.WindowText), background) >= 4.5
    finally:
        app.setPalette(old)


def test_shortcut_list_never_wraps_a_description(qtbot, laptop):
    """The F1 list shows each shortcut on one line and fits a laptop screen.

    Reference: common practice, no source.
    """
    from PySide6.QtWidgets import QLabel

    dialog = laptop.show_shortcuts()
    qtbot.addWidget(dialog)
    label = dialog.findChild(QLabel)
    assert not label.wordWrap()
    assert dialog.sizeHint().width() <= LAPTOP[0]
    rows = label.text().count("<tr>")
    assert label.sizeHint().height() <= rows * 2 * label.fontMetrics().height()  # no row takes two lines
    dialog.close()


def test_matrix_maps_fit_their_names_or_name_blocks_and_give_full_names_on_hover(qtbot):
    """A 16-intent confusion matrix names every row and column at a readable size, shortened if need be,
    never overlapping or cut; a 144-head similarity map names its layer blocks; hovering a name gives it whole.

    Reference: name rectangles against the widget and against each other (closed form).
    """
    from PySide6.QtGui import QFontMetricsF as Metrics

    from ui.widgets.matrix_map import NAME_MIN_PX, MatrixMap

    intents = [
        f"{a}_{b}"
        for a in ("foot_passenger", "vehicle", "cabin", "loyalty")
        for b in ("fares", "refund", "change", "status")
    ]
    confusion = MatrixMap("Confusion matrix")
    qtbot.addWidget(confusion)
    confusion.resize(700, 330)
    confusion.set_data(np.eye(16), intents, intents)
    names = confusion.name_layout()
    layout = confusion.layout_now()
    assert (
        Metrics(layout.font).height() <= layout.cell + 1e-6
        and QFontInfo(layout.font).pixelSize() >= NAME_MIN_PX
    )
    for axis in ("row", "col"):
        drawn = [n for n in names if n.axis == axis]
        assert [n.first for n in drawn] == list(range(16))
        for n in drawn:
            full = intents[n.first]
            assert n.text == full or (n.text.endswith("\u2026") and full.startswith(n.text[:-1]))
            cell = confusion.cell_rect(n.first, n.first)
            centre, lo, hi = (
                (n.rect.center().y(), cell.top(), cell.bottom())
                if axis == "row"
                else (n.rect.center().x(), cell.left(), cell.right())
            )
            assert lo <= centre <= hi
    bounds = QRectF(confusion.rect())
    for i, a in enumerate(names):
        assert bounds.contains(a.rect)
        assert all(not a.rect.intersects(b.rect) for b in names[i + 1 :])
    column = next(n for n in names if n.axis == "col" and n.first == 3)
    hit = confusion.hit_at(column.rect.center().x(), column.rect.center().y())
    assert confusion.hover_text(hit) == intents[3]

    heads = [f"L{layer}H{head}" for layer in range(12) for head in range(12)]
    similarity = MatrixMap("Head similarity")
    qtbot.addWidget(similarity)
    similarity.resize(550, 260)
    similarity.set_data(np.eye(144), heads, heads, block=12, block_names=[f"L{layer}" for layer in range(12)])
    rows = [n for n in similarity.name_layout() if n.axis == "row"]
    assert [(n.first, n.last, n.text) for n in rows] == [(12 * k, 12 * k + 11, f"L{k}") for k in range(12)]
    top, bottom = similarity.cell_rect(12 * 5, 0), similarity.cell_rect(12 * 5 + 11, 0)
    assert top.top() <= rows[5].rect.center().y() <= bottom.bottom()
    assert similarity.hover_text(("name", "row", 61)) == "L5H1"


def test_close_up_panel_keeps_its_width_whatever_it_shows(qtbot, laptop):
    """Choosing another source for the close-up (head, layer mean, rollout, flow, value-weighted) never
    changes the panel's width.

    Reference: the tracker issue (the panel changed width with "Show"); common practice, no source.
    """
    page = laptop.sentence_page
    widths = set()
    for i in range(page.source_box.count()):
        page.source_box.setCurrentIndex(i)
        qtbot.waitUntil(lambda: not laptop.is_busy(), timeout=WAIT_MS)
        qtbot.wait(10)
        widths.add((page.closeup_panel.width(), page.mosaic_panel.width()))
    assert len(widths) == 1
