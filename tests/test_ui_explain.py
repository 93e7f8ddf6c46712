"""The Explain page, offscreen: one click from a sentence, the numbers it holds, the rewording, export, bare encoders.

Every number the page paints is compared with the core's own computation on the
same checkpoint and input (``inspector.explanation.explain.explain_sentence`` and
``inspector.explanation.rewording.compare_rewording``), which tests/test_explain.py checks
against the transformers library, SciPy and closed forms; and with the
``headcount explain --json`` command line.
"""

from __future__ import annotations

import csv
import html
import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PIL import Image  # noqa: E402
from PySide6.QtCore import QRectF, QSettings  # noqa: E402
from PySide6.QtGui import QImage, QPainter, QPalette  # noqa: E402

from inspector.checkpoint.loader import LoadedModel, load_checkpoint  # noqa: E402
from inspector.cli.main import main as cli_main  # noqa: E402
from inspector.explanation.explain import explain_sentence  # noqa: E402
from inspector.explanation.rewording import compare_rewording  # noqa: E402
from inspector.measures.analysis import analyze_sentence  # noqa: E402
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL  # noqa: E402
from tests.families import LABELS, build_checkpoint  # noqa: E402

WAIT_MS = 60_000
TEXT = "I need to cancel my crossing to Gullholm tomorrow"
EDITED = "I need to move my crossing to Gullholm tomorrow"
METHODS = (
    "rollout",
    "value_weighted",
    "grad_rollout",
    "integrated_gradients",
    "occlusion",
    "occlusion_log_odds",
)
TOL = dict(rtol=1e-5, atol=1e-7)
"""The window runs the job with one torch thread; reductions may differ in the last bits from the test's threads."""


@pytest.fixture(scope="module")
def classifier(tmp_path_factory, minilm_dir) -> tuple[Path, LoadedModel]:
    """A seeded random 2-layer x 4-head BERT classifier with three ferry intents: (folder, loaded model)."""
    folder = build_checkpoint("bert", tmp_path_factory.mktemp("tiny_explain"), minilm_dir)
    return folder, load_checkpoint(folder)


@pytest.fixture(scope="module")
def tiny_dir(classifier) -> Path:
    return classifier[0]


@pytest.fixture(scope="module")
def tiny(classifier) -> LoadedModel:
    return classifier[1]


@pytest.fixture(scope="module")
def misfire(tiny) -> str:
    """An expected label the model does not predict for TEXT (so the sentence is a misfire)."""
    predicted = analyze_sentence(tiny, TEXT).prediction.label
    return next(label for label in LABELS if label != predicted)


@pytest.fixture(scope="module")
def encoder_dir(tmp_path_factory, minilm_dir) -> Path:
    return build_checkpoint("bert", tmp_path_factory.mktemp("tiny_encoder"), minilm_dir, task="encoder")


@pytest.fixture
def window(qtbot, tmp_path, tiny_dir):
    """The window with the tiny classifier open (fresh settings in tmp_path)."""
    from ui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    open_model(qtbot, win, tiny_dir)
    yield win
    win.runner.wait(30_000)


def open_model(qtbot, win, folder: Path) -> None:
    win.open_model(folder)
    qtbot.waitUntil(
        lambda: win.lm is not None and win.lm.path == Path(folder) and not win.is_busy(), timeout=WAIT_MS
    )


def explain_and_wait(qtbot, win, text: str, expected: str | None, edited: str = ""):
    page = win.explain_page
    win.open_explanation(text, expected, edited)
    qtbot.waitUntil(
        lambda: (
            page.state.ready
            and page.state.result.request.text == text
            and page.state.result.request.edited == edited
            and not win.runner.is_busy("explain")
        ),
        timeout=WAIT_MS,
    )
    return page


def check_lanes(table, core, label: str) -> None:
    """The evidence table of one sentence paints exactly the core's word relevances for ``label``."""
    assert table.labels == core.words
    contrast = core.contrast is not None and label == core.contrast.label
    expected = (core.contrast if contrast else core.evidence(label)).relevances(core)
    for method in METHODS[:5] if contrast else METHODS:
        np.testing.assert_allclose(table.values(method), expected[method], **TOL, err_msg=method)


def test_open_explanation_holds_the_core_numbers_and_the_cli_agrees(
    qtbot, window, tiny_dir, tiny, misfire, capsys
):
    """open_explanation shows the Explain page; its lanes, captions and agreement table equal explain_sentence.

    Reference: inspector.explanation.explain.explain_sentence on the same checkpoint and input (checked in
    tests/test_explain.py against transformers' logits, SciPy's Spearman rho and IG completeness),
    and the command line ``headcount explain --json`` (same defaults: adaptive steps, pad baseline, remove).
    """
    page = explain_and_wait(qtbot, window, TEXT, misfire)
    assert window.pages.currentWidget() is page
    core = explain_sentence(tiny, TEXT, expected=misfire)
    st = page.state
    assert st.roles() == {
        "predicted": core.prediction.label,
        "expected": misfire,
        "contrast": f"{core.prediction.label} vs {misfire}",
    }
    assert page.role_buttons["predicted"].isChecked() and not page.role_buttons["edited"].isVisible()
    for role, label in st.roles().items():
        page.role_buttons[role].click()
        assert st.label() == label
        if role == "contrast":
            ev = core.contrast
            expected_lanes = ev.relevances(core)
            for method in METHODS[:5]:
                np.testing.assert_allclose(page.original.table.values(method), expected_lanes[method], **TOL)
            assert "minus logit of" in page.original.captions.text()
        else:
            check_lanes(page.original.table, core, label)
            ev = core.evidence(label)
        ig = ev.integrated_gradients
        caption = page.original.captions.text()
        assert ig.tolerance == 0.01 and ig.steps_text() in caption
        assert "\u2018pad\u2019" in caption and "removed" in caption
        shown_error = float(caption.split("completeness error ")[1].split()[0].replace("\u2212", "-"))
        assert shown_error == pytest.approx(ig.completeness_error, rel=0.06, abs=5e-8)
        for hint in ev.hints:
            assert hint[1:] in html.unescape(page.original.reading.text())
    # the agreement table: one row per explained label, one column per method
    grid = page.agreement
    assert grid.rowCount() == len(core.labels) + 1 and grid.columnCount() == 4
    for r, ev in enumerate([*core.labels, core.contrast]):
        assert ev.label in grid.verticalHeaderItem(r).text()
        for c, method in enumerate(("rollout", "value_weighted", "grad_rollout", "integrated_gradients")):
            rho = ev.faithfulness[method]
            text = grid.item(r, c).text().split()[0]
            signed = (
                "0.00" if rho is not None and round(rho, 2) == 0 else f"{rho:+.2f}".replace("-", "\u2212")
            )
            assert text == ("n/a" if rho is None else signed)  # two decimals, sign unless it rounds to 0
    assert "misfire" in page.original.prediction.text()
    assert "Jain & Wallace 2019" in html.unescape(page.caution.text()) and page.caution.isVisible()
    # the command line gives the same numbers
    capsys.readouterr()
    assert cli_main(["explain", str(tiny_dir), "--text", TEXT, "--expected", misfire, "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["prediction"]["label"] == st.roles()["predicted"]
    np.testing.assert_allclose(doc["rollout"], st.explanation.rollout, **TOL)
    np.testing.assert_allclose(doc["value_weighted"], st.explanation.value_weighted, **TOL)
    for ev in st.explanation.labels:
        cli = doc["labels"][ev.label]
        np.testing.assert_allclose(cli["grad_rollout"], ev.grad_rollout, **TOL)
        np.testing.assert_allclose(
            cli["integrated_gradients"]["attributions"], ev.integrated_gradients.attributions, **TOL
        )
        np.testing.assert_allclose(cli["occlusion"], ev.occlusion, **TOL)
        for method, rho in ev.faithfulness.items():
            assert cli["faithfulness"][method] == pytest.approx(rho, abs=1e-6)


def test_rewording_matches_compare_rewording(qtbot, window, tiny_dir, tiny, misfire):
    """The rewording shows both sentences' lanes and the per-head change of compare_rewording, for any metric.

    Reference: inspector.explanation.rewording.compare_rewording on the same inputs (metrics from inspector.measures.metrics,
    checked against SciPy's entropy in tests/test_metrics.py); difflib's word alignment.
    """
    page = explain_and_wait(qtbot, window, TEXT, misfire, EDITED)
    for metric in ("entropy", "distance"):
        page.metric_box.setCurrentIndex(page.metric_box.findData(metric))
        cmp = compare_rewording(tiny, TEXT, EDITED, expected=misfire, metric=metric)
        np.testing.assert_allclose(page.head_map.difference, cmp.difference, **TOL)
        shown = page.state.top_heads()
        assert len(shown) == len(cmp.top_heads) == 5
        np.testing.assert_allclose(
            sorted(abs(h.change) for h in shown), sorted(abs(h.change) for h in cmp.top_heads), **TOL
        )
        for h in shown:
            assert f"L{h.layer}H{h.head}" in page.head_list.text()
    label = page.state.label()
    check_lanes(page.original.table, cmp.original, label)
    check_lanes(page.edited_side.table, cmp.edited, label)
    # 'cancel' -> 'move' is the one replaced word, marked on both sides
    assert page.original.table.changed == {TEXT.split().index("cancel")}
    assert page.edited_side.table.changed == {EDITED.split().index("move")}
    edited_pred = cmp.edited.prediction.label
    assert page.role_buttons["edited"].isVisible() == (
        edited_pred not in (cmp.original.prediction.label, misfire)
    )
    assert edited_pred in page.edited_side.prediction.text()
    image = window.grab()  # every view paints without error
    assert image.width() > 600


def test_export_writes_figure_and_csv_with_the_page_numbers(
    qtbot, window, tiny_dir, tiny, misfire, tmp_path, monkeypatch
):
    """Ctrl+E on the Explain page writes a valid PNG, SVG and PDF and a CSV of every word's relevances.

    Reference: PNG/SVG/PDF signatures (PNG spec, W3C SVG, ISO 32000 header) parsed by Pillow and
    ElementTree; the CSV's numbers against compare_rewording on the same inputs.
    """
    from ui.explain.page import explanation_export
    from ui.widgets import export as export_actions

    page = explain_and_wait(qtbot, window, TEXT, misfire, EDITED)
    target = tmp_path / "explained.png"
    monkeypatch.setattr(
        export_actions.QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(target), ""))
    )
    window.export_focused()  # the Ctrl+E action: the current page exports what it shows
    qtbot.waitUntil(lambda: target.with_suffix(".csv").is_file() and not window.is_busy(), timeout=WAIT_MS)
    with Image.open(target) as img:
        img.verify()
    job = explanation_export(page.state)
    for suffix in (".svg", ".pdf"):
        export_actions.run_export(job, target.with_suffix(suffix))
    assert ET.fromstring(target.with_suffix(".svg").read_bytes()).tag.endswith("svg")
    assert target.with_suffix(".pdf").read_bytes().startswith(b"%PDF")
    with target.with_suffix(".csv").open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    cmp = compare_rewording(tiny, TEXT, EDITED, expected=misfire)
    for side, core in (("original", cmp.original), ("edited", cmp.edited)):
        mine = [r for r in rows if r["side"] == side]
        assert [r["word"] for r in mine] == core.words
        assert {(r["text"], r["predicted"], r["expected"]) for r in mine} == {
            (core.text, core.prediction.label, misfire)
        }
        for label in cmp.labels:
            table = core.evidence(label).relevances(core)
            for method in METHODS:
                column = [float(r[f"{label}:{method}"]) for r in mine]
                np.testing.assert_allclose(column, table[method], **TOL, err_msg=f"{side} {label} {method}")


def test_bare_encoder_gives_a_readable_message_and_the_page_stays_usable(
    qtbot, window, encoder_dir, tiny_dir, tiny
):
    """A bare encoder has no prediction: the page says so in words, and works again once a classifier reopens.

    Reference: inspector.explanation.explain.require_classifier's message; explain_sentence for the classifier afterwards.
    """
    open_model(qtbot, window, encoder_dir)
    page = window.explain_page
    window.open_explanation(TEXT, None)
    assert window.pages.currentWidget() is page
    assert "bare encoder" in page.original.table.note and "classifier" in page.original.table.note
    assert not page.explain_button.isEnabled() and not window.sentence_page.explain_action.isEnabled()
    assert not page.state.ready
    page.grab()
    open_model(qtbot, window, tiny_dir)
    qtbot.waitUntil(lambda: page.state.ready and not window.runner.is_busy("explain"), timeout=WAIT_MS)
    check_lanes(page.original.table, explain_sentence(tiny, TEXT), page.state.label())
    assert window.sentence_page.explain_action.isEnabled()


def test_explain_action_opens_the_sentence_page_sentence(qtbot, window, tiny_dir, misfire):
    """'Explain this sentence' (Ctrl+Shift+X) carries the sentence page's text and expected label over.

    Reference: the shortcut table in ui/main_window.py (common practice, no source).
    """
    window.open_sentence(TEXT, misfire)
    qtbot.waitUntil(lambda: window.sentence_page.state.ready and not window.is_busy(), timeout=WAIT_MS)
    action = window.sentence_page.explain_action
    assert action.shortcut().toString() == "Ctrl+Shift+X"
    action.trigger()
    page = window.explain_page
    assert window.pages.currentWidget() is page
    qtbot.waitUntil(lambda: page.state.ready and not window.runner.is_busy("explain"), timeout=WAIT_MS)
    assert page.entry.text() == TEXT and page.expected_label() == misfire
    assert page.state.explanation.expected == misfire


def test_newest_request_wins(qtbot, window, tiny_dir, misfire):
    """Two quick requests: only the second one's answer is shown.

    Reference: the latest-only channel rule of ui.widgets.worker.JobRunner (common practice, no source).
    """
    page = window.explain_page
    window.open_explanation(TEXT, misfire)
    window.open_explanation(EDITED, None)
    qtbot.waitUntil(lambda: not window.runner.is_busy("explain"), timeout=WAIT_MS)
    assert page.state.ready and page.state.explanation.text == EDITED
    assert page.state.explanation.expected is None and set(page.state.roles()) == {"predicted"}


def test_signed_bars_put_the_sign_on_the_side(qtbot):
    """Positive values draw to the right of the zero line, negative ones to the left, length ~ |value| / peak.

    Reference: the signed rendering documented in ui/signed.py (our design; geometry is common practice, no source).
    """
    from ui.widgets.signed import draw_signed_bar

    image = QImage(200, 20, QImage.Format.Format_ARGB32)
    painter = QPainter(image)
    rect = QRectF(0, 0, 200, 20)
    right = draw_signed_bar(painter, rect, 0.5, 1.0, QPalette())
    left = draw_signed_bar(painter, rect, -1.0, 1.0, QPalette())
    painter.end()
    assert right.left() == pytest.approx(100) and right.width() == pytest.approx(0.5 * 99)
    assert left.right() == pytest.approx(100) and left.width() == pytest.approx(99)


def test_sample_model_misfire(qtbot, window):
    """On the bundled sample model, a misrouted evaluation sentence explained in the window equals explain_sentence.

    Reference: inspector.explanation.explain.explain_sentence on the same checkpoint and input.
    """
    if not (SAMPLE_MODEL / "config.json").is_file():
        pytest.skip("the bundled sample model has not been trained yet")
    lm = load_checkpoint(SAMPLE_MODEL)
    with SAMPLE_EVAL.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))[:300]
    found = next(
        (
            (r["text"], r["label"])
            for r in rows
            if analyze_sentence(lm, r["text"]).prediction.label != r["label"]
        ),
        None,
    )
    if found is None:
        pytest.skip("the sample model routes the first 300 evaluation sentences correctly")
    text, expected = found
    open_model(qtbot, window, SAMPLE_MODEL)
    page = explain_and_wait(qtbot, window, text, expected)
    core = explain_sentence(lm, text, expected=expected)
    for role, label in page.state.roles().items():
        page.set_role(role)
        check_lanes(page.original.table, core, label)


def test_explaining_while_the_sentence_page_analyses(qtbot, window, tiny, misfire):
    """An explanation and the sentence page's analysis requested together both finish with the core's numbers.

    Both channels run the same torch model; capture hooks sit on its modules, so the jobs must take turns
    (ui.widgets.worker.MODEL_LOCK). Reference: analyze_sentence and explain_sentence on the same inputs.
    """
    for text in (EDITED, TEXT) * 3:
        window.open_explanation(text, misfire)
        window.analyse(text)
        qtbot.waitUntil(lambda: not window.is_busy(), timeout=WAIT_MS)
        assert window.message_bar.text() == ""
    analysis = window.sentence_page.state.analysis
    assert analysis is not None and analysis.text == TEXT
    np.testing.assert_allclose(analysis.attention, analyze_sentence(tiny, TEXT).attention, **TOL)
    page = window.explain_page
    assert page.state.ready and page.state.explanation.text == TEXT
    check_lanes(page.original.table, explain_sentence(tiny, TEXT, expected=misfire), page.state.label())


def test_a_long_explanation_shows_its_progress_and_a_newer_request_or_esc_stops_it(
    qtbot, window, monkeypatch
):
    """While an explanation runs the page says which stage it is in (occlusion counted in words); a newer
    request stops the older one at its next step, and Esc stops the one running; the views keep the last
    finished result (identity, no source needed: the real steps are checked in tests/test_explain.py).
    """
    import threading
    import time

    from PySide6.QtCore import Qt

    import ui.explain.page as page_module

    real = page_module.compute_explanation
    release = threading.Event()
    finished_steps: list[str] = []

    def slow(lm, request, on_step=None):
        if request.text == "slow one":
            for done in range(1, 200):
                on_step("occlusion", done, 199)  # raises once the request is replaced or stopped
                release.wait(0.02)
            finished_steps.append(request.text)
        return real(lm, request, on_step)

    monkeypatch.setattr(page_module, "compute_explanation", slow)
    page = window.explain_page
    window.show_page(page)
    window.open_explanation("slow one", None, "")
    qtbot.waitUntil(lambda: "occlusion" in page.busy_note.text(), timeout=WAIT_MS)
    assert "of 199 words" in page.busy_note.text() and "Esc stops" in page.busy_note.text()
    started = time.perf_counter()
    explain_and_wait(qtbot, window, TEXT, None)  # replaces the slow one, which stops at its next step
    assert time.perf_counter() - started < 3.0  # not the 4 s the slow one would take to finish
    assert finished_steps == [] and page.state.result.request.text == TEXT
    assert page.busy_note.text() == ""

    window.open_explanation("slow one", None, "")
    qtbot.waitUntil(lambda: "occlusion" in page.busy_note.text(), timeout=WAIT_MS)
    qtbot.keyClick(page.entry, Qt.Key.Key_Escape)
    qtbot.waitUntil(lambda: not window.runner.is_busy("explain"), timeout=WAIT_MS)
    assert finished_steps == [] and page.state.result.request.text == TEXT  # the views kept the last result
    assert page.busy_note.text() == ""
