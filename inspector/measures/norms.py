"""Norm-based analysis: how much each head actually moves, not only where it looks."""

from __future__ import annotations

import numpy as np


def transformed_values(values: np.ndarray, out_weight: np.ndarray) -> np.ndarray:
    """Each head's value vectors pushed through its slice of W_O.

    Parameters
    ----------
    values : ndarray of shape (layers, n, heads, d)
        Value projections ``v_j^h = x_j W_V^h + b_V^h`` for one sentence.
    out_weight : ndarray of shape (layers, hidden, heads*d)
        The output projection weight (torch layout: out x in).

    Returns
    -------
    ndarray of shape (layers, heads, n, hidden)
        ``f_h(x_j) = v_j^h (W_O^h)^T`` where ``W_O^h`` are the columns of head h.

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight: Analyzing
    Transformers with Vector Norms", eq. (5).
    """
    layers, n, heads, d = values.shape
    w = out_weight.reshape(layers, out_weight.shape[1], heads, d)
    return np.einsum("lnhd,lohd->lhno", values, w, optimize=True)


def value_gram(values: np.ndarray, out_weight: np.ndarray) -> np.ndarray:
    """Inner products between the heads' transformed value vectors of each token.

    Parameters
    ----------
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)

    Returns
    -------
    ndarray of shape (layers, n, heads, heads), in the inputs' float dtype
        ``G[l, j, h, g] = <f_h(x_j), f_g(x_j)>``; its diagonal holds ``||f_h(x_j)||^2``.
        Both value-weighted measures below follow from it without forming the
        (layers, n, n, hidden) array of mixed vectors.

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight: Analyzing
    Transformers with Vector Norms", eq. (5) for f_h.
    """
    f = transformed_values(values, out_weight).transpose(0, 2, 1, 3)  # (layers, n, heads, hidden)
    return f @ f.swapaxes(-1, -2)


def value_norms(values: np.ndarray, out_weight: np.ndarray) -> np.ndarray:
    """Norm of every head's transformed value vector of every token.

    Parameters
    ----------
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)

    Returns
    -------
    ndarray of shape (layers, heads, n)
        ``||f_h(x_j)||_2`` with ``||f_h(x_j)||^2 = v_j^h^T (W_O^h^T W_O^h) v_j^h``: through each
        head's own d x d matrix ``W_O^h^T W_O^h`` instead of the hidden-sized vectors
        (the diagonal of :func:`value_gram` at a fraction of its cost).

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight: Analyzing
    Transformers with Vector Norms", eq. (5) for f_h and sec. 3 for its norm.
    """
    layers, n, heads, d = values.shape
    w = out_weight.reshape(layers, out_weight.shape[1], heads, d)
    blocks = np.einsum("lohd,lohe->lhde", w, w, optimize=True)  # (layers, heads, d, d)
    v = values.transpose(0, 2, 1, 3)  # (layers, heads, n, d)
    squared = np.einsum("lhnd,lhnd->lhn", v @ blocks, v)
    return np.sqrt(np.clip(squared, 0.0, None))


def value_weighted_attention(
    attention: np.ndarray, values: np.ndarray, out_weight: np.ndarray, *, gram: np.ndarray | None = None
) -> np.ndarray:
    """Per-head value-weighted attention ``||a_ij f_h(x_j)||``.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)
    gram : ndarray of shape (layers, n, heads, heads), optional
        :func:`value_gram` of ``values`` and ``out_weight``, if already computed.

    Returns
    -------
    ndarray of shape (layers, heads, n, n)
        ``N_h[i, j] = a_ij^h * ||f_h(x_j)||_2`` (a_ij >= 0 so the norm factors).

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight: Analyzing
    Transformers with Vector Norms", sec. 3.
    """
    if gram is None:
        norms = value_norms(values, out_weight)
    else:
        norms = np.sqrt(np.diagonal(gram, axis1=-2, axis2=-1)).transpose(0, 2, 1)  # (layers, heads, n)
    return attention * norms[:, :, None, :]


def layer_value_weighted(
    attention: np.ndarray, values: np.ndarray, out_weight: np.ndarray, *, gram: np.ndarray | None = None
) -> np.ndarray:
    """Layer-level value-weighted attention ``||sum_h a_ij^h f_h(x_j)||``.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)
    gram : ndarray of shape (layers, n, heads, heads), optional
        :func:`value_gram` of ``values`` and ``out_weight``, if already computed.

    Returns
    -------
    ndarray of shape (layers, n, n)
        ``sqrt(sum_{h,g} a_ij^h a_ij^g G[j, h, g])``, the same number as the norm
        of the mixed vector, computed from the heads' Gram matrix.

    References
    ----------
    Kobayashi et al. (2020), eq. (6), the multi-head norm ``||sum_h a f_h||``.
    """
    g = value_gram(values, out_weight) if gram is None else gram
    squared = np.einsum("lhij,lgij,ljhg->lij", attention, attention, g, optimize=True)
    return np.sqrt(np.clip(squared, 0.0, None))


def attention_output(
    attention: np.ndarray, values: np.ndarray, out_weight: np.ndarray, out_bias: np.ndarray
) -> np.ndarray:
    """Rebuild the attention block's output ``sum_h sum_j a_ij f_h(x_j) + b_O``.

    Returns
    -------
    ndarray of shape (layers, n, hidden)
        Equals the output of W_O (before dropout, residual and LayerNorm).

    References
    ----------
    Kobayashi et al. (2020), eq. (4)-(5): the decomposition this module rests on.
    """
    f = transformed_values(values, out_weight)
    return np.einsum("lhij,lhjo->lio", attention, f, optimize=True) + out_bias[:, None, :]
