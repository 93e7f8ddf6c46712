"""Starting the window from the command line, offscreen, and the colour table it draws with."""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
from matplotlib import colormaps

from tests.families import build_checkpoint

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _launch(*args: str, tmp_path) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", XDG_CONFIG_HOME=str(tmp_path / "config"))
    code = "import sys; from ui.launcher import main; raise SystemExit(main(sys.argv[1:]))"
    return subprocess.run(
        [sys.executable, "-c", code, *args], cwd=ROOT, env=env, capture_output=True, text=True, timeout=240
    )


def test_headcount_open_runs_offscreen_and_saves_a_screenshot(tmp_path, minilm_dir):
    """`headcount open MODEL_DIR --screenshot` opens the window offscreen, shows the sentence, exits 0.

    Reference: PNG signature (PNG specification, section 5.2).
    """
    model = build_checkpoint("bert", tmp_path / "tiny", minilm_dir)
    shot = tmp_path / "shot.png"
    done = _launch(
        "open", str(model), "--text", "when is the next sailing", "--screenshot", str(shot), tmp_path=tmp_path
    )
    assert done.returncode == 0, done.stderr
    assert shot.read_bytes().startswith(b"\x89PNG\r\n\x1a\n")


def test_headcount_open_bad_folder_exits_with_status_2(tmp_path):
    """A folder that is not a checkpoint is reported in the window; the process ends with status 2, no traceback.

    Reference: the project's CLI convention (user errors exit with status 2); common practice, no source.
    """
    shot = tmp_path / "bad.png"
    done = _launch("open", str(tmp_path), "--screenshot", str(shot), tmp_path=tmp_path)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    assert shot.is_file()


def test_colour_table_matches_matplotlib_cividis():
    """The window's 256-entry lookup table reproduces matplotlib's cividis within one 8-bit step.

    Reference: matplotlib's 'cividis' colormap (Nunez, Anderton & Renslow 2018).
    """
    pytest.importorskip("PySide6")
    from ui.widgets.colormap import LUT, to_rgba

    values = np.linspace(0.0, 1.0, 1001)
    expected = np.round(colormaps["cividis"](np.round(values * 255) / 255) * 255)
    got = to_rgba(values, 1.0).astype(float)
    assert np.abs(got - expected).max() <= 1.0
    assert LUT.shape == (256, 4) and LUT.dtype == np.uint8
    lightness = LUT[:, :3].astype(float) @ [0.2126, 0.7152, 0.0722]
    assert np.all(np.diff(lightness) >= -0.5)  # rises monotonically (perceptually ordered)
