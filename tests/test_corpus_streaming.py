"""Streaming aggregation: running moments and batched torch metrics against per-sentence numpy."""

from __future__ import annotations

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import run
from inspector.corpus.run import scan
from inspector.corpus.streaming import RunningMoments
from inspector.measures import metrics
from inspector.measures.metrics import METRIC_NAMES, head_metrics
from tests.corpus_models import load_with_set, shared_minilm_classifier


@pytest.fixture(scope="module")
def minilm_classifier(tmp_path_factory):
    return load_with_set(shared_minilm_classifier(), tmp_path_factory.mktemp("data"))


def test_running_moments_equal_numpy_mean_and_std():
    """Chan et al. pairwise updates over uneven batches give numpy's mean and std (ddof=0).

    Reference: numpy.mean / numpy.std over the concatenated samples; Chan, Golub &
    LeVeque (1979) for the update being exact.
    """
    rng = np.random.default_rng(0)
    parts = [rng.normal(3.0, 2.0, size=(k, 4, 5)) * 1e3 for k in (1, 7, 3, 30, 2)]
    rm = RunningMoments((4, 5))
    for p in parts:
        rm.update(p)
    rm.update(np.zeros((0, 4, 5)))
    allx = np.concatenate(parts)
    assert rm.count == len(allx)
    np.testing.assert_allclose(rm.mean, allx.mean(0), rtol=1e-12)
    np.testing.assert_allclose(rm.std, allx.std(0), rtol=1e-10)


@pytest.mark.parametrize("seed", [0, 1])
def test_head_metrics_equal_the_per_metric_functions(seed):
    """head_metrics (pair-weight contraction for the linear metrics) equals each metric's own function.

    Reference: the single-metric functions of inspector.measures.metrics (checked against closed
    forms in test_metrics.py), on random masked attention with special tokens.
    """
    rng = np.random.default_rng(seed)
    att = rng.random((3, 4, 9, 9)) ** 2
    att /= att.sum(-1, keepdims=True)
    mask = np.ones((3, 4, 9), dtype=bool)
    mask[..., 6 + seed :] = False
    special = rng.random((3, 4, 9)) < 0.3
    got = head_metrics(att, special, mask)
    expected = {
        "entropy": metrics.head_entropy(att, mask),
        "entropy_normalized": metrics.head_entropy(att, mask, normalize=True),
        "distance": metrics.mean_distance(att, mask),
        "special_share": metrics.share_on(att, special, mask),
        "self_share": metrics.offset_share(att, 0, mask),
        "prev_share": metrics.offset_share(att, -1, mask),
        "next_share": metrics.offset_share(att, 1, mask),
        "confidence": metrics.confidence(att, mask),
    }
    for name in METRIC_NAMES:
        np.testing.assert_allclose(got.get(name), expected[name], rtol=1e-12, atol=1e-15, err_msg=name)
        as_torch = head_metrics(torch.from_numpy(att), torch.from_numpy(special), torch.from_numpy(mask))
        np.testing.assert_allclose(as_torch.get(name).numpy(), expected[name], rtol=1e-12, atol=1e-15)


def test_torch_metrics_on_padded_batch_equal_numpy_per_sentence(minilm_classifier):
    """The torch path of inspector.measures.metrics on a padded batch equals its numpy path per unpadded sentence.

    Reference: the numpy implementation (tested against closed forms in test_metrics.py)
    applied to each sentence's attention without padding, as captured from transformers.
    """
    lm, data = minilm_classifier
    texts = [data.texts[0], data.texts[7], data.texts[13]]  # different lengths -> padding
    cap = run(lm, texts)
    att = torch.from_numpy(cap.attention)
    mask = cap.batch.attention_mask.bool()
    special = torch.zeros_like(mask)
    for b, idx in enumerate(cap.batch.real_index):
        special[b, torch.from_numpy(idx)] = torch.from_numpy(cap.batch.special[b])
    batched = head_metrics(att, special[:, None, None, :], mask[:, None, None, :])
    for b in range(len(texts)):
        ref = head_metrics(cap.sentence(b), cap.batch.special[b])
        for name in METRIC_NAMES:
            np.testing.assert_allclose(
                batched.get(name)[b].numpy(), ref.get(name), rtol=2e-5, atol=2e-6, err_msg=name
            )


def test_scan_means_and_spreads_equal_the_non_streaming_reference(minilm_classifier):
    """Per-head mean and std over utterances from the streaming scan (sorted batches of 4).

    Reference: numpy mean/std over the per-sentence numpy metrics of every utterance,
    each captured alone (no padding) from transformers' forward pass.
    """
    lm, data = minilm_classifier
    per_sentence = {name: [] for name in METRIC_NAMES}
    for text in data.texts:
        cap = run(lm, [text])
        m = head_metrics(cap.sentence(0), cap.batch.special[0])
        for name in METRIC_NAMES:
            per_sentence[name].append(m.get(name))
    stats = scan(lm, data, batch_size=4, js_rows=8).heads
    assert stats.count == len(data)
    for name in METRIC_NAMES:
        ref = np.array(per_sentence[name])
        np.testing.assert_allclose(stats.mean[name], ref.mean(0), rtol=1e-4, atol=1e-6, err_msg=name)
        np.testing.assert_allclose(stats.std[name], ref.std(0), rtol=1e-3, atol=1e-5, err_msg=name)
