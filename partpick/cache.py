"""A cache of computed tables in the user's cache folder, keyed by content.

Tables that depend only on part data (a limiter's harmonic-balance surface, say) are
the same on every run; computing them once per machine saves most of a search's time.
The folder is ``$PARTPICK_CACHE``, else ``$XDG_CACHE_HOME/partpick``, else
``~/.cache/partpick``. A key is the SHA-256 of the inputs' text form (never a file path),
so a changed catalog entry gets a new table. The cache is an optimisation only: a
folder that cannot be read or written, or a damaged entry, just means the table is
computed again.

Tables for the shipped demo parts come with the package (``partpick/tables``, written
by ``python -m partpick.circuits.limiter_surface CATALOG_DIR``), so a fresh install
searches at full speed; they are found by the same content key, and a test recomputes
one of them to catch a table gone stale.
"""

from __future__ import annotations

import hashlib
import os
import re
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["cache_dir", "shipped_dir", "content_key", "part_content", "load_arrays", "has_arrays", "store_arrays"]

_VERSION = "1"  # bump when a cached table's meaning changes


def cache_dir() -> Path:
    env = os.environ.get("PARTPICK_CACHE")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME")
    return (Path(base) if base else Path.home() / ".cache") / "partpick"


def shipped_dir() -> Path:
    """The tables that come with the package."""
    return Path(__file__).resolve().parent / "tables"


# a float in a repr: every number written with a point or an exponent
_FLOAT = re.compile(r"(?<![\w.])-?(?:\d+\.\d*|\.\d+|\d+(?=[eE]))(?:[eE][-+]?\d+)?")


def _canonical(text: str) -> str:
    """text with every float in it written to 12 significant digits: a grid made by
    numpy's exp and log (np.geomspace) differs in its last bit from one CPU's vector
    instructions to another's, and a key must not (the shipped tables were once found by
    no machine but the one that wrote them)."""
    return _FLOAT.sub(lambda m: format(float(m.group()), ".12g"), text)


def content_key(*parts) -> str:
    """A stable key for the given inputs: their repr (deterministic for frozen
    dataclasses and numbers), floats to 12 significant digits (see _canonical)."""
    text = _VERSION + "\x1f" + "\x1f".join(_canonical(repr(p)) for p in parts)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def part_content(record, ignore=()) -> tuple:
    """The fields of a catalog record that define the part (those that take part in its
    equality: not where it was read from), less the names in ``ignore`` (what a table
    does not depend on: names, prices, makers), for a key."""
    import dataclasses

    return tuple((f.name, getattr(record, f.name)) for f in dataclasses.fields(record)
                 if f.compare and f.name not in ignore)


def load_arrays(kind: str, key: str) -> dict[str, np.ndarray] | None:
    """The arrays stored under (kind, key) with the package or in the cache, or None."""
    for folder in _folders():
        try:
            with np.load(folder / kind / f"{key}.npz", allow_pickle=False) as data:
                return {name: data[name] for name in data.files}
        except (OSError, ValueError, EOFError):
            continue
    return None


def has_arrays(kind: str, key: str) -> bool:
    """Whether arrays are stored under (kind, key) with the package or in the cache (a
    look at the folders, nothing read)."""
    return any((folder / kind / f"{key}.npz").is_file() for folder in _folders())


def _folders() -> tuple[Path, Path]:
    """Where stored arrays are looked for, in order: the package's, then the cache."""
    return shipped_dir(), cache_dir()


def store_arrays(kind: str, key: str, arrays: dict[str, np.ndarray], root: Path | None = None,
                 compress: bool = True) -> None:
    """Store arrays under (kind, key) in the cache (or under root), atomically; silently
    skipped when the folder is not writable. ``compress``: False for a table read on
    every run whose decompression would cost about what making it does."""
    folder = (root or cache_dir()) / kind
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{key}.", suffix=".npz", dir=folder)
        try:
            with os.fdopen(fd, "wb") as fh:
                (np.savez_compressed if compress else np.savez)(fh, **arrays)
            os.replace(tmp, folder / f"{key}.npz")
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    except OSError:
        pass
