"""Per-head metrics against SciPy, closed forms and properties."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special
import scipy.stats
import torch
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from inspector.measures import metrics


def _random_attention(rng: np.random.Generator, shape: tuple[int, ...]) -> np.ndarray:
    logits = rng.normal(size=shape) * 2.0
    e = np.exp(logits)
    return e / e.sum(-1, keepdims=True)


def test_row_entropy_matches_scipy():
    """Reference: scipy.stats.entropy (natural log) on each row."""
    rng = np.random.default_rng(1)
    att = _random_attention(rng, (3, 4, 7, 7))
    ours = metrics.row_entropy(att)
    ref = scipy.stats.entropy(att, axis=-1)
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=1e-12)


def test_head_entropy_with_padding_matches_scipy_on_real_part():
    """Reference: scipy.stats.entropy over the real keys of real queries, averaged (padding never counted)."""
    rng = np.random.default_rng(2)
    n, real = 9, 6
    att = np.zeros((2, 3, n, n))
    att[..., :real] = _random_attention(rng, (2, 3, n, real))
    mask = np.arange(n) < real
    ours = metrics.head_entropy(att, mask)
    ref = scipy.stats.entropy(att[:, :, :real, :real], axis=-1).mean(-1)
    np.testing.assert_allclose(ours, ref, rtol=1e-12)
    normed = metrics.head_entropy(att, mask, normalize=True)
    np.testing.assert_allclose(normed, ref / math.log(real), rtol=1e-12)


def test_entropy_extremes():
    """Reference: closed form: a uniform row over n keys has entropy ln n, a one-hot row has 0."""
    n = 11
    uniform = np.full((n, n), 1.0 / n)
    np.testing.assert_allclose(metrics.head_entropy(uniform), math.log(n), rtol=1e-12)
    np.testing.assert_allclose(metrics.head_entropy(uniform, normalize=True), 1.0, rtol=1e-12)
    assert metrics.head_entropy(np.eye(n)) == 0.0


def test_mean_distance_uniform_closed_form():
    """Reference: closed form. For uniform attention over n tokens,
    sum_{i,j} |i-j| = 2 * sum_{d=1}^{n-1} d (n-d) = n (n^2-1) / 3; each row weighs keys by 1/n and we
    average over n queries, so the mean distance is n (n^2-1) / 3 / n^2 = (n^2-1) / (3n)."""
    for n in (1, 2, 5, 16, 33):
        uniform = np.full((n, n), 1.0 / n)
        np.testing.assert_allclose(metrics.mean_distance(uniform), (n * n - 1) / (3 * n), rtol=1e-12)


def test_offset_shares_on_shift_matrices():
    """Reference: closed form: a head that always looks at the previous token has prev share 1 and self share 0
    (the first token, with no previous token, is not counted)."""
    n = 6
    prev = np.eye(n, k=-1)
    prev[0, 0] = 1.0
    assert metrics.offset_share(prev, -1) == 1.0
    assert metrics.offset_share(prev, 1) == 0.0
    np.testing.assert_allclose(metrics.offset_share(prev, 0), 1.0 / n)
    np.testing.assert_allclose(metrics.confidence(prev), 1.0)


def test_special_share_counts_only_flagged_keys():
    """Reference: Clark et al. 2019, sec. 3: share of attention on [CLS]/[SEP]; closed form on a uniform head."""
    n = 8
    special = np.zeros(n, dtype=bool)
    special[[0, n - 1]] = True
    uniform = np.full((n, n), 1.0 / n)
    np.testing.assert_allclose(metrics.share_on(uniform, special), 2.0 / n)


_rows = st.integers(min_value=2, max_value=9).flatmap(
    lambda n: arrays(np.float64, (2, n, n), elements=st.floats(0.0, 1.0, allow_nan=False))
)


@settings(max_examples=60, deadline=None)
@given(raw=_rows, real=st.integers(min_value=1, max_value=9))
def test_metric_bounds_property(raw, real):
    """Reference: definitions (common practice, no source): entropy in [0, ln m], normalised entropy and
    all shares in [0, 1], distance in [0, n-1], for any stochastic rows with padding."""
    n = raw.shape[-1]
    real = min(real, n)
    mask = np.arange(n) < real
    att = raw + 1e-9
    att = att * mask
    att = att / att.sum(-1, keepdims=True)
    special = np.zeros(n, dtype=bool)
    special[0] = True
    m = metrics.head_metrics(att, special, mask)
    eps = 1e-9
    assert np.all(m.entropy >= -eps) and np.all(m.entropy <= math.log(real) + eps)
    assert np.all((m.entropy_normalized >= -eps) & (m.entropy_normalized <= 1 + eps))
    for share in (m.special_share, m.self_share, m.prev_share, m.next_share, m.confidence):
        assert np.all((share >= -eps) & (share <= 1 + eps))
    assert np.all((m.distance >= -eps) & (m.distance <= real - 1 + eps))


def test_float32_metrics_at_512_tokens_match_float64_references():
    """Fused float32 metrics of a 512-token input against float64 references.

    Reference: scipy.special.entr (-p ln p, summed per row in float64) for the entropy;
    the same function computed in float64 (``dtype=np.float64``) for the other metrics.
    Tolerance, worked out from float32 rounding (unit roundoff u = 2**-24 = 6.0e-8): each row
    entropy sums 512 terms of one sign, each term rounded about three times (logarithm, product,
    storage), and numpy's pairwise sum adds about log2(512) = 9 roundings, so the relative
    error is at most about (3 + 9) u = 7.2e-7 of the row entropy; we allow 2e-6. The linear
    metrics are float32 matrix products over n^2 = 262,144 pairs; blocked BLAS summation keeps
    their relative error near log2(n^2) u = 1.1e-6; we allow 1e-5.
    """
    rng = np.random.default_rng(12)
    n = 512
    att = _random_attention(rng, (2, 3, n, n)).astype(np.float32)
    special = np.zeros(n, dtype=bool)
    special[[0, n - 1]] = True
    got = metrics.head_metrics(att, special)
    assert got.entropy.dtype == np.float32
    ref_rows = scipy.special.entr(att.astype(np.float64)).sum(-1)
    np.testing.assert_allclose(got.entropy, ref_rows.mean(-1), rtol=2e-6)
    np.testing.assert_allclose(got.entropy_normalized, ref_rows.mean(-1) / math.log(n), rtol=2e-6)
    ref = metrics.head_metrics(att, special, dtype=np.float64)
    assert ref.entropy.dtype == np.float64
    for name in metrics.METRIC_NAMES:
        np.testing.assert_allclose(got.get(name), ref.get(name), rtol=1e-5, err_msg=name)


def test_padding_is_masked_chunk_by_chunk_like_the_unpadded_rows():
    """Metrics of a padded head equal the metrics of its real block alone (chunked key masking).

    Reference: scipy.stats.entropy on the real rows and real keys only; the definitions in
    inspector.measures.metrics (padding never counts) applied to the unpadded block.
    """
    rng = np.random.default_rng(4)
    n, real = 12, 7
    att = np.zeros((5, 4, n, n))
    att[..., :real] = _random_attention(rng, (5, 4, n, real))
    att[..., real:, :] = rng.random((5, 4, n - real, n))  # garbage in padded query rows
    mask = np.arange(n) < real
    special = np.zeros(n, dtype=bool)
    special[0] = True
    padded = metrics.head_metrics(att, special, mask)
    alone = metrics.head_metrics(att[..., :real, :real], special[:real])
    for name in metrics.METRIC_NAMES:
        np.testing.assert_allclose(padded.get(name), alone.get(name), rtol=1e-12, err_msg=name)
    ref = scipy.stats.entropy(att[..., :real, :real], axis=-1).mean(-1)
    np.testing.assert_allclose(padded.entropy, ref, rtol=1e-12)


@pytest.mark.parametrize("n", [1, 2, 9, 40])
def test_one_sentence_route_equals_the_per_metric_functions(n):
    """Without padding, head_metrics' fused per-head pass equals each metric's own function.

    Reference: the single-metric functions of inspector.measures.metrics (checked against SciPy and
    closed forms above), in float64, on random heads plus one-hot and uniform heads (exact zeros
    exercise 0 ln 0 = 0), for numpy and torch input.
    """
    rng = np.random.default_rng(n)
    att = _random_attention(rng, (2, 3, n, n))
    att[0, 0] = np.eye(n)[rng.integers(n, size=n)]
    att[0, 1] = 1.0 / n
    special = np.zeros(n, dtype=bool)
    special[0] = True
    expected = {
        "entropy": metrics.head_entropy(att),
        "entropy_normalized": metrics.head_entropy(att, normalize=True),
        "distance": metrics.mean_distance(att),
        "special_share": metrics.share_on(att, special),
        "self_share": metrics.offset_share(att, 0),
        "prev_share": metrics.offset_share(att, -1),
        "next_share": metrics.offset_share(att, 1),
        "confidence": metrics.confidence(att),
    }
    got = metrics.head_metrics(att, special)
    as_torch = metrics.head_metrics(torch.from_numpy(att), torch.from_numpy(special))
    for name in metrics.METRIC_NAMES:
        assert got.get(name).shape == (2, 3)
        np.testing.assert_allclose(got.get(name), expected[name], rtol=1e-12, atol=1e-15, err_msg=name)
        np.testing.assert_allclose(as_torch.get(name).numpy(), expected[name], rtol=1e-12, atol=1e-15)
