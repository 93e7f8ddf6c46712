"""Piece and word views of the token axis."""

from __future__ import annotations

import numpy as np
import pytest

from inspector.checkpoint.tokens import apply_view, make_view
from inspector.measures.analysis import analyze_sentence


def test_word_view_rule_on_a_hand_example():
    """Reference: Clark et al. 2019, sec. 4.1 (sum over attended-to pieces, mean over attending pieces);
    arithmetic by hand: pieces [CLS] lug ##gage [SEP], words [CLS] luggage [SEP].
    Row 'luggage' = mean of the rows of 'lug' and '##gage'; column 'luggage' = sum of their columns."""
    tokens = ["[CLS]", "lug", "##gage", "[SEP]"]
    special = np.array([True, False, False, True])
    word_ids = [None, 0, 0, None]
    a = np.array(
        [
            [0.4, 0.2, 0.2, 0.2],
            [0.1, 0.5, 0.3, 0.1],
            [0.3, 0.3, 0.2, 0.2],
            [0.25, 0.25, 0.25, 0.25],
        ]
    )
    view = make_view(tokens, special, word_ids, words=True)
    assert view.labels == ["[CLS]", "luggage", "[SEP]"]
    merged = apply_view(a, view)
    expected = np.array(
        [
            [0.4, 0.4, 0.2],
            [0.2, 0.65, 0.15],  # mean of [.1, .8, .1] and [.3, .5, .2]
            [0.25, 0.5, 0.25],
        ]
    )
    np.testing.assert_allclose(merged, expected, atol=1e-12)
    dropped = apply_view(a, make_view(tokens, special, word_ids, words=True, drop_special=True))
    np.testing.assert_allclose(dropped, [[1.0]], atol=1e-12)


def test_views_on_real_sentence_keep_rows_stochastic(minilm):
    """Reference: definition of the merge rule (rows still sum to 1); all-MiniLM-L6-v2 WordPiece pieces."""
    result = analyze_sentence(minilm, "Unaccompanied youngsters onboard the catamaran?")
    assert any(t.startswith("##") for t in result.tokens)
    for words in (False, True):
        for drop in (False, True):
            view = make_view(result.tokens, result.special, result.word_ids, words=words, drop_special=drop)
            merged = apply_view(result.attention, view)
            assert merged.shape[-1] == len(view.labels)
            np.testing.assert_allclose(merged.sum(-1), 1.0, atol=1e-5)
            assert not drop or not view.special.any()


@pytest.mark.parametrize("drop_special", [False, True])
def test_grouped_sums_equal_the_dense_matrix_products(drop_special):
    """apply_view's rank-by-rank gathers equal ``W = Q A K`` with dense 0/1 and 1/|w| matrices.

    Reference: the word-view formula in apply_view's docstring (Clark et al. 2019, sec. 4.1),
    evaluated literally here with numpy matrix products in float64, rows renormalised when
    tokens are dropped; words of one to five pieces, special tokens at both ends.
    """
    rng = np.random.default_rng(5)
    sizes = [1, 3, 1, 1, 2, 5, 1, 2, 1]
    n = sum(sizes) + 2
    special = np.zeros(n, dtype=bool)
    special[[0, n - 1]] = True
    word_ids: list[int | None] = [None]
    for w, size in enumerate(sizes):
        word_ids += [w] * size
    word_ids.append(None)
    tokens = [f"t{i}" for i in range(n)]
    view = make_view(tokens, special, word_ids, words=True, drop_special=drop_special)
    att = rng.random((2, 3, n, n)).astype(np.float32)
    att /= att.sum(-1, keepdims=True)
    q = np.zeros((len(view.groups), n))
    k = np.zeros((n, len(view.groups)))
    for w, g in enumerate(view.groups):
        q[w, g] = 1.0 / len(g)
        k[g, w] = 1.0
    expected = q @ att.astype(np.float64) @ k
    if drop_special:
        expected /= expected.sum(-1, keepdims=True)
    got = apply_view(att, view)
    assert got.dtype == np.float32 and got.shape == expected.shape
    np.testing.assert_allclose(got, expected, rtol=2e-6, atol=1e-7)
    pieces = make_view(tokens, special, word_ids, words=False, drop_special=drop_special)
    kept = [g[0] for g in pieces.groups]
    sub = att.astype(np.float64)[..., kept, :][..., kept]
    np.testing.assert_allclose(apply_view(att, pieces), sub / sub.sum(-1, keepdims=True), rtol=2e-6)
