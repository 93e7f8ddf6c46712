"""Write a checkpoint in which the masked heads contribute nothing.

For every switched-off head, the columns of its layer's attention output
projection W_O that read the head's context vector are set to zero, and so are
the rows (weights and biases) of the query, key and value projections that
compute it. Tensor shapes do not change, so the folder is a standard
checkpoint: it loads in plain transformers with no custom code, and its outputs
equal those of the gated model (:class:`inspector.checkpoint.capture.HeadGates`)
that the pruning simulation and ``--mask`` run. Where the heads sit is read
from the adapter table (:mod:`inspector.checkpoint.families`).

The folder is built under a temporary name beside the target and renamed into
place at the end, so a failure never leaves half a checkpoint; a non-empty
target is refused unless the caller forces it.
"""

from __future__ import annotations

import datetime
import json
import os
import shutil
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from inspector.checkpoint.families import head_columns, head_rows
from inspector.checkpoint.masks import HeadMask, check_mask
from inspector.errors import HeadcountError
from inspector.formatting import count, percent, points

if TYPE_CHECKING:
    import torch

    from inspector.checkpoint.loader import LoadedModel

NOTE_FILE = "PRUNED.md"
MASK_FILE = "prune_mask.json"
TOKENIZER_FILES = (
    "tokenizer.json",
    "tokenizer_config.json",
    "special_tokens_map.json",
    "added_tokens.json",
    "vocab.txt",
    "vocab.json",
    "merges.txt",
    "spm.model",
    "spiece.model",
    "sentencepiece.bpe.model",
)
"""Tokenizer files copied from the source folder when present."""

RETRAIN_CAUTION = (
    "Re-validate this model on held-out data before it ships: switching heads off was measured without "
    "retraining, on one evaluation set."
)
SPEED_CAUTION = (
    "A zeroed head still costs the same compute: the tensors keep their shapes, so inference is not faster "
    "or smaller until the zeroed rows and columns are cut out of the projections."
)


@dataclass(frozen=True)
class PruneProvenance:
    """What is known about where a mask came from (all optional)."""

    mask_file: str | None = None
    data_file: str | None = None
    utterances: int | None = None
    order: str | None = None
    accuracy_before: float | None = None
    accuracy_after: float | None = None


def layer_blocks(lm: LoadedModel) -> list[int]:
    """Index into ``lm.parts`` of the attention block each layer runs (call order).

    One block per layer for most families; shared-weight families (ALBERT) run
    one block for several layers, found by one short forward pass.
    """
    if len(lm.parts) == lm.num_layers:
        return list(range(lm.num_layers))
    import torch

    from inspector.checkpoint.capture import AttentionRecorder, encode

    batch = encode(lm, ["a"])
    with torch.no_grad(), AttentionRecorder(lm) as rec:
        lm.model(**batch.model_inputs())
    return list(rec.order)


def heads_per_block(lm: LoadedModel, mask: HeadMask) -> dict[int, list[int]]:
    """Heads to zero in each attention block; refuses masks a shared block cannot honour.

    Raises
    ------
    HeadcountError
        When several layers share one block (ALBERT) and the mask switches a
        head off in some of them but not in all: zeroing shared weights would
        switch it off everywhere.
    """
    blocks = layer_blocks(lm)
    by_block: dict[int, dict[int, set[int]]] = {}
    for layer, block in enumerate(blocks):
        by_block.setdefault(block, {})[layer] = {h for l, h in mask.heads if l == layer}
    out: dict[int, list[int]] = {}
    for block, layers in by_block.items():
        sets = list(layers.values())
        if any(s != sets[0] for s in sets):
            shared = sorted(layers)
            differ = sorted(set().union(*sets) - set.intersection(*sets))
            raise HeadcountError(
                f"layers L{shared[0]}-L{shared[-1]} share one set of attention weights, so a zeroed head is off "
                f"in all of them; the mask switches head H{differ[0]} off in some of these layers only "
                "(switch it off in every one, or keep the gated model)"
            )
        if sets[0]:
            out[block] = sorted(sets[0])
    return out


def pruned_state_dict(lm: LoadedModel, mask: HeadMask) -> dict[str, torch.Tensor]:
    """The model's state dict with the masked heads' W_O columns and Q/K/V rows set to zero.

    Parameters
    ----------
    lm : LoadedModel
    mask : HeadMask
        Heads to zero (checked against the model).

    Returns
    -------
    dict name -> tensor
        Unchanged tensors are the model's own (no copy); changed ones are new.

    Notes
    -----
    Multi-head attention is ``Concat(head_1, ..., head_h) W_O`` with
    ``head_i = softmax(Q_i K_i^T / sqrt(d)) V_i`` (Vaswani et al. 2017, sec. 3.2.2):
    with head i's columns of W_O at zero its term vanishes, exactly as with a gate
    of 0 on its context vector. Zeroing its value rows too makes the context
    vector itself zero, and its query/key rows make its scores constant; neither
    changes the output further.

    References
    ----------
    Vaswani et al. (2017), "Attention Is All You Need", sec. 3.2.2; Michel, Levy &
    Neubig (2019), sec. 2 (masking heads).
    """

    check_mask(mask, lm.num_layers, lm.num_heads)
    module_names = {id(m): name for name, m in lm.model.named_modules()}
    state = lm.model.state_dict()
    changed: dict[str, torch.Tensor] = {}

    def zero(linear: torch.nn.Linear, part: slice, axis: int) -> None:
        prefix = module_names[id(linear)]
        key = f"{prefix}.weight"
        weight = changed.get(key, state[key].clone())
        if axis == 0:
            weight[part] = 0
        else:
            weight[:, part] = 0
        changed[key] = weight
        if axis == 0 and linear.bias is not None:
            bkey = f"{prefix}.bias"
            bias = changed.get(bkey, state[bkey].clone())
            bias[part] = 0
            changed[bkey] = bias

    for block, heads in heads_per_block(lm, mask).items():
        parts = lm.parts[block]
        for head in heads:
            linear, cols = head_columns(parts, lm.num_heads, head)
            zero(linear, cols, axis=1)
            for proj, rows in head_rows(lm.family, parts, lm.num_heads, head):
                zero(proj, rows, axis=0)
    return {**state, **changed}


def _empty(folder: Path) -> bool:
    return not folder.exists() or (folder.is_dir() and not any(folder.iterdir()))


def check_target(lm: LoadedModel, out: str | Path, force: bool) -> Path:
    """The resolved target folder, or a one-line error when it may not be written."""
    out = Path(out).expanduser()
    if out.exists() and not out.is_dir():
        raise HeadcountError(f"{out}: exists and is not a folder")
    try:
        same = out.exists() and out.resolve() == Path(lm.path).resolve()
    except OSError:
        same = False
    if same:
        raise HeadcountError(f"{out}: that is the model's own folder; write the pruned copy elsewhere")
    if not _empty(out) and not force:
        raise HeadcountError(f"{out}: the folder is not empty (pass --force to replace its contents)")
    return out


def note_text(lm: LoadedModel, mask: HeadMask, provenance: PruneProvenance | None = None) -> str:
    """The text of ``PRUNED.md``: which heads, from which mask, accuracy if known, and the cautions."""
    prov = provenance or PruneProvenance()
    total = lm.num_layers * lm.num_heads
    lines = [
        "# Pruned checkpoint",
        "",
        f"Written by Headcount on {datetime.date.today().isoformat()} from `{lm.path}`.",
        "",
        f"**Heads switched off:** {len(mask)} of {count(total, 'head')} "
        f"(layers and heads counted from 0): {', '.join(mask.names())}.",
        "",
        f"**Mask:** `{prov.mask_file}`" if prov.mask_file else "**Mask:** chosen in the Headcount window",
    ]
    if prov.order:
        lines[-1] += f" (the \u2018{prov.order}\u2019 removal order of a corpus run)"
    lines.append("")
    if prov.accuracy_before is not None and prov.accuracy_after is not None:
        where = f" on `{prov.data_file}`" if prov.data_file else " on the set the mask came from"
        size = f" ({count(prov.utterances, 'utterance')})" if prov.utterances else ""
        lines.append(
            f"**Accuracy{where}{size}:** {percent(prov.accuracy_before)} with every head, "
            f"{percent(prov.accuracy_after)} with these heads off "
            f"({points(prov.accuracy_after - prov.accuracy_before, signed=True)}), measured with the heads "
            "gated in the original model, not retrained."
        )
    else:
        lines.append("**Accuracy:** not known for this mask (no corpus run was found for it).")
    lines += [
        "",
        "**How:** for each head switched off, the columns of its layer's attention output projection that read "
        "the head are zero, and so are the rows (weights and biases) of the query, key and value projections "
        "that compute it. Shapes are unchanged: the folder loads in plain transformers with no custom code, and "
        "its outputs equal the gated model of Headcount's pruning simulation.",
        "",
        "## Cautions",
        "",
        f"- {RETRAIN_CAUTION}",
        f"- {SPEED_CAUTION}",
        "",
    ]
    return "\n".join(lines)


def _copy_support_files(source: Path, target: Path) -> list[str]:
    copied = []
    for name in TOKENIZER_FILES:
        src = source / name
        if src.is_file():
            shutil.copy2(src, target / name)
            copied.append(name)
    return copied


def _save_weights(lm: LoadedModel, state: dict, target: Path) -> None:
    import torch

    config = json.loads((Path(lm.path) / "config.json").read_text(encoding="utf-8"))
    dtype_name = config.get("dtype") or config.get("torch_dtype")
    dtype = getattr(torch, str(dtype_name), None) if dtype_name else None
    if isinstance(dtype, torch.dtype) and dtype.is_floating_point and dtype != torch.float32:
        state = {k: v.to(dtype) if v.is_floating_point() else v for k, v in state.items()}
    lm.model.save_pretrained(str(target), state_dict=state, safe_serialization=True)
    # The source's own config (labels, settings) rather than the one rebuilt in memory.
    shutil.copy2(Path(lm.path) / "config.json", target / "config.json")


def write_pruned_checkpoint(
    lm: LoadedModel,
    mask: HeadMask,
    out: str | Path,
    *,
    force: bool = False,
    provenance: PruneProvenance | None = None,
) -> Path:
    """Write a standard checkpoint folder with the masked heads zeroed.

    Parameters
    ----------
    lm : LoadedModel
        The open model (read only: its weights are not changed).
    mask : HeadMask
        The heads to switch off; at least one, all present in the model.
    out : path
        Target folder; created, or replaced when ``force`` and not empty.
    force : bool
        Replace the contents of a non-empty ``out``.
    provenance : PruneProvenance, optional
        Mask file, data set and accuracy before/after, for ``PRUNED.md``.

    Returns
    -------
    Path of the written folder: ``config.json`` (copied), ``model.safetensors``,
    the tokenizer files (copied), ``prune_mask.json`` and ``PRUNED.md``.

    Raises
    ------
    HeadcountError
        Empty or invalid mask, a non-empty target without ``force``, the model's
        own folder as target, a shared-weight block the mask cannot honour, or a
        write error. The target is untouched in every case.
    """
    if not mask:
        raise HeadcountError("the mask switches no head off: nothing to prune")
    check_mask(mask, lm.num_layers, lm.num_heads)
    target = check_target(lm, out, force)
    state = pruned_state_dict(lm, mask)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        tmp = target.parent / f".{target.name}.{os.getpid()}.{uuid.uuid4().hex[:8]}.part"
        tmp.mkdir()
    except OSError as exc:
        raise HeadcountError(f"cannot write {target}: {exc.strerror or exc}") from None
    aside: Path | None = None
    try:
        _save_weights(lm, state, tmp)
        _copy_support_files(Path(lm.path), tmp)
        (tmp / MASK_FILE).write_text(json.dumps(mask.to_json(), indent=2) + "\n", encoding="utf-8")
        (tmp / NOTE_FILE).write_text(note_text(lm, mask, provenance), encoding="utf-8")
        if target.exists():
            aside = target.with_name(f".{target.name}.{os.getpid()}.old")
            os.replace(target, aside)
        os.replace(tmp, target)
    except HeadcountError:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    except (OSError, RuntimeError, ValueError) as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if aside is not None and not target.exists():
            os.replace(aside, target)
            aside = None
        raise HeadcountError(f"cannot write the pruned checkpoint to {target}: {exc}") from None
    if aside is not None:
        shutil.rmtree(aside, ignore_errors=True)
    return target
