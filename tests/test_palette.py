"""The one visual language: one sequential map, one colour-blind-safe diverging map, one accent."""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib import colormaps
from matplotlib.colors import to_rgb

from inspector import palette

# Machado, Oliveira & Fernandes (2009), "A Physiologically-based Model for Simulation of Color Vision
# Deficiency", severity 1.0 matrices on linear RGB (from memory).
DEFICIENCIES = {
    "protanopia": np.array(
        [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]]
    ),
    "deuteranopia": np.array(
        [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]]
    ),
    "tritanopia": np.array(
        [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]]
    ),
}


def _linear(c: np.ndarray) -> np.ndarray:
    c = np.asarray(c, dtype=np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _encoded(c: np.ndarray) -> np.ndarray:
    c = np.clip(c, 0.0, 1.0)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1 / 2.4) - 0.055)


def _lab(rgb: np.ndarray) -> np.ndarray:
    """CIELAB (D65) of an sRGB colour in 0..1."""
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ _linear(
        rgb
    )
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > 0.008856, np.cbrt(t), 7.787 * t + 16 / 116)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _delta_e(a, b) -> float:
    return float(np.linalg.norm(_lab(np.asarray(a)) - _lab(np.asarray(b))))


@pytest.mark.parametrize("dark", [False, True])
@pytest.mark.parametrize("kind", sorted(DEFICIENCIES))
def test_signed_colours_stay_apart_for_colour_blind_readers(kind, dark):
    """The negative and positive bar colours differ by more than 25 CIE76 units under each simulated dichromacy.

    Reference: Machado, Oliveira & Fernandes (2009) simulation matrices (severity 1.0, from memory); CIE76
    colour difference on CIELAB (CIE 15:2004); sRGB transfer function (IEC 61966-2-1).
    """
    m = DEFICIENCIES[kind]
    neg = _encoded(m @ _linear(palette.signed_rgb(-1.0, dark=dark)))
    pos = _encoded(m @ _linear(palette.signed_rgb(1.0, dark=dark)))
    assert _delta_e(neg, pos) > 25


def test_no_signed_colour_looks_like_the_accent():
    """The accent (selection) is far from both bar colours, so a sign is never mistaken for a selection.

    Reference: CIE76 colour difference on CIELAB (CIE 15:2004); a difference above about 20 is plainly visible
    (common practice, no source).
    """
    accent = to_rgb(palette.ACCENT)
    for value in (-1.0, 1.0):
        assert _delta_e(accent, palette.signed_rgb(value)) > 30


def test_the_two_maps_are_the_named_matplotlib_maps():
    """The window's tables reproduce matplotlib's cividis and PRGn; cividis gets lighter from end to end.

    Reference: matplotlib's 'cividis' (Nunez, Anderton & Renslow 2018) and 'PRGn' (ColorBrewer) colormaps;
    CIELAB lightness L* (CIE 15:2004).
    """
    for name in (palette.SEQUENTIAL, palette.DIVERGING):
        lut = palette.table(name).astype(float) / 255
        expected = colormaps[name](np.linspace(0, 1, 256))
        np.testing.assert_allclose(lut, expected, atol=1 / 255)
    lightness = [_lab(c[:3])[0] for c in palette.table(palette.SEQUENTIAL).astype(float) / 255]
    assert np.all(np.diff(lightness) > -0.5)
    assert lightness[-1] - lightness[0] > 60
    with pytest.raises(ValueError):
        palette.table("viridis")


def test_signed_bars_in_the_window_use_the_diverging_ends(qapp):
    """The window's signed colour is the core's diverging end for each sign, on light and dark palettes.

    Reference: inspector.palette (the one definition both sides read); common practice, no source.
    """
    from PySide6.QtGui import QColor, QPalette

    from ui.widgets.signed import signed_colour

    light = QPalette()
    light.setColor(QPalette.ColorRole.Window, QColor("#ffffff"))
    dark = QPalette()
    dark.setColor(QPalette.ColorRole.Window, QColor("#202124"))
    for pal, is_dark in ((light, False), (dark, True)):
        for value in (-0.4, 0.7):
            assert signed_colour(pal, value).name() == palette.signed_hex(value, dark=is_dark)
    assert signed_colour(light, -1).name() != signed_colour(light, 1).name()
