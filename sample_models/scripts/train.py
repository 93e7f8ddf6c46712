"""Train the bundled sample model: a small BERT intent classifier for Tidewren Ferries.

Everything is built from scratch on the CPU and offline:

1. a lower-casing WordPiece tokenizer is trained on the training split with the
   ``tokenizers`` library and wrapped as a transformers BERT tokenizer;
2. a small ``BertForSequenceClassification`` is initialised from a ``BertConfig`` and
   trained on the training split;
3. the held-out split is scored with scikit-learn, and the checkpoint, ``metrics.json`` and
   a model card are written to ``sample_models/ferry_intents/``.

Python, NumPy and torch are seeded, so a rerun reproduces the metrics within noise (the
``tokenizers`` WordPiece trainer breaks frequency ties in an unseeded order).

A second mode retrains an existing checkpoint briefly instead of starting from scratch
(``--init-from``): it keeps that checkpoint's tokenizer, so the two models can be compared
sentence by sentence, and it can switch heads off for good (``--switch-off MASK.json``, the
``{"layer": [head, ...]}`` file ``headcount corpus`` writes as ``prune_mask.json``): their
columns of the attention output projection are zeroed and kept at zero while training, so
the rest of the model learns to do without them. The bundled ``ferry_intents_retrained``
checkpoint was made this way.

Usage::

    python sample_models/scripts/make_data.py
    python sample_models/scripts/train.py [--epochs N] [--seed N]
    python sample_models/scripts/train.py --init-from sample_models/ferry_intents \
        --switch-off sample_models/ferry_intents_retrained/switched_off.json \
        --epochs 3 --learning-rate 3e-4 --out-dir sample_models/ferry_intents_retrained
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import os
import random
import shutil
import time
from collections.abc import Sequence
from dataclasses import asdict, dataclass, replace
from pathlib import Path

os.environ.setdefault("HF_HUB_OFFLINE", "1")
os.environ.setdefault("TRANSFORMERS_OFFLINE", "1")

import numpy as np  # noqa: E402
import torch  # noqa: E402
from sklearn.metrics import accuracy_score, f1_score  # noqa: E402
from tokenizers import Tokenizer, normalizers, pre_tokenizers, trainers  # noqa: E402
from tokenizers.models import WordPiece  # noqa: E402
from transformers import BertConfig, BertForSequenceClassification, BertTokenizer  # noqa: E402

SAMPLE_DIR = Path(__file__).resolve().parents[1]
DATA_DIR = SAMPLE_DIR / "data"
OUT_DIR = SAMPLE_DIR / "ferry_intents"
SPECIAL_TOKENS = ("[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]")
SEP_ID = SPECIAL_TOKENS.index("[SEP]")


@dataclass(frozen=True)
class Settings:
    """Every knob of the run; all of it is recorded in the model card."""

    seed: int = 1234
    vocab_size: int = 1500
    hidden_size: int = 96
    num_layers: int = 4
    num_heads: int = 6
    intermediate_size: int = 384
    max_length: int = 64
    dropout: float = 0.1
    epochs: int = 18
    batch_size: int = 32
    learning_rate: float = 1e-3
    weight_decay: float = 0.01
    warmup_fraction: float = 0.1
    token_mask_rate: float = 0.15
    threads: int = 2
    init_from: str = ""
    """Start from this checkpoint (and keep its tokenizer) instead of from scratch."""
    switched_off: str = ""
    """Mask file of heads switched off (output-projection columns held at zero)."""


@dataclass(frozen=True)
class Prediction:
    """One eval row with the model's answer."""

    text: str
    expected: str
    predicted: str
    confidence: float


def seed_everything(seed: int) -> None:
    """Seed Python, NumPy and torch, and ask torch for deterministic kernels."""
    random.seed(seed)
    np.random.seed(seed)
    torch.manual_seed(seed)
    torch.use_deterministic_algorithms(True)


def read_split(path: Path) -> tuple[list[str], list[str]]:
    """Read a ``text,label`` CSV into parallel lists."""
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    return [row["text"] for row in rows], [row["label"] for row in rows]


def train_wordpiece(texts: Sequence[str], vocab_size: int) -> dict[str, int]:
    """Learn a lower-casing BERT-style WordPiece vocabulary from ``texts``."""
    tokenizer = Tokenizer(WordPiece(unk_token="[UNK]"))
    tokenizer.normalizer = normalizers.BertNormalizer(lowercase=True)
    tokenizer.pre_tokenizer = pre_tokenizers.BertPreTokenizer()
    trainer = trainers.WordPieceTrainer(
        vocab_size=vocab_size, min_frequency=2, special_tokens=list(SPECIAL_TOKENS)
    )
    tokenizer.train_from_iterator(texts, trainer=trainer)
    return tokenizer.get_vocab()


def build_tokenizer(vocab: dict[str, int], max_length: int) -> BertTokenizer:
    """Wrap a WordPiece vocabulary as a transformers (fast, tokenizers-backed) BERT tokenizer."""
    return BertTokenizer(vocab=vocab, do_lower_case=True, model_max_length=max_length)


def build_model(settings: Settings, vocab_size: int, labels: Sequence[str]) -> BertForSequenceClassification:
    """Initialise a small BERT classifier from a config, with eager attention."""
    config = BertConfig(
        vocab_size=vocab_size,
        hidden_size=settings.hidden_size,
        num_hidden_layers=settings.num_layers,
        num_attention_heads=settings.num_heads,
        intermediate_size=settings.intermediate_size,
        max_position_embeddings=settings.max_length,
        hidden_dropout_prob=settings.dropout,
        attention_probs_dropout_prob=settings.dropout,
        pad_token_id=0,
        id2label=dict(enumerate(labels)),
        label2id={label: i for i, label in enumerate(labels)},
        problem_type="single_label_classification",
        attn_implementation="eager",
    )
    return BertForSequenceClassification(config)


def load_start(folder: Path) -> tuple[BertForSequenceClassification, BertTokenizer]:
    """An existing checkpoint and its own tokenizer, to be trained further."""
    tokenizer = BertTokenizer.from_pretrained(str(folder), local_files_only=True)
    model = BertForSequenceClassification.from_pretrained(
        str(folder), local_files_only=True, attn_implementation="eager"
    )
    return model, tokenizer


def read_mask(path: Path) -> dict[int, list[int]]:
    """Read a ``{"layer": [head, ...]}`` mask file (layers and heads counted from 0)."""
    raw = json.loads(path.read_text(encoding="utf-8"))
    return {int(layer): sorted(int(h) for h in heads) for layer, heads in raw.items()}


def switch_off_heads(model: BertForSequenceClassification, mask: dict[int, list[int]]) -> int:
    """Zero the masked heads' columns of each attention output projection and keep them at zero.

    A head's context vector enters the layer only through its ``head_dim`` columns of the
    output projection W_O, so zero columns remove the head exactly. A gradient hook zeroes
    the same columns of every gradient: with AdamW both moments then stay 0 and the decoupled
    weight decay of a zero weight is 0, so the columns stay exactly zero through training.
    Returns the number of heads switched off.
    """
    config = model.config
    width = config.hidden_size // config.num_attention_heads
    count = 0
    for layer, heads in mask.items():
        dense = model.bert.encoder.layer[layer].attention.output.dense
        keep = torch.ones_like(dense.weight)
        for head in heads:
            keep[:, head * width : (head + 1) * width] = 0.0
            count += 1
        with torch.no_grad():
            dense.weight.mul_(keep)
        dense.weight.register_hook(lambda grad, keep=keep: grad * keep)
    return count


def make_batches(
    tokenizer: BertTokenizer, texts: Sequence[str], batch_size: int, order: Sequence[int]
) -> list[tuple[list[int], dict[str, torch.Tensor]]]:
    """Tokenise ``texts`` in ``order`` into padded batches; return (row indices, tensors)."""
    batches = []
    for start in range(0, len(order), batch_size):
        index = list(order[start : start + batch_size])
        encoded = tokenizer([texts[i] for i in index], padding=True, truncation=True, return_tensors="pt")
        batches.append((index, dict(encoded)))
    return batches


def mask_tokens(
    inputs: dict[str, torch.Tensor], mask_id: int, rate: float, generator: torch.Generator
) -> dict[str, torch.Tensor]:
    """Word-dropout augmentation: replace a random ``rate`` of real tokens with ``[MASK]``.

    ``[CLS]``, ``[SEP]`` and padding are never masked. This keeps the from-scratch model
    from leaning on one memorised word per intent.
    """
    ids = inputs["input_ids"]
    real = inputs["attention_mask"].bool()
    real[:, 0] = False
    real &= ids != ids.new_tensor(SEP_ID)
    hit = (torch.rand(ids.shape, generator=generator) < rate) & real
    return {**inputs, "input_ids": ids.masked_fill(hit, mask_id)}


def linear_schedule(
    optimizer: torch.optim.Optimizer, warmup: int, total: int
) -> torch.optim.lr_scheduler.LambdaLR:
    """Linear warm-up to the peak learning rate, then linear decay to zero."""

    def factor(step: int) -> float:
        if step < warmup:
            return (step + 1) / warmup
        return max(0.0, (total - step) / max(1, total - warmup))

    return torch.optim.lr_scheduler.LambdaLR(optimizer, factor)


def train_model(
    model: BertForSequenceClassification,
    tokenizer: BertTokenizer,
    texts: Sequence[str],
    label_ids: Sequence[int],
    settings: Settings,
) -> list[float]:
    """Train ``model`` in place with AdamW; return the mean loss of each epoch."""
    targets = torch.tensor(label_ids)
    generator = torch.Generator().manual_seed(settings.seed)
    steps_per_epoch = math.ceil(len(texts) / settings.batch_size)
    total = steps_per_epoch * settings.epochs
    optimizer = torch.optim.AdamW(
        model.parameters(), lr=settings.learning_rate, weight_decay=settings.weight_decay
    )
    scheduler = linear_schedule(optimizer, int(total * settings.warmup_fraction), total)
    losses = []
    model.train()
    for epoch in range(settings.epochs):
        order = torch.randperm(len(texts), generator=generator).tolist()
        epoch_loss = 0.0
        for index, inputs in make_batches(tokenizer, texts, settings.batch_size, order):
            inputs = mask_tokens(inputs, tokenizer.mask_token_id, settings.token_mask_rate, generator)
            loss = model(**inputs, labels=targets[index]).loss
            loss.backward()
            torch.nn.utils.clip_grad_norm_(model.parameters(), 1.0)
            optimizer.step()
            scheduler.step()
            optimizer.zero_grad()
            epoch_loss += loss.item() * len(index)
        losses.append(epoch_loss / len(texts))
        print(f"epoch {epoch + 1:2d}/{settings.epochs}  loss {losses[-1]:.4f}", flush=True)
    model.eval()
    return losses


@torch.no_grad()
def predict(
    model: BertForSequenceClassification, tokenizer: BertTokenizer, texts: Sequence[str], batch_size: int = 64
) -> tuple[list[int], list[float]]:
    """Predict label ids and their softmax confidence for ``texts``, in batches."""
    model.eval()
    ids: list[int] = []
    confidences: list[float] = []
    for _, inputs in make_batches(tokenizer, texts, batch_size, range(len(texts))):
        probs = model(**inputs).logits.softmax(dim=-1)
        best = probs.max(dim=-1)
        ids.extend(best.indices.tolist())
        confidences.extend(best.values.tolist())
    return ids, confidences


def compute_metrics(expected: Sequence[str], predicted: Sequence[str]) -> dict[str, float | int]:
    """Accuracy and macro-F1 with scikit-learn, rounded for the record."""
    return {
        "accuracy": round(float(accuracy_score(expected, predicted)), 4),
        "macro_f1": round(float(f1_score(expected, predicted, average="macro")), 4),
        "n_eval": len(expected),
    }


def pick_misfires(predictions: Sequence[Prediction], count: int = 10) -> list[Prediction]:
    """Pick ``count`` wrong answers, one per (expected, predicted) pair first, in eval order."""
    wrong = [p for p in predictions if p.expected != p.predicted]
    seen: set[tuple[str, str]] = set()
    first, rest = [], []
    for p in wrong:
        pair = (p.expected, p.predicted)
        (rest if pair in seen else first).append(p)
        seen.add(pair)
    return (first + rest)[:count]


def confusion_pairs(predictions: Sequence[Prediction], top: int = 6) -> list[tuple[str, str, int]]:
    """The most frequent (expected, predicted) error pairs."""
    counts: dict[tuple[str, str], int] = {}
    for p in predictions:
        if p.expected != p.predicted:
            counts[(p.expected, p.predicted)] = counts.get((p.expected, p.predicted), 0) + 1
    ranked = sorted(counts.items(), key=lambda item: (-item[1], item[0]))
    return [(a, b, n) for (a, b), n in ranked[:top]]


TOKENIZER_FILES = ("tokenizer.json", "tokenizer_config.json", "vocab.txt")


def save_checkpoint(
    model: BertForSequenceClassification,
    tokenizer: BertTokenizer,
    out_dir: Path,
    tokenizer_from: Path | None = None,
) -> None:
    """Write a standard transformers checkpoint (safetensors only) plus ``vocab.txt``.

    transformers 5 does not serialise ``attn_implementation``; the key is added to
    ``config.json`` by hand so that a plain ``from_pretrained`` returns eager attention
    (and hence attention weights). Callers may still override it. A retrained checkpoint
    copies its starting point's tokenizer files byte for byte (``tokenizer_from``).
    """
    if out_dir.exists():
        shutil.rmtree(out_dir)
    out_dir.mkdir(parents=True)
    model.save_pretrained(out_dir, safe_serialization=True)
    if tokenizer_from is not None:
        for name in TOKENIZER_FILES:
            shutil.copyfile(tokenizer_from / name, out_dir / name)
    else:
        tokenizer.save_pretrained(out_dir)
        vocab = sorted(tokenizer.get_vocab().items(), key=lambda item: item[1])
        (out_dir / "vocab.txt").write_text("".join(f"{token}\n" for token, _ in vocab), encoding="utf-8")
    config_path = out_dir / "config.json"
    config = json.loads(config_path.read_text(encoding="utf-8"))
    config["attn_implementation"] = "eager"
    config_path.write_text(json.dumps(config, indent=2, sort_keys=True) + "\n", encoding="utf-8")


def directory_size(path: Path) -> int:
    """Total size in bytes of the files under ``path``."""
    return sum(f.stat().st_size for f in path.rglob("*") if f.is_file())


def markdown_cell(text: str) -> str:
    """Escape a string for a Markdown table cell."""
    return text.replace("|", "\\|")


def render_card(
    settings: Settings,
    metrics: dict[str, float | int],
    n_train: int,
    labels: Sequence[str],
    misfires: Sequence[Prediction],
    pairs: Sequence[tuple[str, str, int]],
    n_params: int,
    seconds: float,
    name: str = "ferry_intents",
    switched: int = 0,
) -> str:
    """Render the model card as Markdown (``switched``: heads switched off in a retrained checkpoint)."""
    misfire_rows = "\n".join(
        f"| {i} | {markdown_cell(p.text)} | {p.expected} | {p.predicted} | {p.confidence:.2f} |"
        for i, p in enumerate(misfires, start=1)
    )
    pair_rows = "\n".join(f"| {a} | {b} | {n} |" for a, b, n in pairs)
    settings_rows = "\n".join(f"| {key} | {value} |" for key, value in asdict(settings).items())
    rerun_note = (
        ""
        if settings.init_from
        else " The `tokenizers` WordPiece trainer\nbreaks ties between equally frequent pieces in an unseeded "
        "order, so a rerun can land about\none percentage point away from the numbers below."
    )
    if settings.init_from:
        origin = (
            f"Retrained from `{settings.init_from}` (same tokenizer, same labels) for {settings.epochs} "
            f"epoch(s) at a peak learning rate of {settings.learning_rate:g}"
            + (
                f", with {switched} of {settings.num_layers * settings.num_heads} heads switched off for good "
                f"(listed in `switched_off.json` beside this card; their columns of the attention output projection are "
                "zero and were held at zero while training, so they contribute nothing)"
                if switched
                else ""
            )
            + ". It exists to be compared with its starting point: `headcount compare`."
        )
        architecture = f"`BertForSequenceClassification`. {origin}"
    else:
        architecture = "`BertForSequenceClassification` trained from scratch (no pre-training):"
    return f"""# {name}: sample intent classifier for Tidewren Ferries

**Note: the data is invented for demonstration.** Tidewren Ferries, the Saltmarrow Sound,
its harbours (Quillhaven, Marrowby, Tolland Isle, ...) and its Wrenpoints loyalty scheme
do not exist. Every utterance was produced by a seeded template generator. This model is a
small, deliberately imperfect example for inspecting attention heads; it is not meant for
real customer traffic.

## Scenario

The chat assistant of a fictional coastal ferry operator sorts short customer messages
into {len(labels)} intents:
{", ".join(f"`{label}`" for label in labels)}.
Several pairs are confusable on purpose: change vs cancel, cancel vs refund, timetable vs
disruption, and vehicle vs foot-passenger fares.

## Data

Generated by `sample_models/scripts/make_data.py` (seeded) into `sample_models/data/`:

- `ferry_train.csv`: {n_train} rows from the training template pools, with casual and
  formal register, openers, sign-offs and keyboard typos.
- `ferry_eval.csv`: {metrics["n_eval"]} held-out rows from *separate* template pools:
  sentence frames never used in training (mostly everyday wording, a few idioms), rare
  words (harbours, vehicles, pets, items and days that never occur in training), some
  unseen openers and small talk, and a hard pool (about one row in seven) of negations
  ("don't cancel it, just move it") and messages with two cues. No eval text occurs in
  the training split, even after lower-casing and removing punctuation.

## Architecture

{architecture}
{settings.num_layers} layers x {settings.num_heads} heads, hidden size {settings.hidden_size},
intermediate size {settings.intermediate_size}, max {settings.max_length} positions,
{n_params:,} parameters, eager attention. Tokenizer: lower-casing WordPiece with
{settings.vocab_size} entries at most, trained on the training split with `tokenizers`
(`[CLS] [SEP] [PAD] [UNK] [MASK]`). Weights are stored as safetensors only.

## Training

`sample_models/scripts/train.py`: AdamW, linear warm-up then linear decay, cross-entropy,
gradient clipping at 1.0, CPU with {settings.threads} threads; Python, NumPy and torch
seeded. Training took {seconds:.0f} s on the build machine.{rerun_note}

| setting | value |
| --- | --- |
{settings_rows}

## Held-out results

Measured by the training script on `ferry_eval.csv` with scikit-learn
(`accuracy_score`, `f1_score(average="macro")`):

| metric | value |
| --- | --- |
| accuracy | {metrics["accuracy"]:.4f} ({100 * metrics["accuracy"]:.1f}%) |
| macro_f1 | {metrics["macro_f1"]:.4f} ({100 * metrics["macro_f1"]:.1f}%) |
| n_eval | {metrics["n_eval"]} |

Most frequent confusions:

| expected | predicted | count |
| --- | --- | --- |
{pair_rows}

## Ten misfires from the eval split

| # | text | expected | predicted | confidence |
| --- | --- | --- | --- | --- |
{misfire_rows}

## Reproduce

```bash
.venv/bin/python sample_models/scripts/make_data.py
.venv/bin/python sample_models/scripts/train.py{retrain_options(settings, name)}
```
"""


def retrain_options(settings: Settings, name: str) -> str:
    """The command-line options that retrain a checkpoint the way ``settings`` say ('' from scratch)."""
    if not settings.init_from:
        return ""
    parts = [f"--init-from {settings.init_from}"]
    if settings.switched_off:
        parts.append(f"--switch-off {settings.switched_off}")
    parts += [
        f"--epochs {settings.epochs}",
        f"--learning-rate {settings.learning_rate:g}",
        f"--out-dir sample_models/{name}",
    ]
    return " \\\n    " + " \\\n    ".join(parts)


def parse_args(argv: Sequence[str] | None) -> tuple[Settings, Path]:
    """Read command-line overrides; return the run settings and the output folder."""
    defaults = Settings()
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--epochs", type=int, default=defaults.epochs)
    parser.add_argument("--seed", type=int, default=defaults.seed)
    parser.add_argument("--learning-rate", type=float, default=defaults.learning_rate)
    parser.add_argument("--out-dir", type=Path, default=OUT_DIR)
    parser.add_argument(
        "--init-from", type=Path, default=None, help="retrain this checkpoint (its tokenizer is kept)"
    )
    parser.add_argument(
        "--switch-off",
        type=Path,
        default=None,
        metavar="MASK.json",
        help='heads to switch off for good, as {"layer": [head, ...]} (needs --init-from)',
    )
    args = parser.parse_args(argv)
    if args.switch_off is not None and args.init_from is None:
        parser.error("--switch-off needs --init-from")
    settings = replace(
        defaults,
        epochs=args.epochs,
        seed=args.seed,
        learning_rate=args.learning_rate,
        init_from=_relative(args.init_from),
        switched_off=_relative(args.switch_off),
    )
    return settings, args.out_dir


def _relative(path: Path | None) -> str:
    """``path`` relative to the project (as recorded in the model card), or ''."""
    if path is None:
        return ""
    try:
        return str(path.resolve().relative_to(SAMPLE_DIR.parent))
    except ValueError:
        return str(path)


def _from_checkpoint(settings: Settings, config: BertConfig) -> Settings:
    """Record the architecture a retrained checkpoint really has."""
    return replace(
        settings,
        vocab_size=config.vocab_size,
        hidden_size=config.hidden_size,
        num_layers=config.num_hidden_layers,
        num_heads=config.num_attention_heads,
        intermediate_size=config.intermediate_size,
        max_length=config.max_position_embeddings,
    )


def main(argv: Sequence[str] | None = None) -> None:
    """Train, evaluate and write the checkpoint, metrics and model card."""
    settings, out_dir = parse_args(argv)
    torch.set_num_threads(settings.threads)
    seed_everything(settings.seed)
    train_texts, train_labels = read_split(DATA_DIR / "ferry_train.csv")
    eval_texts, eval_labels = read_split(DATA_DIR / "ferry_eval.csv")
    labels = sorted(set(train_labels))

    started = time.perf_counter()
    switched, mask = 0, None
    if settings.init_from:
        model, tokenizer = load_start(SAMPLE_DIR.parent / settings.init_from)
        if [model.config.id2label[i] for i in range(len(model.config.id2label))] != labels:
            raise SystemExit(f"{settings.init_from}: its labels differ from the training split's")
        if settings.switched_off:
            mask = read_mask(SAMPLE_DIR.parent / settings.switched_off)
            switched = switch_off_heads(model, mask)
        settings = _from_checkpoint(settings, model.config)
    else:
        tokenizer = build_tokenizer(train_wordpiece(train_texts, settings.vocab_size), settings.max_length)
        model = build_model(settings, len(tokenizer), labels)
    label2id = model.config.label2id
    train_model(model, tokenizer, train_texts, [label2id[x] for x in train_labels], settings)
    seconds = time.perf_counter() - started

    ids, confidences = predict(model, tokenizer, eval_texts)
    predicted = [labels[i] for i in ids]
    metrics = compute_metrics(eval_labels, predicted)
    predictions = [Prediction(*row) for row in zip(eval_texts, eval_labels, predicted, confidences)]

    start_dir = SAMPLE_DIR.parent / settings.init_from if settings.init_from else None
    save_checkpoint(model, tokenizer, out_dir, tokenizer_from=start_dir)
    if mask is not None:  # kept beside the checkpoint (the folder was emptied before saving)
        (out_dir / "switched_off.json").write_text(json.dumps(mask, indent=2) + "\n", encoding="utf-8")
    (out_dir / "metrics.json").write_text(json.dumps(metrics, indent=2) + "\n", encoding="utf-8")
    card = render_card(
        settings,
        metrics,
        len(train_texts),
        labels,
        pick_misfires(predictions),
        confusion_pairs(predictions),
        model.num_parameters(),
        seconds,
        name=out_dir.name,
        switched=switched,
    )
    (out_dir / "README.md").write_text(card, encoding="utf-8")
    print(json.dumps({**metrics, "train_seconds": round(seconds, 1)}))
    print(f"checkpoint: {out_dir} ({directory_size(out_dir) / 1e6:.2f} MB)")


if __name__ == "__main__":
    main()
