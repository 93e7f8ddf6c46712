"""Start-up check of the Qt binding: refuse to crash silently on a release known to leak.

PySide6 6.12.0 drops one reference to ``None`` on every ``QPainter.setPen`` /
``setBrush`` / ``setFont`` call (and on several draw calls). A few hundred
repaints drain the count to zero and the interpreter aborts with ``Fatal Python
error: none_dealloc``. ``pyproject.toml`` pins the binding below 6.12; this check
catches an environment where that pin was bypassed and says so in one line
before the window starts, instead of an abort minutes later.
"""

from __future__ import annotations

import sys

LEAKING_RELEASES = ("6.12.0",)
"""PySide6 releases known to drop references to None in QPainter calls."""

FIX = "pip install 'PySide6-Essentials>=6.6,<6.12' into the project's .venv (make setup does it)"

_PROBE_CALLS = 64


def binding_version() -> str:
    import PySide6

    return str(PySide6.__version__)


def painter_leaks_none() -> bool:
    """True when QPainter calls on this binding drop references to None (measured, not looked up).

    Paints into a small off-screen image ``_PROBE_CALLS`` times and compares
    ``sys.getrefcount(None)`` before and after; a healthy binding leaves it
    unchanged or higher. Needs a QGuiApplication (or QApplication) to exist.
    """
    from PySide6.QtGui import QColor, QImage, QPainter, QPen

    image = QImage(4, 4, QImage.Format.Format_ARGB32)
    painter = QPainter(image)
    try:
        before = sys.getrefcount(None)
        for _ in range(_PROBE_CALLS):
            painter.setPen(QPen(QColor(0, 0, 0), 1.0))
        lost = before - sys.getrefcount(None)
    finally:
        painter.end()
    return lost >= _PROBE_CALLS // 2


def binding_warning() -> str | None:
    """One line for stderr when the installed Qt binding is known or measured to leak, else None."""
    version = binding_version()
    if version in LEAKING_RELEASES or painter_leaks_none():
        return (
            f"headcount: warning: PySide6 {version} leaks a reference on every repaint and the window "
            f"will abort after a few hundred; fix: {FIX}"
        )
    return None
