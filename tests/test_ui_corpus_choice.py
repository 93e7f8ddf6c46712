"""The Corpus page after a run: move along the curves, regroup near-duplicates, click a point, use the mask.

Nothing here runs the model again: every choice is read from the curves and the
divergence matrix the run stored. The references are a fresh corpus run with the
other setting (the core's own rule), SciPy's complete-linkage clustering, and the
masked model's predictions.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

pytest.importorskip("pytestqt")

from PySide6.QtCore import Qt  # noqa: E402

from inspector.checkpoint.masks import HeadMask  # noqa: E402
from inspector.corpus.dataset import read_labelled  # noqa: E402
from inspector.corpus.run import CorpusReport, run_corpus  # noqa: E402
from inspector.corpus.settings import CorpusSettings  # noqa: E402
from inspector.formatting import percent  # noqa: E402
from inspector.measures.analysis import predict_sentence  # noqa: E402
from tests import test_ui_corpus  # noqa: E402
from tests.corpus_models import UTTERANCES, write_csv  # noqa: E402
from ui.corpus.state import (  # noqa: E402
    choose_by_count,
    choose_by_tolerance,
    find_on_curves,
    provenance,
    with_choice,
    with_threshold,
)

WAIT_MS = 60_000
classifier = test_ui_corpus.classifier
"""The tiny classifier fixture of the corpus page tests."""
window = test_ui_corpus.window
"""The window fixture of the corpus page tests (the tiny classifier open)."""


@pytest.fixture(scope="module")
def data(classifier, tmp_path_factory):
    path = write_csv(tmp_path_factory.mktemp("choice_data") / "set.csv", UTTERANCES)
    return read_labelled(path, known_labels=classifier[1].labels)


@pytest.fixture(scope="module")
def report(classifier, data) -> CorpusReport:
    return run_corpus(
        classifier[1], data, CorpusSettings(orders=("importance", "random"), max_drop=0.0, prune_every=1)
    )


def test_tolerance_along_the_curve_gives_what_a_new_run_with_that_tolerance_chooses(classifier, data, report):
    """Reference: run_corpus itself with the other tolerance (its rule, Michel et al. 2019 curves), run again
    from scratch: moving the tolerance on the stored curve must choose the same heads and accuracy."""
    rerun = run_corpus(
        classifier[1], data, CorpusSettings(orders=("importance", "random"), max_drop=0.2, prune_every=1)
    )
    choice = choose_by_tolerance(report.pruning, "importance", 0.2)
    assert list(choice.heads) == rerun.pruning.removed
    assert choice.accuracy == pytest.approx(rerun.pruning.accuracy_after)
    assert choice.max_drop == 0.2


def test_a_count_on_the_curve_is_the_masked_models_accuracy(classifier, data, report):
    """Reference: the masked model's prediction of every utterance, one at a time (predict_sentence with the
    chosen mask; gates checked against weight surgery in tests/test_masks.py)."""
    lm = classifier[1]
    for order in ("importance", "random"):
        choice = choose_by_count(report.pruning, order, 5)
        assert choice.removed == 5 and list(choice.heads) == report.pruning.curve(order).order[:5]
        right = [
            predict_sentence(lm, t, mask=choice.mask).label == y for t, y in zip(data.texts, data.labels)
        ]
        assert choice.accuracy == pytest.approx(np.mean(right))
        assert find_on_curves(report.pruning, choice.mask).heads == choice.heads


def test_regrouping_uses_the_stored_divergences(report):
    """Reference: SciPy's complete-linkage clustering of the stored divergence matrix, cut at each threshold
    (scipy.cluster.hierarchy.linkage(method='complete') + fcluster(criterion='distance'))."""
    from scipy.cluster.hierarchy import fcluster, linkage
    from scipy.spatial.distance import squareform

    js = report.redundancy.js
    sym = (js + js.T) / 2
    np.fill_diagonal(sym, 0.0)
    tree = linkage(squareform(sym, checks=False), method="complete")
    for t in (0.0, float(np.median(sym[sym > 0])), 1.0):
        labels = fcluster(tree, t=t, criterion="distance")
        expected = sorted(
            sorted(g)
            for g in ([i for i in range(len(js)) if labels[i] == c] for c in set(labels))
            if len(g) > 1
        )
        regrouped = with_threshold(report, t).redundancy
        assert sorted(sorted(l * 4 + h for l, h in g) for g in regrouped.groups) == expected
        assert regrouped.threshold == t and regrouped.js is report.redundancy.js


def test_the_page_moves_along_the_curves_without_running_the_model(qtbot, window, report, tmp_path):
    """Reference: the Qt-free choosers above (checked against a new run and the masked model) and the
    prune_mask.json format; a click on a plotted point, the tolerance and the heads spin box all choose,
    and the chosen heads go to the sentence page and into the saved file."""
    page = window.corpus_page
    window.show_page(page)
    page.show_report(report)
    page.tabs.setCurrentIndex(1)
    calls = []
    page.runner.busy_changed.connect(lambda channel, busy: calls.append(channel))

    page.tolerance.setValue(20.0)
    expected = choose_by_tolerance(report.pruning, "importance", 0.2)
    assert page.report.pruning.removed == list(expected.heads)
    assert f"remove {expected.removed} of 8 heads" in page.mask_label.text()

    page.order_box.setCurrentText("random")
    page.count_box.setValue(3)
    expected = choose_by_count(report.pruning, "random", 3)
    assert page.report.pruning.removed == list(expected.heads)
    assert page.report.pruning.accuracy_after == expected.accuracy

    plot = page.plot
    target = plot.points_of(0, 2)  # the importance curve's third measured point
    c, k = plot.hit_at(target.x(), target.y())  # the nearest point (another curve may lie on top of it)
    assert k == 2
    qtbot.mouseClick(plot, Qt.MouseButton.LeftButton, pos=target.toPoint())
    curve = report.pruning.curves[c]
    assert page.report.pruning.mask_order == curve.order_name
    assert page.report.pruning.removed == curve.order[: curve.steps[k]]
    assert page.count_box.value() == curve.steps[k] and page.order_box.currentText() == curve.order_name
    assert plot.chosen_point() == (c, k)

    page.threshold.setValue(1.0)  # every head within 1 bit of every other: one group of all 8
    assert len(page.report.redundancy.groups) == 1 and len(page.report.redundancy.groups[0]) == 8
    assert "1 near-duplicate group" in page.groups.text()
    assert calls == []  # nothing was run again

    chosen = HeadMask.of(curve.order[: curve.steps[k]])
    saved = page.save_mask(tmp_path / "chosen.json")
    assert json.loads(saved.read_text()) == chosen.to_json()

    out = tmp_path / "pruned"
    page.masks.write_pruned(window.lm, page.chosen_mask(), out, provenance=provenance(page.report))
    qtbot.waitUntil(lambda: (out / "PRUNED.md").is_file() and not window.is_busy(), timeout=WAIT_MS)
    note = (out / "PRUNED.md").read_text()
    assert (
        f"{percent(curve.accuracy[0])} with every head, {percent(curve.accuracy[k])} with these heads off"
        in note
    )
    assert json.loads((out / "prune_mask.json").read_text()) == chosen.to_json()

    with qtbot.waitSignal(window.sentence_page.mask_changed, timeout=WAIT_MS):
        page.try_mask_button.click()
    assert window.sentence_page.state.mask.heads == chosen.heads
    assert window.pages.currentWidget() is window.sentence_page


def test_a_loaded_mask_is_found_on_the_curves_or_shown_as_it_is(qtbot, window, report, tmp_path):
    """Reference: the prune_mask.json the run itself would write for that point (with_choice + mask_json)."""
    page = window.corpus_page
    page.show_report(report)
    point = choose_by_count(report.pruning, "random", 4)
    page.load_mask(point.mask)
    assert page.report.pruning.mask == with_choice(report, point).pruning.mask
    assert page.order_box.currentText() == "random" and page.count_box.value() == 4
    odd = HeadMask.of([(0, 0), (1, 3)])
    if find_on_curves(report.pruning, odd) is None:
        page.load_mask(odd)
        assert page.chosen_mask().heads == odd.heads
        assert "not a point of these curves" in page.mask_label.text()
