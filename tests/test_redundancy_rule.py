"""Redundancy you can trust: every row when affordable, else a sample with a standard error per pair.

The trained sample model gets three planted pairs by weight surgery: in layer 2,
head 1 is an exact copy of head 0 (divergence 0); in layer 1, heads 1, 2 and 3
get head 0's query and key weights plus growing noise, so their divergences from
head 0 land around the 0.05-bit cut (below, near and above it).
"""

from __future__ import annotations

import numpy as np
import pytest
import torch
from scipy.spatial.distance import jensenshannon

from inspector.checkpoint.capture import run
from inspector.checkpoint.loader import load_checkpoint
from inspector.corpus.batching import encode_set
from inspector.corpus.dataset import read_labelled
from inspector.corpus.pruning import duplicates_order
from inspector.corpus.redundancy import DEFAULT_GROUP_THRESHOLD, DivergenceSums, Redundancy, sample_size
from inspector.corpus.run import scan
from inspector.paths import SAMPLE_EVAL, SAMPLE_MODEL

CUT = DEFAULT_GROUP_THRESHOLD
NOISE = {1: 1.2, 2: 1.6, 3: 1.8}
"""Layer-1 head -> noise (in standard deviations of head 0's weights) added to head 0's Q/K copy."""


@pytest.fixture(scope="module")
def planted():
    if not (SAMPLE_MODEL / "model.safetensors").is_file():
        pytest.skip("the sample model is not built")
    lm = load_checkpoint(SAMPLE_MODEL)
    data = read_labelled(SAMPLE_EVAL, known_labels=lm.labels)
    d = lm.model.config.hidden_size // lm.num_heads
    gen = torch.Generator().manual_seed(0)
    with torch.no_grad():
        for head, sigma in NOISE.items():
            for lin in (lm.parts[1].query, lm.parts[1].key):
                src = lin.weight[:d].clone()
                lin.weight[head * d : (head + 1) * d] = src + sigma * src.std() * torch.randn(
                    src.shape, generator=gen
                )
                lin.bias[head * d : (head + 1) * d] = lin.bias[:d]
        for lin in (lm.parts[2].query, lm.parts[2].key):
            lin.weight[d : 2 * d] = lin.weight[:d]
            lin.bias[d : 2 * d] = lin.bias[:d]
    return lm, data


def _divergence_over_every_row(lm, texts, pairs):
    """Per pair, the mean over every real query row of SciPy's JS divergence (bits)."""
    per_row: dict[tuple, list[np.ndarray]] = {pair: [] for pair in pairs}
    for start in range(0, len(texts), 64):
        cap = run(lm, texts[start : start + 64])
        for b in range(len(cap.batch.tokens)):
            att = cap.sentence(b).astype(np.float64)
            for (la, ha), (lb, hb) in pairs:
                js = jensenshannon(att[la, ha], att[lb, hb], axis=-1, base=2) ** 2
                per_row[((la, ha), (lb, hb))].append(js)
    return {pair: float(np.mean(np.concatenate(v))) for pair, v in per_row.items()}


@pytest.mark.parametrize("size", [10, 48, 500])
def test_every_grouped_pair_is_within_the_cut_over_every_row(planted, size):
    """Groups found from a sample hold when every row is compared.

    Reference: scipy.spatial.distance.jensenshannon(p, q, base=2) ** 2 over every real query row of
    the set (captured with transformers' forward pass), averaged per pair; the sampling is forced
    (no comparison budget) so the rule, not the exact path, decides.
    """
    lm, data = planted
    subset = data.subset(range(size))
    red = scan(lm, subset, encoded=encode_set(lm, subset.texts), js_budget=0).redundancy
    assert red.groups, "the exact copy in layer 2 must always form a group"
    pairs = [(a, b) for g in red.groups for i, a in enumerate(g) for b in g[i + 1 :]]
    for (a, b), exact in _divergence_over_every_row(lm, subset.texts, pairs).items():
        assert exact <= CUT, f"{a}-{b}: {exact:.4f} bits over every row"
    if red.sampled:
        assert red.largest_standard_error <= CUT / 4
        assert ((1, 0), (1, 3)) not in pairs  # planted just above the cut


def test_small_sets_compare_every_row_by_default(planted):
    """A 48-utterance set fits the budget: every row is compared and no pair has a standard error.

    Reference: the rows of the set counted by hand from the tokenizer (real tokens per utterance).
    """
    lm, data = planted
    subset = data.subset(range(48))
    encoded = encode_set(lm, subset.texts)
    red = scan(lm, subset, encoded=encoded).redundancy
    assert red.rows_compared == red.rows_total == int(encoded.lengths.sum())
    assert not red.sampled and red.largest_standard_error == 0.0


def test_standard_error_and_sample_size_follow_cochran():
    """SE = sqrt((1 - m/N) s^2 / m) per pair; n = n0 / (1 + n0/N) with n0 = s^2 / se^2.

    Reference: Cochran (1977), "Sampling Techniques", 3rd ed., ch. 2 and sec. 4.4 (from memory);
    per-row divergences from scipy.spatial.distance.jensenshannon(base=2) ** 2, variance by numpy (ddof=1).
    """
    rng = np.random.default_rng(4)
    rows = rng.random((40, 3, 7)) ** 3
    rows /= rows.sum(-1, keepdims=True)
    sums = DivergenceSums(3)
    sums.add(torch.from_numpy(rows))
    population = 400
    per_row = jensenshannon(rows[:, 0], rows[:, 2], axis=-1, base=2) ** 2
    expected = np.sqrt((1 - 40 / population) * per_row.var(ddof=1) / 40)
    assert sums.standard_error(population)[0, 2] == pytest.approx(expected, rel=1e-9)
    assert sums.standard_error(40)[0, 2] == 0.0  # every row: no sampling error
    assert sample_size(0.09, 0.01, 10**9) == 900
    assert sample_size(0.09, 0.01, 1000) == 474  # ceil(900 / 1.9)
    assert sample_size(0.0, 0.01, 1000) == 256  # the floor
    assert sample_size(0.09, 0.01, 100) == 100


def test_a_pair_counts_only_below_the_cut_by_two_standard_errors():
    """Grouping and the duplicates order use js + 2 SE: 0.045 +- 0.004 is not a near-duplicate, 0.03 +- 0 is.

    Reference: worked example by hand (0.045 + 2 x 0.004 = 0.053 > 0.05; 0.03 + 0 <= 0.05); complete
    linkage as scipy.cluster.hierarchy implements it.
    """
    js = np.full((4, 4), 0.5)
    np.fill_diagonal(js, 0.0)
    se = np.zeros((4, 4))
    js[0, 1] = js[1, 0] = 0.03
    js[2, 3] = js[3, 2] = 0.045
    se[2, 3] = se[3, 2] = 0.004
    red = Redundancy(js, num_layers=2, num_heads=2, rows_total=100, rows_compared=50, standard_error=se)
    assert red.groups == [[(0, 0), (0, 1)]]
    assert red.pairs()[1].standard_error == 0.004
    importance = np.array([[0.3, 0.2], [0.6, 0.5]])
    order = duplicates_order(js, 2, importance, bound=red.upper_bound, threshold=CUT)
    # (0,1) is the only near-duplicate: its less important head goes first, then ascending importance.
    assert order == [(0, 1), (0, 0), (1, 1), (1, 0)]
    # Without the cut the 0.045 pair is taken second: (1,1) is the less important of (1,0), (1,1).
    assert duplicates_order(js, 2, importance) == [(0, 1), (1, 1), (0, 0), (1, 0)]
