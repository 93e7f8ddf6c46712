"""Where a checkpoint lives: a folder, a training run's ``checkpoint-N`` folders, or a repo id in the local cache.

Resolution is offline and never downloads. A repo id (``owner/name``) is looked
up in the local Hugging Face cache: ``models--owner--name/refs/main`` holds the
commit hash of the snapshot, ``snapshots/<hash>/`` holds the files (usually as
symlinks into ``blobs/``, which are read through like plain files).
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

from inspector.errors import HeadcountError

_CHECKPOINT = re.compile(r"checkpoint-(\d+)")
_REPO_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*(/[A-Za-z0-9][A-Za-z0-9._-]*)?")
_HASH = re.compile(r"[0-9a-f]{7,64}")


@dataclass(frozen=True)
class Source:
    """A resolved checkpoint folder and how to call it."""

    folder: Path
    name: str
    """Shown to people: the folder name, ``run/checkpoint-N`` or the repo id."""


def hub_cache() -> Path:
    """The local Hugging Face hub cache folder, following the library's environment variables.

    ``HF_HUB_CACHE``, else ``HF_HOME/hub``, else ``XDG_CACHE_HOME/huggingface/hub``,
    else ``~/.cache/huggingface/hub`` (huggingface_hub's documented defaults).
    """
    if os.environ.get("HF_HUB_CACHE"):
        return Path(os.environ["HF_HUB_CACHE"]).expanduser()
    if os.environ.get("HF_HOME"):
        return Path(os.environ["HF_HOME"]).expanduser() / "hub"
    xdg = os.environ.get("XDG_CACHE_HOME")
    base = Path(xdg).expanduser() if xdg else Path.home() / ".cache"
    return base / "huggingface" / "hub"


def run_checkpoints(folder: Path) -> dict[int, Path]:
    """The ``checkpoint-N`` sub-folders of a training run that hold a config, by step N."""
    found: dict[int, Path] = {}
    try:
        entries = list(folder.iterdir())
    except PermissionError:
        raise HeadcountError(f"{folder}: not readable (permission denied)") from None
    except OSError as exc:
        raise HeadcountError(f"{folder}: cannot list the folder ({exc.strerror or exc})") from None
    for entry in entries:
        match = _CHECKPOINT.fullmatch(entry.name)
        if match and (entry / "config.json").is_file():
            found[int(match.group(1))] = entry
    return dict(sorted(found.items()))


def _from_run(folder: Path, step: int | None) -> Source:
    steps = run_checkpoints(folder)
    if step is not None:
        if step not in steps:
            listed = ", ".join(str(s) for s in steps) or "none"
            raise HeadcountError(f"{folder}: there is no checkpoint-{step} here (checkpoints: {listed})")
        chosen = steps[step]
    elif (folder / "config.json").is_file() or not steps:
        return Source(folder, folder.name)
    else:
        chosen = steps[max(steps)]
    return Source(chosen, f"{folder.name}/{chosen.name}")


def _cached_snapshot(repo_id: str) -> Path:
    cache = hub_cache()
    repo = cache / ("models--" + repo_id.replace("/", "--"))
    how = (
        f"Headcount never downloads: on a connected machine run `hf download {repo_id}` "
        "(huggingface_hub's command line) and copy the cache folder here, or pass a local folder"
    )
    if not repo.is_dir():
        raise HeadcountError(
            f"'{repo_id}' is not a folder and not in the local Hugging Face cache ({cache}). {how}"
        )
    try:
        commit = (repo / "refs" / "main").read_text(encoding="utf-8").strip()
    except (OSError, UnicodeDecodeError):
        commit = ""
    snapshots = repo / "snapshots"
    if commit and _HASH.fullmatch(commit) and (snapshots / commit).is_dir():
        return snapshots / commit
    # No readable refs/main: a single snapshot is unambiguous.
    found = [p for p in snapshots.iterdir()] if snapshots.is_dir() else []
    if len(found) == 1 and found[0].is_dir():
        return found[0]
    raise HeadcountError(
        f"'{repo_id}' is in the local cache ({repo}) but its main revision is not there. {how}"
    )


def resolve_source(spec: str | Path, checkpoint: int | None = None) -> Source:
    """Turn what the user typed into a checkpoint folder.

    Parameters
    ----------
    spec : str or path
        A checkpoint folder; a training-run folder holding ``checkpoint-N``
        sub-folders (the latest is taken unless ``checkpoint`` is given; a run
        folder that holds a config itself is that checkpoint); or a repo id
        present in the local Hugging Face cache.
    checkpoint : int, optional
        The step N of the ``checkpoint-N`` sub-folder to open.

    Returns
    -------
    Source
    """
    text = str(spec)
    if not text.strip():
        raise HeadcountError("no model folder given")
    path = Path(text).expanduser()
    if path.is_dir():
        return _from_run(path, checkpoint)
    if path.exists():
        raise HeadcountError(f"{path}: not a folder (give the checkpoint's folder, not a file in it)")
    looks_like_id = bool(_REPO_ID.fullmatch(text)) and not text.startswith((".", "~"))
    cached = looks_like_id and (hub_cache() / ("models--" + text.replace("/", "--"))).is_dir()
    if not looks_like_id or ("/" not in text and not cached):
        raise HeadcountError(f"{path}: not a folder")
    if checkpoint is not None:
        raise HeadcountError("--checkpoint picks a checkpoint-N folder of a training run, not of a repo id")
    return Source(_cached_snapshot(text), text)
