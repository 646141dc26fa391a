"""Atomic file writes: the only way tiltwell replaces a file."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .validation import TiltwellError


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder, flushed to
    disk, then renamed over the target: a crash or an error leaves the old file whole and
    no temporary file behind. The new file keeps the mode of the one it replaces, or gets
    rw-r--r-- (mkstemp alone would make it private)."""
    target = Path(path)
    if not target.parent.is_dir():
        raise TiltwellError(f"path must be in an existing folder; got {str(path)!r}")
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        os.fchmod(handle, target.stat().st_mode & 0o777 if target.exists() else 0o644)
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """:func:`atomic_write_bytes` of ``text`` encoded as UTF-8 (newlines as given)."""
    return atomic_write_bytes(path, text.encode("utf-8"))
