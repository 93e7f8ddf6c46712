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
from inspector.explanation.choices import (
    BASELINES,
    DEFAULT_RULE,
    IG_MAX_STEPS,
    IG_SMALL_DIFFERENCE,
    IG_START_STEPS,
    IG_TOLERANCE,
    NESTED_RULES,
    RULES,
)

CLASSIFICATION_POSITION = 0
"""Index of the classification token ([CLS] / <s>) in every supported family."""

Baseline = Literal["pad", "zero"]
Rule = Literal["clenshaw-curtis", "gauss-legendre", "trapezoid"]


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


def quadrature(steps: int, rule: Rule = DEFAULT_RULE) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights for integrating over alpha in [0, 1].

    Parameters
    ----------
    steps : int
        Number of gradient evaluations (nodes), at least 2.
    rule : {'clenshaw-curtis', 'gauss-legendre', 'trapezoid'}

    Returns
    -------
    alphas, weights : ndarray of shape (steps,)
        ``int_0^1 f(a) da ≈ sum_s weights[s] f(alphas[s])``; the weights sum to 1.
        Gauss-Legendre maps the Legendre nodes t_s of [-1, 1] to ``(t_s + 1) / 2``
        with weights ``w_s / 2`` (exact for polynomials of degree 2*steps - 1);
        Clenshaw-Curtis uses the Chebyshev extreme points ``(1 - cos(pi k / N)) / 2``,
        k = 0..N with N = steps - 1 (exact up to degree N; the end points are nodes, and
        the nodes for N intervals are among those for 2N); the trapezoid rule uses
        ``steps`` equally spaced nodes including 0 and 1 (also nested).

    References
    ----------
    Abramowitz & Stegun (1964), "Handbook of Mathematical Functions", 25.4.29
    (Gauss-Legendre) and 25.4.2 (trapezoidal rule); Clenshaw & Curtis (1960), "A method
    for numerical integration on an automatic computer", with the weights in the closed
    form of Trefethen (2000), "Spectral Methods in MATLAB", program clencurt.
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
    if rule == "clenshaw-curtis":
        n = steps - 1
        theta = np.pi * np.arange(n + 1) / n
        w = np.zeros(n + 1)
        inner = theta[1:-1]
        v = np.ones(n - 1)
        if n % 2 == 0:
            w[0] = w[n] = 1.0 / (n * n - 1)
            for k in range(1, n // 2):
                v -= 2.0 * np.cos(2 * k * inner) / (4 * k * k - 1)
            v -= np.cos(n * inner) / (n * n - 1)
        else:
            w[0] = w[n] = 1.0 / (n * n)
            for k in range(1, (n - 1) // 2 + 1):
                v -= 2.0 * np.cos(2 * k * inner) / (4 * k * k - 1)
        w[1:-1] = 2.0 * v / n
        return (1.0 - np.cos(theta)) / 2.0, w / 2.0
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

    steps: int = 0
    """Quadrature nodes used."""
    tolerance: float | None = None
    """The completeness tolerance the steps were chosen for (None: the steps were fixed)."""

    @property
    def completeness_error(self) -> np.ndarray:
        """[labels] ``sum_i attr_i - (F(x) - F(x'))`` (0 for exact integration)."""
        return self.attributions.sum(-1) - (self.output_input - self.output_baseline)

    def complete_within(self, tolerance: float, contrasts: Sequence[tuple[int, int]] = ()) -> bool:
        """True when every label's completeness error is at most ``tolerance`` of its logit difference.

        Differences smaller than ``IG_SMALL_DIFFERENCE`` count as that size (an absolute bound of
        ``tolerance * IG_SMALL_DIFFERENCE``). Each ``(a, b)`` in ``contrasts`` (positions in the
        label list) must also hold for the logit gap ``F_a - F_b``, whose attributions are the
        difference of the two labels' (linearity): its error is ``error_a - error_b``.
        """
        difference = self.output_input - self.output_baseline
        error = self.completeness_error
        pairs = list(contrasts)
        if pairs:
            a, b = np.array(pairs).T
            difference = np.concatenate([difference, difference[a] - difference[b]])
            error = np.concatenate([error, error[a] - error[b]])
        scale = np.maximum(np.abs(difference), IG_SMALL_DIFFERENCE)
        return bool(np.all(np.abs(error) <= tolerance * scale))


def _node_terms(
    forward: Callable[[torch.Tensor], torch.Tensor],
    baseline: torch.Tensor,
    delta: torch.Tensor,
    labels: Sequence[int],
    alphas: np.ndarray,
    rows_per_pass: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Per node ``a``: ``(x - x') * dF_k/dx`` at ``x' + a (x - x')`` summed over the embedding, and F there.

    Returns ``terms`` [nodes, labels, n] (float64) and ``outputs`` [nodes, num_outputs]. The
    nodes go through ``forward`` in batches of ``rows_per_pass`` (rows do not interact, so one
    backward pass per label gives every row's own gradient).
    """
    terms: list[torch.Tensor] = []
    outputs: list[torch.Tensor] = []
    for start in range(0, len(alphas), max(1, rows_per_pass)):
        a = torch.as_tensor(alphas[start : start + rows_per_pass], dtype=delta.dtype)
        path = (baseline + a[:, None, None] * delta).requires_grad_(True)
        per_label = []
        with torch.enable_grad():
            out = forward(path)
            for i, k in enumerate(labels):
                (g,) = torch.autograd.grad(out[:, int(k)].sum(), path, retain_graph=i < len(labels) - 1)
                per_label.append((g * delta).sum(-1))
        terms.append(torch.stack(per_label, 1) if per_label else torch.zeros(len(a), 0, delta.shape[0]))
        outputs.append(out.detach())
    return torch.cat(terms).double().numpy(), torch.cat(outputs).double().numpy()


class _PathNodes:
    """Node terms computed so far along one path, so a nested rule reuses them when the steps double."""

    def __init__(self, forward, x, baseline, labels, rows_per_pass: int) -> None:
        self.forward, self.labels, self.rows = forward, list(labels), rows_per_pass
        self.baseline = baseline.detach().to(x.dtype)
        self.delta = x.detach() - self.baseline
        self.known: dict[float, tuple[np.ndarray, np.ndarray]] = {}

    def integral(self, steps: int, rule: Rule) -> PathIntegral:
        alphas, weights = quadrature(steps, rule)
        wanted = np.concatenate([[0.0, 1.0], alphas])  # the end points give F(x') and F(x)
        new = np.array(sorted({float(a) for a in wanted} - set(self.known)))
        if new.size:
            terms, outputs = _node_terms(self.forward, self.baseline, self.delta, self.labels, new, self.rows)
            self.known.update({float(a): (t, o) for a, t, o in zip(new, terms, outputs)})
        total = sum(w * self.known[float(a)][0] for a, w in zip(alphas, weights))
        idx = [int(k) for k in self.labels]
        return PathIntegral(
            attributions=np.asarray(total, dtype=np.float64).reshape(len(idx), -1),
            output_input=self.known[1.0][1][idx],
            output_baseline=self.known[0.0][1][idx],
            steps=steps,
        )


def integrate_path(
    forward: Callable[[torch.Tensor], torch.Tensor],
    x: torch.Tensor,
    baseline: torch.Tensor,
    labels: Sequence[int],
    *,
    steps: int = 64,
    rule: Rule = DEFAULT_RULE,
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
    rule : {'clenshaw-curtis', 'gauss-legendre', 'trapezoid'}
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
    return _PathNodes(forward, x, baseline, labels, rows_per_pass).integral(steps, rule)


def integrate_adaptively(
    forward: Callable[[torch.Tensor], torch.Tensor],
    x: torch.Tensor,
    baseline: torch.Tensor,
    labels: Sequence[int],
    *,
    start: int = IG_START_STEPS,
    max_steps: int = IG_MAX_STEPS,
    tolerance: float = IG_TOLERANCE,
    rule: Rule = DEFAULT_RULE,
    rows_per_pass: int = 64,
    contrasts: Sequence[tuple[int, int]] = (),
) -> PathIntegral:
    """Integrated Gradients with as few steps as completeness allows: start small, double until it holds.

    Parameters
    ----------
    forward, x, baseline, labels, rule, rows_per_pass
        As for :func:`integrate_path`.
    start : int
        First number of intervals (a nested rule then has ``start + 1`` nodes) or, for
        Gauss-Legendre, of nodes.
    max_steps : int
        Never use more nodes than this (the last try is reported even if it misses).
    tolerance : float
        Accept the first step count whose completeness error is at most this fraction
        of every label's logit difference (:meth:`PathIntegral.complete_within`).
    contrasts : sequence of (int, int)
        Pairs of positions in ``labels`` whose logit gap must be complete within
        ``tolerance`` too (contrastive evidence: predicted against expected label).

    Returns
    -------
    PathIntegral
        The integral at the chosen step count, with ``steps`` (nodes) and ``tolerance`` set.
        With a nested rule (Clenshaw-Curtis, trapezoid) each doubling evaluates only the
        new nodes, so the whole search costs as many gradient evaluations as its last try.

    References
    ----------
    Sundararajan, Taly & Yan (2017), "Axiomatic Attribution for Deep Networks", sec. 5:
    check that the attributions add up to the difference between the scores (within
    5%) and raise the number of steps if not; here 1% and doubling.
    """
    nodes = _PathNodes(forward, x, baseline, labels, rows_per_pass)
    nested = rule in NESTED_RULES
    intervals = max(1, start)
    while True:
        steps = min(intervals + 1 if nested else max(2, intervals), max_steps)
        integral = nodes.integral(steps, rule)
        if integral.complete_within(tolerance, contrasts) or steps >= max_steps:
            integral.tolerance = tolerance
            return integral
        intervals *= 2


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
    steps: int | None = None,
    baseline: Baseline = "pad",
    rule: Rule = DEFAULT_RULE,
    tolerance: float = IG_TOLERANCE,
    contrasts: Sequence[tuple[int, int]] = (),
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
    steps : int, optional
        Quadrature nodes; None (default) chooses them adaptively
        (:func:`integrate_adaptively`: 8, 16, 32 ... intervals until the completeness
        error is within ``tolerance``).
    baseline : {'pad', 'zero'}, default 'pad'
        See :func:`baseline_embeddings`.
    rule : {'clenshaw-curtis', 'gauss-legendre', 'trapezoid'}, default 'clenshaw-curtis'
    tolerance : float, default 0.01
        Completeness tolerance of the adaptive choice.
    contrasts : sequence of (int, int)
        Pairs of positions in ``labels`` whose logit gap the adaptive choice also holds to
        ``tolerance`` (see :func:`integrate_adaptively`).

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
    if steps is None:
        integral = integrate_adaptively(
            forward, x, x0, labels, tolerance=tolerance, rule=rule, rows_per_pass=rows, contrasts=contrasts
        )
    else:
        integral = integrate_path(forward, x, x0, labels, steps=steps, rule=rule, rows_per_pass=rows)
    return integral, used
