"""Build small randomly initialised checkpoints of every supported family (test helper).

Each checkpoint is saved with safetensors and the MiniLM WordPiece tokenizer, so
the tests never need a download.
"""

from __future__ import annotations

from pathlib import Path

import torch
import transformers

SMALL = dict(hidden_size=32, num_hidden_layers=2, num_attention_heads=4, intermediate_size=64)

CONFIGS = {
    "bert": lambda v: transformers.BertConfig(vocab_size=v, **SMALL),
    "roberta": lambda v: transformers.RobertaConfig(vocab_size=v, **SMALL, pad_token_id=0),
    "xlm-roberta": lambda v: transformers.XLMRobertaConfig(vocab_size=v, **SMALL, pad_token_id=0),
    "electra": lambda v: transformers.ElectraConfig(vocab_size=v, embedding_size=16, **SMALL),
    "distilbert": lambda v: transformers.DistilBertConfig(
        vocab_size=v, dim=32, n_layers=2, n_heads=4, hidden_dim=64
    ),
    "albert": lambda v: transformers.AlbertConfig(vocab_size=v, embedding_size=16, **SMALL),
    "deberta-v2": lambda v: transformers.DebertaV2Config(
        vocab_size=v, **SMALL, relative_attention=True, pos_att_type=["p2c", "c2p"], max_relative_positions=64
    ),
    "mpnet": lambda v: transformers.MPNetConfig(vocab_size=v, **SMALL),
    "camembert": lambda v: transformers.CamembertConfig(vocab_size=v, **SMALL, pad_token_id=0),
    "data2vec-text": lambda v: transformers.Data2VecTextConfig(vocab_size=v, **SMALL, pad_token_id=0),
    "xlm-roberta-xl": lambda v: transformers.XLMRobertaXLConfig(vocab_size=v, **SMALL, pad_token_id=0),
    "ernie": lambda v: transformers.ErnieConfig(vocab_size=v, **SMALL),
    "megatron-bert": lambda v: transformers.MegatronBertConfig(vocab_size=v, **SMALL),
    "mobilebert": lambda v: transformers.MobileBertConfig(
        vocab_size=v,
        hidden_size=32,
        embedding_size=16,
        true_hidden_size=16,
        intra_bottleneck_size=16,
        num_hidden_layers=2,
        num_attention_heads=4,
        intermediate_size=32,
        num_feedforward_networks=2,
    ),
    "roformer": lambda v: transformers.RoFormerConfig(vocab_size=v, embedding_size=32, **SMALL),
    "deberta": lambda v: transformers.DebertaConfig(
        vocab_size=v, **SMALL, relative_attention=True, pos_att_type=["p2c", "c2p"], max_relative_positions=64
    ),
    # Layer 0 attends globally, layer 1 within a window of 2 tokens each side (local_attention = 4).
    "modernbert": lambda v: transformers.ModernBertConfig(
        vocab_size=v,
        **SMALL,
        local_attention=4,
        global_attn_every_n_layers=2,
        pad_token_id=0,
        cls_token_id=101,
        sep_token_id=102,
        bos_token_id=101,
        eos_token_id=102,
    ),
}
NEW_FAMILIES = (
    "camembert",
    "data2vec-text",
    "xlm-roberta-xl",
    "ernie",
    "megatron-bert",
    "mobilebert",
    "roformer",
    "deberta",
    "modernbert",
)
"""The families added with fused projections, rotary positions and local windows (issue 11)."""

LABELS = ["book_crossing", "cancel_booking", "timetable"]


def build_checkpoint(
    family: str, folder: Path, tokenizer_dir: Path, task: str = "sequence", **shape: object
) -> Path:
    """Save a seeded random ``family`` model (classifier or bare encoder) into ``folder``.

    ``shape`` overrides config fields (e.g. ``num_hidden_layers=12`` or ``relative_attention=False``).
    """
    tok = transformers.AutoTokenizer.from_pretrained(str(tokenizer_dir), local_files_only=True)
    config = CONFIGS[family](len(tok))
    for key, value in shape.items():
        setattr(config, key, value)
    config.id2label = dict(enumerate(LABELS))
    config.label2id = {v: k for k, v in config.id2label.items()}
    torch.manual_seed(0)
    auto = {
        "sequence": transformers.AutoModelForSequenceClassification,
        "token": transformers.AutoModelForTokenClassification,
        "encoder": transformers.AutoModel,
    }[task]
    model = auto.from_config(config)
    model.save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder


def build_bert(folder: Path, tokenizer_dir: Path, labels: list[str], **shape: int) -> Path:
    """Save a seeded random BERT classifier of any shape (``hidden_size``, ``num_hidden_layers`` ...) into ``folder``."""
    tok = transformers.AutoTokenizer.from_pretrained(str(tokenizer_dir), local_files_only=True)
    config = transformers.BertConfig(
        vocab_size=len(tok),
        id2label=dict(enumerate(labels)),
        label2id={k: i for i, k in enumerate(labels)},
        **shape,
    )
    torch.manual_seed(0)
    transformers.BertForSequenceClassification(config).save_pretrained(str(folder))
    tok.save_pretrained(str(folder))
    return folder
