"""Output paths of the ``tiltwell`` commands, checked before anything is computed or written:
an output that is one of the inputs (the scenario, a trace) or another output of the same
call is refused, so that no command can overwrite what it reads.

Paths are compared resolved (:func:`os.path.realpath`, so a symlink and ``a/../b`` count)
and, where both exist, by :func:`os.path.samefile` (so a hard link counts too).
"""

from __future__ import annotations

import os
from collections.abc import Collection, Sequence
from pathlib import Path

from .._base.validation import TiltwellError

__all__ = ["refuse_clashes", "refuse_in_folder", "same_file"]

#: An input or an output: what names it on the command line (``"--timing"``, ``"the
#: scenario"``) and its path, or None when it is not given.
Named = tuple[str, "str | os.PathLike[str] | None"]


def same_file(first: str | os.PathLike[str], second: str | os.PathLike[str]) -> bool:
    """Whether two paths name the same file: equal resolved paths, or the same file on disk
    (a hard link) where both exist."""
    if os.path.realpath(first) == os.path.realpath(second):
        return True
    try:
        return os.path.samefile(first, second)
    except OSError:  # one of them does not exist (yet): then only the resolved names count
        return False


def refuse_clashes(inputs: Sequence[Named], outputs: Sequence[Named]) -> None:
    """Refuse, with one line naming both paths and the option, an output that is the same
    file as an input or as an earlier output of the same call; entries whose path is None
    are not given and are skipped."""
    given_outputs = [(what, path) for what, path in outputs if path is not None]
    for i, (what, path) in enumerate(given_outputs):
        for other, seen in [*((o, p) for o, p in inputs if p is not None), *given_outputs[:i]]:
            assert seen is not None
            if same_file(path, seen):
                raise TiltwellError(f"{what} {str(path)!r} is the same file as {other} {str(seen)!r}: it would be "
                                    "overwritten; give another path")


def refuse_in_folder(what: str, folder: str | os.PathLike[str] | None, names: Collection[str],
                     suffixes: Collection[str], inputs: Sequence[Named]) -> None:
    """Refuse an output ``folder`` (the option ``what``) into which the command writes files
    called one of ``names`` or ending in one of ``suffixes`` (e.g. ``".png"``), when an
    input would be one of them (also through a symlink or a hard link)."""
    if folder is None:
        return
    place = Path(folder)
    existing = [entry for entry in place.iterdir() if entry.suffix.lower() in suffixes] if place.is_dir() else []
    for other, path in inputs:
        if path is None:
            continue
        here = Path(os.path.realpath(path))
        clash = (any(same_file(place / name, path) for name in names)
                 or any(same_file(entry, path) for entry in existing))
        if clash or (here.suffix.lower() in suffixes and same_file(here.parent, place)):
            written = ", ".join([*names, *(f"*{suffix}" for suffix in suffixes)])
            raise TiltwellError(f"{what} {str(folder)!r} holds {other} {str(path)!r}, which the command would "
                                f"overwrite (it writes {written} there); give another folder")
