"""Colours of the window: the one visual language of :mod:`inspector.palette`, and the system palette.

Weights
    Every non-negative quantity in the window (attention weight, rollout or
    relevance, importance, similarity, a share of a confusion row) is drawn with
    the project's one sequential map, :data:`inspector.palette.SEQUENTIAL`
    (cividis: Nunez, Anderton & Renslow 2018, "Optimizing colormaps with
    consideration for color vision deficiency"). It runs from dark blue (low) to
    yellow (high), keeps lightness rising monotonically, and reads the same for
    the common colour-vision deficiencies. The map is sampled **once**, at
    import, into a 256 x 4 ``uint8`` lookup table (:data:`LUT`) by the core;
    views turn numbers into pixels with one vectorised table lookup
    (:func:`to_rgba`), never with matplotlib at draw time. Signed quantities use
    the diverging map of the same module (see :mod:`ui.widgets.signed`).

Selection
    One accent colour marks what is selected (head, query token, hovered
    cell): a vermilion from the Okabe-Ito colour-blind-safe set, lightened on a
    dark palette. Selection never relies on hue alone: it is always a frame,
    an underline or bold text as well.

Light or dark
    Backgrounds, text and neutral marks come from the widget's ``QPalette``,
    so the window follows the system's light or dark appearance.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtGui import QColor, QImage, QPalette

from inspector import palette

COLORMAP_NAME = palette.SEQUENTIAL
"""The one sequential map for weights (the exported figures use the same, from :mod:`inspector.palette`)."""

LUT: np.ndarray = palette.table(palette.SEQUENTIAL)
"""[256, 4] RGBA lookup table sampled once from :data:`COLORMAP_NAME`."""

ACCENT_LIGHT = palette.ACCENT
"""Vermilion accent on a light palette (Okabe-Ito vermilion, darkened for contrast on white)."""
ACCENT_DARK = palette.ACCENT_DARK
"""The same hue, lightened for a dark palette."""


def to_codes(values: np.ndarray, vmax: float | np.ndarray, vmin: float = 0.0) -> np.ndarray:
    """Map values linearly onto table indices 0..255 (clipped); NaN maps to 0.

    float32 input stays float32 (the mosaic colours ~10^6 values per rebuild).
    """
    v = np.asarray(values)
    if v.dtype != np.float32:
        v = v.astype(np.float64, copy=False)
    factor = 255.0 / np.maximum(np.asarray(vmax, dtype=v.dtype) - v.dtype.type(vmin), 1e-12)
    scaled = np.asarray((v - v.dtype.type(vmin)) * factor.astype(v.dtype) + v.dtype.type(0.5))
    np.fmax(scaled, 0, out=scaled)  # fmax also turns NaN into 0
    np.minimum(scaled, 255, out=scaled)
    return scaled.astype(np.uint8)


def code_for(value: float, vmax: float, vmin: float = 0.0) -> int:
    """:func:`to_codes` of one number, in plain Python (views colour hundreds of chips per paint)."""
    scaled = (float(value) - vmin) * (255.0 / max(vmax - vmin, 1e-12)) + 0.5
    return 0 if scaled != scaled else int(min(max(scaled, 0.0), 255.0))


def to_rgba(values: np.ndarray, vmax: float | np.ndarray, vmin: float = 0.0) -> np.ndarray:
    """Colour an array of any shape: returns ``values.shape + (4,)`` uint8 RGBA."""
    return LUT[to_codes(values, vmax, vmin)]


def qcolor_for(value: float, vmax: float, vmin: float = 0.0) -> QColor:
    """The map's colour for one value (for chips, legends and single marks)."""
    r, g, b, a = (int(c) for c in LUT[code_for(value, vmax, vmin)])
    return QColor(r, g, b, a)


def readable_text_on(color: QColor) -> QColor:
    """Black or white, whichever reads better on ``color`` (relative luminance)."""
    lum = 0.2126 * color.redF() ** 2.2 + 0.7152 * color.greenF() ** 2.2 + 0.0722 * color.blueF() ** 2.2
    return QColor("#111111") if lum > 0.22 else QColor("#ffffff")


def is_dark(palette: QPalette) -> bool:
    """True when the palette's window colour is dark."""
    return palette.color(QPalette.ColorRole.Window).lightness() < 128


def dim_text(palette: QPalette, alpha: float = 0.62) -> QColor:
    """The palette's text colour, faded for secondary text."""
    colour = QColor(palette.color(QPalette.ColorRole.WindowText))
    colour.setAlphaF(alpha)
    return colour


def accent(palette: QPalette) -> QColor:
    """The selection accent suited to the palette."""
    return QColor(ACCENT_DARK if is_dark(palette) else ACCENT_LIGHT)


def rgba_image(rgba: np.ndarray) -> QImage:
    """Wrap an [h, w, 4] uint8 RGBA array in a QImage that owns a copy of the pixels."""
    rgba = np.ascontiguousarray(rgba, dtype=np.uint8)
    h, w = rgba.shape[:2]
    return QImage(rgba.data, w, h, 4 * w, QImage.Format.Format_RGBA8888).copy()


def colour_bar_image(width: int, height: int, *, vertical: bool = False) -> QImage:
    """A gradient strip of the weight map (low at left/bottom, high at right/top)."""
    if vertical:
        ramp = LUT[np.linspace(255, 0, max(height, 1)).astype(np.uint8)][:, None, :]
        return rgba_image(np.repeat(ramp, max(width, 1), axis=1))
    ramp = LUT[np.linspace(0, 255, max(width, 1)).astype(np.uint8)][None, :, :]
    return rgba_image(np.repeat(ramp, max(height, 1), axis=0))
