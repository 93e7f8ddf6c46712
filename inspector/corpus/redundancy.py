"""Head redundancy: how alike two heads' attention rows are, over a corpus.

Two heads are compared on the same rows: the same sentence, the same real
query token, attention over the real key tokens. Their difference on one row is
the Jensen-Shannon divergence of the two rows, **in bits** (log base 2), so it
lies in [0, 1]: 0 for identical rows, 1 for rows with disjoint support. The
similarity shown in the heat map is ``1 - JS``. The corpus value for a pair is
the mean over rows.

Near-duplicate groups come from complete-linkage agglomerative clustering of
the mean divergences cut at a threshold (default :data:`DEFAULT_GROUP_THRESHOLD`
bits): inside a group *every* pair of heads is within the threshold, so chains
of pairwise-close heads that drift apart are not merged into one group.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from inspector.measures.metrics import shannon_entropy

if TYPE_CHECKING:
    import torch

LN2 = math.log(2.0)
DEFAULT_GROUP_THRESHOLD = 0.05
"""Bits of mean Jensen-Shannon divergence under which heads count as near-duplicates.

Measured on all-MiniLM-L6-v2 over the bundled ferry evaluation set (528
utterances, every row compared): the closest pair of distinct, unmodified heads
lies at 0.046 bits, 99.9% of the 2556 pairs lie above 0.06 bits and the median
at 0.27; a head copied by weight surgery sits at 0. So 0.05 bits keeps only
pairs whose rows are, on average, almost interchangeable. Divergences shrink on
very short utterances (fewer keys to tell rows apart), so compare sets of
similar length; the threshold is a setting (CLI ``--group-threshold``).
"""
DEFAULT_JS_ROWS = 16
"""Real query rows compared per batch in a corpus scan (see :mod:`inspector.corpus.run`)."""
_PAIR_CHUNK_ELEMENTS = 262_144


def js_divergence(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Jensen-Shannon divergence between distributions along the last axis, in bits.

    Parameters
    ----------
    p, q : ndarray or torch tensor of shape (..., n)
        Probability distributions (rows summing to 1).

    Returns
    -------
    array of shape (...)
        ``JS(p, q) = H(m) - (H(p) + H(q)) / 2`` with ``m = (p + q) / 2`` and ``H``
        the Shannon entropy in bits; equal to ``(KL(p||m) + KL(q||m)) / 2``.
        Clipped at 0 against rounding. ``scipy.spatial.distance.jensenshannon``
        returns the square root of this (with natural log unless ``base=2``).

    References
    ----------
    Lin (1991), "Divergence measures based on the Shannon entropy", IEEE Trans.
    Information Theory 37(1).
    """
    m = (p + q) / 2
    js = (shannon_entropy(m) - (shannon_entropy(p) + shannon_entropy(q)) / 2) / LN2
    return js.clip(min=0.0)


def pairwise_js_sum(rows: torch.Tensor, weights: torch.Tensor | None = None) -> torch.Tensor:
    """Sum over rows of the Jensen-Shannon divergence (bits) between every two heads.

    Parameters
    ----------
    rows : tensor of shape (rows, heads, n)
        Attention rows: for each row (one real query of one sentence), the
        distribution every head gives over the keys (padded keys zeroed).
    weights : tensor of shape (rows,), optional
        Weight of each row in the sum (default 1).

    Returns
    -------
    tensor of shape (heads, heads), float64
        ``S[i, j] = sum_r w_r JS(rows[r, i], rows[r, j])``, symmetric, zero diagonal.

    Notes
    -----
    ``JS = H((p + q) / 2) - (H(p) + H(q)) / 2``: the heads' own entropies are
    computed once; the mixtures are formed block of heads against block of heads
    for a few rows at a time, so each work tensor stays near
    ``_PAIR_CHUNK_ELEMENTS`` (cache-sized on CPUs). The midpoint ``(p + q) * 0.5``
    is exact for ``p == q``, so identical heads get exactly 0.

    References
    ----------
    Lin (1991), "Divergence measures based on the Shannon entropy".
    """
    import torch

    n_rows, heads, n = rows.shape
    out = torch.zeros(heads, heads, dtype=torch.float64)
    if n_rows == 0 or heads < 2:
        return out
    own = shannon_entropy(rows)  # [rows, heads]
    block = max(1, min(heads, math.isqrt(_PAIR_CHUNK_ELEMENTS // max(1, n))))
    step = max(1, _PAIR_CHUNK_ELEMENTS // (block * block * n))
    starts = range(0, heads, block)
    for a in starts:
        for b in (b for b in starts if b >= a):
            for r in range(0, n_rows, step):
                pa = rows[r : r + step, a : a + block, None, :]
                pb = rows[r : r + step, None, b : b + block, :]
                mix = shannon_entropy((pa + pb).mul_(0.5))  # [rows, |A|, |B|]; (p + p) / 2 == p exactly
                own_r = own[r : r + step]
                js = (mix - (own_r[:, a : a + block, None] + own_r[:, None, b : b + block]) * 0.5).clamp_(
                    min=0.0
                )
                if weights is not None:
                    js.mul_(weights[r : r + step, None, None].to(js.dtype))
                out[a : a + block, b : b + block] += js.sum(0, dtype=torch.float64)
    out = torch.triu(out / LN2, diagonal=1)
    return out + out.T


class DivergenceSums:
    """Streaming weighted sums of pairwise Jensen-Shannon divergence over attention rows.

    Rows arrive batch by batch (each batch's rows share one key length); they are
    buffered, zero-padded to a common key length (zeros add nothing to any
    entropy, so the divergences are unchanged) and compared ``flush_rows`` at a
    time, which keeps the per-batch overhead small. Memory: the ``heads x heads``
    sums plus at most ``flush_rows`` buffered rows.
    """

    def __init__(self, heads: int, flush_rows: int = 128) -> None:
        import torch

        self.sums = torch.zeros(heads, heads, dtype=torch.float64)
        self.weight_total = 0.0
        self.rows_compared = 0
        self.flush_rows = flush_rows
        self._pending: list[tuple[torch.Tensor, float]] = []
        self._pending_rows = 0

    def add(self, rows: torch.Tensor, weight: float) -> None:
        """Add rows [r, heads, n], each standing for ``weight`` rows of the corpus."""
        if rows.shape[0] == 0:
            return
        self._pending.append((rows, weight))
        self._pending_rows += rows.shape[0]
        self.weight_total += weight * rows.shape[0]
        self.rows_compared += rows.shape[0]
        if self._pending_rows >= self.flush_rows:
            self.flush()

    def flush(self) -> None:
        import torch
        import torch.nn.functional as F

        if not self._pending:
            return
        width = max(r.shape[-1] for r, _ in self._pending)
        rows = torch.cat([F.pad(r, (0, width - r.shape[-1])) for r, _ in self._pending])
        weights = torch.cat([torch.full((r.shape[0],), w) for r, w in self._pending])
        self.sums += pairwise_js_sum(rows, weights)
        self._pending.clear()
        self._pending_rows = 0

    def mean(self) -> np.ndarray:
        """Weighted mean divergence per pair (bits), [heads, heads]."""
        self.flush()
        return (self.sums / max(self.weight_total, 1e-300)).numpy()


@dataclass(frozen=True)
class SimilarPair:
    """Two heads and the mean Jensen-Shannon divergence (bits) between their rows."""

    layer_a: int
    head_a: int
    layer_b: int
    head_b: int
    js_divergence: float


@dataclass
class Redundancy:
    """Mean pairwise Jensen-Shannon divergence between heads over a corpus."""

    js: np.ndarray
    """[layers*heads, layers*heads] mean JS in bits; index = layer * heads + head."""
    num_layers: int
    num_heads: int
    rows_total: int
    """Real query rows in the corpus."""
    rows_compared: int
    """Rows actually compared (fewer than ``rows_total`` when rows were sampled)."""
    threshold: float = DEFAULT_GROUP_THRESHOLD
    groups: list[list[tuple[int, int]]] = field(init=False)

    def __post_init__(self) -> None:
        self.groups = near_duplicate_groups(self.js, self.num_heads, self.threshold)

    @property
    def similarity(self) -> np.ndarray:
        """``1 - JS`` (bits), [layers*heads, layers*heads]; 1 on the diagonal."""
        return 1.0 - self.js

    def pairs(self) -> list[SimilarPair]:
        """Every unordered pair of heads, most similar (lowest divergence) first."""
        i, j = np.triu_indices(len(self.js), k=1)
        order = np.lexsort((j, i, self.js[i, j]))
        h = self.num_heads
        return [
            SimilarPair(
                int(i[k] // h), int(i[k] % h), int(j[k] // h), int(j[k] % h), float(self.js[i[k], j[k]])
            )
            for k in order
        ]


def near_duplicate_groups(js: np.ndarray, num_heads: int, threshold: float) -> list[list[tuple[int, int]]]:
    """Groups of heads whose pairwise mean divergence is at most ``threshold`` bits.

    Parameters
    ----------
    js : ndarray of shape (k, k)
        Symmetric mean divergences, zero diagonal (k = layers * heads).
    num_heads : int
        Heads per layer, to turn flat indices into (layer, head).
    threshold : float
        Cut height in bits.

    Returns
    -------
    list of groups, each a list of (layer, head) with at least two heads;
    groups sorted by their first head.

    Notes
    -----
    Complete-linkage agglomerative clustering (scipy.cluster.hierarchy) cut at
    ``threshold``: the cophenetic distance of a complete-linkage merge is the
    largest pairwise divergence inside the merged group, so every two heads of
    a group differ by at most ``threshold``.

    References
    ----------
    Sorensen (1948) / Defays (1977), complete-linkage clustering; as implemented
    in SciPy's ``linkage(method="complete")`` and ``fcluster(criterion="distance")``.
    """
    from scipy.cluster.hierarchy import fcluster, linkage
    from scipy.spatial.distance import squareform

    k = len(js)
    if k < 2:
        return []
    sym = (js + js.T) / 2
    np.fill_diagonal(sym, 0.0)
    labels = fcluster(
        linkage(squareform(sym, checks=False), method="complete"), t=threshold, criterion="distance"
    )
    groups: dict[int, list[tuple[int, int]]] = {}
    for flat, cluster in enumerate(labels):
        groups.setdefault(int(cluster), []).append((flat // num_heads, flat % num_heads))
    return sorted((g for g in groups.values() if len(g) > 1), key=lambda g: g[0])
