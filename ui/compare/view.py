"""The comparison view: a labelled set through the open model (A) and a second model (B).

Top: Run / Cancel with a progress bar (utterances done, time left), the export button and the headline (both accuracies,
macro-F1, agreement). Below, side by side: the 2 x 2 table of right and wrong answers with the
per-intent F1 changes; the utterances B fixed and those it broke (a click, or Enter, opens one
in the sentence page with its expected label, where both models are shown); the head change
map (B's head against A's at the same position) over the matching map (every head of B against
every head of A, each B head's closest A head framed).

It reads the data file named on the corpus page (``request_source``). The run goes through
:func:`ui.compare.state.compute_comparison` on the window's :class:`ui.widgets.worker.JobRunner`
("compare" channel) holding ``MODEL_LOCK``, through the same run controls as the corpus page
(:class:`ui.widgets.run_controls.RunControls`); Cancel sets an event polled before every batch.
"""

from __future__ import annotations

import html
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QSettings, Qt, Signal
from PySide6.QtGui import QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTabWidget,
    QWidget,
)

from inspector.checkpoint.loader import LoadedModel
from inspector.comparison.report import write_comparison
from inspector.comparison.run import PHASES, ComparisonReport
from inspector.corpus.report import ATTENTION_CAUTION
from inspector.formatting import count, head_name, points
from ui.compare.state import (
    CHANGED_HEADER,
    COMPARE_TITLES,
    INTENT_HEADER,
    TABLE_COLUMNS,
    TABLE_ROWS,
    change_description,
    change_texts,
    changed_rows,
    compute_comparison,
    headline_html,
    intent_rows,
    matching_description,
    moved_html,
    progress_text,
    table_texts,
)
from ui.corpus.state import CorpusRequest, cancel_text
from ui.widgets.export import ask_folder, write_folder
from ui.widgets.legend import ColourKey
from ui.widgets.matrix_map import MatrixMap
from ui.widgets.panel import Panel, column
from ui.widgets.run_controls import CANCELLED, FAILED, RunControls, RunHooks
from ui.widgets.tables import VALUE_ROLE, SignedBarDelegate, make_table, table_cell
from ui.widgets.worker import MODEL_LOCK, JobRunner

CHANNEL = "compare"
NO_SECOND = (
    "Open a second model to compare with: File \u203a Compare with a second model\u2026 (Ctrl+Shift+O)"
)


MAX_LABEL_COLUMN = 190
"""Widest a label column of the fixed/broken lists gets, so the utterance keeps most of the width."""


def _fit_columns(table: QTableWidget, columns: tuple[int, ...], widest: int) -> None:
    """Size ``columns`` to their contents, at most ``widest`` pixels each."""
    for col in columns:
        table.resizeColumnToContents(col)
        table.setColumnWidth(col, min(table.columnWidth(col), widest))


class ComparisonView(QWidget):
    """Run the comparison of two models over the corpus page's data file and show what changed."""

    open_sentence = Signal(str, object)
    """text, expected label: show it in the sentence page (both models)."""
    status = Signal(str)
    error = Signal(str)
    finished = Signal(str)
    """'done', 'cancelled' or 'failed' when a run ends."""

    def __init__(
        self,
        runner: JobRunner,
        settings: QSettings,
        request_source: Callable[[], CorpusRequest],
        parent: QWidget | None = None,
    ) -> None:
        super().__init__(parent)
        self.runner, self.settings, self.request_source = runner, settings, request_source
        self.lm_a: LoadedModel | None = None
        self.lm_b: LoadedModel | None = None
        self.report: ComparisonReport | None = None
        self.controls = RunControls(
            runner,
            CHANNEL,
            self,
            run_text="&Run comparison",
            titles=COMPARE_TITLES,
            descriptions=PHASES,
            step_text=progress_text,
            ready=lambda: self.lm_a is not None and self.lm_b is not None,
        )
        self.run_button, self.cancel_button = self.controls.run_button, self.controls.cancel_button
        self.phase_label = self.controls.phase_label
        (self.progress,) = self.controls.phase_bars.values()
        self.phase_label.setWordWrap(False)
        self.run_button.setToolTip("Run the data file named above through both models")
        self.run_button.clicked.connect(self.run)
        self.export_button = QPushButton("E&xport comparison\u2026", self)
        self.export_button.setToolTip(
            "Write comparison.json, fixed.csv, broken.csv, head_changes.csv, intent_changes.csv and the "
            "figures into a folder"
        )
        self.export_button.clicked.connect(self.export_current)
        controls = QHBoxLayout()
        controls.setSpacing(8)
        self.controls.add_to(controls)
        controls.setStretchFactor(self.progress, 2)
        controls.addWidget(self.phase_label, 3)
        controls.addWidget(self.export_button)
        self.headline = QLabel("", self)
        self.headline.setWordWrap(True)
        self.headline.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.headline.setAccessibleName("Comparison summary")

        top = QSplitter(Qt.Orientation.Horizontal, self)
        for panel in (self._table_panel(), self._intents_panel(), self._heads_panel()):
            top.addWidget(panel)
        top.setSizes([300, 380, 600])
        body = QSplitter(Qt.Orientation.Vertical, self)
        body.addWidget(top)
        body.addWidget(self._changed_panel())
        body.setSizes([290, 220])
        for split in (top, body):
            split.setChildrenCollapsible(False)
        caution = QLabel(f"<b>Read with care:</b> {html.escape(ATTENTION_CAUTION)}", self)
        caution.setWordWrap(True)
        column(self, [controls, self.headline, (body, 1), caution], margins=(6, 6, 6, 4), spacing=6)
        runner.busy_changed.connect(self._busy_changed)
        self.clear(NO_SECOND)

    # -- building ----------------------------------------------------------------------------------
    def _table_panel(self) -> QWidget:
        box = QWidget(self)
        self.table = make_table(box, TABLE_COLUMNS, "Right and wrong in both models")
        self.table.setRowCount(2)
        self.table.setVerticalHeaderLabels(list(TABLE_ROWS))
        self.table.verticalHeader().setVisible(True)
        self.table.setAlternatingRowColors(False)
        self.table.setWordWrap(True)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.table.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.table.setMaximumHeight(150)
        self.moved = QLabel("", box)
        self.moved.setWordWrap(True)
        self.moved.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.moved.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        column(box, [(self.table, 1), (self.moved, 1)], margins=(6, 0, 6, 4), spacing=8)
        panel = Panel("Right and wrong", box, self)
        panel.set_subtitle("rows: A, columns: B")
        return panel

    def _intents_panel(self) -> QWidget:
        self.intents = make_table(self, INTENT_HEADER, "Per-intent changes")
        header = self.intents.horizontalHeader()
        for col in (0, 1, 2):
            header.setSectionResizeMode(col, QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(3, QHeaderView.ResizeMode.Stretch)
        self.bar_delegate = SignedBarDelegate(self.intents)
        self.intents.setItemDelegateForColumn(3, self.bar_delegate)
        panel = Panel("Per intent", self.intents, self)
        panel.set_subtitle("F1, largest change first")
        return panel

    def _changed_panel(self) -> QWidget:
        self.lists = QTabWidget(self)
        self.fixed = self._changed_table("Utterances B fixed")
        self.broken = self._changed_table("Utterances B broke")
        self.lists.addTab(self.fixed, "Fixed")
        self.lists.addTab(self.broken, "Broken")
        panel = Panel("What B fixed and broke", self.lists, self)
        panel.set_subtitle("click or Enter: open in the sentence page")
        panel.setToolTip("A click (or Enter) opens the utterance in the sentence page, with both models")
        return panel

    def _changed_table(self, name: str) -> QTableWidget:
        table = make_table(self, CHANGED_HEADER, name)
        header = table.horizontalHeader()
        header.setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        table.setWordWrap(True)
        table.cellClicked.connect(lambda row, _col, t=table: self.open_row(t, row))
        for key in ("Return", "Enter"):
            enter = QShortcut(QKeySequence(key), table)
            enter.setContext(Qt.ShortcutContext.WidgetShortcut)
            enter.activated.connect(lambda t=table: self.open_row(t, t.currentRow()))
        return table

    def _heads_panel(self) -> QWidget:
        box = QWidget(self)
        self.change_map = MatrixMap("Head change map", box)
        self.change_map.setToolTip("B's heads, layers down: each against A's head at the same position")
        self.matching_map = MatrixMap("Head matching map", box)
        self.matching_map.setToolTip(
            "Rows: every head of B; columns: every head of A; framed: each B head's closest A head"
        )
        split = QSplitter(Qt.Orientation.Horizontal, box)
        split.addWidget(self.change_map)
        split.addWidget(self.matching_map)
        split.setSizes([260, 340])
        split.setChildrenCollapsible(False)
        column(box, [(split, 1)], margins=(6, 0, 6, 2), spacing=4)
        panel = Panel("Heads", box, self)
        panel.set_subtitle("left: B against A, same head \u00b7 right: every pair")
        key = ColourKey(panel)
        key.set_text("Mean JS divergence (bits):", "0 (same)", "largest")
        panel.footer.addWidget(key)
        return panel

    # -- models ------------------------------------------------------------------------------------
    def set_models(self, lm_a: LoadedModel | None, lm_b: LoadedModel | None) -> None:
        """New pair (or no second model): stop a running comparison and forget the old results."""
        self.stop()
        self.runner.cancel(CHANNEL)
        self.lm_a, self.lm_b = lm_a, lm_b
        if lm_a is None or lm_b is None:
            self.clear(NO_SECOND)
        else:
            self.clear(
                f"A: {lm_a.name} \u00b7 B: {lm_b.name} \u2014 press Run comparison to run the data file above "
                "through both"
            )

    # -- running -----------------------------------------------------------------------------------
    def is_running(self) -> bool:
        return self.controls.is_running()

    def run(self) -> None:
        """Start a comparison in the background (ignored while one runs)."""
        lm_a, lm_b = self.lm_a, self.lm_b
        if self.is_running():
            return
        if lm_a is None or lm_b is None:
            self.error.emit(NO_SECOND)
            return
        request = self.request_source()
        if not request.path:
            self.error.emit("Choose a data file above (a .csv or .jsonl with text and label)")
            return

        def job(hooks: RunHooks) -> object:
            with MODEL_LOCK:
                return compute_comparison(
                    lm_a, lm_b, request, on_step=hooks.on_step, should_stop=hooks.should_stop
                )

        self.controls.start(
            job,
            lambda result: self._done(lm_a, lm_b, result),
            self._failed,
            list(COMPARE_TITLES),
            PHASES["compare"],
        )
        self._set_running(True)

    def cancel(self) -> None:
        self.controls.cancel()

    def stop(self) -> None:
        self.controls.stop()

    def _done(self, lm_a: LoadedModel, lm_b: LoadedModel, result: object) -> None:
        if lm_a is not self.lm_a or lm_b is not self.lm_b:
            return
        if result == CANCELLED:
            self.phase_label.setText(cancel_text([], None, self.report is not None))
            self.controls.mark_cancelled()
            self.finished.emit("cancelled")
            return
        assert isinstance(result, ComparisonReport)
        self.show_report(result)
        self.phase_label.setText(f"Done: {count(len(result.data), 'utterance')}")
        self.status.emit(f"Comparison over {Path(result.data.path).name} done")
        self.finished.emit("done")

    def _failed(self, text: str) -> None:
        self.phase_label.setText(FAILED)
        self.error.emit(f"Comparison: {text}")
        self.finished.emit("failed")

    def _busy_changed(self, channel: str, busy: bool) -> None:
        if channel == CHANNEL:
            self._set_running(busy)

    def _set_running(self, running: bool) -> None:
        self.controls.refresh(running)
        self.export_button.setEnabled(self.report is not None)

    # -- showing -----------------------------------------------------------------------------------
    def clear(self, note: str) -> None:
        self.report = None
        self.headline.setText(note)
        for table in (self.intents, self.fixed, self.broken):
            table.setRowCount(0)
        self.table.clearContents()
        for view in (self.change_map, self.matching_map):
            view.set_data(None, [], [], note=note)
        self.moved.setText("")
        self.lists.setTabText(0, "Fixed")
        self.lists.setTabText(1, "Broken")
        self._set_running(self.is_running())

    def show_report(self, report: ComparisonReport) -> None:
        """Fill every part of the view from ``report``."""
        self.report = report
        self.headline.setText(headline_html(report))
        for r, line in enumerate(table_texts(report)):
            for c, text in enumerate(line):
                item = table_cell(text, tip=text)
                if r != c:  # the cells where the two models differ
                    font = item.font()
                    font.setBold(True)
                    item.setFont(font)
                self.table.setItem(r, c, item)
        rows = intent_rows(report)
        self.intents.setRowCount(len(rows))
        self.bar_delegate.peak = max((abs(r[3]) for r in rows), default=0.0) or 1.0
        for r, (label, f1_a, f1_b, delta, tip) in enumerate(rows):
            change = table_cell(points(delta, signed=True).split(" ")[0], True, tip)
            change.setData(VALUE_ROLE, float(delta))
            cells = [
                table_cell(label, tip=tip),
                table_cell(f1_a, True, tip),
                table_cell(f1_b, True, tip),
                change,
            ]
            for c, item in enumerate(cells):
                self.intents.setItem(r, c, item)
        for table, items, tab, name in (
            (self.fixed, report.fixed, 0, "Fixed"),
            (self.broken, report.broken, 1, "Broken"),
        ):
            rows_ = changed_rows(items)
            table.setRowCount(len(rows_))
            for r, cells in enumerate(rows_):
                for c, text in enumerate(cells):
                    table.setItem(r, c, table_cell(text, c == 0, text if c == 1 else ""))
            _fit_columns(table, (2, 3, 4), MAX_LABEL_COLUMN)
            table.resizeRowsToContents()
            self.lists.setTabText(tab, f"{name} ({len(items)})")
        self._fill_heads(report)
        self._set_running(self.is_running())

    def _fill_heads(self, report: ComparisonReport) -> None:
        m = report.matching
        same = m.same_position
        self.change_map.set_data(
            same,
            [f"L{l}" for l in range(m.layers_b)],
            [f"H{h}" for h in range(m.heads_b)],
            texts=change_texts(report),
            describe=lambda l, h: change_description(report, l, h),
        )
        names_a = [head_name(i // m.heads_a, i % m.heads_a) for i in range(m.layers_a * m.heads_a)]
        names_b = [head_name(j // m.heads_b, j % m.heads_b) for j in range(m.layers_b * m.heads_b)]
        best = m.js.argmin(axis=1)
        self.matching_map.set_data(
            m.js,
            names_b,
            names_a,
            block=m.heads_a if m.heads_a == m.heads_b else 0,
            marked={(j, int(i)) for j, i in enumerate(best)},
            describe=lambda r, c: matching_description(report, r, c),
        )
        self.moved.setText(moved_html(report))

    # -- utterances --------------------------------------------------------------------------------
    def open_row(self, table: QTableWidget, row: int) -> None:
        """Open the fixed or broken utterance at ``row`` in the sentence page with its expected label."""
        if self.report is None:
            return
        items = self.report.fixed if table is self.fixed else self.report.broken
        if 0 <= row < len(items):
            self.open_sentence.emit(items[row].text, items[row].label)

    # -- export ------------------------------------------------------------------------------------
    def export_current(self) -> None:
        """Ask for a folder, then write the comparison's files there (as ``headcount compare``) in the background."""
        if self.report is None:
            self.error.emit("Nothing to export yet: run the comparison first")
            return
        folder = ask_folder(self, self.settings, "Write the comparison into a folder")
        if folder is not None:
            self.export_report(folder)

    def export_report(self, folder: Path) -> int:
        """Write the comparison's files into ``folder`` on the export channel; returns the job number."""
        report = self.report
        if report is None:
            raise ValueError("nothing to export: no comparison yet")
        return write_folder(
            self.runner,
            lambda: write_comparison(report, folder),
            lambda files: f"Wrote {count(files, 'comparison file')} in {folder}",
            "the comparison",
            self.status.emit,
            self.error.emit,
        )
