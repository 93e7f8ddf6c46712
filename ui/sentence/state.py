"""What the sentence page shows, as plain Python: no Qt in here.

:class:`SentencePage` state holds the current analysis, the selected head and
query token and the view options, and derives every array the views draw
(token axis, per-head matrices, close-up matrix, relevance vector). Widgets
only paint these arrays and forward user events back as calls on the state,
so every number on screen can be checked without a window.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from inspector import formatting as fmt
from inspector.checkpoint.masks import HeadMask, missing_heads
from inspector.checkpoint.tokens import TokenView, apply_view, make_view
from inspector.measures.analysis import Prediction, SentenceAnalysis
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES
from inspector.measures.rollout import FLOW_MAX_TOKENS

SOURCES: dict[str, str] = {
    "head": "Selected head",
    "layer_mean": "Layer mean",
    "rollout": "Rollout",
    "flow": "Flow",
    "value_head": "Value-weighted head",
}
"""What the close-up and the arcs show (key -> menu text)."""

RELEVANCE_SOURCES: dict[str, str] = {
    "rollout": "Rollout",
    "flow": "Flow",
    "value": "Value-weighted, last layer",
}
"""Where the relevance band takes the classification token's row from."""

RELEVANCE_MEANINGS: dict[str, str] = {
    "rollout": "attention rolled up through every layer from the classification token "
    "(head mean plus the residual path); it does not depend on the predicted label",
    "flow": "largest attention flow from the classification token to each token through every layer; "
    "it does not depend on the predicted label",
    "value": "the classification token's last-layer attention weighted by the size of each token's "
    "transformed value, renormalised; it does not depend on the predicted label",
}
"""What each relevance source measures, for the band's caption (none of them is label-specific)."""

SCALES: dict[str, str] = {
    "own": "each head from 0 to its own largest weight",
    "shared": "every head from 0 to 1",
}
"""Colour scales of the head mosaic."""

BOUNDED_METRICS = frozenset(
    {"entropy_normalized", "special_share", "self_share", "prev_share", "next_share", "confidence"}
)
"""Metrics that live in [0, 1]; the others (entropy in nats, distance in tokens) are scaled to their maximum."""


def metric_range(name: str, values: np.ndarray) -> tuple[float, float]:
    """The span a metric's meter covers: [0, 1] for shares, [0, largest value] otherwise."""
    if name in BOUNDED_METRICS:
        return 0.0, 1.0
    top = float(np.nanmax(values)) if np.size(values) else 1.0
    return 0.0, top if top > 0 else 1.0


LINK_MODES: dict[str, str] = {"query": "From the query token", "threshold": "Every link above a threshold"}


MIN_QUERY_LINK = 0.02
"""In query mode, links lighter than this are not drawn as arcs (their numbers stay on hover)."""


def arc_links(matrix: np.ndarray, query: int, mode: str, threshold: float) -> list[tuple[int, int, float]]:
    """(query, key, weight) of every arc to draw: the query's row, or every pair above ``threshold``.

    A token's link to itself is never an arc.
    """
    if mode == "query":
        row = matrix[query]
        return [
            (query, k, float(row[k])) for k in range(row.shape[0]) if k != query and row[k] >= MIN_QUERY_LINK
        ]
    qs, ks = np.nonzero(matrix >= threshold)
    return [(int(q), int(k), float(matrix[q, k])) for q, k in zip(qs, ks) if q != k]


@dataclass
class ViewOptions:
    """User choices that shape every view of the sentence page."""

    metric: str = "entropy_normalized"
    source: str = "head"
    relevance: str = "rollout"
    words: bool = False
    hide_special: bool = False
    links: str = "query"
    threshold: float = 0.15
    scale: str = "own"
    relevance_own: bool = False
    """Let the classification token's own entry set the relevance band's colour scale."""


@dataclass
class MatrixData:
    """One square matrix on the current token axis, with what it is."""

    matrix: np.ndarray | None
    """[m, m] rows = queries, columns = keys; None while it is still being computed."""
    labels: list[str]
    special: np.ndarray
    view: str
    """Name of the view ("Selected head", "Rollout" ...)."""
    where: str
    """Which layer/head it comes from ("L2H5", "all 4 layers" ...)."""
    note: str = ""
    """Why the matrix is missing, or a remark on how it was made."""


@dataclass
class RelevanceData:
    """The classification token's relevance over the shown tokens."""

    values: np.ndarray | None
    labels: list[str]
    special: np.ndarray
    source: str
    note: str = ""
    vmax: float = 1.0
    """Top of the colour scale: the largest value, leaving out ``excluded`` when that is set."""
    excluded: int | None = None
    """Position of the classification token's own entry when it is left out of the scale."""
    meaning: str = ""
    """What the source measures, in words."""


@dataclass(frozen=True)
class LabelShift:
    """How switching heads off moved one label's probability."""

    label: str
    role: str
    """Why it is listed: ``full`` (the full model's prediction), ``masked`` (the prediction with the heads
    off, when it differs) or ``expected``."""
    before: float
    """Probability with every head on."""
    after: float
    """Probability with the mask's heads off."""

    @property
    def change(self) -> float:
        return self.after - self.before


SHIFT_ROLES = {"full": "full model's prediction", "masked": "now predicted", "expected": "expected"}
"""How each listed label is introduced in the heads-off line."""


def label_shifts(full: Prediction, masked: Prediction, expected: str | None) -> list[LabelShift]:
    """The full model's predicted label, the masked prediction (if it differs) and the expected label (if set)."""
    out = [LabelShift(full.label, "full", full.probabilities[full.label], masked.probabilities[full.label])]
    if masked.label != full.label:
        out.append(
            LabelShift(
                masked.label, "masked", full.probabilities[masked.label], masked.probabilities[masked.label]
            )
        )
    if expected and expected not in (full.label, masked.label) and expected in full.probabilities:
        out.append(
            LabelShift(expected, "expected", full.probabilities[expected], masked.probabilities[expected])
        )
    return out


def shift_text(shift: LabelShift) -> str:
    """``full model's prediction cancel_booking 94.6% → 40.1% (−54.5 points)``."""
    return (
        f"{SHIFT_ROLES[shift.role]} {shift.label} {fmt.percent(shift.before)} → {fmt.percent(shift.after)} "
        f"({fmt.points(shift.change, signed=True)})"
    )


def view_matrices(
    analysis: SentenceAnalysis, words: bool, hide_special: bool
) -> tuple[TokenView, np.ndarray]:
    """The token axis and every head's attention on it, [layers, heads, m, m] float32.

    Pure function of the analysis (no state): the page also runs it on a worker thread to
    have the other word/special views ready before the user switches to them.
    """
    view = make_view(
        analysis.tokens, analysis.special, analysis.word_ids, words=words, drop_special=hide_special
    )
    if not words and not hide_special:
        return view, analysis.attention
    return view, np.ascontiguousarray(apply_view(analysis.attention, view), dtype=np.float32)


def classification_index(special: np.ndarray) -> int:
    """Position of the classification token: the first special token, else 0 (common practice, no source)."""
    hits = np.flatnonzero(np.asarray(special, dtype=bool))
    return int(hits[0]) if hits.size and hits[0] == 0 else 0


@dataclass
class SentencePage:
    """State of the sentence page (analysis, selection, options) and the arrays derived from it."""

    analysis: SentenceAnalysis | None = None
    options: ViewOptions = field(default_factory=ViewOptions)
    layer: int = 0
    head: int = 0
    query_piece: int = 0
    """The query token as a piece position (kept across word/piece switches)."""
    expected: str | None = None
    flow: np.ndarray | None = None
    """Attention flow [n, n] on pieces, filled in by a background job."""
    mask: HeadMask = field(default_factory=HeadMask)
    """The heads the user has switched off (the analysis follows after a re-run)."""
    full_prediction: Prediction | None = None
    """The prediction of the full model (every head on) for ``full_text``."""
    full_text: str | None = None
    _cache: dict = field(default_factory=dict, repr=False)
    _views: dict = field(default_factory=dict, repr=False)
    """(words, hide_special) -> (TokenView, head matrices or None); kept across option changes."""

    # -- changes ---------------------------------------------------------------------------------
    def set_analysis(self, analysis: SentenceAnalysis | None) -> None:
        """Show a new analysis; keep the selection where it still exists."""
        self.analysis = analysis
        self.flow = None
        self._cache.clear()
        self._views.clear()
        if analysis is not None:
            self.layer = min(self.layer, analysis.num_layers - 1)
            self.head = min(self.head, analysis.num_heads - 1)
            self.query_piece = min(self.query_piece, len(analysis.tokens) - 1)

    def set_full_prediction(self, text: str, prediction: Prediction | None) -> None:
        """Remember the full model's prediction for ``text`` (kept beside a masked analysis)."""
        self.full_text, self.full_prediction = text, prediction

    def known_full_prediction(self, text: str) -> Prediction | None:
        """The full model's prediction for ``text`` if it is known already."""
        return self.full_prediction if self.full_text == text else None

    # -- heads switched off ------------------------------------------------------------------------
    def set_mask(self, mask: HeadMask) -> bool:
        """Use ``mask``; False (nothing changes) if it names heads the analysed model lacks."""
        a = self.analysis
        if a is not None and missing_heads(mask, a.num_layers, a.num_heads):
            return False
        self.mask = HeadMask(mask.heads, mask.source)
        return True

    def toggle_head(self, layer: int, head: int) -> HeadMask:
        """Switch one head off, or back on."""
        self.mask = self.mask.toggled(layer, head)
        return self.mask

    def toggle_layer(self, layer: int) -> HeadMask:
        """Switch a whole layer off (or, if it is all off already, back on)."""
        self.mask = self.mask.with_layer(layer, self._require().num_heads)
        return self.mask

    def reset_mask(self) -> HeadMask:
        """Every head back on: the full model."""
        self.mask = HeadMask()
        return self.mask

    def mask_pending(self) -> bool:
        """True while the shown analysis was made with other heads off than the ones chosen now."""
        return self.analysis is not None and self.analysis.mask.heads != self.mask.heads

    def shifts(self) -> list[LabelShift]:
        """How the shown analysis's heads-off prediction differs from the full model's (empty without a mask)."""
        a = self.analysis
        full = self.known_full_prediction(a.text) if a is not None else None
        if a is None or not a.mask or a.prediction is None or full is None:
            return []
        return label_shifts(full, a.prediction, self.expected)

    def mask_text(self) -> str:
        """One line: which heads are off and what that did to the prediction ('' with every head on)."""
        a = self.analysis
        if a is None or not a.mask:
            return ""
        total = a.num_layers * a.num_heads
        off = f"{len(a.mask)} of {total} off: {a.mask.describe(most=6)}"
        shifts = self.shifts()
        if not shifts:
            return off
        return f"{off} · " + "; ".join(shift_text(s) for s in shifts)

    def set_flow(self, analysis: SentenceAnalysis, flow: np.ndarray) -> bool:
        """Store a flow result if it belongs to the current analysis; False if it is stale."""
        if analysis is not self.analysis:
            return False
        self.flow = flow
        self._cache.clear()
        return True

    def set_option(self, name: str, value: object) -> None:
        if not hasattr(self.options, name):
            raise AttributeError(name)
        setattr(self.options, name, value)
        self._cache.clear()

    def select(self, layer: int, head: int) -> None:
        if self.analysis is None:
            return
        self.layer = int(np.clip(layer, 0, self.analysis.num_layers - 1))
        self.head = int(np.clip(head, 0, self.analysis.num_heads - 1))

    def move(self, d_layer: int, d_head: int) -> None:
        """Move the selected head by whole rows/columns (stops at the edges)."""
        self.select(self.layer + d_layer, self.head + d_head)

    def set_query(self, view_index: int) -> None:
        """Make the token at ``view_index`` (on the current axis) the query."""
        groups = self.view().groups
        if groups:
            self.query_piece = groups[int(np.clip(view_index, 0, len(groups) - 1))][0]

    def move_query(self, step: int) -> None:
        self.set_query(self.query_index() + step)

    # -- derived ---------------------------------------------------------------------------------
    @property
    def ready(self) -> bool:
        return self.analysis is not None

    def _view_key(self) -> tuple[bool, bool]:
        return bool(self.options.words), bool(self.options.hide_special)

    def view(self) -> TokenView:
        key = self._view_key()
        if key not in self._views:
            a = self._require()
            view = make_view(a.tokens, a.special, a.word_ids, words=key[0], drop_special=key[1])
            self._views[key] = (view, None)
        return self._views[key][0]

    def query_index(self) -> int:
        """The query token's position on the current axis (first shown token if it is hidden)."""
        for i, group in enumerate(self.view().groups):
            if self.query_piece in group:
                return i
        return 0

    def head_matrices(self) -> np.ndarray:
        """Every head's attention on the current axis, [layers, heads, m, m] float32.

        Computed once per analysis and view (words or pieces, specials shown or hidden), so
        switching back and forth, or to a view prepared in the background, costs nothing.
        """
        key = self._view_key()
        view, matrices = self._views.get(key, (None, None))
        if matrices is None:
            view, matrices = view_matrices(self._require(), *key)
            self._views[key] = (view, matrices)
        return matrices

    def views_to_prepare(self) -> list[tuple[bool, bool]]:
        """The (words, hide_special) views one switch away from the current one that are not ready yet."""
        words, hide = self._view_key()
        flips = [(not words, hide), (words, not hide)]
        return [k for k in flips if self._views.get(k, (None, None))[1] is None]

    def store_view(
        self, analysis: SentenceAnalysis, key: tuple[bool, bool], view: TokenView, matrices: np.ndarray
    ) -> bool:
        """Keep a view prepared in the background; False if it is stale or was computed meanwhile."""
        if analysis is not self.analysis or self._views.get(key, (None, None))[1] is not None:
            return False
        self._views[key] = (view, matrices)
        return True

    def metric_values(self) -> np.ndarray:
        """The chosen metric for every head, [layers, heads] (computed on pieces by the core).

        All NaN when the metric means nothing for what is shown (see :meth:`metric_hidden`).
        """
        key = ("metric",)
        if key not in self._cache:
            values = np.asarray(self._require().head_metrics.get(self.options.metric), dtype=np.float64)
            self._cache[key] = np.full_like(values, np.nan) if self.metric_hidden() else values
        return self._cache[key]

    def metric_hidden(self) -> bool:
        """True when the meter is left empty: the special-token share while special tokens are hidden."""
        return self.options.metric == "special_share" and self.options.hide_special

    def axis_text(self) -> str:
        """How many tokens the views show, named for what they are: ``13 words`` or ``17 tokens``."""
        view = self.view()
        shown = fmt.count(len(view.labels), "word" if self.options.words else "token")
        if self.options.hide_special:
            hidden = int(np.count_nonzero(self._require().special))
            return f"{shown} ({fmt.count(hidden, 'special token')} hidden)"
        return shown

    def metric_label(self) -> str:
        return METRIC_LABELS[self.options.metric]

    def focus(self) -> MatrixData:
        """The matrix of the close-up (and of the arcs) for the chosen source."""
        key = ("focus", self.options.source, self.layer, self.head)
        if key in self._cache:
            return self._cache[key]
        a = self._require()
        view = self.view()
        src = self.options.source
        note = ""
        pieces: np.ndarray | None
        if src == "head":
            pieces, where = a.attention[self.layer, self.head], fmt.head_name(self.layer, self.head)
            if (self.layer, self.head) in set(a.mask.heads):
                note = "switched off: its weights are still computed, its output is not used"
        elif src == "layer_mean":
            on = [h for h in range(a.num_heads) if (self.layer, h) not in set(a.mask.heads)]
            pieces = a.attention[self.layer, on].mean(axis=0) if on else None
            where = f"{fmt.layer_name(self.layer)}, mean of {fmt.count(len(on), 'head')}" + (
                " on" if a.mask else ""
            )
            note = "" if on else "every head of this layer is switched off"
        elif src == "rollout":
            pieces, where = a.rollout, f"all {fmt.count(a.num_layers, 'layer')}"
            note = "residual 0.5, heads averaged"
        elif src == "flow":
            pieces, where = self.flow, f"all {fmt.count(a.num_layers, 'layer')}"
            note = self.flow_note() or "residual 0.5, heads averaged"
        elif src == "value_head":
            pieces = a.value_weighted_head(self.layer, self.head)
            where = fmt.head_name(self.layer, self.head)
            note = "weight x norm of the transformed value"
        else:
            raise KeyError(src)
        matrix = None
        if pieces is not None:
            matrix = (
                pieces if self._identity_view() else apply_view(np.asarray(pieces, dtype=np.float64), view)
            )
            matrix = np.asarray(matrix, dtype=np.float64)
        data = MatrixData(matrix, list(view.labels), view.special, SOURCES[src], where, note)
        self._cache[key] = data
        return data

    def flow_note(self) -> str:
        """Why flow is unavailable, or '' if it is (or will be) computed."""
        a = self._require()
        if len(a.tokens) > FLOW_MAX_TOKENS:
            return f"flow is limited to {fmt.count(FLOW_MAX_TOKENS, 'token')} (this sentence has {len(a.tokens)})"
        if self.flow is None:
            return "computing flow..."
        return ""

    def needs_flow(self) -> bool:
        """True when a shown view wants attention flow that is not there yet and can be computed."""
        if self.analysis is None or self.flow is not None or len(self.analysis.tokens) > FLOW_MAX_TOKENS:
            return False
        return self.options.source == "flow" or self.options.relevance == "flow"

    def relevance(self) -> RelevanceData:
        """The classification token's row of rollout / flow / value-weighted attention on the shown tokens.

        Piece values are summed within a word; with special tokens hidden the
        shown values are renormalised to sum to 1. The classification token's
        entry on itself is usually far larger than any other (in rollout, the
        residual path keeps much of its own weight), so by default it is left
        out of the colour scale (``options.relevance_own`` puts it back) and the
        other tokens are shaded against each other.
        """
        key = ("relevance", self.options.relevance)
        if key in self._cache:
            return self._cache[key]
        a = self._require()
        view = self.view()
        cls = classification_index(a.special)
        src = self.options.relevance
        note = f"row of '{a.tokens[cls]}'"
        row: np.ndarray | None
        if src == "rollout":
            row = a.rollout_row(cls)
        elif src == "flow":
            row = None if self.flow is None else self.flow[cls]
            note = self.flow_note() or note
        elif src == "value":
            last = a.layer_value_weighted_row(-1, cls)
            row = last / max(float(last.sum()), 1e-12)
        else:
            raise KeyError(src)
        values, vmax, excluded = None, 1.0, None
        if row is not None:
            values = np.array([float(np.sum(row[g])) for g in view.groups])
            if self.options.hide_special and values.sum() > 0:
                values = values / values.sum()
            own = next((i for i, g in enumerate(view.groups) if cls in g), None)
            if not self.options.relevance_own and own is not None and values.size > 1:
                excluded = own
            rest = np.delete(values, excluded) if excluded is not None else values
            vmax = float(max(rest.max(), 1e-12)) if rest.size else 1.0
        data = RelevanceData(
            values,
            list(view.labels),
            view.special,
            RELEVANCE_SOURCES[src],
            note,
            vmax,
            excluded,
            RELEVANCE_MEANINGS[src],
        )
        self._cache[key] = data
        return data

    def is_misfire(self) -> bool:
        """True when an expected label is set and the prediction differs from it."""
        a = self.analysis
        return bool(a and a.prediction and self.expected and self.expected != a.prediction.label)

    def head_summary(self, layer: int, head: int) -> str:
        """Every metric of one head, one per line (hover text)."""
        analysis = self._require()
        m = analysis.head_metrics
        lines = [fmt.head_name(layer, head)]
        if (layer, head) in set(self.mask.heads):
            lines[0] += " — switched off: its output is removed (its attention is still computed)"
        window = analysis.layer_windows()[layer]
        if window is not None:
            lines.append(f"local attention: keys within ±{window} tokens (entropy / ln n counts those keys)")
        lines += [f"{METRIC_LABELS[name]}: {fmt.weight(m.get(name)[layer, head])}" for name in METRIC_NAMES]
        return "\n".join(lines)

    # -- helpers ---------------------------------------------------------------------------------
    def _identity_view(self) -> bool:
        return not self.options.words and not self.options.hide_special

    def _require(self) -> SentenceAnalysis:
        if self.analysis is None:
            raise RuntimeError("no sentence analysed yet")
        return self.analysis
