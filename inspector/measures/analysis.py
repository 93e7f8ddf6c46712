"""One sentence, fully analysed: prediction, per-head attention and metrics."""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from inspector.checkpoint import capture
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask, masked
from inspector.measures import metrics, norms, rollout


@dataclass(frozen=True)
class Prediction:
    """The classifier's answer for one sentence."""

    label: str
    index: int
    probabilities: dict[str, float]

    def top(self, k: int) -> list[tuple[str, float]]:
        return sorted(self.probabilities.items(), key=lambda kv: -kv[1])[:k]


def softmax(logits: np.ndarray) -> np.ndarray:
    """Numerically stable softmax over the last axis (float64)."""
    z = np.asarray(logits, dtype=np.float64)
    z = z - z.max(-1, keepdims=True)
    e = np.exp(z)
    return e / e.sum(-1, keepdims=True)


def make_prediction(labels: list[str], logits: np.ndarray) -> Prediction:
    probs = softmax(logits)
    idx = int(np.argmax(probs))
    return Prediction(labels[idx], idx, {lab: float(p) for lab, p in zip(labels, probs)})


def predict_sentence(lm: LoadedModel, text: str, *, mask: HeadMask | None = None) -> Prediction | None:
    """The prediction alone (one forward pass, no capture); None for a model without a label head."""
    if not lm.has_prediction:
        return None
    import torch

    batch = capture.encode(lm, [text])
    with torch.no_grad(), masked(lm, mask):
        logits = lm.model(**batch.model_inputs()).logits[0].numpy()
    return make_prediction(lm.labels, logits)


@dataclass
class SentenceAnalysis:
    """Everything the views need about one sentence (padding already removed)."""

    model_name: str
    text: str
    tokens: list[str]
    special: np.ndarray
    word_ids: list[int | None]
    attention: np.ndarray
    """[layers, heads, n, n] float32."""
    values: np.ndarray
    """[layers, n, heads, d] value vectors."""
    out_weight: np.ndarray
    """[layers, hidden, heads*d]."""
    out_bias: np.ndarray
    prediction: Prediction | None
    mask: HeadMask = field(default_factory=HeadMask)
    """The heads switched off while the sentence ran (empty: the full model)."""
    windows: list[int | None] | None = None
    """Per layer, the local attention window (None: global); None when every layer is global."""
    head_metrics: metrics.HeadMetrics = field(init=False)

    def __post_init__(self) -> None:
        reach = metrics.window_reach(self.windows or [], self.attention.shape[-1]) if self.windows else None
        self.head_metrics = metrics.head_metrics(self.attention, self.special, reach=reach)

    def layer_windows(self) -> list[int | None]:
        """The window of every layer (None for global attention)."""
        return list(self.windows) if self.windows else [None] * self.num_layers

    @property
    def num_layers(self) -> int:
        return self.attention.shape[0]

    @property
    def num_heads(self) -> int:
        return self.attention.shape[1]

    @property
    def heads_on(self) -> np.ndarray | None:
        """[layers, heads] 1 for heads that ran, 0 for switched-off ones; None when every head ran."""
        return self.mask.gates(self.num_layers, self.num_heads) if self.mask else None

    @cached_property
    def rollout(self) -> np.ndarray:
        """Attention rollout [n, n] (Abnar & Zuidema 2020); switched-off heads left out of the layer means.

        Computed when first asked for (:meth:`rollout_row` serves the relevance band without it)."""
        return rollout.attention_rollout(self.attention, heads_on=self.heads_on)

    def rollout_row(self, i: int) -> np.ndarray:
        """Row ``i`` of the attention rollout [n], without the full matrix unless it exists already."""
        if "rollout" in self.__dict__:
            return self.rollout[i]
        rows = self.__dict__.setdefault("_rollout_rows", {})
        if i not in rows:
            rows[i] = rollout.rollout_rows(self.attention, [i], heads_on=self.heads_on)[0]
        return rows[i]

    @cached_property
    def value_norms(self) -> np.ndarray:
        """Norm of each head's transformed value vector per token [layers, heads, n] (Kobayashi et al. 2020)."""
        if "value_gram" in self.__dict__:
            return np.sqrt(np.diagonal(self.value_gram, axis1=-2, axis2=-1)).transpose(0, 2, 1)
        return norms.value_norms(self.values, self.out_weight)

    def value_weighted_head(self, layer: int, head: int) -> np.ndarray:
        """One head's value-weighted attention [n, n]: ``a_ij ||f_h(x_j)||`` (Kobayashi et al. 2020)."""
        return self.attention[layer, head] * self.value_norms[layer, head][None, :]

    @cached_property
    def value_gram(self) -> np.ndarray:
        """Inner products of the heads' transformed values [layers, n, heads, heads]."""
        return norms.value_gram(self.values, self.out_weight)

    @cached_property
    def value_weighted(self) -> np.ndarray:
        """Per-head value-weighted attention [layers, heads, n, n] (Kobayashi et al. 2020)."""
        return self.attention * self.value_norms[:, :, None, :]

    @cached_property
    def layer_value_weighted(self) -> np.ndarray:
        """Layer-level value-weighted attention [layers, n, n] (Kobayashi et al. 2020)."""
        return norms.layer_value_weighted(self.attention, self.values, self.out_weight, gram=self.value_gram)

    def layer_value_weighted_row(self, layer: int, i: int) -> np.ndarray:
        """Row ``i`` of one layer's value-weighted attention [n], from that layer's Gram matrix only."""
        if "layer_value_weighted" in self.__dict__:
            return self.layer_value_weighted[layer, i]
        sl = slice(layer, layer + 1 if layer != -1 else None)
        gram = self.value_gram[sl] if "value_gram" in self.__dict__ else None
        return norms.layer_value_weighted(
            self.attention[sl, :, i : i + 1], self.values[sl], self.out_weight[sl], gram=gram
        )[0, 0]

    def flow(self, *, queries: list[int] | None = None) -> np.ndarray:
        """Attention flow [n, n]; raises ValueError for inputs too long to solve quickly."""
        return rollout.attention_flow(self.attention, queries=queries, heads_on=self.heads_on)

    def heads_table(self) -> list[dict[str, float | int]]:
        """One dict per head: layer, head and every metric (stable JSON names)."""
        table = self.head_metrics.as_dict()
        return [
            {"layer": l, "head": h, **{k: float(v[l, h]) for k, v in table.items()}}
            for l in range(self.num_layers)
            for h in range(self.num_heads)
        ]


def analyze_sentence(lm: LoadedModel, text: str, *, mask: HeadMask | None = None) -> SentenceAnalysis:
    """Run one sentence through the model and capture everything about it.

    With ``mask``, the sentence runs on the masked model (those heads' gates at
    0): the prediction, every later head's attention and the value-weighted
    measures are the masked model's.
    """
    with masked(lm, mask):
        cap = capture.run(lm, [text], values=True)
    idx = cap.batch.real_index[0]
    prediction = make_prediction(lm.labels, cap.logits[0]) if lm.has_prediction else None
    return SentenceAnalysis(
        model_name=lm.name,
        text=text,
        tokens=cap.batch.tokens[0],
        special=cap.batch.special[0],
        word_ids=cap.batch.word_ids[0],
        attention=cap.sentence(0),
        values=cap.values[0][:, idx] if len(idx) != cap.values.shape[2] else cap.values[0],
        out_weight=cap.out_weight,
        out_bias=cap.out_bias,
        prediction=prediction,
        mask=mask or HeadMask(),
        windows=list(lm.windows) if any(w is not None for w in lm.windows) else None,
    )
