"""Background work for the explorer: a small thread pool, a debounced trigger, and an
elapsed-time ticker, so the notebook stays responsive while heavy checks run.

A task computes in a worker thread and applies its result under the explorer's lock only
if the settings it was started for are still current; errors become messages, never
exceptions in a thread.
"""

from __future__ import annotations

import html
import logging
import threading
import time
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any, TypeVar

from .._base.validation import TiltwellError

__all__ = ["Tasks"]

_log = logging.getLogger("tiltwell.explorer")
_T = TypeVar("_T")


class Tasks:
    """Worker threads sharing one lock with the control thread.

    Parameters
    ----------
    lock : threading.RLock
        Held while a result is applied (the control thread holds it while it redraws).
    report : callable
        ``report(text)`` shows an outcome (HTML) to the user.
    unexpected : callable
        ``unexpected(error)`` records an error that is a bug.
    """

    def __init__(self, lock: threading.RLock, report: Callable[[str], None],
                 unexpected: Callable[[Exception], None]) -> None:
        self.lock = lock
        self._report = report
        self._unexpected = unexpected
        self._executor = ThreadPoolExecutor(max_workers=2, thread_name_prefix="tiltwell-explorer")
        self._futures: set[Future[Any]] = set()
        self._timer: threading.Timer | None = None
        self._due: Callable[[], None] | None = None
        self._due_lock = threading.Lock()

    def run(self, name: str, compute: Callable[[], _T], apply: Callable[[_T], None],
            current: Callable[[], bool]) -> Future[_T | None]:
        """``compute()`` in a worker, then ``apply(result)`` under the lock if ``current()``
        still holds (else the result is discarded, saying so through ``report``).

        Returns the task's future, at once: its result is what ``compute`` returned (also
        when it was discarded, not shown), or None when it raised (the error reported,
        never raised). ``future.result()`` waits for it; the shown state is updated by
        the time it returns.
        """
        def task() -> _T | None:
            try:
                result = compute()
            except TiltwellError as error:
                self._report(html.escape(f"{name}: {error}"))
                return None
            except Exception as error:  # noqa: BLE001 - reported, never raised in a thread
                self._unexpected(error)
                return None
            with self.lock:
                if not current():
                    self._report(html.escape(f"{name}: result discarded, the settings changed while it ran"))
                    return result
                try:
                    apply(result)
                except Exception as error:  # noqa: BLE001
                    self._unexpected(error)
            return result

        future = self._executor.submit(task)
        self._futures.add(future)
        future.add_done_callback(self._futures.discard)
        return future

    @staticmethod
    def finished(value: _T) -> Future[_T]:
        """A future that already holds ``value`` (an action that had nothing to start)."""
        future: Future[_T] = Future()
        future.set_result(value)
        return future

    def later(self, delay: float, due: Callable[[], None]) -> None:
        """Call ``due()`` from a timer thread after ``delay`` [s], unless called again first."""
        self.cancel()
        with self._due_lock:
            self._due = due
        self._timer = threading.Timer(delay, self._fire)
        self._timer.daemon = True
        self._timer.start()

    def _fire(self) -> None:
        with self._due_lock:
            due, self._due = self._due, None
        if due is not None:
            try:
                due()
            except Exception as error:  # noqa: BLE001
                self._unexpected(error)

    def cancel(self) -> None:
        """Drop a pending :meth:`later` call."""
        if self._timer is not None:
            self._timer.cancel()
        with self._due_lock:
            self._due = None

    def flush(self, timeout: float | None = None) -> None:
        """Make a pending :meth:`later` call now, then wait for every task, those started
        by a finishing task (the yield budget after the Monte-Carlo check) included."""
        if self._timer is not None:
            self._timer.cancel()
        self._fire()
        while pending := [future for future in list(self._futures) if not future.done()]:
            for future in pending:
                future.result(timeout)

    def ticking(self, text: str, show: Callable[[str], None], busy: Callable[[bool], None]) -> Callable[[], None]:
        """Show ``text`` and the elapsed time every half second until the returned
        function is called; ``busy(True/False)`` marks the start and the end."""
        done, start = threading.Event(), time.monotonic()
        busy(True)
        show(html.escape(f"{text}: started"))

        def tick() -> None:
            while not done.wait(0.5):
                show(html.escape(f"{text}: {time.monotonic() - start:.0f} s elapsed"))

        threading.Thread(target=tick, daemon=True).start()

        def stop() -> None:
            done.set()
            busy(False)
            show(html.escape(f"{text}: finished in {time.monotonic() - start:.1f} s"))

        return stop

    def shutdown(self) -> None:
        """Drop pending work and wait for running tasks to end."""
        self.cancel()
        self._executor.shutdown(wait=True, cancel_futures=True)
