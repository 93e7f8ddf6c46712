"""Value-weighted attention and head gates on the real MiniLM checkpoint."""

from __future__ import annotations

import copy

import numpy as np
import torch

from inspector.checkpoint.capture import HeadGates, encode, run
from inspector.measures.norms import (
    attention_output,
    layer_value_weighted,
    transformed_values,
    value_weighted_attention,
)

TEXTS = ["Is the cafe open on the night boat?", "two adults and a van to Skerrin please"]


def test_value_decomposition_rebuilds_output_projection(minilm):
    """Reference: Kobayashi et al. 2020, eq. (4)-(5): sum_h sum_j a_ij f_h(x_j) + b_O equals the output of W_O,
    checked against the dense layer's real output captured on all-MiniLM-L6-v2."""
    outputs: list[torch.Tensor] = []
    handles = [p.out_proj.register_forward_hook(lambda m, i, o: outputs.append(o)) for p in minilm.parts]
    try:
        cap = run(minilm, TEXTS, values=True)
    finally:
        for h in handles:
            h.remove()
    for b in range(2):
        idx = cap.batch.real_index[b]
        att = cap.sentence(b).astype(np.float64)
        values = cap.values[b][:, idx].astype(np.float64)
        rebuilt = attention_output(att, values, cap.out_weight.astype(np.float64), cap.out_bias)
        real = np.stack([o[b, idx].numpy() for o in outputs])
        np.testing.assert_allclose(rebuilt, real, atol=2e-5, rtol=0)


def test_value_weighted_norms_are_consistent(minilm):
    """Reference: Kobayashi et al. 2020, sec. 3: ||a f(x)|| = a ||f(x)|| for a >= 0, and the triangle
    inequality ||sum_h a f_h|| <= sum_h ||a f_h|| (common practice, no source)."""
    cap = run(minilm, TEXTS[:1], values=True)
    att = cap.sentence(0).astype(np.float64)
    values = cap.values[0].astype(np.float64)
    per_head = value_weighted_attention(att, values, cap.out_weight.astype(np.float64))
    per_layer = layer_value_weighted(att, values, cap.out_weight.astype(np.float64))
    assert per_head.shape == att.shape and per_layer.shape == (6, att.shape[-1], att.shape[-1])
    assert np.all(per_layer <= per_head.sum(1) + 1e-9)
    assert np.all(per_head[att == 0] == 0)


def test_value_weighted_equals_norms_of_the_vectors(minilm):
    """Reference: Kobayashi et al. 2020, sec. 3 and eq. (6), evaluated literally on all-MiniLM-L6-v2: build
    a_ij f_h(x_j) and sum_h a_ij f_h(x_j) as vectors and take numpy's 2-norm; the Gram-matrix route must agree."""
    cap = run(minilm, TEXTS[:1], values=True)
    att = cap.sentence(0).astype(np.float64)
    values = cap.values[0].astype(np.float64)
    weight = cap.out_weight.astype(np.float64)
    f = transformed_values(values, weight)  # (layers, heads, n, hidden)
    per_head = np.linalg.norm(att[..., None] * f[:, :, None, :, :], axis=-1)
    per_layer = np.linalg.norm(np.einsum("lhij,lhjo->lijo", att, f), axis=-1)
    np.testing.assert_allclose(value_weighted_attention(att, values, weight), per_head, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(layer_value_weighted(att, values, weight), per_layer, rtol=1e-7, atol=1e-9)


def _hidden(lm, batch, gates=None) -> torch.Tensor:
    with torch.no_grad():
        if gates is None:
            return lm.model(**batch.model_inputs()).last_hidden_state
        with HeadGates(lm, gates):
            return lm.model(**batch.model_inputs()).last_hidden_state


def test_gates_of_one_change_nothing(minilm):
    """Reference: the plain forward pass of transformers on all-MiniLM-L6-v2 (gate 1 must be an exact no-op)."""
    batch = encode(minilm, TEXTS)
    assert torch.equal(_hidden(minilm, batch), _hidden(minilm, batch, torch.ones(6, 12)))


def test_gate_zero_equals_zeroing_the_head_slice_of_w_o(minilm):
    """Reference: weight surgery on a copy of the model: zeroing head h's columns of W_O in layer l removes
    exactly that head's contribution (Michel et al. 2019, sec. 2); the gate must give the same output."""
    layer, head, d = 3, 7, 32
    batch = encode(minilm, TEXTS)
    gates = torch.ones(6, 12)
    gates[layer, head] = 0.0
    gated = _hidden(minilm, batch, gates)
    surgery = copy.deepcopy(minilm)
    w = surgery.parts[layer].out_proj.weight
    with torch.no_grad():
        w[:, head * d : (head + 1) * d] = 0.0
    by_hand = _hidden(surgery, batch)
    torch.testing.assert_close(gated, by_hand, atol=1e-5, rtol=0)
    assert not torch.allclose(gated, _hidden(minilm, batch), atol=1e-3)


def test_gates_are_differentiable(minilm):
    """Reference: autograd finite-difference check of d output / d gate on one head (common practice)."""
    batch = encode(minilm, TEXTS[:1])
    gates = torch.ones(6, 12, dtype=torch.float32, requires_grad=True)
    with HeadGates(minilm, gates):
        out = minilm.model(**batch.model_inputs()).last_hidden_state[0, 0].sum()
    out.backward()
    assert gates.grad is not None and gates.grad.abs().sum() > 0
    eps = 1e-2
    g = torch.ones(6, 12)
    g[2, 5] += eps
    with torch.no_grad(), HeadGates(minilm, g):
        up = minilm.model(**batch.model_inputs()).last_hidden_state[0, 0].sum()
    g[2, 5] -= 2 * eps
    with torch.no_grad(), HeadGates(minilm, g):
        down = minilm.model(**batch.model_inputs()).last_hidden_state[0, 0].sum()
    fd = float((up - down) / (2 * eps))
    assert abs(fd - float(gates.grad[2, 5])) <= 0.02 * abs(fd) + 1e-3


def test_analysis_computes_only_what_is_asked_and_agrees_with_the_full_arrays(minilm):
    """Rows and single heads computed on demand equal the rows and heads of the full arrays.

    Reference: attention_rollout (Abnar & Zuidema 2020), layer_value_weighted and
    value_weighted_attention (Kobayashi et al. 2020), all on all-MiniLM-L6-v2's captured attention;
    nothing larger than asked for is computed (the full arrays are absent until requested).
    """
    from inspector.measures.analysis import analyze_sentence
    from inspector.measures.rollout import attention_rollout

    a = analyze_sentence(minilm, TEXTS[1])
    row = a.rollout_row(0)
    vw_row = a.layer_value_weighted_row(-1, 0)
    head = a.value_weighted_head(2, 5)
    assert not {"rollout", "value_gram", "layer_value_weighted", "value_weighted"} & set(vars(a))
    np.testing.assert_allclose(row, attention_rollout(a.attention)[0], rtol=1e-5, atol=1e-7)
    values, weight = a.values.astype(np.float64), a.out_weight.astype(np.float64)
    att = a.attention.astype(np.float64)
    np.testing.assert_allclose(vw_row, layer_value_weighted(att, values, weight)[-1, 0], rtol=1e-4, atol=1e-6)
    np.testing.assert_allclose(
        head, value_weighted_attention(att, values, weight)[2, 5], rtol=1e-4, atol=1e-7
    )
    np.testing.assert_allclose(a.layer_value_weighted[-1, 0], vw_row, rtol=1e-6)
