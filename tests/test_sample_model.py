"""Tests for the bundled sample model ``sample_models/ferry_intents`` and its data.

The checkpoint is loaded through transformers' own Auto classes, offline, and its
held-out scores are recomputed with scikit-learn, then compared with what the training
script recorded in ``metrics.json`` and in the model card.
"""

from __future__ import annotations

import os

os.environ["HF_HUB_OFFLINE"] = "1"
os.environ["TRANSFORMERS_OFFLINE"] = "1"

import csv  # noqa: E402
import json  # noqa: E402
import re  # noqa: E402
from collections.abc import Sequence  # noqa: E402
from pathlib import Path  # noqa: E402

import pytest  # noqa: E402
import torch  # noqa: E402
from sklearn.metrics import accuracy_score, f1_score  # noqa: E402
from transformers import AutoModelForSequenceClassification, AutoTokenizer  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
CHECKPOINT = ROOT / "sample_models" / "ferry_intents"
DATA = ROOT / "sample_models" / "data"
CARD = CHECKPOINT / "README.md"
TOLERANCE = 0.005  # 0.5 percentage points
TRAIN_ROWS = range(3000, 4001)
EVAL_ROWS = range(400, 601)
BATCH_SIZE = 64


def read_rows(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    """Read a CSV; return its header and its rows."""
    with path.open(newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        return list(reader.fieldnames or []), list(reader)


def normalise(text: str) -> str:
    """Lower-case, drop punctuation, squeeze spaces."""
    return re.sub(r"\s+", " ", re.sub(r"[^\w\s]", " ", text.lower())).strip()


@torch.no_grad()
def predict_labels(model, tokenizer, texts: Sequence[str], labels: Sequence[str]) -> list[str]:
    """Predict one label name per text, in padded batches."""
    model.eval()
    out: list[str] = []
    for start in range(0, len(texts), BATCH_SIZE):
        batch = tokenizer(
            list(texts[start : start + BATCH_SIZE]), padding=True, truncation=True, return_tensors="pt"
        )
        out.extend(labels[i] for i in model(**batch).logits.argmax(dim=-1).tolist())
    return out


def card_percent(card: str, metric: str) -> float:
    """Read ``| metric | 0.xxxx (yy.y%) |`` from the model card as a fraction."""
    match = re.search(rf"^\| {metric} \| ([0-9.]+) \(([0-9.]+)%\) \|$", card, flags=re.MULTILINE)
    assert match, f"model card has no '{metric}' row"
    assert float(match.group(1)) == pytest.approx(float(match.group(2)) / 100, abs=0.0006)
    return float(match.group(1))


@pytest.fixture(scope="module")
def eval_rows() -> list[dict[str, str]]:
    return read_rows(DATA / "ferry_eval.csv")[1]


@pytest.fixture(scope="module")
def hf_model():
    return AutoModelForSequenceClassification.from_pretrained(CHECKPOINT, local_files_only=True)


@pytest.fixture(scope="module")
def hf_tokenizer():
    return AutoTokenizer.from_pretrained(CHECKPOINT, local_files_only=True)


@pytest.fixture(scope="module")
def id2label(hf_model) -> list[str]:
    config = hf_model.config
    return [config.id2label[i] for i in range(config.num_labels)]


@pytest.fixture(scope="module")
def hf_predictions(hf_model, hf_tokenizer, id2label, eval_rows) -> list[str]:
    return predict_labels(hf_model, hf_tokenizer, [r["text"] for r in eval_rows], id2label)


@pytest.fixture(scope="module")
def metrics() -> dict:
    return json.loads((CHECKPOINT / "metrics.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def card() -> str:
    return CARD.read_text(encoding="utf-8")


def test_checkpoint_is_safetensors_only_and_small() -> None:
    """Reference: the transformers checkpoint layout (config.json, model.safetensors, tokenizer files)."""
    names = {p.name for p in CHECKPOINT.iterdir()}
    assert {"config.json", "model.safetensors", "tokenizer.json", "tokenizer_config.json"} <= names
    assert not [n for n in names if n.endswith((".bin", ".pt", ".pth", ".ckpt", ".pkl"))]
    size = sum(p.stat().st_size for p in CHECKPOINT.rglob("*") if p.is_file())
    assert size < 10 * 1024 * 1024


def test_transformers_loads_checkpoint_and_predicts(hf_model, hf_tokenizer, id2label, hf_predictions) -> None:
    """Reference: transformers AutoModelForSequenceClassification / AutoTokenizer.from_pretrained."""
    config = hf_model.config
    assert config.model_type == "bert"
    assert config.num_hidden_layers >= 4 and config.num_attention_heads >= 6
    assert {config.label2id[name] for name in id2label} == set(range(config.num_labels))
    assert hf_tokenizer.cls_token == "[CLS]" and hf_tokenizer.sep_token == "[SEP]"
    assert hf_tokenizer.pad_token == "[PAD]" and hf_tokenizer.mask_token == "[MASK]"
    assert hf_tokenizer.unk_token == "[UNK]"
    assert len(hf_predictions) == len(read_rows(DATA / "ferry_eval.csv")[1])
    assert set(hf_predictions) <= set(id2label)
    assert len(set(hf_predictions)) > len(id2label) // 2  # not a constant classifier


def test_checkpoint_gives_attention_weights(hf_model, hf_tokenizer) -> None:
    """Reference: transformers BertModel eager attention with output_attentions=True."""
    batch = hf_tokenizer(["is the 7:15 to Marrowby running"], return_tensors="pt")
    with torch.no_grad():
        out = hf_model(**batch, output_attentions=True)
    config = hf_model.config
    seq = batch["input_ids"].shape[1]
    assert len(out.attentions) == config.num_hidden_layers
    assert out.attentions[0].shape == (1, config.num_attention_heads, seq, seq)
    assert torch.allclose(out.attentions[-1].sum(dim=-1), torch.ones(1, config.num_attention_heads, seq))


def test_metrics_match_scikit_learn(eval_rows, hf_predictions, metrics) -> None:
    """Reference: scikit-learn accuracy_score / f1_score(average='macro')."""
    expected = [r["label"] for r in eval_rows]
    accuracy = accuracy_score(expected, hf_predictions)
    macro_f1 = f1_score(expected, hf_predictions, average="macro")
    assert metrics["n_eval"] == len(expected)
    assert metrics["accuracy"] == pytest.approx(accuracy, abs=TOLERANCE)
    assert metrics["macro_f1"] == pytest.approx(macro_f1, abs=TOLERANCE)


def test_accuracy_is_in_the_believable_band(metrics) -> None:
    """Reference: scikit-learn accuracy_score / f1_score as recorded in metrics.json.

    The sample must be good enough to be believable yet misfire sometimes. The band is
    "roughly 85-97%"; the lower edge leaves room for the +-1 point that a retrain can move
    (the tokenizers trainer breaks frequency ties in an unseeded order).
    """
    assert 0.83 <= metrics["accuracy"] <= 0.97
    assert 0.80 <= metrics["macro_f1"] <= 0.97


def test_model_card_states_the_measured_numbers(card, eval_rows, hf_predictions, metrics) -> None:
    """Reference: scikit-learn accuracy_score / f1_score(average='macro') recomputed here."""
    expected = [r["label"] for r in eval_rows]
    assert card_percent(card, "accuracy") == pytest.approx(
        accuracy_score(expected, hf_predictions), abs=TOLERANCE
    )
    assert card_percent(card, "macro_f1") == pytest.approx(
        f1_score(expected, hf_predictions, average="macro"), abs=TOLERANCE
    )
    assert card_percent(card, "accuracy") == metrics["accuracy"]
    assert re.search(rf"^\| n_eval \| {metrics['n_eval']} \|$", card, flags=re.MULTILINE)
    assert "the data is invented for demonstration" in card.lower()


def test_model_card_misfires_are_real(card, eval_rows, hf_predictions) -> None:
    """Reference: transformers AutoModelForSequenceClassification predictions on the eval split."""
    rows = re.findall(r"^\| (\d+) \| (.+) \| (\w+) \| (\w+) \| ([0-9.]+) \|$", card, flags=re.MULTILINE)
    assert len(rows) == 10
    answers = {(r["text"], r["label"]): p for r, p in zip(eval_rows, hf_predictions)}
    for _, text, expected, predicted, _ in rows:
        text = text.replace("\\|", "|")
        assert expected != predicted
        assert answers[(text, expected)] == predicted


def test_data_files_are_well_formed(id2label) -> None:
    """Reference: Python csv.DictReader; labels checked against config.json id2label."""
    train_header, train = read_rows(DATA / "ferry_train.csv")
    eval_header, evaluation = read_rows(DATA / "ferry_eval.csv")
    assert train_header == ["text", "label"] and eval_header == ["text", "label"]
    assert len(train) in TRAIN_ROWS and len(evaluation) in EVAL_ROWS
    for rows in (train, evaluation):
        assert all(r["text"].strip() for r in rows)
        assert {r["label"] for r in rows} == set(id2label)


def test_no_eval_text_appears_in_train() -> None:
    """Reference: exact string membership, and again after lower-casing and dropping punctuation."""
    train = read_rows(DATA / "ferry_train.csv")[1]
    evaluation = read_rows(DATA / "ferry_eval.csv")[1]
    train_texts = {r["text"] for r in train}
    assert not [r["text"] for r in evaluation if r["text"] in train_texts]
    train_norm = {normalise(t) for t in train_texts}
    assert not [r["text"] for r in evaluation if normalise(r["text"]) in train_norm]


def test_core_loader_agrees_with_transformers(eval_rows, hf_predictions, id2label) -> None:
    """Reference: transformers AutoModelForSequenceClassification predictions on the eval split."""
    loader = pytest.importorskip("inspector.checkpoint.loader")
    lm = loader.load_checkpoint(CHECKPOINT)
    assert lm.task == "sequence-classification"
    assert isinstance(lm.model, torch.nn.Module)
    assert lm.labels == id2label
    core = predict_labels(lm.model, lm.tokenizer, [r["text"] for r in eval_rows], lm.labels)
    assert core == hf_predictions
