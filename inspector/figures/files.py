"""Writing results to disk: atomically, so a failed write never leaves a half file.

Output paths are checked before any work starts (:func:`check_output_file`,
:func:`check_output_folder`): a path that names a folder, sits under a file, or
lies where nothing can be written is refused in one line while the run has not
begun. A report folder is written into a fresh temporary folder beside its
target and swapped in whole (:func:`replace_folder`), so one folder always
describes one run.
"""

from __future__ import annotations

import contextlib
import csv
import json
import math
import os
import shutil
import tempfile
from collections.abc import Callable, Iterable, Sequence
from pathlib import Path
from typing import IO

import numpy as np

from inspector.errors import HeadcountError


def atomic_write(path: Path, writer: Callable[[IO[bytes]], None]) -> Path:
    """Call ``writer`` on a temporary file beside ``path``, then rename it into place.

    The rename is atomic on POSIX and Windows (``os.replace``); on any error the
    temporary file is removed and ``path`` is left as it was.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        raise HeadcountError(f"cannot write {path}: {exc.strerror or exc}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            writer(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except OSError as exc:  # disk full, quota, a folder in the way ...
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise HeadcountError(f"cannot write {path}: {exc.strerror or exc}") from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return path


def _existing_ancestor(path: Path) -> Path:
    for parent in path.parents:
        if parent.exists():
            return parent
    return Path(path.anchor or ".")


def _probe(folder: Path, target: Path) -> None:
    """Create and delete a scratch file in ``folder``: the one test of writability that root cannot fool."""
    if not folder.is_dir():
        raise HeadcountError(f"{target}: {folder} is a file, not a folder")
    try:
        fd, name = tempfile.mkstemp(prefix=".headcount-probe-", dir=folder)
        os.close(fd)
        os.unlink(name)
    except OSError as exc:
        raise HeadcountError(f"{target}: cannot write in {folder} ({exc.strerror or exc})") from None


def check_output_file(path: str | Path) -> Path:
    """Refuse, before any work, an output file that names a folder or lies where nothing can be written."""
    path = Path(path).expanduser()
    if path.is_dir():
        raise HeadcountError(f"{path}: is a folder; name the file to write")
    _probe(path.parent if path.parent.exists() else _existing_ancestor(path), path)
    return path


def check_output_folder(path: str | Path, allowed: Callable[[str], bool]) -> Path:
    """Refuse, before any work, a report folder that is a file, holds other files, or cannot be written.

    Parameters
    ----------
    path : path
        The folder the report will replace (it may not exist yet).
    allowed : callable(name) -> bool
        Whether a file already in the folder belongs to an earlier report (it will be replaced).
    """
    path = Path(path).expanduser()
    if path.exists():
        if not path.is_dir():
            raise HeadcountError(f"{path}: is a file; name a folder for the report")
        try:
            others = sorted(p.name for p in path.iterdir() if not allowed(p.name))
        except OSError as exc:
            raise HeadcountError(f"{path}: cannot read the folder ({exc.strerror or exc})") from None
        if others:
            shown = ", ".join(others[:3]) + (" ..." if len(others) > 3 else "")
            raise HeadcountError(
                f"{path}: holds files that are not a Headcount report ({shown}); choose an empty or new folder"
            )
    _probe(path.parent if path.parent.exists() else _existing_ancestor(path), path)
    return path


def replace_folder(target: Path, fill: Callable[[Path], None]) -> None:
    """Call ``fill(tmp)`` on a fresh folder beside ``target``, then put it in ``target``'s place whole.

    The old folder (an earlier report) is moved aside first and deleted after the
    swap; on any error the temporary folder is removed and the old one restored.
    """
    target = Path(target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent))
    except OSError as exc:
        raise HeadcountError(f"cannot write {target}: {exc.strerror or exc}") from None
    old: Path | None = None
    try:
        try:
            fill(tmp)
        except HeadcountError as exc:  # name the report's own path, not the temporary folder
            raise HeadcountError(str(exc).replace(str(tmp), str(target))) from None
        os.chmod(tmp, 0o777 & ~_umask())
        if target.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".old", dir=target.parent))
            os.replace(target, old / "report")
        os.replace(tmp, target)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if old is not None and (old / "report").exists() and not target.exists():
            with contextlib.suppress(OSError):
                os.replace(old / "report", target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
        if isinstance(exc, OSError):
            raise HeadcountError(f"cannot write {target}: {exc.strerror or exc}") from None
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def json_safe(obj: object) -> object:
    """``obj`` with every NaN or infinity replaced by None (JSON has no such numbers), numpy scalars as Python."""
    if isinstance(obj, dict):
        return {k: json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def json_text(obj: object, **options: object) -> str:
    """Standard JSON (never a bare NaN or Infinity) of ``obj``."""
    return json.dumps(json_safe(obj), allow_nan=False, **options)


def _umask() -> int:
    """The process umask (read by setting and restoring it)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def save_text(path: Path, text: str) -> Path:
    return atomic_write(path, lambda fh: fh.write(text.encode("utf-8")))


def save_json(path: Path, obj: object) -> Path:
    return save_text(path, json_text(obj, indent=2, ensure_ascii=False) + "\n")


def save_csv(path: Path, header: Sequence[str], rows: Iterable[Sequence[object]]) -> Path:
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    return save_text(path, buf.getvalue())


def save_npz(path: Path, **arrays: np.ndarray) -> Path:
    return atomic_write(path, lambda fh: np.savez(fh, **arrays))
