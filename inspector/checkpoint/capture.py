"""Forward hooks that record per-head attention, and per-head gates.

The hooks only keep references to tensors the model computes anyway, so a
captured forward pass returns exactly the logits of a plain one. Layer order is
the order in which attention blocks are *called*, which also covers families
that reuse one block for every layer (ALBERT).
"""

from __future__ import annotations

import weakref
from collections.abc import Sequence
from contextlib import ExitStack
from dataclasses import dataclass

import numpy as np
import torch
from torch import nn

from inspector.checkpoint.families import LayerParts, Projection
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.tokens import structural_ids, text_problem
from inspector.errors import HeadcountError


@dataclass
class Batch:
    """Tokenised sentences, padded to one length."""

    input_ids: torch.Tensor
    """[batch, tokens] token ids."""
    attention_mask: torch.Tensor
    """[batch, tokens] 1 for real tokens, 0 for padding."""
    tokens: list[list[str]]
    """Per sentence: the pieces of its real tokens, special tokens included."""
    special: list[np.ndarray]
    """Per sentence: bool [n_real] marking special tokens."""
    word_ids: list[list[int | None]]
    """Per sentence: the word index of each real token (None for special tokens)."""
    real_index: list[np.ndarray]
    """Per sentence: positions of the real tokens inside the padded row."""
    extra: dict[str, torch.Tensor]
    """Other model inputs the tokenizer produced (token_type_ids ...)."""

    def model_inputs(self) -> dict[str, torch.Tensor]:
        return {"input_ids": self.input_ids, "attention_mask": self.attention_mask, **self.extra}


def encode(lm: LoadedModel, texts: Sequence[str], max_length: int | None = None) -> Batch:
    """Tokenise ``texts`` into one padded batch, remembering pieces, specials and words.

    Special tokens are the structural ones only (classification, separator,
    begin/end, padding, mask; see :func:`inspector.checkpoint.tokens.structural_ids`):
    an unknown token stands for real content and counts as a word.
    """
    if isinstance(texts, str):
        texts = [texts]
    if not texts:
        raise HeadcountError("no text to analyse")
    for text in texts:
        problem = text_problem(text)
        if problem:
            raise HeadcountError(problem)
    tok = lm.tokenizer
    limit = min(max_length or lm.max_tokens, lm.max_tokens)
    enc = tok(list(texts), padding=True, truncation=True, max_length=limit, return_tensors="pt")
    ids = enc["input_ids"]
    mask = enc["attention_mask"]
    special_ids = structural_ids(tok)
    tokens, special, word_ids, real_index = [], [], [], []
    for b in range(ids.shape[0]):
        idx = np.flatnonzero(mask[b].numpy())
        row = ids[b, idx].tolist()
        tokens.append(tok.convert_ids_to_tokens(row))
        special.append(np.array([t in special_ids for t in row], dtype=bool))
        try:
            wid = enc.word_ids(b)
            word_ids.append([None if special[-1][k] else wid[i] for k, i in enumerate(idx)])
        except (ValueError, AttributeError):
            word_ids.append([None if s else i for i, s in zip(range(len(row)), special[-1])])
        real_index.append(idx)
    extra = {k: v for k, v in enc.items() if k not in ("input_ids", "attention_mask") and k in lm.input_names}
    return Batch(ids, mask, tokens, special, word_ids, real_index, extra)


NON_FINITE = "the model produced NaN or infinite values on this text ({what}); its weights overflow"


def all_finite(a: np.ndarray | torch.Tensor) -> bool:
    """True when no entry of ``a`` is NaN or infinite.

    First one summing pass: a NaN or an infinity makes the sum NaN or infinite, so a finite
    sum proves every entry finite (about 20 times faster than ``torch.isfinite(a).all()``,
    which builds a mask as large as ``a``). Only when the sum is not finite (a bad entry, or
    finite entries whose sum overflows) is every entry tested.
    """
    t = a if isinstance(a, torch.Tensor) else None
    if t is None and a.dtype.kind == "f" and a.flags.c_contiguous and a.flags.writeable:
        t = torch.from_numpy(a)
    if t is not None and t.is_floating_point() and bool(torch.isfinite(t.sum())):
        return True
    if isinstance(a, torch.Tensor):
        return bool(torch.isfinite(a).all())
    return bool(np.isfinite(a).all())


def require_finite(what: str, *arrays: np.ndarray | torch.Tensor | None) -> None:
    """Raise a one-line error if any array holds NaN or infinity (``what`` names them)."""
    for a in arrays:
        if a is not None and not all_finite(a):
            raise HeadcountError(NON_FINITE.format(what=what))


class _CallCounter:
    """Counts calls of hooked modules within one forward pass."""

    def __init__(self) -> None:
        self.n = 0

    def reset(self, *_: object) -> None:
        self.n = 0

    def next(self) -> int:
        i = self.n
        self.n += 1
        return i


class AttentionRecorder:
    """Context manager: record attention weights (and optionally Q, K, V) per layer.

    Parameters
    ----------
    lm : LoadedModel
    values : bool
        Also keep each layer's value projection output [batch, tokens, heads*d].
    queries_keys : bool
        Also keep the query and key projection outputs.
    copy_out : bool
        For passes without gradients: copy each layer's weights into one
        [batch, layers, heads, tokens, tokens] tensor as soon as the layer made them, and
        keep no reference to the model's own tensor (its memory is reused by the next
        layer). Half the memory and no stacking copy at the end; ``weights`` stays empty.
    """

    def __init__(
        self, lm: LoadedModel, *, values: bool = False, queries_keys: bool = False, copy_out: bool = False
    ) -> None:
        self.lm = lm
        self.want_values = values
        self.want_qk = queries_keys
        self.copy_out = copy_out
        self._out: torch.Tensor | None = None
        self._filled = 0
        self.weights: list[torch.Tensor] = []
        self.order: list[int] = []
        self.values: list[torch.Tensor] = []
        self.queries: list[torch.Tensor] = []
        self.keys: list[torch.Tensor] = []
        self._stack = ExitStack()

    def _clear(self, *_: object) -> None:
        for store in (self.weights, self.order, self.values, self.queries, self.keys):
            store.clear()
        self._out, self._filled = None, 0

    def _keep(self, store: list[torch.Tensor], part: LayerParts, which: Projection):
        heads = self.lm.num_heads

        def hook(_m: nn.Module, _inp: object, out: torch.Tensor) -> None:
            store.append(part.take(which, out, heads))

        return hook

    def _weights_hook(self, part_index: int):
        from_output = self.lm.family.weights_from == "output"

        def hook(_m: nn.Module, inp: tuple, out: object) -> None:
            tensor = out[1] if from_output else inp[0]
            if tensor is None:
                raise HeadcountError("the model did not return attention weights (eager attention needed)")
            self.order.append(part_index)
            if not self.copy_out:
                self.weights.append(tensor)
                return
            batch = tensor.shape[0] if tensor.dim() == 4 else 1
            if self._out is None:
                shape = (batch, self.lm.num_layers, self.lm.num_heads, *tensor.shape[-2:])
                self._out = torch.empty(shape, dtype=tensor.dtype)
            if self._filled < self._out.shape[1]:
                self._out[:, self._filled].copy_(tensor.reshape(batch, self.lm.num_heads, *tensor.shape[-2:]))
            self._filled += 1

        return hook

    def __enter__(self) -> AttentionRecorder:
        handles = [self.lm.model.register_forward_pre_hook(self._clear)]
        for p, part in enumerate(self.lm.parts):
            target = part.attention if self.lm.family.weights_from == "output" else part.attention.dropout
            handles.append(target.register_forward_hook(self._weights_hook(p)))
            wanted = (("value", self.values),) if self.want_values else ()
            if self.want_qk:
                wanted += (("query", self.queries), ("key", self.keys))
            for which, store in wanted:
                hook = self._keep(store, part, which)
                handles.append(part.projection(which).register_forward_hook(hook))
        for h in handles:
            self._stack.callback(h.remove)
        return self

    def __exit__(self, *exc: object) -> None:
        self._stack.close()

    def attention(self) -> torch.Tensor:
        """Stacked weights [batch, layers, heads, tokens, tokens]."""
        captured = self._filled if self.copy_out else len(self.weights)
        if captured != self.lm.num_layers:
            raise HeadcountError(f"captured {captured} attention layers, expected {self.lm.num_layers}")
        if self.copy_out:
            return self._out
        w = self.weights
        batch = w[0].shape[0] if w[0].dim() == 4 else 1
        return torch.stack([x.reshape(batch, self.lm.num_heads, *x.shape[-2:]) for x in w], dim=1)


class HeadGates:
    """Context manager: multiply each head's context vector by a gate.

    The gate sits on the input of each layer's attention output projection
    W_O, where the heads' context vectors are still side by side:
    ``ctx[b, t, h*d:(h+1)*d] *= gate[layer, h]``. A gate of 1 leaves the model
    unchanged, 0 removes exactly that head's contribution. ``gates`` may require
    grad, so d loss / d gate is the head-importance score of Michel et al. (2019).

    Parameters
    ----------
    lm : LoadedModel
    gates : torch.Tensor of shape (layers, heads)
    """

    def __init__(self, lm: LoadedModel, gates: torch.Tensor) -> None:
        if tuple(gates.shape) != (lm.num_layers, lm.num_heads):
            raise HeadcountError(
                f"gates must have shape ({lm.num_layers}, {lm.num_heads}), got {tuple(gates.shape)}"
            )
        self.lm = lm
        self.gates = gates
        self.counter = _CallCounter()
        self._stack = ExitStack()

    def _hook(self, _m: nn.Module, inp: tuple) -> tuple:
        layer = self.counter.next()
        x = inp[0]
        h = self.lm.num_heads
        gated = (x.unflatten(-1, (h, -1)) * self.gates[layer].to(x.dtype)[:, None]).flatten(-2)
        return (gated, *inp[1:])

    def __enter__(self) -> HeadGates:
        self._stack.callback(self.lm.model.register_forward_pre_hook(self.counter.reset).remove)
        for part in {id(p.out_proj): p for p in self.lm.parts}.values():
            self._stack.callback(part.out_proj.register_forward_pre_hook(self._hook).remove)
        active = _ACTIVE_GATES.setdefault(self.lm.model, [])
        active.append(self.gates)
        self._stack.callback(
            lambda: active.__setitem__(slice(None), [g for g in active if g is not self.gates])
        )
        return self

    def __exit__(self, *exc: object) -> None:
        self._stack.close()


_ACTIVE_GATES: weakref.WeakKeyDictionary[nn.Module, list[torch.Tensor]] = weakref.WeakKeyDictionary()
"""The gates of every :class:`HeadGates` currently installed, per model."""


def active_gates(lm: LoadedModel) -> np.ndarray | None:
    """The product of every gate installed on ``lm`` right now, [layers, heads]; None when there is none.

    Nested :class:`HeadGates` multiply (each hook scales the context vectors
    once), so the model runs with the product.
    """
    found = [g for g in _ACTIVE_GATES.get(lm.model, []) if g is not None]
    if not found:
        return None
    out = np.ones((lm.num_layers, lm.num_heads), dtype=np.float32)
    for g in found:
        out = out * g.detach().float().numpy()
    return out


def gated_out_weight(out_weight: np.ndarray, gates: np.ndarray | None) -> np.ndarray:
    """W_O as the gated model uses it: the columns of head h in layer l scaled by ``gates[l, h]``.

    Parameters
    ----------
    out_weight : ndarray of shape (layers, hidden, heads*d)
    gates : ndarray of shape (layers, heads), or None (returns ``out_weight``)

    Notes
    -----
    ``(g_h ctx_h) W_O^h = ctx_h (g_h W_O^h)``: gating a head's context vector is the
    same as scaling its slice of W_O, so value-weighted measures computed from
    this matrix describe the gated model (Kobayashi et al. 2020, eq. (5) for f_h).
    """
    if gates is None:
        return out_weight
    layers, hidden, width = out_weight.shape
    heads = gates.shape[1]
    scale = np.repeat(np.asarray(gates, dtype=out_weight.dtype), width // heads, axis=1)
    return out_weight * scale[:, None, :]


@dataclass
class Capture:
    """What one captured forward pass saw, as numpy arrays."""

    batch: Batch
    attention: np.ndarray
    """[batch, layers, heads, tokens, tokens] (padded; padding rows/cols are meaningless)."""
    logits: np.ndarray | None
    """[batch, labels] for sequence classification, else None."""
    values: np.ndarray | None = None
    """[batch, layers, tokens, heads, head_dim] value vectors, if asked for."""
    out_weight: np.ndarray | None = None
    """[layers, hidden, heads*head_dim] W_O per layer, if values were asked for."""
    out_bias: np.ndarray | None = None
    """[layers, hidden] output-projection bias, if values were asked for."""

    def sentence(self, b: int = 0) -> np.ndarray:
        """Attention of sentence ``b`` without padding: [layers, heads, n, n].

        A view (no copy) when the sentence fills its row, as a single sentence always does.
        """
        idx = self.batch.real_index[b]
        width = self.attention.shape[-1]
        if len(idx) == width and (width == 0 or idx[-1] == width - 1):
            return self.attention[b]
        return self.attention[b][:, :, idx][:, :, :, idx]


def run(
    lm: LoadedModel,
    texts: Sequence[str] | str,
    *,
    values: bool = False,
    gates: torch.Tensor | None = None,
) -> Capture:
    """Run the model on ``texts`` and capture every head's attention.

    Parameters
    ----------
    lm : LoadedModel
    texts : str or sequence of str
    values : bool
        Also capture value vectors and W_O (needed for value-weighted attention).
    gates : tensor (layers, heads), optional
        Head gates to apply during the pass.
    """
    batch = encode(lm, texts)
    with ExitStack() as stack, torch.no_grad():
        rec = stack.enter_context(AttentionRecorder(lm, values=values, copy_out=True))
        if gates is not None:
            stack.enter_context(HeadGates(lm, gates))
        out = lm.model(**batch.model_inputs())
        attention = rec.attention().numpy()
        logits = out.logits.numpy() if lm.has_prediction else None
        require_finite("attention weights or logits", attention, logits)
        cap = Capture(batch=batch, attention=attention, logits=logits)
        if values:
            n_b, n_t = batch.input_ids.shape
            cap.values = torch.stack(
                [v.reshape(n_b, n_t, lm.num_heads, -1) for v in rec.values], dim=1
            ).numpy()
            weights, cap.out_bias = output_projections(lm, rec.order)
            cap.out_weight = gated_out_weight(weights, active_gates(lm))
    return cap


_PROJECTIONS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
"""Per model: the stacked W_O weights and biases, with the key they were stacked under."""


def output_projections(lm: LoadedModel, order: Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    """Every called layer's output projection, stacked: weights [layers, hidden, heads*d] and biases.

    Stacked once per model and reused (tens of megabytes at BERT-base size, too much to copy
    per keystroke). The cache key holds each parameter's storage address and in-place version
    counter, so weights edited in place are stacked afresh.
    """
    projs = [lm.parts[p].out_proj for p in order]
    key = (
        tuple(order),
        tuple((t.data_ptr(), t._version) for m in projs for t in (m.weight, m.bias) if t is not None),
    )
    hit = _PROJECTIONS.get(lm.model)
    if hit is not None and hit[0] == key:
        return hit[1]
    with torch.no_grad():
        weights = torch.stack([m.weight for m in projs]).numpy()
        biases = torch.stack(
            [m.bias if m.bias is not None else torch.zeros(m.out_features) for m in projs]
        ).numpy()
    weights.flags.writeable = biases.flags.writeable = False  # shared by every analysis
    _PROJECTIONS[lm.model] = (key, (weights, biases))
    return weights, biases
