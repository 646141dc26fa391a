"""Writing figures to files: PDF, SVG or PNG, atomically and byte for byte reproducible
(no dates in the metadata), one figure or a named set into a folder. :mod:`tiltwell.figures`
re-exports :func:`save` and :func:`write_figures`."""

from __future__ import annotations

import io
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from matplotlib.figure import Figure

from .._base.files import atomic_write_bytes
from .._base.resources import BYTES_PER_PIXEL, check_memory
from .._base.validation import TiltwellError, as_scalar
from .style import style_context

__all__ = ["CAUTION_GID", "DETAILS_GID", "caution_of", "check_export", "details_of", "export_formats", "save",
           "write_figures"]

#: gid of the text artist by which a figure that sizes hardware carries the electrical caution.
CAUTION_GID = "electrical-caution"
#: The metadata field that takes the caution, by format (PDF's document info, Dublin Core in
#: SVG, a PNG text chunk).
_CAUTION_FIELD = {"pdf": "Subject", "svg": "Description", "png": "Description"}
#: gid of the (hidden) text artist by which a figure carries how it was computed (the
#: integrator, a time step): kept out of the title, written into the file's metadata.
DETAILS_GID = "computation-details"
#: The metadata field that takes the details, by format.
_DETAILS_FIELD = {"pdf": "Keywords", "svg": "Keywords", "png": "Comment"}

#: Suffix -> matplotlib format, and the metadata that would make files differ run to run.
_FORMATS: dict[str, tuple[str, dict[str, Any]]] = {
    ".pdf": ("pdf", {"CreationDate": None}), ".svg": ("svg", {"Date": None}), ".png": ("png", {})}
#: Largest figure side [in] and resolution [1/in] accepted.
MAX_SIZE = 100.0
MAX_DPI = 2400.0
#: Most pixels along one side of a rendered figure (matplotlib's Agg refuses 2**16).
MAX_PIXELS = 2**16 - 1


def save(figure: Figure, path: str | os.PathLike[str], *, width: float | None = None, height: float | None = None,
         dpi: float = 300) -> Path:
    """Write ``figure`` to ``path`` as PDF, SVG or PNG (chosen by the suffix), atomically.

    Parameters
    ----------
    width, height : float, optional
        Size [in], in (0, 100]; by default the figure's own. The figure gets its size back
        afterwards. A PNG is ``int(width * dpi)`` x ``int(height * dpi)`` pixels.
    dpi : float
        Dots per inch, in (0, 2400]: the PNG's resolution and that of rasterised parts of
        PDF and SVG (dense particle clouds).

    Returns the ``path``, replaced only once the whole file is written. A figure that sizes
    hardware carries the electrical caution (:func:`caution_of`); it goes into the file's
    metadata (PDF Subject, SVG Description, PNG Description).
    """
    if not isinstance(figure, Figure):
        raise TiltwellError(f"figure must be a matplotlib Figure; got {type(figure).__name__}")
    target = Path(path)
    if target.suffix.lower() not in _FORMATS:
        raise TiltwellError(f"path must end in .pdf, .svg or .png; got {str(path)!r}")
    if not target.parent.is_dir():
        raise TiltwellError(f"path must be in an existing folder; got {str(path)!r}")
    kind, metadata = _FORMATS[target.suffix.lower()]
    caution = caution_of(figure)
    if caution is not None:
        metadata = {**metadata, _CAUTION_FIELD[kind]: caution}
    details = details_of(figure)
    if details is not None:
        metadata = {**metadata, _DETAILS_FIELD[kind]: details}
    old = (float(figure.get_size_inches()[0]), float(figure.get_size_inches()[1]))
    size = (
        old[0] if width is None else as_scalar(width, "width", "in", low=0.0, high=MAX_SIZE, low_open=True),
        old[1] if height is None else as_scalar(height, "height", "in", low=0.0, high=MAX_SIZE, low_open=True),
    )
    dots = as_scalar(dpi, "dpi", "1/in", low=0.0, high=MAX_DPI, low_open=True)
    wide, high = int(size[0] * dots), int(size[1] * dots)
    if max(wide, high) > MAX_PIXELS:
        raise TiltwellError(f"a figure of {wide} x {high} pixels is refused: at most {MAX_PIXELS} pixels a side "
                            f"(matplotlib's own limit); width x dpi and height x dpi are {wide} and {high}")
    check_memory(wide * high * BYTES_PER_PIXEL, f"a figure of {wide} x {high} pixels", "lower the dpi or the size")
    buffer = io.BytesIO()
    try:
        figure.set_size_inches(size)
        with style_context():
            figure.savefig(buffer, format=kind, dpi=dots, metadata=metadata)
    finally:
        figure.set_size_inches(old)
    return atomic_write_bytes(target, buffer.getvalue())


def caution_of(figure: Figure) -> str | None:
    """The caution a figure carries (the text of its artist with gid :data:`CAUTION_GID`,
    drawn or not), or None; :func:`save` writes it into the file's metadata."""
    found = figure.findobj(lambda artist: artist.get_gid() == CAUTION_GID)
    texts = [artist.get_text() for artist in found if hasattr(artist, "get_text")]
    return texts[0] if texts else None


def details_of(figure: Figure) -> str | None:
    """How a figure was computed (the text of its artist with gid :data:`DETAILS_GID`), or
    None; :func:`save` writes it into the file's metadata."""
    found = figure.findobj(lambda artist: artist.get_gid() == DETAILS_GID)
    texts = [artist.get_text() for artist in found if hasattr(artist, "get_text")]
    return texts[0] if texts else None


def export_formats(formats: Any) -> tuple[str, ...]:
    """The file formats asked for, checked: a name or a non-empty sequence of names from
    ``pdf``, ``svg``, ``png``; duplicates dropped, order kept."""
    kinds = (formats,) if isinstance(formats, str) else tuple(formats)
    allowed = [suffix[1:] for suffix in _FORMATS]
    if not kinds or any(kind not in allowed for kind in kinds):
        raise TiltwellError(f"formats must be a non-empty list of {', '.join(allowed)}; got {formats!r}")
    return tuple(dict.fromkeys(kinds))


def check_export(out: str | os.PathLike[str], *, formats: Any = ("pdf", "svg", "png"), width: float = 6.0,
                 height: float = 4.0, dpi: float = 300) -> tuple[Path, tuple[str, ...]]:
    """Check the options of :func:`write_figures` before anything is computed or created.

    Returns the folder ``out`` (not created here; it must not be a file) and the formats of
    :func:`export_formats`; ``width``, ``height`` [in] in (0, 100], ``dpi`` [1/in] in (0, 2400].
    """
    kinds = export_formats(formats)
    for value, name in ((width, "width"), (height, "height")):
        as_scalar(value, name, "in", low=0.0, high=MAX_SIZE, low_open=True)
    as_scalar(dpi, "dpi", "1/in", low=0.0, high=MAX_DPI, low_open=True)
    folder = Path(out)
    if folder.exists() and not folder.is_dir():
        raise TiltwellError(f"out must be a folder; got the file {str(out)!r}")
    return folder, kinds


def write_figures(drawings: Mapping[str, Figure], out: str | os.PathLike[str], *,
                  formats: Any = ("pdf", "svg", "png"), width: float = 6.0, height: float = 4.0,
                  dpi: float = 300) -> list[Path]:
    """Save each named figure as ``out/<name>.<format>`` for every one of ``formats``.

    The folder ``out`` is created if missing; the options are checked first
    (:func:`check_export`) and passed to :func:`save`. Returns the written paths, figure
    by figure, in the order of ``drawings`` and then of ``formats``.
    """
    folder, kinds = check_export(out, formats=formats, width=width, height=height, dpi=dpi)
    folder.mkdir(parents=True, exist_ok=True)
    return [save(figure, folder / f"{name}.{kind}", width=width, height=height, dpi=dpi)
            for name, figure in drawings.items() for kind in kinds]
