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


def value_weighted_attention(attention: np.ndarray, values: np.ndarray, out_weight: np.ndarray) -> np.ndarray:
    """Per-head value-weighted attention ``||a_ij f_h(x_j)||``.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)

    Returns
    -------
    ndarray of shape (layers, heads, n, n)
        ``N_h[i, j] = a_ij^h * ||f_h(x_j)||_2`` (a_ij >= 0 so the norm factors).

    References
    ----------
    Kobayashi et al. (2020), "Attention is Not Only a Weight: Analyzing
    Transformers with Vector Norms", sec. 3.
    """
    f = transformed_values(values, out_weight)
    norms = np.linalg.norm(f, axis=-1)
    return attention * norms[:, :, None, :]


def layer_value_weighted(attention: np.ndarray, values: np.ndarray, out_weight: np.ndarray) -> np.ndarray:
    """Layer-level value-weighted attention ``||sum_h a_ij^h f_h(x_j)||``.

    Parameters
    ----------
    attention : ndarray of shape (layers, heads, n, n)
    values : ndarray of shape (layers, n, heads, d)
    out_weight : ndarray of shape (layers, hidden, heads*d)

    Returns
    -------
    ndarray of shape (layers, n, n)

    References
    ----------
    Kobayashi et al. (2020), eq. (6), the multi-head norm ``||sum_h a f_h||``.
    """
    f = transformed_values(values, out_weight)
    mixed = np.einsum("lhij,lhjo->lijo", attention, f, optimize=True)
    return np.linalg.norm(mixed, axis=-1)


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
