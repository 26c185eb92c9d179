"""Writing files safely: atomically, and never over a user's file without ``force``."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from partpick.errors import InputError

__all__ = ["write_atomic"]


def write_atomic(path: str | Path, text: str, *, force: bool = False) -> Path:
    """Write ``text`` to ``path`` via a temporary file in the same folder and a rename,
    so a crash never leaves half a file. Refuses an existing file unless ``force``."""
    path = Path(path)
    if path.exists() and not force:
        raise InputError("already exists; pass --force to overwrite it", source=str(path))
    if path.is_dir():
        raise InputError("is a directory, expected a file name", source=str(path))
    folder = path.parent if str(path.parent) else Path(".")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
        try:
            with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
                fh.write(text)
            os.replace(tmp, path)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    except OSError as exc:
        raise InputError(f"cannot write file ({exc.strerror or exc})", source=str(path)) from None
    return path
