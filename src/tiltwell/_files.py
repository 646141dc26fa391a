"""Atomic file writes: the only way tiltwell replaces a file."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ._validation import TiltwellError


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` to ``path`` through a temporary file in the same folder, flushed to
    disk, then renamed over the target: a crash or an error leaves the old file whole and
    no temporary file behind."""
    target = Path(path)
    if not target.parent.is_dir():
        raise TiltwellError(f"path must be in an existing folder; got {str(path)!r}")
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(handle, "w", encoding="utf-8", newline="") as stream:
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target
