"""The corpus page: a whole labelled evaluation set at once.

Top: the data file (CSV or JSON Lines), its field names and what to do with bad
rows, the run's options, Run / Cancel with one progress bar per phase.
Then what was read (bad rows by line number, labels the model does not know).
Two tabs of results: *Evaluation* (accuracy, macro-F1, per-intent scores, the
confusion matrix, the misfires most confident first: a click opens one in the
sentence view with its expected label, its Explain button on the Explain page)
and *Heads* (importance per head, head-by-head similarity with the
near-duplicate groups, and the pruning curve with its caution and the chosen set
of heads to remove).

The run goes through :func:`ui.corpus.state.compute_corpus` on the window's
:class:`ui.widgets.worker.JobRunner` ("corpus" channel), on a private copy of the
model when memory allows (so the sentence page keeps analysing during the run),
otherwise holding ``MODEL_LOCK`` for the whole run (and the sentence page says it
waits). One progress bar per phase counts utterances (scan, importance) or pruning
steps and estimates the time left; each phase's results appear as soon as it ends.
Cancel sets an event that :func:`inspector.corpus.run.run_corpus` polls before
every batch, so the run stops within one batch; what finished stays on the page and
the status line says which phases were kept.
"""

from __future__ import annotations

import html
from pathlib import Path

from PySide6.QtCore import QSettings, Qt, Signal
from PySide6.QtGui import QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QFileDialog,
    QFrame,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QPushButton,
    QScrollArea,
    QSizePolicy,
    QSpinBox,
    QSplitter,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from inspector import formatting as fmt
from inspector.checkpoint.copies import copy_fits, private_copy
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.corpus.pruning import CAUTION, PRUNING_ORDERS
from inspector.corpus.report import write_report
from inspector.corpus.run import PHASES, CorpusReport
from inspector.corpus.settings import CorpusSettings
from inspector.errors import HeadcountError
from inspector.formatting import count
from ui.corpus.export import EXPORT_KINDS, build_export
from ui.corpus.pruning_plot import PruningPlot
from ui.corpus.state import (
    PHASE_TITLES,
    PHASE_WORDS,
    CorpusRequest,
    MaskChoice,
    MisfireFilter,
    cancel_text,
    choose_by_count,
    choose_by_tolerance,
    choose_point,
    compute_corpus,
    confusion_shares,
    data_report_html,
    default_data_file,
    find_on_curves,
    groups_html,
    head_names,
    intent_rows,
    mask_text,
    pair_rows,
    phase_text,
    planned_phases,
    provenance,
    summary_html,
    with_choice,
    with_threshold,
)
from ui.widgets.export import ExportController, ask_folder, last_folder, remember_folder, slug, write_folder
from ui.widgets.legend import ColourKey
from ui.widgets.mask_files import MaskFiles
from ui.widgets.matrix_map import MatrixMap
from ui.widgets.panel import Panel, buddy_label, column, control_grid
from ui.widgets.run_controls import CANCELLED, FAILED, RunControls, RunHooks
from ui.widgets.tables import make_table as _table
from ui.widgets.tables import table_cell as _cell
from ui.widgets.worker import MODEL_LOCK, JobRunner

CHANNEL = "corpus"
BAD_ROW_CHOICES = {"skip": "skip them and list them", "fail": "stop: the file must be clean"}
MISFIRE_HEADER = ("Line", "Utterance", "Expected", "Predicted", "Confidence", "")
EXPLAIN_COLUMN = 5


SORT_ROLE = Qt.ItemDataRole.UserRole + 1
"""Item data the misfire table sorts by (numbers as numbers, text case-folded)."""
INDEX_ROLE = Qt.ItemDataRole.UserRole
"""Item data of a misfire row's first cell: the misfire's index in the report (rows move when sorted)."""


class _SortItem(QTableWidgetItem):
    """A table item that sorts by its SORT_ROLE value."""

    def __lt__(self, other: QTableWidgetItem) -> bool:
        a, b = self.data(SORT_ROLE), other.data(SORT_ROLE)
        if a is None or b is None:
            return super().__lt__(other)
        return a < b


def _sort_cell(text: str, align_right: bool = False, tip: str = "", key: object = None) -> QTableWidgetItem:
    """A table cell that sorts by ``key`` (default: its text, case-folded)."""
    item = _SortItem(text)
    item.setData(SORT_ROLE, key if key is not None else text.casefold())
    if align_right:
        item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    if tip:
        item.setToolTip(tip)
    return item


def _two_over_one(
    tab: QWidget, panels: tuple[QWidget, QWidget, QWidget], widths: list[int], heights: list[int]
):
    """Lay out a tab: two panels side by side above a third, in splitters that never collapse a panel."""
    top = QSplitter(Qt.Orientation.Horizontal, tab)
    top.addWidget(panels[0])
    top.addWidget(panels[1])
    top.setSizes(widths)
    split = QSplitter(Qt.Orientation.Vertical, tab)
    split.addWidget(top)
    split.addWidget(panels[2])
    split.setSizes(heights)
    for s in (top, split):
        s.setChildrenCollapsible(False)
    column(tab, [(split, 1)], margins=0, spacing=0)
    return tab


class CorpusPage(QWidget):
    """Run the corpus analysis on an evaluation set and show what it found."""

    open_sentence = Signal(str, object)
    """text, expected label: show it in the sentence view."""
    explain = Signal(str, object)
    """text, expected label: show it on the Explain page."""
    status = Signal(str)
    error = Signal(str)
    finished = Signal(str)
    """'done', 'cancelled' or 'failed' when a run ends."""
    use_mask = Signal(object)
    """A HeadMask to switch off on the Sentence page."""
    holds_model = Signal(bool)
    """True while a run uses the window's own model (no room for a private copy): analyses wait."""

    def __init__(
        self,
        runner: JobRunner,
        settings: QSettings,
        parent: QWidget | None = None,
        exporter: ExportController | None = None,
    ) -> None:
        super().__init__(parent)
        self.runner, self.settings, self.exporter = runner, settings, exporter
        self.filter = MisfireFilter()
        self.lm: LoadedModel | None = None
        self.report: CorpusReport | None = None
        self.loaded_mask: HeadMask | None = None
        """A mask read from a file that is no point of the curves (None: the chosen point is the mask)."""
        self.masks = MaskFiles(runner, settings, self)
        self.masks.status.connect(self.status.emit)
        self.masks.error.connect(self.error.emit)
        self._default_file = ""
        self._waiting: dict[str, str] = {}
        """Phase -> what its views say while its results are not in the report (running, cancelled)."""

        self.tabs = QTabWidget(self)
        self.tabs.addTab(self._evaluation_tab(), "&Evaluation")
        self.misfire_tab = self._misfire_tab()
        self.tabs.addTab(self.misfire_tab, "&Misfires")
        self.tabs.addTab(self._heads_tab(), "&Heads and pruning")
        self.data_note = QLabel("", self)
        self.data_note.setWordWrap(True)
        self.data_note.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.data_note.setAccessibleName("What was read")
        self.data_note.setContentsMargins(8, 0, 8, 0)
        column(self, [self._request_box(), self.data_note, (self.tabs, 1)], margins=(6, 4, 6, 4), spacing=6)
        export = QShortcut(QKeySequence("Ctrl+Shift+R"), self)
        export.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        export.activated.connect(self.export_folder)
        self._set_running(False)
        self.clear("Open a sentence classifier, choose its evaluation set and press Run")

    # -- building ----------------------------------------------------------------------------------
    def _request_box(self) -> QWidget:
        box = QWidget(self)
        self.path_edit = QLineEdit(box)
        self.path_edit.setAccessibleName("Data file")
        self.path_edit.setPlaceholderText("A labelled evaluation set: .csv with a header row, or .jsonl")
        self.path_edit.setClearButtonEnabled(True)
        self.path_edit.returnPressed.connect(self.run)
        browse = QPushButton("&Browse\u2026", box)
        browse.clicked.connect(self.choose_file)
        self.text_field = QLineEdit("text", box)
        self.text_field.setAccessibleName("Text field")
        self.label_field = QLineEdit("label", box)
        self.label_field.setAccessibleName("Label field")
        for edit in (self.text_field, self.label_field):
            edit.setMaximumWidth(110)
            edit.setToolTip("Column (CSV) or key (JSONL) name")
        self.bad_rows_box = QComboBox(box)
        self.bad_rows_box.setAccessibleName("Bad rows")
        for key, text in BAD_ROW_CHOICES.items():
            self.bad_rows_box.addItem(text, key)
        self.importance_check = QCheckBox("Head &importance", box)
        self.importance_check.setChecked(True)
        self.importance_check.setToolTip(
            "Gradient pass: how much the loss reacts to each head (Michel et al. 2019)"
        )
        self.importance_check.toggled.connect(self._importance_toggled)
        self.order_checks: dict[str, QCheckBox] = {}
        defaults = CorpusSettings()
        for name in PRUNING_ORDERS:
            check = QCheckBox(name, box)
            check.setChecked(name in defaults.orders)
            check.setToolTip(f"Simulate removing heads in the \u2018{name}\u2019 order")
            self.order_checks[name] = check
        self.every = QSpinBox(box)
        self.every.setRange(0, 64)
        self.every.setSpecialValueText("chosen steps")  # 0: around the tolerance, a few passes
        self.every.setValue(defaults.prune_every or 0)
        self.every.setToolTip(
            f"'chosen steps': a few coarse steps for every order and finer ones where the mask order "
            f"crosses the tolerance (at most {defaults.prune_passes} passes over the set); "
            "a number: every that many heads (one pass each)"
        )
        self.every.setAccessibleName("Measure accuracy every")
        self.every.valueChanged.connect(self._units)
        self._units()
        self.controls = RunControls(
            self.runner,
            CHANNEL,
            box,
            run_text="&Run",
            titles=PHASE_TITLES,
            descriptions=PHASES,
            step_text=phase_text,
            ready=self._usable,
        )
        self.controls.result.connect(self._partial)
        self.controls.held.connect(self.holds_model.emit)
        self.controls.runner.busy_changed.connect(self._busy_changed)
        self.run_button, self.cancel_button = self.controls.run_button, self.controls.cancel_button
        self.phase_bars, self.phase_label = self.controls.phase_bars, self.controls.phase_label
        self.run_button.setDefault(True)
        self.run_button.clicked.connect(self.run)
        self.export_button = QPushButton("E&xport run folder\u2026", box)
        self.export_button.setToolTip(
            "Write summary.json, heads.csv, similar_pairs.csv, pruning.csv, prune_mask.json and the figures "
            "into a folder \u2014 Ctrl+Shift+R (Ctrl+E exports the view that has the focus)"
        )
        self.export_button.clicked.connect(self.export_folder)
        self.review_button = QPushButton("Review re&port\u2026", box)
        self.review_button.setToolTip(
            "One printable PDF (or one self-contained HTML file) for the review: scores, confusion matrix, "
            "misfires by confusable pair, explanations of the top misfires, heads, pruning, definitions"
        )
        self.review_button.clicked.connect(self.choose_review_file)

        grid = control_grid(box)

        def buddy(text: str, widget: QWidget) -> QLabel:
            return buddy_label(text, widget, box)

        first = QHBoxLayout()
        first.setSpacing(8)
        for item in (
            buddy("&Data file:", self.path_edit),
            (self.path_edit, 1),
            browse,
            buddy("&Text field:", self.text_field),
            self.text_field,
            buddy("&Label field:", self.label_field),
            self.label_field,
            buddy("Bad ro&ws:", self.bad_rows_box),
            self.bad_rows_box,
        ):
            widget, stretch = item if isinstance(item, tuple) else (item, 0)
            first.addWidget(widget, stretch)
        second = QHBoxLayout()
        second.setSpacing(8)
        second.addWidget(self.importance_check)
        second.addSpacing(10)
        second.addWidget(QLabel("Pruning orders:", box))
        for check in self.order_checks.values():
            second.addWidget(check)
        second.addSpacing(10)
        second.addWidget(buddy("Measure e&very:", self.every))
        second.addWidget(self.every)
        second.addStretch(1)
        second.addWidget(self.export_button)
        third = QHBoxLayout()
        third.setSpacing(8)
        self.controls.add_to(third)
        third.addWidget(self.review_button)
        grid.addLayout(first, 0, 0)
        grid.addLayout(second, 1, 0)
        grid.addLayout(third, 2, 0)
        grid.addWidget(self.phase_label, 3, 0)
        return box

    def _units(self, _value: object = None) -> None:
        """The spin boxes' units agree with their numbers (``1.0 point``, ``2 heads``), as the formatter says."""
        for box, shown in (
            (self.tolerance, fmt.points(self.tolerance.value() / 100)),
            (self.every, fmt.count(self.every.value(), "head")),
        ):
            box.setSuffix(" " + shown.split(" ", 1)[1])

    def _evaluation_tab(self) -> QWidget:
        tab = QWidget(self)
        self.summary = QLabel("", tab)
        self.summary.setAccessibleName("Summary")
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.intents = _table(tab, ("Intent", "Precision", "Recall", "F1", "Support"), "Per-intent scores")
        self.intents.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        intent_body = QWidget(tab)
        column(intent_body, [self.summary, (self.intents, 1)], margins=(8, 0, 8, 4), spacing=6)
        intent_panel = Panel("Scores", intent_body, tab)
        self.confusion = MatrixMap("Confusion matrix", tab)
        self.confusion.cell_clicked.connect(self._confusion_clicked)
        self.confusion_panel = Panel("Confusion matrix", self.confusion, tab)
        self.confusion_panel.subtitle.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.confusion_panel.set_subtitle(
            "rows: expected \u00b7 columns: predicted \u00b7 framed: correct \u00b7 click a cell: its misfires"
        )
        self._key(
            self.confusion_panel,
            "Share of the expected label's utterances:",
            fmt.percent(0.0),
            fmt.percent(1.0),
        )
        split = QSplitter(Qt.Orientation.Horizontal, tab)
        split.addWidget(intent_panel)
        split.addWidget(self.confusion_panel)
        split.setSizes([430, 820])
        split.setChildrenCollapsible(False)
        column(tab, [(split, 1)], margins=0, spacing=0)
        return tab

    def _misfire_tab(self) -> QWidget:
        tab = QWidget(self)
        self.pairs = _table(tab, ("Expected \u2192 predicted", "Misfires", "Top"), "Confusable pairs")
        self.pairs.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        for col in (1, 2):
            self.pairs.horizontalHeader().setSectionResizeMode(col, QHeaderView.ResizeMode.ResizeToContents)
        self.pairs.cellClicked.connect(lambda row, _c: self._pair_clicked(row))
        self.pairs.horizontalHeaderItem(2).setToolTip("Confidence of the pair's most confident misfire")
        pair_panel = Panel("Confusable pairs", self.pairs, tab)
        pair_panel.set_subtitle("click one: its misfires")

        self.misfires = _table(tab, MISFIRE_HEADER, "Misfires")
        header = self.misfires.horizontalHeader()
        header.setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        for col in (0, 2, 3, 4, EXPLAIN_COLUMN):
            header.setSectionResizeMode(col, QHeaderView.ResizeMode.ResizeToContents)
        self.misfires.setSortingEnabled(True)
        self.misfires.cellClicked.connect(self._misfire_clicked)
        for key in ("Return", "Enter"):
            enter = QShortcut(QKeySequence(key), self.misfires)
            enter.setContext(Qt.ShortcutContext.WidgetShortcut)
            enter.activated.connect(lambda: self.open_misfire(self.misfires.currentRow()))
            explain = QShortcut(QKeySequence(f"Ctrl+{key}"), self.misfires)
            explain.setContext(Qt.ShortcutContext.WidgetShortcut)
            explain.activated.connect(lambda: self.explain_misfire(self.misfires.currentRow()))
        self.search = QLineEdit(tab)
        self.search.setAccessibleName("Search the misfires")
        self.search.setPlaceholderText("Search words, labels or a line number")
        self.search.setClearButtonEnabled(True)
        self.search.textChanged.connect(self._search_changed)
        self.filter_label = QLabel("", tab)
        self.filter_label.setAccessibleName("Misfire filter")
        self.filter_label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.filter_label.setMinimumWidth(120)
        self.show_all_button = QPushButton("Show &all", tab)
        self.show_all_button.setToolTip("Clear the search and the pair filter")
        self.show_all_button.clicked.connect(self.clear_filter)
        bar = QWidget(tab)
        row = QHBoxLayout(bar)
        row.setContentsMargins(8, 0, 8, 0)
        row.setSpacing(8)
        row.addWidget(buddy_label("&Search:", self.search, bar))
        row.addWidget(self.search, 2)
        row.addWidget(self.filter_label, 3)
        row.addWidget(self.show_all_button)
        body = QWidget(tab)
        column(body, [bar, (self.misfires, 1)], margins=0, spacing=4)
        self.misfire_panel = Panel("Misfires", body, tab)
        self.misfire_panel.set_subtitle(
            "click a header to sort \u00b7 click (or Enter) opens one in the sentence view \u00b7 "
            "Explain (or Ctrl+Enter) on the Explain page"
        )
        for panel in (pair_panel, self.misfire_panel):
            panel.subtitle.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
            panel.subtitle.setMinimumWidth(40)
        split = QSplitter(Qt.Orientation.Horizontal, tab)
        split.addWidget(pair_panel)
        split.addWidget(self.misfire_panel)
        split.setSizes([360, 900])
        split.setChildrenCollapsible(False)
        column(tab, [(split, 1)], margins=0, spacing=0)
        return tab

    def _heads_tab(self) -> QWidget:
        tab = QWidget(self)
        self.importance_map = MatrixMap("Head importance", tab)
        importance_panel = Panel("Head importance", self.importance_map, tab)
        importance_panel.set_subtitle(
            "layers down, heads across \u00b7 |d loss / d gate|, l2-normalised per layer"
        )
        self.importance_panel = importance_panel
        self._key(importance_panel, "Importance:", "0", "largest head")
        self.similarity = MatrixMap("Head similarity", tab)
        self.groups = QLabel("", tab)
        self.groups.setTextFormat(Qt.TextFormat.RichText)
        self.groups.setWordWrap(True)
        self.groups.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.groups.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.groups.setMinimumWidth(170)
        sim_body = QWidget(tab)
        row = QHBoxLayout(sim_body)
        row.setContentsMargins(4, 0, 8, 4)
        row.addWidget(self.similarity, 3)
        self.similarity_panel = Panel("Head-by-head similarity", sim_body, tab)
        self.similarity_panel.set_subtitle(
            "1 \u2212 mean Jensen-Shannon divergence (bits) \u00b7 framed: near-duplicates"
        )

        self._key(self.similarity_panel, "Similarity:", "least similar pair", "identical")
        self.threshold = QDoubleSpinBox(tab)
        self.threshold.setRange(0.0, 1.0)
        self.threshold.setDecimals(3)
        self.threshold.setSingleStep(0.01)
        self.threshold.setValue(CorpusSettings().group_threshold)
        self.threshold.setSuffix(" bits")
        self.threshold.setAccessibleName("Near-duplicate threshold")
        self.threshold.setToolTip(
            "Heads whose mean Jensen-Shannon divergence is at most this many bits form a near-duplicate group; "
            "regrouped at once from the divergences already computed"
        )
        self.threshold.valueChanged.connect(self._threshold_moved)
        group_side = QVBoxLayout()
        group_side.setSpacing(2)
        group_side.addWidget(buddy_label("Near-duplicate &within:", self.threshold, tab))
        group_side.addWidget(self.threshold, 0, Qt.AlignmentFlag.AlignLeft)
        # The groups and the closest pairs scroll when they do not fit (1366 x 768 leaves a few lines).
        self.groups_scroll = QScrollArea(tab)
        self.groups_scroll.setWidget(self.groups)
        self.groups_scroll.setWidgetResizable(True)
        self.groups_scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.groups_scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.groups_scroll.setMinimumWidth(190)
        group_side.addWidget(self.groups_scroll, 1)
        row.addLayout(group_side, 1)

        self.plot = PruningPlot(tab)
        self.plot.point_clicked.connect(self.choose_point)
        self.caution = QLabel(f"<b>Read with care:</b> {html.escape(CAUTION)}", tab)
        self.caution.setWordWrap(True)
        self.caution.setAccessibleName("Pruning caution")
        self.mask_label = QLabel("", tab)
        self.mask_label.setWordWrap(True)
        self.mask_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.save_mask_button = QPushButton("Save prune &mask\u2026", tab)
        self.save_mask_button.setToolTip(
            'Write the chosen set of heads to remove as JSON: {"layer": [head, ...]}'
        )
        self.save_mask_button.clicked.connect(self.choose_mask_file)
        self.load_mask_button = QPushButton("L&oad mask\u2026", tab)
        self.load_mask_button.setToolTip("Read a prune_mask.json and find it on the curves")
        self.load_mask_button.clicked.connect(self.ask_load_mask)
        self.try_mask_button = QPushButton("Try on a &sentence", tab)
        self.try_mask_button.setToolTip("Switch the chosen heads off on the Sentence page")
        self.try_mask_button.clicked.connect(lambda: self.use_mask.emit(self.chosen_mask()))
        self.prune_button = QPushButton("&Write pruned checkpoint\u2026", tab)
        self.prune_button.setToolTip(
            "A copy of the model with the chosen heads' weights zeroed, with PRUNED.md (accuracy before/after)"
        )
        self.prune_button.clicked.connect(self.ask_write_pruned)
        self.tolerance = QDoubleSpinBox(tab)
        self.tolerance.setRange(0.0, 100.0)
        self.tolerance.setDecimals(1)
        self.tolerance.setSingleStep(0.5)
        self.tolerance.setValue(100 * CorpusSettings().max_drop)
        self.tolerance.setAccessibleName("Accuracy tolerance")
        self.tolerance.setToolTip(
            "Choose the most heads whose removal never cost more accuracy than this, in percentage points "
            f"({fmt.points(0.01)} = a tolerance of 0.01 on the command line's --max-drop); after a run it moves "
            "along the curve at once, and the next run starts from it"
        )
        self.tolerance.valueChanged.connect(self._units)
        self.tolerance.valueChanged.connect(self._tolerance_moved)
        self.order_box = QComboBox(tab)
        self.order_box.setAccessibleName("Removal order to choose from")
        self.order_box.currentIndexChanged.connect(lambda _i: self._tolerance_moved())
        self.count_box = QSpinBox(tab)
        self.count_box.setAccessibleName("Heads switched off")
        self.count_box.setToolTip("Choose a number of heads: the nearest measured point at or below it")
        self.count_box.valueChanged.connect(self._count_moved)
        choose = QHBoxLayout()
        choose.setSpacing(6)
        for text, widget in (
            ("O&rder:", self.order_box),
            ("T&olerance:", self.tolerance),
            ("or hea&ds:", self.count_box),
        ):
            choose.addWidget(buddy_label(text, widget, tab))
            choose.addWidget(widget)
        choose.addStretch(1)
        buttons = QHBoxLayout()
        buttons.setSpacing(6)
        for button in (self.save_mask_button, self.load_mask_button, self.try_mask_button):
            buttons.addWidget(button)
        buttons.addStretch(1)
        plot_body = QWidget(tab)
        side = QVBoxLayout()
        side.setSpacing(6)
        side.addWidget(self.caution)
        side.addLayout(choose)
        side.addWidget(self.mask_label)
        side.addLayout(buttons)
        side.addWidget(self.prune_button, 0, Qt.AlignmentFlag.AlignLeft)
        side.addStretch(1)
        prow = QHBoxLayout(plot_body)
        prow.setContentsMargins(8, 0, 8, 4)
        prow.addWidget(self.plot, 3)
        prow.addLayout(side, 2)
        self.pruning_panel = Panel("Pruning: accuracy against heads switched off", plot_body, tab)
        self.pruning_panel.set_subtitle("no retraining")

        return _two_over_one(
            tab, (importance_panel, self.similarity_panel, self.pruning_panel), [460, 760], [400, 320]
        )

    def _key(self, panel: Panel, caption: str, low: str, high: str) -> ColourKey:
        key = ColourKey(panel)
        key.set_text(caption, low, high)
        panel.footer.addWidget(key)
        return key

    # -- model and request -------------------------------------------------------------------------
    def set_model(self, lm: LoadedModel) -> None:
        """A new model: stop a running analysis, forget the old results, offer the sample set if it fits."""
        was_running = self.is_running()
        self.stop()
        self.runner.cancel(CHANNEL)
        self.phase_label.setText("Stopped: another model was opened" if was_running else "")
        self.lm = lm
        suggested = default_data_file(lm)
        if not self.path_edit.text().strip() or self.path_edit.text() == self._default_file:
            self.path_edit.setText(suggested)
        self._default_file = suggested
        self.data_note.setText("")
        if not lm.has_prediction or not lm.labels:
            self.clear(
                f"{lm.name} is a {lm.task}: the corpus analysis needs a sentence classifier with labels"
            )
        else:
            self.clear(f"{lm.name}: choose its evaluation set and press Run")
        self._set_running(False)

    def request(self) -> CorpusRequest:
        """The run the controls describe now."""
        orders = tuple(name for name, check in self.order_checks.items() if check.isChecked())
        importance = self.importance_check.isChecked()
        settings = CorpusSettings(
            importance=importance,
            orders=orders,
            max_drop=self.tolerance.value() / 100,
            prune_every=self.every.value() or None,
        )
        return CorpusRequest(
            path=self.path_edit.text().strip(),
            text_field=self.text_field.text().strip() or "text",
            label_field=self.label_field.text().strip() or "label",
            on_bad_row=self.bad_rows_box.currentData(),
            settings=settings,
        )

    def _importance_toggled(self, on: bool) -> None:
        check = self.order_checks["importance"]
        check.setEnabled(on)
        if not on:
            check.setChecked(False)

    def choose_file(self) -> None:
        start = self.path_edit.text() or str(last_folder(self.settings))
        path, _ = QFileDialog.getOpenFileName(
            self,
            "Choose a labelled evaluation set",
            start,
            "Labelled sets (*.csv *.jsonl *.ndjson);;All files (*)",
        )
        if path:
            remember_folder(self.settings, Path(path))
            self.path_edit.setText(path)

    # -- running -----------------------------------------------------------------------------------
    def is_running(self) -> bool:
        return self.controls.is_running()

    def _usable(self) -> bool:
        return self.lm is not None and self.lm.has_prediction and bool(self.lm.labels)

    def run(self) -> None:
        """Start a corpus run in the background (ignored while one runs)."""
        lm = self.lm
        if self.is_running():
            return
        if lm is None:
            self.error.emit("Open a model first (File \u203a Open model folder, Ctrl+O)")
            return
        request = self.request()
        if not request.path:
            self.error.emit(
                "Choose a data file for the corpus analysis (a .csv or .jsonl with text and label)"
            )
            return

        def compute(model: LoadedModel, hooks: RunHooks) -> object:
            return compute_corpus(
                model,
                request,
                should_stop=hooks.should_stop,
                on_phase=hooks.on_phase,
                on_step=hooks.on_step,
                on_result=hooks.on_result,
            )

        def job(hooks: RunHooks) -> object:
            with MODEL_LOCK:  # nothing else runs the model while it is copied
                own = private_copy(lm) if copy_fits(lm) else None
            if own is not None:
                return compute(own, hooks)
            hooks.on_held(True)
            with MODEL_LOCK:
                return compute(lm, hooks)

        if self.report is None:
            self.clear(
                f"Running on {Path(request.path).name}: the evaluation appears here as soon as the scan ends"
            )
        self.controls.start(
            job,
            lambda result: self._done(lm, result),
            self._failed,
            planned_phases(request.settings),
            f"Reading {Path(request.path).name}\u2026",
        )
        self._set_running(True)

    def cancel(self) -> None:
        """Ask the running analysis to stop before its next batch; the results shown stay."""
        self.controls.cancel()

    def stop(self) -> None:
        """Stop a running analysis (model change, window closing)."""
        self.controls.stop()

    def _partial(self, phase: str, report: object) -> None:
        """A phase ended: show everything found so far (the later phases say they are still running)."""
        if not isinstance(report, CorpusReport):
            return
        self.show_report(
            report,
            {p: f"{PHASE_WORDS[p].capitalize()}: still running\u2026" for p in self.controls.pending()},
        )

    def _done(self, lm: LoadedModel, result: object) -> None:
        self.holds_model.emit(False)
        if lm is not self.lm:
            return
        if result == CANCELLED:
            finished = self.controls.finished
            had_previous = self.report is not None and not finished
            self.phase_label.setText(cancel_text(finished, self.controls.current, had_previous))
            self.controls.mark_cancelled()
            if finished and self.report is not None:
                note = "{}: not finished, the run was cancelled"
                self.show_report(
                    self.report,
                    {p: note.format(PHASE_WORDS[p].capitalize()) for p in self.controls.pending()},
                )
            self.status.emit("Corpus run cancelled")
            self.finished.emit("cancelled")
            return
        assert isinstance(result, CorpusReport)
        self.show_report(result)
        self.phase_label.setText(f"Done: {fmt.count(len(result.data), 'utterance')}")
        self.status.emit(f"Corpus analysis of {Path(result.data.path).name} done")
        self.finished.emit("done")

    def _failed(self, text: str) -> None:
        self.holds_model.emit(False)
        self.phase_label.setText(FAILED)
        self.data_note.setText(f"<b>Could not run:</b> {html.escape(text)}")
        self.error.emit(f"Corpus analysis: {text}")
        self.finished.emit("failed")

    def _busy_changed(self, channel: str, busy: bool) -> None:
        if channel == CHANNEL:
            self._set_running(busy)

    def _set_running(self, running: bool) -> None:
        self.controls.refresh(running)
        self.export_button.setEnabled(self.report is not None)
        pruned = self.report is not None and self.report.pruning is not None
        self.save_mask_button.setEnabled(pruned)
        self.load_mask_button.setEnabled(pruned)
        has_heads = bool(self.chosen_mask()) if self.report is not None else False
        self.try_mask_button.setEnabled(has_heads)
        self.prune_button.setEnabled(has_heads and not running)
        for box in (self.order_box, self.count_box):
            box.setEnabled(pruned)
        self.review_button.setEnabled(self.report is not None)

    # -- showing -----------------------------------------------------------------------------------
    def clear(self, note: str) -> None:
        self.report = None
        self.summary.setText(note)
        self.intents.setRowCount(0)
        self.misfires.setRowCount(0)
        self.pairs.setRowCount(0)
        self.filter = MisfireFilter()
        self.filter_label.setText("")
        for view in (self.confusion, self.importance_map, self.similarity):
            view.set_data(None, [], [], note=note)
        self.groups.setText("")
        self.plot.set_result(None, 1, note)
        self.mask_label.setText("")
        self._set_running(self.is_running())

    def show_report(self, report: CorpusReport, waiting: dict[str, str] | None = None) -> None:
        """Fill every view from ``report``; ``waiting`` maps a phase not in it yet to what its views say."""
        self._waiting = dict(waiting or {})
        self.report = report
        self.loaded_mask = None
        self._fill_choosers(report)
        if self.threshold.value() != report.redundancy.threshold:
            self.threshold.blockSignals(True)
            self.threshold.setValue(report.redundancy.threshold)
            self.threshold.blockSignals(False)
        self.data_note.setText(data_report_html(report.data))
        self.summary.setText(summary_html(report))
        self._fill_intents(report)
        self._fill_confusion(report)
        self._fill_misfires(report)
        self._fill_heads(report)
        self._set_running(self.is_running())

    def _fill_intents(self, report: CorpusReport) -> None:
        rows = intent_rows(report)
        self.intents.setRowCount(len(rows))
        for r, cells in enumerate(rows):
            for c, text in enumerate(cells):
                self.intents.setItem(r, c, _cell(text, c > 0))
        self.intents.resizeColumnsToContents()

    def _fill_confusion(self, report: CorpusReport) -> None:
        ev = report.evaluation
        counts = ev.confusion
        shares = confusion_shares(counts)
        texts = [[str(int(v)) if v else "" for v in row] for row in counts]

        def describe(r: int, c: int) -> str:
            what = "correct" if r == c else "misfire"
            return (
                f"expected {ev.labels[r]}, predicted {ev.labels[c]}: {fmt.count(counts[r, c], 'utterance')} "
                f"({fmt.percent(shares[r, c])} of {int(counts[r].sum())} {ev.labels[r]}) \u2014 {what}"
            )

        n = len(ev.labels)
        self.confusion.set_data(
            shares,
            ev.labels,
            ev.labels,
            texts=texts,
            vmax=1.0,
            marked={(i, i) for i in range(n)},
            describe=describe,
        )

    def _fill_misfires(self, report: CorpusReport) -> None:
        misfires = report.evaluation.misfires
        table = self.misfires
        table.setSortingEnabled(False)
        table.setRowCount(len(misfires))
        for r, m in enumerate(misfires):
            cells = (
                _sort_cell(str(m.row), True, "Line in the data file", key=m.row),
                _sort_cell(m.text, tip=m.text),
                _sort_cell(m.expected),
                _sort_cell(m.predicted),
                _sort_cell(
                    fmt.percent(m.confidence),
                    True,
                    f"probability of the predicted label; the expected label got {fmt.percent(m.expected_probability)}",
                    key=m.confidence,
                ),
            )
            cells[0].setData(INDEX_ROLE, r)
            for c, item in enumerate(cells):
                table.setItem(r, c, item)
            button = QPushButton("Explain", table)
            button.setToolTip("Open this utterance on the Explain page with its expected label")
            button.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            button.clicked.connect(lambda _c=False, k=r: self._explain_index(k))
            table.setCellWidget(r, EXPLAIN_COLUMN, button)
        table.setSortingEnabled(True)
        table.sortItems(4, Qt.SortOrder.DescendingOrder)
        rows = pair_rows(report)
        self.pairs.setRowCount(len(rows))
        for r, ((expected, predicted), n, top) in enumerate(rows):
            first = _sort_cell(
                f"{expected} \u2192 {predicted}", tip=f"expected {expected}, predicted {predicted}"
            )
            first.setData(INDEX_ROLE, (expected, predicted))
            self.pairs.setItem(r, 0, first)
            self.pairs.setItem(r, 1, _sort_cell(str(n), True, key=n))
            self.pairs.setItem(r, 2, _sort_cell(fmt.percent(top), True, key=top))
        self.misfire_panel.set_subtitle(
            f"{fmt.count(len(misfires), 'misfire')} in {fmt.count(len(rows), 'confusable pair')} \u00b7 click a "
            "header to sort \u00b7 click (or Enter) opens one in the sentence view \u00b7 Explain (or Ctrl+Enter) "
            "on the Explain page"
        )
        self.apply_filter()

    # -- misfire filter ----------------------------------------------------------------------------
    def set_filter(self, text: str | None = None, pair: tuple[str, str] | None | bool = False) -> None:
        """Change the search text and/or the pair (``pair=None`` clears it; ``False`` keeps it)."""
        self.filter = MisfireFilter(
            self.filter.text if text is None else text, self.filter.pair if pair is False else pair
        )
        if text is not None and self.search.text() != text:
            self.search.blockSignals(True)
            self.search.setText(text)
            self.search.blockSignals(False)
        self.apply_filter()

    def clear_filter(self) -> None:
        self.set_filter("", None)

    def _search_changed(self, text: str) -> None:
        self.set_filter(text=text)

    def apply_filter(self) -> None:
        """Hide the misfire rows the filter rejects; say what is shown."""
        if self.report is None:
            return
        misfires = self.report.evaluation.misfires
        shown = 0
        for row in range(self.misfires.rowCount()):
            k = self._misfire_index(row)
            ok = k is not None and self.filter.matches(misfires[k])
            self.misfires.setRowHidden(row, not ok)
            shown += ok
        self.filter_label.setText(self.filter.describe(shown, len(misfires)))
        self.show_all_button.setEnabled(self.filter != MisfireFilter())
        for row in range(self.pairs.rowCount()):
            item = self.pairs.item(row, 0)
            item.setSelected(item.data(INDEX_ROLE) == self.filter.pair)

    def shown_misfires(self) -> list:
        """The misfires the table shows now, in its order."""
        if self.report is None:
            return []
        out = []
        for row in range(self.misfires.rowCount()):
            k = self._misfire_index(row)
            if k is not None and not self.misfires.isRowHidden(row):
                out.append(self.report.evaluation.misfires[k])
        return out

    def _confusion_clicked(self, row: int, col: int) -> None:
        """A confusion cell: show the misfires of that pair (a diagonal cell: every misfire of the label)."""
        if self.report is None:
            return
        labels = self.report.evaluation.labels
        if row == col:
            self.set_filter(text=labels[row], pair=None)
        else:
            self.set_filter(pair=(labels[row], labels[col]))
        self.tabs.setCurrentWidget(self.misfire_tab)
        self.status.emit(self.filter_label.text())

    def _pair_clicked(self, row: int) -> None:
        item = self.pairs.item(row, 0)
        if item is not None:
            pair = tuple(item.data(INDEX_ROLE))
            self.set_filter(pair=None if pair == self.filter.pair else pair)

    def _fill_heads(self, report: CorpusReport) -> None:
        self._fill_importance(report)
        self._fill_similarity(report)
        self._fill_pruning(report)

    def _fill_importance(self, report: CorpusReport) -> None:
        layers, heads = report.num_layers, report.num_heads
        imp = report.importance
        if imp is None:
            note = self._waiting.get("importance", "Head importance was not computed (switched off)")
            self.importance_map.set_data(None, [], [], note=note)
        else:
            values = imp.normalized
            self.importance_map.set_data(
                values,
                [fmt.layer_name(l) for l in range(layers)],
                [fmt.head_tick(h) for h in range(heads)],
                texts=[[fmt.weight(v, 2) for v in row] for row in values],
                describe=lambda l, h: (
                    f"{fmt.head_name(l, h)}: importance {fmt.weight(values[l, h])} "
                    f"(raw {fmt.number(imp.raw[l, h])}, normalised within the layer)"
                ),
            )

    def _fill_similarity(self, report: CorpusReport) -> None:
        layers, heads = report.num_layers, report.num_heads
        red = report.redundancy
        names = head_names(layers, heads)
        grouped = {l * heads + h for g in red.groups for l, h in g}
        members = {
            (i, j)
            for g in red.groups
            for i in [l * heads + h for l, h in g]
            for j in [l * heads + h for l, h in g]
        }
        self.similarity.set_data(
            red.similarity,
            names,
            names,
            vmin=max(0.0, float(red.similarity.min())),
            vmax=1.0,
            block=heads,
            block_names=[fmt.layer_name(l) for l in range(layers)],
            marked={(i, j) for i, j in members if i != j and i in grouped},
            describe=lambda i, j: (
                f"{names[i]} vs {names[j]}: mean JS divergence {fmt.bits(red.js[i, j])} "
                f"(similarity {fmt.weight(1 - red.js[i, j])})"
            ),
        )
        self.groups.setText(groups_html(report))

    def _fill_pruning(self, report: CorpusReport) -> None:
        total = report.num_layers * report.num_heads
        self.plot.set_result(
            report.pruning, total, self._waiting.get("pruning", "No pruning order was chosen for this run")
        )
        text = html.escape(self._waiting.get("pruning", mask_text(report)))
        if self.loaded_mask is not None:
            text = (
                f"<b>Loaded mask:</b> {count(len(self.loaded_mask), 'head')} off "
                f"({html.escape(self.loaded_mask.describe())}) \u2014 not a point of these curves, so its "
                "accuracy was not measured in this run."
            )
        self.mask_label.setText(text)
        self._set_running(self.is_running())

    # -- choosing the heads to remove along the curves ---------------------------------------------
    def _fill_choosers(self, report: CorpusReport) -> None:
        pr = report.pruning
        for box in (self.order_box, self.count_box, self.tolerance):
            box.blockSignals(True)
        self.order_box.clear()
        if pr is not None:
            for curve in pr.curves:
                self.order_box.addItem(curve.order_name)
            self.order_box.setCurrentText(pr.mask_order)
            curve = pr.curve(pr.mask_order)
            self.count_box.setRange(curve.steps[0], len(curve.order))
            self.count_box.setSingleStep(max(1, report.settings.prune_every or 1))
            self.count_box.setValue(len(pr.removed))
            if pr.max_drop is not None:
                self.tolerance.setValue(100 * pr.max_drop)
        for box in (self.order_box, self.count_box, self.tolerance):
            box.blockSignals(False)
        self._units()

    def chosen_mask(self) -> HeadMask:
        """The heads chosen now: a loaded mask, else the chosen point of the curves (empty without a run)."""
        if self.loaded_mask is not None:
            return self.loaded_mask
        if self.report is None or self.report.pruning is None:
            return HeadMask()
        return HeadMask.of(self.report.pruning.removed)

    def apply_choice(self, choice: MaskChoice) -> None:
        """Make ``choice`` the report's set of heads to remove and show it (no model call)."""
        if self.report is None or self.report.pruning is None:
            return
        self.loaded_mask = None
        self.report = with_choice(self.report, choice)
        for box in (self.order_box, self.count_box):
            box.blockSignals(True)
        self.order_box.setCurrentText(choice.order)
        self.count_box.setValue(choice.removed)
        for box in (self.order_box, self.count_box):
            box.blockSignals(False)
        self._fill_pruning(self.report)

    def _tolerance_moved(self, *_args: object) -> None:
        pr = self.report.pruning if self.report is not None else None
        if pr is None or not self.order_box.currentText():
            return
        self.apply_choice(choose_by_tolerance(pr, self.order_box.currentText(), self.tolerance.value() / 100))

    def _count_moved(self, value: int) -> None:
        pr = self.report.pruning if self.report is not None else None
        if pr is not None and self.order_box.currentText():
            self.apply_choice(choose_by_count(pr, self.order_box.currentText(), value))

    def choose_point(self, curve: int, step: int) -> None:
        """Choose the heads of one measured point of the plot."""
        pr = self.report.pruning if self.report is not None else None
        if pr is not None:
            self.apply_choice(choose_point(pr, curve, step))

    def _threshold_moved(self, value: float) -> None:
        if self.report is not None:
            self.report = with_threshold(self.report, value)
            self._fill_similarity(self.report)

    def ask_load_mask(self) -> None:
        mask = self.masks.ask_load(self, self.lm)
        if mask is not None:
            self.load_mask(mask)

    def load_mask(self, mask: HeadMask) -> None:
        """Show a mask read from a file: as its point on the curves when it is one, else as it is."""
        if self.report is None or self.report.pruning is None:
            return
        found = find_on_curves(self.report.pruning, mask)
        if found is not None:
            self.apply_choice(found)
            return
        self.loaded_mask = mask
        self._fill_pruning(self.report)

    def ask_write_pruned(self) -> None:
        if self.report is None:
            return
        prov = provenance(self.report) if self.loaded_mask is None else None
        self.masks.ask_write_pruned(self, self.lm, self.chosen_mask(), prov)

    # -- misfires ----------------------------------------------------------------------------------
    def _misfire_index(self, row: int) -> int | None:
        """The report's index of the misfire shown in table row ``row`` (rows move when sorted)."""
        item = self.misfires.item(row, 0)
        return None if item is None else int(item.data(INDEX_ROLE))

    def _misfire_clicked(self, row: int, column_: int) -> None:
        if column_ != EXPLAIN_COLUMN:
            self.open_misfire(row)

    def open_misfire(self, row: int) -> None:
        """Show the misfire in table row ``row`` in the sentence view with its expected label."""
        k = self._misfire_index(row) if self.report is not None else None
        if k is not None:
            m = self.report.evaluation.misfires[k]
            self.open_sentence.emit(m.text, m.expected)

    def explain_misfire(self, row: int) -> None:
        """Show the misfire in table row ``row`` on the Explain page with its expected label."""
        k = self._misfire_index(row) if self.report is not None else None
        if k is not None:
            self._explain_index(k)

    def _explain_index(self, k: int) -> None:
        if self.report is not None and 0 <= k < len(self.report.evaluation.misfires):
            m = self.report.evaluation.misfires[k]
            self.explain.emit(m.text, m.expected)

    # -- export ------------------------------------------------------------------------------------
    def focused_view(self) -> str:
        """Which view Ctrl+E exports: the one holding the keyboard focus, else the current tab's main view."""
        views = {
            "confusion": [self.confusion],
            "misfires": [self.misfires, self.pairs, self.search],
            "importance": [self.importance_map],
            "similarity": [self.similarity],
            "pruning": [self.plot],
        }
        focus = self.focusWidget()
        for kind, widgets in views.items():
            if any(w is focus or (focus is not None and w.isAncestorOf(focus)) for w in widgets):
                return kind
        tab = self.tabs.currentIndex()
        return ("confusion", "misfires", "importance")[tab] if 0 <= tab < 3 else "confusion"

    def export_current(self) -> None:
        """Ctrl+E: export the view under focus (figure and CSV); the status bar says what was written."""
        if self.report is None:
            self.error.emit("Nothing to export yet: run the corpus analysis first")
            return
        if self.exporter is None:
            self.export_folder()
            return
        kind = self.focused_view()
        try:
            job = build_export(self.report, kind, self.shown_misfires(), self.exporter.paper())
        except ValueError as exc:
            self.error.emit(f"Nothing to export: {exc}")
            return
        self.exporter.ask_for(job, EXPORT_KINDS[kind])

    def export_folder(self) -> None:
        """Ask for a folder, then write the whole run (the CLI's files) there in the background."""
        if self.report is None:
            self.error.emit("Nothing to export yet: run the corpus analysis first")
            return
        folder = ask_folder(self, self.settings, "Write the corpus run into a folder")
        if folder is not None:
            self.export_report(folder)

    def choose_review_file(self) -> None:
        """Ask where to write the review report (.pdf or .html), then build it in the background."""
        if self.report is None:
            self.error.emit("No review report yet: run the corpus analysis first")
            return
        start = last_folder(self.settings) / f"{slug(self.report.model_name, 24)}-review.pdf"
        path, chosen = QFileDialog.getSaveFileName(
            self,
            "Write the review report",
            str(start),
            "PDF document (*.pdf);;Web page, one file (*.html)",
        )
        if not path:
            return
        target = Path(path)
        if target.suffix.lower() not in (".pdf", ".html"):
            target = target.with_name(target.name + (".html" if "html" in chosen else ".pdf"))
        remember_folder(self.settings, target)
        self.write_review(target)

    def write_review(self, path: Path, *, explain: int | None = None) -> int:
        """Build the review report of the shown run into ``path`` off the GUI thread; returns the job number.

        The run's files go to a temporary folder first (the report reads a run
        folder, as ``headcount report`` does); explaining the top misfires holds
        the model. Progress shows in the phase line; the status bar says where
        the report went.
        """
        import tempfile

        from inspector.corpus.report import write_report
        from inspector.figures.report.build import DEFAULT_EXPLAINED, write_review

        report, lm = self.report, self.lm
        if report is None:
            raise ValueError("nothing to report: no corpus run yet")
        paper = self.exporter.paper() if self.exporter is not None else "a4"
        count = DEFAULT_EXPLAINED if explain is None else explain
        say = self.controls.status_hook()

        def job() -> Path:
            with tempfile.TemporaryDirectory() as tmp, MODEL_LOCK:
                write_report(report, tmp, figures=False)
                return write_review(
                    tmp,
                    path,
                    lm=lm,
                    paper=paper,
                    explain=count,
                    on_progress=lambda _d, _t, what: say(what),
                )

        def done(written: object) -> None:
            self.phase_label.setText(f"Review report written: {Path(written).name}")
            self.status.emit(f"Exported the review report: {Path(written).name} in {Path(written).parent}")

        self.phase_label.setText("Writing the review report\u2026")
        return self.runner.submit(
            "report",
            job,
            done,
            lambda text: self.error.emit(f"Could not write the review report: {text}"),
            latest_only=False,
        )

    def export_report(self, folder: Path) -> int:
        """Write the report into ``folder`` on the export channel; returns the job number."""
        report = self.report
        if report is None:
            raise ValueError("nothing to export: no corpus run yet")
        return write_folder(
            self.runner,
            lambda: write_report(report, folder),
            lambda files: f"Wrote the corpus report ({fmt.count(files, 'file')}) in {folder}",
            "the corpus report",
            self.status.emit,
            self.error.emit,
        )

    def choose_mask_file(self) -> None:
        if self.report is None or self.report.pruning is None:
            self.error.emit("No set of heads to save: run the corpus analysis with a pruning order first")
            return
        start = last_folder(self.settings) / "prune_mask.json"
        path, _ = QFileDialog.getSaveFileName(self, "Save the heads to remove", str(start), "JSON (*.json)")
        if path:
            remember_folder(self.settings, Path(path))
            self.save_mask(Path(path))

    def save_mask(self, path: Path) -> Path | None:
        """Write the chosen heads to ``path`` atomically as ``{"layer": [head, ...]}``; None if it failed."""
        try:
            return self.masks.save(self.chosen_mask(), path)
        except HeadcountError as exc:
            self.error.emit(f"Could not save the prune mask: {exc}")
            return None
