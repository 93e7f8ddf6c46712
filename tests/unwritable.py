"""A folder nothing can be written into, for the output-path tests (test helper)."""

from __future__ import annotations

import os
from pathlib import Path


def read_only_folder(tmp_path: Path) -> Path:
    """A folder nothing can be written into: chmod 555, or (as root, whom chmod does not stop) under /sys."""
    folder = tmp_path / "read-only"
    folder.mkdir()
    folder.chmod(0o555)
    if not os.access(folder, os.W_OK):
        return folder
    return Path("/sys/headcount-read-only")
