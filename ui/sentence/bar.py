"""The sentence bar: text entry (re-analysed as you type), prediction, expected label, misfire mark."""

from __future__ import annotations

import html

from PySide6.QtCore import QPointF, QRectF, QSize, Qt, QTimer, Signal
from PySide6.QtGui import QFont, QFontMetrics, QPainter, QPalette, QPen
from PySide6.QtWidgets import (
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QSizePolicy,
    QWidget,
)

from inspector import formatting as fmt
from inspector.measures.analysis import Prediction
from ui.widgets.colormap import dim_text
from ui.widgets.legend import meter_colours

DEBOUNCE_MS = 200
"""Pause after the last keystroke before the sentence is analysed again."""
TOP_K = 5
NO_EXPECTATION = "(not set)"


class TopBars(QWidget):
    """The k most probable labels as horizontal bars with percentages."""

    ROW = 18

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.items: list[tuple[str, float]] = []
        self.expected: str | None = None
        self.reference: dict[str, float] | None = None
        """The full model's probabilities, marked as a tick on each bar while heads are switched off."""
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Fixed)
        self.setFixedHeight(self.ROW * TOP_K + 2)

    def set_items(
        self, items: list[tuple[str, float]], expected: str | None, reference: dict[str, float] | None = None
    ) -> None:
        self.items, self.expected, self.reference = items, expected, reference
        tip = "\n".join(
            f"{lab}: {fmt.percent(p)}"
            + (f" (every head on: {fmt.percent(reference[lab])})" if reference else "")
            for lab, p in items
        )
        if reference:
            tip += "\nThe tick on each bar marks the probability with every head on."
        self.setToolTip(f"The {fmt.count(len(items), 'most probable label')}\n{tip}" if items else "")
        self.update()

    def drawn_text(self) -> list[str]:
        """Each label and its probability, as painted."""
        return [text for label, prob in self.items for text in (label, fmt.percent(prob))]

    def sizeHint(self) -> QSize:
        return QSize(360, self.ROW * TOP_K + 2)

    def paintEvent(self, _event: object) -> None:
        p = QPainter(self)
        pal = self.palette()
        bold = QFont(self.font())
        bold.setBold(True)
        fm = QFontMetrics(bold)
        label_w = min(
            max((fm.horizontalAdvance(lab) for lab, _ in self.items), default=60) + 12, self.width() // 2
        )
        pct_w = fm.horizontalAdvance(fmt.percent(1.0)) + 8
        bar_w = max(self.width() - label_w - pct_w, 20)
        track, fill = meter_colours(pal)
        for i, (label, prob) in enumerate(self.items):
            y = i * self.ROW
            is_top, is_expected = i == 0, label == self.expected
            p.setFont(bold if is_top else self.font())
            p.setPen(pal.color(QPalette.ColorRole.WindowText) if is_top else dim_text(pal, 0.8))
            text = fm.elidedText(label, Qt.TextElideMode.ElideRight, label_w - 10)
            p.drawText(
                QRectF(0, y, label_w - 8, self.ROW),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                text,
            )
            bar = QRectF(label_w, y + 5, bar_w, self.ROW - 10)
            p.fillRect(bar, track)
            p.fillRect(
                QRectF(bar.x(), bar.y(), bar_w * prob, bar.height()),
                pal.color(QPalette.ColorRole.WindowText) if is_top else fill,
            )
            if is_expected:
                p.setPen(QPen(pal.color(QPalette.ColorRole.WindowText), 1, Qt.PenStyle.DashLine))
                p.drawRect(bar.adjusted(-1, -2, 1, 2))
            if self.reference and label in self.reference:
                x = bar.x() + bar_w * self.reference[label]
                p.setPen(QPen(pal.color(QPalette.ColorRole.WindowText), 2))
                p.drawLine(QPointF(x, y + 2), QPointF(x, y + self.ROW - 2))
            p.setFont(self.font())
            p.setPen(pal.color(QPalette.ColorRole.WindowText))
            p.drawText(
                QRectF(label_w + bar_w, y, pct_w, self.ROW),
                Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter,
                fmt.percent(prob),
            )
        p.end()


class SentenceBar(QWidget):
    """Type a sentence; see the predicted label, its rivals, and whether it misfired."""

    sentence_changed = Signal(str)
    """Emitted after the debounce pause with the entry's text."""
    expected_changed = Signal(object)
    """The expected label (str) or None."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.entry = QLineEdit(self)
        self.entry.setPlaceholderText("Type a sentence to analyse \u2014 the views follow as you type")
        self.entry.setClearButtonEnabled(True)
        self.entry.setAccessibleName("Sentence")
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(DEBOUNCE_MS)
        self.entry.textChanged.connect(lambda _t: self.timer.start())
        self.timer.timeout.connect(lambda: self.sentence_changed.emit(self.entry.text()))

        self.expected = QComboBox(self)
        self.expected.setAccessibleName("Expected label")
        self.expected.setMinimumContentsLength(16)
        self.expected.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.expected.currentIndexChanged.connect(self._on_expected)
        expected_label = QLabel("E&xpected:", self)
        expected_label.setBuddy(self.expected)

        self.predicted = QLabel("", self)
        font = QFont(self.predicted.font())
        font.setPointSizeF(font.pointSizeF() * 1.35)
        font.setBold(True)
        self.predicted.setFont(font)
        self.predicted.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.verdict = QLabel("", self)
        self.verdict.setObjectName("verdict")
        self.bars = TopBars(self)
        self.encoder_note = QLabel(
            "Bare encoder: this checkpoint has no classification head, so there is no prediction.", self
        )
        self.encoder_note.setWordWrap(True)
        self.encoder_note.hide()
        self.mask_note = QLabel("", self)
        self.mask_note.setWordWrap(True)
        self.mask_note.setAccessibleName("Heads switched off")
        self.mask_note.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.mask_note.setTextFormat(Qt.TextFormat.RichText)
        self.mask_note.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        # Room for two lines: what switching heads off did wraps at laptop widths and was cut at the bottom.
        self.mask_note.setMinimumHeight(2 * self.mask_note.fontMetrics().lineSpacing() + 2)
        self.heads_row = QHBoxLayout()
        """Row under the prediction: the heads-off controls (added by the page) and what switching heads off did."""
        self.heads_row.setSpacing(4)
        self.heads_row.addWidget(QLabel("Heads:", self))
        self.heads_row.addSpacing(4)
        self.heads_row.addWidget(self.mask_note, 1)

        entry_label = QLabel("&Sentence:", self)
        entry_label.setBuddy(self.entry)
        grid = QGridLayout(self)
        grid.setContentsMargins(8, 6, 8, 6)
        grid.setHorizontalSpacing(10)
        grid.addWidget(entry_label, 0, 0)
        grid.addWidget(self.entry, 0, 1, 1, 3)
        grid.addWidget(expected_label, 1, 0)
        row = QHBoxLayout()
        row.addWidget(self.expected)
        row.addSpacing(16)
        self.predicted_caption = QLabel("Predicted:", self)
        row.addWidget(self.predicted_caption)
        row.addSpacing(4)
        row.addWidget(self.predicted)
        row.addSpacing(12)
        row.addWidget(self.verdict)
        row.addStretch(1)
        grid.addLayout(row, 1, 1)
        grid.addWidget(self.encoder_note, 1, 1)  # shares the cell of the prediction row, hidden for encoders
        grid.addLayout(self.heads_row, 2, 0, 1, 4)
        grid.addWidget(self.bars, 0, 4, 3, 1)
        grid.setColumnStretch(1, 3)
        grid.setColumnStretch(4, 2)
        self._prediction_widgets = [
            expected_label,
            self.expected,
            self.predicted_caption,
            self.predicted,
            self.verdict,
            self.bars,
        ]

    # -- model -------------------------------------------------------------------------------------
    def set_labels(self, labels: list[str], has_prediction: bool) -> None:
        """New model: fill the expected-label picker, or hide the prediction part for a bare encoder."""
        self.expected.blockSignals(True)
        self.expected.clear()
        self.expected.addItem(NO_EXPECTATION)
        self.expected.addItems(labels)
        self.expected.blockSignals(False)
        for w in self._prediction_widgets:
            w.setVisible(has_prediction)
        self.encoder_note.setVisible(not has_prediction)
        self.set_prediction(None, misfire=False)

    def expected_label(self) -> str | None:
        return None if self.expected.currentIndex() <= 0 else self.expected.currentText()

    def set_expected(self, label: str | None) -> bool:
        """Pick ``label`` (None clears it); False if the model has no such label."""
        index = 0 if label is None else self.expected.findText(label)
        if index < 0:
            return False
        self.expected.setCurrentIndex(index)
        return True

    def set_prediction(
        self,
        prediction: Prediction | None,
        *,
        misfire: bool,
        full: Prediction | None = None,
        mask_text: str = "",
    ) -> None:
        """Show a prediction; with heads switched off, ``full`` is the full model's and ``mask_text`` says so."""
        self.set_mask_text(mask_text)
        if prediction is None:
            self.predicted.setText("\u2014")
            self.verdict.setText("")
            self.bars.set_items([], None)
            return
        self.predicted_caption.setText("Predicted with heads off:" if mask_text else "Predicted:")
        self.predicted.setText(prediction.label)
        self.bars.set_items(
            prediction.top(TOP_K), self.expected_label(), full.probabilities if full and mask_text else None
        )
        if misfire:
            self.verdict.setText(
                "<span style='font-weight:600'>\u2715 Misfire</span> "
                f"\u2014 expected <b>{self.expected_label()}</b>"
            )
            self.verdict.setToolTip("The prediction differs from the expected label.")
        elif self.expected_label():
            self.verdict.setText("\u2713 as expected")
            self.verdict.setToolTip("")
        else:
            self.verdict.setText("")

    def add_heads_control(self, widget: QWidget) -> None:
        """Put a heads-off control (button) before the heads-off text."""
        self.heads_row.insertWidget(self.heads_row.count() - 1, widget)

    def set_mask_text(self, text: str) -> None:
        """What switching heads off did ('' = every head on: a hint instead)."""
        if text:
            self.mask_note.setText(html.escape(text))
            self.mask_note.setToolTip(text)
        else:
            dim = dim_text(self.palette(), 0.75).name()
            self.mask_note.setText(
                f"<span style='color:{dim}'>all on \u2014 double-click a head in the mosaic (or select it and "
                "press Space) to switch it off and see what changes</span>"
            )
            self.mask_note.setToolTip("")

    def is_misfire_shown(self) -> bool:
        return "Misfire" in self.verdict.text()

    def _on_expected(self, _index: int) -> None:
        self.expected_changed.emit(self.expected_label())
