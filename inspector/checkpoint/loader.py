"""Open a local checkpoint onto the CPU, safely and offline.

Only safetensors weights are read by default. Pickle weights (``*.bin``, ``*.pt``)
are refused unless the caller opts in, and even then they go through torch's
weights-only unpickler. Remote code is never trusted and nothing is downloaded.

Nothing is ever analysed with weights the checkpoint did not supply. Before a
tensor is allocated, the weight files' headers are checked against the config
(layer count, overall size); after loading, transformers' loading report must
list no missing, unexpected or mis-shaped tensor (except the ones the adapter
table says a family ties or derives), every weight must be finite, and the
folder must bring its own tokenizer.
"""

from __future__ import annotations

import inspect
import json
import re
import shlex
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import inspector  # noqa: F401  (forces offline mode before transformers loads)
from inspector.checkpoint.families import Family, LayerParts, block_index_pattern, family_for, layer_parts
from inspector.checkpoint.sources import resolve_source
from inspector.checkpoint.weights import (
    TensorInfo,
    first_few,
    read_headers,
    read_json_file,
    safetensors_files,
)
from inspector.errors import HeadcountError

Task = Literal["sequence-classification", "token-classification", "encoder"]

PICKLE_SUFFIXES = (".bin", ".pt", ".pth", ".ckpt")
TOKENIZER_FILES = (
    "tokenizer.json",
    "vocab.txt",
    "vocab.json",
    "spiece.model",
    "sentencepiece.bpe.model",
    "spm.model",
    "tokenizer.model",
)
"""A folder must hold at least one of these: without them transformers makes up a tokenizer."""
MAX_TOKENS = 512
"""Inputs are cut at this many tokens (or the model's own limit, if lower)."""
_SIZE_SLACK = 1.25
"""A config may describe at most this many times the stored weights' elements (plus derived ones)."""

_TASK_BY_SUFFIX: dict[str, Task] = {
    "ForSequenceClassification": "sequence-classification",
    "ForTokenClassification": "token-classification",
}
_POOLER = r"(^|\.)pooler\."
_CONFIG_INTS = ("num_hidden_layers", "num_attention_heads", "hidden_size", "vocab_size")


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
    windows: list[int | None] = field(default_factory=list)
    """Per layer, the largest distance a query can attend over (None: global attention)."""
    max_tokens: int = MAX_TOKENS
    """Longest input the model takes (its position table, at most :data:`MAX_TOKENS`)."""
    input_names: frozenset[str] = frozenset({"input_ids", "attention_mask", "token_type_ids"})
    """Inputs the model's forward accepts (tokenizer outputs outside it are dropped)."""

    @property
    def has_prediction(self) -> bool:
        """True when the model predicts one label per sentence."""
        return self.task == "sequence-classification"


def _read_config(folder: Path) -> dict:
    cfg_path = folder / "config.json"
    try:
        present = cfg_path.is_file()
    except PermissionError:
        present = False
    if not present:
        try:
            next(iter(folder.iterdir()), None)
        except PermissionError:
            raise HeadcountError(f"{folder}: not readable (permission denied)") from None
        raise HeadcountError(f"{folder}: no config.json here; is this a checkpoint folder?")
    config = read_json_file(cfg_path, "not a readable JSON config")
    if not isinstance(config, dict) or "model_type" not in config:
        raise HeadcountError(f"{cfg_path}: the config has no model_type")
    return config


def _check_dimensions(config: dict, cfg_path: Path) -> None:
    """The sizes every family needs must be positive whole numbers (checked before transformers sees them)."""
    for key in _CONFIG_INTS:
        value = config.get(key)
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, int) or value < 1:
            raise HeadcountError(f"{cfg_path}: {key} must be a positive whole number, not {value!r}")
    for key in ("id2label", "label2id"):
        if config.get(key) is not None and not isinstance(config[key], dict):
            raise HeadcountError(
                f"{cfg_path}: {key} must map label numbers and names, not a {type(config[key]).__name__}"
            )


def _pickle_files(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.suffix in PICKLE_SUFFIXES)


def conversion_recipe(folder: Path, config: dict) -> str:
    """A shell command that rewrites pickle weights as safetensors, keeping the class the config names."""
    archs = config.get("architectures") or []
    name = archs[0] if archs and isinstance(archs[0], str) and archs[0].isidentifier() else "AutoModel"
    where = json.dumps(str(folder))
    code = f"from transformers import {name}; {name}.from_pretrained({where}).save_pretrained({where})"
    return f"python -c {shlex.quote(code)}"


def _refuse_pickle(folder: Path, config: dict) -> None:
    pickles = _pickle_files(folder)
    if pickles:
        raise HeadcountError(
            f"{folder}: only pickle weights found ({', '.join(pickles)}). Pickle files can run code "
            "when opened, so Headcount reads safetensors only. Convert once in a trusted session: "
            f"{conversion_recipe(folder, config)} - or pass --allow-pickle to read them with torch's "
            "weights-only loader."
        )
    raise HeadcountError(f"{folder}: no model weights found (expected model.safetensors)")


def _check_tokenizer_files(folder: Path) -> None:
    if not any((folder / name).is_file() for name in TOKENIZER_FILES):
        raise HeadcountError(
            f"{folder}: no tokenizer files ({', '.join(TOKENIZER_FILES[:3])} ...): copy in the tokenizer "
            "the model was trained with"
        )


def stored_layers(tensors: dict[str, TensorInfo], family: Family) -> int:
    """How many distinct attention blocks the stored tensor names hold."""
    pattern = block_index_pattern(family)
    return len({m.group(1) for name in tensors if (m := pattern.search(name))})


def _check_layer_count(config: dict, family: Family, tensors: dict[str, TensorInfo], folder: Path) -> None:
    if family.shared_layers or "num_hidden_layers" not in config:
        return
    stored, claimed = stored_layers(tensors, family), int(config["num_hidden_layers"])
    if stored != claimed:
        raise HeadcountError(
            f"{folder}: config.json says {claimed} layers but the weights hold {stored}; "
            "the config does not describe these weights"
        )


def detect_task(config: dict) -> Task:
    """Tell the task head from the config's ``architectures`` entry."""
    archs = config.get("architectures") or []
    for arch in archs if isinstance(archs, list) else []:
        for suffix, task in _TASK_BY_SUFFIX.items():
            if isinstance(arch, str) and arch.endswith(suffix):
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
    if not isinstance(id2label, dict):
        raise HeadcountError("config id2label must map 0..n-1 to label names")
    n = len(id2label)
    try:
        return [str(id2label[str(i)] if str(i) in id2label else id2label[i]) for i in range(n)]
    except KeyError:
        raise HeadcountError("config id2label must map 0..n-1 to label names") from None


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _check_size(auto, config, stored_elements: int, folder: Path) -> None:
    """Refuse, before allocating, a config that describes a much larger model than the weights hold."""
    import torch

    with torch.device("meta"):
        skeleton = auto.from_config(config)
    wanted = sum(p.numel() for p in skeleton.parameters())
    if wanted > _SIZE_SLACK * stored_elements + 1_000_000:
        raise HeadcountError(
            f"{folder}: config.json describes a model of {wanted:,} parameters but the weights hold "
            f"{stored_elements:,} values; the config does not describe these weights"
        )


def _tolerated(name: str, patterns: tuple[str, ...]) -> bool:
    return any(re.search(p, name) for p in patterns)


def _check_loading_report(info: dict, model, family: Family, task: Task, folder: Path) -> None:
    """Refuse any tensor transformers had to initialise, could not place, or found mis-shaped."""
    derived = family.derived + ((_POOLER,) if task == "encoder" else ())
    missing = {k for k in info.get("missing_keys") or () if not _tolerated(k, derived)}
    if missing:
        raise HeadcountError(
            f"{folder}: the weights lack {len(missing)} tensor(s) the model needs ({first_few(missing)}); "
            "Headcount does not analyse weights the checkpoint did not supply"
        )
    mismatched = [m[0] if isinstance(m, (tuple, list)) else str(m) for m in info.get("mismatched_keys") or ()]
    if mismatched:
        raise HeadcountError(
            f"{folder}: {len(mismatched)} tensor(s) have another shape than config.json describes "
            f"({first_few(set(mismatched))})"
        )
    loaded = {name for name, _ in model.named_children()} | {getattr(model, "base_model_prefix", "") or "-"}
    unexpected = {k for k in info.get("unexpected_keys") or () if k.split(".", 1)[0] in loaded}
    if unexpected:
        raise HeadcountError(
            f"{folder}: the weights hold {len(unexpected)} tensor(s) the model has no place for "
            f"({first_few(unexpected)}); the config does not describe these weights"
        )


def _check_finite(model, folder: Path) -> None:
    import torch

    bad = [
        name
        for name, t in model.state_dict().items()
        if t.is_floating_point() and not bool(torch.isfinite(t).all())
    ]
    if bad:
        raise HeadcountError(
            f"{folder}: the weights contain NaN or infinite values ({first_few(bad)}); they cannot be analysed"
        )


def _max_tokens(model, family: Family, folder: Path) -> int:
    cfg = model.config
    limit = int(getattr(cfg, "max_position_embeddings", MAX_TOKENS) or MAX_TOKENS)
    if family.position_offset:
        limit -= int(getattr(cfg, "pad_token_id", 0) or 0) + 1
    if limit < 3:
        raise HeadcountError(f"{folder}: the model's position table leaves room for {max(limit, 0)} tokens")
    return min(limit, MAX_TOKENS)


def _input_names(model) -> frozenset[str]:
    return frozenset(inspect.signature(model.forward).parameters)


def _load(auto, path: Path, use_safetensors: bool):
    import torch

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return auto.from_pretrained(
            str(path),
            local_files_only=True,
            trust_remote_code=False,
            use_safetensors=use_safetensors,
            attn_implementation="eager",
            dtype=torch.float32,
            output_loading_info=True,
            ignore_mismatched_sizes=True,
        )


def load_checkpoint(
    folder: str | Path, *, allow_pickle: bool = False, checkpoint: int | None = None
) -> LoadedModel:
    """Load a checkpoint for analysis.

    Parameters
    ----------
    folder : path or str
        A standard transformers checkpoint folder (``config.json``, weights as
        ``model.safetensors`` or a sharded safetensors index, tokenizer files);
        a training-run folder with ``checkpoint-N`` sub-folders; or a repo id
        in the local Hugging Face cache (see :mod:`inspector.checkpoint.sources`).
    allow_pickle : bool, default False
        Read ``*.bin`` weights through torch's weights-only unpickler when no
        safetensors exist. Off by default.
    checkpoint : int, optional
        Step N of the ``checkpoint-N`` folder to open in a training run (default: the latest).

    Returns
    -------
    LoadedModel
        Model on the CPU in eval mode with eager attention, its tokenizer,
        task, labels and the attention parts found through the adapter table.
    """
    try:
        return _open(folder, allow_pickle, checkpoint)
    except PermissionError as exc:
        raise HeadcountError(f"{exc.filename or folder}: not readable (permission denied)") from None


def _open(folder: str | Path, allow_pickle: bool, checkpoint: int | None) -> LoadedModel:
    source = resolve_source(folder, checkpoint)
    path = source.folder
    config = _read_config(path)
    _check_dimensions(config, path / "config.json")
    model_type = str(config["model_type"])
    family = family_for(model_type, config)
    files = safetensors_files(path)
    if files:
        tensors = read_headers(files)
        if not tensors:
            raise HeadcountError(f"{path}: the safetensors file holds no tensors")
        _check_layer_count(config, family, tensors, path)
        stored = sum(t.elements for t in tensors.values())
    elif not allow_pickle:
        _refuse_pickle(path, config)
    else:
        pickles = _pickle_files(path)
        if not pickles:
            raise HeadcountError(f"{path}: no model weights found (expected model.safetensors or *.bin)")
        stored = sum((path / p).stat().st_size for p in pickles) // 2  # at most this many 16-bit values
    _check_tokenizer_files(path)
    task = detect_task(config)

    import transformers

    transformers.utils.logging.set_verbosity_error()
    transformers.utils.logging.disable_progress_bar()
    auto = _auto_class(task)
    try:
        cfg = transformers.AutoConfig.from_pretrained(
            str(path), local_files_only=True, trust_remote_code=False
        )
        _check_size(auto, cfg, stored, path)
        model, info = _load(auto, path, bool(files))
        _check_loading_report(info, model, family, task, path)
        _check_finite(model, path)
        tokenizer = transformers.AutoTokenizer.from_pretrained(
            str(path), local_files_only=True, trust_remote_code=False
        )
    except HeadcountError:
        raise
    except Exception as exc:  # transformers raises many types; the user needs one line
        raise HeadcountError(f"{path}: could not load the checkpoint ({_first_line(exc)})") from None
    rows = model.get_input_embeddings().num_embeddings
    if len(tokenizer) > rows:
        raise HeadcountError(
            f"{path}: the tokenizer knows {len(tokenizer):,} tokens but the model's embedding table has "
            f"{rows:,} rows; they do not belong together"
        )
    model.eval()
    model.requires_grad_(False)
    cfg = model.config
    parts = layer_parts(model.base_model, family)
    return LoadedModel(
        path=path,
        name=source.name,
        model=model,
        tokenizer=tokenizer,
        task=task,
        model_type=model_type,
        family=family,
        num_layers=int(cfg.num_hidden_layers),
        num_heads=int(cfg.num_attention_heads),
        labels=_labels(config, task),
        parts=parts,
        windows=family.layer_windows(cfg),
        max_tokens=_max_tokens(model, family, path),
        input_names=_input_names(model),
    )
