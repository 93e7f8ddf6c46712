"""Where the bundled sample model and data live."""

from __future__ import annotations

from pathlib import Path

PROJECT_ROOT = Path(__file__).resolve().parent.parent
SAMPLE_MODEL = PROJECT_ROOT / "sample_models" / "ferry_intents"
SAMPLE_EVAL = PROJECT_ROOT / "sample_models" / "data" / "ferry_eval.csv"


def sample_model_available() -> bool:
    """True once the bundled sample checkpoint is in place."""
    return (SAMPLE_MODEL / "config.json").is_file() and (SAMPLE_MODEL / "model.safetensors").is_file()
