"""How far each head of model B is from each head of model A, and which A head it matches best.

Both models read the same sentence, so their attention rows line up: the row of query token
``i`` of a sentence in B's head and the row of the same token in A's head are two
distributions over the same keys. Their difference is the Jensen-Shannon divergence **in
bits** (0 = identical rows, 1 = disjoint support), as in the corpus stage's head redundancy
(:func:`inspector.corpus.redundancy.js_divergence`). Averaged over the same real query rows it
gives, for every head of B against every head of A, one number; per head of B:

* the **same-position change**: B's ``LlHh`` against A's ``LlHh`` (where A has that head);
* the **best match**: the A head with the smallest mean divergence, so a reader sees
  "B's L3H2 now does what A's L2H5 did".

A head whose attention is bit-for-bit the same in both models on every real row and key is
reported as **unchanged**, with a same-position divergence of exactly 0.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import torch

from inspector import formatting as fmt
from inspector.corpus.redundancy import LN2
from inspector.measures.metrics import shannon_entropy

_CHUNK_ELEMENTS = 1 << 20
"""Elements of the largest work tensor of :func:`cross_js_sum` (rows x B heads x A heads x keys)."""


def cross_js_sum(
    rows_a: torch.Tensor, rows_b: torch.Tensor, weights: torch.Tensor | None = None
) -> torch.Tensor:
    """Sum over rows of the Jensen-Shannon divergence (bits) between every head of B and every head of A.

    Parameters
    ----------
    rows_a : tensor of shape (rows, heads_a, n)
        Attention rows of model A: for each row (one real query of one sentence), the
        distribution every head gives over the keys (padded keys zeroed).
    rows_b : tensor of shape (rows, heads_b, n)
        The same rows (same sentence, same query) in model B.
    weights : tensor of shape (rows,), optional
        Weight of each row in the sum (default 1).

    Returns
    -------
    tensor of shape (heads_b, heads_a), float64
        ``S[j, i] = sum_r w_r JS(rows_b[r, j], rows_a[r, i])`` with
        ``JS(p, q) = H((p + q) / 2) - (H(p) + H(q)) / 2`` (Shannon entropy ``H`` in bits),
        clipped at 0 against rounding.

    Notes
    -----
    Each head's own entropy is computed once per row; only the mixtures are formed for
    every pair, a few rows at a time so the work tensor stays near ``_CHUNK_ELEMENTS``.
    ``(p + p) * 0.5`` is exactly ``p``, so identical rows give exactly 0.

    References
    ----------
    Lin (1991), "Divergence measures based on the Shannon entropy", IEEE Trans.
    Information Theory 37(1).
    """
    n_rows, heads_a, n = rows_a.shape
    heads_b = rows_b.shape[1]
    out = torch.zeros(heads_b, heads_a, dtype=torch.float64)
    if n_rows == 0:
        return out
    own_a, own_b = shannon_entropy(rows_a), shannon_entropy(rows_b)  # [rows, heads]
    step = max(1, _CHUNK_ELEMENTS // max(1, heads_a * heads_b * n))
    for r in range(0, n_rows, step):
        mix = shannon_entropy((rows_b[r : r + step, :, None] + rows_a[r : r + step, None]).mul_(0.5))
        js = (mix - (own_b[r : r + step, :, None] + own_a[r : r + step, None, :]) * 0.5).clamp_(min=0.0)
        if weights is not None:
            js.mul_(weights[r : r + step, None, None].to(js.dtype))
        out += js.sum(0, dtype=torch.float64)
    return out / LN2


def query_rows(attention: torch.Tensor, batch_index: torch.Tensor, queries: torch.Tensor, mask: torch.Tensor):
    """Rows ``[rows, layers*heads, tokens]`` of the given (sentence, query) pairs, padded keys zeroed.

    Parameters
    ----------
    attention : tensor of shape (batch, layers, heads, tokens, tokens)
    batch_index, queries : tensor of shape (rows,)
        Sentence and query position of each row.
    mask : tensor of shape (batch, tokens), bool
        True for real tokens.
    """
    flat = attention.flatten(1, 2)
    return flat[batch_index, :, queries, :] * mask[batch_index][:, None, :].to(attention.dtype)


def identical_heads(att_a: torch.Tensor, att_b: torch.Tensor, mask: torch.Tensor) -> torch.Tensor:
    """Per shared head position, whether both models gave exactly the same weights on real tokens.

    Parameters
    ----------
    att_a, att_b : tensor of shape (batch, layers, heads, tokens, tokens)
        The two models' attention on the same padded batch (layer and head counts may differ).
    mask : tensor of shape (batch, tokens), bool

    Returns
    -------
    tensor of shape (min layers, min heads), bool
    """
    layers = min(att_a.shape[1], att_b.shape[1])
    heads = min(att_a.shape[2], att_b.shape[2])
    differ = att_a[:, :layers, :heads] != att_b[:, :layers, :heads]
    real = (mask[:, :, None] & mask[:, None, :])[:, None, None]
    return ~(differ & real).any(dim=(0, 3, 4))


@dataclass
class HeadMatching:
    """Mean Jensen-Shannon divergence (bits) between every head of B and every head of A."""

    js: np.ndarray
    """[layers_b * heads_b, layers_a * heads_a]; row ``l * heads_b + h`` is B's LlHh."""
    layers_a: int
    heads_a: int
    layers_b: int
    heads_b: int
    identical: np.ndarray
    """[min layers, min heads] bool: the head's weights were the same in both models everywhere."""
    rows_total: int
    rows_compared: int

    def __post_init__(self) -> None:
        self.js = np.asarray(self.js, dtype=np.float64)
        fill = self.identical
        if fill.any():  # unchanged heads are unchanged: exactly 0, not a rounding residue
            idx = np.argwhere(fill)
            self.js[idx[:, 0] * self.heads_b + idx[:, 1], idx[:, 0] * self.heads_a + idx[:, 1]] = 0.0

    @property
    def same_position(self) -> np.ndarray:
        """[layers_b, heads_b] B's head against A's head at the same position; NaN where A has none."""
        out = np.full((self.layers_b, self.heads_b), np.nan)
        for layer in range(min(self.layers_a, self.layers_b)):
            for head in range(min(self.heads_a, self.heads_b)):
                out[layer, head] = self.js[layer * self.heads_b + head, layer * self.heads_a + head]
        return out

    @property
    def unchanged(self) -> np.ndarray:
        """[layers_b, heads_b] bool: same weights in both models (False where A has no such head)."""
        out = np.zeros((self.layers_b, self.heads_b), dtype=bool)
        layers, heads = self.identical.shape
        out[:layers, :heads] = self.identical
        return out

    @property
    def best_match(self) -> np.ndarray:
        """[layers_b, heads_b, 2] (layer, head) of the A head closest to each B head (ties: first)."""
        flat = np.argmin(self.js, axis=1)
        return np.stack([flat // self.heads_a, flat % self.heads_a], -1).reshape(
            self.layers_b, self.heads_b, 2
        )

    @property
    def best_js(self) -> np.ndarray:
        """[layers_b, heads_b] the divergence to the best-matching A head."""
        return self.js.min(axis=1).reshape(self.layers_b, self.heads_b)

    def change_texts(self, decimals: int = 2) -> list[list[str]]:
        """[layers_b][heads_b] what a cell of the head change map prints: the same-position change in
        bits (:func:`inspector.formatting.weight`), ``=`` for an unchanged head, ``''`` where A has none."""
        same, unchanged = self.same_position, self.unchanged
        return [
            [
                "" if np.isnan(v) else ("=" if unchanged[l, h] else fmt.weight(v, decimals))
                for h, v in enumerate(row)
            ]
            for l, row in enumerate(same)
        ]

    def moved(self, margin: float = 0.05) -> list[tuple[int, int, int, int, float, float]]:
        """B heads whose best match is another position, by more than ``margin`` bits.

        Returns (layer_b, head_b, layer_a, head_a, js_best, js_same) tuples, largest gain first;
        ``js_same`` is NaN where A has no head at B's position.
        """
        same, best, match = self.same_position, self.best_js, self.best_match
        out = []
        for layer in range(self.layers_b):
            for head in range(self.heads_b):
                la, ha = (int(v) for v in match[layer, head])
                if (la, ha) == (layer, head):
                    continue
                gain = same[layer, head] - best[layer, head]
                if np.isnan(gain) or gain > margin:
                    out.append((layer, head, la, ha, float(best[layer, head]), float(same[layer, head])))
        return sorted(out, key=lambda t: -(np.inf if np.isnan(t[5]) else t[5] - t[4]))


class MatchingSums:
    """Streaming weighted sums for :class:`HeadMatching`, batch by batch."""

    def __init__(self, layers_a: int, heads_a: int, layers_b: int, heads_b: int) -> None:
        self.shape = (layers_a, heads_a, layers_b, heads_b)
        self.sums = torch.zeros(layers_b * heads_b, layers_a * heads_a, dtype=torch.float64)
        self.identical = torch.ones(min(layers_a, layers_b), min(heads_a, heads_b), dtype=torch.bool)
        self.weight_total = 0.0
        self.rows_total = 0
        self.rows_compared = 0

    def add(
        self,
        att_a: torch.Tensor,
        att_b: torch.Tensor,
        mask: torch.Tensor,
        pick: tuple[torch.Tensor, torch.Tensor],
        n_real: int,
    ) -> None:
        """Fold in one batch: both models' attention [batch, layers, heads, T, T] and the picked rows."""
        self.identical &= identical_heads(att_a, att_b, mask)
        b_idx, t_idx = pick
        drawn = int(b_idx.numel())
        self.rows_total += n_real
        if drawn == 0:
            return
        weight = n_real / drawn
        rows_a = query_rows(att_a, b_idx, t_idx, mask)
        rows_b = query_rows(att_b, b_idx, t_idx, mask)
        self.sums += cross_js_sum(rows_a, rows_b) * weight
        self.weight_total += weight * drawn
        self.rows_compared += drawn

    def result(self) -> HeadMatching:
        layers_a, heads_a, layers_b, heads_b = self.shape
        return HeadMatching(
            js=(self.sums / max(self.weight_total, 1e-300)).numpy(),
            layers_a=layers_a,
            heads_a=heads_a,
            layers_b=layers_b,
            heads_b=heads_b,
            identical=self.identical.numpy().copy(),
            rows_total=self.rows_total,
            rows_compared=self.rows_compared,
        )


def pick_rows(
    mask: torch.Tensor, limit: int | None, generator: torch.Generator
) -> tuple[tuple[torch.Tensor, torch.Tensor], int]:
    """Draw at most ``limit`` real (sentence, query) rows of a batch: ((batch index, query), real rows).

    ``limit=None`` keeps every real row. The draw is uniform without replacement (seeded).
    """
    b_idx, t_idx = mask.nonzero(as_tuple=True)
    n_real = int(b_idx.numel())
    if limit is not None and n_real > limit:
        keep = torch.randperm(n_real, generator=generator)[:limit]
        b_idx, t_idx = b_idx[keep], t_idx[keep]
    return (b_idx, t_idx), n_real


def sentence_matching(attention_a: np.ndarray, attention_b: np.ndarray) -> HeadMatching:
    """The head matching on one sentence, over every real query row.

    Parameters
    ----------
    attention_a : ndarray of shape (layers_a, heads_a, n, n)
    attention_b : ndarray of shape (layers_b, heads_b, n, n)
        Both models' attention on the same n tokens (padding removed).

    Returns
    -------
    HeadMatching
    """
    a = torch.from_numpy(np.ascontiguousarray(attention_a))[None]
    b = torch.from_numpy(np.ascontiguousarray(attention_b))[None]
    n = a.shape[-1]
    mask = torch.ones(1, n, dtype=torch.bool)
    sums = MatchingSums(a.shape[1], a.shape[2], b.shape[1], b.shape[2])
    sums.add(a, b, mask, pick_rows(mask, None, torch.Generator())[0], n)
    return sums.result()
