"""Atomic file writes, the only way tiltwell replaces a file, and its one table layout.

:func:`write_table` writes every CSV table tiltwell makes (coil timing, coil waveforms,
sweeps) in one layout: three ``# `` comment lines (title, units, caution), one header row
``name [unit],...``, then the rows.
"""

from __future__ import annotations

import csv
import io
import numbers
import os
import tempfile
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

from .validation import TiltwellError

__all__ = ["TABLE_COMMENT_LINES", "TABLE_UNITS", "atomic_write_bytes", "atomic_write_text", "table_text", "write_table"]


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
