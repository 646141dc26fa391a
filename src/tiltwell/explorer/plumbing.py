"""The widget-callback plumbing that the explorer and its coil-array part share.

- :class:`Callbacks`: every widget callback runs through :meth:`Callbacks.guard`, so none
  ever raises into ipywidgets (a TiltwellError becomes a message, anything else is
  recorded as a bug), and control changes made in code inside :meth:`Callbacks.quieted`
  do not call the value handlers (one redraw after several changes, no echo loops).
- :func:`bokeh_views` and :func:`reserialise`: the jupyter_bokeh views of a part's
  figures, and bringing them up to date before they are displayed.
- :func:`start`: a background task with a ticking progress line, its button disabled
  while it runs.
- :func:`display_with_bokehjs`: show a widget holding Bokeh views in a notebook.
"""

from __future__ import annotations

import contextlib
import html
from collections.abc import Callable, Iterator, Mapping
from concurrent.futures import Future
from typing import Any, TypeVar

import ipywidgets as widgets
from bokeh.models import BasicTickFormatter, LinearAxis
from jupyter_bokeh import BokehModel

from .tasks import Tasks
from .._base.validation import TiltwellError

__all__ = ["Callbacks", "bokeh_views", "display_with_bokehjs", "reserialise", "start"]

_T = TypeVar("_T")


class Callbacks:
    """The callbacks of one part of the explorer, wired so that none ever raises.

    Parameters
    ----------
    on_error : callable
        ``on_error(text)`` shows the message of a TiltwellError (HTML-escaped) to the user.
    unexpected : callable
        ``unexpected(error)`` records any other exception (a bug).
    """

    def __init__(self, on_error: Callable[[str], None], unexpected: Callable[[Exception], None]) -> None:
        self._on_error = on_error
        self._unexpected = unexpected
        self._depth = 0

    @property
    def quiet(self) -> bool:
        """Whether a :meth:`quieted` block is running."""
        return self._depth > 0

    @contextlib.contextmanager
    def quieted(self) -> Iterator[None]:
        """Within it, value changes do not call the handlers given to :meth:`observe`
        (unless they asked for every change); blocks nest."""
        self._depth += 1
        try:
            yield
        finally:
            self._depth -= 1

    def guard(self, action: Callable[[], object]) -> None:
        """Run ``action()``; a TiltwellError goes to ``on_error``, any other exception to
        ``unexpected``. Nothing escapes."""
        try:
            action()
        except TiltwellError as error:
            self._on_error(html.escape(str(error)))
        except Exception as error:  # noqa: BLE001 - a widget callback must never raise
            self._unexpected(error)

    def observe(self, widget: widgets.Widget, handler: Callable[[dict[str, Any]], object], *,
                names: str = "value", even_when_quiet: bool = False) -> None:
        """Call ``handler(change)``, guarded, when the trait ``names`` of ``widget``
        changes; not inside :meth:`quieted` unless ``even_when_quiet``."""
        def call(change: dict[str, Any]) -> None:
            if even_when_quiet or not self.quiet:
                self.guard(lambda: handler(change))

        widget.observe(call, names=names)

    def on_click(self, button: widgets.Button, action: Callable[[], object]) -> None:
        """Call ``action()``, guarded, when ``button`` is clicked (its return value, e.g.
        the future of a background task, is not needed there)."""
        button.on_click(lambda _: self.guard(action))


#: The one tick rule of every explorer axis: plain numbers from 1e-3 up to 1e6 (decelerations
#: read 20000, not 2.0e+4), powers of ten beyond, so the same value reads the same whatever
#: the species or the figure.
TICK_RULE: dict[str, Any] = {"use_scientific": True, "power_limit_high": 6, "power_limit_low": -3}


def bokeh_views(figures: Mapping[str, Any]) -> dict[str, BokehModel]:
    """One jupyter_bokeh view (an ipywidget) per figure, keyed alike; every linear axis of
    every figure gets the :data:`TICK_RULE` formatter first."""
    for figure in figures.values():
        for axis in (*figure.left, *figure.right, *figure.below, *figure.above):
            if isinstance(axis, LinearAxis):
                axis.formatter = BasicTickFormatter(**TICK_RULE)
    return {name: BokehModel(figure) for name, figure in figures.items()}


def reserialise(views: Mapping[str, BokehModel], figures: Mapping[str, Any]) -> None:
    """Bring each view up to date with its figure: a jupyter_bokeh view draws the document
    as it was serialised, and changes made before any view existed reach no view."""
    for name, view in views.items():
        view.update_from_model(figures[name])


def start(tasks: Tasks, name: str, compute: Callable[[], _T], apply: Callable[[_T], None],
          current: Callable[[], bool], *, text: str, show: Callable[[str], None],
          button: widgets.Button) -> Future[_T | None]:
    """:meth:`Tasks.run` of ``compute`` and ``apply`` (if ``current()`` still holds), with
    ``text`` and the elapsed time shown through ``show`` (:meth:`Tasks.ticking`) and
    ``button`` disabled until ``compute`` has ended. Returns the task's future."""
    def busy(on: bool) -> None:
        button.disabled = on

    stop = tasks.ticking(text, show, busy)

    def timed() -> _T:
        try:
            return compute()
        finally:
            stop()

    return tasks.run(name, timed, apply, current)


def display_with_bokehjs(widget: widgets.Widget) -> None:
    """Publish BokehJS (inline, from the installed bokeh: no network) for the views inside
    ``widget``, then display it. jupyter_bokeh's views need BokehJS in the page
    (bokeh/jupyter_bokeh issue 150); publishing it with each display keeps a re-opened
    notebook working."""
    from bokeh.io.notebook import load_notebook
    from bokeh.resources import INLINE
    from IPython.display import display

    load_notebook(resources=INLINE, hide_banner=True)
    display(widget)
