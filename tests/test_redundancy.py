"""Jensen-Shannon divergence and near-duplicate grouping against SciPy."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import torch
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import jensenshannon, squareform

from inspector.corpus.redundancy import (
    DivergenceSums,
    Redundancy,
    js_divergence,
    near_duplicate_groups,
    pairwise_js_sum,
)


def _random_rows(rng, shape, zeros: float = 0.3) -> np.ndarray:
    x = rng.random(shape) ** 3
    x[rng.random(shape) < zeros] = 0.0
    x[..., 0] += 1e-3  # no all-zero row
    return x / x.sum(-1, keepdims=True)


def test_js_divergence_matches_scipy_in_bits():
    """Our JS (bits) equals SciPy's squared Jensen-Shannon distance with base=2.

    Reference: scipy.spatial.distance.jensenshannon(p, q, base=2) ** 2 (SciPy returns
    the distance, the square root of the divergence, with natural log unless base is
    given; we use log base 2, so values lie in [0, 1]). Closed forms: identical
    rows give 0, disjoint supports give exactly 1 bit.
    """
    rng = np.random.default_rng(0)
    p, q = _random_rows(rng, (50, 9)), _random_rows(rng, (50, 9))
    ref = np.array([jensenshannon(a, b, base=2) ** 2 for a, b in zip(p, q)])
    np.testing.assert_allclose(js_divergence(p, q), ref, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(
        js_divergence(torch.from_numpy(p), torch.from_numpy(q)).numpy(), ref, atol=1e-12
    )
    assert js_divergence(p[0], p[0]) == pytest.approx(0.0, abs=1e-15)
    assert js_divergence(np.array([0.5, 0.5, 0, 0]), np.array([0, 0, 0.3, 0.7])) == pytest.approx(1.0)
    # natural-log divergence is ln 2 times ours
    assert jensenshannon(p[1], q[1]) ** 2 == pytest.approx(js_divergence(p[1], q[1]) * np.log(2), rel=1e-10)


def test_pairwise_sum_matches_scipy_pair_by_pair():
    """The vectorised all-pairs sum equals a loop over pairs and rows with SciPy.

    Reference: scipy.spatial.distance.jensenshannon(base=2) ** 2 summed over rows,
    for every pair of the 7 "heads"; float32 input as in the scan.
    """
    rng = np.random.default_rng(1)
    rows = _random_rows(rng, (20, 7, 6)).astype(np.float32)
    got = pairwise_js_sum(torch.from_numpy(rows)).numpy()
    ref = np.zeros((7, 7))
    for i, j in itertools.combinations(range(7), 2):
        ref[i, j] = ref[j, i] = sum(jensenshannon(r[i], r[j], base=2) ** 2 for r in rows.astype(np.float64))
    np.testing.assert_allclose(got, ref, rtol=1e-4, atol=1e-5)
    assert np.all(np.diag(got) == 0)


def test_groups_are_complete_linkage_clusters_under_the_threshold():
    """A chain a~b~c with a, c far apart is not one group; an isolated pair is.

    Reference: scipy.cluster.hierarchy.linkage(method='complete') + fcluster(criterion=
    'distance') computed here directly; hand-made divergence matrix (bits).
    """
    js = np.full((6, 6), 0.5)
    np.fill_diagonal(js, 0.0)
    for (i, j), v in {(0, 1): 0.03, (1, 2): 0.04, (0, 2): 0.09, (4, 5): 0.01}.items():
        js[i, j] = js[j, i] = v
    groups = near_duplicate_groups(js, num_heads=3, threshold=0.05)
    assert [(1, 1), (1, 2)] in groups  # heads 4 and 5 -> layer 1, heads 1 and 2
    assert not any(len(g) == 3 for g in groups)  # the chain 0-1-2 is split
    labels = fcluster(linkage(squareform(js), method="complete"), t=0.05, criterion="distance")
    ref = [sorted(np.flatnonzero(labels == c)) for c in set(labels) if (labels == c).sum() > 1]
    assert sorted(sorted(l * 3 + h for l, h in g) for g in groups) == sorted(ref)
    for g in groups:  # every pair inside a group is within the threshold
        flat = [l * 3 + h for l, h in g]
        assert max(js[a, b] for a in flat for b in flat) <= 0.05


def test_pairs_are_sorted_most_similar_first():
    """Redundancy.pairs lists every unordered pair once, ascending divergence, flat index -> (layer, head).

    Reference: common practice, no source (sorting); k (k - 1) / 2 pairs by counting.
    """
    rng = np.random.default_rng(2)
    a = rng.random((6, 6))
    js = (a + a.T) / 2
    np.fill_diagonal(js, 0.0)
    red = Redundancy(js, num_layers=2, num_heads=3, rows_total=10, rows_compared=10)
    pairs = red.pairs()
    assert len(pairs) == 15
    values = [p.js_divergence for p in pairs]
    assert values == sorted(values)
    best = pairs[0]
    i, j = np.unravel_index(np.argmin(js + np.eye(6) * 9), js.shape)
    assert {(best.layer_a, best.head_a), (best.layer_b, best.head_b)} == {(i // 3, i % 3), (j // 3, j % 3)}
    np.testing.assert_allclose(red.similarity, 1 - js)


def test_streaming_sums_pad_and_weight_rows_like_a_direct_weighted_mean():
    """Rows of different key lengths, buffered and zero-padded, give SciPy's weighted mean JS.

    Reference: scipy.spatial.distance.jensenshannon(base=2) ** 2 per row on the
    unpadded rows, averaged with the row weights (Horvitz-Thompson weights in the scan).
    """
    rng = np.random.default_rng(3)
    short, long = _random_rows(rng, (3, 4, 5)), _random_rows(rng, (2, 4, 7))
    sums = DivergenceSums(4, flush_rows=4)
    sums.add(torch.from_numpy(short), 2.0)
    sums.add(torch.from_numpy(long), 0.5)
    assert sums.rows_compared == 5 and sums.weight_total == 2.0 * 3 + 0.5 * 2
    ref = np.zeros((4, 4))
    for rows, w in ((short, 2.0), (long, 0.5)):
        for i, j in itertools.combinations(range(4), 2):
            ref[i, j] += w * sum(jensenshannon(r[i], r[j], base=2) ** 2 for r in rows)
    ref = (ref + ref.T) / (2.0 * 3 + 0.5 * 2)
    np.testing.assert_allclose(sums.mean(), ref, rtol=1e-10, atol=1e-12)
