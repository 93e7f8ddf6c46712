"""Head importance by the gradient of the loss with respect to head gates.

Every head's context vector is multiplied by a gate ``xi_h`` (all 1, so the
model is unchanged; see :class:`inspector.checkpoint.capture.HeadGates`). The importance of
head h is the expected absolute derivative of the loss with respect to its gate,

    I_h = E_x | dL(x) / d xi_h |,

where L(x) is the cross-entropy of utterance x against its gold label. The
absolute value is taken per utterance, before averaging. One backward pass of
the batch's summed loss gives every utterance's own derivative: with the gated
context ``c'_{t,h} = xi_h c_{t,h}`` entering the output projection,
``dL(x)/d xi_h = sum_t <c_{x,t,h}, dL/dc'_{x,t,h}>`` (utterances of a batch do
not interact), which the taps below read off the output projection's input.
Scores are then divided by their l2 norm within each layer, as in the paper.
"""

from __future__ import annotations

from contextlib import ExitStack
from dataclasses import dataclass

import numpy as np
import torch
import torch.nn.functional as F
from torch import nn

from inspector.checkpoint.capture import HeadGates
from inspector.checkpoint.loader import LoadedModel
from inspector.corpus.batching import PaddedBatch


class _ContextTaps:
    """Keep, per attention call, the gated context entering W_O and retain its gradient."""

    def __init__(self, lm: LoadedModel) -> None:
        self.lm = lm
        self.contexts: list[torch.Tensor] = []
        self._stack = ExitStack()

    def _hook(self, _m: nn.Module, inp: tuple) -> None:
        x = inp[0]
        if x.requires_grad:
            x.retain_grad()
        self.contexts.append(x)

    def __enter__(self) -> _ContextTaps:
        for part in {id(p.out_proj): p for p in self.lm.parts}.values():
            handle = part.out_proj.register_forward_pre_hook(self._hook)
            self._stack.callback(handle.remove)
        return self

    def __exit__(self, *exc: object) -> None:
        self._stack.close()


def gate_gradients(
    lm: LoadedModel, batch: PaddedBatch, labels: torch.Tensor
) -> tuple[torch.Tensor, torch.Tensor]:
    """Per-utterance derivative of the loss with respect to every head gate.

    Parameters
    ----------
    lm : LoadedModel
        A sequence classifier.
    batch : PaddedBatch
    labels : tensor of shape (batch,)
        Gold label indices.

    Returns
    -------
    grads : tensor of shape (batch, layers, heads)
        ``dL(x)/d xi_{l,h}`` at ``xi = 1`` for each utterance x.
    losses : tensor of shape (batch,)
        Cross-entropy of each utterance.

    References
    ----------
    Michel, Levy & Neubig (2019), "Are Sixteen Heads Really Better than One?",
    NeurIPS, section 4.1 (importance score) and appendix.
    """
    gates = torch.ones(lm.num_layers, lm.num_heads, requires_grad=True)
    with torch.enable_grad(), HeadGates(lm, gates), _ContextTaps(lm) as taps:
        logits = lm.model(**batch.inputs).logits
        losses = F.cross_entropy(logits, labels, reduction="none")
        losses.sum().backward()
    per_layer = []
    for ctx in taps.contexts:
        prod = (ctx.detach() * ctx.grad).unflatten(-1, (lm.num_heads, -1))  # [B, T, H, d]
        per_layer.append(prod.sum(dim=(1, 3)))
    return torch.stack(per_layer, dim=1), losses.detach()


def normalize_per_layer(scores: np.ndarray) -> np.ndarray:
    """Divide each layer's scores by their l2 norm (layers whose norm is 0 stay 0).

    Parameters
    ----------
    scores : ndarray of shape (layers, heads)

    Returns
    -------
    ndarray of shape (layers, heads)
        ``I_{l,h} / sqrt(sum_h' I_{l,h'}^2)``.

    References
    ----------
    Michel, Levy & Neubig (2019), section 4.2: importance scores normalised by
    their l2 norm within each layer (following Molchanov et al. 2017).
    """
    norm = np.linalg.norm(scores, axis=-1, keepdims=True)
    return np.divide(scores, norm, out=np.zeros_like(scores, dtype=np.float64), where=norm > 0)


@dataclass
class HeadImportance:
    """Expected absolute gate gradient per head over an evaluation set."""

    raw: np.ndarray
    """[layers, heads] ``E_x |dL(x)/d xi_h|``."""
    normalized: np.ndarray
    """[layers, heads] ``raw`` divided by its l2 norm within each layer."""
    mean_loss: float
    """Mean cross-entropy over the set (nats)."""
    count: int


class ImportanceAccumulator:
    """Running sums for :class:`HeadImportance`, batch by batch (memory independent of the set size)."""

    def __init__(self, num_layers: int, num_heads: int) -> None:
        self.abs_sum = np.zeros((num_layers, num_heads))
        self.loss_sum = 0.0
        self.count = 0

    def add(self, grads: torch.Tensor, losses: torch.Tensor) -> None:
        self.abs_sum += grads.abs().sum(0).double().numpy()
        self.loss_sum += float(losses.double().sum())
        self.count += int(grads.shape[0])

    def result(self) -> HeadImportance:
        raw = self.abs_sum / max(self.count, 1)
        return HeadImportance(
            raw=raw,
            normalized=normalize_per_layer(raw),
            mean_loss=self.loss_sum / max(self.count, 1),
            count=self.count,
        )
