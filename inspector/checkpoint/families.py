"""The adapter table: where each encoder family keeps its attention parts.

Adding a family is one entry in :data:`FAMILIES`. Every path is relative to the
model's base encoder (``model.base_model``). ``blocks`` is a regular expression
matching the module that holds one layer's attention; the other paths are
relative to that block. Shared-weight families (ALBERT) match one block that is
called once per layer; the capture code counts calls, so that works unchanged.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Literal

from torch import nn

from inspector.errors import HeadcountError

WeightSource = Literal["output", "dropout"]
QkvLayout = Literal["separate"]


@dataclass(frozen=True)
class Family:
    """Where one family's attention weights, projections and heads live."""

    blocks: str
    """Regex for the per-layer block module names (relative to the base model)."""
    attention: str
    """The self-attention module; its forward returns ``(context, weights)``."""
    query: str
    key: str
    value: str
    out_proj: str
    """The linear layer that mixes the concatenated heads back (W_O)."""
    weights_from: WeightSource = "output"
    """``output``: weights are ``attention(...)[1]``; ``dropout``: they are the
    input of ``attention.dropout`` (families whose forward only returns weights
    when asked)."""
    qkv_layout: QkvLayout = "separate"
    """How heads sit in the query/key/value projections: ``separate`` = three
    linear layers, head h owning output rows ``h*d:(h+1)*d`` of each. A family
    with one fused projection adds its layout here and in :func:`head_rows`."""


_BERT_LIKE = Family(
    blocks=r"encoder\.layer\.\d+",
    attention="attention.self",
    query="attention.self.query",
    key="attention.self.key",
    value="attention.self.value",
    out_proj="attention.output.dense",
)

FAMILIES: dict[str, Family] = {
    "bert": _BERT_LIKE,
    "roberta": _BERT_LIKE,
    "xlm-roberta": _BERT_LIKE,
    "electra": _BERT_LIKE,
    "distilbert": Family(
        blocks=r"transformer\.layer\.\d+",
        attention="attention",
        query="attention.q_lin",
        key="attention.k_lin",
        value="attention.v_lin",
        out_proj="attention.out_lin",
    ),
    "albert": Family(
        blocks=r"encoder\.albert_layer_groups\.\d+\.albert_layers\.\d+",
        attention="attention",
        query="attention.query",
        key="attention.key",
        value="attention.value",
        out_proj="attention.dense",
    ),
    "deberta-v2": Family(
        blocks=r"encoder\.layer\.\d+",
        attention="attention.self",
        query="attention.self.query_proj",
        key="attention.self.key_proj",
        value="attention.self.value_proj",
        out_proj="attention.output.dense",
        weights_from="dropout",
    ),
    "mpnet": Family(
        blocks=r"encoder\.layer\.\d+",
        attention="attention.attn",
        query="attention.attn.q",
        key="attention.attn.k",
        value="attention.attn.v",
        out_proj="attention.attn.o",
        weights_from="dropout",
    ),
}


def family_for(model_type: str) -> Family:
    """Return the adapter for ``model_type`` or raise a readable error."""
    try:
        return FAMILIES[model_type]
    except KeyError:
        known = ", ".join(sorted(FAMILIES))
        raise HeadcountError(f"model type '{model_type}' is not supported yet (supported: {known})") from None


@dataclass
class LayerParts:
    """The concrete modules of one attention block."""

    attention: nn.Module
    query: nn.Linear
    key: nn.Linear
    value: nn.Linear
    out_proj: nn.Linear


def layer_parts(base_model: nn.Module, family: Family) -> list[LayerParts]:
    """Find every distinct attention block of ``base_model`` in module order."""
    pattern = re.compile(family.blocks + r"$")
    blocks = [m for name, m in base_model.named_modules() if pattern.match(name)]
    if not blocks:
        raise HeadcountError("could not find the attention layers of this model")
    return [
        LayerParts(
            attention=b.get_submodule(family.attention),
            query=b.get_submodule(family.query),
            key=b.get_submodule(family.key),
            value=b.get_submodule(family.value),
            out_proj=b.get_submodule(family.out_proj),
        )
        for b in blocks
    ]


def head_rows(family: Family, parts: LayerParts, num_heads: int, head: int) -> list[tuple[nn.Linear, slice]]:
    """The output rows of the query, key and value projections that compute ``head``.

    Returns
    -------
    list of (linear layer, row slice)
        Zeroing these rows (weight and bias) makes the head's queries, keys and
        values zero. Layout from :attr:`Family.qkv_layout`.
    """
    if family.qkv_layout != "separate":
        raise HeadcountError(f"no head slicing for the '{family.qkv_layout}' projection layout")
    out = []
    for linear in (parts.query, parts.key, parts.value):
        d = linear.out_features // num_heads
        out.append((linear, slice(head * d, (head + 1) * d)))
    return out


def head_columns(parts: LayerParts, num_heads: int, head: int) -> tuple[nn.Linear, slice]:
    """The input columns of the attention output projection W_O that read ``head``'s context vector.

    ``Concat(head_1, ..., head_h) W_O``: head h occupies input features
    ``h*d:(h+1)*d`` of W_O (Vaswani et al. 2017, sec. 3.2.2).
    """
    d = parts.out_proj.in_features // num_heads
    return parts.out_proj, slice(head * d, (head + 1) * d)
