"""Headcount's core: load an encoder checkpoint, capture per-head attention, analyse it.

Importing this package forces the Hugging Face libraries into offline mode *before*
any of them is imported, so nothing in Headcount can reach a model hub or send
telemetry. This package never imports Qt.
"""

from __future__ import annotations

import os

_OFFLINE_ENV = {
    "HF_HUB_OFFLINE": "1",
    "TRANSFORMERS_OFFLINE": "1",
    "HF_DATASETS_OFFLINE": "1",
    "HF_HUB_DISABLE_TELEMETRY": "1",
    "HF_HUB_DISABLE_IMPLICIT_TOKEN": "1",
    "DISABLE_TELEMETRY": "1",
    "TOKENIZERS_PARALLELISM": "false",
}
os.environ.update(_OFFLINE_ENV)

__version__ = "0.1.0"

from inspector.errors import HeadcountError  # noqa: E402

__all__ = ["HeadcountError", "__version__"]
