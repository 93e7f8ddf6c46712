"""The sentence page: sentence bar, head mosaic, close-up, token arcs, relevance band, caution.

The page owns a :class:`ui.sentence.state.SentencePage` and pushes its arrays into the
views; the views only paint and forward clicks and keys back here.
"""

from __future__ import annotations

import html

from PySide6.QtCore import QEvent, QPoint, QSettings, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QKeySequence, QPalette
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QHBoxLayout,
    QLabel,
    QMenu,
    QScrollArea,
    QSizePolicy,
    QSplitter,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.figures.sentence import CAUTION
from inspector.formatting import head_name, layer_name
from inspector.measures.analysis import Prediction, SentenceAnalysis
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES
from ui.sentence.bar import SentenceBar
from ui.sentence.close_up import CloseUp
from ui.sentence.head_grid import READABLE_CELL, HeadGrid, head_codes
from ui.sentence.pair_state import PairState
from ui.sentence.relevance_band import BandScroll, RelevanceBand
from ui.sentence.second_model import SecondModelStrip
from ui.sentence.state import (
    LINK_MODES,
    RELEVANCE_SOURCES,
    SOURCES,
    SentencePage,
    metric_range,
    view_matrices,
)
from ui.sentence.token_arcs import TokenArcs
from ui.widgets.colormap import dim_text
from ui.widgets.legend import ColourKey, MeterKey
from ui.widgets.mask_files import MaskFiles
from ui.widgets.panel import ElidedLabel, Panel, column
from ui.widgets.worker import JobRunner

COMBO_CHARS = 13
"""Width of the sentence page's choice boxes, in characters."""
STALE_AFTER_MS = 400
"""The out-of-date note appears when the views still show an earlier text this long after an edit."""


def column_layout(items: list) -> QVBoxLayout:
    """A vertical layout of widgets, each given as a widget or ``(widget, stretch)``."""
    layout = QVBoxLayout()
    layout.setSpacing(2)
    for item in items:
        widget, stretch = item if isinstance(item, tuple) else (item, 0)
        layout.addWidget(widget, stretch)
    return layout


def _combo(parent: QWidget, items: dict[str, str], name: str) -> QComboBox:
    box = QComboBox(parent)
    box.setAccessibleName(name)
    for key, text in items.items():
        box.addItem(text, key)
    # A fixed width from a few characters: the panel never changes width with the choice,
    # and a long entry is shortened in the closed box (the list shows it whole).
    box.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    box.setMinimumContentsLength(min(max(len(t) for t in items.values()), COMBO_CHARS))
    return box


class SentencePageWidget(QWidget):
    """Everything about one sentence, for the model that is open."""

    views_updated = Signal()
    """All views have been given the current state (after an analysis or a change)."""
    status = Signal(str)
    """A short read-out for the status bar (hover values)."""
    error = Signal(str)
    """A problem the user can fix (a mask that does not fit the model ...)."""
    mask_changed = Signal(object)
    """The heads switched off changed (a HeadMask): the sentence should be analysed again now."""
    second_closed = Signal()
    """The user closed the second model (B)."""
    second_dropped = Signal(str)
    """A checkpoint folder was dropped on the comparison strip: open it as B."""

    def __init__(
        self, runner: JobRunner, parent: QWidget | None = None, settings: QSettings | None = None
    ) -> None:
        super().__init__(parent)
        self.state = SentencePage()
        self.lm: LoadedModel | None = None
        self._runner = runner
        self._grid_input: tuple | None = None
        self._flow_for: SentenceAnalysis | None = None
        self.masks = MaskFiles(runner, settings, self)
        self.masks.status.connect(self.status.emit)
        self.masks.error.connect(self.error.emit)
        self._a_predicts = True
        self.pair = PairState()
        """The second model (B) and its comparison with the open one, when B is open."""
        self._grid_b_input: tuple | None = None

        self.bar = SentenceBar(self)
        self.grid = HeadGrid(self)
        self.grid_b = HeadGrid(self)
        self.grid_b.setAccessibleName("Head mosaic of the second model")
        self.second = SecondModelStrip(self)
        self.second.hide()
        self.closeup = CloseUp(self)
        self.arcs = TokenArcs(self)
        self.band = RelevanceBand(self)
        self.band_scroll = BandScroll(self.band, self)

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

        self._mask_actions()
        self._heads_controls()
        self.mosaic_panel = self._mosaic_panel()
        self.closeup_panel = self._closeup_panel()
        self.arcs_panel = self._arcs_panel()
        self.band_panel = self._band_panel()

        # The close-up gets the full height of the right side; the mosaic (height-bound
        # on a laptop screen) shares the left side with the token arcs.
        left = QSplitter(Qt.Orientation.Vertical, self)
        left.addWidget(self.mosaic_panel)
        left.addWidget(self.arcs_panel)
        left.setStretchFactor(0, 3)
        left.setStretchFactor(1, 1)
        left.setSizes([1000, 150])
        top = QSplitter(Qt.Orientation.Horizontal, self)
        top.addWidget(left)
        top.addWidget(self.closeup_panel)
        top.setStretchFactor(0, 1)
        top.setStretchFactor(1, 1)
        top.setSizes([500, 700])
        self.top_split = top
        self._balanced_for: tuple[int, int] | None = None
        main = QSplitter(Qt.Orientation.Vertical, self)
        main.addWidget(top)
        main.addWidget(self.band_panel)
        main.setStretchFactor(0, 5)
        main.setStretchFactor(1, 1)
        main.setSizes([500, 150])
        main.setChildrenCollapsible(False)
        self.views = main

        self.caution = QLabel(f"<b>Read with care:</b> {CAUTION}", self)
        self.caution.setWordWrap(True)
        self.caution.setAccessibleName("Caution")
        self.caution.setContentsMargins(8, 2, 8, 4)

        column(self, [self.bar, (main, 1), self.caution], margins=(6, 4, 6, 4), spacing=6)

        # Over the views (no layout jump): says when they still show an earlier text.
        self.stale_note = QLabel("", self)
        self.stale_note.setAccessibleName("Views out of date")
        self.stale_note.setWordWrap(True)
        self.stale_note.setAutoFillBackground(True)
        self.stale_note.hide()
        self.waiting_reason = ""
        """Why an analysis may wait (a corpus run holding the model), shown in the stale note."""
        self._stale_timer = QTimer(self)
        self._stale_timer.setSingleShot(True)
        self._stale_timer.setInterval(STALE_AFTER_MS)
        self._stale_timer.timeout.connect(self.update_stale_note)
        self.bar.entry.textChanged.connect(lambda _t: self._stale_timer.start())

        self.grid.head_clicked.connect(self.select_head)
        self.grid.move_requested.connect(self.move_head)
        self.grid.hovered.connect(self._grid_hover)
        self.grid.toggle_requested.connect(self.toggle_head)
        self.grid.layer_toggle_requested.connect(self.toggle_layer)
        self.grid.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        self.grid.customContextMenuRequested.connect(self._grid_menu)
        self.grid_b.head_clicked.connect(self.select_head)
        self.grid_b.move_requested.connect(self.move_head)
        self.grid_b.hovered.connect(self._grid_b_hover)
        self.second.closed.connect(self.second_closed.emit)
        self.second.folder_dropped.connect(self.second_dropped.emit)
        for view in (self.closeup, self.arcs):
            view.query_clicked.connect(self.set_query)
            view.query_move.connect(self.move_query)
        self.closeup.hovered.connect(self.status.emit)
        self.closeup.zoom_changed.connect(self.zoom_label.setText)
        self.bar.expected_changed.connect(self._expected_changed)
        self.clear()

    # -- heads switched off ------------------------------------------------------------------------
    def _mask_actions(self) -> None:
        def action(text: str, slot, shortcut: str = "", tip: str = "", icon_text: str = "") -> QAction:
            act = QAction(text, self)
            if shortcut:
                act.setShortcut(QKeySequence(shortcut))
                act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
            act.setToolTip(tip + (f" ({shortcut})" if shortcut else ""))
            act.setStatusTip(tip)
            if icon_text:
                act.setIconText(icon_text)
            act.triggered.connect(slot)
            return act

        self.head_off_action = action(
            "Switch the selected &head off / on",
            lambda: self.toggle_head(*self.grid.selection()),
            "Ctrl+D",
            "Switch the selected head off (or back on) and re-analyse; Space or a double click in the mosaic",
            "Head off/on",
        )
        self.layer_off_action = action(
            "Switch the selected &layer off / on",
            lambda: self.toggle_layer(self.grid.selection()[0]),
            "Ctrl+Shift+D",
            "Switch every head of the selected layer off (or back on); Shift+Space in the mosaic",
            "Layer off/on",
        )
        self.reset_mask_action = action(
            "&All heads on (full model)",
            self.reset_mask,
            "Ctrl+Shift+A",
            "Switch every head back on",
            "All on",
        )
        self.load_mask_action = action(
            "L&oad a head mask…", self.ask_load_mask, tip="Switch off the heads of a prune_mask.json"
        )
        self.save_mask_action = action(
            "&Save the heads switched off…",
            self.ask_save_mask,
            tip='Write the heads switched off as {"layer": [head, ...]}',
        )
        self.prune_action = action(
            "&Write pruned checkpoint…",
            self.ask_write_pruned,
            tip="A copy of the model with the switched-off heads' weights zeroed (loads in plain transformers)",
        )
        self.mask_actions = [
            self.head_off_action,
            self.layer_off_action,
            self.reset_mask_action,
            self.load_mask_action,
            self.save_mask_action,
            self.prune_action,
        ]
        self.addActions(self.mask_actions[:3])
        self._mask_enabled()

    def _mask_enabled(self) -> None:
        ready = self.state.ready
        has_mask = bool(self.state.mask)
        for act in (self.head_off_action, self.layer_off_action, self.load_mask_action):
            act.setEnabled(ready)
        for act in (self.reset_mask_action, self.save_mask_action, self.prune_action):
            act.setEnabled(ready and has_mask)

    def toggle_head(self, layer: int, head: int) -> None:
        """Switch one head off (or back on) and ask for a re-analysis."""
        if self.state.ready:
            self.state.toggle_head(layer, head)
            self._mask_set()

    def toggle_layer(self, layer: int) -> None:
        """Switch a whole layer off (or back on) and ask for a re-analysis."""
        if self.state.ready:
            self.state.toggle_layer(layer)
            self._mask_set()

    def reset_mask(self) -> None:
        """Every head back on."""
        if self.state.mask:
            self.state.reset_mask()
            self._mask_set()

    def set_mask(self, mask: HeadMask) -> bool:
        """Switch exactly ``mask``'s heads off (False, with an error, if the model lacks some)."""
        if not self.state.set_mask(mask):
            a = self.state.analysis
            self.error.emit(
                f"The mask names heads this {a.num_layers}×{a.num_heads} model does not have: {mask.describe()}"
            )
            return False
        self._mask_set()
        return True

    def _mask_set(self) -> None:
        self.grid.set_off(set(self.state.mask.heads))
        self._mask_enabled()
        self.mask_changed.emit(self.state.mask)

    def ask_load_mask(self) -> None:
        mask = self.masks.ask_load(self, self.lm)
        if mask is not None:
            self.set_mask(mask)

    def ask_save_mask(self) -> None:
        if self.state.mask:
            self.masks.ask_save(self, self.state.mask)

    def ask_write_pruned(self) -> None:
        self.masks.ask_write_pruned(self, self.lm, self.state.mask)

    def _grid_menu(self, pos: QPoint) -> None:
        hit = self.grid.hit_at(pos.x(), pos.y())
        if hit is None or not self.state.ready:
            return
        layer, head = hit
        self.select_head(layer, head)
        off = (layer, head) in set(self.state.mask.heads)
        menu = QMenu(self)
        menu.addAction(
            f"Switch {head_name(layer, head)} {'on' if off else 'off'}", lambda: self.toggle_head(layer, head)
        )
        whole = all((layer, h) in set(self.state.mask.heads) for h in range(self.state.analysis.num_heads))
        menu.addAction(
            f"Switch layer {layer_name(layer)} {'on' if whole else 'off'}", lambda: self.toggle_layer(layer)
        )
        menu.addSeparator()
        for act in self.mask_actions[2:]:
            menu.addAction(act)
        menu.exec(self.grid.mapToGlobal(pos))

    # -- panels ------------------------------------------------------------------------------------
    def _mosaic_body(self) -> QWidget:
        """Model A's mosaic; while a second model is open, the comparison strip above and B's mosaic beside it.

        The strip lives inside the (stretchable) mosaic panel, so a second model costs the
        window no height.
        """
        body = QWidget(self)
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.setSpacing(10)
        self.grid_captions: list[QLabel] = []
        for grid in (self.grid, self.grid_b):
            caption = QLabel("", body)
            caption.setContentsMargins(4, 0, 0, 0)
            caption.hide()
            self.grid_captions.append(caption)
            row.addLayout(column_layout([caption, (grid, 1)]), 1)
        self.grid_b.hide()
        row.setStretch(1, 0)  # B's column, empty while B is closed, takes no share of the width
        self._mosaic_row = row
        outer = QVBoxLayout(body)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.setSpacing(4)
        outer.addWidget(self.second)
        outer.addLayout(row, 1)
        return body

    def _mosaic_panel(self) -> Panel:
        panel = Panel("Head mosaic", self._mosaic_body(), self)
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
        keys = QHBoxLayout()
        keys.setSpacing(18)
        keys.addWidget(self.colour_key)
        keys.addWidget(self.meter_key)
        self.wedge_key = QLabel("", panel)
        self.wedge_key.setWordWrap(True)
        self.wedge_key.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.wedge_key.setToolTip("Hover a head in either mosaic for its numbers and B's closest head of A")
        self.wedge_key.hide()
        rows = QVBoxLayout()
        rows.setSpacing(2)
        rows.addLayout(keys)
        rows.addWidget(self.wedge_key)  # only with a second model: no height otherwise
        panel.footer.addLayout(rows, 1)
        return panel

    def _heads_controls(self) -> None:
        """The heads-off buttons, in the row under the prediction."""
        for act in self.mask_actions[:3]:
            button = QToolButton(self.bar)
            button.setDefaultAction(act)
            self.bar.add_heads_control(button)
        more = QToolButton(self.bar)
        more.setText("Mask \u25be")
        more.setToolTip("Load or save the heads switched off; write a pruned checkpoint")
        more.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        menu = QMenu(more)
        for act in self.mask_actions[3:]:
            menu.addAction(act)
        more.setMenu(menu)
        self.bar.add_heads_control(more)

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
            panel.footer.addWidget(button)
        panel.footer.addSpacing(12)
        for text, tip, slot in (
            ("\u2212", "Zoom out (\u2212 or the wheel)", self.closeup.zoom_out),
            ("+", "Zoom in (+ or the wheel; drag or Left/Right, Page Up/Down to pan)", self.closeup.zoom_in),
            ("Fit", "Show the whole matrix (0)", self.closeup.fit),
        ):
            button = QToolButton(panel)
            button.setText(text)
            button.setToolTip(tip)
            button.setAutoRaise(True)
            button.clicked.connect(slot)
            panel.footer.addWidget(button)
        panel.footer.setSpacing(4)
        self.zoom_label = ElidedLabel("whole matrix", panel)
        panel.footer.addWidget(self.zoom_label, 1)
        return panel

    def _arcs_panel(self) -> Panel:
        scroll = QScrollArea(self)
        scroll.setWidget(self.arcs)
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
        scroll.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setMinimumHeight(84)
        self.arcs_scroll = scroll
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
        self.arcs_hint = ElidedLabel(
            "above the line: looks back \u00b7 below: looks ahead \u00b7 thicker = more weight", panel
        )
        self.arcs_hint.setToolTip(self.arcs_hint.text())
        self._dim(self.arcs_hint)
        panel.footer.addWidget(self.arcs_hint, 1)
        return panel

    def _band_panel(self) -> Panel:
        panel = Panel("Relevance band", self.band_scroll, self)
        self.relevance_box = _combo(panel, RELEVANCE_SOURCES, "Relevance source")
        self.relevance_box.currentIndexChanged.connect(
            lambda _i: self.set_option("relevance", self.relevance_box.currentData())
        )
        panel.add_control(self.relevance_box, "&From:")
        self.band_key = ColourKey(panel)
        self.band_key.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Fixed)
        panel.footer.addWidget(self.band_key)
        self.band_caption = ElidedLabel("", panel)
        panel.footer.addWidget(self.band_caption, 1)
        self.own_check = QCheckBox("Scale includes its own entry", panel)
        self.own_check.setToolTip(
            "The classification token's relevance to itself is usually far above every other token's; "
            "left out (the default), the other tokens are shaded against each other"
        )
        self.own_check.toggled.connect(lambda on: self.set_option("relevance_own", on))
        panel.footer.addWidget(self.own_check)
        return panel

    def _fit_band_panel(self) -> None:
        """Let the relevance band's panel grow no taller than its chips need (the views above get the rest)."""
        chrome = self.band_panel.sizeHint().height() - self.band_scroll.sizeHint().height()
        needed = self.band.heightForWidth(self.band_scroll.viewport().width())
        self.band_panel.setMaximumHeight(max(chrome + needed, self.band_panel.minimumSizeHint().height()))

    def _dim(self, label: QLabel) -> None:
        """Secondary text in a dimmer shade of the text colour (readable, unlike the disabled grey)."""
        pal = QPalette(label.palette())
        pal.setColor(QPalette.ColorRole.WindowText, dim_text(self.palette(), 0.7))
        label.setPalette(pal)

    def changeEvent(self, event: QEvent) -> None:
        if event.type() == QEvent.Type.PaletteChange and hasattr(self, "arcs_hint"):
            self._dim(self.arcs_hint)
            self._style_stale_note()
        super().changeEvent(event)

    # -- model and analysis ------------------------------------------------------------------------
    def set_model(self, lm: LoadedModel) -> None:
        self.state.reset_mask()  # a mask belongs to the model it was made on
        self.grid.set_off(set())
        self.lm = lm
        self.state.set_full_prediction("", None)
        self._a_predicts = lm.has_prediction
        self.bar.set_labels(lm.labels, lm.has_prediction)
        if self.state.expected:
            self.bar.set_expected(self.state.expected)
        self.state.set_analysis(None)
        self.clear(f"{lm.name}: type a sentence above")

    def clear(self, note: str = "No model open") -> None:
        self.state.set_analysis(None)
        self._grid_input = None
        self.grid.clear(note)
        self.grid_b.clear(note)
        self._grid_b_input = None
        self.pair.set_comparison(None)
        self.closeup.set_data(None, [], [], note=note)
        self.arcs.set_data(None, [], [], query=0, mode="query", threshold=0.1, note=note)
        self.band.set_data(None, [], [], note=note)
        self.band_scroll.fit_band()
        self.band_caption.setText("")
        self.update_stale_note()
        self.bar.set_prediction(None, misfire=False)
        self._mask_enabled()
        for panel in (self.mosaic_panel, self.closeup_panel, self.arcs_panel, self.band_panel):
            panel.set_subtitle("")
        self.colour_key.set_text("Colour:", "0", "max")
        self.meter_key.set_text("Bar:", "", "")
        self.band_key.set_text("Shade:", "0", "max")

    def apply_analysis(self, analysis: SentenceAnalysis, full: Prediction | None = None) -> None:
        """Show a fresh analysis in every view (GUI thread).

        ``full`` is the full model's prediction for the same text, when the
        analysis ran with heads switched off (kept beside the masked one).
        """
        if full is not None or not analysis.mask:
            self.state.set_full_prediction(analysis.text, full or analysis.prediction)
        self.grid.forget_offers()
        self.state.set_analysis(analysis)
        self.refresh()
        self.update_stale_note()

    # -- out-of-date views -------------------------------------------------------------------------
    def is_stale(self) -> bool:
        """True when the views show an analysis of another text than the one in the entry."""
        a = self.state.analysis
        text = self.bar.entry.text()
        return a is not None and bool(text.strip()) and a.text != text

    def update_stale_note(self) -> None:
        """Show or hide the note that says the views belong to an earlier text."""
        if not self.is_stale():
            self.stale_note.hide()
            return
        old = self.state.analysis.text
        shown = old if len(old) <= 60 else old[:57] + "\u2026"
        why = self.waiting_reason or "analysing the new text\u2026"
        self.stale_note.setText(
            f"<b>Out of date:</b> the views below show \u2018{html.escape(shown)}\u2019 \u2014 {why}"
        )
        self._style_stale_note()
        self._place_stale_note()
        self.stale_note.show()
        self.stale_note.raise_()

    def _style_stale_note(self) -> None:
        colour = dim_text(self.palette(), 0.7).name()  # a notice, not the selection: never the accent
        self.stale_note.setStyleSheet(
            f"QLabel {{ border: 1px solid {colour}; border-left: 5px solid {colour}; padding: 4px 8px; "
            "background-color: palette(window); }"
        )

    def _place_stale_note(self) -> None:
        area = self.views.geometry()
        width = min(area.width() - 40, 720)
        height = self.stale_note.heightForWidth(width) + 10  # + the style sheet's padding and borders
        self.stale_note.setGeometry(area.x() + (area.width() - width) // 2, area.y() + 28, width, height)

    def resizeEvent(self, event: object) -> None:
        super().resizeEvent(event)
        if self.stale_note.isVisible():
            self._place_stale_note()

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
        if self.pair.ready:
            self.second.set_lines(*self.pair.strip_lines(label))

    def _grid_hover(self, layer: int, head: int) -> None:
        if layer >= 0 and self.state.ready:
            values = self._summary_a(layer, head).replace("\n", "  \u00b7  ")
            self.status.emit(values)

    def _grid_b_hover(self, layer: int, head: int) -> None:
        if layer >= 0 and self.pair.ready:
            self.status.emit(self._summary_b(layer, head).replace("\n", "  \u00b7  "))

    def _summary_a(self, layer: int, head: int) -> str:
        text = self.state.head_summary(layer, head)
        return f"{text}\n{self.pair.hover_a(layer, head)}" if self.pair.ready else text

    def _summary_b(self, layer: int, head: int) -> str:
        return self.pair.hover_b(layer, head, self.state.options.metric)

    # -- the second model (B) ----------------------------------------------------------------------
    def set_second_model(self, name_a: str | None, name_b: str | None) -> None:
        """Show (``name_b``) or hide (None) the second model's strip and mosaic; forget the old comparison."""
        self.pair.set_models(name_a or "", name_b or "")
        self._grid_b_input = None
        on = bool(name_b)
        self.second.setVisible(on)
        self.grid_b.setVisible(on)
        self._mosaic_row.setStretch(1, 1 if on else 0)
        for caption in self.grid_captions:
            caption.setVisible(on)
        self.grid.set_overlay(None)
        self.grid_b.set_overlay(None)
        self.wedge_key.setVisible(on)
        self.bar.encoder_note.setVisible(not on and not self._a_predicts)
        if on:
            self.grid_captions[0].setText(f"<b>A</b> \u00b7 {name_a}")
            self.grid_captions[1].setText(f"<b>B</b> \u00b7 {name_b}")
            self.second.set_lines(f"B \u00b7 {name_b}: opening\u2026", "")
            self.grid_b.clear(f"{name_b}: waiting for the sentence")

    def second_failed(self, text: str) -> None:
        """The comparison of the current sentence failed: say so in B's places."""
        self.pair.set_comparison(None)
        self.second.set_lines(f"B \u00b7 {self.pair.name_b}: no comparison", text)
        self.grid_b.clear(text)
        self.grid.set_overlay(None)

    def _refresh_second(self) -> None:
        pair, st = self.pair, self.state
        if not pair.active:
            return
        if not pair.ready:
            self.grid.set_overlay(None)
            return
        heads = pair.head_matrices_b(st.view(), not st.options.words and not st.options.hide_special)
        metric = pair.comparison.b.head_metrics.get(st.options.metric)
        key = (id(heads), id(pair.comparison), st.options.metric, st.options.scale)
        if key != self._grid_b_input:
            lo, hi = metric_range(st.options.metric, metric)
            self.grid_b.set_data(
                heads, metric, (lo, hi), per_head=st.options.scale == "own", summary=self._summary_b
            )
            self._grid_b_input = key
        a = st.analysis
        peak = pair.peak()
        self.grid.set_overlay(pair.change_a(a.num_layers, a.num_heads), peak)
        self.grid_b.set_overlay(pair.change_b(), peak)
        first, second = pair.strip_lines(st.expected)
        self.second.set_lines(first, second)
        self.wedge_key.setText(
            f"\u25e5 Wedge area = the head's change from A to B (largest {peak:.3f} bits, JS divergence)"
        )

    # -- pushing state into the views --------------------------------------------------------------
    def balance_mosaic(self) -> None:
        """Give the mosaic the width its cells use at the current height (once per model shape).

        Up to an even split, the mosaic takes the narrowest width that gives its cells
        their largest size (a mosaic bound by the height needs no more: the rest is better
        spent on the close-up); up to 60% of the row when its cells would otherwise be
        smaller than ``READABLE_CELL``. Never less than 40%, or than its controls need.
        """
        a = self.state.analysis
        if a is None or self._balanced_for == (a.num_layers, a.num_heads):
            return
        total = sum(self.top_split.sizes())
        if total <= 0 or self.grid.height() <= 0:
            return
        self._balanced_for = (a.num_layers, a.num_heads)
        grids = [g for g in (self.grid, self.grid_b) if g.isVisible()] or [self.grid]
        extra = self.mosaic_panel.width() - sum(g.width() for g in grids)
        shape = (self.grid.height(), a.num_layers, a.num_heads)

        def width_at_most(share: float) -> tuple[int, int]:
            """(panel width, cell size) of the mosaic given at most ``share`` of the row."""
            per_grid = int((share * total - extra) / len(grids))
            grid_w = self.grid.width_for_height(*shape, per_grid)
            return grid_w * len(grids) + extra, self.grid.layout_for(grid_w, *shape).cell

        needed, cell = width_at_most(0.5)
        if cell < READABLE_CELL:
            needed = width_at_most(0.6)[0]
        sub = self.mosaic_panel.subtitle
        header = (
            self.mosaic_panel.minimumSizeHint().width()
            + sub.sizeHint().width()
            - sub.minimumSizeHint().width()
        )
        width = int(min(max(needed, header, total * 0.4), 0.6 * total))
        self.top_split.setSizes([width, total - width])

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
                heads,
                metric,
                (lo, hi),
                per_head=st.options.scale == "own",
                summary=self._summary_a,
                windows=st.analysis.layer_windows(),
            )
            self._grid_input = key
            self.colour_key.set_text("Colour:", "0", "each head's max" if st.options.scale == "own" else "1")
            if st.metric_hidden():
                self.meter_key.set_text("Bar: empty (special tokens hidden)", "", "")
                tip = f"{st.metric_label()} is not shown while special tokens are hidden"
            else:
                self.meter_key.set_text("Bar:", fmt.number(lo), fmt.number(hi))
                tip = f"Bar under each cell: {st.metric_label()}, {fmt.number(lo)} to {fmt.number(hi)}"
            self.meter_key.setToolTip(tip)
        a = st.analysis
        self.grid.set_off(set(st.mask.heads))
        self.mosaic_panel.set_subtitle(f"{a.num_layers}\u00d7{a.num_heads} \u00b7 {st.axis_text()}")
        self._mask_enabled()
        rel = st.relevance()
        self.band.set_data(
            rel.values, rel.labels, rel.special, rel.note, vmax=rel.vmax, excluded=rel.excluded
        )
        self.band_scroll.fit_band()
        self._fit_band_panel()
        self.band_panel.set_subtitle(f"{rel.source} \u00b7 {rel.note}")
        top = "max" if rel.values is None else fmt.weight(rel.vmax)
        left_out = (
            "" if rel.excluded is None else f" (\u2018{rel.labels[rel.excluded]}\u2019 itself left out)"
        )
        self.band_key.set_text("Shade:", "0", top + left_out)
        self.band_caption.setText(f"{rel.source}: {rel.meaning}")
        self.band_caption.setToolTip(self.band_caption.text())
        self._refresh_prediction()
        self._refresh_second()
        QTimer.singleShot(0, self.balance_mosaic)  # once the new subtitle is laid out
        self.refresh_selection()
        self._request_flow()
        self._prepare_views()

    def refresh_selection(self) -> None:
        """Push the selected head and query into the views that depend on them."""
        st = self.state
        if not st.ready:
            return
        self.grid.set_selection(st.layer, st.head)
        if self.pair.ready:
            m = self.pair.comparison.matching
            self.grid_b.set_selection(min(st.layer, m.layers_b - 1), min(st.head, m.heads_b - 1))
        focus = st.focus()
        query = st.query_index()
        self.closeup.set_data(focus.matrix, focus.labels, focus.special, query=query, note=focus.note)
        # With a second model open, the close-up and the arcs show model A (the mosaics show both).
        model = "A \u00b7 " if self.pair.active else ""
        self.closeup_panel.set_subtitle(
            f"{model}{focus.where}" + (f" \u00b7 {focus.note}" if focus.note else "")
        )
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
        self.arcs_panel.set_subtitle(f"{model}{focus.view} \u00b7 {focus.where} \u00b7 {query_text}")
        self.zoom_label.setText(self.closeup.zoom_text())
        QTimer.singleShot(0, self.show_query_arc)
        self.views_updated.emit()

    def show_query_arc(self) -> None:
        """Scroll the token arcs sideways so that the query token is in view."""
        boxes = self.arcs.boxes()
        query = self.arcs.query
        if 0 <= query < len(boxes):
            box = boxes[query]
            margin = int(min(box.width() / 2 + 60, self.arcs_scroll.viewport().width() / 3))
            self.arcs_scroll.ensureVisible(int(box.center().x()), int(box.center().y()), margin, 0)

    def _refresh_prediction(self) -> None:
        a = self.state.analysis
        self.bar.set_prediction(
            a.prediction if a else None,
            misfire=self.state.is_misfire(),
            full=self.state.known_full_prediction(a.text) if a else None,
            mask_text=self.state.mask_text(),
        )

    def _request_flow(self) -> None:
        analysis = self.state.analysis
        if not self.state.needs_flow() or self._flow_for is analysis:
            return
        self._flow_for = analysis

        def done(flow: object) -> None:
            if self.state.set_flow(analysis, flow):
                self.refresh()

        self._runner.submit("flow", analysis.flow, done, self.status.emit)

    def _prepare_views(self) -> None:
        """In the background, get the views one switch away (words, special tokens) ready to show.

        Their matrices and mosaic cells are computed off the GUI thread after the current
        views are painted, so switching costs a repaint even at 512 tokens.
        """
        st = self.state
        geo = self.grid.grid_geometry()
        keys = st.views_to_prepare()
        if not keys or geo is None:
            return
        analysis, cell, per_head = st.analysis, geo.cell, st.options.scale == "own"

        def work() -> list[tuple]:
            out = []
            for key in keys:
                view, matrices = view_matrices(analysis, *key)
                out.append((key, view, matrices, head_codes(matrices, cell, per_head=per_head)))
            return out

        def done(results: object) -> None:
            for key, view, matrices, codes in results:
                if st.store_view(analysis, key, view, matrices):
                    self.grid.offer_codes(matrices, cell, per_head, codes)

        self._runner.submit("views", work, done, lambda _text: None)

    def view_widgets(self) -> list[QWidget]:
        return [self.grid, self.closeup, self.arcs, self.band]
