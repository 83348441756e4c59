"""Atomic file writing: a reader never sees a partial file, a failure leaves none.

Every writer goes through a temporary file in the target's folder, renamed
onto the target only when complete. A leaf module: any part of famwise may use it.
"""

import json
import os
import tempfile
from pathlib import Path

import numpy as np


def _file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


_FILE_MODE = _file_mode()


class atomic_path:
    """Context manager yielding a temporary path beside ``path``; renamed onto it on success."""

    def __init__(self, path):
        self.path = Path(path)

    def __enter__(self) -> Path:
        self.path.parent.mkdir(parents=True, exist_ok=True)
        handle, name = tempfile.mkstemp(
            prefix=f".{self.path.name}.", suffix=self.path.suffix or ".tmp", dir=self.path.parent
        )
        os.close(handle)
        self.temporary = Path(name)
        return self.temporary

    def __exit__(self, kind, value, traceback):
        if kind is None:
            os.chmod(self.temporary, _FILE_MODE)  # mkstemp makes 0600 files; results are for sharing
            os.replace(self.temporary, self.path)
        else:
            self.temporary.unlink(missing_ok=True)
        return False


def write_bytes(path, data: bytes) -> None:
    """Write bytes atomically."""
    with atomic_path(path) as temporary:
        temporary.write_bytes(data)


def write_text(path, text: str) -> None:
    """Write a UTF-8 text file atomically."""
    with atomic_path(path) as temporary:
        temporary.write_text(text, encoding="utf-8")


def write_json(path, value) -> None:
    """Write JSON atomically (indented)."""
    write_text(path, json.dumps(value, indent=2) + "\n")


def save_npz(path, **arrays) -> None:
    """Write an uncompressed NPZ atomically."""
    with atomic_path(path) as temporary:
        with open(temporary, "wb") as handle:
            np.savez(handle, **arrays)
