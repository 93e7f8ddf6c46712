"""Open a local checkpoint folder onto the CPU, safely and offline.

Only safetensors weights are read by default. Pickle weights (``*.bin``, ``*.pt``)
are refused unless the caller opts in, and even then they go through torch's
weights-only unpickler. Remote code is never trusted and nothing is downloaded.
"""

from __future__ import annotations

import json
import struct
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import inspector  # noqa: F401  (forces offline mode before transformers loads)
from inspector import formatting as fmt
from inspector.checkpoint.families import Family, LayerParts, family_for, layer_parts
from inspector.errors import HeadcountError

Task = Literal["sequence-classification", "token-classification", "encoder"]

PICKLE_SUFFIXES = (".bin", ".pt", ".pth", ".ckpt")

_TASK_BY_SUFFIX: dict[str, Task] = {
    "ForSequenceClassification": "sequence-classification",
    "ForTokenClassification": "token-classification",
}


@dataclass
class LoadedModel:
    """A checkpoint ready for analysis (CPU, eval mode, eager attention)."""

    path: Path
    name: str
    model: object
    tokenizer: object
    task: Task
    model_type: str
    family: Family
    num_layers: int
    num_heads: int
    labels: list[str] = field(default_factory=list)
    parts: list[LayerParts] = field(default_factory=list)

    @property
    def has_prediction(self) -> bool:
        """True when the model predicts one label per sentence."""
        return self.task == "sequence-classification"


def _read_config(folder: Path) -> dict:
    cfg_path = folder / "config.json"
    if not cfg_path.is_file():
        raise HeadcountError(f"{folder}: no config.json here; is this a checkpoint folder?")
    try:
        config = json.loads(cfg_path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise HeadcountError(f"{cfg_path}: not a readable JSON config ({exc})") from None
    if not isinstance(config, dict) or "model_type" not in config:
        raise HeadcountError(f"{cfg_path}: the config has no model_type")
    return config


def _check_safetensors_file(path: Path) -> None:
    """Validate a safetensors file's header and length without loading tensors."""
    try:
        size = path.stat().st_size
        with path.open("rb") as fh:
            raw = fh.read(8)
            if len(raw) < 8:
                raise ValueError("file shorter than its header")
            (header_len,) = struct.unpack("<Q", raw)
            if header_len > size - 8:
                raise ValueError("header longer than the file")
            header = json.loads(fh.read(header_len))
        ends = [v["data_offsets"][1] for k, v in header.items() if k != "__metadata__"]
        if 8 + header_len + max(ends, default=0) > size:
            raise ValueError("file is truncated: tensors end past the end of the file")
    except (OSError, ValueError, KeyError, TypeError, struct.error) as exc:
        raise HeadcountError(f"{path.name}: damaged safetensors file ({exc})") from None


def _safetensors_files(folder: Path) -> list[Path]:
    index = folder / "model.safetensors.index.json"
    if index.is_file():
        try:
            weight_map = json.loads(index.read_text(encoding="utf-8"))["weight_map"]
        except (OSError, ValueError, KeyError) as exc:
            raise HeadcountError(f"{index.name}: unreadable shard index ({exc})") from None
        shards = sorted({folder / name for name in weight_map.values()})
        missing = [s.name for s in shards if not s.is_file()]
        if missing:
            raise HeadcountError(
                f"{folder}: {fmt.count(len(missing), 'shard')} listed in the index "
                f"{'is' if len(missing) == 1 else 'are'} missing: {', '.join(missing)}"
            )
        return shards
    single = folder / "model.safetensors"
    return [single] if single.is_file() else []


def _refuse_pickle(folder: Path) -> None:
    pickles = sorted(p.name for p in folder.iterdir() if p.suffix in PICKLE_SUFFIXES)
    if pickles:
        raise HeadcountError(
            f"{folder}: only pickle weights found ({', '.join(pickles)}). Pickle files can run code "
            "when opened, so Headcount reads safetensors only. Convert once in a trusted session: "
            "model = AutoModel.from_pretrained(folder); model.save_pretrained(folder, "
            "safe_serialization=True) - or pass --allow-pickle to read them with torch's weights-only loader."
        )
    raise HeadcountError(f"{folder}: no model weights found (expected model.safetensors)")


def detect_task(config: dict) -> Task:
    """Tell the task head from the config's ``architectures`` entry."""
    for arch in config.get("architectures") or []:
        for suffix, task in _TASK_BY_SUFFIX.items():
            if arch.endswith(suffix):
                return task
    return "encoder"


def _auto_class(task: Task):
    import transformers

    return {
        "sequence-classification": transformers.AutoModelForSequenceClassification,
        "token-classification": transformers.AutoModelForTokenClassification,
        "encoder": transformers.AutoModel,
    }[task]


def _labels(config: dict, task: Task) -> list[str]:
    if task == "encoder":
        return []
    id2label = config.get("id2label") or {}
    n = len(id2label)
    try:
        return [str(id2label[str(i)] if str(i) in id2label else id2label[i]) for i in range(n)]
    except KeyError:
        raise HeadcountError("config id2label must map 0..n-1 to label names") from None


def load_checkpoint(folder: str | Path, *, allow_pickle: bool = False) -> LoadedModel:
    """Load a checkpoint folder for analysis.

    Parameters
    ----------
    folder : path
        A standard transformers checkpoint folder: ``config.json``, weights as
        ``model.safetensors`` (or a sharded safetensors index) and tokenizer files.
    allow_pickle : bool, default False
        Read ``*.bin`` weights through torch's weights-only unpickler when no
        safetensors exist. Off by default.

    Returns
    -------
    LoadedModel
        Model on the CPU in eval mode with eager attention, its tokenizer,
        task, labels and the attention parts found through the adapter table.
    """
    path = Path(folder).expanduser()
    if not path.is_dir():
        raise HeadcountError(f"{path}: not a folder")
    config = _read_config(path)
    model_type = str(config["model_type"])
    family = family_for(model_type)
    shards = _safetensors_files(path)
    if shards:
        for shard in shards:
            _check_safetensors_file(shard)
    elif not allow_pickle:
        _refuse_pickle(path)
    task = detect_task(config)

    import torch
    import transformers

    transformers.utils.logging.set_verbosity_error()
    transformers.utils.logging.disable_progress_bar()
    try:
        model = _auto_class(task).from_pretrained(
            str(path),
            local_files_only=True,
            trust_remote_code=False,
            use_safetensors=bool(shards),
            attn_implementation="eager",
            dtype=torch.float32,
        )
        tokenizer = transformers.AutoTokenizer.from_pretrained(
            str(path), local_files_only=True, trust_remote_code=False
        )
    except HeadcountError:
        raise
    except Exception as exc:  # transformers raises many types; the user needs one line
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise HeadcountError(f"{path}: could not load the checkpoint ({first})") from None
    model.eval()
    model.requires_grad_(False)
    cfg = model.config
    num_layers = int(cfg.num_hidden_layers)
    num_heads = int(cfg.num_attention_heads)
    parts = layer_parts(model.base_model, family)
    return LoadedModel(
        path=path,
        name=path.name,
        model=model,
        tokenizer=tokenizer,
        task=task,
        model_type=model_type,
        family=family,
        num_layers=num_layers,
        num_heads=num_heads,
        labels=_labels(config, task),
        parts=parts,
    )
