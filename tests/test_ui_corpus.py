"""The Corpus page, offscreen: a run, its numbers, Cancel, misfires one click away, bad rows, export.

The numbers the page shows are compared with the transformers library's own
predictions on the same checkpoint scored by scikit-learn, and with
``inspector.corpus.run.run_corpus`` (which tests/test_corpus_*.py check against
scikit-learn, SciPy and closed forms).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

import torch  # noqa: E402
from PySide6.QtCore import QSettings, Qt  # noqa: E402
from sklearn.metrics import accuracy_score, confusion_matrix, f1_score, precision_recall_fscore_support  # noqa: E402

from inspector.checkpoint.loader import LoadedModel, load_checkpoint  # noqa: E402
from inspector.corpus.dataset import read_labelled  # noqa: E402
from inspector.corpus.report import FIGURES, HEADS, PRUNE_MASK, PRUNING, SIMILAR_PAIRS, SUMMARY  # noqa: E402
from inspector.corpus.run import run_corpus  # noqa: E402
from tests.corpus_models import (  # noqa: E402
    INTENTS,
    UTTERANCES,
    pause_corpus_job,
    save_tiny_classifier,
    write_csv,
)
from ui.widgets.worker import MODEL_LOCK  # noqa: E402

WAIT_MS = 60_000


@pytest.fixture(scope="module")
def classifier(tmp_path_factory) -> tuple[Path, LoadedModel]:
    """The suite's seeded random 2-layer x 4-head BERT classifier with three ferry intents."""
    folder = save_tiny_classifier(tmp_path_factory.mktemp("tiny_corpus_ui"))
    return folder, load_checkpoint(folder)


@pytest.fixture
def data_file(tmp_path) -> Path:
    """The invented ferry utterances with non-default field names (utterance, intent)."""
    return write_csv(tmp_path / "ferry.csv", UTTERANCES, header=("utterance", "intent"))


@pytest.fixture
def window(qtbot, tmp_path, classifier):
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    win.open_model(classifier[0])
    qtbot.waitUntil(lambda: win.lm is not None and win.corpus_page.lm is win.lm, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: not win.is_busy(), timeout=WAIT_MS)
    yield win
    win.corpus_page.stop()
    win.runner.wait(30_000)


def start(window, path: Path, text_field: str = "utterance", label_field: str = "intent") -> None:
    page = window.corpus_page
    window.show_page(page)
    page.path_edit.setText(str(path))
    page.text_field.setText(text_field)
    page.label_field.setText(label_field)
    page.run()


def run_and_wait(qtbot, window, path: Path, **fields) -> str:
    with qtbot.waitSignal(window.corpus_page.finished, timeout=WAIT_MS) as blocker:
        start(window, path, **fields)
    return blocker.args[0]


def transformers_predictions(lm: LoadedModel, texts: list[str]) -> np.ndarray:
    enc = lm.tokenizer(texts, padding=True, truncation=True, return_tensors="pt")
    with torch.inference_mode():
        return lm.model(**enc).logits.argmax(-1).numpy()


def test_run_fills_the_page_with_the_core_and_sklearn_numbers(qtbot, window, classifier, data_file):
    """Accuracy, macro-F1, per-intent table, confusion cells, misfires and head views equal the references.

    Reference: scikit-learn's accuracy_score, f1_score(average='macro'), precision_recall_fscore_support and
    confusion_matrix on the transformers library's own predictions; run_corpus for importance and pruning.
    """
    _, lm = classifier
    assert run_and_wait(qtbot, window, data_file) == "done"
    page = window.corpus_page
    report = page.report
    assert report is not None
    y_true = np.array([INTENTS.index(label) for _, label in UTTERANCES])
    y_pred = transformers_predictions(lm, [text for text, _ in UTTERANCES])
    labels = list(range(len(INTENTS)))

    assert report.evaluation.accuracy == pytest.approx(accuracy_score(y_true, y_pred))
    assert report.evaluation.macro_f1 == pytest.approx(f1_score(y_true, y_pred, average="macro"))
    summary = page.summary.text()
    assert f"{100 * accuracy_score(y_true, y_pred):.1f}%" in summary
    assert f"{100 * f1_score(y_true, y_pred, average='macro'):.1f}%" in summary

    p, r, f, s = precision_recall_fscore_support(y_true, y_pred, labels=labels, zero_division=0)
    assert page.intents.rowCount() == len(INTENTS)
    for i, name in enumerate(INTENTS):
        cells = [page.intents.item(i, c).text() for c in range(5)]
        assert cells == [name, f"{100 * p[i]:.1f}%", f"{100 * r[i]:.1f}%", f"{100 * f[i]:.1f}%", str(s[i])]

    cm = confusion_matrix(y_true, y_pred, labels=labels)
    assert page.confusion.row_names == list(INTENTS)
    assert [[int(t or 0) for t in row] for row in page.confusion.texts] == cm.tolist()
    np.testing.assert_allclose(page.confusion.values, cm / cm.sum(1, keepdims=True))
    hover = page.confusion.hover_text((0, 1))
    noun = "utterance" if cm[0, 1] == 1 else "utterances"
    assert f"{cm[0, 1]} {noun} " in hover and INTENTS[0] in hover and INTENTS[1] in hover

    wrong = int((y_true != y_pred).sum())
    assert wrong > 0, "the random classifier should misroute some utterances"
    assert page.misfires.rowCount() == wrong
    confidences = [float(page.misfires.item(i, 4).text().removesuffix("%")) for i in range(wrong)]
    assert confidences == sorted(confidences, reverse=True)
    for i in range(wrong):
        text = page.misfires.item(i, 1).text()
        k = [t for t, _ in UTTERANCES].index(text)
        assert page.misfires.item(i, 2).text() == UTTERANCES[k][1]
        assert page.misfires.item(i, 3).text() == INTENTS[y_pred[k]]
        assert int(page.misfires.item(i, 0).text()) == k + 2  # CSV line: header is line 1

    data = read_labelled(data_file, text_field="utterance", label_field="intent", known_labels=lm.labels)
    core = run_corpus(lm, data, page.request().settings)
    np.testing.assert_allclose(page.importance_map.values, core.importance.normalized, rtol=1e-4, atol=1e-6)
    np.testing.assert_allclose(page.similarity.values, core.redundancy.similarity, atol=1e-5)
    shown = {c.order_name: c.accuracy for c in page.plot.result.curves}
    assert shown == {c.order_name: c.accuracy for c in core.pruning.curves}
    assert report.pruning.removed == core.pruning.removed
    assert "re-validated" in page.caution.text() and "without retraining" in page.caution.text()
    assert all(
        page.phase_bars[p].value() == page.phase_bars[p].maximum() for p in ("scan", "importance", "pruning")
    )


def test_cancel_stops_the_run_keeps_the_previous_results_and_a_later_run_works(qtbot, window, data_file):
    """Cancel stops the run before its next batch: nothing new is shown, the window keeps working.

    Reference: run_corpus raises CorpusCancelled when should_stop() is True before a batch (common practice, no
    source); the job is held on MODEL_LOCK until Cancel was pressed, so the stop is deterministic.
    """
    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    previous = page.report
    with qtbot.waitSignal(page.finished, timeout=WAIT_MS) as blocker:
        with MODEL_LOCK:  # the job waits here until Cancel has been pressed
            start(window, data_file)
            assert page.is_running() and page.cancel_button.isEnabled()
            assert not page.run_button.isEnabled()
            qtbot.mouseClick(page.cancel_button, Qt.MouseButton.LeftButton)
    assert blocker.args[0] == "cancelled"
    assert page.report is previous
    assert "Cancelled" in page.phase_label.text()
    qtbot.waitUntil(lambda: not page.is_running(), timeout=WAIT_MS)
    assert page.run_button.isEnabled() and not page.cancel_button.isEnabled()
    # the window is still usable: the sentence page analyses, and a new run completes
    window.analyse("when is the last sailing back")
    qtbot.waitUntil(
        lambda: (
            window.sentence_page.state.ready
            and window.sentence_page.state.analysis.text == "when is the last sailing back"
        ),
        timeout=WAIT_MS,
    )
    assert run_and_wait(qtbot, window, data_file) == "done"
    assert page.report is not previous


def test_a_click_on_a_misfire_opens_it_in_the_sentence_page_and_explain_on_the_explain_page(
    qtbot, window, data_file
):
    """One click on a misfire row shows it in the sentence view with its expected label; its Explain button
    opens the Explain page with the same text and expected label.

    Reference: the misfire list of the report (text and expected label come from the data file).
    """
    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    misfires = page.report.evaluation.misfires
    row = len(misfires) - 1
    page.tabs.setCurrentWidget(page.misfire_tab)
    page.misfires.scrollToItem(page.misfires.item(row, 1))
    rect = page.misfires.visualItemRect(page.misfires.item(row, 1))
    qtbot.mouseClick(page.misfires.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert window.pages.currentWidget() is window.sentence_page
    bar = window.sentence_page.bar
    assert bar.entry.text() == misfires[row].text
    assert bar.expected_label() == misfires[row].expected
    qtbot.waitUntil(
        lambda: (
            window.sentence_page.state.ready
            and window.sentence_page.state.analysis.text == misfires[row].text
        ),
        timeout=WAIT_MS,
    )

    window.show_page(page)
    page.tabs.setCurrentWidget(page.misfire_tab)
    button = page.misfires.cellWidget(0, 5)
    qtbot.mouseClick(button, Qt.MouseButton.LeftButton)
    assert window.pages.currentWidget() is window.explain_page
    assert window.explain_page.entry.text() == misfires[0].text
    assert window.explain_page.expected_label() == misfires[0].expected
    qtbot.waitUntil(lambda: window.explain_page.state.ready, timeout=WAIT_MS)

    window.show_page(page)
    page.tabs.setCurrentWidget(page.misfire_tab)
    page.misfires.setFocus()
    page.misfires.setCurrentCell(0, 1)
    qtbot.keyClick(page.misfires, Qt.Key.Key_Return)
    assert window.pages.currentWidget() is window.sentence_page
    assert window.sentence_page.bar.entry.text() == misfires[0].text
    qtbot.waitUntil(lambda: not window.is_busy(), timeout=WAIT_MS)


def test_bad_rows_are_reported_by_line_and_fail_policy_stops(qtbot, window, tmp_path):
    """Skipped rows are listed with their line numbers and reasons, unknown labels with their counts;
    the 'fail' policy stops with a message naming the lines.

    Reference: CSV line numbering as a spreadsheet shows it (header = line 1), RFC 4180 layout.
    """
    rows = list(UTTERANCES[:6]) + [("", "timetable"), ("lost my ticket", "lost_property"), ("hello", "")]
    path = write_csv(tmp_path / "bad.csv", rows)
    page = window.corpus_page
    assert run_and_wait(qtbot, window, path, text_field="text", label_field="label") == "done"
    note = page.data_note.text()
    assert "6 utterances used" in note and "3 bad rows" in note
    assert "line 8: missing text" in note
    assert (
        "line 9: unknown label &#x27;lost_property&#x27;" in note
        or "line 9: unknown label 'lost_property'" in note
    )
    assert "line 10: missing label" in note
    assert "lost_property" in note and "(1 row)" in note
    assert page.report.evaluation.total == 6

    previous = page.report
    page.bad_rows_box.setCurrentIndex(page.bad_rows_box.findData("fail"))
    assert run_and_wait(qtbot, window, path, text_field="text", label_field="label") == "failed"
    message = window.message_bar.text()
    assert "3 bad rows" in message and "line 8" in message and "line 9" in message
    assert page.report is previous


def test_export_writes_the_report_folder_and_the_prune_mask(qtbot, window, data_file, tmp_path):
    """The export writes the CLI's files; Save prune mask writes the chosen heads as JSON.

    Reference: the file list of inspector.corpus.report (the `headcount corpus --out` folder).
    """
    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    out = tmp_path / "report"
    page.export_report(out)
    qtbot.waitUntil(lambda: not window.runner.is_busy("export"), timeout=WAIT_MS)
    for name in (SUMMARY, HEADS, SIMILAR_PAIRS, PRUNING, PRUNE_MASK):
        assert (out / name).is_file(), name
    for stem in FIGURES.values():
        assert (out / f"{stem}.png").is_file() and (out / f"{stem}.svg").is_file()
    summary = json.loads((out / SUMMARY).read_text())
    assert summary["accuracy"] == pytest.approx(page.report.evaluation.accuracy)
    mask_path = page.save_mask(tmp_path / "mask.json")
    mask = json.loads(mask_path.read_text())
    assert mask == page.report.pruning.mask == json.loads((out / PRUNE_MASK).read_text())
    assert sum(len(v) for v in mask.values()) == len(page.report.pruning.removed)
    assert not list(tmp_path.glob("*.tmp*"))


def test_each_phase_shows_its_results_when_it_ends_and_cancel_keeps_them(
    qtbot, window, data_file, monkeypatch
):
    """The scan's numbers are on the page while importance still runs; Cancel then keeps them, says so,
    and marks the unfinished phases as cancelled (never "done").

    Reference: scikit-learn's accuracy_score on the transformers library's own predictions; the run is held
    after its scan from its own result callback, so the cancel point is deterministic (common practice, no source).
    """
    held, release = pause_corpus_job(monkeypatch, "on_result", lambda phase, _report: phase == "scan")
    page = window.corpus_page
    with qtbot.waitSignal(page.finished, timeout=WAIT_MS) as blocker:
        start(window, data_file)
        assert "Running on ferry.csv" in page.summary.text()  # not "choose its evaluation set"
        try:
            qtbot.waitUntil(lambda: page.report is not None, timeout=WAIT_MS)
            assert held.is_set() and page.is_running()
            lm = window.lm
            y_true = np.array([INTENTS.index(label) for _, label in UTTERANCES])
            y_pred = transformers_predictions(lm, [text for text, _ in UTTERANCES])
            assert f"{100 * accuracy_score(y_true, y_pred):.1f}%" in page.summary.text()
            assert page.report.importance is None
            assert "still running" in page.importance_map.note
            assert "Scan: " in page.phase_bars["scan"].format() and " in " in page.phase_bars["scan"].format()
            page.cancel()
        finally:
            release.set()
    assert blocker.args[0] == "cancelled"
    assert page.report.evaluation.accuracy == pytest.approx(accuracy_score(y_true, y_pred))
    assert "kept what finished: the scan" in page.phase_label.text()
    for phase in ("importance", "pruning"):
        assert page.phase_bars[phase].format().endswith("cancelled")
    assert "cancelled" in page.importance_map.note


def test_misfires_sort_search_and_filter_by_confusion_cell_or_pair(qtbot, window, data_file):
    """Sorting by line keeps each row's misfire; a search, a confusion cell and a confusable pair filter the
    table to exactly the matching misfires.

    Reference: identities of the confusion matrix (an off-diagonal cell counts the misfires of that pair,
    a row's off-diagonal sum those of its expected label); the misfire list of the run.
    """
    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    ev = page.report.evaluation
    assert ev.misfires, "the tiny classifier should misroute some invented utterances"
    page.tabs.setCurrentWidget(page.misfire_tab)
    page.misfires.horizontalHeader().sectionClicked.emit(0)  # sort by line, as a header click does
    page.misfires.sortItems(0, Qt.SortOrder.AscendingOrder)
    lines = [int(page.misfires.item(r, 0).text()) for r in range(page.misfires.rowCount())]
    assert lines == sorted(m.row for m in ev.misfires)
    for r in range(page.misfires.rowCount()):
        m = ev.misfires[page._misfire_index(r)]
        assert (m.row, m.text) == (lines[r], page.misfires.item(r, 1).text())
    # a confusion cell off the diagonal: exactly its count of misfires, all of that pair
    cm = ev.confusion
    r, c = next((i, j) for i in range(len(cm)) for j in range(len(cm)) if i != j and cm[i, j])
    page.confusion.cell_clicked.emit(r, c)
    assert page.tabs.currentWidget() is page.misfire_tab
    shown = page.shown_misfires()
    assert len(shown) == cm[r, c] and {(m.expected, m.predicted) for m in shown} == {
        (ev.labels[r], ev.labels[c])
    }
    assert f"Showing {cm[r, c]} of" in page.filter_label.text()
    # a confusable pair from the list
    page.clear_filter()
    assert len(page.shown_misfires()) == len(ev.misfires)
    first = page.pairs.item(0, 0).data(Qt.ItemDataRole.UserRole)
    page._pair_clicked(0)
    assert {(m.expected, m.predicted) for m in page.shown_misfires()} == {tuple(first)}
    assert int(page.pairs.item(0, 1).text()) == len(page.shown_misfires())
    # a search: every shown misfire contains the words, every hidden one misses one
    page.clear_filter()
    word = ev.misfires[0].text.split()[0]
    page.search.setText(word)
    shown = page.shown_misfires()
    assert shown and all(
        word.lower() in f"{m.row} {m.text} {m.expected} {m.predicted}".lower() for m in shown
    )
    assert len(shown) == sum(
        word.lower() in f"{m.row} {m.text} {m.expected} {m.predicted}".lower() for m in ev.misfires
    )


def test_ctrl_e_exports_the_focused_corpus_view_and_says_so(qtbot, window, data_file, tmp_path, monkeypatch):
    """Ctrl+E with the importance map focused writes its figure and CSV, the status bar names it, and the
    next dialog (the prune mask's) opens in that folder.

    Reference: PNG signature (PNG spec 5.2); the CSV against the run's importance; common practice, no
    source, for the remembered folder.
    """
    from ui.widgets import export as export_actions

    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    page.tabs.setCurrentIndex(2)
    page.importance_map.setFocus()
    qtbot.waitUntil(lambda: page.focusWidget() is page.importance_map, timeout=5_000)
    assert page.focused_view() == "importance"
    target = tmp_path / "figures" / "importance.png"
    target.parent.mkdir()
    monkeypatch.setattr(
        export_actions.QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(target), ""))
    )
    messages: list[str] = []
    window.statusBar().messageChanged.connect(lambda text: text and messages.append(text))
    window.export_focused()
    qtbot.waitUntil(lambda: target.with_suffix(".csv").is_file() and not window.is_busy(), timeout=WAIT_MS)
    assert target.read_bytes().startswith(b"\x89PNG")
    import csv

    with target.with_suffix(".csv").open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    imp = page.report.importance.normalized
    assert len(rows) == imp.size
    assert all(float(r["importance"]) == pytest.approx(imp[int(r["layer"]), int(r["head"])]) for r in rows)
    qtbot.waitUntil(lambda: any("Exported head importance" in m for m in messages), timeout=5_000)
    seen = {}

    def fake_save(parent, title, start, filters):
        seen["start"] = start
        return "", ""

    import ui.corpus.page as corpus_page_module

    monkeypatch.setattr(corpus_page_module.QFileDialog, "getSaveFileName", staticmethod(fake_save))
    page.choose_mask_file()
    assert Path(seen["start"]).parent == target.parent


def test_review_report_from_the_corpus_page(qtbot, window, data_file, tmp_path):
    """The page writes the same review report as ``headcount report``, off the GUI thread.

    Reference: pypdf reads the PDF back (ISO 216 A4 page sizes); the report's fixed sections.
    """
    pypdf = pytest.importorskip("pypdf")
    page = window.corpus_page
    assert run_and_wait(qtbot, window, data_file) == "done"
    out = tmp_path / "review.pdf"
    page.write_review(out, explain=1)
    qtbot.waitUntil(lambda: out.is_file() and not window.runner.is_busy("report"), timeout=WAIT_MS)
    reader = pypdf.PdfReader(str(out))
    sizes = {(round(float(p.mediabox.width)), round(float(p.mediabox.height))) for p in reader.pages}
    assert sizes <= {(595, 842), (842, 595)}
    text = " ".join(p.extract_text() for p in reader.pages)
    assert page.report.model_name in text and "Review report" in text
    assert len(reader.pages) >= 8
    assert "Review report written" in page.phase_label.text()


def test_near_duplicate_groups_and_closest_pairs_are_never_cut_at_laptop_size(qtbot, window, data_file):
    """At 1366 x 768 the groups and closest-pairs text is laid out whole and scrolls into view.

    Reference: the 1366 x 768 laptop screen named in the tracker issue (common practice, no source).
    """
    from PySide6.QtWidgets import QApplication

    assert run_and_wait(qtbot, window, data_file) == "done"
    window.resize(1366, 768)
    page = window.corpus_page
    page.tabs.setCurrentIndex(2)  # Heads and pruning
    QApplication.processEvents()
    label = page.groups
    whole = label.heightForWidth(label.width())
    assert "Closest pairs" in label.text()
    assert label.height() >= whole  # laid out whole, not squashed
    area = page.groups_scroll
    assert area.viewport().height() + area.verticalScrollBar().maximum() >= whole
