"""Per-head attention metrics over numpy arrays or torch tensors.

Every function takes attention weights shaped ``(..., n, n)`` (query rows, key
columns; leading axes are usually layers and heads, optionally a batch) and an
optional boolean ``mask`` shaped ``(..., n)`` or ``(n,)`` marking real tokens.
Padding never counts: masked keys are dropped from each row (rows are *not*
renormalised, since the model already gave padding zero weight) and masked
queries are left out of every average. Results have the leading shape ``(...)``.

Each formula is written once. Given numpy arrays the functions return numpy
arrays; given a torch tensor they run in torch on the tensor's dtype and device
(the corpus scan uses this on whole padded batches ``[batch, layers, heads, n, n]``
with masks shaped ``[batch, 1, 1, n]``), so nothing is copied to numpy per batch.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from types import ModuleType
from typing import Any

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


def _is_torch(x: object) -> bool:
    return type(x).__module__.startswith("torch")


def _xp(attention: Any) -> ModuleType:
    """The array namespace of ``attention``: numpy, or torch for tensors (imported lazily)."""
    if _is_torch(attention):
        import torch

        return torch
    return np


def _as_float(xp: ModuleType, x: Any, like: Any) -> Any:
    """``x`` as an array of ``like``'s float dtype (and device, for torch)."""
    if xp is np:
        return np.asarray(x, dtype=like.dtype)
    return xp.as_tensor(x, dtype=like.dtype, device=like.device)


def _masks(attention: Any, mask: Any | None) -> tuple[Any, Any]:
    """Return (query_mask (..., n), key_mask (..., 1, n)) as float arrays.

    The masks keep the mask's own leading shape (which must broadcast against the
    attention's) instead of being expanded, so a mask shaped (batch, 1, 1, n)
    costs nothing per layer and head.
    """
    xp = _xp(attention)
    n = attention.shape[-1]
    m = _as_float(xp, np.ones(n) if mask is None else mask, attention)
    if m.ndim > attention.ndim - 1 or m.shape[-1] != n:
        raise ValueError(
            f"mask of shape {tuple(m.shape)} does not fit attention of shape {tuple(attention.shape)}"
        )
    return m, m[..., None, :]


def _safe_divide(xp: ModuleType, num: Any, den: Any) -> Any:
    """``num / den`` where ``den > 0``, else 0."""
    ok = den > 0
    return xp.where(ok, num / xp.where(ok, den, 1), 0)


def _mean_over_queries(per_query: Any, qmask: Any) -> Any:
    # With no real query the total is 0 too, so dividing by max(count, 1) gives the 0 we want.
    return (per_query * qmask).sum(-1) / qmask.sum(-1).clip(min=1.0)


def shannon_entropy(p: np.ndarray) -> np.ndarray:
    """Shannon entropy of distributions along the last axis, in nats.

    Parameters
    ----------
    p : ndarray or torch tensor of shape (..., n)
        Non-negative weights (each row summing to 1 for a true entropy).

    Returns
    -------
    array of shape (...)
        ``H(p) = -sum_j p_j ln p_j`` with ``0 ln 0 = 0``.

    References
    ----------
    Shannon (1948), "A Mathematical Theory of Communication".
    """
    xp = _xp(p)
    # Same value: 0 ln(tiny) = 0, and p ln p for every p >= tiny. Clamping to the smallest
    # *normal* number (denormals make log slow) is several times faster than a masked log
    # or torch.special.entr on CPU, and the in-place steps make one temporary, not three.
    if xp is np:
        p = np.asarray(p)
        plogp = np.maximum(p, np.finfo(p.dtype).tiny if p.dtype.kind == "f" else 1e-300)
        np.log(plogp, out=plogp)
        plogp *= p
        return -plogp.sum(-1)
    plogp = p.clamp_min(xp.finfo(p.dtype).tiny)
    if p.requires_grad:
        plogp = plogp.log() * p
    else:
        plogp.log_().mul_(p)
    return -plogp.sum(-1)


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
    return shannon_entropy(attention * kmask)


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
    return _entropy_over_queries(attention, row_entropy(attention, mask), mask, normalize=normalize)


def _entropy_over_queries(attention: Any, ent: Any, mask: Any | None, *, normalize: bool) -> Any:
    """Average row entropies ``ent`` (..., n) over real queries, optionally divided by ln m."""
    qmask, kmask = _masks(attention, mask)
    return _mean_over_queries(_per_log_keys(ent, kmask) if normalize else ent, qmask)


def _per_log_keys(ent: Any, kmask: Any, reach: Any | None = None) -> Any:
    """Row entropies divided by ``ln m`` (m = number of real keys the query can see); 0 where m <= 1."""
    xp = _xp(ent)
    seen = kmask if reach is None else kmask * reach
    log_m = xp.log(seen.sum(-1).clip(min=1.0))
    return _safe_divide(xp, ent, log_m)


def window_reach(windows: Sequence[int | None], n: int) -> np.ndarray | None:
    """Which keys each layer's queries can see, for layers with a local attention window.

    Parameters
    ----------
    windows : sequence of int or None, one per layer
        The largest distance ``|i - j|`` a layer's queries attend over (None: global).
    n : int
        Tokens.

    Returns
    -------
    bool ndarray of shape (layers, 1, n, n), or None when every layer is global
        ``reach[l, 0, i, j] = |i - j| <= w_l``; it broadcasts over heads (and a
        leading batch axis) in :func:`head_metrics`.

    References
    ----------
    Beltagy, Peters & Cohan (2020), "Longformer", sliding-window attention; the
    window as transformers' bidirectional sliding-window mask applies it.
    """
    if all(w is None for w in windows):
        return None
    dist = np.abs(np.arange(n)[:, None] - np.arange(n)[None, :])
    return np.stack([np.ones((n, n), bool) if w is None else dist <= w for w in windows])[:, None]


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
    return _mean_over_queries(_distance_rows(attention, kmask), qmask)


def _distance_rows(attention: Any, kmask: Any) -> Any:
    """Per query: ``sum_j a_ij |i - j|`` over real keys."""
    n = attention.shape[-1]
    pos = _as_float(_xp(attention), np.arange(n), attention)
    dist = abs(pos[:, None] - pos[None, :])
    return (attention * (dist * kmask)).sum(-1)  # dist * kmask is small: (mask dims..., n, n)


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
    return _mean_over_queries(_share_rows(attention, kmask, keys), qmask)


def _share_rows(attention: Any, kmask: Any, keys: Any) -> Any:
    """Per query: ``sum_{j in keys} a_ij`` over real keys."""
    weights = kmask * _as_float(_xp(attention), keys, attention)[..., None, :]  # small: (mask dims..., 1, n)
    return (attention * weights).sum(-1)


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
    return _mean_over_queries(*_offset_rows(attention, qmask, offset))


def _offset_rows(attention: Any, qmask: Any, offset: int) -> tuple[Any, Any]:
    """(weights ``a_{i, i+offset}``, mask of the queries i whose neighbour i+offset is real)."""
    diag = _xp(attention).diagonal(attention, offset, -2, -1)
    n = attention.shape[-1]
    if offset >= 0:
        q = qmask[..., : n - offset] * qmask[..., offset:]
    else:
        q = qmask[..., -offset:] * qmask[..., : n + offset]
    return diag, q


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
    return _confidence_of(attention * kmask, qmask)


def _confidence_of(masked: Any, qmask: Any) -> Any:
    """Mean over real queries of the row maxima of key-masked attention."""
    return _mean_over_queries(_xp(masked).amax(masked, -1), qmask)


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


_LINEAR = ("distance", "special_share", "self_share", "prev_share", "next_share")
"""The metrics that are weighted sums of attention weights (see :func:`_pair_weights`)."""


def _pair_weights(a: Any, qmask: Any, kmask: Any, special: Any) -> tuple[Any, Any]:
    """Weights ``W[..., i, j, c]`` and divisors ``N[..., c]`` with ``metric_c = sum_ij a_ij W_ijc / N_c``.

    Each linear metric is a mean over its queries of ``sum_j a_ij w_ij``, i.e.
    ``sum_ij a_ij (q_i w_ij) / sum_i q_i``: distance (``w = |i - j| k_j``), special
    share (``w = s_j k_j``), self / previous / next share (``w = 1`` on the
    diagonal / first sub- / first super-diagonal, counting the queries whose
    neighbour is real, as :func:`offset_share`).
    """
    xp = _xp(a)
    n = a.shape[-1]
    pos = _as_float(xp, np.arange(n), a)
    q_i = qmask[..., :, None]
    qk = q_i * kmask  # (mask dims..., n, n): real query, real key
    columns = [
        qk * abs(pos[:, None] - pos[None, :]),
        qk * _as_float(xp, special, a)[..., None, :],
        q_i * (pos[:, None] == pos[None, :]),
        qk * (pos[:, None] - 1 == pos[None, :]),
        qk * (pos[:, None] + 1 == pos[None, :]),
    ]
    weights = xp.stack(xp.broadcast_arrays(*columns) if xp is np else xp.broadcast_tensors(*columns), -1)
    queries = qmask.sum(-1)
    adjacent = (qmask[..., 1:] * qmask[..., :-1]).sum(-1)
    divisors = xp.stack([queries, queries, queries, adjacent, adjacent], -1).clip(min=1.0)
    return weights, divisors


_CHUNK_ELEMENTS = 1 << 18
"""Attention weights per chunk of the row passes (1 MB in float32: one head at 512 tokens),
so the entropy's temporaries and the row maxima stay in the processor's cache."""
_ROW_CHUNK = 1 << 17
"""Attention weights per chunk of the one-sentence pass (half a head at 512 tokens: the chunk
and its temporary stay in a core's cache; measured fastest of 32 to 512 rows at 512 tokens)."""


def _row_passes(a: Any, kmask: Any | None) -> tuple[Any, Any]:
    """Per query: entropy (nats) and largest weight over real keys, ``(..., n)`` each.

    The leading axes are walked in cache-sized chunks; padded keys are zeroed chunk by
    chunk (``kmask`` None means every key is real and nothing is copied).
    """
    xp = _xp(a)
    n = a.shape[-1]
    lead = a.shape[:-2]
    flat = a.reshape(-1, a.shape[-2], n)
    k = flat.shape[0]
    if kmask is not None:
        if xp is np:
            km = np.broadcast_to(kmask, (*lead, 1, n)).reshape(k, 1, n)
        else:
            km = kmask.expand(*lead, 1, n).reshape(k, 1, n)
    new = np.empty if xp is np else xp.empty
    kw = {"dtype": a.dtype} if xp is np else {"dtype": a.dtype, "device": a.device}
    ent, top = new((k, a.shape[-2]), **kw), new((k, a.shape[-2]), **kw)
    step = max(1, _CHUNK_ELEMENTS // max(1, a.shape[-2] * n))
    for start in range(0, k, step):
        part = flat[start : start + step]
        if kmask is not None:
            part = part * km[start : start + step]
        ent[start : start + step] = shannon_entropy(part)
        top[start : start + step] = xp.amax(part, -1)
    return ent.reshape(*lead, a.shape[-2]), top.reshape(*lead, a.shape[-2])


def _unpadded_metrics(a: Any, special: Any) -> HeadMetrics:
    """Every metric of attention without padding, ``(..., n, n)``, in one pass per chunk.

    The same definitions as the functions above with every query and key real: per chunk
    (several heads, or a block of one head's rows for long inputs, so it stays in cache) the row entropies and maxima, the
    distance ``sum_ij a_ij |i - j|`` (row sums of ``a * D``), the special-token weight
    ``sum_ij a_ij s_j`` (a matrix-vector product) and the three diagonals; then each is
    averaged over its queries (n, or the n - 1 queries with a neighbour). Runs in torch on
    the array's own memory (no copy), in its float dtype.
    """
    import torch

    as_numpy = not _is_torch(a)
    t = torch.from_numpy(np.ascontiguousarray(a)) if as_numpy else a
    n = t.shape[-1]
    lead = t.shape[:-2]
    flat = t.reshape(-1, n, n)
    k = flat.shape[0]
    pos = torch.arange(n, dtype=t.dtype, device=t.device)
    dist = (pos[:, None] - pos[None, :]).abs_()
    spec = torch.as_tensor(np.asarray(special) if not _is_torch(special) else special).to(t)
    rows = torch.empty((4, k, n), dtype=t.dtype, device=t.device)  # entropy, max, distance, special
    tiny = torch.finfo(t.dtype).tiny
    # Chunks: several whole heads for short inputs, blocks of a head's rows for long ones.
    heads_per, rows_per = max(1, _ROW_CHUNK // max(1, n * n)), min(n, max(1, _ROW_CHUNK // max(1, n)))
    buf = torch.empty((min(heads_per, k), rows_per, n), dtype=t.dtype, device=t.device)
    for h0 in range(0, k, heads_per):
        for r0 in range(0, n, rows_per):
            h1, r1 = h0 + heads_per, r0 + rows_per
            part = flat[h0:h1, r0:r1]
            b = buf[: part.shape[0], : part.shape[1]]
            torch.clamp_min(part, tiny, out=b).log_().mul_(part)
            torch.sum(b, -1, out=rows[0, h0:h1, r0:r1])
            torch.amax(part, -1, out=rows[1, h0:h1, r0:r1])
            torch.mul(part, dist[r0:r1], out=b)
            torch.sum(b, -1, out=rows[2, h0:h1, r0:r1])
            torch.matmul(part, spec, out=rows[3, h0:h1, r0:r1])
    rows[0].neg_()
    means = rows.mean(-1)  # over the n real queries
    diagonals = [torch.diagonal(flat, offset, -2, -1).sum(-1) for offset in (0, -1, 1)]
    adjacent = max(n - 1, 1)
    log_n = float(np.log(n)) if n > 1 else 0.0
    fields = {
        "entropy": means[0],
        "entropy_normalized": means[0] / log_n if log_n > 0 else torch.zeros_like(means[0]),
        "distance": means[2],
        "special_share": means[3],
        "self_share": diagonals[0] / max(n, 1),
        "prev_share": diagonals[1] / adjacent,
        "next_share": diagonals[2] / adjacent,
        "confidence": means[1],
    }
    shaped = {name: v.reshape(lead) for name, v in fields.items()}
    return HeadMetrics(**{name: v.numpy() if as_numpy else v for name, v in shaped.items()})


def _contract_pairs(a: Any, weights: Any) -> Any:
    """``sum_ij a[..., i, j] weights[..., i, j, c]``; one matrix product when the weights are shared."""
    xp = _xp(a)
    n = a.shape[-1]
    if weights.ndim == 3:  # no per-sentence mask: (n, n, c), the same for every head
        flat = a.reshape(-1, a.shape[-2] * n) @ weights.reshape(-1, weights.shape[-1])
        return flat.reshape(*a.shape[:-2], weights.shape[-1])
    return xp.einsum("...ij,...ijc->...c", a, weights)


def head_metrics(
    attention: np.ndarray,
    special: np.ndarray,
    mask: np.ndarray | None = None,
    *,
    dtype: Any = None,
    reach: np.ndarray | None = None,
) -> HeadMetrics:
    """Compute every per-head metric at once.

    Parameters
    ----------
    attention : ndarray or torch tensor of shape (..., n, n)
        Typically (layers, heads, n, n) for one sentence, or a padded batch
        (batch, layers, heads, n, n). Arrays keep their float dtype (float32 stays
        float32; other types are computed in float64); torch tensors keep their
        dtype and device, and the fields are then torch tensors.
    special : bool array of shape (..., n) or (n,)
        True for special tokens ([CLS], [SEP], <s> ...).
    mask : array of shape (..., n) or (n,), optional
        True for real (non-padding) tokens.
    dtype : numpy float dtype, optional
        Compute an array input in this dtype instead (``np.float64`` for a float64
        computation of float32 attention; it copies the whole array).
    reach : bool array of shape (..., n, n), optional
        Keys each query can see by construction (local attention windows, see
        :func:`window_reach`); normalised entropy then divides each row by the log
        of the number of real keys inside the window. Default: every key.

    Returns
    -------
    HeadMetrics
        The values of :func:`head_entropy` (plain and normalised),
        :func:`mean_distance`, :func:`share_on` (special tokens),
        :func:`offset_share` (0, -1, +1) and :func:`confidence`.

    Notes
    -----
    Without padding (one sentence) every metric comes from one fused pass per chunk of
    heads, a head at a time for long inputs so the temporaries stay in cache, on the
    array's own memory (see :func:`_unpadded_metrics`). With padding (batches), the
    entropy ``-sum_j a_ij ln a_ij`` and the row maximum are taken chunk by chunk with the
    padded keys zeroed per chunk, and the five linear metrics are weighted sums over
    (query, key) pairs, ``sum_ij a_ij W_ijc / N_c``, evaluated by one contraction. Both
    equal the per-metric functions up to rounding.
    In float32 the row entropies carry a relative rounding error of a few 1e-7 per
    term (the logarithm and the pairwise sum); see tests/test_metrics.py.

    References
    ----------
    Clark et al. (2019), "What Does BERT Look At?" (entropy, special-token and
    neighbour shares); Voita et al. (2019) (confidence); Dosovitskiy et al.
    (2020) (mean attention distance).
    """
    if _is_torch(attention):
        a = attention
    else:
        a = np.asarray(attention)
        if dtype is not None:
            a = a.astype(dtype, copy=False)
        elif a.dtype not in (np.float32, np.float64):
            a = a.astype(np.float64)
    xp = _xp(a)
    qmask, kmask = _masks(a, mask)
    every_key = mask is None or (bool(mask.all()) if _is_torch(mask) else bool(np.all(mask)))
    plain = reach is None and np.ndim(special) == 1 and a.ndim >= 2
    if every_key and plain and not getattr(a, "requires_grad", False):
        return _unpadded_metrics(a, special)
    ent, top = _row_passes(a, None if every_key else kmask)
    seen = None if reach is None else _as_float(xp, reach, a)
    per_query = xp.stack([ent, _per_log_keys(ent, kmask, seen), top])
    entropy, normalized, conf = _mean_over_queries(per_query, qmask)
    weights, divisors = _pair_weights(a, qmask, kmask, special)
    linear = _contract_pairs(a, weights) / divisors
    distance, special_share, self_share, prev_share, next_share = (
        linear[..., c] for c in range(len(_LINEAR))
    )
    return HeadMetrics(
        entropy=entropy,
        entropy_normalized=normalized,
        distance=distance,
        special_share=special_share,
        self_share=self_share,
        prev_share=prev_share,
        next_share=next_share,
        confidence=conf,
    )
