"""The second sample checkpoint ``sample_models/ferry_intents_retrained``: what its model card says is true.

It was retrained from ``ferry_intents`` with the heads in ``switched_off.json`` held at zero; it
must share the first model's tokenizer (so the two compare), have those heads really switched
off, and score what ``metrics.json`` records.
"""

from __future__ import annotations

import json

import pytest
import torch
from safetensors.torch import load_file
from sklearn.metrics import accuracy_score, f1_score
from transformers import AutoModelForSequenceClassification, AutoTokenizer

from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL, SAMPLE_RETRAINED
from tests.test_sample_model import TOLERANCE, predict_labels, read_rows

TOKENIZER_FILES = ("tokenizer.json", "tokenizer_config.json", "vocab.txt")


@pytest.fixture(scope="module")
def mask() -> dict[int, list[int]]:
    raw = json.loads((SAMPLE_RETRAINED / "switched_off.json").read_text(encoding="utf-8"))
    return {int(k): v for k, v in raw.items()}


def test_small_safetensors_checkpoint_with_the_first_models_tokenizer():
    """Under 3 MB, safetensors only, tokenizer files byte-identical to ferry_intents.

    Reference: the transformers checkpoint layout; byte comparison of the files the training
    script copies (construction).
    """
    names = {p.name for p in SAMPLE_RETRAINED.iterdir()}
    assert {"config.json", "model.safetensors", *TOKENIZER_FILES, "switched_off.json"} <= names
    assert not [n for n in names if n.endswith((".bin", ".pt", ".pth", ".ckpt", ".pkl"))]
    assert sum(p.stat().st_size for p in SAMPLE_RETRAINED.iterdir()) < 3_000_000
    for name in TOKENIZER_FILES:
        assert (SAMPLE_RETRAINED / name).read_bytes() == (SAMPLE_MODEL / name).read_bytes()


def test_switched_off_heads_have_zero_output_columns(mask):
    """Every listed head's columns of its layer's attention output projection are exactly 0; no other head's are.

    Reference: construction (a head enters the residual stream only through its head_dim columns
    of W_O; transformers' BertSelfOutput.dense), read with safetensors.
    """
    weights = load_file(str(SAMPLE_RETRAINED / "model.safetensors"))
    config = json.loads((SAMPLE_RETRAINED / "config.json").read_text(encoding="utf-8"))
    heads = config["num_attention_heads"]
    width = config["hidden_size"] // heads
    assert sum(len(v) for v in mask.values()) == 13
    for layer in range(config["num_hidden_layers"]):
        w = weights[f"bert.encoder.layer.{layer}.attention.output.dense.weight"]
        for head in range(heads):
            block = w[:, head * width : (head + 1) * width]
            if head in mask.get(layer, []):
                assert torch.count_nonzero(block) == 0
            else:
                assert torch.count_nonzero(block) == block.numel()


def test_scores_match_metrics_json():
    """Accuracy and macro-F1 on the evaluation split, recomputed with transformers and scikit-learn.

    Reference: scikit-learn accuracy_score / f1_score(average='macro') on
    AutoModelForSequenceClassification predictions.
    """
    model = AutoModelForSequenceClassification.from_pretrained(SAMPLE_RETRAINED, local_files_only=True)
    tok = AutoTokenizer.from_pretrained(SAMPLE_RETRAINED, local_files_only=True)
    rows = read_rows(SAMPLE_EVAL)[1]
    labels = [model.config.id2label[i] for i in range(model.config.num_labels)]
    predicted = predict_labels(model, tok, [r["text"] for r in rows], labels)
    expected = [r["label"] for r in rows]
    metrics = json.loads((SAMPLE_RETRAINED / "metrics.json").read_text(encoding="utf-8"))
    assert metrics["accuracy"] == pytest.approx(accuracy_score(expected, predicted), abs=TOLERANCE)
    assert metrics["macro_f1"] == pytest.approx(f1_score(expected, predicted, average="macro"), abs=TOLERANCE)


def test_the_two_sample_models_compare():
    """Headcount accepts the pair (same vocabulary, special tokens and splitting).

    Reference: the tracker issue's rule for comparable checkpoints; common practice, no source.
    """
    from inspector.checkpoint.loader import load_checkpoint
    from inspector.comparison.pairing import tokenizer_difference

    assert tokenizer_difference(load_checkpoint(SAMPLE_MODEL), load_checkpoint(SAMPLE_RETRAINED)) is None
