"""The adapter table: where each encoder family keeps its attention parts.

Adding a family is one entry in :data:`FAMILIES`. Every path is relative to the
model's base encoder (``model.base_model``). ``blocks`` is a regular expression
matching the module that holds one layer's attention; the other paths are
relative to that block. Shared-weight families (ALBERT) match one block that is
called once per layer; the capture code counts calls, so that works unchanged.

Query, key and value come either from three linear layers (``query``, ``key``,
``value``) or from one fused projection (``fused``) whose output is sliced; the
entry says how. ``positions`` and ``windows`` tell the metrics and the window
what the family does with token positions (rotary positions, local attention
windows). ``derived`` lists tensors the family ties or derives, which may be
absent from a checkpoint without anything being initialised at random.
Families transformers cannot give per-head weights for are in
:data:`UNSUPPORTED`, with the reason.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any, Literal

from torch import Tensor, nn

from inspector.errors import HeadcountError

WeightSource = Literal["output", "dropout"]
FusedLayout = Literal["blocks", "per-head"]
Positions = Literal["absolute", "relative", "rotary-halves", "rotary-pairs"]
Projection = Literal["query", "key", "value"]
_SLOT: dict[str, int] = {"query": 0, "key": 1, "value": 2}


@dataclass(frozen=True)
class FusedProjection:
    """One linear layer that computes query, key and value together, and how to slice its output."""

    path: str
    """The fused linear layer, relative to the block."""
    layout: FusedLayout
    """``blocks``: the output is ``[Q | K | V]``, each ``heads * d`` wide, heads side by side
    inside each (``view(..., 3, heads, d)``); ``per-head``: head by head, ``[q_h | k_h | v_h]``
    (``view(..., heads, 3, d)``)."""
    query_bias: str | None = None
    """A parameter (relative to the block) added to the query slice after the projection."""
    value_bias: str | None = None
    """A parameter (relative to the block) added to the value slice after the projection."""


def slice_fused(output: Tensor, which: Projection, heads: int, layout: FusedLayout) -> Tensor:
    """Cut one of query, key, value out of a fused projection's output.

    Parameters
    ----------
    output : tensor of shape (..., 3 * heads * d)
    which : {'query', 'key', 'value'}
    heads : int
    layout : {'blocks', 'per-head'}
        See :class:`FusedProjection`.

    Returns
    -------
    tensor of shape (..., heads * d)
        Heads side by side, ``[x_0 | x_1 | ... ]``, as three separate projections would give.
    """
    d = output.shape[-1] // (3 * heads)
    if layout == "blocks":
        return output.unflatten(-1, (3, heads * d))[..., _SLOT[which], :]
    return output.unflatten(-1, (heads, 3, d))[..., _SLOT[which], :].flatten(-2)


@dataclass(frozen=True)
class Family:
    """Where one family's attention weights, projections and heads live."""

    blocks: str
    """Regex for the per-layer block module names (relative to the base model)."""
    attention: str
    """The self-attention module; its forward returns ``(context, weights)``."""
    out_proj: str
    """The linear layer that mixes the concatenated heads back (W_O)."""
    query: str | None = None
    key: str | None = None
    value: str | None = None
    fused: FusedProjection | None = None
    """Set instead of query/key/value when one layer projects all three."""
    weights_from: WeightSource = "output"
    """``output``: weights are ``attention(...)[1]``; ``dropout``: they are the
    input of ``attention.dropout`` (families whose forward only returns weights
    when asked)."""
    positions: Positions = "absolute"
    """How token positions enter: learned absolute embeddings, relative terms in the
    attention score, or rotary positions applied to queries and keys (``rotary-halves``
    rotates the two halves of each head's vector, ``rotary-pairs`` neighbouring pairs)."""
    position_offset: bool = False
    """Position ids start after the padding id (RoBERTa-style), so the longest input is
    ``max_position_embeddings - pad_token_id - 1`` tokens."""
    windows: Callable[[Any], list[int | None]] | None = None
    """Per layer, the largest distance ``|i - j|`` a query can attend over (None: global)."""
    derived: tuple[str, ...] = ()
    """Regexes of tensors the family ties or derives; a checkpoint may lack them."""
    variant_problem: Callable[[dict], str | None] | None = None
    """Returns why a configuration variant of the family cannot be analysed exactly, or None."""
    shared_layers: bool = False
    """One stored block serves several layers (ALBERT), so weights hold fewer blocks than layers."""

    def layer_windows(self, config: Any) -> list[int | None]:
        """The attention window of each layer (None for global attention)."""
        n = int(config.num_hidden_layers)
        return list(self.windows(config)) if self.windows is not None else [None] * n


_BERT_LIKE = Family(
    blocks=r"encoder\.layer\.\d+",
    attention="attention.self",
    query="attention.self.query",
    key="attention.self.key",
    value="attention.self.value",
    out_proj="attention.output.dense",
)
_ROBERTA_LIKE = replace(_BERT_LIKE, position_offset=True)


def _modernbert_windows(config: Any) -> list[int | None]:
    # transformers' bidirectional sliding-window mask lets query i see key j when
    # |i - j| <= config.sliding_window (= local_attention // 2).
    return [int(config.sliding_window) if t == "sliding_attention" else None for t in config.layer_types]


def _roformer_variant(config: dict) -> str | None:
    if config.get("rotary_value"):
        return (
            "this RoFormer rotates its value vectors too (rotary_value), so value-weighted attention "
            "cannot be read from the value projection"
        )
    return None


def _deberta_variant(config: dict) -> str | None:
    if config.get("talking_head"):
        return "this DeBERTa mixes heads after the softmax (talking_head), so no weight belongs to one head"
    return None


FAMILIES: dict[str, Family] = {
    "bert": _BERT_LIKE,
    "ernie": _BERT_LIKE,
    "megatron-bert": _BERT_LIKE,
    "mobilebert": _BERT_LIKE,
    "electra": _BERT_LIKE,
    "roberta": _ROBERTA_LIKE,
    "xlm-roberta": _ROBERTA_LIKE,
    "camembert": _ROBERTA_LIKE,
    "data2vec-text": _ROBERTA_LIKE,
    "xlm-roberta-xl": _ROBERTA_LIKE,
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
        shared_layers=True,
    ),
    "deberta-v2": Family(
        blocks=r"encoder\.layer\.\d+",
        attention="attention.self",
        query="attention.self.query_proj",
        key="attention.self.key_proj",
        value="attention.self.value_proj",
        out_proj="attention.output.dense",
        weights_from="dropout",
        positions="relative",
    ),
    "deberta": Family(
        blocks=r"encoder\.layer\.\d+",
        attention="attention.self",
        fused=FusedProjection(
            "attention.self.in_proj",
            layout="per-head",
            query_bias="attention.self.q_bias",
            value_bias="attention.self.v_bias",
        ),
        out_proj="attention.output.dense",
        weights_from="dropout",
        positions="relative",
        variant_problem=_deberta_variant,
    ),
    "mpnet": Family(
        blocks=r"encoder\.layer\.\d+",
        attention="attention.attn",
        query="attention.attn.q",
        key="attention.attn.k",
        value="attention.attn.v",
        out_proj="attention.attn.o",
        weights_from="dropout",
        positions="relative",
        position_offset=True,
    ),
    "roformer": replace(_BERT_LIKE, positions="rotary-pairs", variant_problem=_roformer_variant),
    "modernbert": Family(
        blocks=r"layers\.\d+",
        attention="attn",
        fused=FusedProjection("attn.Wqkv", layout="blocks"),
        out_proj="attn.Wo",
        positions="rotary-halves",
        windows=_modernbert_windows,
    ),
}

UNSUPPORTED: dict[str, str] = {
    "fnet": "FNet mixes tokens with Fourier transforms and has no attention weights at all",
    "yoso": "YOSO approximates attention by hashing and returns no attention weights",
    "nystromformer": "Nystromformer approximates each head's softmax with landmarks, so its weights are not the "
    "ones the head used",
    "longformer": "Longformer returns its local attention as bands around each token, not one weight per "
    "token pair",
    "reformer": "Reformer attends inside hashed buckets, so there is no weight for every token pair",
    "funnel": "Funnel Transformer pools the tokens between blocks, so later layers no longer attend over the "
    "sentence's tokens",
}
"""Families transformers knows but cannot give exact per-head weights for, and why."""


def family_for(model_type: str, config: dict | None = None) -> Family:
    """Return the adapter for ``model_type`` (and check the config's variant) or raise a readable error."""
    family = FAMILIES.get(model_type)
    if family is None:
        if model_type in UNSUPPORTED:
            raise HeadcountError(f"model type '{model_type}' cannot be analysed: {UNSUPPORTED[model_type]}")
        known = ", ".join(sorted(FAMILIES))
        raise HeadcountError(f"model type '{model_type}' is not supported yet (supported: {known})")
    problem = family.variant_problem(config or {}) if family.variant_problem else None
    if problem:
        raise HeadcountError(f"cannot be analysed exactly: {problem}")
    return family


@dataclass
class LayerParts:
    """The concrete modules of one attention block."""

    attention: nn.Module
    out_proj: nn.Linear
    query: nn.Module | None = None
    key: nn.Module | None = None
    value: nn.Module | None = None
    fused: nn.Module | None = None
    layout: FusedLayout = "blocks"
    query_bias: Tensor | None = None
    value_bias: Tensor | None = None

    def projection(self, which: Projection) -> nn.Module:
        """The module whose output holds ``which`` (the fused layer, or its own projection)."""
        module = self.fused if self.fused is not None else getattr(self, which)
        assert module is not None
        return module

    def take(self, which: Projection, output: Tensor, heads: int) -> Tensor:
        """``which`` from :meth:`projection`'s output, ``[..., heads * d]``, with its bias, as attention uses it."""
        if self.fused is None:
            return output
        part = slice_fused(output, which, heads, self.layout)
        bias = {"query": self.query_bias, "value": self.value_bias}.get(which)
        return part if bias is None else part + bias


def _optional(block: nn.Module, path: str | None) -> Any:
    if path is None:
        return None
    name, _, attr = path.rpartition(".")
    owner = block.get_submodule(name) if name else block
    return getattr(owner, attr)


def block_index_pattern(family: Family) -> re.Pattern[str]:
    """A regex finding a weight name's layer index: group 1 is the block number."""
    body = family.blocks.replace(r"\d+", r"(\d+)", 1)
    return re.compile(r"(?:^|\.)" + body + r"\.")


def layer_parts(base_model: nn.Module, family: Family) -> list[LayerParts]:
    """Find every distinct attention block of ``base_model`` in module order."""
    pattern = re.compile(family.blocks + r"$")
    blocks = [m for name, m in base_model.named_modules() if pattern.match(name)]
    if not blocks:
        raise HeadcountError("could not find the attention layers of this model")
    parts = []
    for b in blocks:
        fused = family.fused
        parts.append(
            LayerParts(
                attention=b.get_submodule(family.attention),
                out_proj=b.get_submodule(family.out_proj),
                query=_optional(b, family.query),
                key=_optional(b, family.key),
                value=_optional(b, family.value),
                fused=None if fused is None else b.get_submodule(fused.path),
                layout="blocks" if fused is None else fused.layout,
                query_bias=None if fused is None else _optional(b, fused.query_bias),
                value_bias=None if fused is None else _optional(b, fused.value_bias),
            )
        )
    return parts


def head_rows(family: Family, parts: LayerParts, num_heads: int, head: int) -> list[tuple[nn.Linear, slice]]:
    """The output rows of the query, key and value projections that compute ``head``.

    Returns
    -------
    list of (linear layer, row slice)
        Zeroing these rows (weight and bias) makes the head's projected queries, keys
        and values zero. Separate projections: rows ``h*d:(h+1)*d`` of each. A fused
        projection (see :class:`FusedProjection`): in the ``blocks`` layout the same rows
        inside each of the three blocks, in the ``per-head`` layout the head's ``3d``
        consecutive rows. Biases a fused family adds after the projection (DeBERTa's
        ``q_bias``, ``v_bias``) are not rows of a linear layer and stay; zeroing the head's
        W_O columns (:func:`head_columns`) still removes its whole contribution.
    """
    if parts.fused is None:
        out = []
        for linear in (parts.query, parts.key, parts.value):
            d = linear.out_features // num_heads
            out.append((linear, slice(head * d, (head + 1) * d)))
        return out
    d = parts.fused.out_features // (3 * num_heads)
    if parts.layout == "per-head":
        return [(parts.fused, slice(head * 3 * d, (head + 1) * 3 * d))]
    width = num_heads * d
    return [(parts.fused, slice(k * width + head * d, k * width + (head + 1) * d)) for k in range(3)]


def head_columns(parts: LayerParts, num_heads: int, head: int) -> tuple[nn.Linear, slice]:
    """The input columns of the attention output projection W_O that read ``head``'s context vector.

    ``Concat(head_1, ..., head_h) W_O``: head h occupies input features
    ``h*d:(h+1)*d`` of W_O (Vaswani et al. 2017, sec. 3.2.2).
    """
    d = parts.out_proj.in_features // num_heads
    return parts.out_proj, slice(head * d, (head + 1) * d)
