"""The comparison strip of the sentence page: the second model's prediction and what changed.

Shown above the two head mosaics while a second model (B) is open beside the first (A): B's name
and prediction, whether both models agree, the heads that changed most, how many kept exactly
the same weights, the change of rollout and heads of B that resemble a different head of A.
A checkpoint folder dropped on the strip replaces B; the close button forgets B.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QDragEnterEvent, QDropEvent, QFont, QPalette
from PySide6.QtWidgets import QFrame, QGridLayout, QLabel, QSizePolicy, QToolButton, QWidget

from ui.sentence.pair_state import PairState
from ui.widgets.colormap import dim_text
from ui.widgets.export import ExportJob, slug


def dropped_folder(event: QDragEnterEvent | QDropEvent) -> Path | None:
    """The first local folder a drag carries, or None."""
    for url in event.mimeData().urls() if event.mimeData().hasUrls() else []:
        path = Path(url.toLocalFile())
        if url.isLocalFile() and path.is_dir():
            return path
    return None


class SecondModelStrip(QFrame):
    """Two lines about model B; a drop target for another B; a close button."""

    closed = Signal()
    folder_dropped = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.setAcceptDrops(True)
        self.setAccessibleName("Second model")
        self.badge = QLabel("B", self)
        font = QFont(self.badge.font())
        font.setBold(True)
        font.setPointSizeF(font.pointSizeF() * 1.25)
        self.badge.setFont(font)
        self.first = QLabel("", self)
        bold = QFont(self.first.font())
        bold.setBold(True)
        self.first.setFont(bold)
        self.first.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.second = QLabel("", self)
        pal = QPalette(self.second.palette())
        pal.setColor(QPalette.ColorRole.WindowText, dim_text(self.palette(), 0.8))
        self.second.setPalette(pal)
        for label in (self.first, self.second):
            label.setWordWrap(True)
            label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        close = QToolButton(self)
        close.setText("\u2715")
        close.setAutoRaise(True)
        close.setToolTip("Close the second model (File \u203a Close the second model)")
        close.clicked.connect(self.closed.emit)
        grid = QGridLayout(self)
        grid.setContentsMargins(10, 3, 4, 3)
        grid.setHorizontalSpacing(10)
        grid.setVerticalSpacing(0)
        grid.addWidget(self.badge, 0, 0, 2, 1)
        grid.addWidget(self.first, 0, 1)
        grid.addWidget(self.second, 1, 1)
        grid.addWidget(close, 0, 2, 2, 1)
        grid.setColumnStretch(1, 1)

    def set_lines(self, first: str, second: str) -> None:
        self.first.setText(first)
        self.first.setToolTip(first)
        self.second.setText(second)
        self.second.setToolTip(second)

    def text(self) -> str:
        return f"{self.first.text()}\n{self.second.text()}"

    def dragEnterEvent(self, event: QDragEnterEvent) -> None:
        if dropped_folder(event) is not None:
            event.acceptProposedAction()
        else:
            event.ignore()

    def dropEvent(self, event: QDropEvent) -> None:
        folder = dropped_folder(event)
        if folder is not None:
            event.acceptProposedAction()
            self.folder_dropped.emit(str(folder))


def comparison_export(pair: PairState) -> ExportJob:
    """Snapshot the current sentence's comparison for export: the head change map and a CSV of every head.

    The CSV has the columns of ``head_changes.csv`` (:data:`inspector.comparison.report.HEAD_HEADER`).
    """
    from inspector.comparison.report import HEAD_HEADER, head_rows
    from inspector.figures.comparison import change_map_figure

    if not pair.ready:
        raise ValueError("nothing to compare yet: open a second model and type a sentence")
    c = pair.comparison
    rows = head_rows(c.matching, c.a.head_metrics.as_dict(), c.b.head_metrics.as_dict())
    table = (list(HEAD_HEADER), [["" if row[k] is None else row[k] for k in HEAD_HEADER] for row in rows])
    where = f"the sentence \u201c{c.text}\u201d"
    return ExportJob(
        "comparison",
        lambda: change_map_figure(c.matching, pair.name_a, pair.name_b, where),
        lambda: table,
        f"{slug(pair.name_a, 16)}-vs-{slug(pair.name_b, 16)}-{slug(c.text)}",
    )
