"""The families added to the adapter table: fused projections, rotary positions, local windows.

Every check recomputes what transformers did from the parts the adapter table
names (the sliced fused projection, the rotary angles, the window) and compares
it with the weights and outputs captured through the adapter.
"""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import AttentionRecorder, HeadGates, encode, run
from inspector.checkpoint.families import slice_fused
from inspector.checkpoint.loader import load_checkpoint
from inspector.errors import HeadcountError
from inspector.measures.metrics import head_metrics, window_reach
from inspector.measures.norms import attention_output
from tests.families import NEW_FAMILIES, build_checkpoint

TEXTS = ["Can I bring my bike on the early sailing to Gullholm?", "refund pls"]


@pytest.fixture(scope="module", params=NEW_FAMILIES)
def new_family(request, tmp_path_factory, minilm_dir):
    """A seeded random classifier of each new family; DeBERTa without relative terms so eq. 1 applies."""
    family = request.param
    overrides = {"relative_attention": False, "pos_att_type": []} if family == "deberta" else {}
    folder = build_checkpoint(family, tmp_path_factory.mktemp(family), minilm_dir, **overrides)
    lm = load_checkpoint(folder)
    torch.manual_seed(1)
    with torch.no_grad():  # non-zero biases, so the slices' biases are exercised too
        for part in lm.parts:
            for bias in (part.query_bias, part.value_bias):
                if bias is not None:
                    bias.normal_(0.0, 0.5)
    return family, lm


def _rotate_halves(x: torch.Tensor, theta: float) -> torch.Tensor:
    """Rotary positions on the two halves of each head vector: x [b, h, n, d]."""
    n, d = x.shape[-2], x.shape[-1]
    inv = theta ** (-torch.arange(0, d, 2, dtype=torch.float64) / d)
    angle = torch.arange(n, dtype=torch.float64)[:, None] * inv[None, :]
    cos, sin = torch.cat([angle.cos()] * 2, -1), torch.cat([angle.sin()] * 2, -1)
    x1, x2 = x[..., : d // 2], x[..., d // 2 :]
    return x * cos + torch.cat([-x2, x1], -1) * sin


def _rotate_pairs(x: torch.Tensor, theta: float = 10000.0) -> torch.Tensor:
    """Rotary positions on neighbouring pairs (x_2i, x_2i+1) of each head vector: x [b, h, n, d]."""
    n, d = x.shape[-2], x.shape[-1]
    inv = theta ** (-torch.arange(0, d, 2, dtype=torch.float64) / d)
    angle = torch.arange(n, dtype=torch.float64)[:, None] * inv[None, :]
    cos, sin = angle.cos().repeat_interleave(2, -1), angle.sin().repeat_interleave(2, -1)
    swapped = torch.stack([-x[..., 1::2], x[..., 0::2]], -1).flatten(-2)
    return x * cos + swapped * sin


def _heads(x: torch.Tensor, heads: int) -> torch.Tensor:
    return x.double().unflatten(-1, (heads, -1)).transpose(1, 2)


def test_new_families_reproduce_softmax_of_sliced_projections(new_family):
    """Recompute every head's weights from the captured (sliced) Q and K and compare.

    Reference: Vaswani et al. 2017, eq. 1: softmax(Q K^T / sqrt(d) + mask); Su et al. 2021
    (RoFormer), eq. 34, rotary positions with angles pos * 10000^(-2i/d) (ModernBERT: its
    configured base per layer type, rotating the two halves as transformers does; RoFormer:
    neighbouring pairs); the local window |i - j| <= local_attention / 2 of ModernBERT's
    sliding layers from its model card (Warner et al. 2024, "Smarter, Better, Faster, Longer").
    """
    family, lm = new_family
    batch = encode(lm, TEXTS)
    with torch.no_grad(), AttentionRecorder(lm, queries_keys=True) as rec:
        lm.model(**batch.model_inputs())
        weights = rec.attention()
    cfg = lm.model.config
    heads = lm.num_heads
    n = batch.input_ids.shape[1]
    real = batch.attention_mask[:, None, None, :].bool()
    dist = (torch.arange(n)[:, None] - torch.arange(n)[None, :]).abs()
    for layer in range(lm.num_layers):
        q, k = _heads(rec.queries[layer], heads), _heads(rec.keys[layer], heads)
        if family == "modernbert":
            kind = cfg.layer_types[layer]
            theta = cfg.rope_parameters[kind]["rope_theta"]
            q, k = _rotate_halves(q, theta), _rotate_halves(k, theta)
        elif family == "roformer":
            q, k = _rotate_pairs(q), _rotate_pairs(k)
        scores = q @ k.transpose(-1, -2) / math.sqrt(q.shape[-1])
        allowed = real
        if lm.windows[layer] is not None:
            allowed = real & (dist <= lm.windows[layer])
        recomputed = torch.softmax(scores.masked_fill(~allowed, -math.inf), -1)
        got = weights[:, layer].double()
        for b in range(len(TEXTS)):
            rows = batch.attention_mask[b].bool()
            torch.testing.assert_close(got[b][:, rows], recomputed[b][:, rows], atol=1e-6, rtol=0)


def test_fused_slices_follow_the_stated_layouts():
    """The two fused layouts put each head's query, key and value where the families' own code reads them.

    Reference: transformers' source, ModernBertAttention (``qkv.view(..., 3, heads, d)``) and
    DeBERTa's DisentangledSelfAttention (``transpose_for_scores(qp).chunk(3, dim=-1)``), applied here
    to a numbered vector so every position is checked.
    """
    heads, d = 2, 3
    out = torch.arange(3 * heads * d, dtype=torch.float64)[None]
    q, k, v = out.view(1, 3, heads, d).unbind(1)
    assert torch.equal(slice_fused(out, "value", heads, "blocks"), v.flatten(-2))
    assert torch.equal(slice_fused(out, "key", heads, "blocks"), k.flatten(-2))
    per_head = out.view(1, 1, heads, 3 * d).transpose(1, 2)  # [b, heads, n, 3d] as transpose_for_scores
    q2, k2, v2 = per_head.chunk(3, dim=-1)
    for which, ref in (("query", q2), ("key", k2), ("value", v2)):
        got = slice_fused(out, which, heads, "per-head")
        assert torch.equal(got, ref.transpose(1, 2).flatten(-2)[0])


def test_value_decomposition_rebuilds_the_output_projection(new_family):
    """The captured value slice (with its bias) and W_O rebuild W_O's real output on every new family.

    Reference: Kobayashi et al. 2020, eq. (4)-(5): sum_h sum_j a_ij f_h(x_j) + b_O equals the output
    of the attention's output projection, read here with a forward hook on the real module.
    """
    family, lm = new_family
    outputs: list[torch.Tensor] = []
    handles = [p.out_proj.register_forward_hook(lambda m, i, o: outputs.append(o)) for p in lm.parts]
    try:
        cap = run(lm, TEXTS, values=True)
    finally:
        for h in handles:
            h.remove()
    for b in range(len(TEXTS)):
        idx = cap.batch.real_index[b]
        rebuilt = attention_output(
            cap.sentence(b).astype(np.float64),
            cap.values[b][:, idx].astype(np.float64),
            cap.out_weight.astype(np.float64),
            cap.out_bias.astype(np.float64),
        )
        real = np.stack([o[b, idx].numpy() for o in outputs])
        np.testing.assert_allclose(rebuilt, real, atol=2e-5, rtol=0)


def test_gate_zero_equals_weight_surgery(new_family):
    """Gate 0 on one head equals zeroing that head's columns of W_O, and gate 1 changes nothing.

    Reference: Michel et al. 2019, sec. 2 (a head's contribution is its slice of W_O's input),
    checked against weight surgery on a copy of each new family's model.
    """
    family, lm = new_family
    batch = encode(lm, TEXTS)
    layer, head = lm.num_layers - 1, 1
    gates = torch.ones(lm.num_layers, lm.num_heads)
    with torch.no_grad():
        plain = lm.model(**batch.model_inputs()).logits
        with HeadGates(lm, gates):
            assert torch.equal(lm.model(**batch.model_inputs()).logits, plain)
        gates[layer, head] = 0.0
        with HeadGates(lm, gates):
            gated = lm.model(**batch.model_inputs()).logits
        surgery = copy.deepcopy(lm)
        w = surgery.parts[layer].out_proj.weight
        d = w.shape[1] // lm.num_heads
        w[:, head * d : (head + 1) * d] = 0.0
        by_hand = surgery.model(**batch.model_inputs()).logits
    torch.testing.assert_close(gated, by_hand, atol=1e-5, rtol=0)
    assert not torch.allclose(gated, plain, atol=1e-7)


def test_window_reach_and_normalised_entropy_on_modernbert(tmp_path, minilm_dir):
    """ModernBERT's sliding layer gives no weight beyond its window; normalised entropy divides by ln(keys seen).

    Reference: transformers' bidirectional sliding-window mask (|i - j| <= local_attention / 2);
    Shannon (1948) entropy computed row by row with numpy, divided by the log of the number of real
    keys inside the window (common practice, no source).
    """
    lm = load_checkpoint(build_checkpoint("modernbert", tmp_path / "mb", minilm_dir))
    assert lm.windows == [None, 2]
    cap = run(lm, [TEXTS[0]])
    att = cap.sentence(0).astype(np.float64)
    n = att.shape[-1]
    far = np.abs(np.arange(n)[:, None] - np.arange(n)[None, :]) > 2
    assert np.all(att[1][:, far] == 0.0) and np.any(att[0][:, far] > 0.0)
    reach = window_reach(lm.windows, n)
    got = head_metrics(att, cap.batch.special[0], reach=reach).entropy_normalized
    for layer in range(2):
        seen = np.full(n, n) if lm.windows[layer] is None else (~far).sum(1)
        for h in range(lm.num_heads):
            rows = att[layer, h]
            ent = -(rows * np.log(np.where(rows > 0, rows, 1))).sum(1)
            assert got[layer, h] == pytest.approx(np.mean(ent / np.log(seen)), rel=1e-9)


def test_families_without_exact_weights_are_refused_with_the_reason(tmp_path, minilm_dir):
    """FNet has no attention, a RoFormer that rotates values or a DeBERTa that mixes heads has no exact per-head story.

    Reference: transformers' source (FNetBasicFourierTransform; RoFormer ``rotary_value``; DeBERTa
    ``talking_head`` mixing heads after the softmax); the refusal must say why in one line.
    """
    folder = build_checkpoint("bert", tmp_path / "fnet", minilm_dir)
    config = json.loads((folder / "config.json").read_text())
    (folder / "config.json").write_text(json.dumps({**config, "model_type": "fnet"}))
    with pytest.raises(HeadcountError, match="Fourier") as info:
        load_checkpoint(folder)
    assert "\n" not in str(info.value)
    for family, key, word in (
        ("roformer", "rotary_value", "value"),
        ("deberta", "talking_head", "mixes heads"),
    ):
        folder = build_checkpoint(family, tmp_path / family, minilm_dir)
        config = json.loads((folder / "config.json").read_text())
        (folder / "config.json").write_text(json.dumps({**config, key: True}))
        with pytest.raises(HeadcountError, match=word):
            load_checkpoint(folder)
