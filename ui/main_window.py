"""The main window: page navigation, menus, model opening, messages and the busy state.

Pages sit in a stack beside a narrow navigation list (:meth:`MainWindow.add_page`),
so later pages (corpus results, one misfire explained) slot in next to the
sentence page. Models load and sentences are analysed on background threads;
the window keeps answering while they run.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QEvent, QSettings, QSize, Qt, Signal
from PySide6.QtGui import (
    QAction,
    QActionGroup,
    QCloseEvent,
    QDragEnterEvent,
    QDropEvent,
    QKeySequence,
    QPalette,
)
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QHBoxLayout,
    QInputDialog,
    QLabel,
    QListWidget,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QStackedWidget,
    QVBoxLayout,
    QWidget,
)

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel, load_checkpoint
from inspector.checkpoint.masks import HeadMask
from inspector.checkpoint.sources import run_checkpoints
from inspector.comparison.pairing import check_comparable
from inspector.comparison.sentence import SentenceComparison, compare_analyses
from inspector.errors import HeadcountError
from inspector.figures.paper import PAPER_NAMES
from inspector.figures.sentence import CAUTION
from inspector.measures.analysis import Prediction, SentenceAnalysis, analyze_sentence, predict_sentence
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES
from inspector.threads import INTERACTIVE_THREADS, set_torch_threads
from ui.compare.view import ComparisonView
from ui.corpus.page import CorpusPage
from ui.explain.page import ExplainPage
from ui.sentence.export import EXPORT_KINDS, build_export
from ui.sentence.page import SentencePageWidget
from ui.sentence.second_model import comparison_export
from ui.sentence.state import SOURCES, classification_index
from ui.widgets.export import ExportController
from ui.widgets.panel import MessageBar
from ui.widgets.worker import MODEL_LOCK, JobRunner

RECENT_KEY = "recent/models"
RECENT_MAX = 8
STARTER_SENTENCE = "can I bring my dog on the evening crossing to Orlestow"
"""Shown when a model opens with an empty entry (from the project's ferry-operator scenario)."""

SHORTCUTS_HELP = """<table cellspacing=4>
<tr><td nowrap><b>Ctrl+O</b></td><td>Open a model folder</td></tr>
<tr><td nowrap><b>Ctrl+Shift+O</b></td><td>Compare with a second model (or Shift+drop its folder on the window)</td></tr>
<tr><td nowrap><b>Ctrl+L</b></td><td>Go to the sentence entry</td></tr>
<tr><td nowrap><b>Ctrl+1 \u2026 Ctrl+4</b></td><td>Go to head mosaic, close-up, token arcs, relevance band</td></tr>
<tr><td nowrap><b>Arrow keys</b></td><td>In the mosaic: move the selected head</td></tr>
<tr><td nowrap><b>Alt+Arrow keys</b></td><td>Move the selected head from anywhere</td></tr>
<tr><td nowrap><b>Up/Down, Left/Right</b></td><td>In the close-up (Up/Down) / token arcs (Left/Right): move the query token</td></tr>
<tr><td nowrap><b>+ / \u2212 / 0</b></td><td>In the close-up: zoom in, zoom out, whole matrix (the wheel zooms; drag, Left/Right, Page Up/Down pan)</td></tr>
<tr><td nowrap><b>Alt+1 \u2026 Alt+5</b></td><td>Close-up shows: head, layer mean, rollout, flow, value-weighted</td></tr>
<tr><td nowrap><b>Ctrl+M</b></td><td>Next meter metric</td></tr>
<tr><td nowrap><b>Space / Shift+Space</b></td><td>In the mosaic: switch the selected head / its layer off or on (also double-click)</td></tr>
<tr><td nowrap><b>Ctrl+D / Ctrl+Shift+D</b></td><td>Switch the selected head / layer off or on from anywhere</td></tr>
<tr><td nowrap><b>Ctrl+Shift+A</b></td><td>All heads back on (the full model)</td></tr>
<tr><td nowrap><b>Ctrl+Shift+W / H</b></td><td>Words instead of pieces / hide special tokens</td></tr>
<tr><td nowrap><b>Ctrl+E</b></td><td>Export the view that has the keyboard focus</td></tr>
<tr><td nowrap><b>Ctrl+Shift+E</b></td><td>Export the one-page figure sheet (PDF)</td></tr>
<tr><td nowrap><b>Ctrl+Shift+X</b></td><td>Explain the sentence: what pushed it toward each label, and rewordings</td></tr>
<tr><td nowrap><b>Ctrl+Return</b></td><td>On the Explain page: explain again (and compare the rewording)</td></tr>
<tr><td nowrap><b>Esc</b></td><td>On the Explain page: stop the explanation being computed</td></tr>
<tr><td nowrap><b>Ctrl+Shift+K</b></td><td>Corpus page: a whole evaluation set (Enter on a misfire: sentence view; Ctrl+Enter: explain)</td></tr>
<tr><td nowrap><b>Ctrl+E</b> (Corpus page)</td><td>Export the focused view: confusion matrix, misfires, importance, similarity or pruning curve</td></tr>
<tr><td nowrap><b>Ctrl+Shift+R</b></td><td>On the Corpus page: export the run folder (the corpus command's files)</td></tr>
</table>"""


def analyse_interactively(lm: LoadedModel, text: str, mask: HeadMask | None = None) -> SentenceAnalysis:
    """Analyse one sentence for the window, on the calling (worker) thread.

    With :data:`inspector.threads.INTERACTIVE_THREADS` torch threads (see there why one);
    ``torch.set_num_threads`` acts on the calling thread here (OpenMP), so other jobs keep
    their setting.
    """
    set_torch_threads(INTERACTIVE_THREADS)
    with MODEL_LOCK:
        result = analyze_sentence(lm, text, mask=mask)
    # Fill what the default views show here, on the worker thread, not on first paint in the GUI
    # thread: the relevance band's rollout row. The full rollout and the value-weighted measures
    # are computed only when a view asks for them.
    result.rollout_row(classification_index(result.special))
    return result


def analyse_with_mask(
    lm: LoadedModel, text: str, mask: HeadMask, full: Prediction | None
) -> tuple[SentenceAnalysis, Prediction | None]:
    """The sentence on the masked model, and the full model's prediction beside it (one extra forward pass
    unless ``full`` is already known for this text)."""
    result = analyse_interactively(lm, text, mask)
    if mask and full is None:
        with MODEL_LOCK:
            full = predict_sentence(lm, text)
    return result, full


def analyse_pair(
    lm: LoadedModel, lm_b: LoadedModel | None, text: str, mask: HeadMask, full: Prediction | None
) -> tuple[SentenceAnalysis, Prediction | None, SentenceComparison | str | None]:
    """Analyse ``text`` with the open model (heads in ``mask`` off) and, when a second model is open,
    compare B with A as shown (worker thread).

    Returns A's analysis, A's full-model prediction (see :func:`analyse_with_mask`) and the comparison
    (None without a second model; the error text when the two could not be compared on this sentence).
    """
    analysis, full = analyse_with_mask(lm, text, mask, full)
    if lm_b is None:
        return analysis, full, None
    try:
        return analysis, full, compare_analyses(analysis, analyse_interactively(lm_b, text))
    except HeadcountError as exc:
        return analysis, full, str(exc)


def initial_size(available: QSize | None) -> QSize:
    """The window's first size: 1360 x 880, or less on a smaller screen (a 1366 x 768 laptop)."""
    if available is None or available.isEmpty():
        return QSize(1360, 880)
    return QSize(min(1360, available.width()), min(880, available.height()))


class MainWindow(QMainWindow):
    """Headcount's window."""

    model_loaded = Signal(object)
    load_failed = Signal(str)

    def __init__(self, settings: QSettings | None = None, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Headcount")
        self.setAcceptDrops(True)
        self.settings = settings if settings is not None else QSettings("Headcount", "Headcount")
        self.runner = JobRunner(self)
        self.lm: LoadedModel | None = None
        self.lm_b: LoadedModel | None = None
        """The second model, compared with the first on every sentence and on the Comparison tab."""
        self._loading: Path | None = None

        self.message_bar = MessageBar(self)
        self.sentence_page = SentencePageWidget(self.runner, self, self.settings)
        self.exporter = ExportController(
            self,
            self.runner,
            self.settings,
            lambda kind: build_export(self.sentence_page.state, kind, self.exporter.paper()),
            EXPORT_KINDS,
        )

        self.nav = QListWidget(self)
        self.nav.setAccessibleName("Pages")
        self.nav.setFixedWidth(104)
        self._style_nav()
        self.pages = QStackedWidget(self)
        self.nav.currentRowChanged.connect(self.pages.setCurrentIndex)
        self.add_page("Sentence", self.sentence_page)
        self.explain_page = ExplainPage(self.runner, self.exporter, self, defaults=self._current_sentence)
        self.add_page("Explain", self.explain_page)
        self.corpus_page = CorpusPage(self.runner, self.settings, self, exporter=self.exporter)
        self.add_page("Corpus", self.corpus_page)
        self.compare_view = ComparisonView(self.runner, self.settings, self.corpus_page.request, self)
        self.corpus_page.tabs.addTab(self.compare_view, "Co&mparison")

        body = QHBoxLayout()
        body.setContentsMargins(0, 0, 0, 0)
        body.setSpacing(0)
        body.addWidget(self.nav)
        body.addWidget(self.pages, 1)
        central = QWidget(self)
        outer = QVBoxLayout(central)
        outer.setContentsMargins(6, 6, 6, 0)
        outer.setSpacing(4)
        outer.addWidget(self.message_bar)
        outer.addLayout(body, 1)
        self.setCentralWidget(central)

        self.model_label = QLabel("no model", self)
        self.busy_label = QLabel("", self)
        self.busy_bar = QProgressBar(self)
        self.busy_bar.setRange(0, 0)
        self.busy_bar.setFixedWidth(120)
        self.busy_bar.setMaximumHeight(14)
        self.busy_bar.hide()
        self.statusBar().addPermanentWidget(self.busy_label)
        self.statusBar().addPermanentWidget(self.busy_bar)
        self.statusBar().addPermanentWidget(self.model_label)

        self._build_menus()
        page = self.sentence_page
        page.bar.sentence_changed.connect(self.analyse)
        page.status.connect(lambda text: self.statusBar().showMessage(text, 6000))
        page.error.connect(self.show_error)
        page.mask_changed.connect(self._mask_changed)
        self.runner.busy_changed.connect(self._busy_changed)
        self.model_loaded.connect(self._explain_model)
        self.explain_page.status.connect(lambda text: self.statusBar().showMessage(text, 6000))
        self.explain_page.error.connect(self.show_error)
        self.exporter.described.connect(lambda text: self.statusBar().showMessage(text, 8000))
        self._connect_corpus()
        self._connect_comparison()
        self.exporter.failed.connect(lambda text: self.show_error(f"Export failed: {text}"))
        self.resize(initial_size(self.screen().availableGeometry().size() if self.screen() else None))

    # -- pages -------------------------------------------------------------------------------------
    def add_page(self, title: str, widget: QWidget) -> int:
        """Add a page to the navigation; returns its index."""
        index = self.pages.addWidget(widget)
        self.nav.addItem(title)
        if self.nav.currentRow() < 0:
            self.nav.setCurrentRow(index)
        return index

    def show_page(self, widget: QWidget) -> None:
        self.nav.setCurrentRow(self.pages.indexOf(widget))

    # -- menus -------------------------------------------------------------------------------------
    def _action(self, menu, text: str, slot, shortcut: str | None = None, tip: str = "") -> QAction:
        action = QAction(text, self)
        if shortcut:
            action.setShortcut(QKeySequence(shortcut))
        if tip:
            action.setStatusTip(tip)
        action.triggered.connect(slot)
        menu.addAction(action)
        return action

    def _build_menus(self) -> None:
        bar = self.menuBar()
        page = self.sentence_page
        file_menu = bar.addMenu("&File")
        self._action(
            file_menu, "&Open model folder\u2026", self.choose_model, "Ctrl+O", "Open a checkpoint folder"
        )
        self.recent_menu = file_menu.addMenu("Open &recent")
        self._fill_recent()
        file_menu.addSeparator()
        self._action(
            file_menu,
            "Compare &with a second model\u2026",
            self.choose_second_model,
            "Ctrl+Shift+O",
            "Open a second checkpoint beside the first (same tokenizer) and compare them",
        )
        self.close_second_action = self._action(
            file_menu, "Close the &second model", self.close_second_model, tip="Stop comparing"
        )
        self.close_second_action.setEnabled(False)
        file_menu.addSeparator()
        self._action(file_menu, "&Quit", self.close, "Ctrl+Q")

        export_menu = bar.addMenu("E&xport")
        self._action(export_menu, "Export &focused view\u2026", self.export_focused, "Ctrl+E")
        export_menu.addSeparator()
        accel = {
            "mosaic": "&Head mosaic\u2026",
            "closeup": "&Close-up\u2026",
            "arcs": "Token &arcs\u2026",
            "relevance": "&Relevance band\u2026",
        }
        for kind, text in accel.items():
            self._action(
                export_menu,
                text,
                lambda _c=False, k=kind: self.exporter.ask(k),
                tip=f"{EXPORT_KINDS[kind]} as PNG, SVG or PDF, with a CSV of its numbers",
            )
        self._action(
            export_menu,
            "E&xplanation\u2026",
            self.explain_page.export_current,
            tip="The Explain page as PNG, SVG or PDF, with a CSV of every word's relevances",
        )
        self._action(
            export_menu,
            "Model &comparison (this sentence)\u2026",
            self.export_sentence_comparison,
            tip="With a second model open: how much each head changed, as a figure with a CSV of every head",
        )
        self._action(
            export_menu,
            "Comparison &report (labelled set)\u2026",
            self.compare_view.export_current,
            tip="The Comparison tab's files: comparison.json, fixed.csv, broken.csv, head_changes.csv, figures",
        )
        export_menu.addSeparator()
        self._action(
            export_menu,
            "Figure &sheet (PDF)\u2026",
            lambda: self.exporter.ask("sheet"),
            "Ctrl+Shift+E",
            "One page: head mosaic, close-up and relevance band",
        )
        export_menu.addSeparator()
        paper_menu = export_menu.addMenu("&Paper size")
        papers = QActionGroup(self)
        for key, text in PAPER_NAMES.items():
            act = self._action(paper_menu, text, lambda _c=False, k=key: self.exporter.set_paper(k))
            act.setCheckable(True)
            act.setChecked(self.exporter.paper() == key)
            papers.addAction(act)

        view_menu = bar.addMenu("&View")
        view_menu.addAction(page.words_action)
        view_menu.addAction(page.special_action)
        view_menu.addSeparator()
        source_menu = view_menu.addMenu("Close-up &shows")
        group = QActionGroup(self)
        for i, (_key, text) in enumerate(SOURCES.items()):
            act = self._action(
                source_menu, text, lambda _c=False, i=i: page.source_box.setCurrentIndex(i), f"Alt+{i + 1}"
            )
            act.setCheckable(True)
            act.setChecked(i == 0)
            group.addAction(act)
            page.source_box.currentIndexChanged.connect(lambda j, a=act, i=i: a.setChecked(i == j))
        metric_menu = view_menu.addMenu("&Meter metric")
        self._action(metric_menu, "&Next metric", self.next_metric, "Ctrl+M")
        metric_menu.addSeparator()
        for i, name in enumerate(METRIC_NAMES):
            self._action(
                metric_menu, METRIC_LABELS[name], lambda _c=False, i=i: page.metric_box.setCurrentIndex(i)
            )

        go_menu = bar.addMenu("&Go")
        self._action(go_menu, "&Sentence entry", self.focus_entry, "Ctrl+L")
        go_menu.addAction(page.explain_action)
        page.explain_action.triggered.connect(self.explain_current_sentence)
        targets = [
            ("Head &mosaic", page.grid),
            ("&Close-up", page.closeup),
            ("Token &arcs", page.arcs),
            ("&Relevance band", page.band),
        ]
        for i, (text, widget) in enumerate(targets):
            self._action(go_menu, text, lambda _c=False, w=widget: self._focus(w), f"Ctrl+{i + 1}")
        self._action(
            go_menu,
            "Cor&pus page",
            lambda: self.show_page(self.corpus_page),
            "Ctrl+Shift+K",
            "A whole evaluation set: accuracy, misfires, heads and pruning",
        )
        go_menu.addSeparator()
        moves = [
            ("Layer &up", "Alt+Up", -1, 0),
            ("Layer &down", "Alt+Down", 1, 0),
            ("&Previous head", "Alt+Left", 0, -1),
            ("&Next head", "Alt+Right", 0, 1),
        ]
        for text, key, dl, dh in moves:
            self._action(go_menu, text, lambda _c=False, dl=dl, dh=dh: page.move_head(dl, dh), key)
        self._action(go_menu, "Previous &query token", lambda: page.move_query(-1), "Alt+Shift+Left")
        self._action(go_menu, "Next q&uery token", lambda: page.move_query(1), "Alt+Shift+Right")

        heads_menu = bar.addMenu("H&eads")
        heads_menu.addActions(page.mask_actions[:3])
        heads_menu.addSeparator()
        heads_menu.addActions(page.mask_actions[3:])

        help_menu = bar.addMenu("&Help")
        self._action(help_menu, "&Keyboard shortcuts", self.show_shortcuts, "F1")
        self._action(help_menu, "What &attention can and cannot tell", self.show_caution)

    def _connect_corpus(self) -> None:
        page = self.corpus_page
        page.open_sentence.connect(self.open_sentence)
        page.explain.connect(self.open_explanation)
        page.status.connect(lambda text: self.statusBar().showMessage(text, 8000))
        page.error.connect(self.show_error)
        page.use_mask.connect(self._use_mask)
        self.model_loaded.connect(page.set_model)
        page.holds_model.connect(self._corpus_holds_model)

    def _corpus_holds_model(self, held: bool) -> None:
        """While a corpus run uses the window's own model, the sentence page says why it waits."""
        page = self.sentence_page
        page.waiting_reason = (
            "waiting for the corpus run, which holds the model (no memory for a second copy; "
            "Cancel it on the Corpus page)"
            if held
            else ""
        )
        page.update_stale_note()

    def _use_mask(self, mask: HeadMask) -> None:
        """Switch the corpus page's chosen heads off on the sentence page, and show it."""
        self.show_page(self.sentence_page)
        self.sentence_page.set_mask(mask)

    def _connect_comparison(self) -> None:
        view, page = self.compare_view, self.sentence_page
        view.open_sentence.connect(self.open_sentence)
        view.status.connect(lambda text: self.statusBar().showMessage(text, 8000))
        view.error.connect(self.show_error)
        page.second_closed.connect(self.close_second_model)
        page.second_dropped.connect(self.open_second_model)

    def _focus(self, widget: QWidget) -> None:
        self.show_page(self.sentence_page)
        widget.setFocus(Qt.FocusReason.ShortcutFocusReason)

    def focus_entry(self) -> None:
        self.show_page(self.sentence_page)
        self.sentence_page.bar.entry.setFocus(Qt.FocusReason.ShortcutFocusReason)
        self.sentence_page.bar.entry.selectAll()

    def next_metric(self) -> None:
        box = self.sentence_page.metric_box
        box.setCurrentIndex((box.currentIndex() + 1) % box.count())

    def _style_nav(self) -> None:
        """Page names in the palette's text colour, set again when the palette changes at run time
        (a style sheet keeps the colours it was given, so a dark palette would hide them)."""
        text = self.palette().color(QPalette.ColorRole.WindowText).name()
        self.nav.setStyleSheet(
            "QListWidget { border: none; background: transparent; } "
            f"QListWidget::item {{ padding: 7px 8px; color: {text}; }} "
            "QListWidget::item:selected { color: palette(highlighted-text); background: palette(highlight); }"
        )

    def changeEvent(self, event: QEvent) -> None:
        if event.type() == QEvent.Type.PaletteChange:
            self._style_nav()
        super().changeEvent(event)

    def show_shortcuts(self) -> QDialog:
        """The shortcut list, one line per shortcut (no wrapping inside a description)."""
        dialog = QDialog(self)
        dialog.setWindowTitle("Keyboard shortcuts")
        label = QLabel(SHORTCUTS_HELP, dialog)
        label.setTextFormat(Qt.TextFormat.RichText)
        label.setWordWrap(False)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close, dialog)
        buttons.rejected.connect(dialog.reject)
        layout = QVBoxLayout(dialog)
        layout.addWidget(label)
        layout.addWidget(buttons)
        dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dialog.show()
        return dialog

    def show_caution(self) -> None:
        QMessageBox.information(
            self,
            "What attention can and cannot tell",
            f"{CAUTION}\n\nA head's weights say which tokens it mixed in, not how much that mattered for the "
            "decision. Check a reading against gradient- or occlusion-based evidence before relying on it.",
        )

    # -- models ------------------------------------------------------------------------------------
    def choose_model(self) -> None:
        start = str(self.settings.value("open/folder", str(Path.home())))
        folder = QFileDialog.getExistingDirectory(self, "Open a model folder", start)
        if folder:
            self.settings.setValue("open/folder", str(Path(folder).parent))
            self.open_model(folder)

    def choose_checkpoint(self, folder: Path, steps: list[int]) -> int | None:
        """Ask which ``checkpoint-N`` of a training run to open (latest first); None when cancelled."""
        items = [f"checkpoint-{n}" for n in reversed(steps)]
        item, ok = QInputDialog.getItem(
            self, "Open a checkpoint", f"{folder.name} holds {len(steps)} checkpoints:", items, 0, False
        )
        return int(item.rsplit("-", 1)[1]) if ok and item else None

    def open_model(
        self, folder: str | Path, *, allow_pickle: bool = False, checkpoint: int | None = None
    ) -> None:
        """Load a checkpoint (folder, training run or cached repo id) in the background.

        A training-run folder without a model of its own lists its ``checkpoint-N``
        folders to pick from. Errors appear in the message bar.
        """
        path = Path(folder).expanduser()
        if checkpoint is None and path.is_dir() and not (path / "config.json").is_file():
            try:
                steps = list(run_checkpoints(path))
            except HeadcountError as exc:
                self.show_error(f"Could not open {path.name}: {exc}")
                return
            if steps:
                checkpoint = self.choose_checkpoint(path, steps)
                if checkpoint is None:
                    return
        self._loading = path
        self.message_bar.hide()
        self.busy_label.setText(f"Opening {path.name}\u2026")
        if self.lm is None:
            self.sentence_page.clear(f"Opening {path.name}\u2026")
        self.runner.submit(
            "load",
            lambda: load_checkpoint(str(folder), allow_pickle=allow_pickle, checkpoint=checkpoint),
            self._model_ready,
            lambda text: self._model_failed(path, text),
        )

    def _model_ready(self, lm: object) -> None:
        assert isinstance(lm, LoadedModel)
        self.lm = lm
        self._loading = None
        self.runner.cancel("analysis")
        self.runner.cancel("flow")
        self.sentence_page.set_model(lm)
        self.setWindowTitle(f"{lm.name} \u2014 Headcount")
        if self.lm_b is not None:
            try:
                check_comparable(lm, self.lm_b)
                self._set_second(self.lm_b)
            except HeadcountError as exc:
                self._set_second(None)
                self.show_error(f"Stopped comparing: {exc}")
        self._show_model_label()
        self._remember(lm.path)
        entry = self.sentence_page.bar.entry
        if not entry.text().strip():
            entry.blockSignals(True)
            entry.setText(STARTER_SENTENCE)
            entry.blockSignals(False)
        self.analyse(entry.text())
        self.model_loaded.emit(lm)

    def choose_second_model(self) -> None:
        if self.lm is None:
            self.show_error("Open a model first (Ctrl+O); the second one is compared with it")
            return
        start = str(self.settings.value("open/folder", str(Path.home())))
        folder = QFileDialog.getExistingDirectory(self, "Open a second model to compare with", start)
        if folder:
            self.settings.setValue("open/folder", str(Path(folder).parent))
            self.open_second_model(folder)

    def open_second_model(self, folder: str | Path) -> None:
        """Load a second checkpoint in the background and compare it with the open one."""
        lm = self.lm
        if lm is None:
            self.show_error("Open a model first (Ctrl+O); the second one is compared with it")
            return
        path = Path(folder).expanduser()
        self.message_bar.hide()
        self.busy_label.setText(f"Opening {path.name} to compare\u2026")

        def load() -> LoadedModel:
            second = load_checkpoint(path)
            check_comparable(lm, second)
            return second

        self.runner.submit(
            "load_b",
            load,
            lambda second: self._second_ready(lm, second),
            lambda text: self.show_error(f"Could not compare with {path.name}: {text}"),
        )

    def _second_ready(self, lm: LoadedModel, second: object) -> None:
        assert isinstance(second, LoadedModel)
        if lm is not self.lm:
            return  # the first model changed meanwhile
        self._set_second(second)
        self.statusBar().showMessage(f"Comparing {lm.name} (A) with {second.name} (B)", 8000)
        self.analyse(self.sentence_page.bar.entry.text())

    def close_second_model(self) -> None:
        """Stop comparing: forget the second model."""
        self._set_second(None)
        if self.lm is not None:
            self.analyse(self.sentence_page.bar.entry.text())

    def _set_second(self, second: LoadedModel | None) -> None:
        self.lm_b = second
        self.close_second_action.setEnabled(second is not None)
        self.sentence_page.set_second_model(
            self.lm.name if self.lm else None, second.name if second is not None else None
        )
        self.compare_view.set_models(self.lm, second)
        self._show_model_label()

    def _show_model_label(self) -> None:
        lm = self.lm
        if lm is None:
            return
        kind = {"sequence-classification": fmt.count(len(lm.labels), "label"), "encoder": "bare encoder"}.get(
            lm.task, lm.task
        )
        text = (
            f"{lm.name} \u00b7 {lm.model_type} \u00b7 {fmt.count(lm.num_layers, 'layer')} \u00d7 "
            f"{fmt.count(lm.num_heads, 'head')} \u00b7 {kind}"
        )
        if self.lm_b is not None:
            text = f"A: {text}   B: {self.lm_b.name}"
        self.model_label.setText(text)

    def _model_failed(self, path: Path, text: str) -> None:
        self._loading = None
        self.show_error(f"Could not open {path.name}: {text}")
        if self.lm is None:
            self.sentence_page.clear("No model open \u2014 use File \u203a Open model folder (Ctrl+O)")
        self.load_failed.emit(text)

    def show_error(self, text: str) -> None:
        self.message_bar.show_message(text)

    # -- sentences ---------------------------------------------------------------------------------
    def analyse(self, text: str) -> None:
        """Analyse ``text`` with the open model in the background (newest request wins)."""
        page = self.sentence_page
        page.bar.timer.stop()
        lm = self.lm
        if lm is None:
            return
        if not text.strip():
            self.runner.cancel("analysis")
            page.set_model(lm)
            return
        mask, full = page.state.mask, page.state.known_full_prediction(text)
        lm_b = self.lm_b
        self.runner.submit(
            "analysis",
            lambda: analyse_pair(lm, lm_b, text, mask, full),
            lambda result: self._analysis_ready(lm, lm_b, result),
            lambda msg: self.show_error(f"Could not analyse the sentence: {msg}"),
        )

    def _analysis_ready(self, lm: LoadedModel, lm_b: LoadedModel | None, result: object) -> None:
        if lm is not self.lm or lm_b is not self.lm_b:
            return  # a model changed while this sentence was being analysed
        analysis, full, comparison = result
        page = self.sentence_page
        page.pair.set_comparison(comparison if isinstance(comparison, SentenceComparison) else None)
        page.apply_analysis(analysis, full)
        if isinstance(comparison, str):
            page.second_failed(comparison)

    def _mask_changed(self, mask: HeadMask) -> None:
        """Heads were switched off or on: analyse the sentence again at once, and tell the Explain page."""
        self.analyse(self.sentence_page.bar.entry.text())
        self.explain_page.set_mask(mask)

    def open_sentence(self, text: str, expected: str | None = None) -> None:
        """Load ``text`` into the sentence page with its expected label set, and analyse it."""
        page = self.sentence_page
        self.show_page(page)
        page.state.expected = expected
        if self.lm is not None and expected is not None and not page.bar.set_expected(expected):
            self.show_error(f"The model has no label '{expected}'")
        elif expected is None:
            page.bar.set_expected(None)
        page.bar.entry.blockSignals(True)
        page.bar.entry.setText(text)
        page.bar.entry.blockSignals(False)
        self.analyse(text)

    def open_explanation(self, text: str, expected: str | None = None, edited: str = "") -> None:
        """Show the Explain page and explain ``text`` for its prediction and ``expected`` (one click from a misfire)."""
        self.explain_page.open(text, expected, edited)
        self.show_page(self.explain_page)

    def explain_current_sentence(self) -> None:
        """Open the sentence page's sentence, with its expected label, on the Explain page."""
        self.open_explanation(*self._current_sentence())

    def _current_sentence(self) -> tuple[str, str | None]:
        bar = self.sentence_page.bar
        return bar.entry.text(), bar.expected_label()

    def _explain_model(self, lm: LoadedModel) -> None:
        self.explain_page.set_model(lm)
        self.sentence_page.explain_action.setEnabled(not self.explain_page.problem)

    # -- export ------------------------------------------------------------------------------------
    def export_focused(self) -> None:
        current = self.pages.currentWidget()
        if current is self.corpus_page and self.corpus_page.tabs.currentWidget() is self.compare_view:
            self.compare_view.export_current()
            return
        if current is not self.sentence_page and hasattr(current, "export_current"):
            current.export_current()  # another page exports what it shows
            return
        page = self.sentence_page
        kinds = {
            id(page.grid): "mosaic",
            id(page.closeup): "closeup",
            id(page.arcs): "arcs",
            id(page.band): "relevance",
        }
        widget = self.focusWidget()
        self.exporter.ask(kinds.get(id(widget), "closeup"))

    def export_sentence_comparison(self) -> None:
        try:
            job = comparison_export(self.sentence_page.pair)
        except ValueError as exc:
            self.show_error(str(exc))
            return
        self.exporter.ask_for(job, "Model comparison")

    # -- busy state --------------------------------------------------------------------------------
    def is_busy(self) -> bool:
        return self.runner.is_busy()

    def _busy_changed(self, channel: str, busy: bool) -> None:
        active = self.runner.is_busy()
        self.busy_bar.setVisible(active)
        if not active:
            self.busy_label.setText("")
        elif busy and channel == "analysis" and self._loading is None:
            self.busy_label.setText("Analysing\u2026")
        elif busy and channel == "flow":
            self.busy_label.setText("Computing flow\u2026")
        elif busy and channel == "export":
            self.busy_label.setText("Exporting\u2026")
        elif busy and channel == "explain":
            self.busy_label.setText("Explaining\u2026")
        elif busy and channel == "corpus":
            self.busy_label.setText("Analysing the corpus\u2026")
        elif busy and channel == "compare":
            self.busy_label.setText("Comparing the two models\u2026")
        elif busy and channel == "report":
            self.busy_label.setText("Writing the review report\u2026")

    # -- recent models -----------------------------------------------------------------------------
    def recent_models(self) -> list[str]:
        value = self.settings.value(RECENT_KEY, [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def _remember(self, path: Path) -> None:
        entry = str(Path(path).resolve())
        recent = [entry] + [p for p in self.recent_models() if p != entry]
        self.settings.setValue(RECENT_KEY, recent[:RECENT_MAX])
        self.settings.sync()
        self._fill_recent()

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        recent = self.recent_models()
        for i, path in enumerate(recent):
            label = f"&{i + 1}  {Path(path).name}   ({path})" if i < 9 else path
            act = self.recent_menu.addAction(label)
            act.triggered.connect(lambda _c=False, p=path: self.open_model(p))
        if not recent:
            self.recent_menu.addAction("(none yet)").setEnabled(False)
        else:
            self.recent_menu.addSeparator()
            self.recent_menu.addAction("&Clear list", self._clear_recent)

    def _clear_recent(self) -> None:
        self.settings.setValue(RECENT_KEY, [])
        self._fill_recent()

    # -- drag and drop -----------------------------------------------------------------------------
    @staticmethod
    def _dropped_folder(event: QDragEnterEvent | QDropEvent) -> Path | None:
        for url in event.mimeData().urls() if event.mimeData().hasUrls() else []:
            path = Path(url.toLocalFile())
            if url.isLocalFile() and path.is_dir():
                return path
        return None

    def dragEnterEvent(self, event: QDragEnterEvent) -> None:
        if self._dropped_folder(event) is not None:
            event.acceptProposedAction()
        else:
            event.ignore()

    def dropEvent(self, event: QDropEvent) -> None:
        folder = self._dropped_folder(event)
        if folder is not None:
            event.acceptProposedAction()
            if event.modifiers() & Qt.KeyboardModifier.ShiftModifier and self.lm is not None:
                self.open_second_model(folder)  # Shift+drop: compare with the open model
            else:
                self.open_model(folder)

    def keyPressEvent(self, event) -> None:
        if event.key() == Qt.Key.Key_Escape and self.message_bar.isVisible():
            self.message_bar.dismiss()
            return
        super().keyPressEvent(event)

    def closeEvent(self, event: QCloseEvent) -> None:
        self.runner.cancel("analysis")
        self.runner.cancel("flow")
        self.corpus_page.stop()
        self.compare_view.stop()
        self.runner.wait(30000)
        super().closeEvent(event)
