"""Head masks: the gate against multi-head attention computed by hand, mask files, ``--mask`` on the CLI."""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest
import torch

from inspector.checkpoint.capture import encode, run
from inspector.checkpoint.masks import HeadMask, check_mask, masked, parse_mask, read_mask
from inspector.cli.main import main
from inspector.errors import HeadcountError
from inspector.measures.analysis import analyze_sentence, softmax
from inspector.measures.norms import attention_output, value_weighted_attention
from inspector.measures.rollout import attention_rollout
from inspector.paths import SAMPLE_MODEL

TEXT = "my car won't fit on the 7:15 to Orlestow, can I swap to the later boat"


def _by_hand_attention_output(lm, hidden: torch.Tensor, layer: int, off: int) -> torch.Tensor:
    """Concat(head_1..head_h) W_O + b_O for one sentence, head ``off``'s slice zeroed, from the raw weights."""
    parts = lm.parts[layer]
    h = lm.num_heads
    d = parts.query.out_features // h

    def project(linear: torch.nn.Linear) -> torch.Tensor:  # [heads, n, d]
        return (hidden @ linear.weight.T + linear.bias).reshape(-1, h, d).transpose(0, 1)

    q, k, v = project(parts.query), project(parts.key), project(parts.value)
    weights = torch.softmax(q @ k.transpose(-1, -2) / math.sqrt(d), dim=-1)
    heads = weights @ v  # [heads, n, d]
    heads[off] = 0.0
    concat = heads.transpose(0, 1).reshape(-1, h * d)
    return concat @ parts.out_proj.weight.T + parts.out_proj.bias


def test_gate_zero_removes_exactly_the_heads_term_computed_by_hand(minilm):
    """Reference: Vaswani et al. 2017, sec. 3.2.2: MultiHead(Q, K, V) = Concat(head_1, ..., head_h) W_O with
    head_i = softmax(Q W_i^Q (K W_i^K)^T / sqrt(d_k)) V W_i^V, evaluated here directly from layer 2's weights of
    all-MiniLM-L6-v2 on the layer's real input (transformers' hidden_states), with head 5's slice set to zero;
    the gated model's W_O output must match it, and differ from the ungated one."""
    layer, off = 2, 5
    batch = encode(minilm, [TEXT])
    with torch.no_grad():
        hidden = minilm.model(**batch.model_inputs(), output_hidden_states=True).hidden_states[layer][0]
    seen: list[torch.Tensor] = []
    handle = minilm.parts[layer].out_proj.register_forward_hook(lambda _m, _i, o: seen.append(o[0]))
    try:
        with torch.no_grad(), masked(minilm, HeadMask.of([(layer, off)])):
            minilm.model(**batch.model_inputs())
        with torch.no_grad():
            minilm.model(**batch.model_inputs())
    finally:
        handle.remove()
    with torch.no_grad():
        expected = _by_hand_attention_output(minilm, hidden, layer, off)
    torch.testing.assert_close(seen[0], expected, atol=1e-5, rtol=0)
    assert (seen[1] - expected).abs().max() > 1e-3  # the ungated pass keeps the head


def test_masked_value_decomposition_matches_the_gated_output(minilm):
    """Reference: Kobayashi et al. 2020, eq. (4)-(5): sum_h sum_j a_ij f_h(x_j) + b_O equals W_O's output; under a
    mask the captured W_O has the head's columns scaled by its gate, so the rebuild must equal the real output of
    the gated model (captured from transformers' dense layer) and the head's value-weighted attention is 0."""
    mask = HeadMask.of([(1, 3), (4, 0), (4, 11)])
    outputs: list[torch.Tensor] = []
    handles = [p.out_proj.register_forward_hook(lambda m, i, o: outputs.append(o)) for p in minilm.parts]
    try:
        with masked(minilm, mask):
            cap = run(minilm, [TEXT], values=True)
    finally:
        for h in handles:
            h.remove()
    att = cap.sentence(0).astype(np.float64)
    values = cap.values[0].astype(np.float64)
    weight = cap.out_weight.astype(np.float64)
    rebuilt = attention_output(att, values, weight, cap.out_bias)
    real = np.stack([o[0].numpy() for o in outputs])
    np.testing.assert_allclose(rebuilt, real, atol=2e-5, rtol=0)
    vw = value_weighted_attention(att, values, weight)
    for layer, head in mask.heads:
        assert np.all(vw[layer, head] == 0.0)
    assert vw[1, 2].max() > 0


def test_masked_rollout_leaves_switched_off_heads_out_of_the_layer_mean(minilm):
    """Reference: Abnar & Zuidema 2020, attention rollout, computed on an array from which the switched-off heads
    were removed by hand (each layer's mean over the remaining heads), with numpy matrix products."""
    mask = HeadMask.of([(0, 0), (0, 1), (3, 7)] + [(5, h) for h in range(12)])
    result = analyze_sentence(minilm, TEXT, mask=mask)
    att = result.attention.astype(np.float64)
    n = att.shape[-1]
    acc = np.eye(n)
    for layer in range(6):
        keep = [h for h in range(12) if (layer, h) not in set(mask.heads)]
        mean = att[layer, keep].mean(0) if keep else np.zeros((n, n))
        a = 0.5 * mean + 0.5 * np.eye(n)
        acc = (a / a.sum(-1, keepdims=True)) @ acc
    np.testing.assert_allclose(result.rollout, acc, atol=1e-10)
    np.testing.assert_allclose(
        attention_rollout(att), attention_rollout(att, heads_on=np.ones((6, 12))), atol=1e-12
    )


def test_mask_file_round_trip_and_format():
    """Reference: the prune_mask.json format a corpus run writes ({"layer": [head, ...]}, counted from 0),
    written out by hand."""
    doc = {"3": [5, 1], "0": [2]}
    mask = parse_mask(doc)
    assert mask.heads == ((0, 2), (3, 1), (3, 5))
    assert mask.to_json() == {"0": [2], "3": [1, 5]}
    assert mask.names() == ["L0H2", "L3H1", "L3H5"]
    assert parse_mask({}).heads == ()
    assert mask.toggled(0, 2).heads == ((3, 1), (3, 5))
    assert mask.toggled(1, 0).heads == ((0, 2), (1, 0), (3, 1), (3, 5))
    whole = mask.with_layer(3, 6)
    assert whole.heads == ((0, 2),) + tuple((3, h) for h in range(6))
    assert whole.with_layer(3, 6).heads == ((0, 2),)
    gates = mask.gates(4, 6)
    assert gates.sum() == 24 - 3 and gates[3, 5] == 0 and gates[0, 2] == 0


@pytest.mark.parametrize(
    ("doc", "needle"),
    [
        ([1, 2], "JSON object"),
        ({"two": [1]}, "'two' is not a layer number"),
        ({"1": 3}, "layer 1 must list head numbers"),
        ({"1": [-1]}, "layer 1 must list head numbers"),
        ({"1": [True]}, "layer 1 must list head numbers"),
    ],
)
def test_malformed_masks_are_refused_in_one_line(doc, needle):
    """Reference: the mask format (common practice, no source): an object of layer -> list of head numbers."""
    with pytest.raises(HeadcountError) as err:
        parse_mask(doc)
    assert needle in str(err.value) and "\n" not in str(err.value)


def test_heads_that_do_not_exist_are_named():
    """Reference: a 4-layer x 6-head model (the sample model's shape, its config.json) has L0-L3 and H0-H5."""
    with pytest.raises(HeadcountError) as err:
        check_mask(HeadMask.of([(0, 1), (4, 0), (2, 6)]), 4, 6, where="m.json")
    text = str(err.value)
    assert text.startswith("m.json: 2 heads not in this model: L2H6, L4H0")
    assert "L0H1" not in text and "\n" not in text


def test_read_mask_errors(tmp_path):
    """Reference: Python's json module rejects the broken file (common practice, no source)."""
    bad = tmp_path / "broken.json"
    bad.write_text('{"1": [0,', encoding="utf-8")
    with pytest.raises(HeadcountError, match="broken.json: not JSON"):
        read_mask(bad)
    with pytest.raises(HeadcountError, match="no such mask file"):
        read_mask(tmp_path / "missing.json")


def _cli(capsys, *argv) -> tuple[int, str, str]:
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_cli_refuses_a_mask_naming_missing_heads(tmp_path, capsys):
    """Reference: the sample model's config.json (4 layers x 6 heads); errors are one stderr line, exit 2."""
    path = tmp_path / "m.json"
    path.write_text(json.dumps({"1": [2], "9": [0]}), encoding="utf-8")
    for command in (["analyze", "--text", TEXT], ["explain", "--text", TEXT, "--steps", "4"]):
        code, out, err = _cli(capsys, command[0], str(SAMPLE_MODEL), *command[1:], "--mask", str(path))
        assert code == 2 and out == ""
        assert err.strip().count("\n") == 0
        assert "1 head not in this model: L9H0" in err


def _surgery_probabilities(lm, texts: list[str], mask: HeadMask) -> np.ndarray:
    """The reference: a deep copy of the model with the heads' W_O columns zeroed, run by transformers,
    one sentence at a time. Returns [sentences, labels]."""
    copy_ = copy.deepcopy(lm)
    with torch.no_grad():
        for layer, head in mask.heads:
            w = copy_.parts[layer].out_proj.weight
            d = w.shape[1] // lm.num_heads
            w[:, head * d : (head + 1) * d] = 0.0
        logits = [copy_.model(**encode(copy_, [t]).model_inputs()).logits[0].numpy() for t in texts]
    return softmax(np.stack(logits))


def test_analyze_and_explain_with_mask_run_the_masked_model(tmp_path, capsys):
    """Reference: transformers' forward pass on a copy of the sample model whose W_O columns of the masked heads
    are zeroed by hand (Michel et al. 2019, sec. 2); the JSON records the mask it used under 'mask'."""
    from inspector.checkpoint.loader import load_checkpoint

    lm = load_checkpoint(SAMPLE_MODEL)
    mask = HeadMask.of([(0, 1), (1, 4), (3, 0), (3, 2)])
    path = tmp_path / "prune_mask.json"
    path.write_text(json.dumps(mask.to_json()), encoding="utf-8")
    ref = dict(zip(lm.labels, _surgery_probabilities(lm, [TEXT], mask)[0]))
    full = analyze_sentence(lm, TEXT).prediction.probabilities

    code, out, _ = _cli(capsys, "analyze", str(SAMPLE_MODEL), "--text", TEXT, "--mask", str(path), "--json")
    doc = json.loads(out)
    assert code == 0 and doc["mask"] == {"0": [1], "1": [4], "3": [0, 2]}
    for label, p in ref.items():
        assert doc["prediction"]["probabilities"][label] == pytest.approx(p, abs=1e-6)
    assert max(abs(full[k] - ref[k]) for k in ref) > 1e-3  # the mask does change this sentence

    code, out, _ = _cli(
        capsys, "explain", str(SAMPLE_MODEL), "--text", TEXT, "--mask", str(path), "--steps", "8", "--json"
    )
    doc = json.loads(out)
    assert code == 0 and doc["mask"] == {"0": [1], "1": [4], "3": [0, 2]}
    for label, p in ref.items():
        assert doc["prediction"]["probabilities"][label] == pytest.approx(p, abs=1e-6)

    code, out, _ = _cli(capsys, "analyze", str(SAMPLE_MODEL), "--text", TEXT, "--json")
    assert json.loads(out)["mask"] is None


def test_corpus_with_mask_runs_the_masked_model_and_starts_the_curves_at_the_mask(tmp_path, capsys):
    """Reference: transformers' forward pass, utterance by utterance, on a copy of the suite's tiny classifier
    with the masked heads' W_O columns zeroed by hand: its accuracy is the run's accuracy; the pruning curves
    start with the mask's heads off (Michel et al. 2019 curves, continued from the mask)."""
    from inspector.checkpoint.loader import load_checkpoint
    from tests.corpus_models import UTTERANCES, save_tiny_classifier, write_csv

    folder = save_tiny_classifier(tmp_path / "tiny")
    data = write_csv(tmp_path / "set.csv", UTTERANCES)
    mask = HeadMask.of([(0, 1), (1, 3)])
    path = tmp_path / "m.json"
    path.write_text(json.dumps(mask.to_json()), encoding="utf-8")
    lm = load_checkpoint(folder)
    probs = _surgery_probabilities(lm, [t for t, _ in UTTERANCES], mask)
    ref = [lm.labels[int(np.argmax(p))] == y for p, (_, y) in zip(probs, UTTERANCES)]
    out = tmp_path / "report"
    code, stdout, _ = _cli(
        capsys, "corpus", str(folder), str(data), "--out", str(out), "--mask", str(path), "--json",
        "--no-figures", "--quiet", "--orders", "importance,random", "--max-drop", "0.5", "--prune-every", "1",
    )  # fmt: skip
    summary = json.loads(stdout)
    assert code == 0 and summary["mask"] == {"0": [1], "1": [3]}
    assert summary["accuracy"] == pytest.approx(np.mean(ref))
    assert summary["pruning"]["accuracy_before"] == pytest.approx(np.mean(ref))
    chosen = json.loads((out / "prune_mask.json").read_text())
    assert set(mask.heads) <= {(int(l), h) for l, hs in chosen.items() for h in hs}
    with (out / "pruning.csv").open() as fh:
        rows = [line.split(",") for line in fh.read().splitlines()[1:]]
    for order in ("importance", "random"):
        removed = [int(r[2]) for r in rows if r[0] == order]
        assert removed[0] == 2 and removed[-1] == 8
        assert {(int(r[5]), int(r[6])) for r in rows if r[0] == order and int(r[2]) in (1, 2)} <= set(
            mask.heads
        )
