"""One sentence through two models: both predictions, every head's change, the change of rollout."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from inspector.checkpoint.loader import LoadedModel
from inspector.comparison.matching import HeadMatching, sentence_matching
from inspector.comparison.pairing import check_comparable, same_position
from inspector.corpus.redundancy import js_divergence
from inspector.errors import HeadcountError
from inspector.measures.analysis import SentenceAnalysis, analyze_sentence
from inspector.measures.rollout import attention_rollout


@dataclass
class SentenceComparison:
    """The same sentence analysed by model A and model B (same tokens)."""

    a: SentenceAnalysis
    b: SentenceAnalysis
    matching: HeadMatching
    """Every B head against every A head over the sentence's real query rows."""

    @property
    def text(self) -> str:
        return self.a.text

    @property
    def tokens(self) -> list[str]:
        return self.a.tokens

    @property
    def agree(self) -> bool | None:
        """Whether both models predict the same label (None when either has no prediction)."""
        pa, pb = self.a.prediction, self.b.prediction
        return None if pa is None or pb is None else pa.label == pb.label

    def metric_delta(self, name: str) -> np.ndarray:
        """[layers_b, heads_b] B's value minus A's at the same head position (NaN where A has none)."""
        return same_position(self.a.head_metrics.get(name), self.b.head_metrics.get(name))

    @cached_property
    def rollout_js_by_layer(self) -> np.ndarray:
        """[min layers] mean over tokens of the JS divergence (bits) between the two rollouts after each layer.

        Rollout after layer ``l`` is the residual-augmented attention multiplied up to ``l``
        (Abnar & Zuidema 2020); row ``i`` is where token ``i``'s representation traces back to.
        The value at ``l`` says how differently the two models have mixed the tokens by then.
        """
        ra = attention_rollout(self.a.attention, cumulative=True)
        rb = attention_rollout(self.b.attention, cumulative=True)
        layers = min(len(ra), len(rb))
        return js_divergence(ra[:layers], rb[:layers]).mean(-1)

    @property
    def rollout_js(self) -> float:
        """Mean over tokens of the JS divergence (bits) between the two full-stack rollouts."""
        return float(js_divergence(self.a.rollout, self.b.rollout).mean())


def compare_analyses(a: SentenceAnalysis, b: SentenceAnalysis) -> SentenceComparison:
    """Compare two analyses of the same sentence (same tokens) by two models."""
    if a.tokens != b.tokens:
        raise HeadcountError(
            "the two models read the sentence as different tokens (a different length limit?)"
        )
    return SentenceComparison(a, b, sentence_matching(a.attention, b.attention))


def compare_sentence(lm_a: LoadedModel, lm_b: LoadedModel, text: str) -> SentenceComparison:
    """Run ``text`` through both models and compare every head.

    Parameters
    ----------
    lm_a, lm_b : LoadedModel
        Two checkpoints sharing a tokenizer (layers, heads and labels may differ).
    text : str

    Returns
    -------
    SentenceComparison
        Both analyses (prediction, attention, metrics), the head matching over the
        sentence's real query rows, per-head metric changes and the rollout change.

    Notes
    -----
    Same-position change of a head: mean over the real query tokens ``i`` of
    ``JS(alpha^B_i, alpha^A_i)`` in bits; best match: the A head minimising that mean.

    References
    ----------
    Lin (1991) for the Jensen-Shannon divergence; Abnar & Zuidema (2020) for rollout.
    """
    check_comparable(lm_a, lm_b)
    if not text or not text.strip():
        raise HeadcountError("no text to compare")
    return compare_analyses(analyze_sentence(lm_a, text), analyze_sentence(lm_b, text))
