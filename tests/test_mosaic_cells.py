"""The head mosaic's cells: block maxima and colour codes, against their definitions."""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("PySide6")

from ui.sentence.head_grid import head_codes, resample_cells  # noqa: E402
from ui.widgets.colormap import to_codes  # noqa: E402


@pytest.mark.parametrize(("m", "cell"), [(7, 3), (40, 9), (130, 36), (5, 12)])
def test_cells_are_block_maxima_and_codes_of_the_colour_map(m, cell):
    """Shrinking: cell (r, c) is the maximum of the r-th and c-th near-equal blocks of rows and columns
    (block i covers positions i*m//cell up to (i+1)*m//cell); enlarging repeats pixels; each head's code
    is its value scaled by its own maximum.

    Reference: the definitions in head_grid's docstrings, evaluated with plain Python loops; the colour
    codes from ui.widgets.colormap.to_codes (checked against matplotlib's cividis in test_ui_launch.py).
    """
    rng = np.random.default_rng(m)
    att = rng.random((2, 3, m, m)).astype(np.float32)
    edges = [i * m // cell for i in range(cell)] + [m]
    expected = np.zeros((2, 3, cell, cell), dtype=np.float32)
    for r in range(cell):
        for c in range(cell):
            if cell >= m:
                expected[..., r, c] = att[..., r * m // cell, c * m // cell]
            else:
                expected[..., r, c] = att[..., edges[r] : edges[r + 1], edges[c] : edges[c + 1]].max((-2, -1))
    np.testing.assert_array_equal(resample_cells(att, cell), expected)
    vmax = att.max(axis=(-2, -1))[..., None, None]
    np.testing.assert_array_equal(head_codes(att, cell, per_head=True), to_codes(expected, vmax))
    np.testing.assert_array_equal(head_codes(att, cell, per_head=False), to_codes(expected, 1.0))
