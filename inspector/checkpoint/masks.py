"""Head masks: which heads are switched off, read from and written to ``prune_mask.json``.

The file format is the one a corpus run writes: ``{"layer": [head, ...]}`` with
the layer as a string key, layers and heads counted from 0, for example
``{"2": [3], "3": [0, 5]}`` switches off L2H3, L3H0 and L3H5. An empty object
switches nothing off.

A :class:`HeadMask` is applied with :func:`masked`: for as long as the context
lasts, the model runs with a gate of 0 on every masked head
(:class:`inspector.checkpoint.capture.HeadGates`), so every analysis, explanation
or corpus run inside it sees the masked model.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from inspector.errors import HeadcountError
from inspector.formatting import count, head_name

if TYPE_CHECKING:
    from inspector.checkpoint.loader import LoadedModel

Head = tuple[int, int]


def mask_json(removed: Iterable[Head]) -> dict[str, list[int]]:
    """``{"layer": [head, ...]}`` with layer numbers as strings, layers and heads from 0, sorted."""
    out: dict[int, set[int]] = {}
    for layer, head in removed:
        out.setdefault(int(layer), set()).add(int(head))
    return {str(layer): sorted(heads) for layer, heads in sorted(out.items())}


@dataclass(frozen=True)
class HeadMask:
    """A set of switched-off heads (layer, head), both counted from 0."""

    heads: tuple[Head, ...] = ()
    """Sorted, without repeats."""
    source: str | None = None
    """The file it was read from, if any."""

    @classmethod
    def of(cls, heads: Iterable[Head], source: str | None = None) -> HeadMask:
        return cls(tuple(sorted({(int(l), int(h)) for l, h in heads})), source)

    def __len__(self) -> int:
        return len(self.heads)

    def __bool__(self) -> bool:
        return bool(self.heads)

    def __contains__(self, head: object) -> bool:
        return head in set(self.heads)

    def toggled(self, layer: int, head: int) -> HeadMask:
        """The same mask with one head switched the other way."""
        target = (int(layer), int(head))
        rest = set(self.heads) ^ {target}
        return HeadMask.of(rest)

    def with_layer(self, layer: int, num_heads: int) -> HeadMask:
        """Switch a whole layer: off if any of its heads is on, else all back on."""
        layer_heads = {(int(layer), h) for h in range(num_heads)}
        current = set(self.heads)
        rest = current | layer_heads if not layer_heads <= current else current - layer_heads
        return HeadMask.of(rest)

    def to_json(self) -> dict[str, list[int]]:
        """The file format: ``{"layer": [head, ...]}``."""
        return mask_json(self.heads)

    def gates(self, num_layers: int, num_heads: int) -> np.ndarray:
        """Gate values [layers, heads]: 0 for masked heads, 1 elsewhere."""
        gates = np.ones((num_layers, num_heads), dtype=np.float32)
        for layer, head in self.heads:
            gates[layer, head] = 0.0
        return gates

    def names(self) -> list[str]:
        return [head_name(l, h) for l, h in self.heads]

    def describe(self, most: int = 12) -> str:
        """``L0H1, L2H3`` (the first ``most`` names, then how many more), or ``no head``."""
        if not self.heads:
            return "no head"
        names = self.names()
        if len(names) <= most:
            return ", ".join(names)
        return ", ".join(names[:most]) + f" and {len(names) - most} more"

    def summary(self, num_layers: int, num_heads: int) -> str:
        """``3 of 24 heads off: L0H1, ...``; a whole layer counts in full."""
        total = num_layers * num_heads
        return f"{len(self)} of {count(total, 'head')} off: {self.describe()}"


def parse_mask(doc: object, where: str = "mask") -> HeadMask:
    """Read the ``{"layer": [head, ...]}`` document of a mask file.

    Raises
    ------
    HeadcountError
        One line naming what is malformed (not an object, a key that is not a
        layer number, a value that is not a list of head numbers).
    """
    if not isinstance(doc, dict):
        raise HeadcountError(f'{where}: a mask is a JSON object like {{"2": [3, 5]}} (layer: heads)')
    heads: list[Head] = []
    for key, value in doc.items():
        text = str(key).strip()
        if not text.isdigit():
            raise HeadcountError(f"{where}: '{key}' is not a layer number (layers count from 0)")
        if not isinstance(value, list) or not all(
            isinstance(v, int) and not isinstance(v, bool) and v >= 0 for v in value
        ):
            raise HeadcountError(f"{where}: layer {text} must list head numbers from 0, like [0, 3]")
        heads.extend((int(text), v) for v in value)
    return HeadMask.of(heads)


def missing_heads(mask: HeadMask, num_layers: int, num_heads: int) -> list[Head]:
    """The masked heads that a ``num_layers`` x ``num_heads`` model does not have."""
    return [(l, h) for l, h in mask.heads if l >= num_layers or h >= num_heads]


def check_mask(mask: HeadMask, num_layers: int, num_heads: int, where: str = "mask") -> HeadMask:
    """Return ``mask`` if every head exists in the model, else raise a one-line error naming the others."""
    bad = missing_heads(mask, num_layers, num_heads)
    if bad:
        names = ", ".join(head_name(l, h) for l, h in bad[:8]) + (" ..." if len(bad) > 8 else "")
        raise HeadcountError(
            f"{where}: {count(len(bad), 'head')} not in this model: {names} "
            f"(it has layers L0-L{num_layers - 1} and heads H0-H{num_heads - 1})"
        )
    return mask


def read_mask(path: str | Path, lm: LoadedModel | None = None) -> HeadMask:
    """Read a mask file; with ``lm`` also check that every head exists in that model.

    Raises
    ------
    HeadcountError
        One line: the file is missing or not JSON, malformed, or names heads the model lacks.
    """
    path = Path(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise HeadcountError(f"{path}: no such mask file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise HeadcountError(f"{path}: cannot read the mask ({exc})") from None
    except json.JSONDecodeError as exc:
        raise HeadcountError(f"{path}: not JSON ({exc.msg}, line {exc.lineno})") from None
    mask = parse_mask(doc, where=path.name)
    mask = HeadMask(mask.heads, str(path))
    if lm is not None:
        check_mask(mask, lm.num_layers, lm.num_heads, where=path.name)
    return mask


@contextmanager
def masked(lm: LoadedModel, mask: HeadMask | None) -> Iterator[None]:
    """Run everything inside the ``with`` block on the masked model (no-op for an empty mask).

    The masked heads get a gate of 0 on the input of their layer's output
    projection W_O, which removes exactly their term from the attention output
    (Vaswani et al. 2017, multi-head attention: ``Concat(head_1..head_h) W_O``).
    """
    if not mask:
        yield
        return
    import torch

    from inspector.checkpoint.capture import HeadGates

    check_mask(mask, lm.num_layers, lm.num_heads)
    with HeadGates(lm, torch.from_numpy(mask.gates(lm.num_layers, lm.num_heads))):
        yield
