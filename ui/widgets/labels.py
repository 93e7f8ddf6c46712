"""Token labels on crowded axes: shorten long ones, and show every k-th when they would overlap."""

from __future__ import annotations

import numpy as np

LABEL_CHARS = 14
"""Longer token labels are shortened with an ellipsis."""


def short_label(label: str, limit: int = LABEL_CHARS) -> str:
    return label if len(label) <= limit else label[: limit - 1] + "\u2026"


def label_step(count: int, pitch: float, needed: float) -> int:
    """Show every k-th label so that labels of height ``needed`` never overlap."""
    return max(1, int(np.ceil(needed / max(pitch, 1e-6)))) if count else 1
