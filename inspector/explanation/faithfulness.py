"""Does a relevance ranking agree with what actually changes the prediction?

Each relevance (attention rollout, value-weighted rollout, gradient-weighted
rollout, Integrated Gradients) is merged to words and rank-correlated with
leave-one-word-out occlusion. A low correlation for an attention-based method
means the attention points elsewhere than what drives the prediction.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from inspector import formatting as fmt

AGREEMENT_THRESHOLD = 0.3
"""Below this Spearman rho a relevance is flagged as disagreeing with occlusion."""

METHOD_LABELS: dict[str, str] = {
    "rollout": "attention rollout",
    "value_weighted": "value-weighted rollout",
    "grad_rollout": "gradient-weighted rollout",
    "integrated_gradients": "Integrated Gradients",
}
"""Stable method names (JSON keys) and their readable names."""

ATTENTION_METHODS: tuple[str, ...] = ("rollout", "value_weighted", "grad_rollout")

MIN_WORDS = 3
"""Fewer words than this give no meaningful rank correlation."""

SMALL_DROP = 0.01
"""Occlusion whose largest probability change is below this is flagged as saturated."""
SMALL_GAP = 0.1
"""Contrastive occlusion whose largest change of the logit gap is below this (in logits) is flagged."""


def merge_to_words(values: np.ndarray, groups: Sequence[Sequence[int]]) -> np.ndarray:
    """Sum per-piece values into per-word values.

    Parameters
    ----------
    values : ndarray of shape (..., n)
    groups : sequence of sequences of int
        Piece positions of each word.

    Returns
    -------
    ndarray of shape (..., len(groups))
        ``w_g = sum_{i in g} v_i``.

    References
    ----------
    Common practice, no source (a word's relevance is the total of its pieces').
    """
    v = np.asarray(values, dtype=np.float64)
    return np.stack([v[..., list(g)].sum(-1) for g in groups], axis=-1) if groups else v[..., :0]


def average_ranks(x: np.ndarray) -> np.ndarray:
    """Ranks 1..n of ``x``, ties sharing the mean of the ranks they span.

    References
    ----------
    Kendall (1948), "Rank Correlation Methods": mid-ranks for ties.
    """
    x = np.asarray(x, dtype=np.float64)
    order = np.argsort(x, kind="mergesort")
    sorted_x = x[order]
    ranks = np.empty(len(x))
    start = 0
    while start < len(x):
        end = start
        while end + 1 < len(x) and sorted_x[end + 1] == sorted_x[start]:
            end += 1
        ranks[order[start : end + 1]] = (start + end) / 2.0 + 1.0
        start = end + 1
    return ranks


def spearman(a: Sequence[float] | np.ndarray, b: Sequence[float] | np.ndarray) -> float:
    """Spearman rank correlation of two equally long vectors.

    Parameters
    ----------
    a, b : array-like of shape (n,)

    Returns
    -------
    float
        Pearson correlation of the mid-ranks, ``rho = cov(r_a, r_b) / (s_a s_b)``;
        NaN when n < 2 or either vector is constant.

    References
    ----------
    Spearman (1904), "The proof and measurement of association between two
    things"; ties as mid-ranks (Kendall 1948).
    """
    x, y = np.asarray(a, dtype=np.float64), np.asarray(b, dtype=np.float64)
    if x.shape != y.shape or x.ndim != 1:
        raise ValueError("spearman needs two 1-d arrays of the same length")
    if len(x) < 2:
        return float("nan")
    rx, ry = average_ranks(x), average_ranks(y)
    rx -= rx.mean()
    ry -= ry.mean()
    denom = np.sqrt((rx * rx).sum() * (ry * ry).sum())
    return float((rx * ry).sum() / denom) if denom > 0 else float("nan")


def faithfulness(relevances: Mapping[str, np.ndarray], occlusion: np.ndarray) -> dict[str, float | None]:
    """Spearman rho of each word-level relevance against word-level occlusion.

    Parameters
    ----------
    relevances : mapping of method name to ndarray of shape (m,)
    occlusion : ndarray of shape (m,)
        Probability drop when each word is left out.

    Returns
    -------
    dict of method name to rho (None when undefined: too few words or a constant vector).

    References
    ----------
    DeYoung et al. (2020), "ERASER: A Benchmark to Evaluate Rationalized NLP
    Models" (erasure as the yardstick); Jain & Wallace (2019), "Attention is not
    Explanation", sec. 4 (rank correlation of attention with other importance measures).
    """
    out: dict[str, float | None] = {}
    for name, values in relevances.items():
        rho = spearman(values, occlusion) if len(occlusion) >= MIN_WORDS else float("nan")
        out[name] = None if np.isnan(rho) else rho
    return out


def faithfulness_hints(
    table: Mapping[str, float | None], occlusion: np.ndarray, *, unit: str = "probability"
) -> list[str]:
    """Plain-language readings of a faithfulness table.

    Parameters
    ----------
    table : mapping of method name to rho or None
    occlusion : ndarray of shape (m,)
        The word-level occlusion the table was computed against.
    unit : {'probability', 'logit'}
        What the occlusion measures: a probability drop (a label), or a drop of
        the logit gap between two labels (the contrast).

    Returns
    -------
    list of str
        One sentence per problem found (empty when everything agrees).
    """
    n_words = len(occlusion)
    if n_words < MIN_WORDS:
        return [
            f"only {fmt.count(n_words, 'word')}: too few to compare rankings; read every relevance with care"
        ]
    if all(v is None for v in table.values()):
        return ["leaving out single words does not change this label at all; no ranking can be checked"]
    hints = []
    peak = float(np.abs(occlusion).max())
    if unit == "logit" and peak < SMALL_GAP:
        hints.append(
            f"no single word moves the gap between the two labels by {fmt.weight(SMALL_GAP, 1)} logit or "
            f"more (largest {fmt.weight(peak)}): the occlusion ranking rests on tiny differences, "
            "so every rho here is weak evidence"
        )
    elif unit != "logit" and peak < SMALL_DROP:
        hints.append(
            f"no single word moves this label's probability by {fmt.points(SMALL_DROP)} or more "
            f"(largest {fmt.points(peak, 2)}): "
            "the occlusion ranking rests on tiny differences, so every rho here is weak evidence "
            f"(the log-odds reading of occlusion does not flatten near {fmt.percent(1.0)})"
        )
    low = [m for m in ATTENTION_METHODS if table.get(m) is not None and table[m] < AGREEMENT_THRESHOLD]
    if low:
        names = ", ".join(METHOD_LABELS[m] for m in low)
        hints.append(
            f"{names}: attention points elsewhere than what changes the prediction "
            f"(rho < {AGREEMENT_THRESHOLD}); do not read it as the reason"
        )
    ig = table.get("integrated_gradients")
    if ig is not None and ig < AGREEMENT_THRESHOLD:
        hints.append(
            "Integrated Gradients also disagrees with occlusion: the words may act together, "
            "so no single word explains this label"
        )
    return hints
