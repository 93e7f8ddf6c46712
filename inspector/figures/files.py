"""Writing results to disk: atomically, so a failed write never leaves a half file."""

from __future__ import annotations

import contextlib
import csv
import json
import os
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
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return path


def _umask() -> int:
    """The process umask (read by setting and restoring it)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def save_text(path: Path, text: str) -> Path:
    return atomic_write(path, lambda fh: fh.write(text.encode("utf-8")))


def save_json(path: Path, obj: object) -> Path:
    return save_text(path, json.dumps(obj, indent=2, ensure_ascii=False) + "\n")


def save_csv(path: Path, header: Sequence[str], rows: Iterable[Sequence[object]]) -> Path:
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    return save_text(path, buf.getvalue())


def save_npz(path: Path, **arrays: np.ndarray) -> Path:
    return atomic_write(path, lambda fh: np.savez(fh, **arrays))
