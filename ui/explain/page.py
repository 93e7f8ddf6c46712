"""The explain page: why did the model give this sentence that label, and what would an edit change?

Top: the sentence, its expected label, a reworded copy ("Rewording"), and the
options of the evidence (occlusion by removing or masking words, the Integrated
Gradients baseline and step count). Middle: the evidence for one label at a
time (predicted / expected / predicted versus expected / predicted after the
rewording), the original and the reworded sentence side by side. Bottom: how
well each relevance agrees with occlusion, and what the rewording did to every head. The computation runs on the
window's :class:`ui.widgets.worker.JobRunner` ("explain" channel, newest request wins);
what the page shows is derived by :class:`ui.explain.state.ExplainState`.
"""

from __future__ import annotations

import html
import threading
from collections.abc import Callable

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtGui import QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QButtonGroup,
    QComboBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QSplitter,
    QWidget,
)

from inspector import formatting as fmt
from inspector.checkpoint.loader import LoadedModel
from inspector.checkpoint.masks import HeadMask
from inspector.errors import HeadcountError
from inspector.explanation.choices import IG_TOLERANCE
from inspector.explanation.explain import CAUTION, ExplanationStopped, require_classifier
from inspector.explanation.gradients import BASELINES
from inspector.explanation.occlusion import OCCLUSION_MODES
from inspector.figures.explanation import explanation_pages
from inspector.figures.paper import DEFAULT_PAPER
from inspector.formatting import count
from ui.explain.panels import AgreementPanel, HeadsPanel, SentenceSide, combo
from ui.explain.state import (
    BASELINE_TEXT,
    ROLES,
    ExplainRequest,
    ExplainResult,
    ExplainState,
    compute_explanation,
)
from ui.sentence.bar import NO_EXPECTATION
from ui.widgets.export import ExportController, ExportJob, file_stem
from ui.widgets.legend import ColourKey
from ui.widgets.panel import buddy_label, column, control_grid
from ui.widgets.signed import SignKey
from ui.widgets.worker import MODEL_LOCK, JobRunner

CHANNEL = "explain"
ROLE_BUTTONS = {
    "predicted": "&Predicted",
    "expected": "&Expected",
    "contrast": "&Contrast",
    "edited": "&After the rewording",
}
"""Label switch texts (with their Alt+ keys); the label's name follows."""
NO_EDIT_NOTE = (
    "Type a rewording of the sentence in \u2018Rewording\u2019 and press Explain to compare the two."
)


def explanation_export(state: ExplainState, paper: str = DEFAULT_PAPER) -> ExportJob:
    """Snapshot the page for export: the explanation pages (drawn as the page draws them: word rows, method
    columns), and every word's numbers with the sentence and its labels as CSV."""
    if not state.ready:
        raise ValueError("nothing to export: no sentence explained yet")
    ex, cmp = state.explanation, state.comparison
    table = state.csv_table()
    stem = file_stem(ex.model_name, ex.text, "explained")
    return ExportJob(
        "explain", lambda: explanation_pages(ex, cmp, paper=paper), lambda: table, stem, "the explanation"
    )


AUTO_STEPS = 1
"""The steps box's lowest value, shown as 'auto' (one node is never a valid fixed choice)."""


class ExplainPage(QWidget):
    """Explain one sentence (usually a misfire), and compare it with a rewording of it."""

    explained = Signal()
    """A new result (or a change of label or metric) has been pushed into every view."""
    status = Signal(str)
    error = Signal(str)
    progress = Signal(str, int, int)
    """stage, done, total of the explanation being computed (emitted from the worker thread)."""

    def __init__(
        self,
        runner: JobRunner,
        exporter: ExportController | None = None,
        parent: QWidget | None = None,
        *,
        defaults: Callable[[], tuple[str, str | None]] | None = None,
    ) -> None:
        super().__init__(parent)
        self.state = ExplainState()
        self.lm: LoadedModel | None = None
        self.problem = ""
        """Why the open model cannot be explained ('' when it can)."""
        self._runner, self._exporter, self._defaults = runner, exporter, defaults
        self._wanted_expected: str | None = None
        """The expected label last asked for (kept while no model, or one without that label, is open)."""
        self.mask = HeadMask()
        """Heads switched off on the sentence page: the explanation is the masked model's."""
        self._stop_job = threading.Event()
        """Set to stop the explanation being computed (a newer request, or Esc)."""

        request = self._request_box()
        self.original = SentenceSide("Original sentence", self)
        self.edited_side = SentenceSide("Reworded sentence", self)
        sides = self._split(Qt.Orientation.Horizontal, [self.original, self.edited_side], [1, 1], [660, 660])
        self.agreement_panel = AgreementPanel(self)
        self.agreement = self.agreement_panel.table
        self.heads_panel = HeadsPanel(self.state.metric, self)
        self.heads_panel.metric_changed.connect(self.set_metric)
        self.head_map, self.head_list, self.metric_box = (
            self.heads_panel.map,
            self.heads_panel.list,
            self.heads_panel.metric_box,
        )
        bottom = self._split(
            Qt.Orientation.Horizontal, [self.agreement_panel, self.heads_panel], [1, 1], [660, 660]
        )
        main = self._split(Qt.Orientation.Vertical, [sides, bottom], [3, 1], [540, 215])

        self.caution = QLabel(f"<b>Read with care:</b> {html.escape(CAUTION)}", self)
        self.caution.setWordWrap(True)
        self.caution.setAccessibleName("Caution")
        self.caution.setContentsMargins(8, 2, 8, 4)
        column(self, [request, self._switch_row(), (main, 1), self.caution], margins=(6, 4, 6, 4), spacing=6)

        run = QShortcut(QKeySequence("Ctrl+Return"), self)
        run.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        run.activated.connect(self.run)
        stop = QShortcut(QKeySequence("Esc"), self)
        stop.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        stop.activated.connect(self.stop)
        self.progress.connect(self._show_progress)
        runner.busy_changed.connect(self._busy_changed)
        self.clear("No model open")

    # -- building ----------------------------------------------------------------------------------
    def _split(
        self, orientation: Qt.Orientation, widgets: list[QWidget], stretch: list[int], sizes: list[int]
    ) -> QSplitter:
        """A splitter over ``widgets`` whose parts never collapse to nothing."""
        splitter = QSplitter(orientation, self)
        for i, widget in enumerate(widgets):
            splitter.addWidget(widget)
            splitter.setStretchFactor(i, stretch[i])
        splitter.setSizes(sizes)
        splitter.setChildrenCollapsible(False)
        return splitter

    def _request_box(self) -> QWidget:
        box = QWidget(self)
        self.entry = QLineEdit(box)
        self.entry.setAccessibleName("Sentence to explain")
        self.entry.setPlaceholderText("The sentence to explain \u2014 press Enter")
        self.entry.setClearButtonEnabled(True)
        self.entry.returnPressed.connect(self.run)
        self.edited = QLineEdit(box)
        self.edited.setAccessibleName("Reworded sentence")
        self.edited.setPlaceholderText(
            "Optional: a rewording to compare with (change, add or drop words) \u2014 press Enter"
        )
        self.edited.setClearButtonEnabled(True)
        self.edited.returnPressed.connect(self.run)
        self.copy_button = QPushButton("&Copy sentence \u2193", box)
        self.copy_button.setToolTip("Start the rewording from the sentence above")
        self.copy_button.clicked.connect(self.copy_to_edit)
        self.expected = QComboBox(box)
        self.expected.setAccessibleName("Expected label")
        self.expected.setMinimumContentsLength(16)
        self.expected.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.expected.activated.connect(self._expected_picked)
        self.explain_button = QPushButton("Explain", box)
        self.explain_button.setToolTip("Explain the sentence (and compare the rewording) \u2014 Ctrl+Return")
        self.explain_button.clicked.connect(self.run)
        self.occlusion_box = combo(box, {m: f"{m} the word" for m in OCCLUSION_MODES}, "Occlusion")
        self.occlusion_box.activated.connect(lambda _i: self.run())
        self.baseline_box = combo(box, {b: b for b in BASELINES}, "Integrated Gradients baseline")
        for i, b in enumerate(BASELINES):
            self.baseline_box.setItemData(i, BASELINE_TEXT[b], Qt.ItemDataRole.ToolTipRole)
        self.baseline_box.activated.connect(lambda _i: self.run())
        self.steps_box = QSpinBox(box)
        self.steps_box.setRange(AUTO_STEPS, 512)
        self.steps_box.setSpecialValueText("auto")  # the lowest value: chosen for completeness within 1%
        self.steps_box.setValue(ExplainRequest("").steps or AUTO_STEPS)
        self.steps_box.setAccessibleName("Integrated Gradients steps")
        self.steps_box.setToolTip(
            "Integrated Gradients steps; 'auto' starts small and doubles until the attributions add up "
            f"to the logit difference within {fmt.percent(IG_TOLERANCE)}"
        )
        self.steps_box.editingFinished.connect(self._steps_changed)

        grid = control_grid(box)

        def buddy(text: str, widget: QWidget) -> QLabel:
            return buddy_label(text, widget, box)

        grid.addWidget(buddy("&Sentence:", self.entry), 0, 0)
        grid.addWidget(self.entry, 0, 1, 1, 2)
        grid.addWidget(buddy("Expected &label:", self.expected), 0, 3)
        grid.addWidget(self.expected, 0, 4, 1, 3)
        grid.addWidget(self.explain_button, 0, 7)
        grid.addWidget(buddy("Re&wording:", self.edited), 1, 0)
        grid.addWidget(self.edited, 1, 1)
        grid.addWidget(self.copy_button, 1, 2)
        grid.addWidget(buddy("&Occlusion:", self.occlusion_box), 1, 3)
        grid.addWidget(self.occlusion_box, 1, 4)
        grid.addWidget(buddy("IG &baseline:", self.baseline_box), 1, 5)
        options = QHBoxLayout()
        options.setSpacing(8)
        options.addWidget(self.baseline_box)
        options.addWidget(buddy("S&teps:", self.steps_box))
        options.addWidget(self.steps_box)
        grid.addLayout(options, 1, 6, 1, 2)
        grid.setColumnStretch(1, 1)
        return box

    def _switch_row(self) -> QWidget:
        row_widget = QWidget(self)
        row = QHBoxLayout(row_widget)
        row.setContentsMargins(8, 0, 8, 0)
        row.setSpacing(6)
        row.addWidget(QLabel("Evidence for:", row_widget))
        self.role_group = QButtonGroup(self)
        self.role_group.setExclusive(True)
        self.role_buttons: dict[str, QPushButton] = {}
        for role in ROLES:
            button = QPushButton(ROLE_BUTTONS[role], row_widget)
            button.setCheckable(True)
            button.setAccessibleName(f"Show the evidence for the {ROLES[role].lower()} label")
            if role == "contrast":
                button.setToolTip(
                    "Why the predicted label rather than the expected one: every method on "
                    "logit(predicted) \u2212 logit(expected)"
                )
            button.clicked.connect(lambda _c=False, r=role: self.set_role(r))
            self.role_group.addButton(button)
            self.role_buttons[role] = button
            row.addWidget(button)
        self.busy_note = QLabel("", row_widget)
        row.addSpacing(12)
        row.addWidget(self.busy_note)
        self.mask_note = QLabel("", row_widget)
        self.mask_note.setAccessibleName("Heads switched off")
        row.addSpacing(12)
        row.addWidget(self.mask_note)
        row.addStretch(1)
        self.colour_key = ColourKey(row_widget)
        self.colour_key.set_text("Shaded:", "0", "lane max")
        self.sign_key = SignKey(row_widget)
        self.sign_key.set_text("Signed:", "\u25c2 against", "for \u25b8")
        row.addWidget(self.colour_key)
        row.addWidget(self.sign_key)
        return row_widget

    # -- model -------------------------------------------------------------------------------------
    def set_model(self, lm: LoadedModel) -> None:
        """A new model: refill the label picker, forget the old result, re-explain if the page is showing."""
        self.lm = lm
        self.mask = HeadMask()  # a mask belongs to the model it was made on
        self._show_mask_note()
        self._runner.cancel(CHANNEL)
        self.expected.clear()
        self.expected.addItem(NO_EXPECTATION)
        self.expected.addItems(lm.labels if lm.has_prediction else [])
        self.set_expected(self._wanted_expected)
        try:
            require_classifier(lm)
            self.problem = ""
        except HeadcountError as exc:
            self.problem = f"{exc}. Open a sentence classifier to use this page."
        self.explain_button.setEnabled(not self.problem)
        self.clear(self.problem or f"{lm.name}: type a sentence and press Enter")
        if self.isVisible():
            self._run_if_idle()

    def set_mask(self, mask: HeadMask) -> None:
        """Explain on the model with ``mask``'s heads off; re-explain now if the page shows a result."""
        if mask.heads == self.mask.heads:
            return
        self.mask = mask
        self._show_mask_note()
        if self.state.ready:
            if self.isVisible():
                self.run()
            else:
                self.state.set_result(None)  # explained again when the page is shown

    def _show_mask_note(self) -> None:
        if self.mask:
            self.mask_note.setText(
                f"<b>{count(len(self.mask), 'head')} off:</b> {self.mask.describe(most=4)}"
            )
            self.mask_note.setToolTip(
                "Heads switched off on the Sentence page: every piece of evidence here is the masked model's. "
                "All heads on: Ctrl+Shift+A."
            )
        else:
            self.mask_note.setText("")
            self.mask_note.setToolTip("")

    def clear(self, note: str) -> None:
        self.state.set_result(None)
        for side in (self.original, self.edited_side):
            side.show_note(note)
        self.agreement_panel.clear()
        self.heads_panel.show_change(None, note)
        self._refresh_switch()

    def expected_label(self) -> str | None:
        return None if self.expected.currentIndex() <= 0 else self.expected.currentText()

    def set_expected(self, label: str | None) -> bool:
        """Pick ``label`` (None clears it); False when the model has no such label."""
        index = 0 if label is None else self.expected.findText(label)
        self.expected.setCurrentIndex(max(index, 0))
        return index >= 0

    # -- requests ----------------------------------------------------------------------------------
    def open(self, text: str, expected: str | None, edited: str = "") -> None:
        """Fill the entries and explain ``text`` (the corpus page's and the sentence page's one click)."""
        self.entry.setText(text)
        self.edited.setText(edited)
        self._wanted_expected = expected
        if not self.set_expected(expected) and self.lm is not None:
            self.error.emit(
                f"The model has no label \u2018{expected}\u2019; explaining without an expected label"
            )
        self.run()

    def _expected_picked(self, _index: int) -> None:
        self._wanted_expected = self.expected_label()
        self.run()

    def copy_to_edit(self) -> None:
        self.edited.setText(self.entry.text())
        self.edited.setFocus(Qt.FocusReason.OtherFocusReason)

    def request(self) -> ExplainRequest:
        """The request the controls describe now."""
        return ExplainRequest(
            text=self.entry.text(),
            expected=self.expected_label(),
            edited=self.edited.text(),
            metric=self.state.metric,
            steps=self.chosen_steps(),
            occlusion=self.occlusion_box.currentData(),
            baseline=self.baseline_box.currentData(),
            mask=self.mask,
        )

    def run(self) -> None:
        """Explain what the controls describe, in the background (a newer request replaces an older one)."""
        lm = self.lm
        if lm is None:
            self.clear("Open a model first (File \u203a Open model folder, Ctrl+O)")
            return
        if self.problem:
            self.clear(self.problem)
            self.status.emit(self.problem)
            return
        request = self.request()
        if not request.text.strip():
            self._runner.cancel(CHANNEL)
            self.clear("Type a sentence to explain, then press Enter")
            return

        self._stop_job.set()  # an older explanation stops at its next step
        stop = self._stop_job = threading.Event()

        def on_step(stage: str, done: int, total: int) -> None:
            if stop.is_set():
                raise ExplanationStopped("stopped: a newer request replaced it")
            self.progress.emit(stage, done, total)

        def job() -> ExplainResult:
            with MODEL_LOCK:
                on_step("analysis", 0, 1)  # stops here if it was replaced while it waited for the model
                return compute_explanation(lm, request, on_step)

        self._runner.submit(
            CHANNEL,
            job,
            lambda result: self._result_ready(lm, result),
            self._failed,
        )

    def _run_if_idle(self) -> None:
        if not self.state.ready and not self._runner.is_busy(CHANNEL) and self.entry.text().strip():
            self.run()

    def chosen_steps(self) -> int | None:
        """The steps box's value; None for 'auto'."""
        value = self.steps_box.value()
        return None if value == AUTO_STEPS else value

    def _steps_changed(self) -> None:
        if self.state.ready and self.state.result.request.steps != self.chosen_steps():
            self.run()

    def _result_ready(self, lm: LoadedModel, result: object) -> None:
        if lm is not self.lm:
            return  # the model changed while the sentence was being explained
        assert isinstance(result, ExplainResult)
        self.state.set_result(result)
        sentences = [result.explanation] + ([result.comparison.edited] if result.comparison else [])
        seconds = sum(s.timings.get("total", 0.0) for s in sentences)
        self.status.emit(f"Explained in {fmt.duration(seconds)}")
        self.refresh()

    def _failed(self, text: str) -> None:
        self.clear(f"Could not explain the sentence: {text}")
        self.error.emit(f"Could not explain the sentence: {text}")

    def stop(self) -> None:
        """Stop the explanation being computed (Esc); the views keep what they showed."""
        if self._runner.is_busy(CHANNEL):
            self._stop_job.set()
            self._runner.cancel(CHANNEL)
            self.status.emit("Explanation stopped")

    def _show_progress(self, stage: str, done: int, total: int) -> None:
        if not self._runner.is_busy(CHANNEL):
            return  # a late report of a job that has ended
        step = f"{stage} {done} of {count(total, 'word')}" if total > 1 else stage
        self.busy_note.setText(f"Explaining: {step}\u2026 (Esc stops)")

    def _busy_changed(self, channel: str, busy: bool) -> None:
        if channel == CHANNEL:
            self.busy_note.setText("Explaining\u2026 (Esc stops)" if self._runner.is_busy(CHANNEL) else "")

    # -- changes from the user ---------------------------------------------------------------------
    def set_role(self, role: str) -> None:
        self.state.set_role(role)
        if self.state.ready:
            self.refresh()

    def set_metric(self, metric: str) -> None:
        self.state.set_metric(metric)
        if self.state.ready:
            self.refresh()

    def changeEvent(self, event: QEvent) -> None:
        if event.type() == QEvent.Type.PaletteChange:
            if self.state.ready:
                self.refresh()  # the signed colours follow the palette
        super().changeEvent(event)

    def showEvent(self, event: object) -> None:
        if not self.entry.text().strip() and self._defaults is not None:
            text, expected = self._defaults()
            if text.strip():
                self.entry.setText(text)
                self._wanted_expected = expected
                self.set_expected(expected)
        if self.lm is not None:
            self._run_if_idle()
        super().showEvent(event)

    # -- export ------------------------------------------------------------------------------------
    def export_current(self) -> None:
        """Ask where to save the figure (PNG/SVG/PDF) and its CSV, then write them in the background."""
        if self._exporter is None:
            return
        try:
            job = explanation_export(self.state, self._exporter.paper())
        except ValueError as exc:
            self._exporter.failed.emit(str(exc))
            return
        self._exporter.ask_for(job, "Explanation")

    # -- pushing state into the views --------------------------------------------------------------
    def refresh(self) -> None:
        st = self.state
        if not st.ready:
            return
        self._refresh_switch()
        label = st.label()
        for side, panel in (("original", self.original), ("edited", self.edited_side)):
            s = st.sentence(side)
            if s is None:
                panel.show_note(NO_EDIT_NOTE)
                continue
            if st.evidence(side) is None:
                panel.show_note(
                    f"\u201c{s.text}\u201d \u2192 {s.prediction.label}: no misfire, so no contrast to show"
                )
                continue
            panel.set_subtitle(f"\u201c{s.text}\u201d")
            panel.prediction.setText(st.prediction_text(side))
            panel.show_words(st.words(side), st.columns(side), st.changed_words(side))
            panel.show_reading(st.hints(side), label)
            panel.captions.setText(f"{st.ig_caption(side)}.\n{st.occlusion_note(side)}.")
        self.agreement_panel.show_table(st.agreement(), label, len(st.explanation.words))
        self.heads_panel.show_change(st.comparison, NO_EDIT_NOTE)
        self.explained.emit()

    def _refresh_switch(self) -> None:
        roles = self.state.roles()
        for role, button in self.role_buttons.items():
            button.setVisible(role in roles)
            if role in roles:
                named = role != "contrast"  # the two labels are on the buttons beside it
                button.setText(f"{ROLE_BUTTONS[role]} \u00b7 {roles[role]}" if named else ROLE_BUTTONS[role])
            button.setChecked(role == self.state.role and role in roles)
