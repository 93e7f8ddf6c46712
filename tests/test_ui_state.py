"""The window's Qt-free page state: selection, query token, token views and relevance."""

from __future__ import annotations

import numpy as np
import pytest

from inspector.checkpoint.tokens import apply_view, make_view
from inspector.measures.analysis import analyze_sentence
from ui.sentence.state import SentencePage, arc_links, classification_index, metric_range

TEXT = "rebooking the kayak crossing"


@pytest.fixture(scope="module")
def analysis(minilm):
    return analyze_sentence(minilm, TEXT)


def test_selection_clamps_and_query_survives_word_view(analysis):
    """Moving past the edges stops there; the query token keeps its word when pieces merge.

    Reference: all-MiniLM-L6-v2 has 6 layers x 12 heads (its config.json); WordPiece splits the
    test word into several '##' pieces (the checkpoint's vocab.txt).
    """
    page = SentencePage()
    page.set_analysis(analysis)
    page.move(-3, -3)
    assert (page.layer, page.head) == (0, 0)
    page.move(100, 100)
    assert (page.layer, page.head) == (5, 11)
    pieces = analysis.tokens
    split = next(i for i, t in enumerate(pieces) if t.startswith("##"))
    page.set_query(split)
    page.set_option("words", True)
    view = page.view()
    assert split in view.groups[page.query_index()]
    page.set_option("hide_special", True)
    assert split in page.view().groups[page.query_index()]
    assert page.view().labels[page.query_index()] == view.labels[page.query_index() + 1]


def test_relevance_sums_pieces_and_renormalises_without_specials(analysis):
    """Word relevance is the sum of its pieces' rollout; hiding specials renormalises to 1.

    Reference: attention rollout (Abnar & Zuidema 2020) from the core; sum-over-pieces rule of
    inspector.checkpoint.tokens (Clark et al. 2019).
    """
    page = SentencePage()
    page.set_analysis(analysis)
    page.set_option("words", True)
    rel = page.relevance()
    row = analysis.rollout[classification_index(analysis.special)]
    expected = np.array([row[g].sum() for g in page.view().groups])
    np.testing.assert_allclose(rel.values, expected, atol=1e-12)
    assert rel.values.sum() == pytest.approx(1.0)
    page.set_option("hide_special", True)
    rel = page.relevance()
    assert rel.values.sum() == pytest.approx(1.0)
    assert not rel.special.any()


def test_head_matrices_follow_the_token_view(analysis):
    """The mosaic's matrices equal apply_view of the core's attention for the chosen view.

    Reference: inspector.checkpoint.tokens.apply_view (core), rows of attention sum to 1 (softmax).
    """
    page = SentencePage()
    page.set_analysis(analysis)
    np.testing.assert_array_equal(page.head_matrices(), analysis.attention)
    page.set_option("words", True)
    page.set_option("hide_special", True)
    view = make_view(analysis.tokens, analysis.special, analysis.word_ids, words=True, drop_special=True)
    np.testing.assert_allclose(page.head_matrices(), apply_view(analysis.attention, view), atol=1e-6)
    np.testing.assert_allclose(page.head_matrices().sum(-1), 1.0, atol=1e-5)


def test_arc_links_and_metric_ranges():
    """Arcs skip self-links and light links; shares use [0, 1], unbounded metrics their maximum.

    Reference: closed forms on a hand-made 3 x 3 matrix.
    """
    m = np.array([[0.5, 0.49, 0.01], [0.2, 0.3, 0.5], [0.0, 0.9, 0.1]])
    assert arc_links(m, 0, "query", 0.0) == [(0, 1, 0.49)]
    assert arc_links(m, 0, "threshold", 0.4) == [(0, 1, 0.49), (1, 2, 0.5), (2, 1, 0.9)]
    assert metric_range("prev_share", np.array([0.2, 0.3])) == (0.0, 1.0)
    assert metric_range("entropy", np.array([0.5, 2.5])) == (0.0, 2.5)
