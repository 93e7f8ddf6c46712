"""The one visual language, shared by the window and every exported figure.

Three colours with three meanings, defined here once (the core may not import
Qt, so the window reads these tables instead of keeping its own):

Sequential map, for non-negative quantities
    Attention weights, rollout and other relevances, importance, similarity,
    shares and counts: matplotlib's ``cividis`` (Nunez, Anderton & Renslow
    2018), dark blue (low) to yellow (high), lightness rising monotonically, read
    alike with the common colour-vision deficiencies. Exported figures print the
    numbers in the cells wherever they fit.

Diverging map, for signed quantities
    Integrated Gradients, occlusion, contrastive evidence, a metric that rose or
    fell: ColorBrewer's purple-green ``PRGn`` (Brewer, Harrower et al.,
    colorbrewer2.org, marked colour-blind safe there), purple for negative
    (against the label, fell) and green for positive (for the label, rose). The
    sign never rests on colour: a signed value is always a bar to the left or
    right of a zero line, or a number with its sign, as well. Neither end is
    orange or red, so nothing signed can be mistaken for the accent.

Accent, for the selection and nothing else
    The selected head, query token, hovered cell or chosen prune mask: an
    Okabe-Ito vermilion, darkened for contrast on white paper, lightened on a
    dark window palette; always a frame, an underline or bold text as well.
"""

from __future__ import annotations

import numpy as np
from matplotlib import colormaps
from matplotlib.colors import Colormap

SEQUENTIAL = "cividis"
"""The one sequential map (non-negative quantities)."""
DIVERGING = "PRGn"
"""The one diverging map (signed quantities): purple = negative, green = positive."""

ACCENT = "#c85400"
"""The accent on white (paper, light window palette): Okabe-Ito vermilion, darkened for contrast."""
ACCENT_DARK = "#ff8a3d"
"""The same hue, lightened for a dark window palette."""

INK = "#222222"
"""Text and neutral marks on paper."""
DIM_INK = "#555555"
"""Secondary text on paper (captions, notes)."""

SIGNED_ENDS = (0.12, 0.88)
"""Where the negative and positive bar colours are sampled from the diverging map (light background)."""
SIGNED_ENDS_DARK = (0.3, 0.7)
"""The same on a dark background: lighter samples, so the bars stand out from the dark window."""

SEQUENTIAL_TEXT = f"{SEQUENTIAL} (dark blue = low, yellow = high)"
"""How captions name the sequential map."""
DIVERGING_TEXT = (
    f"{DIVERGING} (purple = negative, green = positive; the bar's side and the number's sign say the same)"
)
"""How captions name the diverging map."""


def sequential_map() -> Colormap:
    """The sequential map for matplotlib, with NaN drawn transparent (gaps in a mosaic)."""
    return colormaps[SEQUENTIAL].with_extremes(bad=(1, 1, 1, 0))


def diverging_map() -> Colormap:
    """The diverging map for matplotlib (centre it on zero: ``vmin=-m, vmax=m``)."""
    return colormaps[DIVERGING].with_extremes(bad=(1, 1, 1, 0))


def table(name: str, size: int = 256) -> np.ndarray:
    """``[size, 4]`` uint8 RGBA lookup table sampled evenly from the named map (``SEQUENTIAL`` or ``DIVERGING``)."""
    if name not in (SEQUENTIAL, DIVERGING):
        raise ValueError(f"not one of the project's maps: {name!r}")
    rgba = colormaps[name](np.linspace(0.0, 1.0, size))
    return np.ascontiguousarray((rgba * 255.0 + 0.5).astype(np.uint8))


def signed_rgb(value: float, *, dark: bool = False) -> tuple[float, float, float]:
    """Bar colour of a signed value as RGB in 0..1: the diverging map's negative or positive end.

    Zero counts as positive (it has no bar anyway).
    """
    low, high = SIGNED_ENDS_DARK if dark else SIGNED_ENDS
    r, g, b, _ = colormaps[DIVERGING](low if value < 0 else high)
    return float(r), float(g), float(b)


def signed_hex(value: float, *, dark: bool = False) -> str:
    """:func:`signed_rgb` as ``#rrggbb``."""
    return "#" + "".join(f"{round(255 * c):02x}" for c in signed_rgb(value, dark=dark))


def text_on(rgb: tuple[float, ...]) -> str:
    """Black or white, whichever reads better on ``rgb`` (relative luminance, sRGB approximated by gamma 2.2)."""
    lum = 0.2126 * rgb[0] ** 2.2 + 0.7152 * rgb[1] ** 2.2 + 0.0722 * rgb[2] ** 2.2
    return "#111111" if lum > 0.22 else "#ffffff"
