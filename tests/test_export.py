"""Atomic writes: a failed write leaves nothing behind; a good one has the usual permissions."""

from __future__ import annotations

import os
import stat

import pytest

from inspector.figures.files import atomic_write, save_text


def test_failed_write_leaves_no_file(tmp_path):
    """Reference: POSIX rename semantics (os.replace is atomic); common practice, no source."""
    target = tmp_path / "figure.svg"
    save_text(target, "old")

    def explode(fh):
        fh.write(b"half a fil")
        raise RuntimeError("renderer crashed")

    with pytest.raises(RuntimeError):
        atomic_write(target, explode)
    assert target.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["figure.svg"]


def test_written_file_follows_umask(tmp_path):
    """Reference: POSIX open(2) creates files with mode 0666 & ~umask; the temporary file must not keep 0600."""
    old = os.umask(0o022)
    try:
        path = save_text(tmp_path / "numbers.csv", "a,b\n1,2\n")
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == 0o644
