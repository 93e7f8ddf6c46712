"""The weight files of a checkpoint, read only as far as their headers.

Before anything is allocated, Headcount reads what the weights *claim*: each
safetensors header (its declared length is checked against the format's limit
and the file size before a byte of it is read), the shard index of a sharded
checkpoint, and from them every tensor's name, dtype and shape. The loader uses
this to refuse a config that describes a different model than the weights hold.
"""

from __future__ import annotations

import json
import math
import struct
from dataclasses import dataclass
from pathlib import Path

from inspector import formatting as fmt
from inspector.errors import HeadcountError

SAFETENSORS_HEADER_LIMIT = 100_000_000
"""Largest header the safetensors format accepts, in bytes (its reference reader refuses more)."""
SINGLE_FILE = "model.safetensors"
INDEX_FILE = "model.safetensors.index.json"
_ITEM_BYTES = {
    "BOOL": 1,
    "U8": 1,
    "I8": 1,
    "F8_E4M3": 1,
    "F8_E5M2": 1,
    "I16": 2,
    "U16": 2,
    "F16": 2,
    "BF16": 2,
    "I32": 4,
    "U32": 4,
    "F32": 4,
    "I64": 8,
    "U64": 8,
    "F64": 8,
}
_SHOWN = 3


@dataclass(frozen=True)
class TensorInfo:
    """What a header says about one stored tensor."""

    dtype: str
    shape: tuple[int, ...]

    @property
    def elements(self) -> int:
        return math.prod(self.shape)


def first_few(names: list[str] | set[str], shown: int = _SHOWN) -> str:
    """``a, b, c and 4 more`` for a one-line message."""
    ordered = sorted(names)
    text = ", ".join(ordered[:shown])
    return text + (f" and {len(ordered) - shown} more" if len(ordered) > shown else "")


def _entry(name: str, value: object, data_size: int) -> TensorInfo:
    if not isinstance(value, dict):
        raise ValueError(f"entry '{name}' is not an object")
    dtype, shape, offsets = value.get("dtype"), value.get("shape"), value.get("data_offsets")
    if dtype not in _ITEM_BYTES:
        raise ValueError(f"entry '{name}' has an unknown dtype {dtype!r}")
    if not isinstance(shape, list) or not all(isinstance(s, int) and s >= 0 for s in shape):
        raise ValueError(f"entry '{name}' has a malformed shape")
    if (
        not isinstance(offsets, list)
        or len(offsets) != 2
        or not all(isinstance(o, int) for o in offsets)
        or not 0 <= offsets[0] <= offsets[1]
    ):
        raise ValueError(f"entry '{name}' has malformed data offsets")
    if offsets[1] > data_size:
        raise ValueError("file is truncated: tensors end past the end of the file")
    if offsets[1] - offsets[0] != math.prod(shape) * _ITEM_BYTES[dtype]:
        raise ValueError(f"entry '{name}' does not span its shape's bytes")
    return TensorInfo(dtype, tuple(shape))


def read_header(path: Path) -> dict[str, TensorInfo]:
    """Read and validate one safetensors file's header without loading any tensor.

    The 8-byte little-endian header length is checked against
    :data:`SAFETENSORS_HEADER_LIMIT` and the file size *before* the header is
    read; then the header must be a JSON object whose entries each give a known
    dtype, a shape and data offsets that lie inside the file and span exactly
    the shape's bytes.

    References
    ----------
    The safetensors file format (Hugging Face), as described in its README:
    ``u64`` header size, JSON header, byte buffer.
    """
    try:
        size = path.stat().st_size
        with path.open("rb") as fh:
            raw = fh.read(8)
            if len(raw) < 8:
                raise ValueError("file shorter than its header")
            (header_len,) = struct.unpack("<Q", raw)
            if header_len > SAFETENSORS_HEADER_LIMIT:
                raise ValueError(
                    f"header claims {header_len:,} bytes, more than the format's limit of "
                    f"{SAFETENSORS_HEADER_LIMIT:,}"
                )
            if header_len > size - 8:
                raise ValueError("header longer than the file")
            text = fh.read(header_len)
        header = json.loads(text)
        if not isinstance(header, dict):
            raise ValueError(f"the header is a JSON {type(header).__name__}, not an object")
        data_size = size - 8 - header_len
        return {k: _entry(k, v, data_size) for k, v in header.items() if k != "__metadata__"}
    except PermissionError:
        raise HeadcountError(f"{path}: not readable (permission denied)") from None
    except (OSError, ValueError, RecursionError, struct.error) as exc:
        raise HeadcountError(f"{path.name}: damaged safetensors file ({exc})") from None


def read_json_file(path: Path, problem: str) -> object:
    """Parse a small JSON file, or raise one line: ``{path}: {problem} ({why})`` (or permission denied)."""
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except PermissionError:
        raise HeadcountError(f"{path}: not readable (permission denied)") from None
    except (OSError, UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise HeadcountError(f"{path}: {problem} ({exc})") from None


def _shard_names(index: Path) -> list[str]:
    doc = read_json_file(index, "unreadable shard index")
    if not isinstance(doc, dict):
        raise HeadcountError(f"{index.name}: the shard index is a JSON {type(doc).__name__}, not an object")
    weight_map = doc.get("weight_map")
    if not isinstance(weight_map, dict) or not weight_map:
        raise HeadcountError(f"{index.name}: the shard index has no 'weight_map' object naming the shards")
    names = set(weight_map.values())
    for name in names:
        if not isinstance(name, str) or Path(name).name != name or not name.endswith(".safetensors"):
            raise HeadcountError(
                f"{index.name}: the weight map names {name!r}, not a .safetensors file in this folder"
            )
    return sorted(names)


def safetensors_files(folder: Path) -> list[Path]:
    """The checkpoint's safetensors files: every shard of the index, or the single file; [] if none."""
    index = folder / INDEX_FILE
    if index.is_file():
        shards = [folder / name for name in _shard_names(index)]
        missing = [s.name for s in shards if not s.is_file()]
        if missing:
            raise HeadcountError(
                f"{folder}: {fmt.count(len(missing), 'shard')} listed in the index "
                f"{'is' if len(missing) == 1 else 'are'} missing: {first_few(missing)}"
            )
        return shards
    single = folder / SINGLE_FILE
    return [single] if single.is_file() else []


def read_headers(files: list[Path]) -> dict[str, TensorInfo]:
    """Every tensor of every file, by name (a name stored twice is an error)."""
    tensors: dict[str, TensorInfo] = {}
    for path in files:
        for name, info in read_header(path).items():
            if name in tensors:
                raise HeadcountError(f"{path.name}: tensor '{name}' is stored in more than one shard")
            tensors[name] = info
    return tensors
