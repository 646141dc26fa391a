"""Atomic file writes, the only way tiltwell replaces a file (special files such as FIFOs are
written into, never replaced), and its one table layout.

:func:`write_table` writes every CSV table tiltwell makes (coil timing, coil waveforms,
sweeps) in one layout: three ``# `` comment lines (title, units, caution), one header row
``name [unit],...``, then the rows.
"""

from __future__ import annotations

import csv
import io
import numbers
import os
import re
import stat
import tempfile
import time
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

from .validation import TiltwellError

__all__ = ["STALE_AGE", "TABLE_COMMENT_LINES", "TABLE_UNITS", "WriteError", "atomic_write_bytes", "atomic_write_text",
           "make_folder", "table_text", "write_table"]


#: Age [s] above which a temporary file of our own pattern (``.NAME.<8 random>.tmp``
#: beside the target, left by a kill between the write and the rename) is removed by the
#: next write to the same target. A live write of another process finishes within
#: seconds, so its temporary file is never this old.
STALE_AGE = 60.0


class WriteError(TiltwellError, OSError):
    """A file could not be written: a TiltwellError whose one line names the user's path
    and the reason, and still an ``OSError`` for callers that catch those."""


def _write_error(name: str, error: OSError) -> WriteError:
    reason = error.strerror or str(error) or type(error).__name__
    return WriteError(f"cannot write {name!r}: {reason}")


def _remove_stale(target: Path) -> None:
    """Remove our own temporary files for ``target`` older than :data:`STALE_AGE`."""
    pattern = re.compile(re.escape(f".{target.name}.") + r"[a-z0-9_]{8}\.tmp")
    now = time.time()
    try:
        entries = [entry for entry in os.scandir(target.parent) if pattern.fullmatch(entry.name)]
        for entry in entries:
            if entry.is_file(follow_symlinks=False) and now - entry.stat(follow_symlinks=False).st_mtime > STALE_AGE:
                os.unlink(entry.path)
    except OSError:  # cleaning is a courtesy: the write itself reports real trouble
        pass


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` and return ``Path(path)``.

    A regular file (or a new one) is written through a temporary file in the same folder,
    flushed to disk, then renamed over the target: a crash or an error leaves the old file
    whole. The new file keeps the mode of the one it replaces, or gets rw-r--r-- (mkstemp
    alone would make it private). A symlink is followed: its target is replaced this way
    and the link stays a link. A character device or a FIFO is opened and written plainly
    (no temporary file, no rename); a folder or any other special file is refused. A stale
    temporary file of ours beside the target (older than :data:`STALE_AGE`, so never the
    live one of a concurrent write) is removed.

    Raises
    ------
    TiltwellError
        An empty or blank name, a folder or special target, a missing folder; an
        ``OSError`` while writing becomes a :class:`WriteError` naming ``path`` (never the
        temporary file) and the reason.
    """
    name = str(path)
    target = Path(path)
    if not name.strip() or name.endswith(os.sep) or (target.name != "" and not target.name.strip()):
        raise TiltwellError(f"cannot write {name!r}: not a file name (empty, blank or ending in {os.sep})")
    try:
        info: os.stat_result | None = os.stat(target)  # follows a symlink to its target
    except FileNotFoundError:
        info = None
    except OSError as error:
        raise _write_error(name, error) from None
    if info is not None and not stat.S_ISREG(info.st_mode):
        if not (stat.S_ISCHR(info.st_mode) or stat.S_ISFIFO(info.st_mode)):
            kind = "a folder" if stat.S_ISDIR(info.st_mode) else "a special file (not a regular file, FIFO or device)"
            raise TiltwellError(f"cannot write {name!r}: it is {kind}; give a file name")
        try:
            with open(target, "wb") as stream:
                stream.write(data)
        except OSError as error:
            raise _write_error(name, error) from None
        return target
    real = Path(os.path.realpath(target))
    if not real.parent.is_dir():
        raise TiltwellError(f"path must be in an existing folder; got {name!r}")
    _remove_stale(real)
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{real.name}.", suffix=".tmp", dir=real.parent)
    except OSError as error:
        raise _write_error(name, error) from None
    try:
        os.fchmod(handle, info.st_mode & 0o777 if info is not None else 0o644)
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, real)
    except BaseException as error:
        Path(temporary).unlink(missing_ok=True)
        if isinstance(error, OSError):
            raise _write_error(name, error) from None
        raise
    return target


def make_folder(path: str | os.PathLike[str], what: str = "folder") -> Path:
    """Create the folder ``path`` and its parents if missing and return it; an empty or
    blank name, a file there, or an ``OSError`` (no permission, a name too long) is one
    TiltwellError line naming ``what`` and the path."""
    name = str(path)
    folder = Path(path)
    if not name.strip():
        raise TiltwellError(f"{what} must name a folder; got {name!r}")
    try:
        if folder.exists() and not folder.is_dir():
            raise TiltwellError(f"{what} must be a folder; {name!r} is a file")
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise WriteError(f"cannot make the {what} {name!r}: {error.strerror or error}") from None
    return folder


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """:func:`atomic_write_bytes` of ``text`` encoded as UTF-8 (newlines as given)."""
    return atomic_write_bytes(path, text.encode("utf-8"))


#: Comment lines above the header row of every tiltwell table: the title, the units and
#: the caution (or, for a table that sizes no hardware, a note on its rows).
TABLE_COMMENT_LINES = 3

#: The units line of every table: each column's unit is in its header cell.
TABLE_UNITS = ("units: SI; each column's unit in [brackets] after its name in the header row "
               "([1]: a number or a ratio)")


def _cell(value: object) -> str:
    """One CSV cell: an int as is, a real number in its shortest round-trip form, None empty."""
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value)).lower()
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if isinstance(value, numbers.Real):
        return repr(float(value))
    return str(value)


def table_text(title: str, columns: Sequence[tuple[str, str]], rows: Iterable[Sequence[object]], *,
               caution: str) -> str:
    """A table in tiltwell's one CSV layout, as text.

    Parameters
    ----------
    title : str
        What the table holds, one line.
    columns : sequence of (name, unit)
        Column names (no commas) and their SI units ("1" for numbers and ratios); the
        header cell is ``name [unit]``.
    rows : iterable of sequences
        One value per column: ints, real numbers (written as Python's shortest
        round-trip repr, so the file reads back bit for bit), strings, or None (an empty
        cell).
    caution : str
        One line: the electrical caution for tables that size hardware, otherwise a note
        on what a row is.

    Returns
    -------
    str
        :data:`TABLE_COMMENT_LINES` comment lines starting ``# `` (title, :data:`TABLE_UNITS`,
        caution), then one header row ``name [unit],...``, then the rows; newline-ended
        lines. Because the comment block always has three lines,
        ``numpy.genfromtxt(path, delimiter=",", skip_header=3, names=True)`` reads a file
        with named columns (``position [m]`` becomes ``position_m``, empty cells NaN) and
        ``numpy.loadtxt(path, delimiter=",", skiprows=4)`` reads a table without empty
        cells as a plain array. (``genfromtxt(..., comments="#", names=True)`` does not
        work: it takes its names from the first comment line.)

    >>> print(table_text("demo", [("time", "s"), ("coil_0", "A")], [(0.0, 1.5)], caution="a note"), end="")
    # demo
    # units: SI; each column's unit in [brackets] after its name in the header row ([1]: a number or a ratio)
    # a note
    time [s],coil_0 [A]
    0.0,1.5
    """
    for what, line in (("title", title), ("caution", caution)):
        if not isinstance(line, str) or "\n" in line or "\r" in line:
            raise TiltwellError(f"{what} must be one line of text; got {line!r}")
    names = [name for name, _ in columns]
    if any("," in name or "[" in name or not name for name, _ in columns):
        raise TiltwellError(f"columns must have non-empty names without ',' or '['; got {names!r}")
    buffer = io.StringIO()
    for line in (title, TABLE_UNITS, caution):
        buffer.write(f"# {line}\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([f"{name} [{unit}]" for name, unit in columns])
    for row in rows:
        if len(row) != len(columns):
            raise TiltwellError(f"every row must have {len(columns)} values (one per column); got {len(row)}")
        writer.writerow([_cell(value) for value in row])
    return buffer.getvalue()


def write_table(path: str | os.PathLike[str], title: str, columns: Sequence[tuple[str, str]],
                rows: Iterable[Sequence[object]], *, caution: str) -> str:
    """Write :func:`table_text` of the arguments to ``path`` atomically
    (:func:`atomic_write_text`: on any error, a bad row included, the old file stays whole)
    and return the text."""
    text = table_text(title, columns, rows, caution=caution)
    atomic_write_text(path, text)
    return text
