"""Head mosaic at the size it gets in a 1366 x 768 window: tile size, blocks and paint cost per model shape.

Run:  .venv/bin/python -m bench.bench_mosaic   (or: .venv/bin/python bench/bench_mosaic.py; offscreen)

For 4 x 4, 12 x 12 and 24 x 16 heads at 128 tokens (random attention rows: the cost depends on the
shape, not on the values), in a mosaic of 614 x 249 pixels (its size in the window at 1366 x 768):
the tile size and number of blocks chosen, the tile size one block would get, a repaint from the
cached image and a rebuild for new matrices (resample + colour lookup + meters + blocks) with a
repaint. The ratio "rebuild, blocks / rebuild, one block" compares the two layouts in the same run
(one block forced by replacing the block planner); larger tiles cost more to colour, and the ratio
includes that.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402

from bench.common import median_seconds  # noqa: E402

SHAPES = ((4, 4), (12, 12), (24, 16))
TOKENS = 128
SIZE = (614, 249)
TARGET_MS = 30.0


def measure(app, layers: int, heads: int) -> dict[str, float]:
    import ui.sentence.head_grid as hg

    rng = np.random.default_rng(0)
    att = rng.random((layers, heads, TOKENS, TOKENS)).astype(np.float32)
    att /= att.sum(-1, keepdims=True)
    metric = rng.random((layers, heads))
    copies = [att, att.copy()]
    grid = hg.HeadGrid()
    grid.resize(*SIZE)
    grid.show()

    def rebuild() -> None:
        copies.reverse()
        grid.set_data(copies[0], metric, (0.0, 1.0), per_head=True)
        grid.repaint()

    rebuild()
    app.processEvents()
    geo = grid.grid_geometry()
    out = {
        "cell": geo.cell,
        "blocks": geo.blocks,
        "cached": 1000 * median_seconds(grid.repaint, repeats=40),
        "rebuild": 1000 * median_seconds(rebuild, repeats=15),
    }
    plan = hg.plan_blocks
    hg.plan_blocks = lambda w, h, L, H, aisle: (L, *hg.fit_cells(w, h, L, H))
    try:
        rebuild()
        out["one_block_cell"] = grid.grid_geometry().cell
        out["one_block_rebuild"] = 1000 * median_seconds(rebuild, repeats=15)
    finally:
        hg.plan_blocks = plan
    grid.close()
    return out


def main() -> int:
    from ui.app import application

    app = application()
    print(f"head mosaic at {SIZE[0]}x{SIZE[1]} px (its size at 1366x768), {TOKENS} tokens:")
    for layers, heads in SHAPES:
        m = measure(app, layers, heads)
        print(
            f"  {layers:2d}x{heads:<2d}: tiles {m['cell']:3d} px in {m['blocks']} block(s)"
            f" (one block: {m['one_block_cell']:3d} px); repaint cached {m['cached']:6.2f} ms,"
            f" rebuild {m['rebuild']:6.2f} ms (target <= {TARGET_MS:.0f} ms),"
            f" blocks / one block {m['rebuild'] / m['one_block_rebuild']:.2f}x"
        )
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    print(f"numpy {np.__version__}, load average {load} on {os.cpu_count()} cores")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
