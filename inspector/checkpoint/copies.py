"""A second, private copy of an open model, for a long job beside the interactive one.

A corpus run puts hooks (attention recorder, head gates) on the model for minutes;
with its own copy it never has to hold the model the window analyses sentences
with. A copy doubles the weights in memory, so it is made only when it fits
comfortably in the memory the system reports as available.
"""

from __future__ import annotations

import copy
import dataclasses
import os

from inspector.checkpoint.families import layer_parts
from inspector.checkpoint.loader import LoadedModel

COPY_SHARE = 0.5
"""A copy is made only if it needs at most this share of the available memory."""
OVERHEAD = 1.25
"""Bytes a copy needs per byte of weights (buffers, the tokenizer, the allocator's slack)."""


def model_bytes(lm: LoadedModel) -> int:
    """Bytes held by the model's parameters and buffers."""
    model = lm.model
    tensors = [*model.parameters(), *model.buffers()]
    return int(sum(t.numel() * t.element_size() for t in tensors))


def available_memory() -> int | None:
    """Memory the system can give without swapping, in bytes (Linux ``MemAvailable``), or None if unknown."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def copy_fits(lm: LoadedModel, available: int | None = None) -> bool:
    """True when a private copy of ``lm`` needs at most :data:`COPY_SHARE` of the available memory."""
    available = available_memory() if available is None else available
    return available is not None and OVERHEAD * model_bytes(lm) <= COPY_SHARE * available


def private_copy(lm: LoadedModel) -> LoadedModel:
    """An independent copy of ``lm``: its own weights, modules (hooks go on these) and tokenizer.

    Call it while nothing else runs the model (hold the window's model lock).
    """
    model = copy.deepcopy(lm.model)
    return dataclasses.replace(
        lm,
        model=model,
        tokenizer=copy.deepcopy(lm.tokenizer),
        parts=layer_parts(model.base_model, lm.family),
    )
