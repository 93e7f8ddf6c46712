"""What the sentence page shows about a second model (B) beside the open one (A), without Qt.

When a second checkpoint is open, every sentence is run through both and compared
(:func:`inspector.comparison.sentence.compare_analyses`). :class:`PairState` keeps that
comparison and derives what the page draws: B's head matrices on the page's token axis, the
per-head change that both mosaics mark with corner wedges (B's head against A's head at the
same position, mean Jensen-Shannon divergence in bits), the hover texts, and the lines of the
comparison strip.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from inspector.checkpoint.tokens import TokenView, apply_view
from inspector.comparison.sentence import SentenceComparison
from inspector.formatting import bits, head_name, number, percent, signed
from inspector.formatting import count as fmt_count
from inspector.measures.analysis import Prediction
from inspector.measures.metrics import METRIC_LABELS

MOVED_MARGIN = 0.05
"""Bits by which another A head must beat the same position before "B's LxHy resembles A's ..." is said."""


def prediction_text(prediction: Prediction | None, k: int = 3) -> str:
    """``label 98.0%`` and the next ``k - 1`` labels, or a note for a bare encoder."""
    if prediction is None:
        return "no prediction (bare encoder)"
    top = prediction.top(k)
    rest = ", ".join(f"{lab} {percent(p)}" for lab, p in top[1:])
    return f"{top[0][0]} {percent(top[0][1])}" + (f"  ({rest})" if rest else "")


@dataclass
class PairState:
    """The second model's name and its comparison with the first on the current sentence."""

    name_a: str = ""
    name_b: str = ""
    comparison: SentenceComparison | None = None
    _cache: dict = field(default_factory=dict, repr=False)

    @property
    def active(self) -> bool:
        return bool(self.name_b)

    @property
    def ready(self) -> bool:
        return self.comparison is not None

    def set_models(self, name_a: str, name_b: str) -> None:
        self.name_a, self.name_b = name_a, name_b
        self.set_comparison(None)

    def set_comparison(self, comparison: SentenceComparison | None) -> None:
        self.comparison = comparison
        self._cache.clear()

    def _require(self) -> SentenceComparison:
        if self.comparison is None:
            raise RuntimeError("no comparison yet")
        return self.comparison

    # -- arrays ------------------------------------------------------------------------------------
    def head_matrices_b(self, view: TokenView, identity: bool) -> np.ndarray:
        """B's attention of every head on the page's token axis, [layers_b, heads_b, m, m] float32."""
        key = ("heads_b", id(view), identity)
        if key not in self._cache:
            att = self._require().b.attention
            out = att if identity else apply_view(att, view)
            self._cache[key] = np.ascontiguousarray(out, dtype=np.float32)
        return self._cache[key]

    def change_b(self) -> np.ndarray:
        """[layers_b, heads_b] B's head against A's at the same position (bits; NaN where A has none)."""
        return self._require().matching.same_position

    def change_a(self, layers: int, heads: int) -> np.ndarray:
        """The same values on A's grid [layers, heads] (NaN where B has no head there)."""
        out = np.full((layers, heads), np.nan)
        same = self.change_b()
        lb, hb = min(layers, same.shape[0]), min(heads, same.shape[1])
        out[:lb, :hb] = same[:lb, :hb]
        return out

    def peak(self) -> float:
        """The largest same-position change (the wedge of full size)."""
        same = self.change_b()
        finite = same[np.isfinite(same)]
        return float(finite.max()) if finite.size and finite.max() > 0 else 1.0

    # -- words -------------------------------------------------------------------------------------
    def hover_b(self, layer: int, head: int, metric: str) -> str:
        """What B's head is and how it differs from A (the B mosaic's hover text)."""
        c = self._require()
        m = c.matching
        same = m.same_position[layer, head]
        la, ha = (int(v) for v in m.best_match[layer, head])
        value_b = float(c.b.head_metrics.get(metric)[layer, head])
        lines = [f"B ({self.name_b}), {head_name(layer, head)}"]
        if np.isnan(same):
            lines.append(f"{self.name_a} has no head at this position")
        elif m.unchanged[layer, head]:
            lines.append("unchanged: the same weights as A's head here")
        else:
            lines.append(f"change against A's {head_name(layer, head)}: {bits(same)}")
        lines.append(f"closest head of A: {head_name(la, ha)} ({bits(m.best_js[layer, head])})")
        delta = c.metric_delta(metric)[layer, head]
        label = METRIC_LABELS[metric]
        if np.isnan(delta):
            lines.append(f"{label}: {number(value_b)}")
        else:
            lines.append(f"{label}: {number(value_b)} (A {number(value_b - delta)}, {signed(delta)})")
        return "\n".join(lines)

    def hover_a(self, layer: int, head: int) -> str:
        """The line the A mosaic's hover text gets about B."""
        same = self.change_a(layer + 1, head + 1)[layer, head]
        if np.isnan(same):
            return f"B ({self.name_b}) has no head at this position"
        unchanged = self._require().matching.unchanged[layer, head]
        return f"B ({self.name_b}): " + ("unchanged" if unchanged else f"changed by {bits(same)}")

    def moved(self) -> list[str]:
        """``B's L2H1 resembles A's L3H2`` for heads whose closest A head sits elsewhere (clearly)."""
        m = self._require().matching
        return [
            f"B\u2019s {head_name(lb, hb)} \u2248 A\u2019s {head_name(la, ha)}"
            for lb, hb, la, ha, _best, _same in m.moved(MOVED_MARGIN)
        ]

    def strip_lines(self, expected: str | None = None) -> tuple[str, str]:
        """The comparison strip: (B's prediction line, changes line) as plain text.

        With an ``expected`` label, B's line says whether B got it right.
        """
        c = self._require()
        verdict = {True: "same as A", False: "A said otherwise", None: ""}[c.agree]
        pred = c.b.prediction
        if expected and pred is not None:
            mark = "\u2713 as expected" if pred.label == expected else f"\u2715 misfire (expected {expected})"
            verdict = f"{mark} \u00b7 {verdict}"
        ranked = pred.top(3) if pred is not None else []
        said = prediction_text(pred, 1)
        rest = ", ".join(f"{lab} {percent(p)}" for lab, p in ranked[1:])
        first = (
            f"B \u00b7 {self.name_b}: {said}"
            + (f"   \u2014 {verdict}" if verdict else "")
            + (f"   (then {rest})" if rest else "")
        )
        same = c.matching.same_position
        order = np.argsort(-np.nan_to_num(same, nan=-1.0), axis=None)[:3]
        heads = c.matching.heads_b
        top = ", ".join(
            f"{head_name(i // heads, i % heads)} {bits(same.flat[i])}"
            for i in order
            if np.isfinite(same.flat[i]) and same.flat[i] > 0
        )
        unchanged = int(c.matching.unchanged.sum())
        moved = self.moved()
        parts = [
            f"changed most: {top or 'nothing'}",
            f"{unchanged} of {fmt_count(same.size, 'head')} unchanged",
            f"rollout change {bits(c.rollout_js)}",
        ]
        if moved:
            parts.append("; ".join(moved[:2]) + (" \u2026" if len(moved) > 2 else ""))
        return first, " \u00b7 ".join(parts)
