"""Gradient-based relevance: gradient-weighted attention rollout and Integrated Gradients.

Both work on one sentence of a sentence classifier and explain one label's
*logit*. The model's parameters stay frozen; gradients are taken with respect to
the word embeddings fed through ``inputs_embeds`` (Integrated Gradients) or with
respect to the attention weights recorded by
:class:`inspector.checkpoint.capture.AttentionRecorder`, which are part of the autograd graph.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import torch

from inspector.checkpoint.capture import AttentionRecorder, Batch
from inspector.checkpoint.loader import LoadedModel
from inspector.errors import HeadcountError

CLASSIFICATION_POSITION = 0
"""Index of the classification token ([CLS] / <s>) in every supported family."""

Baseline = Literal["pad", "zero"]
Rule = Literal["gauss-legendre", "trapezoid"]

BASELINES: tuple[str, ...] = ("pad", "zero")
RULES: tuple[str, ...] = ("gauss-legendre", "trapezoid")

IG_TOKENS_PER_PASS = 4096
"""Integrated Gradients packs ``steps`` interpolated copies of the sentence into
forward passes of at most this many tokens (one pass for short sentences)."""


# ---------------------------------------------------------------------------
# Gradient-weighted attention rollout
# ---------------------------------------------------------------------------


def grad_weighted_rollout(attention: np.ndarray, gradients: np.ndarray) -> np.ndarray:
    """Gradient-weighted attention rollout of one sentence.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
        Attention weights A_l of each layer (query rows, key columns).
    gradients : ndarray of shape (layers, heads, n, n)
        d logit / d A_l for the label being explained.

    Returns
    -------
    ndarray of shape (n, n)
        ``R`` after the last layer. Starting from ``R = I``, for each layer in
        order ``Abar_l = mean_h ((grad_l ⊙ A_l)^+)`` and ``R = R + Abar_l @ R``.
        Row ``CLASSIFICATION_POSITION`` is the relevance of each input token for
        the explained label (the diagonal keeps the identity's contribution).

    References
    ----------
    Chefer, Gur & Wolf (2021), "Generic Attention-model Explainability for
    Interpreting Bi-Modal and Encoder-Decoder Transformers", eq. (5)-(6) and the
    self-attention update rule R = R + Abar · R.
    """
    a = np.asarray(attention, dtype=np.float64)
    g = np.asarray(gradients, dtype=np.float64)
    if a.shape != g.shape or a.ndim != 4:
        raise ValueError(f"attention {a.shape} and gradients {g.shape} must both be (layers, heads, n, n)")
    weighted = np.clip(g * a, 0.0, None).mean(axis=1)
    r = np.eye(a.shape[-1])
    for layer in weighted:
        r = r + layer @ r
    return r


@dataclass
class AttentionGradients:
    """One forward pass and one backward pass per label, for one sentence."""

    attention: np.ndarray
    """[layers, heads, n, n] attention weights."""
    gradients: np.ndarray
    """[labels, layers, heads, n, n] d logit_k / d A for each requested label k."""
    logits: np.ndarray
    """[num_labels] the sentence's logits."""


def word_embeddings(lm: LoadedModel, input_ids: torch.Tensor) -> torch.Tensor:
    """Look up the word (token) embeddings only; positions and types are added by the model."""
    with torch.no_grad():
        return lm.model.get_input_embeddings()(input_ids).detach()


def _embeds_inputs(batch: Batch, embeds: torch.Tensor) -> dict[str, torch.Tensor]:
    """Model inputs with ``inputs_embeds`` instead of ids, every other input repeated to its batch size."""
    rows = embeds.shape[0]
    extra = {k: v.expand(rows, *v.shape[1:]) for k, v in batch.extra.items()}
    mask = batch.attention_mask.expand(rows, -1)
    return {"inputs_embeds": embeds, "attention_mask": mask, **extra}


def _check_single(batch: Batch) -> None:
    if batch.input_ids.shape[0] != 1:
        raise ValueError("explanations work on one sentence at a time")


def attention_gradients(lm: LoadedModel, batch: Batch, labels: Sequence[int]) -> AttentionGradients:
    """Attention weights and the gradient of each label's logit with respect to them.

    Parameters
    ----------
    lm : LoadedModel
        A sentence classifier.
    batch : Batch
        One sentence (no padding), from :func:`inspector.checkpoint.capture.encode`.
    labels : sequence of int
        Label indices whose logits are differentiated.

    Returns
    -------
    AttentionGradients
        ``gradients[k, l, h, i, j] = d z_k / d A_l[h, i, j]`` where ``z_k`` is the
        logit of ``labels[k]`` and ``A_l`` the softmax output of layer l as the
        model used it.

    References
    ----------
    Chefer, Gur & Wolf (2021), sec. 3: the gradients that weight the attention maps.
    """
    _check_single(batch)
    embeds = word_embeddings(lm, batch.input_ids).requires_grad_(True)
    with torch.enable_grad(), AttentionRecorder(lm) as rec:
        logits = lm.model(**_embeds_inputs(batch, embeds)).logits[0]
        weights = list(rec.weights)
        if len(weights) != lm.num_layers:
            raise HeadcountError(f"captured {len(weights)} attention layers, expected {lm.num_layers}")
        grads = []
        for i, k in enumerate(labels):
            g = torch.autograd.grad(
                logits[int(k)], weights, retain_graph=i < len(labels) - 1, allow_unused=True
            )
            grads.append([torch.zeros_like(w) if gw is None else gw for w, gw in zip(weights, g)])
    attention = _per_layer(weights, lm.num_heads)
    return AttentionGradients(
        attention=attention,
        gradients=np.stack([_per_layer(g, lm.num_heads) for g in grads])
        if grads
        else np.zeros((0, *attention.shape)),
        logits=logits.detach().numpy().astype(np.float64),
    )


def _per_layer(tensors: Sequence[torch.Tensor], heads: int) -> np.ndarray:
    """Stack one sentence's per-layer [1, heads, n, n] tensors into [layers, heads, n, n]."""
    return torch.stack([t.detach().reshape(heads, *t.shape[-2:]) for t in tensors]).numpy()


# ---------------------------------------------------------------------------
# Integrated Gradients
# ---------------------------------------------------------------------------


def quadrature(steps: int, rule: Rule = "gauss-legendre") -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights for integrating over alpha in [0, 1].

    Parameters
    ----------
    steps : int
        Number of gradient evaluations (nodes), at least 2.
    rule : {'gauss-legendre', 'trapezoid'}

    Returns
    -------
    alphas, weights : ndarray of shape (steps,)
        ``int_0^1 f(a) da ≈ sum_s weights[s] f(alphas[s])``; the weights sum to 1.
        Gauss-Legendre maps the Legendre nodes t_s of [-1, 1] to ``(t_s + 1) / 2``
        with weights ``w_s / 2`` (exact for polynomials of degree 2*steps - 1);
        the trapezoid rule uses ``steps`` equally spaced nodes including 0 and 1.

    References
    ----------
    Abramowitz & Stegun (1964), "Handbook of Mathematical Functions", 25.4.29
    (Gauss-Legendre) and 25.4.2 (trapezoidal rule).
    """
    if steps < 2:
        raise HeadcountError("Integrated Gradients needs at least 2 steps")
    if rule == "gauss-legendre":
        t, w = np.polynomial.legendre.leggauss(steps)
        return (t + 1.0) / 2.0, w / 2.0
    if rule == "trapezoid":
        alphas = np.linspace(0.0, 1.0, steps)
        w = np.full(steps, 1.0 / (steps - 1))
        w[[0, -1]] /= 2.0
        return alphas, w
    raise HeadcountError(f"unknown integration rule '{rule}' (known: {', '.join(RULES)})")


@dataclass
class PathIntegral:
    """Integrated Gradients for several labels along one straight path."""

    attributions: np.ndarray
    """[labels, n] per-token attribution (summed over the embedding dimension)."""
    output_input: np.ndarray
    """[labels] F_k(x): the label's logit at the input."""
    output_baseline: np.ndarray
    """[labels] F_k(x'): the label's logit at the baseline."""

    @property
    def completeness_error(self) -> np.ndarray:
        """[labels] ``sum_i attr_i - (F(x) - F(x'))`` (0 for exact integration)."""
        return self.attributions.sum(-1) - (self.output_input - self.output_baseline)


def integrate_path(
    forward: Callable[[torch.Tensor], torch.Tensor],
    x: torch.Tensor,
    baseline: torch.Tensor,
    labels: Sequence[int],
    *,
    steps: int = 64,
    rule: Rule = "gauss-legendre",
    rows_per_pass: int = 64,
) -> PathIntegral:
    """Integrated Gradients of any differentiable ``forward`` along the straight path.

    Parameters
    ----------
    forward : callable
        Maps a batch of inputs ``[rows, n, d]`` to outputs ``[rows, num_outputs]``.
    x, baseline : tensor of shape (n, d)
        The input and the baseline.
    labels : sequence of int
        Output columns to attribute.
    steps : int
        Number of quadrature nodes (gradient evaluations).
    rule : {'gauss-legendre', 'trapezoid'}
        See :func:`quadrature`.
    rows_per_pass : int
        How many interpolated inputs go into one forward pass; all nodes plus
        the two end points are batched, never evaluated one by one.

    Returns
    -------
    PathIntegral
        ``IG_i = sum_d (x - x')_{i,d} * sum_s w_s dF/dx_{i,d}(x' + a_s (x - x'))``.

    References
    ----------
    Sundararajan, Taly & Yan (2017), "Axiomatic Attribution for Deep Networks",
    eq. (1) and its Riemann approximation (sec. 5); here a quadrature rule
    replaces the Riemann sum.
    """
    alphas, weights = quadrature(steps, rule)
    # End points first (weight 0): they give F(x') and F(x) in the same passes.
    alphas = np.concatenate([[0.0, 1.0], alphas])
    weights = np.concatenate([[0.0, 0.0], weights])
    x = x.detach()
    baseline = baseline.detach().to(x.dtype)
    delta = x - baseline
    total = torch.zeros(len(labels), *x.shape, dtype=x.dtype)
    outputs: list[torch.Tensor] = []
    for start in range(0, len(alphas), max(1, rows_per_pass)):
        a = torch.as_tensor(alphas[start : start + rows_per_pass], dtype=x.dtype)
        w = torch.as_tensor(weights[start : start + rows_per_pass], dtype=x.dtype)
        path = (baseline + a[:, None, None] * delta).requires_grad_(True)
        with torch.enable_grad():
            out = forward(path)
            for i, k in enumerate(labels):
                (g,) = torch.autograd.grad((out[:, int(k)] * w).sum(), path, retain_graph=i < len(labels) - 1)
                total[i] += g.sum(0)
        outputs.append(out.detach())
    out_all = torch.cat(outputs)
    idx = [int(k) for k in labels]
    attributions = (delta[None] * total).sum(-1)
    return PathIntegral(
        attributions=attributions.numpy().astype(np.float64),
        output_input=out_all[1, idx].numpy().astype(np.float64),
        output_baseline=out_all[0, idx].numpy().astype(np.float64),
    )


def baseline_embeddings(lm: LoadedModel, batch: Batch, kind: Baseline = "pad") -> tuple[torch.Tensor, str]:
    """The Integrated Gradients baseline for one sentence, as word embeddings ``[n, d]``.

    Parameters
    ----------
    lm : LoadedModel
    batch : Batch
        One sentence.
    kind : {'pad', 'zero'}
        ``pad``: the pad token's embedding at every position, except that special
        tokens ([CLS], [SEP] ...) are kept, so they get zero attribution and the
        sentence frame stays intact. ``zero``: all-zero word embeddings at every
        position (specials included).

    Returns
    -------
    baseline : tensor of shape (n, d)
    used : str
        The baseline actually used (``pad`` falls back to ``zero`` when the
        tokenizer has no pad token).

    References
    ----------
    Sundararajan, Taly & Yan (2017), sec. 3 and 6.3 (all-zero embedding baseline
    for text); keeping special tokens in a pad-token baseline is common
    practice, no source.
    """
    _check_single(batch)
    x = word_embeddings(lm, batch.input_ids)[0]
    pad_id = getattr(lm.tokenizer, "pad_token_id", None)
    if kind == "zero" or (kind == "pad" and pad_id is None):
        return torch.zeros_like(x), "zero"
    if kind != "pad":
        raise HeadcountError(f"unknown baseline '{kind}' (known: {', '.join(BASELINES)})")
    pad = word_embeddings(lm, torch.tensor([pad_id]))[0]
    special = torch.as_tensor(batch.special[0], dtype=torch.bool)
    return torch.where(special[:, None], x, pad.expand_as(x)), "pad"


def integrated_gradients(
    lm: LoadedModel,
    batch: Batch,
    labels: Sequence[int],
    *,
    steps: int = 64,
    baseline: Baseline = "pad",
    rule: Rule = "gauss-legendre",
) -> tuple[PathIntegral, str]:
    """Integrated Gradients on the word embeddings of one sentence, for several labels.

    Parameters
    ----------
    lm : LoadedModel
        A sentence classifier.
    batch : Batch
        One sentence, no padding.
    labels : sequence of int
        Label indices; each label's *logit* is attributed.
    steps : int, default 64
    baseline : {'pad', 'zero'}, default 'pad'
        See :func:`baseline_embeddings`.
    rule : {'gauss-legendre', 'trapezoid'}, default 'gauss-legendre'

    Returns
    -------
    integral : PathIntegral
        Per-token attributions ``[labels, n]`` and the logits at both ends.
    used_baseline : str

    References
    ----------
    Sundararajan, Taly & Yan (2017), "Axiomatic Attribution for Deep Networks".
    """
    x = word_embeddings(lm, batch.input_ids)[0]
    x0, used = baseline_embeddings(lm, batch, baseline)

    def forward(embeds: torch.Tensor) -> torch.Tensor:
        return lm.model(**_embeds_inputs(batch, embeds)).logits

    rows = max(1, IG_TOKENS_PER_PASS // max(1, x.shape[0]))
    return integrate_path(forward, x, x0, labels, steps=steps, rule=rule, rows_per_pass=rows), used
