"""The panels of the explain page: one sentence's evidence, the agreement table, the per-head change.

Each panel only shows what :class:`ui.explain.state.ExplainState` derived; it
keeps its secondary text faded in light and dark palettes alike.
"""

from __future__ import annotations

import html

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtGui import QFont, QPalette
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QScrollArea,
    QSizePolicy,
    QTableWidget,
    QTableWidgetItem,
    QWidget,
)

from inspector import formatting as fmt
from inspector.explanation.faithfulness import AGREEMENT_THRESHOLD, METHOD_LABELS
from inspector.explanation.rewording import RewordingComparison
from inspector.measures.metrics import METRIC_LABELS, METRIC_NAMES
from ui.explain.head_change import HeadChangeMap
from ui.explain.state import AgreementTable, MethodColumn, disagrees
from ui.explain.word_bars import EvidenceTable
from ui.widgets.colormap import dim_text
from ui.widgets.panel import Panel, column
from ui.widgets.signed import SignKey

UNLIMITED = 16777215
"""Qt's largest widget size (QWIDGETSIZE_MAX)."""


def combo(parent: QWidget, items: dict[str, str], name: str) -> QComboBox:
    """A combo box of ``items`` (data key -> text) with an accessible name."""
    box = QComboBox(parent)
    box.setAccessibleName(name)
    for key, text in items.items():
        box.addItem(text, key)
    return box


class ExplainPanel(Panel):
    """A panel whose subtitle may shrink (it carries whole sentences) and whose faded labels follow the palette."""

    def __init__(self, title: str, body: QWidget, parent: QWidget | None = None) -> None:
        super().__init__(title, body, parent)
        self._faded: list[QLabel] = []
        self.subtitle.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.subtitle.setMinimumWidth(40)

    def fade(self, label: QLabel) -> QLabel:
        """Show ``label`` as secondary text (the palette's text colour, faded), now and after palette changes."""
        self._faded.append(label)
        self._fade(label)
        return label

    def _fade(self, label: QLabel) -> None:
        pal = QPalette(label.palette())
        pal.setColor(label.foregroundRole(), dim_text(self.palette(), 0.8))
        label.setPalette(pal)

    def changeEvent(self, event: QEvent) -> None:
        if event.type() == QEvent.Type.PaletteChange:
            for label in getattr(self, "_faded", []):
                self._fade(label)
        super().changeEvent(event)


class SentenceSide(ExplainPanel):
    """One sentence: its prediction, the word evidence, the reading of the agreement, the captions."""

    def __init__(self, title: str, parent: QWidget | None = None) -> None:
        table = EvidenceTable()
        scroll = QScrollArea()
        scroll.setWidget(table)
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QScrollArea.Shape.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.verticalScrollBar().valueChanged.connect(lambda _v: table.update())  # keeps its header on top
        body = QWidget()
        prediction, reading, captions = QLabel("", body), QLabel("", body), QLabel("", body)
        column(body, [prediction, (scroll, 1), reading, captions], margins=0, spacing=4)
        body.layout().addStretch(0)
        super().__init__(title, body, parent)
        self.table, self.scroll = table, scroll
        self.prediction, self.reading, self.captions = prediction, reading, captions
        reading.setAccessibleName("Reading of the agreement")
        for label, kind in ((prediction, Qt.TextFormat.RichText), (reading, Qt.TextFormat.RichText)):
            label.setTextFormat(kind)
        captions.setTextFormat(Qt.TextFormat.PlainText)
        for label in (prediction, reading, captions):
            label.setWordWrap(True)
            label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            label.setContentsMargins(8, 0, 8, 0)
        self.fade(captions)

    def show_words(self, words: list[str], columns: list[MethodColumn], changed: set[int]) -> None:
        """Fill the evidence table; it takes the height it needs (up to what the panel has), notes follow it."""
        self.table.set_data(words, columns, changed)
        self.scroll.setMaximumHeight(self.table.heightForWidth(self.table.width()) + 2)

    def show_reading(self, hints: list[str], label: str) -> None:
        """The hints as a short list, led by a warning sign when anything disagrees."""
        flagged = any(not hint.startswith("No disagreement") for hint in hints)
        lead = "\u26a0 <b>Check before acting</b>" if flagged else "\u2713 <b>Agrees</b>"
        items = "<br>".join(f"\u2022 {html.escape(hint)}" for hint in hints)
        self.reading.setText(f"{lead} (evidence for {html.escape(label)}):<br>{items}")

    def show_note(self, note: str) -> None:
        for label in (self.prediction, self.reading, self.captions):
            label.setText("")
        self.set_subtitle("")
        self.table.set_data([], [], note=note)
        self.scroll.setMaximumHeight(UNLIMITED)


class AgreementPanel(ExplainPanel):
    """Spearman rho of each relevance against occlusion, per sentence and label; low values flagged."""

    def __init__(self, parent: QWidget | None = None) -> None:
        table = QTableWidget()
        table.setAccessibleName("Agreement with occlusion")
        table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        table.setSelectionMode(QAbstractItemView.SelectionMode.NoSelection)
        table.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        table.setAlternatingRowColors(True)
        table.setFrameShape(QTableWidget.Shape.NoFrame)
        super().__init__("Agreement with occlusion", table, parent)
        self.table = table
        key = QLabel(
            "\u03c1 = 1: the same ranking as leaving words out \u00b7 0 or below: unrelated or opposite", self
        )
        key.setWordWrap(True)
        self.footer.addWidget(self.fade(key))

    def clear(self) -> None:
        self.table.clear()
        self.table.setRowCount(0)
        self.table.setColumnCount(0)
        self.set_subtitle("")

    def show_table(self, table: AgreementTable, label: str, words: int) -> None:
        """Rows: (sentence, label); columns: methods. The chosen label's rows in bold; low rho in bold with ✕."""
        grid = self.table
        grid.clear()
        grid.setRowCount(len(table.headers))
        grid.setColumnCount(len(table.titles))
        grid.setVerticalHeaderLabels(table.headers)
        grid.setHorizontalHeaderLabels(table.titles)
        for c, method in enumerate(table.methods):
            grid.horizontalHeaderItem(c).setToolTip(METHOD_LABELS[method])
        bold = QFont(self.font())
        bold.setBold(True)
        for r, (_side, name) in enumerate(table.rows):
            if name == label:
                grid.verticalHeaderItem(r).setFont(bold)
            for c, value in enumerate(table.values[r]):
                low = disagrees(value)
                item = QTableWidgetItem(fmt.correlation(value) + (" \u2715" if low else ""))
                item.setTextAlignment(Qt.AlignmentFlag.AlignCenter)
                if low:
                    item.setFont(bold)
                    item.setToolTip(f"below {AGREEMENT_THRESHOLD}: ranks the words unlike occlusion")
                elif value is None:
                    item.setToolTip("undefined: too few words, or a constant ranking")
                if name == label:
                    item.setFont(bold)
                grid.setItem(r, c, item)
        grid.resizeRowsToContents()
        self.set_subtitle(
            f"Spearman \u03c1 against occlusion over {fmt.count(words, 'word')} \u00b7 \u2715 below {AGREEMENT_THRESHOLD}"
        )


class HeadsPanel(ExplainPanel):
    """The per-head change map of a rewording, the metric picker and the list of the heads that changed most."""

    metric_changed = Signal(str)

    def __init__(self, metric: str, parent: QWidget | None = None) -> None:
        body = QWidget()
        self.map = HeadChangeMap(body)
        self.list = QLabel("", body)
        self.list.setTextFormat(Qt.TextFormat.RichText)
        self.list.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.list.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        row = QHBoxLayout(body)
        row.setContentsMargins(8, 0, 8, 0)
        row.addWidget(self.map, 3)
        row.addWidget(self.list, 2)
        super().__init__("What the rewording did to the heads", body, parent)
        self.metric_box = combo(self, {n: METRIC_LABELS[n] for n in METRIC_NAMES}, "Per-head metric")
        self.metric_box.setCurrentIndex(METRIC_NAMES.index(metric))
        self.metric_box.currentIndexChanged.connect(
            lambda _i: self.metric_changed.emit(self.metric_box.currentData())
        )
        self.add_control(self.metric_box, "&Metric:")
        self.key = SignKey(self)
        self.key.set_text("Reworded \u2212 original:", "fell", "rose")
        self.footer.addWidget(self.key)

    def show_change(self, cmp: RewordingComparison | None, note: str) -> None:
        """Fill the map and the list from ``cmp`` (``note`` instead when there is no rewording)."""
        if cmp is None:
            self.map.set_data(None, None, [], note)
            self.list.setText("")
            self.set_subtitle("")
            return
        self.map.set_data(cmp.metric_before, cmp.metric_after, cmp.top_heads)
        self.map.setToolTip(f"{METRIC_LABELS[cmp.metric]}: reworded minus original sentence, per head")
        self.set_subtitle("reworded \u2212 original")
        rows = "".join(
            f"<tr><td>{fmt.head_name(h.layer, h.head)}</td>"
            f"<td align=right>&nbsp;{fmt.weight(h.before)} \u2192 {fmt.weight(h.after)}</td>"
            f"<td align=right>&nbsp;<b>{fmt.signed(h.change)}</b></td></tr>"
            for h in cmp.top_heads
        )
        self.list.setText(f"<b>Changed most</b> (framed)<table cellspacing=2>{rows}</table>")
