"""The window's treatment of signed values (evidence for or against a label, a metric that rose or fell).

Non-negative relevances (attention rollout and its variants) keep the one
sequential map of :mod:`ui.widgets.colormap`. Values that can be negative are
never put on that map: they are drawn as bars on either side of a zero line, so
the sign is read from the *side* first and from the colour second, in the two
ends of the project's one diverging map (:data:`inspector.palette.DIVERGING`):

* positive (pushes toward the label; the metric rose): to the right, green;
* negative (pushes away from the label; the metric fell): to the left, purple.

The side carries the sign on its own and the number printed beside the bar
carries it again, so the reading survives every common colour-vision deficiency
and greyscale printing. Cells of a grid (the per-head change map) use the same
two colours, with the opacity growing with the magnitude and the signed number
printed in the cell. The vermilion accent is never used for a sign: it marks the
selection only.
"""

from __future__ import annotations

from PySide6.QtCore import QRect, QRectF
from PySide6.QtGui import QColor, QPainter, QPalette

from inspector import palette as visual
from ui.widgets.colormap import dim_text, is_dark
from ui.widgets.legend import _Key


def signed_colour(palette: QPalette, value: float) -> QColor:
    """The diverging map's green for a positive value, its purple for a negative one (zero counts as positive)."""
    return QColor(visual.signed_hex(value, dark=is_dark(palette)))


def blend(base: QColor, over: QColor, amount: float) -> QColor:
    """``over`` laid on ``base`` with opacity ``amount`` (0..1), as an opaque colour."""
    a = max(0.0, min(1.0, amount)) * over.alphaF()
    return QColor.fromRgbF(
        base.redF() * (1 - a) + over.redF() * a,
        base.greenF() * (1 - a) + over.greenF() * a,
        base.blueF() * (1 - a) + over.blueF() * a,
    )


def draw_signed_bar(painter: QPainter, rect: QRectF, value: float, peak: float, palette: QPalette) -> QRectF:
    """Draw ``value`` as a bar from the centre of ``rect`` (right: positive, left: negative); returns the bar."""
    mid = rect.center().x()
    painter.fillRect(QRectF(mid - 0.5, rect.top() - 2, 1.0, rect.height() + 4), dim_text(palette, 0.45))
    share = 0.0 if peak <= 0 else min(abs(value) / peak, 1.0)
    length = share * (rect.width() / 2 - 1)
    bar = (
        QRectF(mid, rect.top(), length, rect.height())
        if value >= 0
        else QRectF(mid - length, rect.top(), length, rect.height())
    )
    painter.fillRect(bar, signed_colour(palette, value))
    return bar


class SignKey(_Key):
    """Key of the signed bars: caption, what left means, a two-sided sample, what right means."""

    def draw_sample(self, painter: QPainter, rect: QRect) -> None:
        bars = QRectF(rect).adjusted(0, 1, 0, -1)
        for value in (-0.8, 0.8):
            draw_signed_bar(painter, bars, value, 1.0, self.palette())
