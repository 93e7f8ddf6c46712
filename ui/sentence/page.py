"""The sentence page: sentence bar, head mosaic, close-up, token arcs, relevance band, caution.

The page owns a :class:`ui.sentence.state.SentencePage` and pushes its arrays into the
views; the views only paint and forward clicks and keys back here.
"""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QLabel,
    QScrollArea,
    QSplitter,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.figures.sentence import CAUTION
from inspector.measures.analysis import SentenceAnalysis
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES
from ui.sentence.bar import SentenceBar
from ui.sentence.close_up import CloseUp
from ui.sentence.head_grid import HeadGrid
from ui.sentence.relevance_band import RelevanceBand
from ui.sentence.state import LINK_MODES, RELEVANCE_SOURCES, SOURCES, SentencePage, metric_range
from ui.sentence.token_arcs import TokenArcs
from ui.widgets.legend import ColourKey, MeterKey
from ui.widgets.panel import Panel, column
from ui.widgets.worker import JobRunner


def _combo(parent: QWidget, items: dict[str, str], name: str) -> QComboBox:
    box = QComboBox(parent)
    box.setAccessibleName(name)
    for key, text in items.items():
        box.addItem(text, key)
    box.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
    return box


class SentencePageWidget(QWidget):
    """Everything about one sentence, for the model that is open."""

    views_updated = Signal()
    """All views have been given the current state (after an analysis or a change)."""
    status = Signal(str)
    """A short read-out for the status bar (hover values)."""

    def __init__(self, runner: JobRunner, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = SentencePage()
        self._runner = runner
        self._grid_input: tuple | None = None
        self._flow_for: SentenceAnalysis | None = None

        self.bar = SentenceBar(self)
        self.grid = HeadGrid(self)
        self.closeup = CloseUp(self)
        self.arcs = TokenArcs(self)
        self.band = RelevanceBand(self)

        # toggles shared with the View menu
        self.words_action = QAction("Merge pieces into &words", self, checkable=True)
        self.words_action.setShortcut(QKeySequence("Ctrl+Shift+W"))
        self.words_action.setIconText("Words")
        self.words_action.setToolTip("Show whole words instead of word pieces (Ctrl+Shift+W)")
        self.words_action.toggled.connect(lambda on: self.set_option("words", on))
        self.special_action = QAction("&Hide special tokens", self, checkable=True)
        self.special_action.setShortcut(QKeySequence("Ctrl+Shift+H"))
        self.special_action.setIconText("Hide special")
        self.special_action.setToolTip(
            "Leave out [CLS]/[SEP]-style tokens; rows are renormalised (Ctrl+Shift+H)"
        )
        self.special_action.toggled.connect(lambda on: self.set_option("hide_special", on))
        self.explain_action = QAction("E&xplain this sentence\u2026", self)
        self.explain_action.setShortcut(QKeySequence("Ctrl+Shift+X"))
        self.explain_action.setIconText("Explain\u2026")
        self.explain_action.setToolTip("What pushed this sentence toward each label? (Ctrl+Shift+X)")
        explain_button = QToolButton(self.bar)
        explain_button.setDefaultAction(self.explain_action)
        self.bar.layout().addWidget(explain_button, 1, 3, Qt.AlignmentFlag.AlignRight)

        self.mosaic_panel = self._mosaic_panel()
        self.closeup_panel = self._closeup_panel()
        self.arcs_panel = self._arcs_panel()
        self.band_panel = self._band_panel()

        right = QSplitter(Qt.Orientation.Vertical, self)
        right.addWidget(self.closeup_panel)
        right.addWidget(self.arcs_panel)
        right.setStretchFactor(0, 3)
        right.setStretchFactor(1, 2)
        right.setSizes([500, 260])
        top = QSplitter(Qt.Orientation.Horizontal, self)
        top.addWidget(self.mosaic_panel)
        top.addWidget(right)
        top.setStretchFactor(0, 5)
        top.setStretchFactor(1, 4)
        main = QSplitter(Qt.Orientation.Vertical, self)
        main.addWidget(top)
        main.addWidget(self.band_panel)
        main.setStretchFactor(0, 5)
        main.setStretchFactor(1, 1)
        main.setChildrenCollapsible(False)

        self.caution = QLabel(f"<b>Read with care:</b> {CAUTION}", self)
        self.caution.setWordWrap(True)
        self.caution.setAccessibleName("Caution")
        self.caution.setContentsMargins(8, 2, 8, 4)

        column(self, [self.bar, (main, 1), self.caution], margins=(6, 4, 6, 4), spacing=6)

        self.grid.head_clicked.connect(self.select_head)
        self.grid.move_requested.connect(self.move_head)
        self.grid.hovered.connect(self._grid_hover)
        for view in (self.closeup, self.arcs):
            view.query_clicked.connect(self.set_query)
            view.query_move.connect(self.move_query)
        self.closeup.hovered.connect(self.status.emit)
        self.bar.expected_changed.connect(self._expected_changed)
        self.clear()

    # -- panels ------------------------------------------------------------------------------------
    def _mosaic_panel(self) -> Panel:
        panel = Panel("Head mosaic", self.grid, self)
        self.metric_box = _combo(panel, {n: METRIC_LABELS[n] for n in METRIC_NAMES}, "Meter metric")
        self.metric_box.setCurrentIndex(METRIC_NAMES.index(self.state.options.metric))
        self.metric_box.currentIndexChanged.connect(
            lambda _i: self.set_option("metric", self.metric_box.currentData())
        )
        self.scale_box = _combo(panel, {"own": "Each head", "shared": "Shared 0\u20131"}, "Colour scale")
        self.scale_box.currentIndexChanged.connect(
            lambda _i: self.set_option("scale", self.scale_box.currentData())
        )
        panel.add_control(self.metric_box, "&Meter:")
        panel.add_control(self.scale_box, "Sc&ale:")
        self.colour_key = ColourKey(panel)
        self.meter_key = MeterKey(panel)
        keys = QVBoxLayout()
        keys.setSpacing(0)
        keys.addWidget(self.colour_key)
        keys.addWidget(self.meter_key)
        panel.footer.addLayout(keys)
        return panel

    def _closeup_panel(self) -> Panel:
        panel = Panel("Close-up", self.closeup, self)
        self.source_box = _combo(panel, SOURCES, "Close-up source")
        self.source_box.currentIndexChanged.connect(
            lambda _i: self.set_option("source", self.source_box.currentData())
        )
        panel.add_control(self.source_box, "Sho&w:")
        for action in (self.words_action, self.special_action):
            button = QToolButton(panel)
            button.setDefaultAction(action)
            panel.header.addWidget(button)
        return panel

    def _arcs_panel(self) -> Panel:
        scroll = QScrollArea(self)
        scroll.setWidget(self.arcs)
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
        scroll.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setMinimumHeight(150)
        panel = Panel("Token arcs", scroll, self)
        self.links_box = _combo(panel, LINK_MODES, "Arc mode")
        self.links_box.currentIndexChanged.connect(self._links_mode_changed)
        self.threshold_box = QDoubleSpinBox(panel)
        self.threshold_box.setRange(0.01, 1.0)
        self.threshold_box.setSingleStep(0.05)
        self.threshold_box.setDecimals(2)
        self.threshold_box.setValue(self.state.options.threshold)
        self.threshold_box.setAccessibleName("Link threshold")
        self.threshold_box.setEnabled(False)
        self.threshold_box.valueChanged.connect(lambda v: self.set_option("threshold", float(v)))
        panel.add_control(self.links_box, "Li&nks:")
        panel.add_control(self.threshold_box, "\u2265")
        hint = QLabel(
            "above the line: looks back \u00b7 below: looks ahead \u00b7 thicker = more weight", panel
        )
        hint.setEnabled(False)
        panel.footer.addWidget(hint)
        return panel

    def _band_panel(self) -> Panel:
        panel = Panel("Relevance band", self.band, self)
        self.relevance_box = _combo(panel, RELEVANCE_SOURCES, "Relevance source")
        self.relevance_box.currentIndexChanged.connect(
            lambda _i: self.set_option("relevance", self.relevance_box.currentData())
        )
        panel.add_control(self.relevance_box, "&From:")
        self.band_key = ColourKey(panel)
        panel.footer.addWidget(self.band_key)
        return panel

    # -- model and analysis ------------------------------------------------------------------------
    def set_model(self, lm: LoadedModel) -> None:
        self.bar.set_labels(lm.labels, lm.has_prediction)
        if self.state.expected:
            self.bar.set_expected(self.state.expected)
        self.state.set_analysis(None)
        self.clear(f"{lm.name}: type a sentence above")

    def clear(self, note: str = "No model open") -> None:
        self.state.set_analysis(None)
        self._grid_input = None
        self.grid.clear(note)
        self.closeup.set_data(None, [], [], note=note)
        self.arcs.set_data(None, [], [], query=0, mode="query", threshold=0.1, note=note)
        self.band.set_data(None, [], [], note=note)
        self.bar.set_prediction(None, misfire=False)
        for panel in (self.mosaic_panel, self.closeup_panel, self.arcs_panel, self.band_panel):
            panel.set_subtitle("")
        self.colour_key.set_text("Colour: attention weight", "0", "max")
        self.meter_key.set_text("Meter:", "", "")
        self.band_key.set_text("Shade: relevance", "0", "max")

    def apply_analysis(self, analysis: SentenceAnalysis) -> None:
        """Show a fresh analysis in every view (GUI thread)."""
        self.state.set_analysis(analysis)
        self.refresh()

    # -- changes from the user ---------------------------------------------------------------------
    def set_option(self, name: str, value: object) -> None:
        self.state.set_option(name, value)
        if self.state.ready:
            self.refresh()

    def select_head(self, layer: int, head: int) -> None:
        self.state.select(layer, head)
        self.refresh_selection()

    def move_head(self, d_layer: int, d_head: int) -> None:
        self.state.move(d_layer, d_head)
        self.refresh_selection()

    def set_query(self, index: int) -> None:
        if self.state.ready:
            self.state.set_query(index)
            self.refresh_selection()

    def move_query(self, step: int) -> None:
        if self.state.ready:
            self.state.move_query(step)
            self.refresh_selection()

    def _links_mode_changed(self, _index: int) -> None:
        mode = self.links_box.currentData()
        self.threshold_box.setEnabled(mode == "threshold")
        self.set_option("links", mode)

    def _expected_changed(self, label: str | None) -> None:
        self.state.expected = label
        self._refresh_prediction()

    def _grid_hover(self, layer: int, head: int) -> None:
        if layer >= 0 and self.state.ready:
            values = self.state.head_summary(layer, head).replace("\n", "  \u00b7  ")
            self.status.emit(values)

    # -- pushing state into the views --------------------------------------------------------------
    def refresh(self) -> None:
        """Push the whole state into every view."""
        st = self.state
        if not st.ready:
            return
        heads, metric = st.head_matrices(), st.metric_values()
        key = (id(heads), id(metric), st.options.scale)
        if key != self._grid_input:
            lo, hi = metric_range(st.options.metric, metric)
            self.grid.set_data(
                heads, metric, (lo, hi), per_head=st.options.scale == "own", summary=st.head_summary
            )
            self._grid_input = key
            self.colour_key.set_text(
                "Colour = attention weight", "0", "each head's largest" if st.options.scale == "own" else "1"
            )
            self.meter_key.set_text(f"Bar = {st.metric_label()}", fmt.number(lo), fmt.number(hi))
        a = st.analysis
        self.mosaic_panel.set_subtitle(
            f"{a.num_layers}\u00d7{a.num_heads} \u00b7 {fmt.count(len(st.view().labels), 'token')}"
        )
        rel = st.relevance()
        self.band.set_data(rel.values, rel.labels, rel.special, rel.note)
        self.band_panel.set_subtitle(f"{rel.source} \u00b7 {rel.note}")
        top = "max" if rel.values is None else fmt.weight(rel.values.max())
        self.band_key.set_text("Shade: relevance of each token for the prediction,", "0", top)
        self._refresh_prediction()
        self.refresh_selection()
        self._request_flow()

    def refresh_selection(self) -> None:
        """Push the selected head and query into the views that depend on them."""
        st = self.state
        if not st.ready:
            return
        self.grid.set_selection(st.layer, st.head)
        focus = st.focus()
        query = st.query_index()
        self.closeup.set_data(focus.matrix, focus.labels, focus.special, query=query, note=focus.note)
        self.closeup_panel.set_subtitle(f"{focus.where}" + (f" \u00b7 {focus.note}" if focus.note else ""))
        self.arcs.set_data(
            focus.matrix,
            focus.labels,
            focus.special,
            query=query,
            mode=st.options.links,
            threshold=st.options.threshold,
            note=focus.note,
        )
        query_text = f"query \u2018{focus.labels[query]}\u2019" if focus.labels else ""
        self.arcs_panel.set_subtitle(f"{focus.view} \u00b7 {focus.where} \u00b7 {query_text}")
        self.views_updated.emit()

    def _refresh_prediction(self) -> None:
        a = self.state.analysis
        self.bar.set_prediction(a.prediction if a else None, misfire=self.state.is_misfire())

    def _request_flow(self) -> None:
        analysis = self.state.analysis
        if not self.state.needs_flow() or self._flow_for is analysis:
            return
        self._flow_for = analysis

        def done(flow: object) -> None:
            if self.state.set_flow(analysis, flow):
                self.refresh()

        self._runner.submit("flow", analysis.flow, done, self.status.emit)

    def view_widgets(self) -> list[QWidget]:
        return [self.grid, self.closeup, self.arcs, self.band]
