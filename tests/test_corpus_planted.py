"""Planted ground truth by weight surgery on a real checkpoint (all-MiniLM-L6-v2 + seeded head).

* Head 7 of layer 2 gets head 3's query and key weights: their attention is then
  identical, so that pair must come out as the most similar pair (JS = 0).
* Head 5 of layer 4 gets its slice of the output projection zeroed: it then has no
  effect on anything, so its importance must be 0 and removing it must leave every
  prediction (indeed every logit) unchanged.
"""

from __future__ import annotations

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import HeadGates
from inspector.corpus.batching import encode_set
from inspector.corpus.pruning import importance_order
from inspector.corpus.run import importance_pass, label_indices, predict, scan, simulate_pruning
from tests.corpus_models import load_with_set, shared_minilm_classifier

COPY_LAYER, SOURCE, TARGET = 2, 3, 7
DEAD_LAYER, DEAD = 4, 5


@pytest.fixture(scope="module")
def planted(tmp_path_factory):
    lm, data = load_with_set(shared_minilm_classifier(), tmp_path_factory.mktemp("data"))
    d = lm.model.config.hidden_size // lm.num_heads
    src, dst = slice(SOURCE * d, (SOURCE + 1) * d), slice(TARGET * d, (TARGET + 1) * d)
    with torch.no_grad():
        part = lm.parts[COPY_LAYER]
        for lin in (part.query, part.key):
            lin.weight[dst] = lin.weight[src]
            lin.bias[dst] = lin.bias[src]
        lm.parts[DEAD_LAYER].out_proj.weight[:, DEAD * d : (DEAD + 1) * d] = 0.0
    encoded = encode_set(lm, data.texts)
    return lm, data, encoded, label_indices(lm, data)


def test_copied_query_key_pair_is_the_most_similar_pair(planted):
    """The surgically duplicated head pair has the lowest mean JS divergence and forms a group.

    Reference: construction (identical Q and K weights give identical softmax(QK^T/sqrt d)
    rows in transformers' BERT attention, hence JS = 0 by Lin 1991).
    """
    lm, data, encoded, _ = planted
    red = scan(lm, data, encoded=encoded, batch_size=5, js_rows=None).redundancy
    best = red.pairs()[0]
    assert {(best.layer_a, best.head_a), (best.layer_b, best.head_b)} == {
        (COPY_LAYER, SOURCE),
        (COPY_LAYER, TARGET),
    }
    assert best.js_divergence < 1e-6
    assert red.pairs()[1].js_divergence > 100 * max(best.js_divergence, 1e-9)
    assert any({(COPY_LAYER, SOURCE), (COPY_LAYER, TARGET)} <= set(g) for g in red.groups)
    assert red.rows_compared == red.rows_total == int(encoded.lengths.sum())


def test_silenced_head_has_zero_importance_and_removing_it_changes_nothing(planted):
    """Zeroed W_O slice: importance exactly 0; gate 0 leaves every logit; a live head's gate does not.

    Reference: construction (a head whose output-projection columns are zero contributes
    nothing, so d loss / d gate = 0 and switching it off is a no-op), on transformers'
    BertForSequenceClassification forward pass.
    """
    lm, data, encoded, gold = planted
    imp = importance_pass(lm, encoded, gold, batch_size=5)
    assert imp.raw[DEAD_LAYER, DEAD] == 0.0
    assert imp.normalized[DEAD_LAYER, DEAD] == 0.0
    assert (np.delete(imp.raw.ravel(), DEAD_LAYER * lm.num_heads + DEAD) > 0).all()
    assert importance_order(imp.normalized)[0] == (DEAD_LAYER, DEAD)

    batch = encoded.batch(np.arange(len(encoded)))

    def logits(gates):
        with torch.no_grad(), HeadGates(lm, torch.as_tensor(gates, dtype=torch.float32)):
            return lm.model(**batch.inputs).logits.numpy()

    full = np.ones((lm.num_layers, lm.num_heads))
    dead = full.copy()
    dead[DEAD_LAYER, DEAD] = 0
    live = full.copy()
    live[DEAD_LAYER, DEAD - 1] = 0
    np.testing.assert_allclose(logits(dead), logits(full), atol=1e-6)
    assert np.abs(logits(live) - logits(full)).max() > 1e-4  # the check can fail

    _, before = predict(lm, encoded.sorted_batches(5), encoded)
    _, after = predict(lm, encoded.sorted_batches(5), encoded, gates=dead)
    np.testing.assert_array_equal(before, after)
    curve = simulate_pruning(
        lm, encoded, gold, {"importance": importance_order(imp.normalized)[:3]}, batch_size=5
    )[0]
    assert curve.steps == [0, 1, 2, 3]
    assert curve.accuracy[1] == curve.accuracy[0]
