"""Per-head attention metrics, pure numpy.

Every function takes attention weights shaped ``(..., n, n)`` (query rows, key
columns; leading axes are usually layers and heads, optionally a batch) and an
optional boolean ``mask`` shaped ``(..., n)`` or ``(n,)`` marking real tokens.
Padding never counts: masked keys are dropped from each row (rows are *not*
renormalised, since the model already gave padding zero weight) and masked
queries are left out of every average. Results have the leading shape ``(...)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

METRIC_NAMES: tuple[str, ...] = (
    "entropy",
    "entropy_normalized",
    "distance",
    "special_share",
    "self_share",
    "prev_share",
    "next_share",
    "confidence",
)
"""Stable names of the per-head metrics (CLI JSON keys, CSV columns, UI picker)."""

METRIC_LABELS: dict[str, str] = {
    "entropy": "Entropy (nats)",
    "entropy_normalized": "Entropy / ln n",
    "distance": "Mean distance (tokens)",
    "special_share": "Weight on special tokens",
    "self_share": "Weight on itself",
    "prev_share": "Weight on previous token",
    "next_share": "Weight on next token",
    "confidence": "Confidence (mean row max)",
}


def _masks(attention: np.ndarray, mask: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Return (query_mask (..., n), key_mask (..., 1, n)) as float arrays."""
    n = attention.shape[-1]
    if mask is None:
        m = np.ones(n, dtype=attention.dtype)
    else:
        m = np.asarray(mask, dtype=attention.dtype)
    m = np.broadcast_to(m, attention.shape[:-1])
    return m, m[..., None, :]


def _mean_over_queries(per_query: np.ndarray, qmask: np.ndarray) -> np.ndarray:
    total = (per_query * qmask).sum(-1)
    count = qmask.sum(-1)
    return np.divide(total, count, out=np.zeros_like(total), where=count > 0)


def row_entropy(attention: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
    """Shannon entropy of each query's attention row, in nats.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    mask : ndarray of shape (..., n) or (n,), optional
        True for real tokens; padded keys are excluded.

    Returns
    -------
    ndarray of shape (..., n)
        ``H_i = -sum_j a_ij ln a_ij`` with ``0 ln 0 = 0``.

    References
    ----------
    Shannon (1948), "A Mathematical Theory of Communication". Used per head by
    Clark et al. (2019), "What Does BERT Look At?".
    """
    _, kmask = _masks(attention, mask)
    a = attention * kmask
    logs = np.log(a, out=np.zeros_like(a), where=a > 0)
    return -(a * logs).sum(-1)


def head_entropy(
    attention: np.ndarray, mask: np.ndarray | None = None, *, normalize: bool = False
) -> np.ndarray:
    """Mean row entropy of each head over real queries.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    mask : ndarray of shape (..., n) or (n,), optional
    normalize : bool
        Divide each row's entropy by ``ln m`` where m is the number of real keys,
        giving a value in [0, 1] (0 when m == 1).

    Returns
    -------
    ndarray of shape (...)
        ``mean_i H_i`` (or ``mean_i H_i / ln m``).

    References
    ----------
    Clark et al. (2019), "What Does BERT Look At? An Analysis of BERT's Attention".
    """
    qmask, kmask = _masks(attention, mask)
    ent = row_entropy(attention, mask)
    if normalize:
        m = kmask.sum(-1)
        log_m = np.log(np.maximum(m, 1.0))
        ent = np.divide(ent, log_m, out=np.zeros_like(ent), where=log_m > 0)
    return _mean_over_queries(ent, qmask)


def mean_distance(attention: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
    """Mean attention distance of each head, in token positions.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    mask : ndarray of shape (..., n) or (n,), optional

    Returns
    -------
    ndarray of shape (...)
        ``mean_i sum_j a_ij |i - j|`` over real queries i and real keys j.

    References
    ----------
    Dosovitskiy et al. (2020), "An Image is Worth 16x16 Words", mean attention
    distance (there in pixels; here in token positions, per head).
    """
    qmask, kmask = _masks(attention, mask)
    n = attention.shape[-1]
    pos = np.arange(n, dtype=attention.dtype)
    dist = np.abs(pos[:, None] - pos[None, :])
    per_query = (attention * kmask * dist).sum(-1)
    return _mean_over_queries(per_query, qmask)


def share_on(attention: np.ndarray, keys: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
    """Mean weight that real queries put on a chosen set of keys.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    keys : bool ndarray of shape (..., n) or (n,)
        The keys whose weight is summed (e.g. special tokens).
    mask : ndarray of shape (..., n) or (n,), optional

    Returns
    -------
    ndarray of shape (...)
        ``mean_i sum_{j in keys} a_ij``.

    References
    ----------
    Clark et al. (2019), section 3 (attention to [CLS], [SEP] and punctuation).
    """
    qmask, kmask = _masks(attention, mask)
    sel = np.broadcast_to(np.asarray(keys, dtype=attention.dtype), attention.shape[:-1])[..., None, :]
    per_query = (attention * kmask * sel).sum(-1)
    return _mean_over_queries(per_query, qmask)


def offset_share(attention: np.ndarray, offset: int, mask: np.ndarray | None = None) -> np.ndarray:
    """Mean weight each real query puts on the token ``offset`` places away.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    offset : int
        0 for the token itself, -1 for the previous token, +1 for the next.
    mask : ndarray of shape (..., n) or (n,), optional

    Returns
    -------
    ndarray of shape (...)
        ``mean_{i: i+offset real} a_{i, i+offset}``: queries with no such
        neighbour (the first token for -1, the last for +1) are not counted.

    References
    ----------
    Clark et al. (2019), section 3.1 (heads attending to the previous/next token).
    """
    qmask, _ = _masks(attention, mask)
    diag = np.diagonal(attention, offset=offset, axis1=-2, axis2=-1)
    n = attention.shape[-1]
    if offset >= 0:
        q = qmask[..., : n - offset] * qmask[..., offset:]
    else:
        q = qmask[..., -offset:] * qmask[..., : n + offset]
    return _mean_over_queries(diag, q)


def confidence(attention: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
    """Mean of each real query's largest attention weight.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
    mask : ndarray of shape (..., n) or (n,), optional

    Returns
    -------
    ndarray of shape (...)
        ``mean_i max_j a_ij``.

    References
    ----------
    Voita et al. (2019), "Analyzing Multi-Head Self-Attention: Specialized Heads
    Do the Heavy Lifting, the Rest Can Be Pruned", head confidence.
    """
    qmask, kmask = _masks(attention, mask)
    return _mean_over_queries((attention * kmask).max(-1), qmask)


@dataclass
class HeadMetrics:
    """All per-head metrics, each an array shaped like the leading axes."""

    entropy: np.ndarray
    entropy_normalized: np.ndarray
    distance: np.ndarray
    special_share: np.ndarray
    self_share: np.ndarray
    prev_share: np.ndarray
    next_share: np.ndarray
    confidence: np.ndarray

    def get(self, name: str) -> np.ndarray:
        if name not in METRIC_NAMES:
            raise KeyError(f"unknown metric '{name}' (known: {', '.join(METRIC_NAMES)})")
        return getattr(self, name)

    def as_dict(self) -> dict[str, np.ndarray]:
        return {name: getattr(self, name) for name in METRIC_NAMES}


def head_metrics(attention: np.ndarray, special: np.ndarray, mask: np.ndarray | None = None) -> HeadMetrics:
    """Compute every per-head metric at once.

    Parameters
    ----------
    attention : ndarray of shape (..., n, n)
        Typically (layers, heads, n, n) for one sentence.
    special : bool ndarray of shape (..., n) or (n,)
        True for special tokens ([CLS], [SEP], <s> ...).
    mask : ndarray of shape (..., n) or (n,), optional
        True for real (non-padding) tokens.
    """
    a = np.asarray(attention, dtype=np.float64)
    return HeadMetrics(
        entropy=head_entropy(a, mask),
        entropy_normalized=head_entropy(a, mask, normalize=True),
        distance=mean_distance(a, mask),
        special_share=share_on(a, special, mask),
        self_share=offset_share(a, 0, mask),
        prev_share=offset_share(a, -1, mask),
        next_share=offset_share(a, 1, mask),
        confidence=confidence(a, mask),
    )
