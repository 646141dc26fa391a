"""The results file of a design search (:mod:`tiltwell.workflows.search`): JSON lines that
survive a kill at any instant.

Line 1 is the header: what the search is (the scenario text and its SHA-256, the varied
keys, every point, the length limit). Every further line is one finished point, written
in one ``os.write`` on an ``O_APPEND`` descriptor and flushed to disk (``fsync``), so a line
is whole or absent; only the last line can be cut short, and reopening drops it.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from .._base.files import atomic_write_bytes
from .._base.validation import TiltwellError

__all__ = ["STORE_FORMAT", "SearchStore", "read_store"]

#: First field of a store's header line: what the file is, and its layout version.
STORE_FORMAT = "tiltwell-search-store-1"


def _line(entry: Mapping[str, Any]) -> bytes:
    return (json.dumps(entry, allow_nan=False, separators=(",", ":")) + "\n").encode()


class SearchStore:
    """The results file of a search: JSON lines, a header line then one line per finished
    point (``{"index": i, "row": {...}}`` or ``{"index": i, "error": "..."}``).

    :meth:`start` creates the file with its header, or reopens one written by the same
    search (same scenario text, keys, points and length limit; anything else is refused so a
    results file is never mixed); a last line cut short by a kill is dropped (the file is
    truncated back to its last whole line) and that point runs again. :meth:`append` adds
    one line in one ``os.write`` on an ``O_APPEND`` descriptor and flushes it to disk, so a
    line is whole or absent.
    """

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = Path(path)
        self._fd: int | None = None

    def start(self, header: Mapping[str, Any]) -> dict[int, dict[str, Any]]:
        """Open the store for ``header``'s search and return its finished entries by index."""
        if not self.path.parent.is_dir():
            raise TiltwellError(f"the results file must be in an existing folder; got {str(self.path)!r}")
        if not self.path.exists() or self.path.stat().st_size == 0:
            atomic_write_bytes(self.path, _line(header))
            done: dict[int, dict[str, Any]] = {}
        else:
            stored, done, whole = read_store(self.path)
            if {k: stored.get(k) for k in header} != dict(header):
                raise TiltwellError(f"{self.path} holds another search (a different scenario, keys, points or length "
                                    "limit); give another results path, or delete it to start again")
            if whole < self.path.stat().st_size:
                os.truncate(self.path, whole)
        self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND)
        return done

    def append(self, index: int, row: Mapping[str, Any] | None = None, error: str | None = None) -> None:
        """Add the finished point ``index``: its row, or the error that stopped it."""
        if self._fd is None:
            raise TiltwellError("the store is not started")
        entry = {"index": index, "row": dict(row or {})} if error is None else {"index": index, "error": error}
        os.write(self._fd, _line(entry))
        os.fsync(self._fd)

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None


def read_store(path: Path) -> tuple[dict[str, Any], dict[int, dict[str, Any]], int]:
    """Header, finished entries by index, and the byte length of the whole lines."""
    data = path.read_bytes()
    whole = data.rfind(b"\n") + 1
    lines = data[:whole].split(b"\n")[:-1]
    try:
        header = json.loads(lines[0]) if lines else None
    except ValueError:
        header = None
    if not isinstance(header, dict) or header.get("format") != STORE_FORMAT:
        raise TiltwellError(f"{path} is not a tiltwell search results file (its first line is not a search header)")
    done: dict[int, dict[str, Any]] = {}
    for number, line in enumerate(lines[1:], start=2):
        try:
            entry = json.loads(line)
            done[int(entry["index"])] = entry
        except (ValueError, KeyError, TypeError):
            raise TiltwellError(f"{path}: line {number} is not a finished point; the file was changed by hand") from None
    return header, done, whole
