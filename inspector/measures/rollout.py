"""Relevance carried across layers: attention rollout and attention flow."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

FLOW_MAX_TOKENS = 40
"""Longest input for which :func:`attention_flow` is attempted (it solves n^2 max-flows)."""

_FLOW_SCALE = 1e7
"""Capacities are scaled to integers for SciPy's max-flow solver (error < n*L/1e7)."""


def head_mean(attention: np.ndarray, heads_on: np.ndarray | None = None) -> np.ndarray:
    """Each layer's attention averaged over its heads that are switched on.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    heads_on : ndarray of shape (layers, heads), optional
        1 for heads that run, 0 for heads switched off (a gate of 0 removes a
        head's term from the layer's output). Default: every head on.

    Returns
    -------
    ndarray of shape (layers, n, n), float64
        ``sum_h g_lh a_lh / sum_h g_lh``; all zeros for a layer whose heads are all off.

    Notes
    -----
    With every head on this is the plain head mean of Abnar & Zuidema (2020).
    Leaving switched-off heads out of the mean is our own reading for a masked
    model (no published source): a head that contributes nothing carries nothing.
    """
    att = np.asarray(attention)
    if heads_on is None:
        return att.mean(axis=1, dtype=np.float64)  # float64 sums, no float64 copy of the attention
    w = np.asarray(heads_on, dtype=np.float64)
    total = w.sum(axis=1)
    summed = np.stack([(w[l][:, None, None] * att[l]).sum(0, dtype=np.float64) for l in range(len(att))])
    return summed / np.where(total > 0, total, 1.0)[:, None, None]


def residual_attention(
    attention: np.ndarray, residual: float = 0.5, heads_on: np.ndarray | None = None
) -> np.ndarray:
    """Head-averaged attention with the residual connection, rows renormalised.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    residual : float, default 0.5
        Weight of the identity (the skip connection).
    heads_on : ndarray of shape (layers, heads), optional
        Heads switched off (0) are left out of the mean (see :func:`head_mean`).

    Returns
    -------
    ndarray of shape (layers, n, n)
        ``A_l = (1 - r) * mean_h a_l,h + r * I``, each row divided by its sum.

    References
    ----------
    Abnar & Zuidema (2020), "Quantifying Attention Flow in Transformers", sec. 3.
    """
    mean = head_mean(attention, heads_on)
    n = mean.shape[-1]
    aug = (1.0 - residual) * mean + residual * np.eye(n)
    return aug / aug.sum(-1, keepdims=True)


def attention_rollout(
    attention: np.ndarray,
    residual: float = 0.5,
    *,
    cumulative: bool = False,
    heads_on: np.ndarray | None = None,
) -> np.ndarray:
    """Attention rollout: the residual-augmented attention multiplied up the stack.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
        One sentence, padding removed.
    residual : float, default 0.5
    cumulative : bool
        Return the rollout after every layer instead of only the top one.
    heads_on : ndarray of shape (layers, heads), optional
        0 for heads switched off: they are left out of each layer's mean.

    Returns
    -------
    ndarray of shape (n, n), or (layers, n, n) if ``cumulative``
        ``R_1 = A_1``, ``R_l = A_l R_{l-1}``; row i of ``R_L`` says how much of
        output token i traces back to each input token. Rows sum to 1.

    References
    ----------
    Abnar & Zuidema (2020), "Quantifying Attention Flow in Transformers", eq. for
    attention rollout, with ``A = 0.5 W_att + 0.5 I``.
    """
    aug = residual_attention(attention, residual, heads_on)
    out = np.empty_like(aug)
    acc = np.eye(aug.shape[-1])
    for layer, a in enumerate(aug):
        acc = a @ acc
        out[layer] = acc
    return out if cumulative else out[-1]


def rollout_rows(
    attention: np.ndarray, rows: Sequence[int], residual: float = 0.5, heads_on: np.ndarray | None = None
) -> np.ndarray:
    """Chosen rows of the attention rollout, without forming the full product.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
        One sentence, padding removed.
    rows : sequence of int
        Output tokens whose rows are wanted (the classification token, for relevance).
    residual : float, default 0.5
    heads_on : ndarray of shape (layers, heads), optional
        As for :func:`head_mean` (switched-off heads left out of the layer means).

    Returns
    -------
    ndarray of shape (len(rows), n), float64
        Rows ``rows`` of :func:`attention_rollout`: ``e_i^T A_L ... A_1`` computed as a row
        vector multiplied down the stack, each ``A_l = D_l^-1 ((1 - r) M_l + r I)`` (``M_l`` the
        head mean of :func:`head_mean`) applied as ``u = v / s_l``, ``v <- (1 - r) u M_l + r u``
        with ``s_l`` the
        row sums of the augmented matrix. Costs two passes over the attention instead of
        ``layers`` products of n x n matrices.

    References
    ----------
    Abnar & Zuidema (2020), "Quantifying Attention Flow in Transformers", attention
    rollout (the product of the layers' augmented attention).
    """
    att = np.asarray(attention)
    layers, heads, n, _ = att.shape
    on = np.ones((layers, heads)) if heads_on is None else np.asarray(heads_on, dtype=np.float64)
    v = np.zeros((len(rows), n))
    v[np.arange(len(rows)), list(rows)] = 1.0
    ones = np.ones((n, 1), dtype=att.dtype)
    for layer in range(layers - 1, -1, -1):
        a, w = att[layer], on[layer]
        share = w / w.sum() if w.sum() > 0 else np.zeros_like(w)  # weights of the head mean
        row_sums = np.matmul(a, ones)[..., 0].astype(np.float64)  # [heads, n]; a matrix-vector product is
        sums = (1.0 - residual) * (share[:, None] * row_sums).sum(0) + residual  # faster than a reduction
        u = v / sums
        per_head = np.matmul(u.astype(a.dtype), a)  # [heads, rows, n]
        mixed = (share[:, None, None] * per_head).sum(0)
        v = (1.0 - residual) * mixed + residual * u
    return v


def flow_graph(
    attention: np.ndarray, residual: float = 0.5, heads_on: np.ndarray | None = None
) -> tuple[np.ndarray, int, int]:
    """The layered flow network of Abnar & Zuidema as a dense capacity matrix.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    residual : float, default 0.5
    heads_on : ndarray of shape (layers, heads), optional
        0 for heads switched off (left out of each layer's mean).

    Returns
    -------
    capacity : ndarray of shape ((layers+1)*n, (layers+1)*n)
        Node ``l*n + i`` is token i after layer l (layer 0 = inputs). The edge
        from ``(l-1, j)`` to ``(l, i)`` has capacity ``A_l[i, j]``.
    layers, n : int

    References
    ----------
    Abnar & Zuidema (2020), sec. 4, attention graph.
    """
    aug = residual_attention(attention, residual, heads_on)
    layers, n, _ = aug.shape
    size = (layers + 1) * n
    cap = np.zeros((size, size))
    for l in range(1, layers + 1):
        cap[(l - 1) * n : l * n, l * n : (l + 1) * n] = aug[l - 1].T
    return cap, layers, n


def attention_flow(
    attention: np.ndarray,
    residual: float = 0.5,
    *,
    queries: list[int] | None = None,
    max_tokens: int = FLOW_MAX_TOKENS,
    heads_on: np.ndarray | None = None,
) -> np.ndarray:
    """Attention flow: max-flow from each input token to each top-layer token.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    residual : float, default 0.5
    queries : list of int, optional
        Top-layer tokens to solve for (default: all). Other rows stay 0.
    max_tokens : int
        Refuse longer inputs (the cost grows with n^2 max-flow problems).
    heads_on : ndarray of shape (layers, heads), optional
        0 for heads switched off (left out of each layer's mean).

    Returns
    -------
    ndarray of shape (n, n)
        ``F[i, j]`` = value of the maximum flow from input token j (layer 0) to
        token i after the last layer, in the graph of :func:`flow_graph`.

    References
    ----------
    Abnar & Zuidema (2020), "Quantifying Attention Flow in Transformers", sec. 4.
    Solved with SciPy's ``scipy.sparse.csgraph.maximum_flow`` on capacities
    scaled to integers.
    """
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import maximum_flow

    n = attention.shape[-1]
    if n > max_tokens:
        raise ValueError(f"attention flow is limited to {max_tokens} tokens (this input has {n})")
    cap, layers, _ = flow_graph(attention, residual, heads_on)
    graph = csr_matrix(np.rint(cap * _FLOW_SCALE).astype(np.int32))
    rows = range(n) if queries is None else queries
    out = np.zeros((n, n))
    for i in rows:
        sink = layers * n + i
        for j in range(n):
            out[i, j] = maximum_flow(graph, j, sink).flow_value / _FLOW_SCALE
    return out
