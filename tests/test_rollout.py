"""Attention rollout and attention flow."""

from __future__ import annotations

import networkx as nx
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from inspector.measures.rollout import attention_flow, attention_rollout, flow_graph, rollout_rows


def test_rollout_hand_worked_two_layers_three_tokens():
    """Reference: Abnar & Zuidema 2020, attention rollout with A = 0.5 W + 0.5 I; worked by hand below.

    Layer 1 (one head)  W1 = [[1, 0, 0], [.5, .5, 0], [0, 0, 1]]
      A1 = 0.5 W1 + 0.5 I = [[1, 0, 0], [.25, .75, 0], [0, 0, 1]]   (rows already sum to 1)
    Layer 2 (two heads) W2a = [[0, 1, 0], [0, 1, 0], [0, 1, 0]], W2b = [[0, 0, 1], [0, 0, 1], [0, 0, 1]]
      mean = [[0, .5, .5], [0, .5, .5], [0, .5, .5]]
      A2 = 0.5 mean + 0.5 I = [[.5, .25, .25], [0, .75, .25], [0, .25, .75]]
    Rollout R = A2 @ A1:
      row 0: .5*[1,0,0] + .25*[.25,.75,0] + .25*[0,0,1] = [.5625, .1875, .25]
      row 1: .75*[.25,.75,0] + .25*[0,0,1]               = [.1875, .5625, .25]
      row 2: .25*[.25,.75,0] + .75*[0,0,1]               = [.0625, .1875, .75]
    """
    w1 = np.array([[1, 0, 0], [0.5, 0.5, 0], [0, 0, 1]], dtype=float)
    w2a = np.array([[0, 1, 0]] * 3, dtype=float)
    w2b = np.array([[0, 0, 1]] * 3, dtype=float)
    att = np.stack([np.stack([w1, w1]), np.stack([w2a, w2b])])  # layer 1: both heads equal
    expected = np.array([[0.5625, 0.1875, 0.25], [0.1875, 0.5625, 0.25], [0.0625, 0.1875, 0.75]])
    np.testing.assert_allclose(attention_rollout(att), expected, atol=1e-12)
    cumulative = attention_rollout(att, cumulative=True)
    np.testing.assert_allclose(cumulative[0], [[1, 0, 0], [0.25, 0.75, 0], [0, 0, 1]], atol=1e-12)


@settings(max_examples=40, deadline=None)
@given(
    layers=st.integers(1, 5),
    heads=st.integers(1, 4),
    n=st.integers(1, 10),
    seed=st.integers(0, 2**31 - 1),
)
def test_rollout_rows_are_stochastic(layers, heads, n, seed):
    """Reference: property of products of row-stochastic matrices (common practice, no source)."""
    rng = np.random.default_rng(seed)
    raw = rng.random((layers, heads, n, n))
    att = raw / raw.sum(-1, keepdims=True)
    r = attention_rollout(att)
    assert np.all(r >= 0)
    np.testing.assert_allclose(r.sum(-1), 1.0, atol=1e-10)


def test_attention_flow_matches_networkx_maximum_flow():
    """Reference: networkx.maximum_flow_value on the layered graph of Abnar & Zuidema 2020, sec. 4."""
    rng = np.random.default_rng(7)
    raw = rng.random((3, 2, 5, 5))
    att = raw / raw.sum(-1, keepdims=True)
    ours = attention_flow(att)
    cap, layers, n = flow_graph(att)
    graph = nx.DiGraph()
    for u, v in zip(*np.nonzero(cap)):
        graph.add_edge(int(u), int(v), capacity=float(cap[u, v]))
    for i in range(n):
        for j in range(n):
            ref = nx.maximum_flow_value(graph, j, layers * n + i)
            assert abs(ours[i, j] - ref) < 1e-5, (i, j, ours[i, j], ref)


def test_attention_flow_single_layer_is_the_edge_capacity():
    """Reference: closed form: with one layer the only path from input j to output i is the edge A[i, j]."""
    rng = np.random.default_rng(3)
    raw = rng.random((1, 3, 4, 4))
    att = raw / raw.sum(-1, keepdims=True)
    mean = att[0].mean(0)
    expected = 0.5 * mean + 0.5 * np.eye(4)
    np.testing.assert_allclose(attention_flow(att), expected, atol=1e-6)


@settings(max_examples=30, deadline=None)
@given(
    layers=st.integers(1, 5),
    heads=st.integers(1, 4),
    n=st.integers(1, 12),
    residual=st.sampled_from([0.0, 0.3, 0.5, 0.9]),
    seed=st.integers(0, 2**31 - 1),
)
def test_rollout_rows_equal_rows_of_the_full_product(layers, heads, n, residual, seed):
    """Reference: attention_rollout above (checked by hand against Abnar & Zuidema 2020): the row vector
    multiplied down the stack equals the same rows of the full matrix product, in float64 and float32.
    Rows of attention need not sum exactly to 1 (float32 softmax output), so raw rows are drawn unnormalised
    by up to 1e-3 to exercise the renormalisation."""
    rng = np.random.default_rng(seed)
    raw = rng.random((layers, heads, n, n)) + 1e-3
    att = raw / raw.sum(-1, keepdims=True) * (1 + 1e-3 * rng.random((layers, heads, n, 1)))
    rows = sorted({0, n - 1, int(rng.integers(n))})
    full = attention_rollout(att, residual)
    np.testing.assert_allclose(rollout_rows(att, rows, residual), full[rows], rtol=1e-10, atol=1e-13)
    as32 = rollout_rows(att.astype(np.float32), rows, residual)
    np.testing.assert_allclose(as32, full[rows], rtol=1e-5, atol=1e-6)
