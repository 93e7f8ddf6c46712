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

Which rows are compared (the rule README states): every real query row when
the whole set's comparisons fit the scan budget (:func:`comparison_budget`); otherwise a simple
random sample of rows whose size comes from the data: a pilot of
:data:`PILOT_UTTERANCES` utterances gives each pair's spread, and the sample is
made large enough that the largest standard error is about
:data:`TARGET_SE_FRACTION` of the cut. Every pair then carries its standard
error, and a pair counts toward a group (or the ``duplicates`` pruning order)
only when its divergence plus twice its standard error is within the cut. With
every row compared the standard error is 0 and the rule is the plain cut.
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
DEFAULT_JS_ROWS = "auto"
"""Rows compared in a corpus scan: ``auto`` (the rule above), None (every row) or a sample size."""
COMPARISON_FLOOR = 20_000_000
"""Comparisons (rows x head pairs x keys) any scan may spend on redundancy: about a fifth of a second of
one core (bench/bench_corpus.py measured 100-250 million per second on a 2-core machine)."""
FORWARD_SHARE = 0.1
"""Beyond the floor, redundancy may cost about this share of the set's forward pass, which keeps the
scan near its throughput target (README, speed table)."""
FLOPS_PER_COMPARISON = 400
"""Forward-pass floating-point operations that take as long as one comparison (bench/bench_corpus.py: the
bare forward of the sample model and of all-MiniLM-L6-v2 ran at 35-47 GFLOP/s, the comparisons at
about 110 million per second, on one thread of the same loaded 2-core machine)."""
PILOT_UTTERANCES = 32
"""Utterances whose rows give each pair's spread, to size a sample."""
TARGET_SE_FRACTION = 0.2
"""A sample is sized so the largest standard error is about this fraction of the cut (0.01 bits at 0.05)."""
MIN_SAMPLE_ROWS = 256
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

    References
    ----------
    Lin (1991), "Divergence measures based on the Shannon entropy".
    """
    return pairwise_js_moments(rows, weights)[0]


def pairwise_js_moments(
    rows: torch.Tensor, weights: torch.Tensor | None = None
) -> tuple[torch.Tensor, torch.Tensor]:
    """Weighted sums of the pairwise Jensen-Shannon divergence (bits) and of its square, over rows.

    Parameters
    ----------
    rows : tensor of shape (rows, heads, n)
    weights : tensor of shape (rows,), optional

    Returns
    -------
    sums, squares : tensors of shape (heads, heads), float64
        ``sum_r w_r JS_r[i, j]`` and ``sum_r w_r JS_r[i, j]^2``; symmetric, zero diagonal.

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
    out_sq = torch.zeros(heads, heads, dtype=torch.float64)
    if n_rows == 0 or heads < 2:
        return out, out_sq
    own = shannon_entropy(rows)  # [rows, heads]
    # Blocks of at most a quarter of the heads (at least 8): a diagonal block computes both (i, j)
    # and (j, i), so one block holding every head does twice the work of the pairs needed;
    # quarters do 1.25 times (30 % faster measured on 24 to 144 heads, the same sums).
    block = max(1, min(heads, math.isqrt(_PAIR_CHUNK_ELEMENTS // max(1, n)), max(8, -(-heads // 4))))
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
                sq = js * js
                if weights is not None:
                    w = weights[r : r + step, None, None].to(js.dtype)
                    js.mul_(w)
                    sq.mul_(w)
                out[a : a + block, b : b + block] += js.sum(0, dtype=torch.float64)
                out_sq[a : a + block, b : b + block] += sq.sum(0, dtype=torch.float64)
    out = torch.triu(out / LN2, diagonal=1)  # nats -> bits
    out_sq = torch.triu(out_sq / (LN2 * LN2), diagonal=1)
    return out + out.T, out_sq + out_sq.T


class DivergenceSums:
    """Streaming sums of pairwise Jensen-Shannon divergence (and its square) over attention rows.

    Rows arrive batch by batch (each batch's rows share one key length); they are
    buffered, zero-padded to a common key length (zeros add nothing to any
    entropy, so the divergences are unchanged) and compared ``flush_rows`` at a
    time, which keeps the per-batch overhead small. Memory: two ``heads x heads``
    matrices plus at most ``flush_rows`` buffered rows.
    """

    def __init__(self, heads: int, flush_rows: int = 128) -> None:
        import torch

        self.sums = torch.zeros(heads, heads, dtype=torch.float64)
        self.squares = torch.zeros(heads, heads, dtype=torch.float64)
        self.weight_total = 0.0
        self.rows_compared = 0
        self.unit_weights = True
        self.flush_rows = flush_rows
        self._pending: list[tuple[torch.Tensor, float]] = []
        self._pending_rows = 0

    def add(self, rows: torch.Tensor, weight: float = 1.0) -> None:
        """Add rows [r, heads, n], each standing for ``weight`` rows of the corpus."""
        if rows.shape[0] == 0:
            return
        self._pending.append((rows, weight))
        self._pending_rows += rows.shape[0]
        self.weight_total += weight * rows.shape[0]
        self.rows_compared += rows.shape[0]
        self.unit_weights = self.unit_weights and weight == 1.0
        if self._pending_rows >= self.flush_rows:
            self.flush()

    def flush(self) -> None:
        import torch
        import torch.nn.functional as F

        if not self._pending:
            return
        width = max(r.shape[-1] for r, _ in self._pending)
        rows = torch.cat([F.pad(r, (0, width - r.shape[-1])) for r, _ in self._pending])
        weights = None
        if not all(w == 1.0 for _, w in self._pending):
            weights = torch.cat([torch.full((r.shape[0],), w) for r, w in self._pending])
        sums, squares = pairwise_js_moments(rows, weights)
        self.sums += sums
        self.squares += squares
        self._pending.clear()
        self._pending_rows = 0

    def mean(self) -> np.ndarray:
        """Weighted mean divergence per pair (bits), [heads, heads]."""
        self.flush()
        return (self.sums / max(self.weight_total, 1e-300)).numpy()

    def variance(self) -> np.ndarray:
        """Unbiased sample variance of the per-row divergence per pair (unit weights), [heads, heads]."""
        self.flush()
        m = self.rows_compared
        if not self.unit_weights:
            raise ValueError("the variance of a weighted sum is not defined here")
        if m < 2:
            return np.zeros(tuple(self.sums.shape))
        var = (self.squares - self.sums * self.sums / m) / (m - 1)
        return var.clamp(min=0.0).numpy()

    def standard_error(self, population_rows: int) -> np.ndarray:
        """Standard error of each pair's mean when the rows are a simple random sample of ``population_rows``.

        Returns
        -------
        ndarray of shape (heads, heads)
            ``sqrt((1 - m / N) s^2 / m)`` with m rows compared, N = ``population_rows`` and
            s^2 the sample variance; 0 when every row was compared.

        References
        ----------
        Cochran (1977), "Sampling Techniques", 3rd ed., ch. 2: the variance of the
        sample mean under simple random sampling, with the finite population correction.
        """
        m = self.rows_compared
        if m == 0:
            return np.zeros(tuple(self.sums.shape))
        fpc = max(0.0, 1.0 - m / max(population_rows, m))
        return np.sqrt(fpc * self.variance() / m)


def sample_size(largest_variance: float, target_se: float, population_rows: int) -> int:
    """Rows to draw so a mean with this per-row variance has about ``target_se`` standard error.

    Parameters
    ----------
    largest_variance : float
        The largest per-row variance of any pair (from a pilot).
    target_se : float
        The standard error wanted, in bits.
    population_rows : int
        Rows in the whole set.

    Returns
    -------
    int
        ``n = n0 / (1 + n0 / N)`` with ``n0 = s^2 / se^2``, at least
        :data:`MIN_SAMPLE_ROWS` (and at most N).

    References
    ----------
    Cochran (1977), "Sampling Techniques", 3rd ed., sec. 4.4 (sample size for a
    given variance of the mean, with the finite population correction).
    """
    n0 = largest_variance / max(target_se, 1e-12) ** 2
    n = math.ceil(n0 / (1.0 + n0 / max(population_rows, 1)))
    return int(min(population_rows, max(n, MIN_SAMPLE_ROWS)))


def comparison_budget(encoder_parameters: int, tokens: int) -> float:
    """Comparisons a scan may spend on redundancy: the floor, or a share of the forward pass if larger.

    ``max(COMPARISON_FLOOR, FORWARD_SHARE * 2 * P * T / FLOPS_PER_COMPARISON)`` with P the encoder's
    parameters (embedding table excluded) and T the set's tokens; ``2 P T`` counts the forward pass's
    multiply-adds (Kaplan et al. 2020, "Scaling Laws for Neural Language Models", sec. 2.1).
    """
    forward = 2.0 * encoder_parameters * tokens
    return max(float(COMPARISON_FLOOR), FORWARD_SHARE * forward / FLOPS_PER_COMPARISON)


def comparison_cost(lengths: np.ndarray, heads_total: int) -> float:
    """Comparisons needed to compare every real row: ``sum_u n_u^2`` rows x keys, times head pairs."""
    lengths = np.asarray(lengths, dtype=np.float64)
    return float((lengths**2).sum()) * heads_total * (heads_total - 1) / 2


@dataclass(frozen=True)
class SimilarPair:
    """Two heads and the mean Jensen-Shannon divergence (bits) between their rows."""

    layer_a: int
    head_a: int
    layer_b: int
    head_b: int
    js_divergence: float
    standard_error: float = 0.0
    """Of ``js_divergence`` when rows were sampled (0 when every row was compared)."""


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
    standard_error: np.ndarray | None = None
    """[layers*heads, layers*heads] standard error of each mean (bits); None or 0 when every row was compared."""
    groups: list[list[tuple[int, int]]] = field(init=False)

    def __post_init__(self) -> None:
        if self.standard_error is None:
            self.standard_error = np.zeros_like(self.js)
        self.groups = near_duplicate_groups(self.upper_bound, self.num_heads, self.threshold)

    @property
    def sampled(self) -> bool:
        return self.rows_compared < self.rows_total

    @property
    def upper_bound(self) -> np.ndarray:
        """``js + 2 * standard_error``: a pair is a near-duplicate only if this is within the cut."""
        return self.js + 2.0 * self.standard_error

    @property
    def largest_standard_error(self) -> float:
        k = len(self.js)
        return float(self.standard_error[np.triu_indices(k, 1)].max()) if k > 1 else 0.0

    @property
    def similarity(self) -> np.ndarray:
        """``1 - JS`` (bits), [layers*heads, layers*heads]; 1 on the diagonal."""
        return 1.0 - self.js

    def pairs(self) -> list[SimilarPair]:
        """Every unordered pair of heads, most similar (lowest divergence) first."""
        i, j = np.triu_indices(len(self.js), k=1)
        order = np.lexsort((j, i, self.js[i, j]))
        h, se = self.num_heads, self.standard_error
        return [
            SimilarPair(
                int(i[k] // h),
                int(i[k] % h),
                int(j[k] // h),
                int(j[k] % h),
                float(self.js[i[k], j[k]]),
                float(se[i[k], j[k]]),
            )
            for k in order
        ]


def near_duplicate_groups(js: np.ndarray, num_heads: int, threshold: float) -> list[list[tuple[int, int]]]:
    """Groups of heads whose pairwise mean divergence is at most ``threshold`` bits.

    Parameters
    ----------
    js : ndarray of shape (k, k)
        Symmetric mean divergences, zero diagonal (k = layers * heads); with
        sampled rows, pass ``js + 2 * standard_error`` so a pair only counts when
        it is within the cut by more than twice its standard error.
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
